"""Layer 2, protection: rain, wind, cold outdoor air and actuator faults.

Each condition caps some openings. An unknown rain or wind reading is taken
as the worst case (layer 3, fault handling, is named as the cause), and also
keeps the dry delay and the wind hold running, so that windows do not open
the moment a sensor comes back.
"""

from __future__ import annotations

import math
from typing import NamedTuple

from ventsup.core.context import Context, known
from ventsup.core.state import Cause, Layer, Limit, OpeningState, WindLatch

__all__ = ["ProtectionResult", "angle_between", "evaluate"]


# A NamedTuple, not a frozen dataclass: built at every evaluation, and a frozen
# dataclass pays one object.__setattr__ per field.
class ProtectionResult(NamedTuple):
    """Limits in force and the timers to carry to the next evaluation."""

    limits: tuple[Limit, ...]
    rain_last_wet: float | None
    rain_since: float | None
    wind: dict[str, WindLatch]
    faults: dict[str, float | None]  # opening -> actuator fault since
    events: tuple[str, ...]


def angle_between(a: float, b: float) -> float:
    """Smallest angle between two compass directions [deg], 0-180.

    Examples
    --------
    >>> angle_between(350.0, 10.0)
    20.0
    """
    diff = abs(a - b) % 360.0
    return min(diff, 360.0 - diff)


def evaluate(ctx: Context) -> ProtectionResult:
    """Evaluate every protection condition for the zone."""
    limits: list[Limit] = []
    events: list[str] = []
    rain = _rain(ctx, limits)
    wind = _wind(ctx, limits)
    _cold(ctx, limits)
    faults = _actuators(ctx, limits, events)
    return ProtectionResult(tuple(limits), rain[0], rain[1], wind, faults, tuple(events))


def _rain(ctx: Context, limits: list[Limit]) -> tuple[float | None, float | None]:
    reading = ctx.input("rain")
    name = ctx.label(reading, "rain")
    prev, t = ctx.state, ctx.t
    delay = ctx.rules.rain.dry_delay
    is_known = known(reading)
    wet = bool(reading.value) if is_known else True
    last_wet = t if wet else prev.rain_last_wet
    in_force = wet or (last_wet is not None and t - last_wet < delay)
    since = (t if prev.rain_since is None else prev.rain_since) if in_force else None
    if not in_force:
        return last_wet, None
    caps = {n: o.rain_position for n, o in ctx.openings.items()}
    delay_text = ctx.fmt(delay, "duration")
    if not is_known:
        reason = (
            f"rain sensor {name} unknown ({ctx.unknown_since(reading)}): assumed wet; "
            f"dry delay {delay_text}"
        )
        limits.append(Limit(Layer.FAULT, Cause.FAULT, caps, reason, {"rain": None}))
    elif wet:
        reason = f"rain since {ctx.clock(since)} ({name} = wet); dry delay {delay_text}"
        limits.append(Limit(Layer.PROTECTION, Cause.RAIN, caps, reason, {"rain": True}))
    else:
        assert last_wet is not None
        reason = (
            f"rain stopped at {ctx.clock(last_wet)} ({name} = dry); dry delay {delay_text} "
            f"until {ctx.clock(last_wet + delay)}"
        )
        limits.append(Limit(Layer.PROTECTION, Cause.RAIN, caps, reason, {"rain": False}))
    return last_wet, since


_NEVER_HIGH = WindLatch()


def _latch(
    prev: WindLatch, speed: float, limit: float, ratio: float, hold: float, t: float
) -> WindLatch:
    if speed > limit:
        return WindLatch(True, t)
    if prev.active and speed > ratio * limit:
        return WindLatch(True, t)
    if prev.active and prev.last_high is not None and t - prev.last_high < hold:
        return prev
    if not prev.active:
        return prev  # calm and released already: the same latch, not a copy
    return WindLatch(False, prev.last_high)


