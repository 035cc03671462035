"""Layer 5, schedule: occupied hours and the security window, in local wall-clock time.

Periods are read in the site's IANA time zone, so they follow daylight saving
time as a person reading a wall clock expects: on the spring change an hour
that does not exist is simply not in any period; on the autumn change the
repeated hour is inside a period that covers it both times.
"""

from __future__ import annotations

from datetime import datetime
from typing import NamedTuple

from ventsup.config.model import Period
from ventsup.core.context import Context
from ventsup.core.state import Cause, Layer, Limit

__all__ = ["ScheduleResult", "evaluate", "in_period"]


# A NamedTuple, not a frozen dataclass: built at every evaluation, and a frozen
# dataclass pays one object.__setattr__ per field.
class ScheduleResult(NamedTuple):
    """Which comfort functions the schedule allows now, and the security cap."""

    occupied: bool
    flush_hours: bool
    security: Limit | None


def in_period(period: Period, local: datetime) -> bool:
    """True when a local wall-clock time falls in a weekly period.

    A period that crosses midnight belongs to the day it starts on:
    ``Fri 22:00-06:00`` covers Friday night until Saturday 06:00.
    """
    return _in_period_at(period, local.weekday(), local.hour * 60 + local.minute)


def _in_period_at(period: Period, day: int, minute: int) -> bool:
    """:func:`in_period` at weekday ``day`` (Monday 0) and minute of the day ``minute``."""
    if period.start_minute < period.end_minute:
        return day in period.days and period.start_minute <= minute < period.end_minute
    return (day in period.days and minute >= period.start_minute) or (
        (day - 1) % 7 in period.days and minute < period.end_minute
    )


def _any(periods: tuple[Period, ...], day: int, minute: int) -> bool:
    return any(_in_period_at(period, day, minute) for period in periods)


def evaluate(ctx: Context) -> ScheduleResult:
    """Evaluate the zone's schedule at the context's local time."""
    rules = ctx.rules
    local = ctx.local
    day, minute = local.weekday(), local.hour * 60 + local.minute
    occupied = _any(rules.schedule.occupied, day, minute)
    flush_hours = rules.night_flush.enabled and _any(rules.night_flush.hours, day, minute)
    security = None
    if _any(rules.schedule.security, day, minute):
        caps = {n: o.secure_position for n, o in ctx.openings.items()}
        limited = ", ".join(f"{n} {ctx.fmt(c, 'fraction')}" for n, c in caps.items() if c < 1.0)
        security = Limit(
            Layer.SCHEDULE, Cause.SCHEDULE, caps, f"security window ({limited or 'no limit'})"
        )
    return ScheduleResult(occupied, flush_hours, security)
