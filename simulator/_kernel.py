"""The simulator's physics step as one compiled kernel (internal; numba, CPU only).

:func:`run_steps` advances every zone of a run over a span of steps while the
controller's decisions stay the same. Per step ``k`` it computes exactly what
the step loop of :mod:`simulator.loop` did in Python, in the same order:

1. each opening moves toward its target (:func:`simulator.openings.move_toward`;
   a released opening, target NaN, goes to its fire-system position or stays;
   a jammed opening stays, or sits at the jam's given position);
2. the airflow through each zone at the openings' mean positions over the
   step (:func:`simulator.openings.zone_airflow`), with infiltration and the
   air handler's flow the ventilation conductance;
3. the zone network (:func:`simulator.building.step_zone`), and where the
   free-running air leaves the set points the ideal plant
   (:func:`simulator.building.condition_air`; the cooling set point rises
   while the decision reports windows open: the HVAC interlock);
4. the zone's CO2 (well mixed, exact exponential over the step) and its
   stratification gradient (:func:`simulator.building.stratification_gradient`).

The functions here restate those published formulas on plain floats, because
numba cannot compile the dataclasses the documented functions take;
``tests/simulator/test_kernel.py`` checks that the two agree to rounding for
random inputs. The kernel reads and writes only the arrays it is given.

Array layouts (Z zones, O openings, n steps of the run)
--------------------------------------------------------
``series`` [n, 3]: outdoor temperature [°C], wind direction [deg], ρ c_p [J/(m³·K)].
``zone_series`` [Z, 8, n]: wind speed at the zone's wind height [m/s],
mechanical flow [m³/s], internal gains [W], solar gains [W], opaque exterior
temperature [°C], heating set point [°C], cooling set point [°C], CO2
generation [m³/s].
``zone_const`` [Z, ZONE_CONSTANTS]: see the ``Z_*`` indices below.
``opening_const`` [O, OPENING_CONSTANTS]: see the ``O_*`` indices below
(openings of a zone are contiguous, in the zone's order).
``state`` [Z, 5] (in and out): mass temperature, air temperature, gradient,
CO2 [ppm], heating on (1.0) at the end of the last step.
``zone_rows`` [n, Z, 11]: the columns of ``simulator.loop._ZONE_COLUMNS``.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numba
import numpy as np
import numpy.typing as npt

if TYPE_CHECKING:
    from simulator.building import RCParameters

FloatArray = npt.NDArray[np.float64]

# zone_const columns
Z_H_WINDOW = 0
Z_H_OPAQUE = 1
Z_H_AIR_SURFACE = 2
Z_H_SURFACE_MASS = 3
Z_CAPACITY = 4
Z_CAPACITY_AIR = 5
Z_SHARE_MASS = 6
Z_SHARE_SURFACE = 7
Z_FLOOR_AREA = 8
Z_INFILTRATION = 9
Z_VOLUME = 10
Z_HEIGHT = 11
Z_PLUME_SHARE = 12
Z_MIXING_AIR_CHANGES = 13
Z_MAX_GRADIENT = 14
Z_SETPOINT_COOLING_OPEN = 15
Z_MAX_HEATING = 16
Z_MAX_COOLING = 17
Z_FIRST_OPENING = 18
Z_END_OPENING = 19
ZONE_CONSTANTS = 20

# opening_const columns
O_AREA = 0
O_FACING = 1
O_LOW = 2
O_HEIGHT = 3
O_OPENING_HEIGHT = 4
O_DISCHARGE = 5
O_TRAVEL_TIME = 6
O_FIRE_POSITION = 7
OPENING_CONSTANTS = 8

# state columns
S_MASS, S_AIR, S_GRADIENT, S_CO2, S_HEATING = 0, 1, 2, 3, 4

_GRAVITY = 9.81
_ZERO_CELSIUS = 273.15
_SPECIFIC_HEAT_AIR = 1005.0
_SINGLE_SIDED_WIND = 0.025
_EFFECTIVENESS_PERPENDICULAR = 0.5
_EFFECTIVENESS_DIAGONAL = 0.3


def set_rc_constants(row: FloatArray, params: RCParameters) -> None:
    """Write a zone's ISO 13790 network (``params``) into its ``zone_const`` row."""
    row[Z_H_WINDOW] = params.conductance_window
    row[Z_H_OPAQUE] = params.conductance_opaque
    row[Z_H_AIR_SURFACE] = params.conductance_air_surface
    row[Z_H_SURFACE_MASS] = params.conductance_surface_mass
    row[Z_CAPACITY] = params.capacity
    row[Z_CAPACITY_AIR] = params.capacity_air
    row[Z_SHARE_MASS] = params.share_mass
    row[Z_SHARE_SURFACE] = params.share_surface
    row[Z_FLOOR_AREA] = params.floor_area


