"""Openings: fraction to free area, actuator travel, and the airflow through a zone.

The published formulas are those of :mod:`ventsup.core.physics` (stack flow,
openings in series, wind flow, root-sum-square combination, sensible heat).
The per-step kernels here restate them on plain floats, because the shared
functions validate and broadcast numpy arrays on every call (tens of µs each,
too slow for a closed loop of half a million steps); the tests check that the
two agree to rounding for random inputs, and the vectorised quantities of a
run (wind at height, air density, heat removed) use the shared functions
directly.

Airflow through a zone
----------------------
- **Stack, low and high openings open**: the open low openings and the open
  high openings are two sets in series (areas in parallel within a set). The
  neutral plane lies :math:`h_{NPL} = \\Delta H \\, A_h^2 / (A_l^2 + A_h^2)` above
  the low openings' centre, and
  :math:`Q_s = C_D A_l \\sqrt{2 g h_{NPL} |T_i - T_o| / T_{warm}}`
  (ASHRAE Fundamentals, "Ventilation and Infiltration"), which equals the
  series effective area over the full height difference.
- **Stack, one level open** (single-sided): two-way flow through each open
  opening with :math:`C_D = 0.40 + 0.0045 |T_i - T_o|` and the neutral plane at
  mid-height of the opening, :math:`h_{NPL}` = half its vertical extent (same
  chapter).
- **Wind, openings on a windward and a leeward side** (cross ventilation):
  :math:`Q_w = C_v A_w U` with :math:`A_w = \\sqrt 2 \\, A_{series}(A_{in}, A_{out})`,
  so that equal inlets and outlets give the handbook's inlet area and a much
  larger outlet up to :math:`\\sqrt 2` times it (MIL-HDBK-1011/2: equal inlet
  and outlet, :math:`A_i = 1.41 A`). :math:`C_v` falls from 0.5 with the wind
  square on the façade to 0.3 at 45° and 0 along the façade (ASHRAE: 0.5-0.6
  perpendicular, 0.25-0.35 diagonal). An opening is windward when its façade
  faces within 90° of the wind.
- **Wind, all open openings on one side** (single-sided):
  :math:`Q_w = 0.025 A U` (BS 5925:1991 / CIBSE AM10, single-sided ventilation
  by wind) [mem].
- **Both**: :math:`Q = \\sqrt{Q_s^2 + Q_w^2}` (ASHRAE, flow grows with the
  square root of the sum of the driving heads).

``U`` is the wind speed at the zone's wind height on site (see
:func:`ventsup.core.physics.wind_speed_at_height`).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal, NamedTuple

import numpy as np
import numpy.typing as npt

from ventsup.core import physics

__all__ = [
    "SINGLE_SIDED_WIND_COEFFICIENT",
    "Airflow",
    "OpeningModel",
    "discharge_coefficient_two_way",
    "free_area",
    "move_toward",
    "neutral_plane_height",
    "stack_flow",
    "ventilation_heat",
    "wind_effectiveness",
    "zone_airflow",
]

FloatOrArray = float | npt.NDArray[np.float64]

_GRAVITY = 9.81  # [m/s²], as ventsup.core.physics
_ZERO_CELSIUS = 273.15  # [K]
#: Q = 0.025 A U for single-sided ventilation by wind [1] (BS 5925:1991, CIBSE AM10) [mem].
SINGLE_SIDED_WIND_COEFFICIENT = 0.025
_EFFECTIVENESS_PERPENDICULAR = 0.5
_EFFECTIVENESS_DIAGONAL = 0.3


@dataclass(frozen=True)
class OpeningModel:
    """One motorised opening as the simulator moves it and computes its airflow.

    ``area`` [m²] free area at full opening; ``facing`` [deg from north];
    ``level`` low or high; ``height`` [m] centre above the zone floor;
    ``opening_height`` [m] vertical extent of the free area;
    ``discharge_coefficient`` [1]; ``travel_time`` [s] for a full stroke;
    ``fire_system_position`` [0-1] where the fire system drives it while
    ventsup has released it (None: it stays where it is).
    """

    name: str
    area: float
    facing: float
    level: Literal["low", "high"]
    height: float
    opening_height: float = 1.0
    discharge_coefficient: float = 0.61
    travel_time: float = 60.0
    fire_system_position: float | None = None


class Airflow(NamedTuple):
    """Airflow through a zone's openings [m³/s]: stack alone, wind alone, and combined."""

    stack: float
    wind: float
    total: float


