"""Sample and hold, staleness, indoor temperature aggregation and zone inputs."""

from __future__ import annotations

import math
from typing import Any

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ventsup.config.model import SiteConfig
from ventsup.core.inputs import (
    NOT_CONFIGURED,
    Held,
    Reading,
    Sample,
    ZoneInputs,
    ZoneTemperature,
    aggregate_temperature,
    hold,
    read_point,
    zone_inputs,
)

T0 = 1_717_200_000.0  # 2024-06-01 00:00 UTC; any epoch time would do

POINTS: dict[str, dict[str, Any]] = {
    "t_out": {"topic": "site/t_out", "kind": "temperature"},
    "wind": {"topic": "site/wind", "kind": "wind_speed", "stale_after": "2 min"},
    "rain": {"topic": "site/rain", "kind": "binary", "stale_after": 300},
    "t_low": {"topic": "hall/t_low", "kind": "temperature"},
    "t_mid": {"topic": "hall/t_mid", "kind": "temperature"},
    "t_high": {"topic": "hall/t_high", "kind": "temperature"},
}


def make_site(
    points: dict[str, dict[str, Any]] | None = None,
    *,
    temperature: Any = ("t_low", "t_mid", "t_high"),
    aggregate: str = "max",
    zone: dict[str, Any] | None = None,
    outdoor: dict[str, Any] | None = None,
) -> SiteConfig:
    """A valid site with zone "hall": POINTS plus ``points``, indoor sensors ``temperature``."""
    temp: Any = (
        {"sensors": list(temperature), "aggregate": aggregate}
        if isinstance(temperature, tuple)
        else temperature
    )
    return SiteConfig.model_validate(
        {
            "site": {"name": "Test site", "time_zone": "UTC"},
            "points": {**POINTS, **(points or {})},
            "outdoor": {
                "temperature": "t_out",
                "wind_speed": "wind",
                "rain": "rain",
                **(outdoor or {}),
            },
            "zones": {
                "hall": {
                    "rules": "default",
                    "temperature": temp,
                    "openings": {"w1": {"area": "1 m2", "facing": 180, "level": "low"}},
                    **(zone or {}),
                }
            },
            "rules": {"default": {}},
        }
    )


SITE = make_site()


def held_of(*samples: tuple[str, float | bool, float]) -> Held:
    return Held.from_samples(Sample(p, v, t) for p, v, t in samples)


# --------------------------------------------------------------------------- hold


def test_hold_keeps_the_first_sample() -> None:
    sample = Sample("t_out", 18.0, T0)
    held = hold(Held(), sample)
    assert held["t_out"] == sample
    assert len(held) == 1 and "t_out" in held and list(held) == ["t_out"]


def test_a_newer_sample_replaces_the_held_one() -> None:
    held = hold(hold(Held(), Sample("t_out", 18.0, T0)), Sample("t_out", 19.0, T0 + 60))
    assert held["t_out"] == Sample("t_out", 19.0, T0 + 60)


def test_an_older_sample_is_ignored() -> None:
    newer = hold(Held(), Sample("t_out", 19.0, T0 + 60))
    assert hold(newer, Sample("t_out", 18.0, T0)) == newer


def test_a_sample_with_the_same_time_replaces_the_held_one() -> None:
    held = hold(hold(Held(), Sample("t_out", 18.0, T0)), Sample("t_out", 18.5, T0))
    assert held["t_out"].value == 18.5


def test_hold_returns_a_new_value_and_leaves_the_old_one() -> None:
    first = hold(Held(), Sample("t_out", 18.0, T0))
    hold(first, Sample("t_out", 19.0, T0 + 1))
    assert first["t_out"].value == 18.0


def test_held_compares_by_value_and_is_hashable() -> None:
    a = held_of(("t_out", 18.0, T0), ("rain", False, T0))
    b = held_of(("rain", False, T0), ("t_out", 18.0, T0))
    assert a == b and hash(a) == hash(b)
    assert a != held_of(("t_out", 18.0, T0))
    assert Held() == Held()


