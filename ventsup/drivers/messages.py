"""The controller's own topics and what it publishes and accepts on them.

Everything here is pure (no broker, no clock): :class:`Topics` names the topics
under the site's ``prefix``; :func:`state_payload` and :func:`interlock_payload`
build the retained JSON outputs; :func:`parse_override` reads an operator's
override request or says, in :class:`OverrideRefused`, what is wrong with it.
The topics and payloads are listed in ``deploy/OPERATIONS.md``.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from datetime import UTC, datetime
from typing import Any

from ventsup.config.errors import VentsupError
from ventsup.config.model import SiteConfig
from ventsup.config.units import UnitError, parse_quantity
from ventsup.core.inputs import Reading, ZoneInputs
from ventsup.core.state import Decision, OverrideRequest, ZoneState

__all__ = [
    "MAX_OVERRIDE_PAYLOAD",
    "OverrideRefused",
    "Topics",
    "interlock_payload",
    "iso_time",
    "json_payload",
    "parse_override",
    "request_id",
    "state_payload",
]

#: Largest override request accepted [bytes].
MAX_OVERRIDE_PAYLOAD = 4096
_OVERRIDE_KEYS = ("id", "action", "duration", "position", "who", "reason")
_ACTIONS = ("open", "close", "hold", "auto")


# --------------------------------------------------------------------------- topics


class Topics:
    """The controller's own topics, all under the site's ``prefix``."""

    def __init__(self, config: SiteConfig) -> None:
        self.config = config
        self.prefix = config.topic_prefix
        self.status = f"{self.prefix}/status"
        self.heartbeat = f"{self.prefix}/heartbeat"
        self.override_filter = f"{self.prefix}/zones/+/override"
        self.state_filter = f"{self.prefix}/zones/+/state"

    def zone(self, zone: str) -> str:
        """``<prefix>/zones/<zone>``."""
        return f"{self.prefix}/zones/{zone}"

    def state(self, zone: str) -> str:
        """The zone's retained state JSON."""
        return f"{self.zone(zone)}/state"

    def interlock(self, zone: str) -> str:
        """The zone's retained HVAC interlock JSON."""
        return f"{self.zone(zone)}/interlock"

    def override(self, zone: str) -> str:
        """Where operators send override requests for the zone."""
        return f"{self.zone(zone)}/override"

    def override_result(self, zone: str) -> str:
        """Where the controller answers override requests for the zone."""
        return f"{self.zone(zone)}/override/result"

    def opening_state(self, zone: str, opening: str) -> str:
        """The opening's retained state: its target, or that it is released."""
        return f"{self.zone(zone)}/openings/{opening}/state"

    def command(self, zone: str, opening: str) -> str:
        """The opening's command topic: the site's own, or one under the prefix."""
        topic = self.config.zones[zone].openings[opening].command_topic
        return topic if topic is not None else f"{self.zone(zone)}/openings/{opening}/command"

    def override_zone(self, topic: str) -> str | None:
        """The zone named by an override request topic, None for any other topic."""
        head = f"{self.prefix}/zones/"
        if not topic.startswith(head) or not topic.endswith("/override"):
            return None
        zone = topic[len(head) : -len("/override")]
        return zone if zone and "/" not in zone else None


# --------------------------------------------------------------------------- overrides


class OverrideRefused(VentsupError):
    """An override request that cannot be applied; the message says why."""


def _text_field(data: Mapping[str, Any], key: str, *, required: bool, limit: int) -> str | None:
    value = data.get(key)
    if value is None:
        if required:
            raise OverrideRefused(f"'{key}' is missing; say {_FIELD_HELP[key]}")
        return None
    if not isinstance(value, str) or not value.strip():
        raise OverrideRefused(f"'{key}' must be a non-empty text ({_FIELD_HELP[key]})")
    if len(value) > limit:
        raise OverrideRefused(f"'{key}' is {len(value)} characters long, at most {limit} allowed")
    return value.strip()


