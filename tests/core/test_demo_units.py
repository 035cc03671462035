"""The demo site in SI and in IP units: the same rules, the same decisions.

config/demo-site.yaml states the rules in SI units and config/demo-site-ip.yaml
in IP units (wind limits in round mph, temperatures in °F). Loaded, the two
must hold equal numbers, and :func:`decide` must decide identically for every
zone on the same inputs; only the reason sentences differ, in display units.
"""

from __future__ import annotations

import re

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ventsup.core.state import Decision

from .helpers import DEMO_IP, DEMO_SI, epoch, load_demo
from .strategies import Plain, replay, sequences, starts

SI = load_demo(DEMO_SI)
IP = load_demo(DEMO_IP)
ZONES = sorted(SI.zones)

# A number and its display unit in either system: "22.8 °C", "73.0 °F", "1.0 K", "18.0 mph".
QUANTITY = re.compile(r"-?\d+(?:\.\d+)? (?:°C|°F|K|m/s|mph|m²|ft²)(?![\w/])")


def test_both_files_load_to_equal_rules_zones_and_points() -> None:
    assert SI.rules == IP.rules
    assert SI.zones == IP.zones
    assert SI.points == IP.points
    assert SI.outdoor == IP.outdoor
    assert SI.override == IP.override
    assert SI.site.model_copy(update={"units": "IP"}) == IP.site


@pytest.mark.parametrize(
    ("rules", "section", "key", "si_value"),
    [
        ("hall", "wind", "cap_above", 8.04672),  # 18 mph x 0.44704 [calc]
        ("hall", "wind", "windward_close_above", 10.0584),  # 22.5 mph [calc]
        ("hall", "free_cooling", "open_above", 23.0),  # 73.4 °F [calc]
        ("hall", "free_cooling", "min_difference", 1.0),  # 1.8 °F difference [calc]
        ("rooms", "cold", "outdoor_below", 5.0),  # 41 °F [calc]
        ("rooms", "free_cooling", "outdoor_max", 22.0),  # 71.6 °F [calc]
    ],
    ids=[
        "cap-18mph",
        "windward-close-22.5mph",
        "open-73.4F",
        "delta-1.8F",
        "cold-41F",
        "max-71.6F",
    ],
)
def test_ip_values_convert_exactly(rules: str, section: str, key: str, si_value: float) -> None:
    assert getattr(getattr(IP.rules[rules], section), key) == si_value


def without_units(reason: str) -> str:
    return QUANTITY.sub("<quantity>", reason)


def assert_same(si: Decision, ip: Decision) -> None:
    same = ("zone", "t", "mode", "layer", "cause", "targets", "windows_open", "open_area")
    assert {k: getattr(si, k) for k in same} == {k: getattr(ip, k) for k in same}
    assert si.facts == ip.facts
    assert si.events == ip.events
    assert [(lim.layer, lim.cause, lim.caps) for lim in si.limits] == [
        (lim.layer, lim.cause, lim.caps) for lim in ip.limits
    ]
    assert without_units(si.reason) == without_units(ip.reason), (si.reason, ip.reason)


@settings(max_examples=40)
@given(st.sampled_from(ZONES), starts(), sequences())
def test_si_and_ip_decide_identically(zone: str, start: float, plan: list[Plain]) -> None:
    si_run = replay(SI, zone, start, plan)
    ip_run = replay(IP, zone, start, plan)
    for si, ip in zip(si_run, ip_run, strict=True):
        assert_same(si.decision, ip.decision)
        assert si.after == ip.after


MONDAY_NOON = epoch("America/Chicago", 2024, 6, 3, 12)
WARM_DAY = {
    "temp_indoor": 24.0,
    "temp_outdoor": 18.0,
    "dew_point_outdoor": 8.0,
    "wind_speed": 2.0,
    "wind_direction": 90.0,
    "rain": False,
    "co2": 600.0,
    "heating": False,
    "alarm": False,
}


def test_reasons_use_each_sites_display_units() -> None:
    plan = [Plain(0, WARM_DAY)]
    si = replay(SI, "commons", MONDAY_NOON, plan)[0].decision
    ip = replay(IP, "commons", MONDAY_NOON, plan)[0].decision
    assert "indoor 24.0 °C (opens at 23.0 °C, fully open at 25.0 °C), outdoor 18.0 °C" in si.reason
    assert "indoor 75.2 °F (opens at 73.4 °F, fully open at 77.0 °F), outdoor 64.4 °F" in ip.reason