@numba.njit(cache=True)
def step_zone(
    zone_const: FloatArray,
    temp_mass: float,
    temp_outdoor: float,
    temp_opaque: float,
    h_ve: float,
    gains_internal: float,
    gains_solar: float,
    heating: float,
    dt: float,
    temp_air: float,
) -> tuple[float, float, float, float, float]:
    """:func:`simulator.building.step_zone` on one zone's constants.

    Returns (temp_mass at the end, temp_surface, temp_air mean, temp_air at the
    end, temp_operative) [°C].
    """
    h_w = zone_const[Z_H_WINDOW]
    h_em = zone_const[Z_H_OPAQUE]
    h_is = zone_const[Z_H_AIR_SURFACE]
    h_ms = zone_const[Z_H_SURFACE_MASS]
    capacity = zone_const[Z_CAPACITY]
    capacity_air = zone_const[Z_CAPACITY_AIR]
    to_surfaces = 0.5 * gains_internal + gains_solar
    phi_ia = 0.5 * gains_internal + heating
    phi_m = zone_const[Z_SHARE_MASS] * to_surfaces
    phi_st = zone_const[Z_SHARE_SURFACE] * to_surfaces
    if capacity_air > 0.0:
        air_start = temp_air
        sources = phi_st + h_w * temp_outdoor
        total = h_is + h_w + h_ms
        a_aa = -h_ve - h_is * (h_w + h_ms) / total
        a_am = h_is * h_ms / total
        a_mm = -h_em - h_ms * (h_is + h_w) / total
        f_a = phi_ia + h_ve * temp_outdoor + h_is * sources / total
        f_m = phi_m + h_em * temp_opaque + h_ms * sources / total
        c_a = capacity_air / dt
        c_m = capacity / dt
        w = max(0.5, 1.0 + c_a / a_aa) if a_aa < 0.0 else 0.5
        v = 1.0 - w
        m11 = c_a - w * a_aa
        m12 = -w * a_am
        m21 = -w * a_am
        m22 = c_m - w * a_mm
        r1 = (c_a + v * a_aa) * air_start + v * a_am * temp_mass + f_a
        r2 = v * a_am * air_start + (c_m + v * a_mm) * temp_mass + f_m
        determinant = m11 * m22 - m12 * m21
        air_end = (r1 * m22 - m12 * r2) / determinant
        mass_end = (m11 * r2 - m21 * r1) / determinant
        air = w * air_end + v * air_start
        mass_mean = w * mass_end + v * temp_mass
        surface = (sources + h_is * air + h_ms * mass_mean) / total
    else:
        air_side = h_ve + h_is
        h_1 = h_ve * h_is / air_side if air_side > 0.0 else 0.0
        reach = h_is / air_side if air_side > 0.0 else 0.0
        h_2 = h_1 + h_w
        h_3 = h_2 * h_ms / (h_2 + h_ms) if h_2 + h_ms > 0.0 else 0.0
        to_mass = h_ms / (h_2 + h_ms) if h_2 + h_ms > 0.0 else 1.0
        surface_sources = phi_st + h_w * temp_outdoor + h_1 * temp_outdoor + reach * phi_ia
        phi_m_tot = phi_m + h_em * temp_opaque + to_mass * surface_sources
        inertia = capacity / dt
        half = 0.5 * (h_3 + h_em)
        mass_end = (temp_mass * (inertia - half) + phi_m_tot) / (inertia + half)
        mass_mean = 0.5 * (mass_end + temp_mass)
        surface = (h_ms * mass_mean + surface_sources) / (h_ms + h_w + h_1)
        air = (
            (h_is * surface + h_ve * temp_outdoor + phi_ia) / air_side
            if air_side > 0.0
            else surface
        )
        air_end = air
    return mass_end, surface, air, air_end, 0.3 * air + 0.7 * surface


