"""The seven priority layers of :func:`ventsup.core.decide.decide`, table by table.

Each case runs a few evaluations of the one-zone test site (:func:`.helpers.site`,
openings ``low`` facing north and ``high`` facing south) and checks the last
decision: mode, layer, cause, targets, and that the reason sentence carries the
values that decided it. Times are seconds after :data:`.helpers.T0`, Monday
10:00 in Berlin, so a reason says "10:05" for ``at=300``.

Threshold sources are named beside each value in :data:`.helpers.BASE_RULES`
and beside the values changed here, tagged as in shared/CHECKS.md: [practice]
common practice, [pub] a published source, [mem] from memory of a published
source, [lib] a reference library; "site choice" where no source fixes a value.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import psychrolib
import pytest

from ventsup.core.decide import decide, initial_state
from ventsup.core.inputs import Reading
from ventsup.core.state import Cause, Decision, Layer, Mode, OverrideRequest

from .helpers import BENIGN, BERLIN, T0, WARM, Step, epoch, inputs, load_demo, run, site

M = 60.0  # one minute [s]


@dataclass(frozen=True)
class Expect:
    """What the last decision of a case must say."""

    mode: Mode
    layer: Layer
    cause: Cause
    targets: dict[str, float | None]
    reason: tuple[str, ...] = ()
    events: tuple[str, ...] = ()
    windows_open: bool | None = None


@dataclass(frozen=True)
class Case:
    """Steps to run on a site made from ``rules`` and ``openings``, and the expectation."""

    id: str
    steps: tuple[Step, ...]
    expect: Expect
    rules: dict[str, Any] = field(default_factory=dict)
    openings: dict[str, Any] = field(default_factory=dict)
    zone: dict[str, Any] = field(default_factory=dict)
    start: float = T0


def both(value: float | None) -> dict[str, float | None]:
    return {"low": value, "high": value}


def check(decision: Decision, expect: Expect) -> None:
    got = (decision.mode, decision.layer, decision.cause)
    assert got == (expect.mode, expect.layer, expect.cause), decision.reason
    assert decision.targets.keys() == expect.targets.keys()
    for name, want in expect.targets.items():
        actual = decision.targets[name]
        if want is None:
            assert actual is None, (name, decision.targets)
        else:
            assert actual == pytest.approx(want, abs=1e-9), (name, decision.targets)
    for part in expect.reason:
        assert part in decision.reason
    for event in expect.events:
        assert event in decision.events, decision.events
    if expect.windows_open is not None:
        assert decision.windows_open is expect.windows_open


def run_case(case: Case) -> Decision:
    config = site(case.rules, openings=case.openings, zone=case.zone)
    return run(config, case.steps, start=case.start)[-1][0]


def table(cases: list[Case]) -> Any:
    return pytest.mark.parametrize("case", cases, ids=[c.id for c in cases])


def s(
    at: float, base: dict[str, Any] = BENIGN, request: OverrideRequest | None = None, **kw: Any
) -> Step:
    """A step ``at`` seconds after the start with inputs ``base`` changed by ``kw``."""
    return Step(at, {**base, **kw}, request)


# --------------------------------------------------------------------------- 1 life safety

ALARM = {"alarms": [True]}
CLEAR = {"alarms": [False]}
UNKNOWN_ALARM = {"alarms": [None]}
RELEASED = both(None)
# The fire fighters' smoke-control panel has the highest priority of any control
# point; smoke-control equipment is listed fire-system equipment (IBC §909.16.3,
# NFPA 92 §6.4.1) [pub]: ventsup releases the openings or drives the fire position.
SAFETY = [
    Case(
        "alarm-releases",
        (s(0, WARM, **ALARM),),
        Expect(
            Mode.RELEASED,
            Layer.LIFE_SAFETY,
            Cause.SMOKE,
            RELEASED,
            ("released to the fire system: smoke alarm alarm_1 active since 10:00",),
            ("alarm latched: alarm_1",),
            windows_open=True,  # released, feedback unknown: counted open for the plant
        ),
    ),
    Case(
        "alarm-drives-fire-position",
        (s(0, BENIGN, **ALARM),),
        Expect(
            Mode.FIRE_POSITION,
            Layer.LIFE_SAFETY,
            Cause.SMOKE,
            {"low": None, "high": 1.0},
            ("fire strategy positions: smoke alarm alarm_1 active since 10:00",),
        ),
        openings={"high": {"fire_position": "100 %"}},  # a smoke vent the strategy opens
    ),
    Case(
        "alarm-drives-closed-fire-position",
        (s(0, WARM, **ALARM),),
        Expect(Mode.FIRE_POSITION, Layer.LIFE_SAFETY, Cause.SMOKE, {"low": 0.0, "high": None}),
        openings={"low": {"fire_position": "0 %"}},
    ),
    Case(
        "latched-one-second-before-clear-hold",
        (s(0, WARM, **ALARM), s(M, WARM, **CLEAR), s(M + 899, WARM, **CLEAR)),
        Expect(
            Mode.RELEASED,
            Layer.LIFE_SAFETY,
            Cause.SMOKE,
            RELEASED,
            ("smoke alarm clear since 10:01, latched until 10:16 (clear hold 15 min)",),
        ),
    ),
    Case(
        "released-exactly-at-clear-hold",
        (s(0, WARM, **ALARM), s(M, WARM, **CLEAR), s(M + 900, WARM, **CLEAR)),
        Expect(
            Mode.FREE_COOLING,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.6),
            ("free cooling at 60 %",),
            ("alarm latch released",),
        ),
    ),
    Case(
        "unknown-alarm-point-keeps-latch",
        (s(0, WARM, **ALARM), s(M, WARM, **UNKNOWN_ALARM), s(3 * 3600, WARM, **UNKNOWN_ALARM)),
        Expect(
            Mode.RELEASED,
            Layer.LIFE_SAFETY,
            Cause.SMOKE,
            RELEASED,
            ("smoke alarm latched; alarm point alarm_1 unknown, so not yet clear",),
        ),
    ),
    Case(
        "stale-alarm-point-keeps-latch",
        (s(0, WARM, **ALARM), s(M, WARM, stale=["alarm_1"]), s(3 * 3600, WARM, stale=["alarm_1"])),
        Expect(Mode.RELEASED, Layer.LIFE_SAFETY, Cause.SMOKE, RELEASED, ("not yet clear",)),
    ),
    Case(
        "clear-hold-restarts-after-unknown",
        (
            s(0, WARM, **ALARM),
            s(M, WARM, **CLEAR),
            s(5 * M, WARM, **UNKNOWN_ALARM),
            s(6 * M, WARM, **CLEAR),
            s(6 * M + 899, WARM, **CLEAR),
        ),
        Expect(
            Mode.RELEASED,
            Layer.LIFE_SAFETY,
            Cause.SMOKE,
            RELEASED,
            ("clear since 10:06, latched until 10:21",),
        ),
    ),
    Case(
        "retrigger-during-hold-keeps-first-since",
        (s(0, WARM, **ALARM), s(M, WARM, **CLEAR), s(10 * M, WARM, **ALARM)),
        Expect(Mode.RELEASED, Layer.LIFE_SAFETY, Cause.SMOKE, RELEASED, ("active since 10:00",)),
    ),
    Case(
        "unknown-alarm-point-without-latch-closes",
        (s(0, WARM, **UNKNOWN_ALARM),),
        Expect(
            Mode.FAULT,
            Layer.FAULT,
            Cause.FAULT,
            both(0.0),
            ("closed: smoke alarm status unknown (alarm_1)",),
        ),
    ),
    Case(
        "alarm-beats-override",
        (s(0, BENIGN, OverrideRequest("open", 3600, who="alice")), s(M, BENIGN, **ALARM)),
        Expect(Mode.RELEASED, Layer.LIFE_SAFETY, Cause.SMOKE, RELEASED),
    ),
    Case(
        "alarm-beats-rain",
        (s(0, WARM, rain=True, **ALARM),),
        Expect(Mode.RELEASED, Layer.LIFE_SAFETY, Cause.SMOKE, RELEASED),
    ),
    Case(
        "alarm-beats-fire-position-over-rain",
        (s(0, WARM, rain=True, **ALARM),),
        Expect(Mode.FIRE_POSITION, Layer.LIFE_SAFETY, Cause.SMOKE, {"low": None, "high": 1.0}),
        openings={"high": {"fire_position": "100 %"}},
    ),
]


@table(SAFETY)
def test_life_safety(case: Case) -> None:
    check(run_case(case), case.expect)


def test_alarm_latch_counts_from_an_epoch_of_zero() -> None:
    """A clear time of exactly 0.0 s is a time like any other (a simulation may start there)."""
    config = site()
    steps = [s(-M, **ALARM), s(0, **CLEAR), s(600, **CLEAR), s(900, **CLEAR)]
    results = run(config, steps, start=0.0)
    assert results[2][1].alarm_clear_since == 0.0
    assert results[3][0].layer == Layer.COMFORT
    assert "alarm latch released" in results[3][0].events


# --------------------------------------------------------------------------- 2 protection

RAIN_CAPPED = {"low": 0.0, "high": 0.1}  # high has a rain-safe 10 % position [practice]
RAIN = [
    Case(
        "rain-caps-at-rain-position",
        (s(0, WARM, rain=True),),
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.RAIN,
            RAIN_CAPPED,
            ("capped: rain since 10:00 (rain = wet); dry delay 20 min",),
            windows_open=True,
        ),
    ),
    Case(
        "rain-closes-an-idle-zone",
        (s(0, BENIGN, rain=True),),
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.RAIN,
            both(0.0),
            ("closed: rain since 10:00 (rain = wet); dry delay 20 min",),
        ),
    ),
    Case(
        "rain-closes-fully-without-rain-position",
        (s(0, WARM, rain=True),),
        Expect(Mode.PROTECTED, Layer.PROTECTION, Cause.RAIN, both(0.0), ("closed: rain since",)),
        openings={"high": {"rain_position": "0 %"}},
    ),
    Case(
        "rain-since-is-the-first-wet-reading",
        (s(0, WARM, rain=True), s(5 * M, WARM, rain=True)),
        Expect(Mode.PROTECTED, Layer.PROTECTION, Cause.RAIN, RAIN_CAPPED, ("rain since 10:00",)),
    ),
    Case(
        "dry-delay-one-second-before-edge",
        (s(0, WARM, rain=True), s(5 * M, WARM, rain=True), s(6 * M, WARM), s(5 * M + 1199, WARM)),
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.RAIN,
            RAIN_CAPPED,
            ("capped: rain stopped at 10:05 (rain = dry); dry delay 20 min until 10:25",),
        ),
    ),
    Case(
        "dry-delay-edge-reopens",
        (s(0, WARM, rain=True), s(5 * M, WARM, rain=True), s(6 * M, WARM), s(5 * M + 1200, WARM)),
        Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(0.6)),
    ),
    Case(
        "rain-closes-at-once-within-minimum-open-time",
        (s(0, WARM), s(M, WARM, rain=True)),
        Expect(Mode.PROTECTED, Layer.PROTECTION, Cause.RAIN, RAIN_CAPPED, ("rain since 10:01",)),
    ),
]


@table(RAIN)
def test_rain(case: Case) -> None:
    check(run_case(case), case.expect)


def test_rain_since_counts_from_an_epoch_of_zero() -> None:
    """Rain first seen at exactly 0.0 s keeps that start time on the next evaluation."""
    results = run(site(), [s(0, WARM, rain=True), s(M, WARM, rain=True)], start=0.0)
    assert results[1][1].rain_since == 0.0
    assert "rain since 01:00" in results[1][0].reason  # 00:00 UTC is 01:00 in Berlin


def wind(speed: float | None, direction: float | None = 90.0) -> dict[str, Any]:
    return {"wind_speed": speed, "wind_direction": direction}


# Limits in BASE_RULES: cap 8 m/s, close 10 m/s; windward cap 6 m/s, close 8 m/s
# (5-8 m/s and about 10 m/s [practice]); reopen at 80 % after a 15 min hold [practice].
# Wind from 90 deg (east) has neither facade windward; low faces 0, high faces 180.
WIND = [
    Case(
        "below-cap",
        (s(0, WARM, **wind(7.9)),),
        Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(0.6)),
    ),
    Case(
        "at-cap-is-not-above",
        (s(0, WARM, **wind(8.0)),),
        Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(0.6)),
    ),
    Case(
        "cap",
        (s(0, WARM, **wind(8.5)),),
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.WIND,
            both(0.3),
            ("capped: wind 8.5 m/s above 8.0 m/s; high, low capped at 30 %",),
        ),
    ),
    Case(
        "close",
        (s(0, WARM, **wind(10.5)),),
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.WIND,
            both(0.0),
            ("closed: wind 10.5 m/s above 10.0 m/s; high, low closed",),
        ),
    ),
    Case(
        "windward-lower-cap",
        (s(0, WARM, **wind(7.0, 0.0)),),
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.WIND,
            {"low": 0.3, "high": 0.6},
            ("capped: wind 7.0 m/s above 6.0 m/s from 0°; low capped at 30 %",),
        ),
    ),
    Case(
        "windward-lower-close-leeward-cap",
        (s(0, WARM, **wind(9.0, 0.0)),),
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.WIND,
            {"low": 0.0, "high": 0.3},
            ("wind 9.0 m/s above 8.0 m/s from 0°; low closed; high capped at 30 %",),
        ),
    ),
    Case(
        "windward-angle-edge-is-windward",
        (s(0, WARM, **wind(7.0, 45.0)),),
        Expect(Mode.PROTECTED, Layer.PROTECTION, Cause.WIND, {"low": 0.3, "high": 0.6}),
    ),
    Case(
        "just-outside-windward-angle",
        (s(0, WARM, **wind(7.0, 45.5)),),
        Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(0.6)),
    ),
    Case(
        "windward-angle-wraps-through-north",
        (s(0, WARM, **wind(7.0, 315.0)),),
        Expect(Mode.PROTECTED, Layer.PROTECTION, Cause.WIND, {"low": 0.3, "high": 0.6}),
    ),
    Case(
        "south-wind-on-the-south-facade",
        (s(0, WARM, **wind(7.0, 180.0)),),
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.WIND,
            {"low": 0.6, "high": 0.3},
            ("from 180°; high capped at 30 %",),
        ),
    ),
    Case(
        "unknown-direction-every-facade-windward",
        (s(0, WARM, **wind(7.0, None)),),
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.WIND,
            both(0.3),
            (
                "wind 7.0 m/s above 6.0 m/s; wind direction unknown, every façade taken as "
                "windward; high, low capped at 30 %",
            ),
        ),
    ),
    Case(
        "stale-direction-every-facade-windward",
        (s(0, WARM, stale=["wind_direction"], **wind(7.0, 90.0)),),
        Expect(Mode.PROTECTED, Layer.PROTECTION, Cause.WIND, both(0.3), ("direction unknown",)),
    ),
    Case(
        "gust-hold-one-second-before-edge",
        (s(0, WARM, **wind(8.5)), s(M, WARM, **wind(6.4)), s(899, WARM, **wind(6.4))),
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.WIND,
            both(0.3),
            (
                "capped: wind 6.4 m/s, holding until calm (≤ 6.4 m/s) for 15 min, "
                "not before 10:15; high, low capped at 30 %",
            ),
        ),
    ),
    Case(
        "gust-hold-edge-reopens-at-reopen-ratio",
        (s(0, WARM, **wind(8.5)), s(M, WARM, **wind(6.4)), s(900, WARM, **wind(6.4))),
        Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(0.6)),
    ),
    Case(
        "above-reopen-ratio-restarts-the-hold",
        (s(0, WARM, **wind(8.5)), s(M, WARM, **wind(6.5)), s(900, WARM, **wind(2.0))),
        Expect(Mode.PROTECTED, Layer.PROTECTION, Cause.WIND, both(0.3), ("not before 10:16",)),
    ),
    Case(
        "hold-from-last-reading-above-reopen-ratio",
        (s(0, WARM, **wind(8.5)), s(M, WARM, **wind(6.5)), s(960, WARM, **wind(2.0))),
        Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(0.6)),
    ),
    Case(
        "close-hold-keeps-closed-below-cap",
        (s(0, WARM, **wind(10.5)), s(M, WARM, **wind(7.0))),
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.WIND,
            both(0.0),
            ("wind 7.0 m/s, holding until calm (≤ 8.0 m/s) for 15 min, not before 10:15",),
        ),
    ),
]


@table(WIND)
def test_wind(case: Case) -> None:
    check(run_case(case), case.expect)


COLD = [
    Case(
        "below-cold-floor-closes",
        (s(0, WARM, temp_outdoor=4.9),),
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.COLD,
            both(0.0),
            ("closed: outdoor air 4.9 °C below the cold limit 5.0 °C",),
        ),
        rules={"free_cooling": {"outdoor_min": "0 C"}},  # lets the floor alone decide
    ),
    Case(
        "at-cold-floor-stays-open",
        (s(0, WARM, temp_outdoor=5.0),),
        Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(0.6)),
        rules={"free_cooling": {"outdoor_min": "0 C"}},
    ),
    Case(
        "cold-closes-at-once-within-minimum-open-time",
        (s(0, WARM), s(M, WARM, temp_outdoor=4.0)),
        Expect(Mode.PROTECTED, Layer.PROTECTION, Cause.COLD, both(0.0)),
    ),
]


@table(COLD)
def test_cold(case: Case) -> None:
    check(run_case(case), case.expect)


def fb(low: float | None, **extra: Any) -> dict[str, Any]:
    """Inputs with position feedback of the low opening (None: never received)."""
    return {**WARM, "feedback": {"low": low}, **extra}


FAULT_AT_180 = (s(0, WARM), s(179, fb(0.0)), s(180, fb(0.0)))
# feedback_timeout 3 min and feedback_tolerance 10 % are site choices (BASE_RULES).
ACTUATOR_FEEDBACK = [
    Case(
        "feedback-off-within-timeout",
        FAULT_AT_180[:2],
        Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(0.6)),
    ),
    Case(
        "feedback-off-at-timeout-closes",
        FAULT_AT_180,
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.ACTUATOR,
            {"low": 0.0, "high": 0.6},
            ("capped: actuator fault: low reads 0 %, commanded 60 %; closing and holding closed",),
            ("actuator fault low",),
        ),
    ),
    Case(
        "latched-while-feedback-disagrees",
        (*FAULT_AT_180, s(240, fb(0.6))),
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.ACTUATOR,
            {"low": 0.0, "high": 0.6},
            ("low reads 60 %, commanded 0 %",),
        ),
    ),
    Case(
        "latched-while-feedback-unknown",
        (*FAULT_AT_180, s(240, fb(None)), s(3600, fb(None, stale=["low_feedback"]))),
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.ACTUATOR,
            {"low": 0.0, "high": 0.6},
            ("low not at its command since 10:03",),
        ),
    ),
    Case(
        "clears-when-feedback-agrees-then-minimum-closed-time",
        (*FAULT_AT_180, s(240, fb(0.6)), s(300, fb(0.05))),
        Expect(
            Mode.HELD,
            Layer.ACTUATOR_CARE,
            Cause.ACTUATOR_CARE,
            {"low": 0.0, "high": 0.6},
            ("held: low at 0 % (closed since 10:03, minimum time closed 10 min)",),
            ("actuator low back at its command",),
        ),
    ),
    Case(
        "feedback-within-tolerance",
        (s(0, WARM), s(180, fb(0.5))),
        Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(0.6)),
    ),
    Case(
        "stale-feedback-never-trips",
        (s(0, WARM), s(600, fb(0.0, stale=["low_feedback"]))),
        Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(0.6)),
    ),
]


@table(ACTUATOR_FEEDBACK)
def test_actuator_feedback(case: Case) -> None:
    check(run_case(case), case.expect)


# --------------------------------------------------------------------------- 3 faults

STALE_SINCE_0945 = Reading.stale("temp_indoor", T0 - 900)
FAULTS = [
    Case(
        "stale-indoor-fallback-closed",
        (s(0, WARM, temp_indoor=STALE_SINCE_0945),),
        Expect(
            Mode.FAULT,
            Layer.FAULT,
            Cause.FAULT,
            both(0.0),
            (
                "closed: indoor temperature temp_indoor unknown (no valid value since 09:45); "
                "fallback closed",
            ),
        ),
    ),
    Case(
        "missing-indoor-fallback-closed",
        (s(0, WARM, temp_indoor=None),),
        Expect(Mode.FAULT, Layer.FAULT, Cause.FAULT, both(0.0), ("(never received)",)),
    ),
    Case(
        "stale-indoor-fallback-hold",
        (s(0, WARM), s(M, WARM, stale=["temp_indoor"])),
        Expect(
            Mode.FAULT,
            Layer.FAULT,
            Cause.FAULT,
            both(0.6),
            (
                "fault: indoor temperature temp_indoor unknown (no valid value since 10:01); "
                "fallback: hold the last positions",
            ),
        ),
        rules={"indoor_unknown": "hold"},
    ),
    Case(
        "stale-indoor-fallback-fraction",
        (s(0, WARM, stale=["temp_indoor"]),),
        Expect(Mode.FAULT, Layer.FAULT, Cause.FAULT, both(0.25), ("fallback position 25 %",)),
        rules={"indoor_unknown": "25 %"},
    ),
    Case(
        "fallback-fraction-capped-by-rain",
        (s(0, WARM, rain=True, stale=["temp_indoor"]),),
        Expect(Mode.PROTECTED, Layer.PROTECTION, Cause.RAIN, RAIN_CAPPED, ("rain since 10:00",)),
        rules={"indoor_unknown": "25 %"},
    ),
    Case(
        "fallback-fraction-closed-when-outdoor-unknown",
        (s(0, WARM, temp_outdoor=None, stale=["temp_indoor"]),),
        Expect(
            Mode.FAULT,
            Layer.FAULT,
            Cause.FAULT,
            both(0.0),
            ("closed: outdoor temperature temp_outdoor unknown (never received)",),
        ),
        rules={"indoor_unknown": "25 %"},
    ),
    Case(
        "fallback-hold-closed-when-alarm-point-unknown",
        (s(0, WARM), s(M, WARM, stale=["temp_indoor"], **UNKNOWN_ALARM)),
        Expect(Mode.FAULT, Layer.FAULT, Cause.FAULT, both(0.0), ("smoke alarm status unknown",)),
        rules={"indoor_unknown": "hold"},
    ),
    Case(
        "unknown-rain-assumed-wet",
        (s(0, WARM, rain=None),),
        Expect(
            Mode.FAULT,
            Layer.FAULT,
            Cause.FAULT,
            RAIN_CAPPED,
            ("capped: rain sensor rain unknown (never received): assumed wet; dry delay 20 min",),
        ),
    ),
    Case(
        "stale-rain-reading-with-a-value-assumed-wet",
        (s(0, WARM, rain=Reading("rain", False, "stale", T0)),),
        Expect(
            Mode.FAULT,
            Layer.FAULT,
            Cause.FAULT,
            RAIN_CAPPED,
            ("rain sensor rain unknown (no valid value since 10:00): assumed wet",),
        ),
    ),
    Case(
        "rain-back-dry-after-unknown-waits-the-dry-delay",
        (s(0, WARM, rain=None), s(M, WARM), s(1199, WARM)),
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.RAIN,
            RAIN_CAPPED,
            ("rain stopped at 10:00 (rain = dry); dry delay 20 min until 10:20",),
        ),
    ),
    Case(
        "unknown-wind-assumed-high",
        (s(0, WARM, wind_speed=None),),
        Expect(
            Mode.FAULT,
            Layer.FAULT,
            Cause.FAULT,
            both(0.0),
            ("closed: wind sensor wind_speed unknown (never received): assumed above 10.0 m/s",),
        ),
    ),
    Case(
        "stale-wind-reading-with-a-value-assumed-high",
        (s(0, WARM, wind_speed=Reading("wind_speed", 1.0, "stale", T0 - 600)),),
        Expect(Mode.FAULT, Layer.FAULT, Cause.FAULT, both(0.0), ("no valid value since 09:50",)),
    ),
    Case(
        "wind-back-calm-after-unknown-waits-the-hold",
        (s(0, WARM, wind_speed=None), s(M, WARM, wind_speed=2.0), s(899, WARM, wind_speed=2.0)),
        Expect(
            Mode.PROTECTED,
            Layer.PROTECTION,
            Cause.WIND,
            both(0.0),
            ("holding until calm (≤ 8.0 m/s) for 15 min, not before 10:15",),
        ),
    ),
    Case(
        "unknown-outdoor-temperature-closes",
        (s(0, WARM, temp_outdoor=None),),
        Expect(
            Mode.FAULT,
            Layer.FAULT,
            Cause.FAULT,
            both(0.0),
            ("closed: outdoor temperature temp_outdoor unknown (never received)",),
        ),
    ),
    Case(
        "stale-indoor-reading-with-a-value-is-not-good",
        (s(0, WARM, temp_indoor=Reading("temp_indoor", 30.0, "stale", T0)),),
        Expect(Mode.FAULT, Layer.FAULT, Cause.FAULT, both(0.0), ("fallback closed",)),
    ),
    Case(
        "stale-co2-reading-with-a-value-is-not-good",
        (s(0, BENIGN, co2=Reading("co2", 1500.0, "stale", T0)),),
        Expect(Mode.IDLE, Layer.COMFORT, Cause.COMFORT, both(0.0)),
    ),
]


@table(FAULTS)
def test_faults(case: Case) -> None:
    check(run_case(case), case.expect)


# --------------------------------------------------------------------------- 4 override


def req(action: str, minutes: float = 30, **kw: Any) -> OverrideRequest:
    return OverrideRequest(action, minutes * 60, **kw)  # type: ignore[arg-type]


OVERRIDE = [
    Case(
        "open",
        (s(0, BENIGN, req("open", who="alice", why="airing after an event")),),
        Expect(
            Mode.OVERRIDE,
            Layer.OVERRIDE,
            Cause.OPERATOR,
            both(1.0),
            ("opened by operator alice until 10:30: airing after an event",),
            ("override open by alice for 30 min: airing after an event",),
        ),
    ),
    Case(
        "open-with-position",
        (s(0, BENIGN, req("open", position=0.5, who="alice")),),
        Expect(Mode.OVERRIDE, Layer.OVERRIDE, Cause.OPERATOR, both(0.5)),
    ),
    Case(
        "close",
        (s(0, WARM, req("close", who="bob")),),
        Expect(
            Mode.OVERRIDE,
            Layer.OVERRIDE,
            Cause.OPERATOR,
            both(0.0),
            ("closed by operator bob until 10:30",),
        ),
    ),
    Case(
        "hold-current-positions",
        (s(0, WARM), s(M, BENIGN, req("hold", who="bob"))),
        Expect(
            Mode.OVERRIDE,
            Layer.OVERRIDE,
            Cause.OPERATOR,
            both(0.6),
            ("held by operator bob until 10:31",),
        ),
    ),
    Case(
        "hold-at-position",
        (s(0, WARM, req("hold", position=0.4)),),
        Expect(Mode.OVERRIDE, Layer.OVERRIDE, Cause.OPERATOR, both(0.4)),
    ),
    Case(
        "one-second-before-until",
        (s(0, BENIGN, req("open", who="alice")), s(1799, BENIGN)),
        Expect(Mode.OVERRIDE, Layer.OVERRIDE, Cause.OPERATOR, both(1.0)),
    ),
    Case(
        "expires-exactly-at-until",
        (s(0, BENIGN, req("open", who="alice")), s(1800, BENIGN)),
        Expect(
            Mode.IDLE,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.0),
            ("closed: indoor 21.0 °C below 23.0 °C",),
            ("override open by alice expired",),
        ),
    ),
    Case(
        "auto-ends-it",
        (s(0, BENIGN, req("open", who="alice")), s(900, BENIGN, req("auto", who="bob"))),
        Expect(Mode.IDLE, Layer.COMFORT, Cause.COMFORT, both(0.0), (), ("override ended by bob",)),
    ),
    Case(
        # actuator care counts the override's opening as the opening's last move
        "auto-within-minimum-open-time-is-held",
        (s(0, BENIGN, req("open", who="alice")), s(M, BENIGN, req("auto", who="bob"))),
        Expect(
            Mode.HELD,
            Layer.ACTUATOR_CARE,
            Cause.ACTUATOR_CARE,
            both(1.0),
            ("held: high, low at 100 % (open since 10:00, minimum time open 10 min)",),
        ),
    ),
    Case(
        "capped-by-rain",
        (s(0, BENIGN, req("open"), rain=True),),
        Expect(Mode.PROTECTED, Layer.PROTECTION, Cause.RAIN, RAIN_CAPPED, ("capped: rain since",)),
    ),
    Case(
        "capped-by-wind",
        (s(0, BENIGN, req("open"), **wind(8.5)),),
        Expect(Mode.PROTECTED, Layer.PROTECTION, Cause.WIND, both(0.3)),
    ),
    Case(
        "beats-the-security-window",
        (s(0, BENIGN, req("open", who="alice")),),
        Expect(Mode.OVERRIDE, Layer.OVERRIDE, Cause.OPERATOR, both(1.0)),
        rules={"schedule": {"security": ["00:00-24:00"]}},
    ),
    Case(
        "not-held-by-actuator-care",
        (s(0, WARM), s(M, WARM, req("close", who="bob"))),
        Expect(Mode.OVERRIDE, Layer.OVERRIDE, Cause.OPERATOR, both(0.0)),
    ),
    Case(
        "fault-fallback-beats-override",
        (s(0, BENIGN, req("open"), temp_indoor=None),),
        Expect(Mode.FAULT, Layer.FAULT, Cause.FAULT, both(0.0), ("fallback closed",)),
    ),
]


@table(OVERRIDE)
def test_override(case: Case) -> None:
    check(run_case(case), case.expect)


def test_override_duration_is_limited_to_the_site_maximum() -> None:
    config = site(override={"max_duration": "1 h"})  # site choice
    steps = [s(0, BENIGN, req("open", minutes=120, who="alice")), s(3599, BENIGN), s(3600, BENIGN)]
    results = run(config, steps)
    assert "override open by alice for 60 min" in results[0][0].events
    assert "until 11:00" in results[0][0].reason
    assert results[1][0].mode == Mode.OVERRIDE
    assert results[2][0].mode != Mode.OVERRIDE


@pytest.mark.parametrize(
    ("request_", "message"),
    [
        (OverrideRequest("open", 0.0), "duration must be positive"),
        (OverrideRequest("open", 60.0, position=1.5), "position must be a fraction 0-1"),
        (OverrideRequest("opne", 60.0), "action must be 'open', 'close', 'hold' or 'auto'"),  # type: ignore[arg-type]
    ],
    ids=["zero-duration", "position-above-one", "unknown-action"],
)
def test_override_request_rejects_bad_values(request_: OverrideRequest, message: str) -> None:
    with pytest.raises(ValueError, match=message):
        decide(site(), "room", inputs(T0), initial_state(), T0, request=request_)


# --------------------------------------------------------------------------- 5 schedule

SCHEDULE_RULES: dict[str, Any] = {
    "schedule": {"occupied": ["Mon-Fri 07:00-19:00"], "security": ["01:00-04:00"]},
    "night_flush": {"hours": "22:00-06:00"},
}
# the security window limits the low opening only (as in the demo site's hall)
SCHEDULE_OPENINGS: dict[str, Any] = {"high": {"secure_position": "100 %"}}
FLUSH = {**WARM, "temp_indoor": 25.0}  # above the night flush start, 10 K above outdoors


def monday(hour: int, minute: int = 0, day: int = 3) -> float:
    return epoch(BERLIN, 2024, 6, day, hour, minute)


def sched(case_id: str, start: float, values: dict[str, Any], expect: Expect) -> Case:
    return Case(
        case_id,
        (s(0, values),),
        expect,
        rules=SCHEDULE_RULES,
        openings=SCHEDULE_OPENINGS,
        start=start,
    )


UNOCCUPIED = Expect(
    Mode.UNOCCUPIED,
    Layer.SCHEDULE,
    Cause.SCHEDULE,
    both(0.0),
    ("closed: outside occupied and night-flush hours",),
)
FREE_COOLING_60 = Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(0.6))
NIGHT_FLUSH_OPEN = Expect(
    Mode.NIGHT_FLUSH,
    Layer.COMFORT,
    Cause.COMFORT,
    both(1.0),
    ("night flush: indoor 25.0 °C, outdoor 15.0 °C; stops at 19.0 °C",),
)
SCHEDULE = [
    sched("before-occupied-hours", monday(6, 59), WARM, UNOCCUPIED),
    sched("occupied-starts-at-0700", monday(7, 0), WARM, FREE_COOLING_60),
    sched("occupied-last-minute", monday(18, 59), WARM, FREE_COOLING_60),
    sched("occupied-ends-at-1900", monday(19, 0), WARM, UNOCCUPIED),
    sched("saturday-unoccupied", monday(12, 0, day=8), WARM, UNOCCUPIED),
    sched("before-night-flush-hours", monday(21, 59), FLUSH, UNOCCUPIED),
    sched("night-flush-hours-start-at-2200", monday(22, 0), FLUSH, NIGHT_FLUSH_OPEN),
    sched("night-flush-last-minute", monday(5, 59, day=4), FLUSH, NIGHT_FLUSH_OPEN),
    sched("night-flush-hours-end-at-0600", monday(6, 0, day=4), FLUSH, UNOCCUPIED),
    sched(
        "security-window-caps-the-low-opening-only",
        monday(2, 0, day=4),
        FLUSH,
        Expect(
            Mode.NIGHT_FLUSH,
            Layer.COMFORT,
            Cause.COMFORT,
            {"low": 0.0, "high": 1.0},
            ("; low limited by the security window (low 0 %)",),
        ),
    ),
    sched(
        "security-window-idle-zone-is-secured",
        monday(2, 0, day=4),
        BENIGN,
        Expect(
            Mode.SECURED,
            Layer.SCHEDULE,
            Cause.SCHEDULE,
            both(0.0),
            ("closed: security window (low 0 %)",),
        ),
    ),
    sched("security-window-ends-at-0400", monday(4, 0, day=4), FLUSH, NIGHT_FLUSH_OPEN),
    Case(
        "security-window-that-limits-nothing-does-not-decide",
        (s(0, BENIGN),),
        Expect(
            Mode.IDLE,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.0),
            ("closed: night flush not needed (indoor 21.0 °C, starts at 24.0 °C)",),
        ),
        rules=SCHEDULE_RULES,
        openings={"low": {"secure_position": "100 %"}, "high": {"secure_position": "100 %"}},
        start=monday(2, 0, day=4),
    ),
]


@table(SCHEDULE)
def test_schedule(case: Case) -> None:
    check(run_case(case), case.expect)


@pytest.mark.parametrize(
    ("zone", "hour", "values", "expect"),
    [
        (
            "commons",
            23,
            {"temp_indoor": 26.0},
            Expect(
                Mode.NIGHT_FLUSH,
                Layer.COMFORT,
                Cause.COMFORT,
                {"low_north": 0.0, "low_south": 0.0, "high_north": 1.0, "high_south": 1.0},
                ("low_north, low_south limited by the security window",),
            ),
        ),
        (
            "classroom_east",
            19,
            {"temp_indoor": 26.0},
            Expect(
                Mode.SECURED,
                Layer.SCHEDULE,
                Cause.SCHEDULE,
                {"windows": 0.0},
                ("closed: security window (windows 0 %)",),
            ),
        ),
        (
            "classroom_east",
            10,
            {"temp_indoor": 24.0},
            Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, {"windows": 0.6}),
        ),
    ],
    ids=["hall-night-low-openings-secured", "classroom-evening-secured", "classroom-day-open"],
)
def test_demo_security_window_caps_low_openings_only(
    zone: str, hour: int, values: dict[str, Any], expect: Expect
) -> None:
    """In the demo site the hall's security window closes the low openings and leaves the
    clerestory (high) openings free; the classroom's closes its windows."""
    config = load_demo()
    t = epoch("America/Chicago", 2024, 6, 3, hour)  # a Monday
    decision, _ = decide(config, zone, inputs(t, **values), initial_state(), t)
    check(decision, expect)


