"""The recording round trip: a replay of a closed-loop run's own ledger gives its decisions.

The daemon is the real command, ``ventsup run SITE --sim-clock``, in a process
of its own; the broker a real mosquitto (``mosquitto_module``); the simulator
:func:`simulator.loop.run` with :class:`simulator.bridge.MqttController`, in
lock-step with the daemon. Nothing is mocked and nothing is timed: every wait
is the bridge's wait for the daemon's acknowledgement, with a timeout that
fails loudly.

The scripted afternoon (demo building, Tuesday 2024-07-02, 18 °C outside, the
hall starting at 26 °C, calm from the west) brings free cooling from 13:00, a
gust from the north at 13:40 (the wind speed and its direction change in the
same step: two urgent points, one after the other), a squall at 14:00 (rain
and a gust from the south begin in the same step), a smoke drill in the
commons at 15:15 and the commons' temperature sensors dropping out at 16:15.

The daemon's ledger is then replayed by the per-step reference
(:func:`ventsup.drivers.replay.replay_evaluations`) and by the fast path
(:mod:`ventsup.drivers.replay_fast`), and every recorded decision must come
back exactly (the design's promise, ``/work/shared/DESIGN.md``: "Replaying a
recording of a live run must give the same decisions, step for step").
"""

from __future__ import annotations

import signal
import subprocess
import sys
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import pytest

from simulator.bridge import MqttController
from simulator.building import load_building
from simulator.loop import Result, run
from simulator.scenario import parse_scenario
from ventsup.cli import main
from ventsup.config import load_config
from ventsup.config.model import SiteConfig
from ventsup.core.state import Decision, Mode
from ventsup.drivers.recording import Recording, read_recording
from ventsup.drivers.replay import Run, replay_evaluations, run_key, runs_from_decisions
from ventsup.drivers.replay_fast import plan_from_evaluations, replay_fast

from .conftest import DEMO_BUILDING
from .test_bridge import epoch, write_site
from .test_loop import at, mild_afternoon

pytestmark = pytest.mark.broker

START, END = "2024-07-02 13:00", "2024-07-02 17:30"
STEP = 60.0
#: The longest the bridge waits for the daemon, at the start and per step [s].
WAIT = 60.0
SCENARIO = """
events:
  - gust: {at: "2024-07-02 13:40", duration: 10 min, speed: 9 m/s, direction: 0 deg}
  - rain: {at: "2024-07-02 14:00", duration: 30 min}
  - gust: {at: "2024-07-02 14:00", duration: 15 min, speed: 11 m/s, direction: 180 deg}
  - smoke_drill: {at: "2024-07-02 15:15", duration: 10 min, zone: commons}
  - sensor: {point: commons_t_l1, fault: dropout, at: "2024-07-02 16:15", duration: 45 min}
  - sensor: {point: commons_t_l3, fault: dropout, at: "2024-07-02 16:15", duration: 45 min}
  - sensor: {point: commons_t_l4, fault: dropout, at: "2024-07-02 16:15", duration: 45 min}
"""
DECISION_FIELDS = (
    *("t", "zone", "mode", "layer", "cause", "reason", "targets"),
    *("open_area", "windows_open", "limits", "facts", "events"),
)
LEDGER = Path("var") / "ventsup-quarry-lane-commons-sim.db"


@dataclass(frozen=True)
class ClosedLoop:
    """One closed-loop run against the daemon's command, and its ledger."""

    site_path: Path
    site: SiteConfig
    result: Result
    ledger: Path
    daemon_log: str


@pytest.fixture(scope="module")
def loop(mosquitto_module: Any, tmp_path_factory: pytest.TempPathFactory) -> ClosedLoop:
    directory = tmp_path_factory.mktemp("roundtrip")
    path = write_site(directory, mosquitto_module.port)
    config = load_config(path)
    building = load_building(DEMO_BUILDING, config)
    scenario = parse_scenario(SCENARIO, "roundtrip.yaml", config)
    log_path = directory / "daemon.log"
    with log_path.open("w", encoding="utf-8") as log:
        daemon = subprocess.Popen(
            [sys.executable, "-m", "ventsup.cli", "run", str(path), "--sim-clock"],
            cwd=directory,
            stdin=subprocess.DEVNULL,
            stdout=log,
            stderr=subprocess.STDOUT,
        )
        try:
            with MqttController(config, timeout=WAIT) as controller:
                result = run(
                    config,
                    building,
                    mild_afternoon(),
                    scenario,
                    START,
                    END,
                    STEP,
                    controller=controller,
                    initial_temperature=26.0,
                )
        finally:
            daemon.send_signal(signal.SIGTERM)
            try:
                code = daemon.wait(WAIT)
            except subprocess.TimeoutExpired:
                daemon.kill()
                code = daemon.wait(WAIT)
    daemon_log = log_path.read_text(encoding="utf-8")
    assert code == 0, daemon_log
    ledger = directory / LEDGER
    assert ledger.is_file(), daemon_log
    return ClosedLoop(path, config, result, ledger, daemon_log)


@pytest.fixture(scope="module")
def recording(loop: ClosedLoop) -> Recording:
    return read_recording(loop.ledger, loop.site)


# --------------------------------------------------------------------------- comparison


def describe(decision: Decision, trigger: str) -> str:
    return (
        f"{decision.zone} at t={decision.t!r} ({trigger}): {decision.mode.value}, layer "
        f"{int(decision.layer)}, cause {decision.cause.value}, targets {dict(decision.targets)}, "
        f"reason {decision.reason!r}"
    )


