"""Layer 7, actuator care: dwell times, a minimum step and a moves-per-hour limit.

Actuator care smooths only the comfort layer's own movements. It never delays
a move that a higher layer requires: alarms, protection, faults, operator
overrides and the schedule act at once (their caps are applied after this
layer). A step to fully closed or fully open is never skipped for being small.
"""

from __future__ import annotations

from typing import NamedTuple

from ventsup.core.context import Context

__all__ = ["HOUR", "CareResult", "apply", "recent_moves"]

HOUR = 3600.0


# A NamedTuple, not a frozen dataclass: built at every evaluation, and a frozen
# dataclass pays one object.__setattr__ per field.
class CareResult(NamedTuple):
    """Targets after actuator care, why any opening was held, and the small steps skipped.

    A skipped small step is not a hold: the opening is already within the
    minimum step of what comfort wants.
    """

    targets: dict[str, float]
    held: dict[str, str]
    skipped: dict[str, float]


def recent_moves(moves: tuple[float, ...], t: float) -> tuple[float, ...]:
    """The move times within the hour before ``t``."""
    if not moves or t - moves[0] < HOUR:  # kept in time order, so the oldest decides
        return moves
    return tuple(m for m in moves if t - m < HOUR)


def apply(ctx: Context, wanted: dict[str, float]) -> CareResult:
    """Hold comfort-layer moves that would wear the actuators; return the targets."""
    rules = ctx.rules.actuator
    t = ctx.t
    targets: dict[str, float] = {}
    held: dict[str, str] = {}
    skipped: dict[str, float] = {}
    for name, want in wanted.items():
        prev = ctx.state.opening(name)
        current = prev.target
        if current is None or want == current:
            targets[name] = want
            continue
        # fractions are kept to 1e-9: a step of exactly min_step (0.7 - 0.6) is not below it
        if round(abs(want - current), 9) < rules.min_step and want not in (0.0, 1.0):
            targets[name] = current
            skipped[name] = want
            continue
        why = None
        if want == 0.0 and prev.opened_at is not None and t - prev.opened_at < rules.min_open_time:
            why = (
                f"open since {ctx.clock(prev.opened_at)}, minimum time open "
                f"{ctx.fmt(rules.min_open_time, 'duration')}"
            )
        elif (
            current == 0.0
            and prev.closed_at is not None
            and t - prev.closed_at < rules.min_closed_time
        ):
            why = (
                f"closed since {ctx.clock(prev.closed_at)}, minimum time closed "
                f"{ctx.fmt(rules.min_closed_time, 'duration')}"
            )
        elif len(recent_moves(prev.moves, t)) >= rules.max_moves_per_hour:
            why = f"{rules.max_moves_per_hour} moves in the last hour already"
        if why is None:
            targets[name] = want
        else:
            targets[name] = current
            held[name] = why
    return CareResult(targets, held, skipped)