def free_area(fraction: float, area: float) -> float:
    """Free area [m²] of an opening at ``fraction`` [0-1] of its stroke.

    Linear: right for sliding sashes, louvres and most dampers; the free area
    of a top-hung window grows faster than its stroke at first, which this
    leaves out.

    Examples
    --------
    >>> free_area(0.25, 3.2)
    0.8
    """
    return min(max(fraction, 0.0), 1.0) * area


def move_toward(position: float, target: float, dt: float, travel_time: float) -> float:
    """Actuator position [0-1] after ``dt`` [s] moving toward ``target`` at full speed.

    Full speed covers the whole stroke in ``travel_time`` [s].

    Examples
    --------
    >>> move_toward(0.0, 1.0, 30.0, 60.0)
    0.5
    >>> move_toward(0.5, 0.2, 60.0, 60.0)
    0.2
    """
    reach = dt / travel_time
    if target > position:
        return min(target, position + reach)
    return max(target, position - reach)


def stack_flow(
    area: float,
    height_neutral_plane: float,
    temp_indoor: float,
    temp_outdoor: float,
    discharge_coefficient: float,
) -> float:
    """Stack flow [m³/s]: :func:`ventsup.core.physics.stack_flow` on floats, unchecked.

    Examples
    --------
    >>> round(stack_flow(1.0, 1.5, 25.0, 15.0, 0.65), 4)
    0.6458
    """
    kelvin_indoor = temp_indoor + _ZERO_CELSIUS
    kelvin_outdoor = temp_outdoor + _ZERO_CELSIUS
    warm = kelvin_indoor if kelvin_indoor > kelvin_outdoor else kelvin_outdoor
    buoyancy = abs(kelvin_indoor - kelvin_outdoor) / warm
    return (
        discharge_coefficient * area * math.sqrt(2.0 * _GRAVITY * height_neutral_plane * buoyancy)
    )


def discharge_coefficient_two_way(temp_indoor: float, temp_outdoor: float) -> float:
    """C_D = 0.40 + 0.0045 |T_i - T_o| [1], as :func:`ventsup.core.physics.discharge_coefficient_two_way`.

    Examples
    --------
    >>> round(discharge_coefficient_two_way(25.0, 15.0), 4)
    0.445
    """
    return 0.40 + 0.0045 * abs(temp_indoor - temp_outdoor)


def neutral_plane_height(area_low: float, area_high: float, height_difference: float) -> float:
    r"""Height of the neutral plane above the low openings' centre [m].

    Two openings in series carry the same flow, so
    :math:`A_l^2 h_{NPL} = A_h^2 (\Delta H - h_{NPL})`.

    Examples
    --------
    >>> neutral_plane_height(1.0, 1.0, 3.0)
    1.5
    >>> round(neutral_plane_height(2.0, 1.0, 10.0), 3)
    2.0
    """
    squares = area_low * area_low + area_high * area_high
    if squares == 0.0:
        return 0.0
    return height_difference * area_high * area_high / squares


def wind_effectiveness(angle: float) -> float:
    """Effectiveness C_v [1] of inlets for wind at ``angle`` [deg] off the façade normal.

    0.5 square on (the low end of the handbook's 0.5-0.6 for perpendicular
    wind), 0.3 at 45° (middle of 0.25-0.35 for diagonal wind), falling to 0
    along the façade; linear in between [practice].

    Examples
    --------
    >>> wind_effectiveness(0.0), wind_effectiveness(45.0), wind_effectiveness(67.5)
    (0.5, 0.3, 0.15)
    """
    angle = abs(angle)
    if angle >= 90.0:
        return 0.0
    if angle <= 45.0:
        return _EFFECTIVENESS_PERPENDICULAR + (
            _EFFECTIVENESS_DIAGONAL - _EFFECTIVENESS_PERPENDICULAR
        ) * (angle / 45.0)
    return _EFFECTIVENESS_DIAGONAL * (90.0 - angle) / 45.0


