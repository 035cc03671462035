"""Checks that need the whole site, run after the model has accepted a file.

The model checks each value on its own; :func:`cross_check` checks how they
fit together:

- every point that ``outdoor`` and the zones name exists under ``points`` and
  has the kind its use needs (a zone's co2 a ``co2`` point, rain and alarms
  ``binary`` points, opening feedback a ``position`` point, ...);
- every zone's ``rules`` names a rule set;
- thresholds are in order within each rule set (close below open, the
  outdoor band not empty, wind cap below wind close, ...);
- a dew point limit has an outdoor humidity or dew point point to work with;
- no two points read the same topic and JSON path;
- the default override is not longer than the longest allowed;
- the MQTT settings fit together (one password source, a user name with a
  password, a key file with a certificate, reconnect delays in order), and
  opening command topics are plain topic names.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

from pydantic import BaseModel

from ventsup.config import _schema
from ventsup.config.errors import ConfigProblem
from ventsup.config.model import PointKind, RuleSet, SiteConfig
from ventsup.config.source import KeyPath, SourceMap, format_path, show_value
from ventsup.config.units import format_quantity

__all__ = ["cross_check"]


def cross_check(config: SiteConfig, lines: SourceMap | None = None) -> list[ConfigProblem]:
    """Return the problems that a single model cannot see, sorted by line.

    Parameters
    ----------
    config : SiteConfig
        A configuration the model has accepted.
    lines : SourceMap, optional
        Where each key path is in the site file (from the loader); without
        it, problems carry the file name ``<config>`` and no line.
    """
    source = lines if lines is not None else SourceMap("<config>")
    checker = _Checker(config, source)
    checker.points()
    checker.rule_names()
    for name, rules in config.rules.items():
        checker.order(name, rules)
        checker.dew_point(name, rules)
    checker.duplicate_sources()
    checker.override()
    checker.mqtt()
    checker.command_topics()
    return sorted(checker.problems, key=ConfigProblem.sort_key)


# (section, lower, upper, strictly below?, why they must be in this order)
_ORDER: tuple[tuple[str, str, str, bool, str], ...] = (
    (
        "free_cooling",
        "close_below",
        "open_above",
        True,
        "the windows close at a lower temperature than they open",
    ),
    (
        "free_cooling",
        "open_above",
        "full_open_at",
        False,
        "the opening grows from open_above to full open at full_open_at",
    ),
    (
        "free_cooling",
        "outdoor_min",
        "outdoor_max",
        True,
        "outdoor air between outdoor_min and outdoor_max is used for cooling",
    ),
    (
        "night_flush",
        "stop_below",
        "start_above",
        True,
        "night flush stops at a lower temperature than it starts",
    ),
    (
        "co2",
        "close_below",
        "open_above",
        True,
        "the windows close at a lower CO2 level than they open",
    ),
    ("wind", "cap_above", "close_above", True, "the openings are capped before they close"),
    (
        "wind",
        "windward_cap_above",
        "windward_close_above",
        True,
        "windward openings are capped before they close",
    ),
    ("comfort", "low", "high", True, "the comfort band runs from low to high"),
)


class _Checker:
    def __init__(self, config: SiteConfig, source: SourceMap) -> None:
        self.config = config
        self.source = source
        self.units = config.site.units
        self.problems: list[ConfigProblem] = []

    def add(self, path: KeyPath, message: str) -> None:
        self.problems.append(
            ConfigProblem(self.source.file, self.source.line_of(path), format_path(path), message)
        )

    def given(self, path: KeyPath) -> bool:
        """Whether the file writes ``path`` (always true for a config built in code)."""
        return not self.source.lines or path in self.source

    # ------------------------------------------------------------------ points

    def references(self) -> Iterator[tuple[KeyPath, str, PointKind]]:
        """Every point name that ``outdoor`` and the zones use: (path, name, kind needed)."""
        outdoor = self.config.outdoor
        for field in type(outdoor).model_fields:
            name = getattr(outdoor, field)
            if name is not None:
                yield ("outdoor", field), name, _schema.POINT_FIELDS[(type(outdoor), field)]
        for zone_name, zone in self.config.zones.items():
            sensors = zone.temperature.sensors
            for index, name in enumerate(sensors):
                yield self.sensor_path(zone_name, index), name, PointKind.TEMPERATURE
            if zone.co2 is not None:
                yield ("zones", zone_name, "co2"), zone.co2, PointKind.CO2
            for index, name in enumerate(zone.smoke_alarms):
                yield ("zones", zone_name, "smoke_alarms", index), name, PointKind.BINARY
            if zone.heating is not None:
                yield ("zones", zone_name, "heating"), zone.heating, PointKind.BINARY
            for opening_name, opening in zone.openings.items():
                if opening.feedback is not None:
                    path = ("zones", zone_name, "openings", opening_name, "feedback")
                    yield path, opening.feedback, PointKind.POSITION

    def sensor_path(self, zone: str, index: int) -> KeyPath:
        """Where a zone's temperature sensor is written: full form, list or a single name."""
        base: KeyPath = ("zones", zone, "temperature")
        if not self.source.lines or (*base, "sensors") in self.source:
            return (*base, "sensors", index)
        if (*base, index) in self.source:
            return (*base, index)
        return base

    def points(self) -> None:
        points = self.config.points
        for path, name, kind in self.references():
            same_kind = sorted(n for n, p in points.items() if p.kind is kind)
            point = points.get(name)
            if point is None:
                message = (
                    f"got {name!r}, expected the name of a {kind} point defined under 'points'"
                )
                close = _schema.did_you_mean(name, same_kind) or _schema.did_you_mean(
                    name, list(points)
                )
                if close is not None:
                    message += f"; did you mean {close!r}?"
                else:
                    message += _listing(kind, same_kind)
                self.add(path, message)
            elif point.kind is not kind:
                message = (
                    f"got {name!r}, which is a {point.kind} point, "
                    f"expected the name of a {kind} point"
                )
                self.add(path, message + _listing(kind, same_kind))

    def rule_names(self) -> None:
        names = list(self.config.rules)
        for zone_name, zone in self.config.zones.items():
            if zone.rules in self.config.rules:
                continue
            message = f"got {zone.rules!r}, expected the name of a rule set defined under 'rules'"
            close = _schema.did_you_mean(zone.rules, names)
            if close is not None:
                message += f"; did you mean {close!r}?"
            else:
                message += f"; the rule sets are {', '.join(names)}"
            self.add(("zones", zone_name, "rules"), message)

    def duplicate_sources(self) -> None:
        first: dict[tuple[str, str | None], str] = {}
        for name, point in self.config.points.items():
            source = (point.topic, point.json_path)
            if source not in first:
                first[source] = name
                continue
            other = first[source]
            line = self.source.line_of(("points", other, "topic"))
            where = f" on line {line}" if line is not None and self.source.lines else ""
            what = f"topic {point.topic!r}" + (
                f" with json_path {point.json_path!r}" if point.json_path else ""
            )
            self.add(
                ("points", name, "topic"),
                f"point {name!r} reads the same {what} as point {other!r}{where}; "
                f"expected one point per reading: use {other!r} wherever {name!r} is used",
            )

    # ------------------------------------------------------------------ rules

    def show(self, path: KeyPath, section: BaseModel, field: str) -> str:
        """A threshold as written in the file, or its value in display units if defaulted."""
        found, written = self.source.written(path)
        quantity = _schema.field_quantity(type(section), field)
        value = getattr(section, field)
        text = format_quantity(value, quantity, self.units) if quantity else str(value)
        if found and self.source.lines:
            plain = isinstance(written, int | float) and not isinstance(written, bool)
            if plain and quantity and self.units != "SI":
                # a plain number is SI even on an IP site: say so, it is a likely slip
                return f"{show_value(written)} (no unit, so {format_quantity(value, quantity)})"
            return show_value(written)
        return text if found or not self.source.lines else f"{text}, the default"

    def order(self, name: str, rules: RuleSet) -> None:
        for section_name, lower, upper, strict, why in _ORDER:
            section = getattr(rules, section_name)
            low, high = getattr(section, lower), getattr(section, upper)
            if low is None or high is None or (low < high if strict else low <= high):
                continue
            base: KeyPath = ("rules", name, section_name)
            low_path, high_path = (*base, lower), (*base, upper)
            if self.given(low_path):
                relation = "below" if strict else "at or below"
                other = self.show(high_path, section, upper)
                message = (
                    f"got {self.show(low_path, section, lower)}, "
                    f"expected {relation} {upper} ({other}): {why}"
                )
                self.add(low_path, message)
            else:
                relation = "above" if strict else "at or above"
                other = self.show(low_path, section, lower)
                message = (
                    f"got {self.show(high_path, section, upper)}, "
                    f"expected {relation} {lower} ({other}): {why}"
                )
                self.add(high_path, message)

    def dew_point(self, name: str, rules: RuleSet) -> None:
        outdoor = self.config.outdoor
        if outdoor.humidity is not None or outdoor.dew_point is not None:
            return
        for section_name in ("free_cooling", "night_flush"):
            section: Any = getattr(rules, section_name)
            if not section.enabled or section.dew_point_max is None:
                continue
            path = ("rules", name, section_name, "dew_point_max")
            if self.given(path):
                limit = f"got {self.show(path, section, 'dew_point_max')}"
            else:
                value = format_quantity(section.dew_point_max, "temperature", self.units)
                limit = f"the default limit of {value} applies"
            self.add(
                path,
                f"{limit}, but 'outdoor' has neither a humidity nor a dew_point point to "
                "compare it with; add one under 'outdoor', or write 'dew_point_max: null' "
                "for no dew point limit",
            )

    def override(self) -> None:
        override = self.config.override
        if override.default_duration <= override.max_duration:
            return
        default = ("override", "default_duration")
        longest = ("override", "max_duration")
        default_text = self.show(default, override, "default_duration")
        longest_text = self.show(longest, override, "max_duration")
        if self.given(default):
            message = f"got {default_text}, expected at most max_duration ({longest_text})"
            self.add(default, message)
        else:
            message = f"got {longest_text}, expected at least default_duration ({default_text})"
            self.add(longest, message)

    # ------------------------------------------------------------------ daemon

    def mqtt(self) -> None:
        mqtt = self.config.mqtt
        base: KeyPath = ("mqtt",)
        if mqtt.password_file is not None and mqtt.password_env is not None:
            self.add(
                (*base, "password_env"),
                f"got {mqtt.password_env!r} as well as password_file "
                f"({mqtt.password_file!r}), expected one of them: the password comes from a "
                "file or from an environment variable",
            )
        source = "password_file" if mqtt.password_file is not None else "password_env"
        if mqtt.username is None and (mqtt.password_file or mqtt.password_env) is not None:
            self.add(
                (*base, source),
                "a password needs a user name, expected 'username' under 'mqtt' as well",
            )
        tls = mqtt.tls
        if tls is not None and tls.key_file is not None and tls.cert_file is None:
            self.add(
                (*base, "tls", "key_file"),
                f"got {tls.key_file!r} without cert_file, expected the client certificate "
                "in cert_file beside its key",
            )
        if mqtt.reconnect_min > mqtt.reconnect_max:
            low, high = (*base, "reconnect_min"), (*base, "reconnect_max")
            why = "the delay between attempts doubles from reconnect_min up to reconnect_max"
            low_text = self.show(low, mqtt, "reconnect_min")
            high_text = self.show(high, mqtt, "reconnect_max")
            if self.given(low):
                self.add(
                    low, f"got {low_text}, expected at or below reconnect_max ({high_text}): {why}"
                )
            else:
                self.add(
                    high, f"got {high_text}, expected at or above reconnect_min ({low_text}): {why}"
                )

    def command_topics(self) -> None:
        for zone_name, zone in self.config.zones.items():
            for opening_name, opening in zone.openings.items():
                topic = opening.command_topic
                if topic is not None and ("+" in topic or "#" in topic):
                    self.add(
                        ("zones", zone_name, "openings", opening_name, "command_topic"),
                        f"got {topic!r}, expected a topic name without the wildcards '+' or '#'",
                    )


def _listing(kind: PointKind, names: list[str]) -> str:
    if not names:
        return f"; there is no {kind} point yet: add one under 'points' with 'kind: {kind}'"
    if len(names) > 8:
        return ""
    return f"; the {kind} points are {', '.join(names)}"
