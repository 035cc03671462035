"""Small sites, benign inputs and a step runner for the decision-core tests.

Thresholds in :data:`BASE_RULES` carry their source beside them, tagged as in
shared/CHECKS.md: [practice] common practice, [pub] a published source, [mem]
from memory of a published source; "site choice" marks a value no source fixes.
"""

from __future__ import annotations

import copy
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import Any
from zoneinfo import ZoneInfo

import yaml

from ventsup.config.model import SiteConfig
from ventsup.core.decide import decide, initial_state
from ventsup.core.inputs import ZoneInputs
from ventsup.core.state import Decision, OverrideRequest, ZoneState

__all__ = [
    "BASE_RULES",
    "BENIGN",
    "BERLIN",
    "DEMO_IP",
    "DEMO_SI",
    "T0",
    "WARM",
    "Step",
    "epoch",
    "inputs",
    "load_demo",
    "run",
    "site",
]

REPO = Path(__file__).resolve().parents[2]
DEMO_SI = REPO / "config" / "demo-site.yaml"
DEMO_IP = REPO / "config" / "demo-site-ip.yaml"

BERLIN = "Europe/Berlin"


def epoch(tz: str, year: int, month: int, day: int, hour: int = 0, minute: int = 0) -> float:
    """Seconds since the epoch of a local wall-clock time in ``tz``."""
    return datetime(year, month, day, hour, minute, tzinfo=ZoneInfo(tz)).timestamp()


#: Monday 2024-06-03 10:00 in Berlin (08:00 UTC): the reference time of the layer tests.
T0 = epoch(BERLIN, 2024, 6, 3, 10, 0)

POINTS: dict[str, dict[str, Any]] = {
    "t_out": {"topic": "t/site/t_out", "kind": "temperature"},
    "rh_out": {"topic": "t/site/rh_out", "kind": "humidity"},
    "dew_out": {"topic": "t/site/dew_out", "kind": "dew_point"},
    "wind": {"topic": "t/site/wind", "kind": "wind_speed"},
    "wind_dir": {"topic": "t/site/wind_dir", "kind": "wind_direction"},
    "rain": {"topic": "t/site/rain", "kind": "binary"},
    "t_in": {"topic": "t/room/t_in", "kind": "temperature"},
    "co2": {"topic": "t/room/co2", "kind": "co2"},
    "smoke": {"topic": "t/room/smoke", "kind": "binary"},
    "heating": {"topic": "t/room/heating", "kind": "binary"},
    "low_pos": {"topic": "t/room/low/pos", "kind": "position"},
    "high_pos": {"topic": "t/room/high/pos", "kind": "position"},
}

#: Two openings: a low one facing north and a high one facing south that may stay
#: at 10 % in rain (a rain-safe position for a protected vent [practice]).
OPENINGS: dict[str, dict[str, Any]] = {
    "low": {"area": "2 m2", "facing": "0 deg", "level": "low", "feedback": "low_pos"},
    "high": {
        "area": "1 m2",
        "facing": "180 deg",
        "level": "high",
        "feedback": "high_pos",
        "rain_position": "10 %",
    },
}

BASE_RULES: dict[str, Any] = {
    "alarm": {"clear_hold": "15 min"},  # site choice; the fire system decides smoke control
    "rain": {"dry_delay": "20 min"},  # reopen after 10-30 min dry [practice]
    "wind": {
        "cap_above": "8 m/s",  # limit opening above about 5-8 m/s [practice]
        "cap_position": "30 %",  # site choice
        "close_above": "10 m/s",  # close at about 10 m/s, Beaufort 6 from 10.8 m/s [practice]
        "windward_cap_above": "6 m/s",  # lower limit for the windward facade [practice]
        "windward_close_above": "8 m/s",  # lower limit for the windward facade [practice]
        "windward_angle": "45 deg",  # site choice
        "reopen_ratio": 0.8,  # reopen below about 80 % of the limit [practice]
        "hold": "15 min",  # hold after a gust [practice], length a site choice
    },
    "cold": {"outdoor_below": "5 C"},  # site choice (the demo site's floor)
    "comfort": {"low": "20 C", "high": "25 C"},
    "free_cooling": {
        "open_above": "23 C",  # the demo site's hall; cf. 73 degF in the free cooling window [practice]
        "close_below": "22 C",  # site choice: 1 K of hysteresis
        "full_open_at": "25 C",  # top of a 20-25 C band; 77 degF band top [practice]
        "min_opening": "20 %",  # site choice
        "outdoor_min": "12 C",  # outdoor low limit about 12 C [practice]
        "outdoor_max": "23 C",  # economiser high limit 24 C dry / 21 C humid [pub] ASHRAE 90.1
        "min_difference": "1 K",  # site choice
        "dew_point_max": "16.8 C",  # dew point limit about 16.8 C (W = 0.012) [mem]/[lib]
        "when": "occupied",
    },
    "night_flush": {
        "enabled": True,
        "hours": "22:00-06:00",
        "start_above": "24 C",  # site choice
        "stop_below": "19 C",  # stop at 18-20 C, above the morning heating point [practice]
        "min_difference": "3 K",  # outdoors 2-5 K cooler than indoors [practice]
        "outdoor_min": "12 C",  # outdoor low limit about 12 C [practice]
        "dew_point_max": "12 C",  # outdoor dew point below 12 C [practice]
        "position": "100 %",
    },
    "co2": {
        # EN 16798-1 Annex B category II: 800 ppm above outdoor (about 400 ppm) [pub]
        "open_above": "1200 ppm",
        "close_below": "1000 ppm",  # site choice: 200 ppm of hysteresis
        "position": "15 %",  # site choice
        "outdoor_min": "10 C",  # site choice
    },
    "interlock": {"block_cooling_while_heating": True, "allow_co2_while_heating": True},
    "actuator": {
        "min_open_time": "10 min",  # dwell 10-15 min between reversals [practice]
        "min_closed_time": "10 min",  # dwell 10-15 min between reversals [practice]
        "min_step": "10 %",  # steps of at least 5-10 % [practice]
        # Re 10000 cycles (EN 12101-2) [mem] over a service life; the number is a site choice
        "max_moves_per_hour": 6,
        "feedback_tolerance": "10 %",  # site choice
        "feedback_timeout": "3 min",  # site choice
    },
    "schedule": {"occupied": ["00:00-24:00"], "security": []},
    "indoor_unknown": "closed",
}


