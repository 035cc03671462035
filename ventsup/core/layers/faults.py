"""Layer 3, fault handling: inputs that are stale, implausible or never received.

A point that is not known never counts as a good value. Unknown rain and wind
are handled in :mod:`.protection` (assume the worst). Here: unknown outdoor
temperature or alarm status closes the openings; an unknown indoor temperature
pins the zone to its configured fallback (closed by default, or hold the last
positions, or a fixed fraction).
"""

from __future__ import annotations

from typing import NamedTuple

from ventsup.core.context import Context, known
from ventsup.core.state import Cause, Layer, Limit

__all__ = ["FaultResult", "evaluate"]


# A NamedTuple, not a frozen dataclass: built at every evaluation, and a frozen
# dataclass pays one object.__setattr__ per field.
class FaultResult(NamedTuple):
    """Caps for unknown inputs, and the fallback pin for an unknown indoor temperature."""

    limits: tuple[Limit, ...]
    pin: dict[str, float] | None
    pin_reason: str


def evaluate(ctx: Context, alarm_unknown: tuple[str, ...]) -> FaultResult:
    """Find the unknown inputs that must close or pin the zone."""
    limits: list[Limit] = []
    closed = dict.fromkeys(ctx.openings, 0.0)
    outdoor = ctx.input("temp_outdoor")
    if not known(outdoor):
        name = ctx.label(outdoor, "temp_outdoor")
        reason = f"outdoor temperature {name} unknown ({ctx.unknown_since(outdoor)})"
        limits.append(Limit(Layer.FAULT, Cause.FAULT, closed, reason, {"temp_outdoor": None}))
    if alarm_unknown:
        reason = f"smoke alarm status unknown ({', '.join(alarm_unknown)})"
        limits.append(Limit(Layer.FAULT, Cause.FAULT, dict(closed), reason, {"smoke_alarm": None}))

    indoor = ctx.input("temp_indoor")
    if known(indoor):
        return FaultResult(tuple(limits), None, "")
    fallback = ctx.rules.indoor_unknown
    name = ctx.label(indoor, "temp_indoor")
    what = f"indoor temperature {name} unknown ({ctx.unknown_since(indoor)})"
    if fallback == "closed":
        limits.append(Limit(Layer.FAULT, Cause.FAULT, dict(closed), f"{what}; fallback closed"))
        return FaultResult(tuple(limits), None, "")
    if fallback == "hold":
        pin = {n: ctx.state.opening(n).target or 0.0 for n in ctx.openings}
        return FaultResult(tuple(limits), pin, f"{what}; fallback: hold the last positions")
    pin = dict.fromkeys(ctx.openings, float(fallback))
    return FaultResult(
        tuple(limits), pin, f"{what}; fallback position {ctx.fmt(float(fallback), 'fraction')}"
    )