def test_held_does_not_alias_the_callers_dict() -> None:
    samples = {"t_out": Sample("t_out", 18.0, T0)}
    held = Held(samples)
    samples["rain"] = Sample("rain", True, T0)
    assert "rain" not in held
    with pytest.raises(TypeError):
        held.samples["rain"] = Sample("rain", True, T0)  # type: ignore[index]


# --------------------------------------------------------------------------- read


def test_never_received_is_missing() -> None:
    assert read_point(SITE, "t_out", Held(), T0) == Reading("t_out", None, "missing", None)


def test_a_value_is_held_until_it_is_stale() -> None:
    held = held_of(("t_out", 18.0, T0))  # default stale_after: 600 s
    for dt in (0.0, 1.0, 300.0, 599.0, 600.0):
        assert read_point(SITE, "t_out", held, T0 + dt) == Reading("t_out", 18.0, "ok", T0)
    for dt in (600.5, 601.0, 86400.0):
        assert read_point(SITE, "t_out", held, T0 + dt) == Reading("t_out", None, "stale", T0)


@pytest.mark.parametrize(
    ("name", "stale_after"),
    [("t_out", 600.0), ("wind", 120.0), ("rain", 300.0)],  # wind is configured as "2 min"
)
def test_staleness_edge_is_strict(name: str, stale_after: float) -> None:
    held = held_of((name, 1.0, T0))
    at_edge = read_point(SITE, name, held, T0 + stale_after)
    assert at_edge.status == "ok" and at_edge.known
    just_past = read_point(SITE, name, held, math.nextafter(T0 + stale_after, math.inf))
    assert just_past.status == "stale" and not just_past.known


def test_a_newer_sample_makes_a_stale_point_fresh_again() -> None:
    held = held_of(("wind", 3.0, T0))
    assert read_point(SITE, "wind", held, T0 + 200).status == "stale"
    held = hold(held, Sample("wind", 4.0, T0 + 190))
    assert read_point(SITE, "wind", held, T0 + 200) == Reading("wind", 4.0, "ok", T0 + 190)


def test_a_sample_from_the_future_is_ok_with_age_zero() -> None:
    held = held_of(("t_out", 18.0, T0 + 30))  # the gateway's clock runs 30 s ahead
    reading = read_point(SITE, "t_out", held, T0)
    assert reading == Reading("t_out", 18.0, "ok", T0 + 30)
    assert reading.age(T0) == 0.0
    # It goes stale stale_after seconds after its own time stamp.
    assert read_point(SITE, "t_out", held, T0 + 630).known
    assert not read_point(SITE, "t_out", held, T0 + 631).known


def test_reading_age() -> None:
    assert Reading("t_out", 18.0, "ok", T0).age(T0 + 42) == 42.0
    assert Reading("t_out", None, "stale", T0).age(T0 + 900) == 900.0
    assert Reading.missing("t_out").age(T0) is None


def test_reading_constructors() -> None:
    assert Reading.ok("rain", True, T0) == Reading("rain", True, "ok", T0)
    assert Reading.stale("rain", T0) == Reading("rain", None, "stale", T0)
    assert Reading.missing() == NOT_CONFIGURED == Reading("", None, "missing", None)


def test_a_binary_value_is_held_as_a_bool() -> None:
    reading = read_point(SITE, "rain", held_of(("rain", True, T0)), T0 + 10)
    assert reading.value is True and reading.known


def test_an_unknown_point_name_is_a_key_error_naming_the_points() -> None:
    with pytest.raises(KeyError, match=r"t_ouy.*t_out"):
        read_point(SITE, "t_ouy", Held(), T0)


# --------------------------------------------------------------------------- aggregate

FRESH = (("t_low", 21.0, T0), ("t_mid", 23.0, T0 + 10), ("t_high", 26.0, T0 + 20))


