"""Scripted events for a simulation: rain, gusts, smoke drills, sensor and actuator faults.

A scenario file is YAML::

    name: July afternoon with a shower and a drill
    events:
      - rain: {at: "2024-07-02 15:00", duration: 40 min}
      - gust: {after: 26 h, duration: 20 min, speed: 15 m/s, direction: 180 deg}
      - smoke_drill: {at: "2024-07-03 10:00", duration: 10 min, zone: commons}
      - sensor: {point: commons_t_l4, fault: dropout, after: 2 d, duration: 30 min}
      - sensor: {point: outdoor_temp, fault: spike, value: 85 C, after: 50 h, duration: 5 min}
      - actuator_jam: {zone: commons, opening: high_north, after: 3 d, position: 30 %}
      - occupancy: {zone: commons, people: 300, at: "2024-07-04 18:00", duration: 3 h}

Timing: ``at`` is a wall-clock time in the site's time zone (or ISO 8601 with
an offset); ``after`` a duration after the run starts. ``duration`` (or
``until``, a time) ends the event; without either it lasts to the end of the
run. An event is in force at step times ``start <= t < end``.

Events:

- ``rain``: the rain sensor reads wet and the building sees rain.
- ``gust``: the wind is ``speed`` at the rooftop weather station (what the
  wind point reads; the openings see it scaled to their height), optionally
  from ``direction``.
- ``smoke_drill``: the smoke alarm points of ``zone`` (or the listed
  ``points``) read active.
- ``sensor``: the point ``drops out`` (publishes nothing, so it goes stale),
  ``sticks`` (keeps publishing the value it had, or ``value``) or ``spikes``
  (publishes ``value``; an implausible value is rejected by decoding, as the
  daemon's decoder would).
- ``actuator_jam``: the opening stops where it is (or at ``position``) and
  its feedback reports the real position.
- ``occupancy``: ``people`` in ``zone`` instead of the schedule.

Errors name the file, line, key and what was expected
(:class:`~simulator.errors.ScenarioError`).
"""

from __future__ import annotations

import datetime as dt
import math
import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any, Literal

import numpy as np
import numpy.typing as npt
import pandas as pd

from simulator._yaml import FileReader
from simulator.errors import ScenarioError
from ventsup.config.errors import ConfigProblem
from ventsup.config.model import PointKind, SiteConfig

__all__ = [
    "FAULT_CODES",
    "ActuatorJam",
    "Event",
    "Gust",
    "OccupancyChange",
    "RainSpell",
    "Scenario",
    "SensorFault",
    "SmokeDrill",
    "Timeline",
    "Timing",
    "load_scenario",
    "parse_scenario",
    "timeline",
]

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]

#: Sensor fault codes in a :class:`Timeline`.
FAULT_CODES: Mapping[str, int] = MappingProxyType({"dropout": 1, "stick": 2, "spike": 3})


@dataclass(frozen=True)
class Timing:
    """When an event is in force: ``start <= t < end``.

    With ``relative`` the times are seconds after the run's start, otherwise
    seconds since the Unix epoch (UTC). ``end`` is infinite for "to the end".
    """

    start: float
    end: float = math.inf
    relative: bool = False

    def resolve(self, run_start: float) -> tuple[float, float]:
        """Absolute (start, end) [s since the epoch] for a run starting at ``run_start``."""
        if self.relative:
            return run_start + self.start, run_start + self.end
        return self.start, self.end


@dataclass(frozen=True)
class RainSpell:
    """It rains."""

    timing: Timing


@dataclass(frozen=True)
class Gust:
    """Wind of ``speed`` [m/s] at the rooftop station, from ``direction`` [deg] if given."""

    timing: Timing
    speed: float
    direction: float | None = None


@dataclass(frozen=True)
class SmokeDrill:
    """The smoke alarm ``points`` read active."""

    timing: Timing
    points: tuple[str, ...]


@dataclass(frozen=True)
class SensorFault:
    """A point drops out, sticks or spikes; ``value`` in SI for stick (optional) and spike."""

    timing: Timing
    point: str
    fault: Literal["dropout", "stick", "spike"]
    value: float | None = None


@dataclass(frozen=True)
class ActuatorJam:
    """An opening's actuator stops (at ``position`` [0-1] if given)."""

    timing: Timing
    zone: str
    opening: str
    position: float | None = None


@dataclass(frozen=True)
class OccupancyChange:
    """``people`` in ``zone`` instead of the occupancy schedule."""

    timing: Timing
    zone: str
    people: float