# --------------------------------------------------------------------------- 6 comfort


@pytest.mark.parametrize(
    ("temp_indoor", "fraction"),
    [(23.0, 0.2), (23.5, 0.4), (24.0, 0.6), (24.5, 0.8), (25.0, 1.0), (26.0, 1.0)],
    ids=["at-open-above", "quarter", "half", "three-quarters", "at-full-open", "above-full"],
)
def test_free_cooling_opens_in_proportion(temp_indoor: float, fraction: float) -> None:
    """min_opening 20 % at open_above 23 C, linear to 100 % at full_open_at 25 C (site choice)."""
    decision, _ = decide(site(), "room", inputs(T0, temp_indoor=temp_indoor), initial_state(), T0)
    check(
        decision,
        Expect(
            Mode.FREE_COOLING,
            Layer.COMFORT,
            Cause.COMFORT,
            both(fraction),
            (
                f"free cooling at {fraction * 100:.0f} %: indoor {temp_indoor:.1f} °C "
                "(opens at 23.0 °C, fully open at 25.0 °C), outdoor 15.0 °C",
            ),
            windows_open=True,
        ),
    )
    assert decision.open_area == pytest.approx(3.0 * fraction)  # 2 m2 + 1 m2 [calc]


def dew(temp: float, relative_humidity: float) -> float:
    """Dew point [°C] from psychrolib 2.5 (ASHRAE Fundamentals 2017 ch. 1) [lib]."""
    psychrolib.SetUnitSystem(psychrolib.SI)
    return float(psychrolib.GetTDewPointFromRelHum(temp, relative_humidity))


