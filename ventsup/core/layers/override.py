"""Layer 4, operator override: open, close or hold a zone for a set time.

Requests are applied by :func:`apply_request` (pure); an override in force
expires by itself at its ``until`` time and the zone returns to automatic.
"""

from __future__ import annotations

from ventsup.config.model import SiteConfig
from ventsup.core.state import OverrideRequest, OverrideState, ZoneState

__all__ = ["apply_request", "expire"]


def apply_request(
    config: SiteConfig, zone: str, state: ZoneState, request: OverrideRequest, t: float
) -> tuple[ZoneState, str]:
    """Return the zone state with the request applied, and an event line for the record.

    ``auto`` ends any override at once. The duration is limited to the site's
    ``override.max_duration``.
    """
    openings = config.zones[zone].openings
    if request.action not in ("open", "close", "hold", "auto"):
        raise ValueError(
            f"override action must be 'open', 'close', 'hold' or 'auto', got {request.action!r}"
        )
    if request.action == "auto":
        if state.override is None:
            return state, f"override auto by {request.who}: nothing to end"
        return _replace(state, None), f"override ended by {request.who}: {request.why}".rstrip(": ")
    if not request.duration > 0:
        raise ValueError(f"override duration must be positive, got {request.duration} s")
    if request.position is not None and not 0.0 <= request.position <= 1.0:
        raise ValueError(f"override position must be a fraction 0-1, got {request.position}")
    duration = min(request.duration, config.override.max_duration)
    if request.action == "open":
        position = 1.0 if request.position is None else request.position
        targets = dict.fromkeys(openings, position)
    elif request.action == "close":
        targets = dict.fromkeys(openings, 0.0)
    else:
        targets = {
            n: request.position
            if request.position is not None
            else (state.opening(n).target or 0.0)
            for n in openings
        }
    override = OverrideState(request.action, t, t + duration, request.who, request.why, targets)
    event = f"override {request.action} by {request.who} for {duration / 60:.0f} min" + (
        f": {request.why}" if request.why else ""
    )
    return _replace(state, override), event


def expire(state: ZoneState, t: float) -> tuple[OverrideState | None, tuple[str, ...]]:
    """The override still in force at ``t``, and an event if it just ended."""
    override = state.override
    if override is None:
        return None, ()
    if t >= override.until:
        return None, (f"override {override.action} by {override.who} expired",)
    return override, ()


def _replace(state: ZoneState, override: OverrideState | None) -> ZoneState:
    from dataclasses import replace

    return replace(state, override=override)
