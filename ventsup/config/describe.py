"""What ``ventsup check`` prints: the site as ventsup understood it, in the site's units.

Plain text in aligned columns: the site, its points, the outdoor mapping, each
zone with its sensors and openings, each rule set with every value (given
or default) in the site's display units (SI: °C, m/s, m²; IP: °F, mph, ft²),
and the daemon's broker connection and settings (never a password).
"""

from __future__ import annotations

from collections.abc import Sequence

from pydantic import BaseModel

from ventsup.config import _schema
from ventsup.config.model import (
    Opening,
    Period,
    Point,
    PointKind,
    RuleSet,
    SiteConfig,
    Zone,
)
from ventsup.config.units import UnitSystem, format_quantity

__all__ = ["describe"]

_DAY_NAMES = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")
_COMPASS = ("N", "NE", "E", "SE", "S", "SW", "W", "NW")
_UNIT_SUMMARY = {"SI": "SI (°C, m/s, m²)", "IP": "IP (°F, mph, ft²)"}


def describe(config: SiteConfig) -> str:
    """The whole configuration as readable text, every value in the site's display units."""
    units = config.site.units
    out: list[str] = []
    site = config.site
    rows = [["Site", site.name], ["Time zone", site.time_zone], ["Units", _UNIT_SUMMARY[units]]]
    if site.location is not None:
        where = site.location
        rows.append(
            [
                "Location",
                f"{abs(where.latitude):.4f}° {'N' if where.latitude >= 0 else 'S'}, "
                f"{abs(where.longitude):.4f}° {'E' if where.longitude >= 0 else 'W'}, "
                f"elevation {format_quantity(where.elevation, 'length', units)}",
            ]
        )
    out += _table(rows)

    out += ["", f"Points ({len(config.points)})"]
    header = ["name", "kind", "topic", "json path", "unit", "stale after", "plausible range"]
    out += _table(
        [header] + [_point_row(name, point, units) for name, point in config.points.items()],
        indent=2,
    )

    outdoor = config.outdoor
    out += ["", "Outdoor"]
    out += _table(
        [
            [field.replace("_", " "), getattr(outdoor, field) or "-"]
            for field in type(outdoor).model_fields
        ],
        indent=2,
    )

    for name, zone in config.zones.items():
        out += ["", f"Zone {name}"]
        out += _zone(zone, units)

    for name, rules in config.rules.items():
        users = [zone_name for zone_name, zone in config.zones.items() if zone.rules == name]
        used_by = f"zones: {', '.join(users)}" if users else "used by no zone"
        out += ["", f"Rule set {name} ({used_by})"]
        out += _rules(rules, units)

    out += ["", "Override"]
    out += _section_rows(config.override, units, indent=2)

    out += ["", "Daemon (ventsup run)"]
    out += _table(_daemon_rows(config, units), indent=2)
    return "\n".join(out) + "\n"


def _daemon_rows(config: SiteConfig, units: UnitSystem) -> list[list[str]]:
    """The broker connection and the controller's settings; never a password."""
    mqtt = config.mqtt
    tls = mqtt.tls
    if tls is None:
        secure = "no TLS"
    else:
        secure = f"TLS, CA {tls.ca_file or 'system'}"
        if tls.cert_file:
            secure += f", client certificate {tls.cert_file}"
        if tls.insecure:
            secure += ", host name NOT checked (commissioning only)"
    if mqtt.password_file:
        password = f"from file {mqtt.password_file}"
    elif mqtt.password_env:
        password = f"from environment variable {mqtt.password_env}"
    else:
        password = "none"
    rows = [
        ["broker", f"{mqtt.host}:{mqtt.effective_port}, MQTT {mqtt.protocol}, {secure}"],
        ["client id", config.client_id],
        ["username", mqtt.username or "none"],
        ["password", password],
        ["topic prefix", config.topic_prefix],
    ]
    rows += [
        [name, _value(mqtt, name, units)]
        for name in ("keepalive", "reconnect_min", "reconnect_max", "connect_timeout")
    ]
    controller = config.controller
    rows += [
        [name, _value(controller, name, units)]
        for name in type(controller).model_fields
        if name != "ledger"
    ]
    rows.append(["ledger", config.ledger_name])
    return rows


def _point_row(name: str, point: Point, units: UnitSystem) -> list[str]:
    return [
        name,
        str(point.kind),
        point.topic,
        point.json_path or "-",
        point.unit or "-",
        format_quantity(point.stale_after, "duration"),
        _range(point, units),
    ]