@pytest.mark.parametrize(
    ("aggregate", "samples", "value", "used", "skipped"),
    [
        ("max", FRESH, 26.0, ("t_low", "t_mid", "t_high"), ()),
        ("min", FRESH, 21.0, ("t_low", "t_mid", "t_high"), ()),
        ("mean", FRESH, 70.0 / 3.0, ("t_low", "t_mid", "t_high"), ()),
        # t_high is stale (sampled 700 s before evaluation, stale_after 600 s): skipped
        ("max", (*FRESH[:2], ("t_high", 30.0, T0 - 700)), 23.0, ("t_low", "t_mid"), ("t_high",)),
        ("min", (("t_low", 19.0, T0 - 700), *FRESH[1:]), 23.0, ("t_mid", "t_high"), ("t_low",)),
        ("mean", (*FRESH[:2], ("t_high", 30.0, T0 - 700)), 22.0, ("t_low", "t_mid"), ("t_high",)),
        # never heard: skipped too
        ("max", FRESH[:2], 23.0, ("t_low", "t_mid"), ("t_high",)),
        # a named sensor while fresh (the others are fresh but not used, and not skipped)
        ("t_mid", FRESH, 23.0, ("t_mid",), ()),
        ("t_mid", (*FRESH[:2], ("t_high", 30.0, T0 - 700)), 23.0, ("t_mid",), ("t_high",)),
        # a named sensor that is stale or missing: the mean of the other fresh sensors
        (
            "t_mid",
            (FRESH[0], ("t_mid", 23.0, T0 - 700), FRESH[2]),
            23.5,
            ("t_low", "t_high"),
            ("t_mid",),
        ),
        ("t_mid", (FRESH[0], FRESH[2]), 23.5, ("t_low", "t_high"), ("t_mid",)),
        ("t_mid", (("t_low", 1.0, T0 - 700), FRESH[2]), 26.0, ("t_high",), ("t_low", "t_mid")),
    ],
)
def test_aggregate_temperature(
    aggregate: str,
    samples: tuple[tuple[str, float, float], ...],
    value: float,
    used: tuple[str, ...],
    skipped: tuple[str, ...],
) -> None:
    site = make_site(aggregate=aggregate)
    result = aggregate_temperature(site, "hall", held_of(*samples), T0 + 20)
    assert result.status == "ok" and result.known
    assert result.value == pytest.approx(value, rel=1e-15)
    assert (result.used, result.skipped, result.aggregate) == (used, skipped, aggregate)
    # The age of an aggregate is the age of its oldest contributing sample.
    assert result.sample_t == min(t for name, _, t in samples if name in used)


def test_aggregate_labels_name_the_configured_source() -> None:
    assert aggregate_temperature(make_site(), "hall", Held(), T0).point == "max(t_low,t_mid,t_high)"
    named = make_site(aggregate="t_mid")
    assert aggregate_temperature(named, "hall", Held(), T0).point == "t_mid|mean(t_low,t_high)"
    single = make_site(temperature="t_low")
    result = aggregate_temperature(single, "hall", held_of(("t_low", 22.0, T0)), T0)
    assert result == ZoneTemperature(
        point="t_low",
        value=22.0,
        status="ok",
        sample_t=T0,
        aggregate="max",
        used=("t_low",),
        skipped=(),
    )


def test_no_fresh_sensor_is_stale_with_the_newest_sample_time() -> None:
    held = held_of(("t_low", 21.0, T0), ("t_mid", 22.0, T0 + 5))  # t_high never heard
    result = aggregate_temperature(SITE, "hall", held, T0 + 1000)
    assert (result.status, result.value, result.sample_t) == ("stale", None, T0 + 5)
    assert result.used == () and result.skipped == ("t_low", "t_mid", "t_high")
    assert not result.known


def test_no_sensor_ever_heard_is_missing() -> None:
    result = aggregate_temperature(SITE, "hall", held_of(("t_out", 18.0, T0)), T0)
    assert (result.status, result.value, result.sample_t) == ("missing", None, None)
    assert result.skipped == ("t_low", "t_mid", "t_high")