IDLE_BELOW = Expect(Mode.IDLE, Layer.COMFORT, Cause.COMFORT, both(0.0))
COMFORT = [
    Case(
        "below-open-above",
        (s(0, BENIGN, temp_indoor=22.9),),
        Expect(
            Mode.IDLE,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.0),
            ("closed: indoor 22.9 °C below 23.0 °C, no cooling needed",),
            windows_open=False,
        ),
    ),
    Case(
        "hysteresis-keeps-open-at-close-below",
        (s(0, WARM), s(900, BENIGN, temp_indoor=22.0)),
        Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(0.2)),
    ),
    Case(
        "hysteresis-closes-below-close-below",
        (s(0, WARM), s(900, BENIGN, temp_indoor=21.9)),
        Expect(
            Mode.IDLE,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.0),
            ("closed: indoor 21.9 °C below 23.0 °C",),
        ),
    ),
    Case(
        "hysteresis-stays-closed-inside-the-band",
        (s(0, BENIGN, temp_indoor=22.5),),
        IDLE_BELOW,
    ),
    Case(
        "outdoor-below-band",
        (s(0, WARM, temp_outdoor=11.9),),
        Expect(
            Mode.IDLE,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.0),
            ("closed: indoor 24.0 °C is warm, but outdoor air 11.9 °C is below 12.0 °C",),
        ),
    ),
    Case(
        "outdoor-at-band-bottom",
        (s(0, WARM, temp_outdoor=12.0),),
        FREE_COOLING_60,
    ),
    Case(
        "outdoor-at-band-top",
        (s(0, WARM, temp_indoor=25.0, temp_outdoor=23.0),),
        Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(1.0)),
    ),
    Case(
        "outdoor-above-band",
        (s(0, WARM, temp_indoor=25.0, temp_outdoor=23.1),),
        Expect(
            Mode.IDLE,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.0),
            ("closed: indoor 25.0 °C is warm, but outdoor air 23.1 °C is above 23.0 °C",),
        ),
    ),
    Case(
        "at-min-difference",
        (s(0, WARM, temp_indoor=23.5, temp_outdoor=22.5),),
        Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(0.4)),
    ),
    Case(
        "short-of-min-difference",
        (s(0, WARM, temp_indoor=23.5, temp_outdoor=22.6),),
        Expect(
            Mode.IDLE,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.0),
            ("but outdoor air 22.6 °C is not 1.0 K cooler than indoors",),
        ),
    ),
    Case(
        # psychrolib: 20 C at 80 % RH -> dew point 16.45 C, below 16.8 C [lib]
        "dew-point-from-humidity-below-limit",
        (s(0, WARM, temp_outdoor=20.0, humidity_outdoor=80.0),),
        FREE_COOLING_60,
    ),
    Case(
        # psychrolib: 20 C at 83 % RH -> dew point 17.03 C, above 16.8 C [lib]
        "dew-point-from-humidity-above-limit",
        (s(0, WARM, temp_outdoor=20.0, humidity_outdoor=83.0),),
        Expect(
            Mode.IDLE,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.0),
            ("but outdoor dew point 17.0 °C is above 16.8 °C",),
        ),
    ),
    Case(
        "measured-dew-point-is-preferred",
        (s(0, WARM, temp_outdoor=20.0, humidity_outdoor=83.0, dew_point_outdoor=15.0),),
        FREE_COOLING_60,
    ),
    Case(
        "unknown-dew-point-blocks",
        (s(0, WARM, humidity_outdoor=None),),
        Expect(
            Mode.IDLE,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.0),
            ("but the outdoor dew point is unknown",),
        ),
    ),
    Case(
        "no-dew-point-limit",
        (s(0, WARM, humidity_outdoor=None),),
        FREE_COOLING_60,
        rules={"free_cooling": {"dew_point_max": None}},
    ),
    Case(
        "co2-below-threshold",
        (s(0, BENIGN, co2=1199.0),),
        IDLE_BELOW,
    ),
    Case(
        "co2-minimum-opening",
        (s(0, BENIGN, co2=1200.0),),
        Expect(
            Mode.AIR_QUALITY,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.15),
            ("air quality: CO2 1200 ppm (opens at 1200 ppm), minimum opening 15 %",),
        ),
    ),
    Case(
        "co2-hysteresis-keeps-open",
        (s(0, BENIGN, co2=1200.0), s(900, BENIGN, co2=1001.0)),
        Expect(Mode.AIR_QUALITY, Layer.COMFORT, Cause.COMFORT, both(0.15)),
    ),
    Case(
        "co2-hysteresis-closes-at-close-below",
        (s(0, BENIGN, co2=1200.0), s(900, BENIGN, co2=1000.0)),
        IDLE_BELOW,
    ),
    Case(
        "co2-outdoor-too-cold",
        (s(0, BENIGN, co2=1200.0, temp_outdoor=9.9),),
        Expect(
            Mode.IDLE,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.0),
            ("closed: CO2 1200 ppm is high, but outdoor air 9.9 °C below 10.0 °C",),
        ),
    ),
    Case(
        "co2-while-heating-allowed",
        (s(0, BENIGN, co2=1200.0, heating=True),),
        Expect(Mode.AIR_QUALITY, Layer.COMFORT, Cause.COMFORT, both(0.15)),
    ),
    Case(
        "co2-while-heating-blocked",
        (s(0, BENIGN, co2=1200.0, heating=True),),
        Expect(
            Mode.IDLE,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.0),
            ("closed: CO2 1200 ppm is high, but the plant is heating the zone",),
        ),
        rules={"interlock": {"allow_co2_while_heating": False}},
    ),
    Case(
        "free-cooling-wins-over-co2",
        (s(0, WARM, co2=1500.0),),
        FREE_COOLING_60,
    ),
    Case(
        # no cooling by windows while the plant heats (IECC 2021 interlock for operable
        # openings [mem]; here at any size)
        "interlock-while-heating",
        (s(0, WARM, heating=True),),
        Expect(
            Mode.INTERLOCK,
            Layer.COMFORT,
            Cause.INTERLOCK,
            both(0.0),
            ("closed: indoor 24.0 °C is warm, but the plant is heating the zone",),
            windows_open=False,
        ),
    ),
    Case(
        "interlock-while-heating-status-unknown",
        (s(0, WARM, heating=None),),
        Expect(
            Mode.INTERLOCK,
            Layer.COMFORT,
            Cause.INTERLOCK,
            both(0.0),
            ("but the plant's heating status is unknown",),
        ),
    ),
    Case(
        "no-heating-point-no-interlock",
        (s(0, WARM, heating=None),),
        FREE_COOLING_60,
        zone={"heating": None},
    ),
    Case(
        "interlock-switched-off",
        (s(0, WARM, heating=True),),
        FREE_COOLING_60,
        rules={"interlock": {"block_cooling_while_heating": False}},
    ),
]