Event = RainSpell | Gust | SmokeDrill | SensorFault | ActuatorJam | OccupancyChange


@dataclass(frozen=True)
class Scenario:
    """A named list of events."""

    name: str = ""
    events: tuple[Event, ...] = ()
    file: str = ""


# ---------------------------------------------------------------------------------- timeline


@dataclass(frozen=True)
class Timeline:
    """A scenario laid out on the simulation steps (arrays of one value per step).

    ``rain``: forced wet; ``gust_speed``/``gust_direction``: NaN where no gust;
    ``alarms``: per alarm point, active; ``occupancy``: per zone, people (NaN:
    the schedule); ``sensor_faults``: per point, (code from
    :data:`FAULT_CODES`, 0 for none; value, NaN for none); ``jams``: per
    (zone, opening), (jammed; position, NaN for "where it is").
    """

    rain: BoolArray
    gust_speed: FloatArray
    gust_direction: FloatArray
    alarms: Mapping[str, BoolArray] = field(default_factory=dict)
    occupancy: Mapping[str, FloatArray] = field(default_factory=dict)
    sensor_faults: Mapping[str, tuple[npt.NDArray[np.int8], FloatArray]] = field(
        default_factory=dict
    )
    jams: Mapping[tuple[str, str], tuple[BoolArray, FloatArray]] = field(default_factory=dict)


def timeline(scenario: Scenario | None, t: FloatArray, run_start: float) -> Timeline:
    """Lay ``scenario`` out on the step times ``t`` [s since the epoch] of a run.

    Later events win where two of the same kind overlap on the same target.
    """
    n = len(t)
    result = Timeline(
        rain=np.zeros(n, dtype=bool),
        gust_speed=np.full(n, np.nan),
        gust_direction=np.full(n, np.nan),
        alarms={},
        occupancy={},
        sensor_faults={},
        jams={},
    )
    if scenario is None:
        return result
    alarms: dict[str, BoolArray] = {}
    occupancy: dict[str, FloatArray] = {}
    faults: dict[str, tuple[npt.NDArray[np.int8], FloatArray]] = {}
    jams: dict[tuple[str, str], tuple[BoolArray, FloatArray]] = {}
    for event in scenario.events:
        start, end = event.timing.resolve(run_start)
        active = (t >= start) & (t < end)
        if isinstance(event, RainSpell):
            result.rain[active] = True
        elif isinstance(event, Gust):
            result.gust_speed[active] = event.speed
            if event.direction is not None:
                result.gust_direction[active] = event.direction
        elif isinstance(event, SmokeDrill):
            for point in event.points:
                alarms.setdefault(point, np.zeros(n, dtype=bool))[active] = True
        elif isinstance(event, SensorFault):
            codes, values = faults.setdefault(
                event.point, (np.zeros(n, dtype=np.int8), np.full(n, np.nan))
            )
            codes[active] = FAULT_CODES[event.fault]
            values[active] = np.nan if event.value is None else event.value
        elif isinstance(event, ActuatorJam):
            jammed, positions = jams.setdefault(
                (event.zone, event.opening), (np.zeros(n, dtype=bool), np.full(n, np.nan))
            )
            jammed[active] = True
            positions[active] = np.nan if event.position is None else event.position
        else:
            occupancy.setdefault(event.zone, np.full(n, np.nan))[active] = event.people
    return Timeline(
        rain=result.rain,
        gust_speed=result.gust_speed,
        gust_direction=result.gust_direction,
        alarms=MappingProxyType(alarms),
        occupancy=MappingProxyType(occupancy),
        sensor_faults=MappingProxyType(faults),
        jams=MappingProxyType(jams),
    )


# ---------------------------------------------------------------------------------- parsing

_TIMING = ("at", "after", "duration", "until")
_KINDS: dict[str, tuple[tuple[str, ...], tuple[str, ...]]] = {
    # kind: (required keys, optional keys) besides the timing
    "rain": ((), ()),
    "gust": (("speed",), ("direction",)),
    "smoke_drill": ((), ("zone", "points")),
    "sensor": (("point", "fault"), ("value",)),
    "actuator_jam": (("zone", "opening"), ("position",)),
    "occupancy": (("zone", "people"), ()),
}
_VALUE_QUANTITY: dict[PointKind, str] = {
    PointKind.TEMPERATURE: "temperature",
    PointKind.DEW_POINT: "temperature",
    PointKind.WIND_SPEED: "speed",
    PointKind.WIND_DIRECTION: "angle",
    PointKind.CO2: "concentration",
    PointKind.POSITION: "fraction",
    PointKind.HUMIDITY: "number",
}


