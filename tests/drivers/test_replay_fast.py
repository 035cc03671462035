"""The fast path against the per-step core: identical runs on random logs.

Every test replays the same log twice: step by step with the core at every
evaluation (:func:`replay_evaluations`, the reference) and by the fast path
(:func:`replay_fast`), and compares the runs in full: zone, start, end, number
of evaluations, the complete first decision (reason and facts included), its
trigger and every event. The evaluation plans are compared too: the daemon's
urgent rule applied sample by sample against the vectorised one.

The logs (``test_replay_support.random_log``) have gaps, dropouts that go
stale, alarms, rain, wind around every limit, heating, actuator feedback,
samples off the tick grid, and run over the nights of the daylight saving
changes in Europe/Berlin and America/New_York. Overrides are not in logs;
they are in the recording tests (``test_replay_recording.py``).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from ventsup.config.load import load_config
from ventsup.config.model import SiteConfig
from ventsup.drivers.replay import (
    Evaluation,
    Run,
    evaluation_plan,
    replay_evaluations,
    runs_from_decisions,
)
from ventsup.drivers.replay_fast import (
    ZonePlan,
    plan_from_evaluations,
    plan_zones,
    replay_fast,
)
from ventsup.edges.logs import PointLog, read_log

from .test_replay_support import DST_NIGHTS, epoch, random_log, site

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "config" / "demo-site.yaml"
DEMO_IP = REPO / "config" / "demo-site-ip.yaml"
DEMO_DAY = REPO / "ventsup" / "data" / "demo-day.csv"


def reference(
    config: SiteConfig, log: PointLog, start: float, end: float, step: float
) -> tuple[list[Evaluation], list[Run]]:
    samples = log.samples()
    plan = evaluation_plan(config, samples, start, end, step)
    return plan, runs_from_decisions(config, replay_evaluations(config, samples, plan), end)


def fast(
    config: SiteConfig, log: PointLog, start: float, end: float, step: float, jobs: int = 1
) -> tuple[dict[str, ZonePlan], list[Run]]:
    plans = plan_zones(config, log, start, end, step)
    results = replay_fast(config, log, plans, end, jobs=jobs)
    return plans, [run for result in results for run in result.runs]


def same_plans(config: SiteConfig, plan: list[Evaluation], plans: dict[str, ZonePlan]) -> None:
    for zone in config.zones:
        theirs = [(e.t, e.trigger) for e in plan if e.zone == zone]
        ours = [(e.t, e.trigger) for e in plans[zone].evaluations()]
        assert ours == theirs, f"zone {zone}: the vectorised plan differs"


def same_runs(expected: list[Run], got: list[Run]) -> None:
    assert len(got) == len(expected), f"{len(got)} runs, the reference has {len(expected)}"
    for want, have in zip(expected, got, strict=True):
        assert have == want, (
            f"first difference in zone {want.zone} at t={want.start}:\n"
            f"reference: {want.evaluations} x {want.decision.mode} {want.decision.targets} "
            f"{want.decision.reason}\nfast path: {have.evaluations} x {have.decision.mode} "
            f"{have.decision.targets} {have.decision.reason}"
        )


def check(config: SiteConfig, log: PointLog, start: float, end: float, step: float) -> list[Run]:
    plan, expected = reference(config, log, start, end, step)
    plans, got = fast(config, log, start, end, step)
    same_plans(config, plan, plans)
    same_runs(expected, got)
    return got


# --------------------------------------------------------------------------- random logs


@settings(max_examples=14)
@given(
    night=st.sampled_from(DST_NIGHTS),
    aggregate=st.sampled_from(["max", "mean", "min", "hall_t2"]),
    dew=st.booleans(),
    seed=st.integers(0, 2**32 - 1),
    dt=st.sampled_from([20, 60, 120, 300]),
    step=st.sampled_from([30.0, 60.0, 90.0, 300.0]),
    offset=st.integers(0, 299),
)
def test_identical_runs_over_the_daylight_saving_nights(
    night: tuple[str, tuple[int, int, int]],
    aggregate: str,
    dew: bool,
    seed: int,
    dt: int,
    step: float,
    offset: int,
) -> None:
    tz, day = night
    config = site(tz, aggregate, dew)
    midnight = epoch(tz, *day)
    log = PointLog.from_samples(
        random_log(config, np.random.default_rng(seed), midnight - 600, 6, dt), config
    )
    start = midnight + offset
    check(config, log, start, start + 5 * 3600, step)


@settings(max_examples=14)
@given(
    tz=st.sampled_from(["Europe/Berlin", "America/New_York", "America/Chicago"]),
    day=st.integers(0, 364),
    hour=st.integers(0, 23),
    aggregate=st.sampled_from(["max", "mean", "min", "hall_t2"]),
    dew=st.booleans(),
    seed=st.integers(0, 2**32 - 1),
    dt=st.sampled_from([15, 60, 180]),
    step=st.sampled_from([30.0, 60.0, 120.0]),
)
def test_identical_runs_on_any_day(
    tz: str, day: int, hour: int, aggregate: str, dew: bool, seed: int, dt: int, step: float
) -> None:
    config = site(tz, aggregate, dew)
    start = epoch(tz, 2024, 1, 1) + day * 86400.0 + hour * 3600.0
    log = PointLog.from_samples(
        random_log(config, np.random.default_rng(seed), start - 900, 4, dt), config
    )
    check(config, log, start, start + 3.5 * 3600, step)


def test_the_fast_path_skips_most_evaluations() -> None:
    config = site("Europe/Berlin", "max", True)
    start = epoch("Europe/Berlin", 2024, 6, 3, 6)
    log = PointLog.from_samples(
        random_log(config, np.random.default_rng(7), start - 900, 8, 60), config
    )
    plans = plan_zones(config, log, start, start + 8 * 3600, 60.0)
    results = replay_fast(config, log, plans, start + 8 * 3600)
    evaluations = sum(r.evaluations for r in results)
    decisions = sum(r.decisions for r in results)
    assert evaluations == sum(len(p) for p in plans.values())
    assert decisions < evaluations / 2


# --------------------------------------------------------------------------- the demo day


def test_identical_runs_on_the_bundled_demo_day() -> None:
    config = load_config(DEMO)
    log = read_log(DEMO_DAY, config)
    runs = check(config, log, log.first or 0.0, (log.last or 0.0) + 300.0, 60.0)
    assert {run.zone for run in runs} == set(config.zones)
    assert any(run.trigger.startswith("input:") for run in runs)


def test_identical_runs_on_the_demo_day_in_ip_units_with_another_step() -> None:
    config = load_config(DEMO_IP)
    log = read_log(DEMO_DAY, config)
    check(config, log, (log.first or 0.0) + 17.0, (log.last or 0.0), 45.0)


def test_two_jobs_give_the_runs_of_one() -> None:
    config = load_config(DEMO)
    log = read_log(DEMO_DAY, config)
    start, end = log.first or 0.0, (log.last or 0.0) + 300.0
    _, one = fast(config, log, start, end, 60.0, jobs=1)
    _, two = fast(config, log, start, end, 60.0, jobs=2)
    assert two == one


def test_explicit_evaluations_replay_alike() -> None:
    """A plan from explicit evaluations (as a recording gives) at odd, repeated times."""
    config = load_config(DEMO)
    log = read_log(DEMO_DAY, config)
    start = log.first or 0.0
    rng = np.random.default_rng(3)
    times = np.sort(start + rng.uniform(0, 86000, 900))
    times = np.round(times, 3)
    evaluations = [
        Evaluation(float(t), zone, "tick") for t in np.repeat(times, 2) for zone in config.zones
    ]
    samples = log.samples()
    end = float(times[-1]) + 60.0
    expected = runs_from_decisions(config, replay_evaluations(config, samples, evaluations), end)
    plans = plan_from_evaluations(config, evaluations)
    got = [run for r in replay_fast(config, log, plans, end) for run in r.runs]
    same_runs(expected, got)
