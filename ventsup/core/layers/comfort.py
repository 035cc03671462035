"""Layer 6, comfort: free cooling, night flush, air quality, HVAC interlock.

Free cooling opens when the zone is warm (``open_above``) and the outdoor air
can cool it: inside the outdoor band, cooler than indoors by
``min_difference`` and dry enough (dew point at or below ``dew_point_max``).
It closes with hysteresis below ``close_below`` and modulates from
``min_opening`` at ``open_above`` to fully open at ``full_open_at``. Night
flush runs in its own hours and stops at ``stop_below``, above the next
morning's heating point. A CO2 minimum opening keeps the air fresh while
occupied. While the plant heats the zone there is no cooling by windows.
"""

from __future__ import annotations

from typing import NamedTuple

from ventsup.core import psychro
from ventsup.core.context import Context, known, value_memo
from ventsup.core.state import Cause, Mode

__all__ = ["ComfortResult", "dew_point_outdoor", "evaluate", "free_cooling_fraction"]


# A NamedTuple, not a frozen dataclass: built at every evaluation, and a frozen
# dataclass pays one object.__setattr__ per field.
class ComfortResult(NamedTuple):
    """What the comfort functions want for the whole zone, and their latches."""

    fraction: float
    mode: Mode
    cause: Cause
    reason: str
    cooling: bool
    flush: bool
    air_quality: bool
    facts: dict[str, float | str | bool | None]


def free_cooling_fraction(
    temp_indoor: float, open_above: float, full_open_at: float, min_opening: float
) -> float:
    """Opening fraction for free cooling, proportional between start and full open.

    ``min_opening`` at or below ``open_above`` (while the hysteresis keeps
    cooling on), rising linearly to 1 at ``full_open_at``.

    Examples
    --------
    >>> free_cooling_fraction(24.0, 23.0, 25.0, 0.2)
    0.6
    """
    if temp_indoor >= full_open_at:
        return 1.0
    if temp_indoor <= open_above or full_open_at <= open_above:
        return min_opening
    share = (temp_indoor - open_above) / (full_open_at - open_above)
    return round(min_opening + (1.0 - min_opening) * share, 9)


# Outdoor temperature and humidity are sampled and held, so consecutive evaluations
# (and every zone of a site) ask for the same dew point: a bounded memo of the pure
# Newton solution.
_dew_point_memo = value_memo(psychro.dew_point_from_relative_humidity, 1024)


def dew_point_outdoor(ctx: Context) -> float | None:
    """The outdoor dew point [°C]: measured, or from temperature and relative humidity."""
    dew = ctx.input("dew_point_outdoor")
    if known(dew):
        return float(dew.value)  # type: ignore[arg-type]
    humidity, temp = ctx.input("humidity_outdoor"), ctx.input("temp_outdoor")
    if known(humidity) and known(temp):
        rh = min(max(float(humidity.value), 1.0), 100.0) / 100.0  # type: ignore[arg-type]
        return _dew_point_memo(float(temp.value), rh)  # type: ignore[arg-type]
    return None


def _value(ctx: Context, name: str) -> float | None:
    reading = ctx.input(name)
    return float(reading.value) if known(reading) else None  # type: ignore[arg-type]