def _merge(base: dict[str, Any], changes: Mapping[str, Any]) -> dict[str, Any]:
    merged = copy.deepcopy(base)
    for key, value in changes.items():
        if isinstance(value, Mapping) and isinstance(merged.get(key), dict):
            merged[key] = _merge(merged[key], value)
        else:
            merged[key] = copy.deepcopy(value)
    return merged


def site(
    rules: Mapping[str, Any] | None = None,
    *,
    openings: Mapping[str, Mapping[str, Any]] | None = None,
    zone: Mapping[str, Any] | None = None,
    time_zone: str = BERLIN,
    units: str = "SI",
    override: Mapping[str, Any] | None = None,
) -> SiteConfig:
    """A one-zone site (zone ``room``) with :data:`BASE_RULES` changed by ``rules``.

    ``openings`` changes the two openings (``low``, ``high``) key by key; ``zone``
    changes the zone (for example ``{"heating": None}``).
    """
    zone_raw: dict[str, Any] = {
        "rules": "r",
        "temperature": "t_in",
        "co2": "co2",
        "smoke_alarms": ["smoke"],
        "heating": "heating",
        "openings": _merge(OPENINGS, openings or {}),
    }
    zone_raw = _merge(zone_raw, zone or {})
    raw: dict[str, Any] = {
        "site": {"name": "Test site", "time_zone": time_zone, "units": units},
        "points": POINTS,
        "outdoor": {
            "temperature": "t_out",
            "humidity": "rh_out",
            "dew_point": "dew_out",
            "wind_speed": "wind",
            "wind_direction": "wind_dir",
            "rain": "rain",
        },
        "zones": {"room": zone_raw},
        "rules": {"r": _merge(BASE_RULES, rules or {})},
    }
    if override is not None:
        raw["override"] = dict(override)
    return SiteConfig.model_validate(raw)


def load_demo(path: Path = DEMO_SI) -> SiteConfig:
    """The demo site, loaded with ``yaml.safe_load`` and validated."""
    with path.open(encoding="utf-8") as handle:
        return SiteConfig.model_validate(yaml.safe_load(handle))


#: Nothing calls for opening and nothing is wrong: mild, dry, calm, no alarm.
BENIGN: dict[str, Any] = {
    "temp_indoor": 21.0,
    "temp_outdoor": 15.0,
    "humidity_outdoor": 50.0,  # dew point about 4.6 C at 15 C
    "wind_speed": 2.0,
    "wind_direction": 90.0,  # from the east: neither facade is windward
    "rain": False,
    "co2": 600.0,
    "heating": False,
    "alarms": [False],
}

#: Warm enough to open 60 % (24 C between 23 C and 25 C) with cool, dry outdoor air.
WARM: dict[str, Any] = {**BENIGN, "temp_indoor": 24.0}


def inputs(t: float, base: Mapping[str, Any] = BENIGN, **changes: Any) -> ZoneInputs:
    """Zone inputs at ``t`` from ``base`` with ``changes`` (plain values, as ZoneInputs.of)."""
    values = {**base, **changes}
    return ZoneInputs.of(t=t, **values)


@dataclass(frozen=True)
class Step:
    """One evaluation ``at`` seconds after the start, with input ``values`` (over BENIGN)."""

    at: float
    values: Mapping[str, Any] = field(default_factory=dict)
    request: OverrideRequest | None = None


def run(
    config: SiteConfig,
    steps: Sequence[Step] | Iterable[Step],
    *,
    zone: str = "room",
    start: float = T0,
    state: ZoneState | None = None,
) -> list[tuple[Decision, ZoneState]]:
    """Evaluate ``steps`` in order, carrying the state; return every (decision, state)."""
    current = initial_state() if state is None else state
    results: list[tuple[Decision, ZoneState]] = []
    for step in steps:
        t = start + step.at
        decision, current = decide(
            config, zone, inputs(t, **step.values), current, t, request=step.request
        )
        results.append((decision, current))
    return results
