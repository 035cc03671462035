"""The closed loop skips the core's repeats exactly: the same run with and without skipping.

:class:`simulator.loop.CoreController` with ``skip_repeats`` (the default)
lets :func:`simulator.loop.run` repeat an outcome that the core would repeat
instead of calling :func:`ventsup.core.decide.decide` (see
:mod:`simulator._steps`). These tests run the same closed loop both ways over
seeded random scenarios (rain, gusts, smoke drills, sensor dropouts, sticks
and spikes, actuator jams, crowds) on spans with schedule edges and a daylight
saving change, and check that every recorded value, every change with its
reason, and every zone state the skipping run holds (after each decision and
at the end of each stretch of repeats) equal those of the run that decides
every step.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from simulator.building import Building
from simulator.loop import CoreController, Result, _plan
from simulator.scenario import (
    ActuatorJam,
    Event,
    Gust,
    OccupancyChange,
    RainSpell,
    Scenario,
    SensorFault,
    SmokeDrill,
    Timing,
    parse_scenario,
)
from simulator.weather import Weather, synthetic
from ventsup.config.model import SiteConfig
from ventsup.core.state import ZoneState

STEP = 60.0


def _scenario(site: SiteConfig, seed: int, hours: float) -> Scenario:
    """Random events over a run of ``hours`` (times relative to its start)."""
    rng = np.random.default_rng(seed)
    span = hours * 3600.0

    def timing(longest: float) -> Timing:
        start = float(rng.uniform(0.0, span))
        return Timing(start, start + float(rng.uniform(120.0, longest)), relative=True)

    points = list(site.points)
    events: list[Event] = []
    for _ in range(int(rng.integers(1, 4))):
        events.append(RainSpell(timing(3 * 3600.0)))
    for _ in range(int(rng.integers(1, 3))):
        direction = None if rng.random() < 0.3 else float(rng.uniform(0.0, 360.0))
        events.append(Gust(timing(2 * 3600.0), float(rng.uniform(6.0, 20.0)), direction))
    zone = str(rng.choice(list(site.zones)))
    events.append(SmokeDrill(timing(1800.0), site.zones[zone].smoke_alarms))
    for _ in range(int(rng.integers(2, 6))):
        point = str(rng.choice(points))
        fault = str(rng.choice(["dropout", "stick", "spike"]))
        value = None
        if fault == "spike" or (fault == "stick" and rng.random() < 0.5):
            low, high = site.points[point].plausible_range
            middle = 0.5 * (low + high) if np.isfinite(low + high) else 20.0
            value = float(rng.choice([middle, high + 100.0, rng.uniform(0.0, 1.0), 1.0]))
        events.append(SensorFault(timing(4 * 3600.0), point, fault, value))  # type: ignore[arg-type]
    for _ in range(int(rng.integers(0, 3))):
        zone = str(rng.choice(list(site.zones)))
        opening = str(rng.choice(list(site.zones[zone].openings)))
        position = None if rng.random() < 0.5 else float(rng.uniform(0.0, 1.0))
        events.append(ActuatorJam(timing(6 * 3600.0), zone, opening, position))
    zone = str(rng.choice(list(site.zones)))
    events.append(OccupancyChange(timing(4 * 3600.0), zone, float(rng.uniform(0.0, 300.0))))
    return Scenario(name=f"random {seed}", events=tuple(events))


def _run(
    site: SiteConfig,
    building: Building,
    scenario: Scenario,
    start: pd.Timestamp,
    hours: float,
    seed: int,
    skip: bool,
    weather: Weather | None = None,
    initial_temperature: float = 21.0,
) -> tuple[Result, list[tuple[int, int, ZoneState]], int]:
    """The closed loop from ``start`` for ``hours``, in seeded synthetic weather unless
    ``weather`` is given, with every zone state the loop holds traced."""
    if weather is None:
        weather = synthetic(
            41.2,
            -88.1,
            site.site.time_zone,
            start - pd.Timedelta(hours=2),
            start + pd.Timedelta(hours=hours + 2),
            seed=seed,
        )
    plan = _plan(site, building, weather, scenario, start, start + pd.Timedelta(hours=hours), STEP)
    trace: list[tuple[int, int, ZoneState]] = []
    result = plan.simulate(
        CoreController(site, skip_repeats=skip),
        initial_temperature,
        None,
        lambda k, zone, state: trace.append((k, zone, state)),
    )
    return result, trace, plan.decide_calls


# Spans with schedule edges on weekdays and a weekend, a daylight saving change
# (2024-03-10 and 2024-11-03 in America/Chicago), free cooling and night flush.
SPANS = [
    ("2024-03-09 20:00", 30.0),
    ("2024-07-15 04:00", 30.0),
    ("2024-05-17 12:00", 36.0),
    ("2024-11-02 18:00", 24.0),
    ("2024-09-04 09:00", 24.0),
]


def _assert_same(
    every: Result,
    every_trace: list[tuple[int, int, ZoneState]],
    skipped: Result,
    skipped_trace: list[tuple[int, int, ZoneState]],
) -> None:
    # Every step's record: physics, outcome, targets, positions, what each point published.
    for zone, frame in every.zones.items():
        pd.testing.assert_frame_equal(skipped.zones[zone], frame, check_exact=True)
    pd.testing.assert_frame_equal(skipped.sensors, every.sensors, check_exact=True)
    # The changes, with the reasons the core gave.
    pd.testing.assert_frame_equal(skipped.changes, every.changes, check_exact=True)
    # Every state the skipping run held is the one the core reached at that step.
    states = {(k, zone): state for k, zone, state in every_trace}
    assert len(states) == len(every_trace) == len(every.zones) * len(every.outdoor)
    for k, zone, state in skipped_trace:
        assert state == states[(k, zone)], (k, zone)
    # And the end state of each zone is among them.
    last = len(every.outdoor) - 1
    assert {zone for k, zone, _ in skipped_trace if k == last} == set(range(len(every.zones)))


@pytest.mark.parametrize("seed", range(len(SPANS)))
def test_skipping_repeats_changes_nothing(site: SiteConfig, building: Building, seed: int) -> None:
    text, hours = SPANS[seed]
    start = pd.Timestamp(text, tz=site.site.time_zone)
    scenario = _scenario(site, 100 + seed, hours)
    every, every_trace, every_calls = _run(site, building, scenario, start, hours, seed, False)
    skipped, skipped_trace, skipped_calls = _run(site, building, scenario, start, hours, seed, True)
    _assert_same(every, every_trace, skipped, skipped_trace)
    # The run without skipping asked the core every step; the other far less often.
    assert every_calls == len(every.zones) * len(every.outdoor)
    assert skipped_calls < every_calls / 3


def test_a_zone_that_starts_heating_cuts_the_look_ahead_of_its_neighbour(
    site: SiteConfig, building: Building
) -> None:
    # The classroom and the studio share one heating status point (vav_heating).
    # A cool, sunny April afternoon (14 °C): the studio is in free cooling. At
    # 13:00 the classroom's sensor sticks at 30 °C, so the classroom opens wide,
    # cools below its set point and heats; the shared point turns true and the
    # studio, which had checked its inputs hours ahead under the old physics,
    # must look again (simulator/_steps.py, Loop: the dependents' cut).
    index = pd.date_range("2024-04-16 06:00", periods=16, freq="h", tz=site.site.time_zone)
    weather = Weather(
        pd.DataFrame(
            {
                "temp_outdoor": 14.0,
                "relative_humidity": 50.0,
                "wind_speed": 2.0,
                "wind_direction": 270.0,
                "rain": False,
                "ghi": 500.0,
                "dni": 500.0,
                "dhi": 100.0,
            },
            index=index,
        ),
        source="a cool sunny afternoon",
    )
    scenario = parse_scenario(
        """
        events:
          - sensor: {point: classroom_temp, fault: stick, value: 30 C, at: "2024-04-16 13:00", duration: 3 h}
        """,
        "test.yaml",
        site,
    )
    start = pd.Timestamp("2024-04-16 08:00", tz=site.site.time_zone)
    every, every_trace, _ = _run(site, building, scenario, start, 11.0, 0, False, weather, 23.5)
    skipped, skipped_trace, _ = _run(site, building, scenario, start, 11.0, 0, True, weather, 23.5)
    # The run does what the test is about: the studio open while the classroom heats.
    studio, classroom = every.zones["studio_west"], every.zones["classroom_east"]
    after = classroom.index >= pd.Timestamp("2024-04-16 13:00", tz=site.site.time_zone)
    assert (classroom["heating"][after] > 0).any()
    assert not (classroom["heating"][~after] > 0).any()
    assert studio["windows_open"].any()
    _assert_same(every, every_trace, skipped, skipped_trace)