def load_scenario(path: str | os.PathLike[str], site_config: SiteConfig) -> Scenario:
    """Read a scenario file and check its zones, points and openings against the site.

    Raises
    ------
    ScenarioError
        With every problem found, each as ``file:line key.path: got ..., expected ...``.
    """
    file = os.fspath(path)
    try:
        text = Path(file).read_text(encoding="utf-8")
    except OSError as exc:
        reason = (exc.strerror or str(exc)).lower()
        raise ScenarioError(
            [ConfigProblem(file, None, "", f"cannot read the scenario: {reason}; check the path")]
        ) from None
    return parse_scenario(text, file, site_config)


def parse_scenario(text: str, file: str, site_config: SiteConfig) -> Scenario:
    """Parse a scenario given as YAML text; ``file`` names it in errors."""
    reader = FileReader(text, file)
    if reader.data is None:
        reader.finish(ScenarioError)
        reader.fail(ScenarioError, "the file is empty, expected the keys 'name' and 'events'")
    top = reader.mapping((), reader.data, required=("events",), optional=("name",))
    if top is None:
        reader.finish(ScenarioError)
        raise AssertionError("unreachable")  # pragma: no cover - finish raised
    name = ""
    if "name" in top:
        name = reader.text(("name",), top["name"], "a name for the scenario") or ""
    items = None
    if "events" in top:
        items = reader.sequence(("events",), top["events"], "events such as '- rain: {...}'")
    events: list[Event] = []
    for index, item in enumerate(items or []):
        event = _event(reader, ("events", index), item, site_config)
        if event is not None:
            events.append(event)
    reader.finish(ScenarioError)
    return Scenario(name, tuple(events), file)


def _event(
    reader: FileReader, path: tuple[Any, ...], item: object, site_config: SiteConfig
) -> Event | None:
    kinds = ", ".join(_KINDS)
    if not isinstance(item, dict) or len(item) != 1:
        reader.got(path, item, f"one event as a mapping with one key, one of {kinds}")
        return None
    kind, body = next(iter(item.items()))
    if kind not in _KINDS:
        reader.report((*path, kind), f"unknown event {kind!r}; expected one of {kinds}")
        return None
    path = (*path, kind)
    required, optional = _KINDS[kind]
    spec = reader.mapping(path, body, required=required, optional=(*optional, *_TIMING))
    if spec is None:
        return None
    timing = _timing(reader, path, spec, site_config.site.time_zone)
    if any(key not in spec for key in required):
        return None
    if kind == "rain":
        return RainSpell(timing) if timing else None
    if kind == "gust":
        speed = reader.quantity((*path, "speed"), spec["speed"], "speed", minimum=0.0)
        direction = None
        if "direction" in spec:
            direction = reader.quantity(
                (*path, "direction"), spec["direction"], "angle", minimum=0.0, maximum=360.0
            )
            if direction is None:
                return None
        return Gust(timing, speed, direction) if timing and speed is not None else None
    if kind == "smoke_drill":
        points = _alarm_points(reader, path, spec, site_config)
        return SmokeDrill(timing, points) if timing and points else None
    if kind == "sensor":
        return _sensor(reader, path, spec, site_config, timing)
    zone = _zone(reader, (*path, "zone"), spec["zone"], site_config)
    if kind == "actuator_jam":
        opening = spec["opening"]
        if zone is not None and opening not in site_config.zones[zone].openings:
            reader.got(
                (*path, "opening"),
                opening,
                f"an opening of zone {zone!r}: {', '.join(site_config.zones[zone].openings)}",
            )
            return None
        position = None
        if "position" in spec:
            position = reader.quantity(
                (*path, "position"), spec["position"], "fraction", minimum=0.0, maximum=1.0
            )
            if position is None:
                return None
        return ActuatorJam(timing, zone, str(opening), position) if timing and zone else None
    people = reader.quantity((*path, "people"), spec["people"], "number", minimum=0.0)
    if timing and zone and people is not None:
        return OccupancyChange(timing, zone, people)
    return None


def _zone(
    reader: FileReader, path: tuple[Any, ...], raw: object, site_config: SiteConfig
) -> str | None:
    if not isinstance(raw, str) or raw not in site_config.zones:
        reader.got(path, raw, f"a zone of the site: {', '.join(site_config.zones)}")
        return None
    return raw