_FIELD_HELP = {
    "who": "who asks, such as 'j.smith'",
    "reason": "why, such as 'cleaning the roof glazing'",
    "id": "a request id to find the answer by",
}


def parse_override(
    payload: bytes, config: SiteConfig, zone: str
) -> tuple[OverrideRequest, str | None]:
    """Read an override request (JSON) for ``zone``: the request and its ``id`` (if any).

    The JSON object has ``action`` (``open``, ``close``, ``hold`` or ``auto``),
    ``who`` and ``reason`` (required), ``duration`` (seconds or a text such as
    ``"2 h"``; default ``override.default_duration``, at most
    ``override.max_duration``), ``position`` (for open and hold: a fraction or
    ``"30 %"``) and ``id`` (echoed in the answer). Other keys are refused.

    Raises
    ------
    OverrideRefused
        With what is wrong and what was expected.
    """
    if zone not in config.zones:
        raise OverrideRefused(f"unknown zone {zone!r}; the zones are {', '.join(config.zones)}")
    if len(payload) > MAX_OVERRIDE_PAYLOAD:
        raise OverrideRefused(
            f"the request is {len(payload)} bytes, at most {MAX_OVERRIDE_PAYLOAD} accepted"
        )
    try:
        data = json.loads(payload.decode("utf-8"))
    except (UnicodeDecodeError, ValueError, RecursionError):
        raise OverrideRefused(
            'the request is not JSON; expected an object such as {"action": "open", '
            '"duration": "2 h", "who": "j.smith", "reason": "..."}'
        ) from None
    if not isinstance(data, dict):
        raise OverrideRefused("the request must be a JSON object")
    unknown = sorted(str(key) for key in data if key not in _OVERRIDE_KEYS)
    if unknown:
        raise OverrideRefused(
            f"unknown keys {', '.join(unknown)}; expected {', '.join(_OVERRIDE_KEYS)}"
        )
    request_id = _text_field(data, "id", required=False, limit=100)
    action = data.get("action")
    if action not in _ACTIONS:
        raise OverrideRefused(f"'action' must be one of {', '.join(_ACTIONS)}, got {action!r}")
    who = _text_field(data, "who", required=True, limit=100)
    reason = _text_field(data, "reason", required=True, limit=500)
    assert who is not None and reason is not None
    duration = _duration(data.get("duration"), config)
    position = _position(data.get("position"), action)
    request = OverrideRequest(
        action=action, duration=duration, position=position, who=who, why=reason
    )
    return request, request_id


def _duration(raw: object, config: SiteConfig) -> float:
    limits = config.override
    if raw is None:
        return limits.default_duration
    if isinstance(raw, bool) or not isinstance(raw, int | float | str):
        raise OverrideRefused(f"'duration' must be seconds or a text such as '2 h', got {raw!r}")
    try:
        seconds = parse_quantity(raw, "duration")
    except UnitError as exc:
        raise OverrideRefused(f"'duration' {raw!r}: {exc}") from None
    if not math.isfinite(seconds) or seconds <= 0:
        raise OverrideRefused(f"'duration' must be positive, got {raw!r}")
    if seconds > limits.max_duration:
        raise OverrideRefused(
            f"'duration' {raw!r} is longer than the site allows "
            f"({limits.max_duration / 3600:g} h, override.max_duration)"
        )
    return seconds


def _position(raw: object, action: str) -> float | None:
    if raw is None:
        return None
    if action not in ("open", "hold"):
        raise OverrideRefused(f"'position' applies to open and hold only, not to {action}")
    if isinstance(raw, bool) or not isinstance(raw, int | float | str):
        raise OverrideRefused(
            f"'position' must be a fraction 0-1 or a text such as '30 %', got {raw!r}"
        )
    try:
        fraction = parse_quantity(raw, "fraction")
    except UnitError as exc:
        raise OverrideRefused(f"'position' {raw!r}: {exc}") from None
    if not 0.0 <= fraction <= 1.0:
        raise OverrideRefused(f"'position' must be from 0 to 1 (0 % to 100 %), got {raw!r}")
    return fraction


