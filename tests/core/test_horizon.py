"""When a zone's decision can change: schedule edges, timers, advance, features.

Schedule edges are checked against the schedule layer itself, evaluated
second by second around every edge and minute by minute in between, over
the daylight saving changes (Europe/Berlin 2024-03-31 and 2024-10-27,
America/New_York 2024-03-10 and 2024-11-03, from the IANA tz database).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import replace
from datetime import datetime
from zoneinfo import ZoneInfo

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ventsup.config.model import Period
from ventsup.core.decide import decide, initial_state
from ventsup.core.horizon import (
    MARGIN,
    Readings,
    advance,
    horizon,
    next_schedule_edge,
    next_timer,
    outdoor_dew_point,
    schedule_edges,
    state_classes,
    stationary,
    zone_features,
)
from ventsup.core.layers.schedule import in_period
from ventsup.core.state import OpeningState, OverrideState, WindLatch, ZoneState

from .helpers import BENIGN, BERLIN, T0, epoch, inputs, site

CHANGES = [
    ("Europe/Berlin", (2024, 3, 31)),
    ("Europe/Berlin", (2024, 10, 27)),
    ("America/New_York", (2024, 3, 10)),
    ("America/New_York", (2024, 11, 3)),
]
PERIODS = [
    Period.parse("Mon-Fri 07:00-19:00"),
    Period.parse("01:00-04:00"),
    Period.parse("Sat 02:30-02:45"),
    Period.parse("Sun 22:00-03:00"),
    Period.parse("Sun 23:00-24:00"),
]


def membership(periods: list[Period], tz: ZoneInfo, t: float) -> tuple[bool, ...]:
    local = datetime.fromtimestamp(t, tz)
    return tuple(in_period(p, local) for p in periods)


@pytest.mark.parametrize(("tz", "day"), CHANGES, ids=[f"{z} {d}" for z, d in CHANGES])
def test_schedule_edges_catch_every_change_across_daylight_saving(
    tz: str, day: tuple[int, int, int]
) -> None:
    zone = ZoneInfo(tz)
    start = epoch(tz, *day) - 2 * 86400
    end = start + 5 * 86400
    edges = [start, *schedule_edges_of(PERIODS, tz, start, end), end]
    for before, after in itertools.pairwise(edges):
        # no change between edges: checked each minute and just before the next edge
        inside = membership(PERIODS, zone, before)
        t = before
        while t < after - MARGIN:
            assert membership(PERIODS, zone, t) == inside, datetime.fromtimestamp(t, zone)
            t += 60.0
        assert membership(PERIODS, zone, after - MARGIN) == inside


def schedule_edges_of(periods: list[Period], tz: str, start: float, end: float) -> list[float]:
    edges = []
    t = start
    while True:
        t = next_schedule_edge(periods, tz, t)
        if t >= end:
            return edges
        edges.append(t)


@pytest.mark.parametrize(("tz", "day"), CHANGES, ids=[f"{z} {d}" for z, d in CHANGES])
def test_the_daylight_saving_change_itself_is_an_edge(tz: str, day: tuple[int, int, int]) -> None:
    midnight = epoch(tz, *day)
    zone = ZoneInfo(tz)
    edges = schedule_edges_of([Period.parse("Mon 09:00-10:00")], tz, midnight, midnight + 86400)
    assert len(edges) == 1
    when = edges[0]
    assert (
        datetime.fromtimestamp(when - 1, zone).utcoffset()
        != datetime.fromtimestamp(when, zone).utcoffset()
    )


def test_an_edge_example() -> None:
    monday = epoch(BERLIN, 2024, 6, 3, 6, 59)
    edge = next_schedule_edge([Period.parse("Mon-Fri 07:00-18:00")], BERLIN, monday)
    assert edge == epoch(BERLIN, 2024, 6, 3, 7, 0)
    assert next_schedule_edge([Period.parse("Mon-Fri 07:00-18:00")], BERLIN, edge) == epoch(
        BERLIN, 2024, 6, 3, 18, 0
    )
    assert next_schedule_edge([], BERLIN, monday) == math.inf


@settings(max_examples=40)
@given(
    start=st.integers(0, 1439),
    length=st.integers(1, 1439),
    days=st.sets(st.integers(0, 6), min_size=1),
    t=st.integers(1_704_067_200, 1_735_689_600),  # 2024
    tz=st.sampled_from(["Europe/Berlin", "America/New_York", "UTC", "Australia/Lord_Howe"]),
)
def test_no_change_before_the_next_edge(
    start: int, length: int, days: set[int], t: int, tz: str
) -> None:
    period = Period(days=frozenset(days), start_minute=start, end_minute=(start + length) % 1440)
    if period.start_minute == period.end_minute:
        return
    zone = ZoneInfo(tz)
    edge = next_schedule_edge([period], tz, float(t))
    assert edge > t
    inside = membership([period], zone, float(t))
    probe = float(t)
    while probe < min(edge, t + 8 * 86400) - MARGIN:
        assert membership([period], zone, probe) == inside
        probe += 600.0
    assert membership([period], zone, edge - MARGIN) == inside


def test_schedule_edges_of_a_rule_set_include_night_flush_hours() -> None:
    config = site(
        {
            "schedule": {"occupied": ["Mon 08:00-09:00"], "security": []},
            "night_flush": {"enabled": True, "hours": "Mon 22:00-23:00"},
        }
    )
    monday = epoch(BERLIN, 2024, 6, 3)
    edges = schedule_edges(config.rules_for("room"), BERLIN, monday, monday + 86400)
    hours = [datetime.fromtimestamp(e, ZoneInfo(BERLIN)).hour for e in edges]
    assert hours == [8, 9, 22, 23]


# --------------------------------------------------------------------------- timers


def test_next_timer_is_the_nearest_running_timer() -> None:
    config = site()
    rules = config.rules_for("room")
    t = T0
    assert next_timer(config, "room", initial_state(), t) == math.inf
    state = ZoneState(
        rain_last_wet=t - 60,
        wind={"cap": WindLatch(True, t - 30)},
        alarm_latched=True,
        alarm_clear_since=t - 10,
        override=OverrideState("open", t - 5, t + 3600, "op", "", {}),
    )
    expected = min(
        t - 60 + rules.rain.dry_delay,
        t - 30 + rules.wind.hold,
        t - 10 + rules.alarm.clear_hold,
        t + 3600,
    )
    assert next_timer(config, "room", state, t) == expected


def test_moves_count_only_at_the_move_limit() -> None:
    config = site({"actuator": {"max_moves_per_hour": 2}})
    t = T0
    one = OpeningState(target=0.5, moves=(t - 100,))
    two = OpeningState(target=0.5, moves=(t - 3000, t - 100))
    assert next_timer(config, "room", ZoneState(openings={"low": one}), t) == math.inf
    assert next_timer(config, "room", ZoneState(openings={"low": two}), t) == t - 3000 + 3600


def test_a_timer_just_run_out_still_counts() -> None:
    config = site()
    t = T0
    state = ZoneState(rain_last_wet=t - config.rules_for("room").rain.dry_delay - 0.5)
    assert next_timer(config, "room", state, t) < t


def test_horizon_takes_the_schedule_edge_when_it_comes_first() -> None:
    config = site({"schedule": {"occupied": ["Mon-Fri 10:30-18:00"], "security": []}})
    assert horizon(config, "room", initial_state(), T0) == epoch(BERLIN, 2024, 6, 3, 10, 30)


# --------------------------------------------------------------------------- advance


def test_advance_changes_only_bookkeeping() -> None:
    config = site()
    t = T0
    state = ZoneState(
        openings={"low": OpeningState(target=0.4, moves=(t - 4000, t - 100))},
        rain_last_wet=t - 50,
        wind={key: WindLatch() for key in ("cap", "close", "windward_cap", "windward_close")},
        last_t=t - 60,
    )
    dry = advance(config, "room", state, t, rain_wet=False, wind_speed=1.0)
    assert dry.rain_last_wet == t - 50
    assert dry.openings["low"].moves == (t - 100,)
    assert dry.last_t == t
    wet_and_windy = advance(config, "room", state, t, rain_wet=True, wind_speed=math.inf)
    assert wet_and_windy.rain_last_wet == t
    assert all(latch == WindLatch(True, t) for latch in wet_and_windy.wind.values())


def test_a_steady_evaluation_is_stationary_and_a_change_is_not() -> None:
    config = site()
    state = initial_state()
    t = T0
    values = {**BENIGN, "temp_indoor": 21.0}
    _, first = decide(config, "room", inputs(t=t, **values), state, t)
    assert not stationary(config, "room", state, first, t, False, values["wind_speed"])
    t += 60
    _, second = decide(config, "room", inputs(t=t, **values), first, t)
    assert stationary(config, "room", first, second, t, False, values["wind_speed"])
    t += 60
    warm = {**values, "temp_indoor": 24.0}
    _, third = decide(config, "room", inputs(t=t, **warm), second, t)
    assert not stationary(config, "room", second, third, t, False, values["wind_speed"])


def test_a_mode_change_alone_keeps_an_evaluation_stationary() -> None:
    config = site()
    t = T0
    state = ZoneState(mode=None, mode_since=None, last_t=None)
    after = replace(state, mode=state.mode, last_t=t)
    assert stationary(config, "room", state, after, t, False, 1.0)
    from ventsup.core.state import Mode

    moved = replace(after, mode=Mode.IDLE, mode_since=t)
    assert stationary(config, "room", state, moved, t, False, 1.0)
    assert not stationary(config, "room", state, replace(moved, cooling=True), t, False, 1.0)


# --------------------------------------------------------------------------- features


def readings(values: list[float | None]) -> Readings:
    ok = np.array([v is not None for v in values])
    return Readings(ok, np.array([np.nan if v is None else v for v in values], dtype=float))


def test_features_change_exactly_where_a_threshold_is_crossed() -> None:
    config = site()
    full = config.rules_for("room").free_cooling.full_open_at
    n = 5
    temps = [full - 0.1, full - 0.05, full, full + 0.05, None]
    points = {
        config.zones["room"].temperature.sensors[0]: readings(temps),
        config.outdoor.temperature: readings([15.0] * n),
    }
    features = zone_features(config, "room", points, n)
    rows = [tuple(row) for row in features.codes]
    assert rows[0] == rows[1]  # no threshold between
    assert rows[1] != rows[2]  # at full_open_at exactly
    assert rows[2] != rows[3]
    assert rows[3] != rows[4]  # unknown
    assert not features.uncertain.any()
    assert math.isnan(features.temp_indoor[4])


def test_a_latch_makes_one_threshold_of_its_pair_relevant() -> None:
    config = site()
    rules = config.rules_for("room").free_cooling
    temps = [rules.close_below - 0.5, rules.close_below + 0.5, rules.open_above + 0.5]
    points = {
        config.zones["room"].temperature.sensors[0]: readings(temps),
        config.outdoor.temperature: readings([15.0] * 3),
    }
    features = zone_features(config, "room", points, 3)
    calm = {k: WindLatch() for k in ("cap", "close", "windward_cap", "windward_close")}
    for cooling, changes in ((False, [False, True]), (True, [True, False])):
        state = ZoneState(wind=calm, cooling=cooling)
        classes, _ = state_classes(config, "room", state, features, 0, 3)
        seen = [bool((classes[i] != classes[i + 1]).any()) for i in range(2)]
        # off: only open_above is read; on: only close_below
        assert seen == changes, f"cooling {cooling}"


def test_an_average_near_a_threshold_is_uncertain() -> None:
    base = site()
    points = {**base.points, "t_in_2": base.points["t_in"].model_copy(update={"topic": "t/2"})}
    room = base.zones["room"]
    temperature = room.temperature.model_copy(
        update={"sensors": ("t_in", "t_in_2"), "aggregate": "mean"}
    )
    config = base.model_copy(
        update={
            "points": points,
            "zones": {"room": room.model_copy(update={"temperature": temperature})},
        }
    )
    open_above = config.rules_for("room").free_cooling.open_above
    readings_at = {
        "t_in": readings([open_above, 20.0]),
        "t_in_2": readings([open_above, 20.0]),
        config.outdoor.temperature: readings([15.0, 15.0]),
    }
    features = zone_features(config, "room", readings_at, 2)
    assert features.uncertain.tolist() == [True, False]


@settings(max_examples=40)
@given(
    st.lists(
        st.tuples(
            st.one_of(st.none(), st.floats(-20.0, 40.0)),
            st.one_of(st.none(), st.floats(0.0, 100.0)),
            st.one_of(st.none(), st.floats(10.0, 35.0)),
        ),
        min_size=1,
        max_size=30,
    ),
    st.integers(0, 29),
)
def test_a_dew_point_computed_once_gives_the_same_features(
    rows: list[tuple[float | None, float | None, float | None]], cut: int
) -> None:
    # The simulator computes the outdoor dew point once for a run and passes slices of
    # it to zone_features: the features must be those zone_features derives itself.
    config = site()
    n = len(rows)
    points = {
        config.outdoor.temperature: readings([r[0] for r in rows]),
        "rh_out": readings([r[1] for r in rows]),
        config.zones["room"].temperature.sensors[0]: readings([r[2] for r in rows]),
    }
    whole = outdoor_dew_point(config, points, n)
    lo = min(cut, n - 1)
    part = {name: Readings(r.ok[lo:], r.value[lo:]) for name, r in points.items()}
    own = zone_features(config, "room", part, n - lo)
    given_dew = zone_features(config, "room", part, n - lo, dew_point=tuple(a[lo:] for a in whole))
    assert np.array_equal(own.codes, given_dew.codes)
    assert np.array_equal(own.uncertain, given_dew.uncertain)
    assert np.allclose(
        own.dew_point_outdoor, given_dew.dew_point_outdoor, atol=1e-6, equal_nan=True
    )


def test_state_classes_follow_the_minimum_step() -> None:
    config = site({"actuator": {"min_step": 0.1}})
    rules = config.rules_for("room").free_cooling
    span = rules.full_open_at - rules.open_above
    temps = [rules.open_above + span * share for share in (0.3, 0.35, 0.5, 0.7)]
    points = {
        config.zones["room"].temperature.sensors[0]: readings(temps),
        config.outdoor.temperature: readings([15.0] * 4),
    }
    features = zone_features(config, "room", points, 4)
    current = float(features.fraction[0])
    state = ZoneState(
        openings={n: OpeningState(target=current) for n in config.zones["room"].openings}
    )
    classes, uncertain = state_classes(config, "room", state, features, 0, 4)
    assert not uncertain.any()
    stays = [bool((row == classes[0]).all()) for row in classes]
    step = [abs(f - current) < 0.1 for f in features.fraction]
    assert stays == step