# --------------------------------------------------------------------------- zone inputs

FULL = make_site(
    {
        "rh_out": {"topic": "site/rh", "kind": "humidity"},
        "dp_out": {"topic": "site/dp", "kind": "dew_point"},
        "wind_dir": {"topic": "site/wind_dir", "kind": "wind_direction"},
        "co2": {"topic": "hall/co2", "kind": "co2"},
        "heat": {"topic": "hall/heat", "kind": "binary"},
        "smoke_a": {"topic": "fire/a", "kind": "binary"},
        "smoke_b": {"topic": "fire/b", "kind": "binary"},
        "w1_pos": {"topic": "hall/w1/pos", "kind": "position"},
    },
    outdoor={"humidity": "rh_out", "dew_point": "dp_out", "wind_direction": "wind_dir"},
    zone={
        "co2": "co2",
        "heating": "heat",
        "smoke_alarms": ["smoke_b", "smoke_a"],
        "openings": {
            "w1": {"area": "1 m2", "facing": 180, "level": "low", "feedback": "w1_pos"},
            "w2": {"area": "1 m2", "facing": 0, "level": "high"},
        },
    },
)


def test_zone_inputs_reads_every_configured_point() -> None:
    held = held_of(
        ("t_low", 24.0, T0),
        ("t_out", 18.0, T0),
        ("rh_out", 60.0, T0),
        ("dp_out", 10.0, T0),
        ("wind", 3.0, T0),
        ("wind_dir", 225.0, T0),
        ("rain", False, T0),
        ("co2", 900.0, T0),
        ("heat", False, T0),
        ("smoke_a", False, T0),
        ("smoke_b", True, T0 - 900),  # stale
        ("w1_pos", 0.5, T0),
    )
    inputs = zone_inputs(FULL, "hall", held, T0 + 60)
    assert inputs.temp_indoor.value == 24.0
    assert inputs.temp_indoor.skipped == ("t_mid", "t_high")
    assert inputs.temp_outdoor == Reading("t_out", 18.0, "ok", T0)
    assert inputs.humidity_outdoor == Reading("rh_out", 60.0, "ok", T0)
    assert inputs.dew_point_outdoor == Reading("dp_out", 10.0, "ok", T0)
    assert inputs.wind_speed == Reading("wind", 3.0, "ok", T0)
    assert inputs.wind_direction == Reading("wind_dir", 225.0, "ok", T0)
    assert inputs.rain == Reading("rain", False, "ok", T0)
    assert inputs.co2 == Reading("co2", 900.0, "ok", T0)
    assert inputs.heating == Reading("heat", False, "ok", T0)
    # alarms in the zone's configured order
    assert inputs.alarms == (
        Reading("smoke_b", None, "stale", T0 - 900),
        Reading.ok("smoke_a", False, T0),
    )
    # feedback only for openings that have a feedback point
    assert dict(inputs.feedback) == {"w1": Reading("w1_pos", 0.5, "ok", T0)}


def test_zone_inputs_of_an_empty_hold_is_all_missing() -> None:
    inputs = zone_inputs(FULL, "hall", Held(), T0)
    assert inputs.temp_outdoor == Reading.missing("t_out")
    assert inputs.co2 == Reading.missing("co2")
    assert inputs.temp_indoor.status == "missing"
    assert inputs.alarms == (Reading.missing("smoke_b"), Reading.missing("smoke_a"))
    assert dict(inputs.feedback) == {"w1": Reading.missing("w1_pos")}


def test_unconfigured_optional_points_are_missing_with_an_empty_name() -> None:
    inputs = zone_inputs(SITE, "hall", held_of(("t_out", 18.0, T0)), T0)
    for name in ("humidity_outdoor", "dew_point_outdoor", "wind_direction", "co2", "heating"):
        assert getattr(inputs, name) == NOT_CONFIGURED == Reading("", None, "missing", None)
    assert inputs.alarms == ()
    assert dict(inputs.feedback) == {}