@table(COMFORT)
def test_comfort(case: Case) -> None:
    check(run_case(case), case.expect)


def test_dew_point_cases_sit_either_side_of_the_limit() -> None:
    """The humidities above are chosen with psychrolib [lib] around 16.8 C [mem]."""
    assert dew(20.0, 0.80) == pytest.approx(16.447, abs=1e-3)
    assert dew(20.0, 0.83) == pytest.approx(17.026, abs=1e-3)
    assert dew(25.0, 0.50) == pytest.approx(13.864, abs=1e-3)  # CHECKS.md row [lib]


NIGHT = epoch(BERLIN, 2024, 6, 3, 23, 0)  # Monday 23:00, inside night flush hours
NIGHT_RULES: dict[str, Any] = {"schedule": {"occupied": ["Mon-Fri 07:00-19:00"]}}


def night(case_id: str, steps: tuple[Step, ...], expect: Expect, **rules: Any) -> Case:
    return Case(case_id, steps, expect, rules={**NIGHT_RULES, **rules}, start=NIGHT)


FLUSHING = Expect(Mode.NIGHT_FLUSH, Layer.COMFORT, Cause.COMFORT, both(1.0))
NIGHT_FLUSH = [
    night(
        "not-needed-below-start",
        (s(0, FLUSH, temp_indoor=23.9),),
        Expect(
            Mode.IDLE,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.0),
            ("closed: night flush not needed (indoor 23.9 °C, starts at 24.0 °C)",),
        ),
    ),
    night("starts-at-start-above", (s(0, FLUSH, temp_indoor=24.0),), FLUSHING),
    night(
        "continues-above-stop-floor",
        (s(0, FLUSH), s(900, FLUSH, temp_indoor=19.1)),
        Expect(
            Mode.NIGHT_FLUSH,
            Layer.COMFORT,
            Cause.COMFORT,
            both(1.0),
            ("night flush: indoor 19.1 °C, outdoor 15.0 °C; stops at 19.0 °C",),
        ),
    ),
    night(
        "stops-at-stop-floor",
        (s(0, FLUSH), s(900, FLUSH, temp_indoor=19.0, temp_outdoor=14.0)),
        Expect(
            Mode.IDLE,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.0),
            ("night flush not needed (indoor 19.0 °C",),
        ),
    ),
    night(
        "outdoor-below-low-limit",
        (s(0, FLUSH, temp_outdoor=11.9),),
        Expect(
            Mode.IDLE,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.0),
            (
                "closed: night flush wanted (indoor 25.0 °C), but outdoor air 11.9 °C is below 12.0 °C",
            ),
        ),
    ),
    night("at-min-difference", (s(0, FLUSH, temp_outdoor=22.0),), FLUSHING),
    night(
        "short-of-min-difference",
        (s(0, FLUSH, temp_outdoor=22.1),),
        Expect(
            Mode.IDLE,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.0),
            ("outdoor air 22.1 °C is not 3.0 K cooler than indoors",),
        ),
    ),
    night("dew-point-at-limit", (s(0, FLUSH, dew_point_outdoor=12.0),), FLUSHING),
    night(
        "dew-point-above-limit",
        (s(0, FLUSH, dew_point_outdoor=12.1),),
        Expect(
            Mode.IDLE,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.0),
            ("outdoor dew point 12.1 °C is above 12.0 °C",),
        ),
    ),
    night(
        "interlock-while-heating",
        (s(0, FLUSH, heating=True),),
        Expect(
            Mode.INTERLOCK,
            Layer.COMFORT,
            Cause.INTERLOCK,
            both(0.0),
            ("closed: night flush wanted (indoor 25.0 °C), but the plant is heating the zone",),
        ),
    ),
    night(
        "disabled",
        (s(0, FLUSH),),
        UNOCCUPIED,
        night_flush={"enabled": False},
    ),
]


