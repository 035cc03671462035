"""Layer 1, life safety: smoke and fire alarms.

On an active alarm the zone's openings are released (the controller stops
commanding them) or driven to the position the site's fire strategy names,
and the state latches until every alarm point has been known and clear for
``alarm.clear_hold``. Smoke control belongs to the listed fire system; this
layer only makes sure ventsup never fights it.
"""

from __future__ import annotations

from typing import NamedTuple

from ventsup.core.context import Context, known

__all__ = ["AlarmResult", "evaluate"]


# A NamedTuple, not a frozen dataclass: built at every evaluation, and a frozen
# dataclass pays one object.__setattr__ per field.
class AlarmResult(NamedTuple):
    """The alarm latch after this evaluation and what to do about it."""

    latched: bool
    since: float | None
    clear_since: float | None
    targets: dict[str, float | None]
    reason: str
    events: tuple[str, ...]
    unknown: tuple[str, ...]


def evaluate(ctx: Context) -> AlarmResult:
    """Update the alarm latch and, while latched, give the fire-strategy targets."""
    prev = ctx.state
    readings = ctx.inputs.alarms  # type: ignore[attr-defined]
    active = [r.point or "alarm" for r in readings if known(r) and bool(r.value)]
    unknown = tuple(r.point or "alarm" for r in readings if not known(r))
    all_clear = not active and not unknown
    events: list[str] = []
    t = ctx.t
    hold = ctx.rules.alarm.clear_hold

    if active:
        since = prev.alarm_since if prev.alarm_latched else t
        if not prev.alarm_latched:
            events.append(f"alarm latched: {', '.join(active)}")
        latched, clear_since = True, None
    elif prev.alarm_latched:
        since = prev.alarm_since
        if not all_clear:
            clear_since = None
        elif prev.alarm_clear_since is not None:
            clear_since = prev.alarm_clear_since
        else:
            clear_since = t
        latched = clear_since is None or t - clear_since < hold
        if not latched:
            events.append("alarm latch released")
    else:
        latched, since, clear_since = False, None, None

    if not latched:
        return AlarmResult(False, None, None, {}, "", tuple(events), unknown)

    targets: dict[str, float | None] = {}
    for name, opening in ctx.openings.items():
        targets[name] = None if opening.fire_position == "release" else opening.fire_position
    if active:
        what = f"smoke alarm {', '.join(active)} active since {ctx.clock(since)}"
    elif clear_since is not None:
        until = ctx.clock(clear_since + hold)
        what = (
            f"smoke alarm clear since {ctx.clock(clear_since)}, latched until {until} "
            f"(clear hold {ctx.fmt(hold, 'duration')})"
        )
    else:
        what = f"smoke alarm latched; alarm point {', '.join(unknown)} unknown, so not yet clear"
    released = [n for n, v in targets.items() if v is None]
    if len(released) == len(targets):
        reason = f"released to the fire system: {what}"
    else:
        reason = f"fire strategy positions: {what}"
    return AlarmResult(True, since, clear_since, targets, reason, tuple(events), unknown)