def test_zone_inputs_compare_by_value_and_are_frozen() -> None:
    held = held_of(("t_low", 24.0, T0), ("w1_pos", 0.5, T0))
    a = zone_inputs(FULL, "hall", held, T0)
    b = zone_inputs(FULL, "hall", held, T0)
    assert a == b and hash(a) == hash(b)
    assert a != zone_inputs(FULL, "hall", held, T0 + 3600)
    with pytest.raises(AttributeError):
        a.rain = Reading.missing()  # type: ignore[misc]
    with pytest.raises(TypeError):
        a.feedback["w2"] = Reading.missing()  # type: ignore[index]


# --------------------------------------------------------------------------- ZoneInputs.of


def test_of_makes_ok_readings_from_plain_values() -> None:
    inputs = ZoneInputs.of(
        temp_indoor=24.0,
        temp_outdoor=18.0,
        rain=False,
        wind_speed=2.0,
        alarms=(False, True),
        feedback={"w1": 0.3},
        t=T0,
    )
    assert inputs.temp_indoor == ZoneTemperature(
        "temp_indoor", 24.0, "ok", T0, aggregate="max", used=("temp_indoor",)
    )
    assert inputs.temp_outdoor == Reading("temp_outdoor", 18.0, "ok", T0)
    assert inputs.rain == Reading("rain", False, "ok", T0)
    assert inputs.wind_speed == Reading("wind_speed", 2.0, "ok", T0)
    assert inputs.alarms == (Reading.ok("alarm_1", False, T0), Reading.ok("alarm_2", True, T0))
    assert dict(inputs.feedback) == {"w1": Reading.ok("w1_feedback", 0.3, T0)}
    # not given: missing under the field's name
    assert inputs.co2 == Reading.missing("co2")
    assert inputs.humidity_outdoor == Reading.missing("humidity_outdoor")


def test_of_defaults_to_sample_time_zero_and_compares_by_value() -> None:
    assert ZoneInputs.of(temp_outdoor=18.0).temp_outdoor.sample_t == 0.0
    assert ZoneInputs.of(rain=True, feedback={"w1": 1.0}) == ZoneInputs.of(
        rain=True, feedback={"w1": 1.0}
    )
    assert hash(ZoneInputs.of(rain=True)) == hash(ZoneInputs.of(rain=True))


def test_of_marks_stale_fields_and_passes_readings_through() -> None:
    custom = Reading("site_wind", 9.0, "ok", T0 - 30)
    inputs = ZoneInputs.of(
        temp_indoor=24.0,
        rain=True,
        wind_speed=custom,
        alarms=(None, True),
        feedback={"w1": None},
        stale=("rain", "temp_indoor", "alarm_2"),
        t=T0,
    )
    assert inputs.rain == Reading.stale("rain", T0)
    assert inputs.temp_indoor.status == "stale" and inputs.temp_indoor.value is None
    assert inputs.temp_indoor.skipped == ("temp_indoor",) and inputs.temp_indoor.used == ()
    assert inputs.wind_speed is custom
    assert inputs.alarms == (Reading.missing("alarm_1"), Reading.stale("alarm_2", T0))
    assert inputs.feedback["w1"] == Reading.missing("w1_feedback")


def test_of_refuses_a_stale_name_that_matches_no_input() -> None:
    with pytest.raises(ValueError, match="rian"):
        ZoneInputs.of(rain=True, stale=("rian",))