@table(NIGHT_FLUSH)
def test_night_flush(case: Case) -> None:
    check(run_case(case), case.expect)


@pytest.mark.parametrize(
    ("feedback", "fire_position", "expected"),
    [
        (None, "release", True),
        ({"low": 0.0, "high": 0.0}, "release", False),
        ({"low": 0.0, "high": 0.3}, "release", True),
        (None, "0 %", False),
    ],
    ids=["released-unknown", "released-reads-closed", "released-reads-open", "fire-closed"],
)
def test_windows_open_output_under_an_alarm(
    feedback: dict[str, float] | None, fire_position: str, expected: bool
) -> None:
    """The plant is told windows are open unless every opening is known closed."""
    config = site(
        openings={"low": {"fire_position": fire_position}, "high": {"fire_position": fire_position}}
    )
    values = {**WARM, "alarms": [True], "feedback": feedback}
    decision, _ = decide(config, "room", inputs(T0, **values), initial_state(), T0)
    assert decision.windows_open is expected


# --------------------------------------------------------------------------- 7 actuator care

CARE = [
    Case(
        "minimum-open-time-holds",
        (s(0, WARM), s(599, BENIGN, temp_indoor=21.9)),
        Expect(
            Mode.HELD,
            Layer.ACTUATOR_CARE,
            Cause.ACTUATOR_CARE,
            both(0.6),
            (
                "held: high, low at 60 % (open since 10:00, minimum time open 10 min); "
                "without the hold: closed: indoor 21.9 °C below 23.0 °C, no cooling needed",
            ),
        ),
    ),
    Case(
        "minimum-open-time-edge",
        (s(0, WARM), s(600, BENIGN, temp_indoor=21.9)),
        IDLE_BELOW,
    ),
    Case(
        "minimum-closed-time-holds",
        (s(0, WARM), s(600, BENIGN, temp_indoor=21.9), s(1199, WARM)),
        Expect(
            Mode.HELD,
            Layer.ACTUATOR_CARE,
            Cause.ACTUATOR_CARE,
            both(0.0),
            ("held: high, low at 0 % (closed since 10:10, minimum time closed 10 min)",),
        ),
    ),
    Case(
        "minimum-closed-time-edge",
        (s(0, WARM), s(600, BENIGN, temp_indoor=21.9), s(1200, WARM)),
        FREE_COOLING_60,
    ),
    Case(
        "step-below-minimum-is-skipped",
        (s(0, WARM), s(M, WARM, temp_indoor=24.2)),
        Expect(
            Mode.FREE_COOLING,
            Layer.COMFORT,
            Cause.COMFORT,
            both(0.6),
            (
                "free cooling at 68 %",
                "(low kept at 60 %, high kept at 60 %: step below the minimum 10 %)",
            ),
        ),
    ),
    Case(
        "step-of-exactly-the-minimum-moves",
        (s(0, WARM), s(M, WARM, temp_indoor=24.25)),
        Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(0.7)),
    ),
    Case(
        "small-step-to-fully-open-is-not-skipped",
        (s(0, WARM, temp_indoor=24.9), s(M, WARM, temp_indoor=25.0)),
        Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(1.0)),
    ),
    Case(
        "moves-per-hour-limit-holds",
        (
            s(0, WARM),  # the first command is not a move from a known position
            s(M, WARM, temp_indoor=25.0),
            s(2 * M, WARM),
            s(3 * M, WARM, temp_indoor=25.0),
            s(4 * M, WARM),
        ),
        Expect(
            Mode.HELD,
            Layer.ACTUATOR_CARE,
            Cause.ACTUATOR_CARE,
            both(1.0),
            ("held: high, low at 100 % (3 moves in the last hour already)",),
        ),
        rules={"actuator": {"max_moves_per_hour": 3}},  # site choice
    ),
    Case(
        "moves-per-hour-window-rolls",
        (
            s(0, WARM),
            s(M, WARM, temp_indoor=25.0),
            s(2 * M, WARM),
            s(3 * M, WARM, temp_indoor=25.0),
            s(4 * M, WARM),
            s(M + 3600, WARM),
        ),
        FREE_COOLING_60,
        rules={"actuator": {"max_moves_per_hour": 3}},
    ),
]