def request_id(payload: bytes) -> str | None:
    """The ``id`` of an override request that cannot be parsed, if it can be read at all."""
    try:
        data = json.loads(payload.decode("utf-8"))
    except (UnicodeDecodeError, ValueError, RecursionError):
        return None
    if isinstance(data, dict) and isinstance(data.get("id"), str):
        return str(data["id"])[:100]
    return None


# --------------------------------------------------------------------------- payloads


def _clean(value: Any) -> Any:
    """``value`` with non-finite floats as None, ready for strict JSON."""
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, Mapping):
        return {str(k): _clean(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_clean(v) for v in value]
    return value


def json_payload(value: Mapping[str, Any]) -> bytes:
    """``value`` as strict UTF-8 JSON (non-finite floats as null).

    Keys must be text. Most payloads hold no non-finite float: they are
    encoded as they are, and only one that the strict encoder refuses is
    cleaned first (a copy of every level, the slower way).
    """
    try:
        text = _STRICT.encode(value)
    except (ValueError, TypeError):  # a NaN or infinity, or a mapping that is not a dict
        text = _STRICT.encode(_clean(value))
    return text.encode("utf-8")


_STRICT = json.JSONEncoder(ensure_ascii=False, allow_nan=False)


def iso_time(t: float | None) -> str | None:
    """``t`` [s since the epoch] as ISO 8601 UTC text (``2024-05-01T14:02:00Z``)."""
    if t is None:
        return None
    return datetime.fromtimestamp(t, UTC).isoformat(timespec="seconds").replace("+00:00", "Z")


def _reading(reading: Reading, t: float) -> dict[str, Any]:
    age = reading.age(t)
    return {
        "point": reading.point or None,
        "value": reading.value,
        "status": reading.status,
        "age": None if age is None else round(age, 3),
    }


def _inputs_used(inputs: ZoneInputs, t: float) -> dict[str, Any]:
    used: dict[str, Any] = {}
    for name in (
        "temp_indoor",
        "temp_outdoor",
        "humidity_outdoor",
        "dew_point_outdoor",
        "wind_speed",
        "wind_direction",
        "rain",
        "co2",
        "heating",
    ):
        reading: Reading = getattr(inputs, name)
        if reading.point:
            used[name] = _reading(reading, t)
    for reading in inputs.alarms:
        used[f"alarm:{reading.point}"] = _reading(reading, t)
    for opening, reading in inputs.feedback.items():
        used[f"feedback:{opening}"] = _reading(reading, t)
    return used


def state_payload(
    decision: Decision, state: ZoneState, inputs: ZoneInputs | None, *, observe: bool
) -> bytes:
    """The retained zone state JSON (see ``deploy/OPERATIONS.md`` for every field)."""
    override = state.override
    body: dict[str, Any] = {
        "zone": decision.zone,
        "t": decision.t,
        "time": iso_time(decision.t),
        "mode": decision.mode.value,
        "layer": decision.layer.name.lower(),
        "layer_number": int(decision.layer),
        "cause": decision.cause.value,
        "reason": decision.reason,
        "since": state.mode_since,
        "targets": dict(decision.targets),
        "released": sorted(n for n, v in decision.targets.items() if v is None),
        "windows_open": decision.windows_open,
        "open_area": decision.open_area,
        "alarm_latched": state.alarm_latched,
        "override": None
        if override is None
        else {
            "action": override.action,
            "who": override.who,
            "why": override.why,
            "since": override.since,
            "until": override.until,
        },
        "facts": dict(decision.facts),
        "inputs": {} if inputs is None else _inputs_used(inputs, decision.t),
        "observe": observe,
    }
    return json_payload(body)


def interlock_payload(decision: Decision) -> bytes:
    """The retained HVAC interlock JSON: ``{"windows_open": ..., "open_area": ...}``."""
    return json_payload({"windows_open": decision.windows_open, "open_area": decision.open_area})