def test_of_equals_zone_inputs_read_from_a_hold() -> None:
    site = make_site(
        temperature="temp_indoor",
        points={
            "temp_indoor": {"topic": "hall/t", "kind": "temperature"},
            "temp_outdoor": {"topic": "site/t", "kind": "temperature"},
            "wind_speed": {"topic": "site/w", "kind": "wind_speed"},
        },
        outdoor={"temperature": "temp_outdoor", "wind_speed": "wind_speed"},
    )
    held = held_of(
        ("temp_indoor", 24.0, T0),
        ("temp_outdoor", 18.0, T0),
        ("wind_speed", 2.0, T0),
        ("rain", False, T0),
    )
    read = zone_inputs(site, "hall", held, T0 + 5)
    built = ZoneInputs.of(temp_indoor=24.0, temp_outdoor=18.0, wind_speed=2.0, rain=False, t=T0)
    assert read.temp_indoor == built.temp_indoor
    assert (read.temp_outdoor, read.wind_speed, read.rain) == (
        built.temp_outdoor,
        built.wind_speed,
        built.rain,
    )
    assert read.co2 == NOT_CONFIGURED != built.co2  # not configured vs not given


# --------------------------------------------------------------------------- properties

times = st.floats(min_value=0.0, max_value=4e9, allow_nan=False)
temperatures = st.floats(min_value=-50.0, max_value=70.0, allow_nan=False)


@given(
    stale_after=st.floats(min_value=0.0, max_value=1e6, allow_nan=False),
    sample_t=times,
    later=st.floats(min_value=-1e6, max_value=2e6, allow_nan=False),
)
def test_a_held_value_is_never_ok_past_stale_after(
    stale_after: float, sample_t: float, later: float
) -> None:
    site = make_site(
        {"t_out": {"topic": "site/t_out", "kind": "temperature", "stale_after": stale_after}}
    )
    stale_after = site.points["t_out"].stale_after  # as loaded: rounded to 1e-9 s
    t = sample_t + later
    reading = read_point(site, "t_out", held_of(("t_out", 18.0, sample_t)), t)
    if t - sample_t > stale_after:
        assert reading.status == "stale" and reading.value is None and not reading.known
    else:
        assert reading.status == "ok" and reading.value == 18.0


@given(
    aggregate=st.sampled_from(["max", "mean", "min", "t_low", "t_mid", "t_high"]),
    values=st.tuples(temperatures, temperatures, temperatures),
    ages=st.tuples(*(st.sampled_from([None, 0.0, 599.0, 600.0, 601.0, 5000.0]),) * 3),
)
def test_aggregation_stays_within_the_fresh_sensors(
    aggregate: str,
    values: tuple[float, float, float],
    ages: tuple[float | None, float | None, float | None],
) -> None:
    names = ("t_low", "t_mid", "t_high")
    site = make_site(aggregate=aggregate)
    t = T0 + 10_000
    held = held_of(
        *((n, v, t - a) for n, v, a in zip(names, values, ages, strict=True) if a is not None)
    )
    result = aggregate_temperature(site, "hall", held, t)
    fresh = {
        n: v for n, v, a in zip(names, values, ages, strict=True) if a is not None and a <= 600.0
    }
    assert result.skipped == tuple(n for n in names if n not in fresh)
    if not fresh:
        assert result.value is None and result.used == ()
        assert result.status == ("missing" if all(a is None for a in ages) else "stale")
        return
    assert result.status == "ok" and result.value is not None
    assert set(result.used) <= set(fresh)
    assert min(fresh.values()) <= result.value <= max(fresh.values())
    if aggregate in ("max", "min"):
        assert result.value == {"max": max, "min": min}[aggregate](fresh.values())
    elif aggregate in fresh:
        assert result.used == (aggregate,) and result.value == fresh[aggregate]


@given(
    samples=st.lists(
        st.tuples(st.sampled_from(["t_out", "wind", "rain"]), temperatures), max_size=12
    ),
    order=st.randoms(use_true_random=False),
)
def test_hold_keeps_the_newest_sample_whatever_the_arrival_order(
    samples: list[tuple[str, float]], order: Any
) -> None:
    stamped = [Sample(name, value, T0 + i) for i, (name, value) in enumerate(samples)]
    shuffled = list(stamped)
    order.shuffle(shuffled)
    newest = {s.point: s for s in stamped}  # later times overwrite earlier ones
    assert Held.from_samples(shuffled) == Held.from_samples(stamped) == Held(newest)