@table(CARE)
def test_actuator_care(case: Case) -> None:
    check(run_case(case), case.expect)


EXHAUSTED = (  # opened at 0, then 3 comfort moves: every dwell and the hourly budget in force
    s(0, WARM),
    s(M, WARM, temp_indoor=25.0),
    s(2 * M, WARM),
    s(3 * M, WARM, temp_indoor=25.0),
)
HIGHER_LAYERS_ACT_AT_ONCE = [
    Case(
        "rain",
        (*EXHAUSTED, s(4 * M, WARM, rain=True)),
        Expect(Mode.PROTECTED, Layer.PROTECTION, Cause.RAIN, RAIN_CAPPED),
    ),
    Case(
        "wind-close",
        (*EXHAUSTED, s(4 * M, WARM, **wind(10.5))),
        Expect(Mode.PROTECTED, Layer.PROTECTION, Cause.WIND, both(0.0)),
    ),
    Case(
        "wind-cap",
        (*EXHAUSTED, s(4 * M, WARM, **wind(8.5))),
        Expect(Mode.PROTECTED, Layer.PROTECTION, Cause.WIND, both(0.3)),
    ),
    Case(
        "cold",
        (*EXHAUSTED, s(4 * M, WARM, temp_outdoor=4.0)),
        Expect(Mode.PROTECTED, Layer.PROTECTION, Cause.COLD, both(0.0)),
    ),
    Case(
        "alarm",
        (*EXHAUSTED, s(4 * M, WARM, **ALARM)),
        Expect(Mode.RELEASED, Layer.LIFE_SAFETY, Cause.SMOKE, RELEASED),
    ),
    Case(
        "outdoor-unknown",
        (*EXHAUSTED, s(4 * M, WARM, temp_outdoor=None)),
        Expect(Mode.FAULT, Layer.FAULT, Cause.FAULT, both(0.0)),
    ),
    Case(
        "indoor-unknown",
        (*EXHAUSTED, s(4 * M, WARM, stale=["temp_indoor"])),
        Expect(Mode.FAULT, Layer.FAULT, Cause.FAULT, both(0.0)),
    ),
    Case(
        "rain-unknown",
        (*EXHAUSTED, s(4 * M, WARM, rain=None)),
        Expect(Mode.FAULT, Layer.FAULT, Cause.FAULT, RAIN_CAPPED),
    ),
    Case(
        "alarm-point-unknown",
        (*EXHAUSTED, s(4 * M, WARM, **UNKNOWN_ALARM)),
        Expect(Mode.FAULT, Layer.FAULT, Cause.FAULT, both(0.0)),
    ),
    Case(
        "security-window",
        (*EXHAUSTED, s(4 * M, WARM)),
        Expect(Mode.SECURED, Layer.SCHEDULE, Cause.SCHEDULE, both(0.0)),
        rules={"schedule": {"security": ["10:04-11:00"]}},
    ),
]


