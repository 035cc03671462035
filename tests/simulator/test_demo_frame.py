"""`ventsup demo`'s report from the skipping closed loop equals the one from asking every step.

The demo (:func:`ventsup.demo.simulate`) lets the simulator skip the decision
core where its outcome is known and reads the report's table of decisions
from the run (:meth:`simulator.loop.Result.decisions_frame`). The reference
is the same closed loop with the core asked at every step and its decisions
tabulated by :func:`ventsup.core.figures.decisions_to_frame`. Both run here
over four days of the demo building (a day of warm-up and three reported
days) with a shower, a gust, a smoke drill, sensor dropouts, a stuck outdoor
sensor, a CO2 spike, a jammed vent and a crowd, and the report's figures
(:func:`ventsup.core.figures.compute_figures`) must come out equal.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from simulator.building import Building
from simulator.loop import Result
from simulator.scenario import (
    ActuatorJam,
    Gust,
    OccupancyChange,
    RainSpell,
    Scenario,
    SensorFault,
    SmokeDrill,
    Timing,
)
from simulator.weather import synthetic
from ventsup.config.model import SiteConfig
from ventsup.core.figures import Figures, compute_figures
from ventsup.demo import simulate

STEP = 60.0
HOUR = 3600.0
WARM_UP = pd.Timedelta(days=1)
# A warm week in June 2027 at Quarry Lane Commons (invented), as in the demo.
START = "2027-06-15"
DAYS = 3
TABLES = (
    "totals",
    "monthly",
    "daily",
    "hourly",
    "overheating",
    "episodes",
    "coverage",
    "outages",
    "moves",
    "wind",
    "outdoor",
)


def _scenario(warm_up: float) -> Scenario:
    """Events at hours after the first reported midnight (the run starts a day before)."""

    def at(first: float, last: float) -> Timing:
        return Timing(warm_up + first * HOUR, warm_up + last * HOUR, relative=True)

    return Scenario(
        name="three days with every kind of event",
        events=(
            RainSpell(at(13.3, 14.2)),
            OccupancyChange(at(15.0, 18.0), "commons", 250.0),
            SmokeDrill(at(24 + 10.5, 24 + 10.65), ("commons_smoke",)),
            Gust(at(24 + 14.0, 24 + 14.7), 14.0, 190.0),
            ActuatorJam(at(24 + 12.0, 48 + 6.0), "commons", "high_north", 0.3),
            SensorFault(at(24 + 16.0, 24 + 17.0), "outdoor_temp", "stick", None),
            SensorFault(at(48 + 8.0, 48 + 8.75), "classroom_temp", "dropout", None),
            SensorFault(at(48 + 11.0, 48 + 13.0), "commons_t_l4", "dropout", None),
            SensorFault(at(48 + 15.0, 48 + 15.5), "classroom_co2", "spike", 1500.0),
        ),
    )


@pytest.fixture(scope="module")
def runs(
    site: SiteConfig, building: Building
) -> tuple[tuple[Result, pd.DataFrame], tuple[Result, pd.DataFrame]]:
    tz = site.site.time_zone
    start = pd.Timestamp(START, tz=tz)
    first = start - WARM_UP
    end = start + pd.Timedelta(days=DAYS)
    weather = synthetic(
        41.0, -88.0, tz, first - pd.Timedelta(days=1), end + pd.Timedelta(days=1), seed=7
    )
    scenario = _scenario(WARM_UP.total_seconds())
    every = simulate(site, building, weather, scenario, first, end, STEP, every_step=True)
    skipping = simulate(site, building, weather, scenario, first, end, STEP)
    return every, skipping


def _figures(frame: pd.DataFrame, site: SiteConfig) -> Figures:
    start = pd.Timestamp(START, tz=site.site.time_zone)
    end = start + pd.Timedelta(days=DAYS)
    return compute_figures(frame, site, start.timestamp(), end.timestamp())


def test_the_report_figures_are_those_of_asking_every_step(
    runs: tuple[tuple[Result, pd.DataFrame], tuple[Result, pd.DataFrame]], site: SiteConfig
) -> None:
    # Reference: the decision core asked at every step (ventsup.core.decide), tabulated
    # by decisions_to_frame; the figures are those of the monthly report.
    (every, every_frame), (skipping, skipping_frame) = runs
    assert skipping.calls < every.calls / 5  # the point of it: the core is asked far less
    expected = _figures(every_frame, site)
    found = _figures(skipping_frame, site)
    for name in TABLES:
        pd.testing.assert_frame_equal(
            getattr(found, name), getattr(expected, name), check_exact=False, rtol=1e-9
        )
    assert found.flags == expected.flags
    # The period holds what the scenario scripted, so the tables compared are not empty.
    totals = expected.totals.set_index("zone")
    assert totals.loc["commons", "cause_rain_hours"] > 0.5
    assert totals.loc["commons", "cause_smoke_hours"] > 0.1
    assert totals.loc["commons", "mode_free_cooling_hours"] > 1.0
    kinds = set(zip(expected.episodes["zone"], expected.episodes["kind"], strict=True))
    assert {
        ("commons", "fire alarm"),
        ("commons", "actuator fault"),
        ("classroom_east", "input fault"),
    } <= kinds


def test_the_tables_are_equal_column_by_column(
    runs: tuple[tuple[Result, pd.DataFrame], tuple[Result, pd.DataFrame]],
) -> None:
    # Reference: decisions_to_frame of the core's decisions at every step.
    (_, every_frame), (_, skipping_frame) = runs
    assert list(skipping_frame.columns) == list(every_frame.columns)
    assert (skipping_frame.dtypes == every_frame.dtypes).all()
    same = [c for c in every_frame.columns if c != "reason"]
    # Rounding only: the open area is rounded to 1e-9 m² by numpy here and by
    # round() in the core, the dew point from humidity is solved vectorised.
    pd.testing.assert_frame_equal(
        skipping_frame[same], every_frame[same], check_exact=False, rtol=1e-12, atol=1e-9
    )


def test_each_reason_is_the_one_the_core_gave_in_that_stretch(
    runs: tuple[tuple[Result, pd.DataFrame], tuple[Result, pd.DataFrame]],
) -> None:
    # Reference: the core's reason at every step. Where its outcome repeats the
    # skipping run keeps the reason of its latest call, which may quote another
    # temperature: it must be one the core gave in the same stretch of the outcome,
    # and the one it gave where the stretch starts.
    (_, every_frame), (_, skipping_frame) = runs
    outcome = ["mode", "layer", "cause", "windows_open"] + [
        c for c in every_frame.columns if c.startswith("target:")
    ]
    checked = 0
    for _, rows in every_frame.groupby("zone", sort=False):
        values = rows[outcome].fillna(-1.0)
        changed = (values != values.shift()).any(axis=1).to_numpy()
        stretch = np.cumsum(changed)
        expected = rows["reason"].to_numpy()
        found = skipping_frame.loc[rows.index, "reason"].to_numpy()
        assert (found[changed] == expected[changed]).all()
        given: dict[int, set[str]] = {}
        for s, reason in zip(stretch.tolist(), expected.tolist(), strict=True):
            given.setdefault(s, set()).add(reason)
        for s, reason in zip(stretch.tolist(), found.tolist(), strict=True):
            assert reason in given[s], (s, reason)
            checked += 1
    assert checked == len(every_frame)