@numba.njit(cache=True)
def condition_air(
    zone_const: FloatArray,
    temp_mass: float,
    temp_outdoor: float,
    temp_opaque: float,
    h_ve: float,
    gains_internal: float,
    gains_solar: float,
    setpoint_heating: float,
    setpoint_cooling: float,
    dt: float,
    temp_air: float,
    free: tuple[float, float, float, float, float],
) -> tuple[tuple[float, float, float, float, float], float]:
    """:func:`simulator.building.condition_air` given the free-running step; returns it and Φ_HC [W]."""
    max_heating = zone_const[Z_MAX_HEATING]
    max_cooling = zone_const[Z_MAX_COOLING]
    free_air = free[2]
    if free_air < setpoint_heating and max_heating > 0.0:
        setpoint, limit = setpoint_heating, max_heating
    elif free_air > setpoint_cooling and max_cooling > 0.0:
        setpoint, limit = setpoint_cooling, -max_cooling
    else:
        return free, 0.0
    probe_power = 10.0 * max(zone_const[Z_FLOOR_AREA], 1.0)
    probe = step_zone(
        zone_const,
        temp_mass,
        temp_outdoor,
        temp_opaque,
        h_ve,
        gains_internal,
        gains_solar,
        probe_power,
        dt,
        temp_air,
    )
    rise = (probe[2] - free_air) / probe_power
    needed = (setpoint - free_air) / rise if rise > 0.0 else limit
    power = min(needed, limit) if limit > 0.0 else max(needed, limit)
    result = step_zone(
        zone_const,
        temp_mass,
        temp_outdoor,
        temp_opaque,
        h_ve,
        gains_internal,
        gains_solar,
        power,
        dt,
        temp_air,
    )
    return result, power


@numba.njit(cache=True)
def _stack_flow(
    area: float, height: float, temp_indoor: float, temp_outdoor: float, coefficient: float
) -> float:
    kelvin_indoor = temp_indoor + _ZERO_CELSIUS
    kelvin_outdoor = temp_outdoor + _ZERO_CELSIUS
    warm = kelvin_indoor if kelvin_indoor > kelvin_outdoor else kelvin_outdoor
    buoyancy = abs(kelvin_indoor - kelvin_outdoor) / warm
    return coefficient * area * math.sqrt(2.0 * _GRAVITY * height * buoyancy)


@numba.njit(cache=True)
def _wind_effectiveness(angle: float) -> float:
    angle = abs(angle)
    if angle >= 90.0:
        return 0.0
    if angle <= 45.0:
        return _EFFECTIVENESS_PERPENDICULAR + (
            _EFFECTIVENESS_DIAGONAL - _EFFECTIVENESS_PERPENDICULAR
        ) * (angle / 45.0)
    return _EFFECTIVENESS_DIAGONAL * (90.0 - angle) / 45.0


