"""Small hand-made sites and decision records for the report tests.

:func:`make_site` builds a validated site with one or more zones whose
openings the test chooses; :func:`decision` and :func:`steady` make decisions
by hand, and :func:`frame` turns them into a decisions table with
:func:`ventsup.core.figures.decisions_to_frame`.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from datetime import datetime
from typing import Any
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
import yaml

from ventsup.config.load import load_config_text
from ventsup.config.model import SiteConfig
from ventsup.core.figures import decisions_to_frame
from ventsup.core.state import Cause, Decision, Layer, Mode

BERLIN = "Europe/Berlin"
CHICAGO = "America/Chicago"

#: A hall with a low opening on the north facade and a high one on the south,
#: 3 m apart: the stack path of the airflow checks.
HALL_OPENINGS: dict[str, dict[str, Any]] = {
    "low": {"area": "1 m2", "facing": "0 deg", "level": "low", "height": "0 m"},
    "high": {"area": "1 m2", "facing": "180 deg", "level": "high", "height": "3 m"},
}

_LAYER_OF_MODE = {
    Mode.RELEASED: Layer.LIFE_SAFETY,
    Mode.FIRE_POSITION: Layer.LIFE_SAFETY,
    Mode.PROTECTED: Layer.PROTECTION,
    Mode.FAULT: Layer.FAULT,
    Mode.OVERRIDE: Layer.OVERRIDE,
    Mode.SECURED: Layer.SCHEDULE,
    Mode.UNOCCUPIED: Layer.SCHEDULE,
    Mode.HELD: Layer.ACTUATOR_CARE,
}


def epoch(tz: str, year: int, month: int, day: int, hour: int = 0, minute: int = 0) -> float:
    """Seconds since the epoch of a local wall-clock time in ``tz``."""
    return datetime(year, month, day, hour, minute, tzinfo=ZoneInfo(tz)).timestamp()


def make_site(tz: str = BERLIN, **kwargs: Any) -> SiteConfig:
    """A site with the given zones (name -> openings); see :func:`site_yaml`."""
    return load_config_text(site_yaml(tz, **kwargs), "test-site.yaml")


def site_yaml(
    tz: str = BERLIN,
    *,
    zones: Mapping[str, Mapping[str, Mapping[str, Any]]] | None = None,
    tick: str = "10 min",
    units: str = "SI",
    comfort: tuple[str, str] = ("20 C", "25 C"),
    elevation: str = "0 m",
) -> str:
    """The YAML text of a site with the given zones (name -> openings), each with its own
    indoor sensor."""
    zones = zones or {"hall": HALL_OPENINGS}
    points: dict[str, Any] = {
        "t_out": {"topic": "t/out", "kind": "temperature"},
        "rh_out": {"topic": "t/rh", "kind": "humidity"},
        "wind": {"topic": "t/wind", "kind": "wind_speed"},
        "wind_dir": {"topic": "t/wind_dir", "kind": "wind_direction"},
        "rain": {"topic": "t/rain", "kind": "binary"},
    }
    zone_config: dict[str, Any] = {}
    for name, openings in zones.items():
        points[f"{name}_t"] = {"topic": f"t/{name}/t", "kind": "temperature"}
        zone_config[name] = {
            "rules": "basic",
            "temperature": f"{name}_t",
            "openings": {key: dict(value) for key, value in openings.items()},
        }
    document = {
        "site": {
            "name": "Test Site",
            "time_zone": tz,
            "units": units,
            "location": {"latitude": 50.0, "longitude": 8.0, "elevation": elevation},
        },
        "points": points,
        "outdoor": {
            "temperature": "t_out",
            "humidity": "rh_out",
            "wind_speed": "wind",
            "wind_direction": "wind_dir",
            "rain": "rain",
        },
        "zones": zone_config,
        "rules": {"basic": {"comfort": {"low": comfort[0], "high": comfort[1]}}},
        "controller": {"tick": tick},
    }
    return yaml.safe_dump(document, sort_keys=False, allow_unicode=True)


def decision(
    t: float,
    zone: str = "hall",
    mode: Mode = Mode.IDLE,
    cause: Cause | None = None,
    targets: Mapping[str, float | None] | None = None,
    reason: str = "",
    **facts: float | bool | None,
) -> Decision:
    """One hand-made decision; unknown facts are left out (None)."""
    targets = dict(targets if targets is not None else {"low": 0.0, "high": 0.0})
    if cause is None:
        cause = Cause.COMFORT
    open_ = any(v is not None and v > 0.0 for v in targets.values())
    return Decision(
        zone=zone,
        t=float(t),
        targets=targets,
        mode=mode,
        layer=_LAYER_OF_MODE.get(mode, Layer.COMFORT),
        cause=cause,
        reason=reason or f"{mode.value} by hand",
        windows_open=open_,
        open_area=0.0,
        facts=dict(facts),
    )


def steady(start: float, end: float, step: float, **kwargs: Any) -> list[Decision]:
    """Decisions every ``step`` seconds from ``start`` up to ``end``, all alike."""
    return [decision(t, **kwargs) for t in np.arange(start, end, step).tolist()]


def frame(config: SiteConfig, decisions: Iterable[Decision]) -> pd.DataFrame:
    """The decisions table of hand-made decisions."""
    return decisions_to_frame(list(decisions), config)
