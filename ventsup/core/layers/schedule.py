"""Layer 5, schedule: occupied hours and the security window, in local wall-clock time.

Periods are read in the site's IANA time zone, so they follow daylight saving
time as a person reading a wall clock expects: on the spring change an hour
that does not exist is simply not in any period; on the autumn change the
repeated hour is inside a period that covers it both times.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime

from ventsup.config.model import Period
from ventsup.core.context import Context
from ventsup.core.state import Cause, Layer, Limit

__all__ = ["ScheduleResult", "evaluate", "in_period"]


@dataclass(frozen=True)
class ScheduleResult:
    """Which comfort functions the schedule allows now, and the security cap."""

    occupied: bool
    flush_hours: bool
    security: Limit | None


def in_period(period: Period, local: datetime) -> bool:
    """True when a local wall-clock time falls in a weekly period.

    A period that crosses midnight belongs to the day it starts on:
    ``Fri 22:00-06:00`` covers Friday night until Saturday 06:00.
    """
    minute = local.hour * 60 + local.minute
    day = local.weekday()
    if period.start_minute < period.end_minute:
        return day in period.days and period.start_minute <= minute < period.end_minute
    return (day in period.days and minute >= period.start_minute) or (
        (day - 1) % 7 in period.days and minute < period.end_minute
    )


def _any(periods: tuple[Period, ...], local: datetime) -> bool:
    return any(in_period(p, local) for p in periods)


def evaluate(ctx: Context) -> ScheduleResult:
    """Evaluate the zone's schedule at the context's local time."""
    rules = ctx.rules
    local = ctx.local
    occupied = _any(rules.schedule.occupied, local)
    flush_hours = rules.night_flush.enabled and _any(rules.night_flush.hours, local)
    security = None
    if _any(rules.schedule.security, local):
        caps = {n: o.secure_position for n, o in ctx.openings.items()}
        limited = ", ".join(f"{n} {ctx.fmt(c, 'fraction')}" for n, c in caps.items() if c < 1.0)
        security = Limit(
            Layer.SCHEDULE, Cause.SCHEDULE, caps, f"security window ({limited or 'no limit'})"
        )
    return ScheduleResult(occupied, flush_hours, security)