@numba.njit(cache=True)
def zone_airflow(
    opening_const: FloatArray,
    fractions: FloatArray,
    first: int,
    end: int,
    temp_indoor: float,
    temp_outdoor: float,
    wind_speed: float,
    wind_direction: float,
) -> tuple[float, float, float]:
    """:func:`simulator.openings.zone_airflow` over openings ``first`` to ``end`` (excluded).

    ``fractions`` is indexed like ``opening_const``. Returns (stack, wind, total) [m³/s].
    """
    low_area = 0.0
    high_area = 0.0
    low_moment = 0.0
    high_moment = 0.0
    coefficient_moment = 0.0
    windward_area = 0.0
    leeward_area = 0.0
    effectiveness_moment = 0.0
    for oi in range(first, end):
        fraction = fractions[oi]
        if fraction <= 0.0:
            continue
        area = opening_const[oi, O_AREA] * (fraction if fraction < 1.0 else 1.0)
        height = opening_const[oi, O_HEIGHT]
        if opening_const[oi, O_LOW] > 0.5:
            low_area += area
            low_moment += area * height
        else:
            high_area += area
            high_moment += area * height
        coefficient_moment += area * opening_const[oi, O_DISCHARGE]
        angle = abs(opening_const[oi, O_FACING] - wind_direction) % 360.0
        if angle > 180.0:
            angle = 360.0 - angle
        if angle < 90.0:
            windward_area += area
            effectiveness_moment += area * _wind_effectiveness(angle)
        else:
            leeward_area += area
    total_area = low_area + high_area
    if total_area == 0.0:
        return 0.0, 0.0, 0.0
    stack = 0.0
    height_difference = (
        high_moment / high_area - low_moment / low_area
        if low_area > 0.0 and high_area > 0.0
        else 0.0
    )
    if height_difference > 0.0:
        squares = low_area * low_area + high_area * high_area
        neutral = 0.0 if squares == 0.0 else height_difference * high_area * high_area / squares
        coefficient = coefficient_moment / total_area
        stack = _stack_flow(low_area, neutral, temp_indoor, temp_outdoor, coefficient)
    else:
        coefficient = 0.40 + 0.0045 * abs(temp_indoor - temp_outdoor)
        for oi in range(first, end):
            fraction = fractions[oi]
            if fraction > 0.0:
                area = min(max(fraction, 0.0), 1.0) * opening_const[oi, O_AREA]
                extent = 0.5 * opening_const[oi, O_OPENING_HEIGHT]
                stack += _stack_flow(area, extent, temp_indoor, temp_outdoor, coefficient)
    if windward_area > 0.0 and leeward_area > 0.0:
        series = windward_area * leeward_area / math.hypot(windward_area, leeward_area)
        effectiveness = effectiveness_moment / windward_area
        wind = effectiveness * math.sqrt(2.0) * series * wind_speed
    else:
        wind = _SINGLE_SIDED_WIND * total_area * wind_speed
    return stack, wind, math.hypot(stack, wind)