def first_difference(
    recorded: Sequence[tuple[Decision, str]], replayed: Sequence[tuple[Decision, str]]
) -> str | None:
    """None when both are equal record by record, else the first difference in words."""
    for index, (mine, theirs) in enumerate(zip(recorded, replayed, strict=False)):
        if mine == theirs:
            continue
        (a, trigger_a), (b, trigger_b) = mine, theirs
        fields = [name for name in DECISION_FIELDS if getattr(a, name) != getattr(b, name)]
        if trigger_a != trigger_b:
            fields.append("trigger")
        return (
            f"record {index} of {len(recorded)} differs in {', '.join(fields)}:\n"
            f"  recorded: {describe(a, trigger_a)}\n"
            f"  replayed: {describe(b, trigger_b)}"
        )
    if len(recorded) != len(replayed):
        return f"{len(recorded)} decisions recorded, {len(replayed)} replayed"
    return None


def outcomes(runs: Iterable[Run], times: dict[str, list[float]]) -> list[tuple[object, ...]]:
    """Each evaluation's (zone, time, outcome) expanded from runs, with the plan's times."""
    expanded: list[tuple[object, ...]] = []
    done: dict[str, int] = {}
    for run_ in runs:
        index = done.get(run_.zone, 0)
        for t in times[run_.zone][index : index + run_.evaluations]:
            expanded.append((run_.zone, t, run_key(run_.decision)))
        done[run_.zone] = index + run_.evaluations
    return expanded


# --------------------------------------------------------------------------- the run itself


def test_the_run_exercises_every_layer_of_the_scenario(
    loop: ClosedLoop, recording: Recording
) -> None:
    """Guards the round trip below against a quiet afternoon that would prove little."""
    assert recording.skipped == {}
    decisions = [d for d, _ in recording.recorded]
    assert {d.t for d in decisions} >= {epoch(START), epoch(END) - STEP}
    assert at(loop.result, "commons", "2024-07-02 13:30")["mode"] == Mode.FREE_COOLING.value
    causes = {(d.zone, d.mode, d.cause.value) for d in decisions}
    assert {
        ("commons", Mode.PROTECTED, "wind"),
        ("commons", Mode.PROTECTED, "rain"),
        ("commons", Mode.RELEASED, "smoke"),
        ("commons", Mode.FAULT, "fault"),
    } <= causes
    triggers = {trigger for _, trigger in recording.recorded}
    assert {
        "tick",
        "input:wind_speed",
        "input:wind_direction",
        "input:roof_rain",
        "input:commons_smoke",
    } <= triggers


def test_the_order_the_daemon_handled_messages_in_matters_in_this_run(
    loop: ClosedLoop, recording: Recording
) -> None:
    """Guards the round trip against a run where order cannot matter.

    At the squall (14:00) the wind speed is handled, and evaluated at once,
    before the rain of the same step: the daemon decided "wind" then. A
    replay that held every sample stamped at or before each decision (the
    rule for ledgers without a recording order) says "rain" there.
    """
    by_time = [replace(evaluation, held=None) for evaluation in recording.evaluations]
    replayed = replay_evaluations(loop.site, recording.log.samples(), by_time)
    squall = epoch("2024-07-02 14:00")
    differ = {
        (a.zone, trigger, a.cause.value, b.cause.value)
        for (a, trigger), (b, _) in zip(recording.recorded, replayed, strict=True)
        if run_key(a) != run_key(b) and a.t == squall
    }
    assert ("commons", "input:wind_speed", "wind", "rain") in differ


def test_the_reference_replay_gives_every_recorded_decision(
    loop: ClosedLoop, recording: Recording
) -> None:
    replayed = list(replay_evaluations(loop.site, recording.log.samples(), recording.evaluations))
    difference = first_difference(recording.recorded, replayed)
    assert difference is None, difference


def test_the_fast_path_gives_every_recorded_run(loop: ClosedLoop, recording: Recording) -> None:
    plans = plan_from_evaluations(loop.site, recording.evaluations)
    fast = [
        run_ for r in replay_fast(loop.site, recording.log, plans, recording.end) for run_ in r.runs
    ]
    # Every recorded decision's time and outcome (mode, layer, cause, targets, interlock,
    # open area), zone by zone, against the fast path's run that covers it.
    times = {zone: [float(t) for t in plan.times] for zone, plan in plans.items()}
    mine = [
        (d.zone, d.t, run_key(d))
        for zone in loop.site.zones
        for d, _ in recording.recorded
        if d.zone == zone
    ]
    theirs = outcomes(fast, times)
    for index, (a, b) in enumerate(zip(mine, theirs, strict=False)):
        assert a == b, f"evaluation {index}: recorded {a}, fast path {b}"
    assert len(mine) == len(theirs) == len(recording.evaluations)
    recorded = runs_from_decisions(loop.site, recording.recorded, recording.end)
    # Runs in full: each run's complete first decision (reason, limits, facts), trigger, events.
    for a, b in zip(recorded, fast, strict=True):
        assert a == b, f"recorded run {a}\nfast path run {b}"


def test_the_command_says_every_evaluation_matches(
    loop: ClosedLoop, recording: Recording, capsys: pytest.CaptureFixture[str]
) -> None:
    n = len(recording.evaluations)
    args = ["replay", str(loop.site_path), "--data", str(loop.ledger), "--no-report"]
    for extra in ([], ["--reference"]):  # the fast path (the default), then the per-step core
        code = main([*args, *extra])
        out = capsys.readouterr().out
        assert code == 0, out
        assert f"recording: the replay gives the recorded outcome at {n} of {n} evaluations" in out