def evaluate(ctx: Context, occupied: bool, flush_hours: bool) -> ComfortResult:
    """Decide the comfort fraction for the zone (before caps and actuator care)."""
    rules, prev = ctx.rules, ctx.state
    fc, nf, co2r = rules.free_cooling, rules.night_flush, rules.co2
    t_in = _value(ctx, "temp_indoor")
    t_out = _value(ctx, "temp_outdoor")
    co2 = _value(ctx, "co2")
    dew = dew_point_outdoor(ctx)
    heating_reading = ctx.input("heating")
    if ctx.zone.heating is None:
        heating: bool | None = False
    else:
        heating = bool(heating_reading.value) if known(heating_reading) else None
    facts: dict[str, float | str | bool | None] = {
        "temp_indoor": t_in,
        "temp_outdoor": t_out,
        "dew_point_outdoor": dew,
        "co2": co2,
        "heating": heating,
        "occupied": occupied,
    }

    def T(value: float | None) -> str:
        return ctx.fmt(value, "temperature")

    # --- free cooling: demand latch (hysteresis) and permission
    cooling = False
    fc_allowed = fc.enabled and (occupied or fc.when == "always")
    if fc_allowed and t_in is not None:
        cooling = t_in >= fc.open_above or (prev.cooling and t_in >= fc.close_below)
    fc_block = _cooling_blocks(
        ctx, t_in, t_out, dew, heating, fc.outdoor_min, fc.outdoor_max, fc.min_difference,
        fc.dew_point_max, rules.interlock.block_cooling_while_heating,
    )  # fmt: skip
    fc_fraction = 0.0
    if cooling and not fc_block and t_in is not None:
        fc_fraction = free_cooling_fraction(t_in, fc.open_above, fc.full_open_at, fc.min_opening)

    # --- night flush
    flush = False
    if flush_hours and t_in is not None:
        flush = t_in >= nf.start_above or (prev.flush and t_in > nf.stop_below)
    nf_block = _cooling_blocks(
        ctx, t_in, t_out, dew, heating, nf.outdoor_min, None, nf.min_difference,
        nf.dew_point_max, rules.interlock.block_cooling_while_heating,
    )  # fmt: skip
    nf_fraction = nf.position if flush and not nf_block else 0.0

    # --- air quality
    air = False
    if co2r.enabled and occupied and co2 is not None:
        air = co2 >= co2r.open_above or (prev.air_quality and co2 > co2r.close_below)
    aq_block = None
    if air:
        if t_out is None or t_out < co2r.outdoor_min:
            aq_block = f"outdoor air {T(t_out)} below {T(co2r.outdoor_min)}"
        elif heating is not False and not rules.interlock.allow_co2_while_heating:
            aq_block = "the plant is heating the zone"
    aq_fraction = co2r.position if air and aq_block is None else 0.0

    fraction = max(fc_fraction, nf_fraction, aq_fraction)
    latches = {"cooling": cooling, "flush": flush, "air_quality": air}
    if fraction > 0.0:
        if fraction == fc_fraction:
            reason = (
                f"free cooling at {ctx.fmt(fc_fraction, 'fraction')}: indoor {T(t_in)} "
                f"(opens at {T(fc.open_above)}, fully open at {T(fc.full_open_at)}), "
                f"outdoor {T(t_out)}"
            )
            return ComfortResult(
                fraction, Mode.FREE_COOLING, Cause.COMFORT, reason, **latches, facts=facts
            )
        if fraction == nf_fraction:
            reason = (
                f"night flush: indoor {T(t_in)}, outdoor {T(t_out)}; stops at {T(nf.stop_below)}"
            )
            return ComfortResult(
                fraction, Mode.NIGHT_FLUSH, Cause.COMFORT, reason, **latches, facts=facts
            )
        reason = (
            f"air quality: CO2 {ctx.fmt(co2, 'concentration')} (opens at "
            f"{ctx.fmt(co2r.open_above, 'concentration')}), minimum opening "
            f"{ctx.fmt(co2r.position, 'fraction')}"
        )
        return ComfortResult(
            fraction, Mode.AIR_QUALITY, Cause.COMFORT, reason, **latches, facts=facts
        )

    # Nothing opens: say why, most useful first.
    heating_blocks = heating is not False and rules.interlock.block_cooling_while_heating
    if cooling and fc_block and heating_blocks and fc_block.startswith("the plant"):
        return ComfortResult(0.0, Mode.INTERLOCK, Cause.INTERLOCK,
                             f"closed: indoor {T(t_in)} is warm, but {fc_block}", **latches, facts=facts)  # fmt: skip
    if flush and nf_block and heating_blocks and nf_block.startswith("the plant"):
        return ComfortResult(0.0, Mode.INTERLOCK, Cause.INTERLOCK,
                             f"closed: night flush wanted (indoor {T(t_in)}), but {nf_block}",
                             **latches, facts=facts)  # fmt: skip
    if cooling and fc_block:
        reason = f"closed: indoor {T(t_in)} is warm, but {fc_block}"
    elif flush and nf_block:
        reason = f"closed: night flush wanted (indoor {T(t_in)}), but {nf_block}"
    elif air and aq_block:
        reason = f"closed: CO2 {ctx.fmt(co2, 'concentration')} is high, but {aq_block}"
    elif not fc_allowed and not flush_hours:
        return ComfortResult(0.0, Mode.UNOCCUPIED, Cause.SCHEDULE,
                             "closed: outside occupied and night-flush hours", **latches, facts=facts)  # fmt: skip
    elif t_in is not None and fc_allowed:
        reason = f"closed: indoor {T(t_in)} below {T(fc.open_above)}, no cooling needed"
    elif t_in is not None:
        reason = f"closed: night flush not needed (indoor {T(t_in)}, starts at {T(nf.start_above)})"
    else:
        reason = "closed: indoor temperature unknown"
    return ComfortResult(0.0, Mode.IDLE, Cause.COMFORT, reason, **latches, facts=facts)


def _cooling_blocks(
    ctx: Context,
    t_in: float | None,
    t_out: float | None,
    dew: float | None,
    heating: bool | None,
    outdoor_min: float,
    outdoor_max: float | None,
    min_difference: float,
    dew_point_max: float | None,
    block_while_heating: bool,
) -> str | None:
    """Why the outdoor air may not be used for cooling now, or None when it may."""

    def T(value: float | None) -> str:
        return ctx.fmt(value, "temperature")

    if heating is None and block_while_heating:
        return "the plant's heating status is unknown"
    if heating and block_while_heating:
        return "the plant is heating the zone"
    if t_out is None or t_in is None:
        return "the outdoor temperature is unknown"
    if t_out < outdoor_min:
        return f"outdoor air {T(t_out)} is below {T(outdoor_min)}"
    if outdoor_max is not None and t_out > outdoor_max:
        return f"outdoor air {T(t_out)} is above {T(outdoor_max)}"
    if t_in - t_out < min_difference:
        return (
            f"outdoor air {T(t_out)} is not {ctx.fmt(min_difference, 'temperature_delta')} "
            f"cooler than indoors"
        )
    if dew_point_max is not None:
        if dew is None:
            return "the outdoor dew point is unknown"
        if dew > dew_point_max:
            return f"outdoor dew point {T(dew)} is above {T(dew_point_max)}"
    return None
