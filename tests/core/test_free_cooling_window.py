"""The free cooling window of common practice, written once in degF and once in degC.

Common practice [practice] (shared/CHECKS.md, "free cooling window"): a comfort
band of 68-77 °F; natural ventilation is allowed when the space is at or above
73 °F and outdoors is 50-73 °F. The two rule sets below state that rule in IP
and in SI units; they must load to the same numbers and decide the same at and
around every edge. Input values in °F are converted as the point codec converts
a ``degF`` payload (``parse_quantity``, kept to 1e-9), so that 73.0 °F indoors
is exactly the 73 °F threshold.
"""

from __future__ import annotations

from typing import Any

import pytest

from ventsup.config.units import parse_quantity
from ventsup.core.decide import decide, initial_state
from ventsup.core.state import Decision, Mode

from .helpers import BENIGN, T0, inputs, site

WINDOW_F: dict[str, Any] = {
    "comfort": {"low": "68 degF", "high": "77 degF"},  # comfort band 68-77 °F [practice]
    "free_cooling": {
        "open_above": "73 degF",  # allowed when the space is >= 73 °F [practice]
        "close_below": "72 degF",  # site choice: 1 °F of hysteresis
        "full_open_at": "77 degF",  # fully open at the top of the band (site choice)
        "min_opening": "20 %",  # site choice
        "outdoor_min": "50 degF",  # outdoors 50-73 °F [practice]
        "outdoor_max": "73 degF",  # outdoors 50-73 °F [practice]
        "min_difference": "0 degF",  # the worked case asks for no difference
        "dew_point_max": None,  # the worked case names no dew point limit
    },
    "night_flush": {"enabled": False},
}
# The same rule in °C: exact conversions (t_C = (t_F - 32) * 5/9) written out.
WINDOW_C: dict[str, Any] = {
    "comfort": {"low": "20 C", "high": "25 C"},
    "free_cooling": {
        "open_above": "22.7777777778 C",
        "close_below": "22.2222222222 C",
        "full_open_at": "25 C",
        "min_opening": "20 %",
        "outdoor_min": "10 C",
        "outdoor_max": "22.7777777778 C",
        "min_difference": "0 K",
        "dew_point_max": None,
    },
    "night_flush": {"enabled": False},
}


def f(value: float) -> float:
    """A °F reading as the codec stores it [°C]."""
    return parse_quantity(f"{value!r} degF", "temperature")


def decide_both(indoor_f: float, outdoor_f: float) -> tuple[Decision, Decision]:
    ip = site(WINDOW_F, units="IP")
    si = site(WINDOW_C, units="SI")
    values = {**BENIGN, "temp_indoor": f(indoor_f), "temp_outdoor": f(outdoor_f), "co2": None}
    return tuple(  # type: ignore[return-value]
        decide(config, "room", inputs(T0, **values), initial_state(), T0)[0] for config in (ip, si)
    )


def test_both_rule_sets_load_to_the_same_numbers() -> None:
    ip, si = site(WINDOW_F, units="IP"), site(WINDOW_C, units="SI")
    assert ip.rules == si.rules
    fc = si.rules["r"].free_cooling
    assert fc.open_above == pytest.approx((73 - 32) * 5 / 9, abs=1e-9)  # 22.777... °C [calc]
    assert fc.outdoor_min == 10.0  # 50 °F [calc]


def shown(value_f: float) -> tuple[str, str]:
    """How a reason shows a °F value on the IP and the SI site."""
    return f"{value_f:.1f} °F", f"{(value_f - 32) * 5 / 9:.1f} °C"


INDOOR_EDGE = [  # outdoors 60 °F, inside the band
    (72.9, Mode.IDLE, 0.0),
    (73.0, Mode.FREE_COOLING, 0.2),
    (73.1, Mode.FREE_COOLING, 0.22),  # 20 % + 80 % x 0.1/4 [calc]
]
OUTDOOR_EDGE = [  # indoors 75 °F: 60 % open when allowed [calc]
    (49.9, Mode.IDLE, 0.0),
    (50.0, Mode.FREE_COOLING, 0.6),
    (50.1, Mode.FREE_COOLING, 0.6),
    (72.9, Mode.FREE_COOLING, 0.6),
    (73.0, Mode.FREE_COOLING, 0.6),
    (73.1, Mode.IDLE, 0.0),
]
CASES = [
    pytest.param(indoor, 60.0, mode, fraction, id=f"indoor-{indoor}F")
    for indoor, mode, fraction in INDOOR_EDGE
] + [
    pytest.param(75.0, outdoor, mode, fraction, id=f"outdoor-{outdoor}F")
    for outdoor, mode, fraction in OUTDOOR_EDGE
]
CASES.append(pytest.param(73.0, 73.0, Mode.FREE_COOLING, 0.2, id="indoor-equals-outdoor-73F"))


@pytest.mark.parametrize(("indoor_f", "outdoor_f", "mode", "fraction"), CASES)
def test_free_cooling_window_edges(
    indoor_f: float, outdoor_f: float, mode: Mode, fraction: float
) -> None:
    ip, si = decide_both(indoor_f, outdoor_f)
    for decision in (ip, si):
        assert decision.mode == mode, decision.reason
        assert decision.targets == pytest.approx({"low": fraction, "high": fraction}, abs=1e-9)
    same = ("mode", "layer", "cause", "targets", "windows_open", "open_area")
    assert {k: getattr(ip, k) for k in same} == {k: getattr(si, k) for k in same}
    assert [lim.caps for lim in ip.limits] == [lim.caps for lim in si.limits]
    assert ip.facts == si.facts
    # the reasons carry the deciding values, each in its site's units
    for value_f in (indoor_f, outdoor_f) if mode == Mode.FREE_COOLING else (indoor_f,):
        in_ip, in_si = shown(value_f)
        assert in_ip in ip.reason
        assert in_si in si.reason


@pytest.mark.parametrize(
    ("outdoor_f", "blocked"),
    [
        (49.9, "outdoor air 49.9 °F is below 50.0 °F"),
        (73.1, "outdoor air 73.1 °F is above 73.0 °F"),
    ],
    ids=["below-50F", "above-73F"],
)
def test_outside_the_window_the_reason_names_the_limit(outdoor_f: float, blocked: str) -> None:
    ip, si = decide_both(75.0, outdoor_f)
    assert f"closed: indoor 75.0 °F is warm, but {blocked}" in ip.reason
    assert "closed: indoor 23.9 °C is warm, but outdoor air" in si.reason


def test_below_73F_the_reason_names_the_start() -> None:
    ip, si = decide_both(72.9, 60.0)
    assert ip.reason == "closed: indoor 72.9 °F below 73.0 °F, no cooling needed"
    assert si.reason == "closed: indoor 22.7 °C below 22.8 °C, no cooling needed"