def _alarm_points(
    reader: FileReader, path: tuple[Any, ...], spec: dict[str, Any], site_config: SiteConfig
) -> tuple[str, ...]:
    if ("zone" in spec) == ("points" in spec):
        reader.report(path, "expected exactly one of 'zone' (its smoke alarms) or 'points'")
        return ()
    if "zone" in spec:
        zone = _zone(reader, (*path, "zone"), spec["zone"], site_config)
        if zone is None:
            return ()
        points = site_config.zones[zone].smoke_alarms
        if not points:
            reader.report((*path, "zone"), f"zone {zone!r} has no smoke_alarms in the site config")
        return tuple(points)
    raw = spec["points"]
    names = [raw] if isinstance(raw, str) else raw
    binary = [n for n, p in site_config.points.items() if p.kind is PointKind.BINARY]
    if not isinstance(names, list) or not names:
        reader.got((*path, "points"), raw, "a list of binary point names")
        return ()
    good = True
    for index, name in enumerate(names):
        if name not in binary:
            reader.got((*path, "points", index), name, f"a binary point: {', '.join(binary)}")
            good = False
    return tuple(names) if good else ()


def _sensor(
    reader: FileReader,
    path: tuple[Any, ...],
    spec: dict[str, Any],
    site_config: SiteConfig,
    timing: Timing | None,
) -> SensorFault | None:
    point_name = spec["point"]
    if not isinstance(point_name, str) or point_name not in site_config.points:
        reader.got((*path, "point"), point_name, "a point of the site config")
        return None
    fault = reader.choice((*path, "fault"), spec["fault"], FAULT_CODES)
    if fault is None:
        return None
    kind = site_config.points[point_name].kind
    value: float | None = None
    if "value" in spec:
        raw = spec["value"]
        if kind is PointKind.BINARY:
            if not isinstance(raw, bool):
                reader.got((*path, "value"), raw, "true or false for a binary point")
                return None
            value = float(raw)
        else:
            value = reader.quantity((*path, "value"), raw, _VALUE_QUANTITY[kind])
            if value is None:
                return None
    elif fault == "spike":
        reader.report(path, "missing key 'value' (the value the sensor spikes to)")
        return None
    if timing is None:
        return None
    return SensorFault(timing, point_name, fault, value)  # type: ignore[arg-type]


def _timing(
    reader: FileReader, path: tuple[Any, ...], spec: dict[str, Any], time_zone: str
) -> Timing | None:
    if ("at" in spec) == ("after" in spec):
        reader.report(path, "expected exactly one of 'at' (a local time) or 'after' (a duration)")
        return None
    if "duration" in spec and "until" in spec:
        reader.report(path, "expected at most one of 'duration' and 'until'")
        return None
    relative = "after" in spec
    if relative:
        start = reader.quantity((*path, "after"), spec["after"], "duration", minimum=0.0)
    else:
        start = _instant(reader, (*path, "at"), spec["at"], time_zone)
    if start is None:
        return None
    end = math.inf
    if "duration" in spec:
        length = reader.quantity((*path, "duration"), spec["duration"], "duration", above=0.0)
        if length is None:
            return None
        end = start + length
    elif "until" in spec:
        until = _instant(reader, (*path, "until"), spec["until"], time_zone)
        if until is None:
            return None
        if relative:
            reader.report((*path, "until"), "use 'duration' with 'after'")
            return None
        if not until > start:
            reader.got((*path, "until"), spec["until"], "a time after 'at'")
            return None
        end = until
    return Timing(start, end, relative)


def _instant(
    reader: FileReader, path: tuple[Any, ...], raw: object, time_zone: str
) -> float | None:
    expected = "a local time such as '2024-07-02 15:00' (site time zone) or ISO 8601 with an offset"
    if isinstance(raw, dt.datetime | dt.date):
        stamp = pd.Timestamp(raw)
    elif isinstance(raw, str):
        try:
            stamp = pd.Timestamp(raw)
        except ValueError:
            reader.got(path, raw, expected)
            return None
    else:
        reader.got(path, raw, expected)
        return None
    if pd.isna(stamp):
        reader.got(path, raw, expected)
        return None
    if stamp.tz is None:
        try:
            stamp = stamp.tz_localize(time_zone, ambiguous="raise", nonexistent="raise")
        except ValueError:
            reader.got(
                path, raw, f"a local time that exists exactly once in {time_zone} (daylight saving)"
            )
            return None
    return float(stamp.timestamp())