def _wind(ctx: Context, limits: list[Limit]) -> dict[str, WindLatch]:
    rules = ctx.rules.wind
    speed_reading = ctx.input("wind_speed")
    dir_reading = ctx.input("wind_direction")
    speed_known = known(speed_reading)
    speed = float(speed_reading.value) if speed_known else math.inf  # type: ignore[arg-type]
    direction = float(dir_reading.value) if known(dir_reading) else None  # type: ignore[arg-type]
    thresholds = {
        "cap": rules.cap_above,
        "close": rules.close_above,
        "windward_cap": rules.windward_cap_above
        if rules.windward_cap_above is not None
        else rules.cap_above,
        "windward_close": rules.windward_close_above
        if rules.windward_close_above is not None
        else rules.close_above,
    }
    latches = {
        key: _latch(
            ctx.state.wind.get(key, _NEVER_HIGH),
            speed,
            limit,
            rules.reopen_ratio,
            rules.hold,
            ctx.t,
        )
        for key, limit in thresholds.items()
    }
    caps: dict[str, float] = {}
    worst_key = ""
    for name, opening in ctx.openings.items():
        windward = (
            direction is None or angle_between(opening.facing, direction) <= rules.windward_angle
        )
        prefix = "windward_" if windward else ""
        if latches[prefix + "close"].active:
            caps[name] = 0.0
            worst_key = worst_key if worst_key.endswith("close") else prefix + "close"
        elif latches[prefix + "cap"].active:
            caps[name] = rules.cap_position
            worst_key = worst_key or prefix + "cap"
    if not caps:
        return latches
    facts: dict[str, float | str | bool | None] = {
        "wind_speed": speed if speed_known else None,
        "wind_direction": direction,
    }
    if not speed_known:
        name = ctx.label(speed_reading, "wind_speed")
        reason = (
            f"wind sensor {name} unknown ({ctx.unknown_since(speed_reading)}): "
            f"assumed above {ctx.fmt(rules.close_above, 'speed')}"
        )
        limits.append(Limit(Layer.FAULT, Cause.FAULT, caps, reason, facts))
        return latches
    limit_value = thresholds[worst_key]
    latch = latches[worst_key]
    closed = sorted(n for n, c in caps.items() if c == 0.0)
    capped = sorted(n for n, c in caps.items() if c > 0.0)
    parts = []
    if closed:
        parts.append(f"{', '.join(closed)} closed")
    if capped:
        parts.append(f"{', '.join(capped)} capped at {ctx.fmt(rules.cap_position, 'fraction')}")
    if speed > limit_value:
        state = f"wind {ctx.fmt(speed, 'speed')} above {ctx.fmt(limit_value, 'speed')}"
    else:
        calm = latch.last_high + rules.hold if latch.last_high is not None else ctx.t
        state = (
            f"wind {ctx.fmt(speed, 'speed')}, holding until calm "
            f"(≤ {ctx.fmt(rules.reopen_ratio * limit_value, 'speed')}) for "
            f"{ctx.fmt(rules.hold, 'duration')}, not before {ctx.clock(calm)}"
        )
    if direction is None:
        state += "; wind direction unknown, every façade taken as windward"
    elif any(k.startswith("windward") for k in (worst_key,)):
        state += f" from {direction:.0f}°"
    limits.append(Limit(Layer.PROTECTION, Cause.WIND, caps, f"{state}; {'; '.join(parts)}", facts))
    return latches


def _cold(ctx: Context, limits: list[Limit]) -> None:
    reading = ctx.input("temp_outdoor")
    floor = ctx.rules.cold.outdoor_below
    if known(reading) and float(reading.value) < floor:  # type: ignore[arg-type]
        value = float(reading.value)  # type: ignore[arg-type]
        reason = (
            f"outdoor air {ctx.fmt(value, 'temperature')} below the cold limit "
            f"{ctx.fmt(floor, 'temperature')}"
        )
        caps = dict.fromkeys(ctx.openings, 0.0)
        limits.append(Limit(Layer.PROTECTION, Cause.COLD, caps, reason, {"temp_outdoor": value}))


def _actuators(ctx: Context, limits: list[Limit], events: list[str]) -> dict[str, float | None]:
    rules = ctx.rules.actuator
    feedback = ctx.inputs.feedback  # type: ignore[attr-defined]
    faults: dict[str, float | None] = {}
    caps: dict[str, float] = {}
    texts: list[str] = []
    for name in ctx.openings:
        prev: OpeningState = ctx.state.opening(name)
        since = prev.fault_since
        reading = feedback.get(name)
        if reading is not None and known(reading) and prev.target is not None:
            position = float(reading.value)
            off = abs(position - prev.target) > rules.feedback_tolerance
            waited = prev.changed_at is None or ctx.t - prev.changed_at >= rules.feedback_timeout
            if not off:
                if since is not None:
                    events.append(f"actuator {name} back at its command")
                since = None
            elif waited and since is None:
                since = ctx.t
                events.append(f"actuator fault {name}")
            if since is not None:
                texts.append(
                    f"{name} reads {ctx.fmt(position, 'fraction')}, commanded "
                    f"{ctx.fmt(prev.target, 'fraction')}"
                )
        elif since is not None:
            texts.append(f"{name} not at its command since {ctx.clock(since)}")
        faults[name] = since
        if since is not None:
            caps[name] = 0.0
    if caps:
        reason = f"actuator fault: {'; '.join(texts)}; closing and holding closed"
        limits.append(Limit(Layer.PROTECTION, Cause.ACTUATOR, caps, reason))
    return faults
