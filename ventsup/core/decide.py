"""The decision function: one zone, one time, every layer in priority order.

:func:`decide` is pure: it reads no clock, does no I/O, keeps no global state
and does not mutate its arguments. The live daemon, the replay and the
simulator all call it, so a rule behaves the same everywhere. (A few bounded
memos of pure functions, the site's local time, display formatting and the
outdoor dew point, save recomputing the same values at every evaluation; they
never change a result, see tests/core/test_decide_identity.py.)

How the layers combine
----------------------
1. Life safety: while an alarm is latched, the fire-strategy targets are the
   result and nothing below is consulted (its timers still run).
2-3. Protection and fault handling give caps per opening; an unknown indoor
   temperature pins the zone to its fallback.
4. An operator override, 5. the schedule (security caps; which comfort
   functions may run) and 6. comfort propose targets; 7. actuator care may
   hold a comfort-layer move. Caps of layers 2, 3 and 5 are applied last, so
   they act at once whatever the dwell timers say.

The decision names the highest layer that shaped the result: a cap that binds
(or is in force while the zone ends up closed), else the layer that wanted the
targets.
"""

from __future__ import annotations

from dataclasses import replace

from ventsup.config.model import SiteConfig
from ventsup.core.context import Context, known
from ventsup.core.layers import actuator, comfort, faults, override, protection, safety, schedule
from ventsup.core.state import (
    Cause,
    Decision,
    Layer,
    Limit,
    Mode,
    OpeningState,
    OverrideRequest,
    OverrideState,
    ZoneState,
)

__all__ = ["decide", "initial_state"]

Targets = dict[str, float | None]


def initial_state() -> ZoneState:
    """The state of a zone never evaluated before: nothing commanded, no timers."""
    return ZoneState()


def decide(
    config: SiteConfig,
    zone: str,
    inputs: object,
    state: ZoneState,
    t: float,
    request: OverrideRequest | None = None,
) -> tuple[Decision, ZoneState]:
    """Decide the openings of one zone at time ``t``.

    Parameters
    ----------
    config : SiteConfig
        The validated site.
    zone : str
        Name of the zone in ``config.zones``.
    inputs : ZoneInputs
        The zone's sampled-and-held readings at ``t`` (:func:`ventsup.core.inputs.zone_inputs`).
    state : ZoneState
        The state returned by the previous evaluation (or :func:`initial_state`).
    t : float
        Evaluation time [s since the Unix epoch, UTC].
    request : OverrideRequest, optional
        An operator request arriving with this evaluation.

    Returns
    -------
    (Decision, ZoneState)
        What to command and why, and the state to pass to the next evaluation.
    """
    if zone not in config.zones:
        raise KeyError(f"zone {zone!r} is not in the site config; zones: {', '.join(config.zones)}")
    events: list[str] = []
    if request is not None:
        state, event = override.apply_request(config, zone, state, request, t)
        events.append(event)
    ctx = Context(config, zone, inputs, state, t)

    alarm = safety.evaluate(ctx)
    prot = protection.evaluate(ctx)
    fault = faults.evaluate(ctx, alarm.unknown)
    active_override, override_events = override.expire(state, t)
    sched = schedule.evaluate(ctx)
    wants = comfort.evaluate(ctx, sched.occupied, sched.flush_hours)
    events += [*alarm.events, *prot.events, *override_events]

    limits = (*prot.limits, *fault.limits)
    all_limits = (*limits, sched.security) if sched.security else limits
    caps = _min_caps(ctx, all_limits)
    comfort_moves: set[str] = set()
    held: dict[str, str] = {}
    skipped: dict[str, float] = {}
    forced: set[str] = set()

    if alarm.latched:
        targets: Targets = dict(alarm.targets)
        fire = any(v is not None for v in targets.values())
        mode = Mode.FIRE_POSITION if fire else Mode.RELEASED
        layer, cause, reason = Layer.LIFE_SAFETY, Cause.SMOKE, alarm.reason
    else:
        if fault.pin is not None:
            wanted = dict(fault.pin)
            caps = _min_caps(ctx, limits)  # the pin replaces layers 4-7, not 2-3
        elif active_override is not None:
            wanted = dict(active_override.targets)
            caps = _min_caps(ctx, limits)  # an override may open beyond the schedule
        else:
            wanted = _comfort_targets(
                ctx, wants.fraction, caps, held, skipped, comfort_moves, forced
            )
        targets = {n: min(wanted[n], caps[n]) for n in ctx.openings}
        if fault.pin is None and active_override is None:
            # What comfort and actuator care would have commanded without the caps, to
            # tell which cap decided: the kept position where a cap moved an opening.
            wanted = {
                n: _position(ctx, n)
                if n in forced
                else (wanted[n] if n in held else wants.fraction)
                for n in ctx.openings
            }
        mode, layer, cause, reason = _explain(
            ctx,
            wanted,
            targets,
            limits,
            sched.security,
            fault,
            active_override,
            wants,
            held,
            skipped,
        )

    decision = Decision(
        zone=zone,
        t=t,
        targets=targets,
        mode=mode,
        layer=layer,
        cause=cause,
        reason=reason,
        windows_open=_windows_open(ctx, targets),
        open_area=_open_area(ctx, targets),
        limits=all_limits,
        facts=_facts(ctx, wants.facts),
        events=tuple(events),
    )
    next_state = ZoneState(
        openings=_next_openings(ctx, targets, prot.faults, comfort_moves),
        alarm_latched=alarm.latched,
        alarm_since=alarm.since,
        alarm_clear_since=alarm.clear_since,
        rain_last_wet=prot.rain_last_wet,
        rain_since=prot.rain_since,
        wind=prot.wind,
        cooling=wants.cooling,
        flush=wants.flush,
        air_quality=wants.air_quality,
        override=active_override,
        mode=mode,
        mode_since=state.mode_since if state.mode == mode else t,
        last_t=t,
    )
    return decision, next_state