def _range(point: Point, units: UnitSystem) -> str:
    if point.kind is PointKind.BINARY:
        return "-"
    low, high = point.plausible_range
    quantity = point.kind.quantity
    if quantity is None:  # relative humidity, kept in %
        return f"{low:g} to {high:g} %"
    default = "" if point.valid_range else " (default)"
    low_text = format_quantity(low, quantity, units)
    return f"{low_text} to {format_quantity(high, quantity, units)}{default}"


def _zone(zone: Zone, units: UnitSystem) -> list[str]:
    sensors = ", ".join(zone.temperature.sensors)
    aggregate = zone.temperature.aggregate
    if len(zone.temperature.sensors) > 1:
        sensors += f" (aggregate: {aggregate})"
    rows = [
        ["rules", zone.rules],
        ["temperature", sensors],
        ["co2", zone.co2 or "-"],
        ["smoke alarms", ", ".join(zone.smoke_alarms) or "-"],
        ["heating", zone.heating or "-"],
    ]
    lines = _table(rows, indent=2)
    lines.append(f"  openings ({len(zone.openings)})")
    header = [
        "name",
        "area",
        "facing",
        "level",
        "height",
        "feedback",
        "rain",
        "secure",
        "fire",
        "command",
    ]
    table = [header] + [_opening_row(name, o, units) for name, o in zone.openings.items()]
    return lines + _table(table, indent=4)


def _opening_row(name: str, opening: Opening, units: UnitSystem) -> list[str]:
    fire = opening.fire_position
    return [
        name,
        format_quantity(opening.area, "area", units),
        _facing(opening.facing),
        opening.level,
        "-" if opening.height is None else format_quantity(opening.height, "length", units),
        opening.feedback or "-",
        format_quantity(opening.rain_position, "fraction"),
        format_quantity(opening.secure_position, "fraction"),
        fire if isinstance(fire, str) else format_quantity(fire, "fraction"),
        f"{opening.command_topic or 'controller topic'}, {opening.command_format}",
    ]


def _facing(degrees: float) -> str:
    point = _COMPASS[round(degrees / 45.0) % 8]
    return f"{format_quantity(degrees, 'angle')} ({point})"


def _rules(rules: RuleSet, units: UnitSystem) -> list[str]:
    rows: list[list[str]] = []
    for section_name in type(rules).model_fields:
        section = getattr(rules, section_name)
        if isinstance(section, BaseModel):
            for index, row in enumerate(_values(section, units)):
                rows.append([section_name if index == 0 else "", *row])
        else:
            rows.append([section_name, "", _value(rules, section_name, units)])
    return _table(rows, indent=2)


def _section_rows(section: BaseModel, units: UnitSystem, indent: int) -> list[str]:
    return _table(_values(section, units), indent=indent)


def _values(section: BaseModel, units: UnitSystem) -> list[list[str]]:
    return [[name, _value(section, name, units)] for name in type(section).model_fields]


def _value(section: BaseModel, name: str, units: UnitSystem) -> str:
    value = getattr(section, name)
    if value is None:
        return "none"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, tuple) and all(isinstance(item, Period) for item in value):
        return ", ".join(format_period(item) for item in value) or "none"
    if isinstance(value, str):
        return value
    quantity = _schema.field_quantity(type(section), name)
    if quantity is not None and isinstance(value, int | float):
        return format_quantity(value, quantity, units)
    return f"{value:g}" if isinstance(value, float) else str(value)


def format_period(period: Period) -> str:
    """``"Mon-Fri 07:00-18:00"``, as the period would be written in a site file."""
    times = f"{_clock(period.start_minute)}-{_clock(period.end_minute)}"
    days = sorted(period.days)
    if len(days) == 7:
        return times
    for first in days:  # a run of days, possibly across Sunday to Monday
        run = [(first + i) % 7 for i in range(len(days))]
        if sorted(run) == days:
            last = run[-1]
            span = _DAY_NAMES[first] if first == last else f"{_DAY_NAMES[first]}-{_DAY_NAMES[last]}"
            return f"{span} {times}"
    return f"{','.join(_DAY_NAMES[d] for d in days)} {times}"


def _clock(minute: int) -> str:
    return f"{minute // 60:02d}:{minute % 60:02d}"


def _table(rows: Sequence[Sequence[str]], indent: int = 0) -> list[str]:
    """Rows in columns, each as wide as its widest cell, two spaces apart."""
    if not rows:
        return []
    widths = [max(len(row[i]) for row in rows) for i in range(len(rows[0]))]
    pad = " " * indent
    return [
        pad + "  ".join(cell.ljust(width) for cell, width in zip(row, widths, strict=True)).rstrip()
        for row in rows
    ]