def zone_airflow(
    openings: Sequence[OpeningModel],
    fractions: Sequence[float],
    temp_indoor: float,
    temp_outdoor: float,
    wind_speed: float,
    wind_direction: float,
) -> Airflow:
    """Airflow through a zone's openings at the given fractions [m³/s].

    Parameters
    ----------
    openings : sequence of OpeningModel
        The zone's openings.
    fractions : sequence of float
        Opening fraction of each [0-1], in the same order.
    temp_indoor, temp_outdoor : float
        Zone air and outdoor air temperature [°C].
    wind_speed : float
        Wind speed at the zone's wind height on site [m/s].
    wind_direction : float
        Where the wind comes from [deg from north].

    Returns
    -------
    Airflow
        See the module docstring for the cases.

    Examples
    --------
    A low north and a high south opening of 1 m² each, 3 m apart, 25 °C
    inside, 15 °C outside, C_D 0.65, 3 m/s of wind from the north:

    >>> low = OpeningModel("low", 1.0, 0.0, "low", 1.0, discharge_coefficient=0.65)
    >>> high = OpeningModel("high", 1.0, 180.0, "high", 4.0, discharge_coefficient=0.65)
    >>> [round(q, 4) for q in zone_airflow([low, high], [1.0, 1.0], 25.0, 15.0, 3.0, 0.0)]
    [0.6458, 1.5, 1.6331]
    """
    low_area = high_area = 0.0
    low_moment = high_moment = 0.0
    coefficient_moment = 0.0
    windward_area = leeward_area = 0.0
    effectiveness_moment = 0.0
    for opening, fraction in zip(openings, fractions, strict=True):
        if fraction <= 0.0:
            continue
        area = opening.area * (fraction if fraction < 1.0 else 1.0)  # free_area, inlined
        if opening.level == "low":
            low_area += area
            low_moment += area * opening.height
        else:
            high_area += area
            high_moment += area * opening.height
        coefficient_moment += area * opening.discharge_coefficient
        angle = abs(opening.facing - wind_direction) % 360.0
        if angle > 180.0:
            angle = 360.0 - angle
        if angle < 90.0:
            windward_area += area
            effectiveness_moment += area * wind_effectiveness(angle)
        else:
            leeward_area += area
    total_area = low_area + high_area
    if total_area == 0.0:
        return Airflow(0.0, 0.0, 0.0)

    stack = 0.0
    height_difference = (
        high_moment / high_area - low_moment / low_area
        if low_area > 0.0 and high_area > 0.0
        else 0.0
    )
    if height_difference > 0.0:
        height = neutral_plane_height(low_area, high_area, height_difference)
        coefficient = coefficient_moment / total_area
        stack = stack_flow(low_area, height, temp_indoor, temp_outdoor, coefficient)
    else:
        coefficient = discharge_coefficient_two_way(temp_indoor, temp_outdoor)
        for opening, fraction in zip(openings, fractions, strict=True):
            if fraction > 0.0:
                area = free_area(fraction, opening.area)
                extent = 0.5 * opening.opening_height
                stack += stack_flow(area, extent, temp_indoor, temp_outdoor, coefficient)

    if windward_area > 0.0 and leeward_area > 0.0:
        series = windward_area * leeward_area / math.hypot(windward_area, leeward_area)
        effectiveness = effectiveness_moment / windward_area
        wind = effectiveness * math.sqrt(2.0) * series * wind_speed
    else:
        wind = SINGLE_SIDED_WIND_COEFFICIENT * total_area * wind_speed
    return Airflow(stack, wind, math.hypot(stack, wind))


def ventilation_heat(
    flow: FloatOrArray,
    temp_indoor: FloatOrArray,
    temp_outdoor: FloatOrArray,
    density: FloatOrArray = 1.2,
) -> FloatOrArray:
    """Heat the ventilation air removes from the zone [W] (negative: it brings heat in).

    :func:`ventsup.core.physics.sensible_heat_flow` of ``flow`` [m³/s] with
    the difference ``temp_indoor - temp_outdoor`` [K], at ``density`` [kg/m³]
    and c_p 1005 J/(kg·K).

    Examples
    --------
    >>> round(ventilation_heat(0.6458, 25.0, 15.0))
    7788
    """
    difference = np.subtract(temp_indoor, temp_outdoor, dtype=np.float64)
    if np.ndim(difference) == 0:
        return physics.sensible_heat_flow(flow, float(difference), density)
    return physics.sensible_heat_flow(flow, difference, density)