def _min_caps(ctx: Context, limits: tuple[Limit, ...]) -> dict[str, float]:
    caps = dict.fromkeys(ctx.openings, 1.0)
    for limit in limits:
        for name, cap in limit.caps.items():
            caps[name] = min(caps[name], cap)
    return caps


def _comfort_targets(
    ctx: Context,
    fraction: float,
    caps: dict[str, float],
    held: dict[str, str],
    skipped: dict[str, float],
    comfort_moves: set[str],
    forced: set[str],
) -> dict[str, float]:
    """Comfort wants ``fraction`` everywhere; caps act at once, actuator care smooths the rest.

    Where a cap falls below an opening's position, the cap moves the opening at
    once: to the cap when comfort wants at least that much, else to what comfort
    wants if actuator care allows that move (then it is a comfort move), else to
    the cap. The openings a cap moved are added to ``forced``; their moves are
    not comfort moves. The returned targets are before caps (:func:`decide`
    applies them).
    """
    wanted: dict[str, float] = {}
    careful: dict[str, float] = {}
    for name in ctx.openings:
        current = ctx.state.opening(name).target
        if current is not None and caps[name] < current and fraction >= caps[name]:
            wanted[name] = caps[name]  # a higher layer closes or caps: at once
            forced.add(name)
        else:
            careful[name] = min(fraction, caps[name])
    care = actuator.apply(ctx, careful)
    for name, target in care.targets.items():
        if target > caps[name]:
            forced.add(name)  # care would keep it above a new cap: the cap moves it at once
    wanted.update(care.targets)
    held.update((n, why) for n, why in care.held.items() if n not in forced)
    skipped.update((n, want) for n, want in care.skipped.items() if n not in forced)
    for name, target in care.targets.items():
        current = ctx.state.opening(name).target
        if name not in forced and current is not None and target != current:
            comfort_moves.add(name)
    return wanted


def _position(ctx: Context, name: str) -> float:
    """The last commanded position of an opening (0 when never commanded or released)."""
    return ctx.state.opening(name).target or 0.0


def _binding(limit: Limit, wanted: dict[str, float], targets: Targets) -> bool:
    """A cap decides when it lowers a target, or is in force while the zone ends up closed."""
    if not any(cap < 1.0 for cap in limit.caps.values()):
        return False
    if any(cap < wanted.get(n, 0.0) for n, cap in limit.caps.items()):
        return True
    return all(v == 0.0 for v in targets.values())