@numba.njit(cache=True)
def run_steps(
    k0: int,
    k1: int,
    dt: float,
    series: FloatArray,
    zone_series: FloatArray,
    zone_const: FloatArray,
    opening_const: FloatArray,
    jammed: npt.NDArray[np.bool_],
    jam_position: FloatArray,
    targets: FloatArray,
    windows_open: npt.NDArray[np.bool_],
    co2_outdoor: float,
    state: FloatArray,
    position: FloatArray,
    zone_rows: FloatArray,
    position_rows: FloatArray,
    target_rows: FloatArray,
) -> None:
    """Steps ``k0`` to ``k1`` (excluded) with the openings' ``targets`` held (see the module notes).

    ``state`` and ``position`` are advanced in place; rows ``k0`` to ``k1`` of
    ``zone_rows``, ``position_rows`` and ``target_rows`` (NaN: released) are written.
    """
    zones = zone_const.shape[0]
    openings = opening_const.shape[0]
    mean_position = np.empty(openings)
    for k in range(k0, k1):
        for oi in range(openings):
            target = targets[oi]
            before = position[oi]
            target_rows[k, oi] = target
            if math.isnan(target):
                target = opening_const[oi, O_FIRE_POSITION]
                if math.isnan(target):
                    target = before
            if jammed[oi, k]:
                given = jam_position[oi, k]
                after = before if math.isnan(given) else given
            else:
                reach = dt / opening_const[oi, O_TRAVEL_TIME]
                if target > before:
                    after = min(target, before + reach)
                else:
                    after = max(target, before - reach)
            position[oi] = after
            mean_position[oi] = 0.5 * (before + after)
            position_rows[k, oi] = after
        t_out = series[k, 0]
        rho_cp = series[k, 2]
        for zi in range(zones):
            const = zone_const[zi]
            first = int(const[Z_FIRST_OPENING])
            end = int(const[Z_END_OPENING])
            air_start = state[zi, S_AIR]
            mass_start = state[zi, S_MASS]
            any_open = False
            for oi in range(first, end):
                if mean_position[oi] != 0.0:
                    any_open = True
            stack = 0.0
            wind = 0.0
            total = 0.0
            if any_open:
                stack, wind, total = zone_airflow(
                    opening_const,
                    mean_position,
                    first,
                    end,
                    air_start,
                    t_out,
                    zone_series[zi, 0, k],
                    series[k, 1],
                )
            through = total + const[Z_INFILTRATION] + zone_series[zi, 1, k]
            gains_internal = zone_series[zi, 2, k]
            gains_solar = zone_series[zi, 3, k]
            temp_opaque = zone_series[zi, 4, k]
            h_ve = rho_cp * through
            step = step_zone(
                const,
                mass_start,
                t_out,
                temp_opaque,
                h_ve,
                gains_internal,
                gains_solar,
                0.0,
                dt,
                air_start,
            )
            heating = 0.0
            setpoint_heating = zone_series[zi, 5, k]
            cooling_at = zone_series[zi, 6, k]
            if windows_open[zi] and cooling_at < const[Z_SETPOINT_COOLING_OPEN]:
                cooling_at = const[Z_SETPOINT_COOLING_OPEN]
            if step[2] < setpoint_heating or step[2] > cooling_at:
                step, heating = condition_air(
                    const,
                    mass_start,
                    t_out,
                    temp_opaque,
                    h_ve,
                    gains_internal,
                    gains_solar,
                    setpoint_heating,
                    cooling_at,
                    dt,
                    air_start,
                    step,
                )
            mass_end, surface, air, air_end, operative = step
            equilibrium = co2_outdoor + zone_series[zi, 7, k] / through * 1e6
            co2 = equilibrium + (state[zi, S_CO2] - equilibrium) * math.exp(
                -through * dt / const[Z_VOLUME]
            )
            heat = gains_internal + gains_solar + heating
            mixing = const[Z_MIXING_AIR_CHANGES] * const[Z_VOLUME] / 3600.0
            carried = through + mixing
            height = const[Z_HEIGHT]
            gradient = 0.0
            if heat > 0.0 and carried > 0.0 and height > 0.0:
                rise = (
                    const[Z_PLUME_SHARE]
                    * heat
                    / (rho_cp / _SPECIFIC_HEAT_AIR * _SPECIFIC_HEAT_AIR * carried)
                )
                gradient = min(const[Z_MAX_GRADIENT], rise / height)
            state[zi, S_MASS] = mass_end
            state[zi, S_AIR] = air_end
            state[zi, S_GRADIENT] = gradient
            state[zi, S_CO2] = co2
            state[zi, S_HEATING] = 1.0 if heating > 0.0 else 0.0
            row = zone_rows[k, zi]
            row[0] = air
            row[1] = air_end
            row[2] = operative
            row[3] = surface
            row[4] = mass_end
            row[5] = gradient
            row[6] = total
            row[7] = stack
            row[8] = wind
            row[9] = heating
            row[10] = co2


# ------------------------------------------------------------------ reporting


@numba.njit(cache=True)
def report_on_change(
    values: FloatArray,
    sent: npt.NDArray[np.bool_],
    t: FloatArray,
    repeat: float,
    last_t: FloatArray,
    last_value: FloatArray,
    groups: npt.NDArray[np.int64],
) -> None:
    """Keep, in ``sent``, only the reports a gateway reporting on change makes.

    ``values[i, j]`` is what point ``j`` would publish at step ``i`` (time
    ``t[i]``) where ``sent[i, j]``; the rest publish nothing. A point is due
    when its value differs from the last one it published, when that one is
    ``repeat`` [s] old or older, or when it has published nothing yet. The
    points of one group (``groups[j]``: the points that share a topic, one
    message) are published together: all that have a value, whenever one of
    them is due; ``sent`` is cleared where nothing is published. ``last_t``
    and ``last_value`` are each point's last report before ``t[0]`` (NaN:
    none) and are left as they were after the last step.
    """
    m, count = values.shape
    order = np.argsort(groups, kind="mergesort")
    first = 0
    while first < count:
        end = first + 1
        while end < count and groups[order[end]] == groups[order[first]]:
            end += 1
        for i in range(m):
            due = False
            for member in range(first, end):
                j = order[member]
                if sent[i, j] and not (
                    last_t[j] == last_t[j]
                    and values[i, j] == last_value[j]
                    and t[i] - last_t[j] < repeat
                ):
                    due = True
            for member in range(first, end):
                j = order[member]
                if not sent[i, j]:
                    continue
                if due:
                    last_t[j] = t[i]
                    last_value[j] = values[i, j]
                else:
                    sent[i, j] = False
        first = end