@table(HIGHER_LAYERS_ACT_AT_ONCE)
def test_actuator_care_never_delays_higher_layers(case: Case) -> None:
    rules = {"actuator": {"max_moves_per_hour": 3}, **case.rules}
    config = site(rules)
    results = run(config, case.steps)
    check(results[-1][0], case.expect)
    # the higher layer's move does not spend the comfort layer's hourly budget
    assert results[-1][1].opening("low").moves == results[-2][1].opening("low").moves


def test_protection_moves_are_not_comfort_moves() -> None:
    results = run(site(), [s(0, WARM), s(M, WARM, rain=True), s(2 * M, WARM, rain=True)])
    assert all(state.opening("low").moves == () for _, state in results)


def test_move_below_a_new_cap_is_a_comfort_move() -> None:
    """Comfort wants 20 % as a wind cap of 30 % arrives over a 100 % opening: the
    opening goes to 20 % in one move, and comfort chose that position, so it counts."""
    steps = [s(0, WARM, temp_indoor=26.0), s(11 * M, WARM, temp_indoor=23.0, **wind(8.5))]
    decision, state = run(site(), steps)[-1]
    check(decision, Expect(Mode.FREE_COOLING, Layer.COMFORT, Cause.COMFORT, both(0.2)))
    assert state.opening("low").moves == (T0 + 11 * M,)


def test_cap_below_a_held_opening_moves_it_to_the_cap_at_once() -> None:
    """With the hourly budget spent, comfort may not move the opening down to 20 %, but
    the new wind cap of 30 % still acts at once: the opening goes to the cap."""
    steps = [
        s(0, WARM, temp_indoor=26.0),
        s(M, WARM),  # 100 % -> 60 %: the one comfort move allowed
        s(2 * M, WARM, temp_indoor=23.0, **wind(8.5)),
    ]
    decision, state = run(site({"actuator": {"max_moves_per_hour": 1}}), steps)[-1]
    check(
        decision,
        Expect(Mode.PROTECTED, Layer.PROTECTION, Cause.WIND, both(0.3), ("capped: wind 8.5 m/s",)),
    )
    assert state.opening("low").moves == (T0 + M,)
