"""Which zones to evaluate at once when a point changes, between ticks.

The daemon and the replay share this rule so that a replay evaluates exactly
when the daemon did. Pure: it reads only the site configuration.
"""

from __future__ import annotations

from ventsup.config.model import SiteConfig
from ventsup.core.layers.protection import angle_between

__all__ = ["urgent_zones", "wind_levels", "windward_openings"]


def wind_levels(config: SiteConfig, zone: str) -> tuple[float, ...]:
    """The zone's wind limits and their reopen levels [m/s], sorted ascending."""
    wind = config.rules_for(zone).wind
    limits = {
        wind.cap_above,
        wind.close_above,
        wind.windward_cap_above if wind.windward_cap_above is not None else wind.cap_above,
        wind.windward_close_above if wind.windward_close_above is not None else wind.close_above,
    }
    return tuple(sorted(limits | {wind.reopen_ratio * limit for limit in limits}))


def windward_openings(config: SiteConfig, zone: str, direction: float) -> frozenset[str]:
    """The zone's openings facing within ``windward_angle`` of the wind direction [deg]."""
    angle = config.rules_for(zone).wind.windward_angle
    return frozenset(
        name
        for name, opening in config.zones[zone].openings.items()
        if angle_between(opening.facing, direction) <= angle
    )


def _wind_band(config: SiteConfig, zone: str, speed: float) -> int:
    """How many of the zone's wind levels ``speed`` [m/s] is above."""
    return sum(1 for level in wind_levels(config, zone) if speed > level)


def urgent_zones(
    config: SiteConfig, point: str, old: float | bool | None, new: float | bool
) -> tuple[str, ...]:
    """The zones to evaluate at once because point ``point`` went from ``old`` to ``new``.

    ``old`` is None when the point was not known (never heard, or stale). A
    smoke alarm point (for the zones that list it) or the rain point: any
    change. The wind speed: a change across one of a zone's wind limits or
    their reopen levels. The wind direction: a change of the zone's windward
    openings. Any other point: none (the tick takes care of it).

    >>> urgent_zones(config, "roof_rain", False, True)  # doctest: +SKIP
    ('commons', 'classroom_east', 'studio_west')
    """
    if old is not None and old == new:
        return ()
    outdoor = config.outdoor
    zones: list[str] = []
    for name, zone in config.zones.items():
        if point in zone.smoke_alarms or point == outdoor.rain:
            zones.append(name)
        elif point == outdoor.wind_speed:
            if old is None or _wind_band(config, name, float(old)) != _wind_band(
                config, name, float(new)
            ):
                zones.append(name)
        elif point == outdoor.wind_direction and (
            old is None
            or windward_openings(config, name, float(old))
            != windward_openings(config, name, float(new))
        ):
            zones.append(name)
    return tuple(zones)