def _explain(
    ctx: Context,
    wanted: dict[str, float],
    targets: Targets,
    limits: tuple[Limit, ...],
    security: Limit | None,
    fault: faults.FaultResult,
    active_override: OverrideState | None,
    wants: comfort.ComfortResult,
    held: dict[str, str],
    skipped: dict[str, float],
) -> tuple[Mode, Layer, Cause, str]:
    closed = all(v == 0.0 for v in targets.values())
    for limit in sorted(limits, key=lambda lim: lim.layer):
        if _binding(limit, wanted, targets):
            mode = Mode.PROTECTED if limit.layer == Layer.PROTECTION else Mode.FAULT
            return (
                mode,
                limit.layer,
                limit.cause,
                f"{'closed' if closed else 'capped'}: {limit.reason}",
            )
    if fault.pin is not None:
        return Mode.FAULT, Layer.FAULT, Cause.FAULT, f"fault: {fault.pin_reason}"
    if active_override is not None:
        ov = active_override
        what = {"open": "opened", "close": "closed", "hold": "held"}[ov.action]
        reason = f"{what} by operator {ov.who} until {ctx.clock(ov.until)}"
        return (
            Mode.OVERRIDE,
            Layer.OVERRIDE,
            Cause.OPERATOR,
            reason + (f": {ov.why}" if ov.why else ""),
        )
    still_open = any(v is not None and v > 0.0 for v in targets.values())
    limiting = security is not None and any(cap < 1.0 for cap in security.caps.values())
    if (
        security is not None
        and limiting
        and (
            wants.mode in (Mode.IDLE, Mode.UNOCCUPIED)
            or (_binding(security, wanted, targets) and not still_open)
        )
    ):
        return (
            Mode.SECURED,
            Layer.SCHEDULE,
            Cause.SCHEDULE,
            f"{'closed' if closed else 'capped'}: {security.reason}",
        )
    if held:
        groups: dict[str, list[str]] = {}
        for name, why in sorted(held.items()):
            groups.setdefault(f"at {ctx.fmt(targets[name], 'fraction')} ({why})", []).append(name)
        positions = "; ".join(f"{', '.join(names)} {what}" for what, names in groups.items())
        return (
            Mode.HELD,
            Layer.ACTUATOR_CARE,
            Cause.ACTUATOR_CARE,
            f"held: {positions}; without the hold: {wants.reason}",
        )
    layer = Layer.SCHEDULE if wants.mode == Mode.UNOCCUPIED else Layer.COMFORT
    reason = wants.reason
    if security is not None and _binding(security, wanted, targets):
        capped = sorted(n for n, c in security.caps.items() if c < wanted.get(n, 0.0))
        reason += f"; {', '.join(capped)} limited by the {security.reason}"
    kept = {n: targets[n] for n in skipped}
    if kept:
        positions = ", ".join(f"{n} kept at {ctx.fmt(v, 'fraction')}" for n, v in kept.items())
        reason += f" ({positions}: step below the minimum {ctx.fmt(ctx.rules.actuator.min_step, 'fraction')})"
    return wants.mode, layer, wants.cause, reason


def _released_position(ctx: Context, name: str) -> float | None:
    reading = ctx.inputs.feedback.get(name)  # type: ignore[attr-defined]
    if reading is not None and known(reading):
        return float(reading.value)
    return None


def _windows_open(ctx: Context, targets: Targets) -> bool:
    """The HVAC interlock output: open if any target is open; a released opening
    counts as open unless its feedback says closed."""
    for name, target in targets.items():
        if target is None:
            position = _released_position(ctx, name)
            if position is None or position > 0.0:
                return True
        elif target > 0.0:
            return True
    return False


def _open_area(ctx: Context, targets: Targets) -> float:
    """Free area commanded open [m²]; released openings by feedback (unknown: counted fully)."""
    area = 0.0
    for name, target in targets.items():
        position = target if target is not None else _released_position(ctx, name)
        area += ctx.openings[name].area * (1.0 if position is None else position)
    return round(area, 9)


def _facts(
    ctx: Context, comfort_facts: dict[str, float | str | bool | None]
) -> dict[str, float | str | bool | None]:
    facts = dict(comfort_facts)
    for name in ("wind_speed", "wind_direction", "rain"):
        reading = ctx.input(name)
        facts[name] = reading.value if known(reading) else None
    return facts


def _next_openings(
    ctx: Context,
    targets: Targets,
    fault_since: dict[str, float | None],
    comfort_moves: set[str],
) -> dict[str, OpeningState]:
    t = ctx.t
    result: dict[str, OpeningState] = {}
    for name, target in targets.items():
        prev = ctx.state.opening(name)
        moves = actuator.recent_moves(prev.moves, t)
        if name in comfort_moves:
            moves = (*moves, t)
        fault = fault_since.get(name)
        if target == prev.target:
            if moves == prev.moves and fault == prev.fault_since:
                state = prev  # the common case: nothing about this opening changed
            else:
                state = replace(prev, moves=moves, fault_since=fault)
        else:
            was_open = prev.target is not None and prev.target > 0.0
            is_open = target is not None and target > 0.0
            state = OpeningState(
                target=target,
                changed_at=t,
                opened_at=t if is_open and not was_open else prev.opened_at,
                closed_at=t if was_open and target == 0.0 else prev.closed_at,
                moves=moves,
                fault_since=fault,
            )
        result[name] = state
    return result
