"""Airflow through openings and the heat that ventilation air carries.

Published formulas as pure functions over floats or numpy arrays: a float in
every numeric argument gives a float back, an array in any of them gives an
array broadcast from all of them.

Nomenclature
------------
============================== ========== ===============================================
name                           unit       quantity
============================== ========== ===============================================
``area``                       m²         free area of one opening, or an effective area
``height_neutral_plane``       m          ΔH_NPL, from the middle of the lower opening up
                                          to the neutral pressure level
``height``                     m          height above ground
``altitude``                   m          site elevation above sea level
``temp_indoor``                °C         indoor air temperature
``temp_outdoor``               °C         outdoor air temperature
``temp_air``                   °C         air temperature, where indoor/outdoor does
                                          not matter
``temp_difference``            K          temperature difference
``discharge_coefficient``      1          C_D, ratio of real to ideal flow of an opening
``effectiveness``              1          C_v, effectiveness of openings for wind flow
``pressure_coefficient``       1          C_p, wind pressure coefficient on a facade
``wind_speed``                 m/s        mean wind speed
``flow``                       m³/s       volume flow of air
``heat_flow``                  W          heat flow
``density``                    kg/m³      air density
``specific_heat``              J/(kg·K)   specific heat capacity of air at constant
                                          pressure
``pressure``                   Pa         absolute (barometric) pressure
============================== ========== ===============================================

A suffix marks a value in another unit: ``_cfm`` [ft³/min], ``_ft`` [ft],
``_ft2`` [ft²], ``_degf`` [°F difference], ``_btu_per_hour`` [Btu/h], ``_tons``
[ton of refrigeration]. Temperatures in °C are converted to kelvin inside the
functions that need absolute temperature.

The first ``@overload`` of each function (all floats in, float out) overlaps the
second (any array in, array out); that overlap is intended, hence the
``overload-overlap`` ignores.
"""

from __future__ import annotations

from collections.abc import Sequence
from enum import Enum
from types import MappingProxyType
from typing import overload

import numpy as np
import numpy.typing as npt

__all__ = [
    "Terrain",
    "air_density",
    "btu_per_hour_to_watts",
    "cfm_to_cubic_metres_per_second",
    "combined_flow",
    "cubic_metres_per_second_to_cfm",
    "discharge_coefficient_two_way",
    "effective_area_parallel",
    "effective_area_series",
    "sensible_heat_flow",
    "square_feet_to_square_metres",
    "square_metres_to_square_feet",
    "stack_flow",
    "stack_flow_ip",
    "standard_atmospheric_pressure",
    "tons_to_watts",
    "watts_to_btu_per_hour",
    "watts_to_tons",
    "wind_flow",
    "wind_flow_pressure_coefficients",
    "wind_speed_at_height",
]

FloatArray = npt.NDArray[np.float64]
FloatOrArray = float | FloatArray

_GRAVITY = 9.81  # [m/s²], the value the reference examples use
_ZERO_CELSIUS = 273.15  # [K]
_GAS_CONSTANT_DRY_AIR = 287.042  # [J/(kg·K)], ASHRAE Fundamentals 2017 ch. 1
_PRESSURE_SEA_LEVEL = 101_325.0  # [Pa]

_CUBIC_METRES_PER_SECOND_PER_CFM = 0.3048**3 / 60.0  # international foot, exact
_WATTS_PER_BTU_PER_HOUR = 1055.05585262 / 3600.0  # International Table Btu
_BTU_PER_HOUR_PER_TON = 12_000.0  # ton of refrigeration
_SQUARE_METRES_PER_SQUARE_FOOT = 0.3048**2


def _array(value: FloatOrArray) -> FloatArray:
    return np.asarray(value, dtype=np.float64)


def _output(value: FloatArray) -> FloatOrArray:
    """Return a float for a 0-d result, the array otherwise."""
    return float(value) if value.ndim == 0 else value


def _first(value: FloatArray, mask: npt.NDArray[np.bool_]) -> float:
    return float(np.broadcast_to(value, mask.shape)[mask].flat[0])


def _require_non_negative(name: str, value: FloatArray, unit: str = "") -> None:
    bad = value < 0.0
    if np.any(bad):
        raise ValueError(f"{name}: got {_first(value, bad)} {unit}, expected a value >= 0 {unit}")


def _require_positive(name: str, value: FloatArray, unit: str = "") -> None:
    bad = value <= 0.0
    if np.any(bad):
        raise ValueError(f"{name}: got {_first(value, bad)} {unit}, expected a value > 0 {unit}")


def _kelvin(name: str, temp: FloatOrArray) -> FloatArray:
    """Convert °C to K, refusing temperatures at or below absolute zero."""
    kelvin = _array(temp) + _ZERO_CELSIUS
    bad = kelvin <= 0.0
    if np.any(bad):
        celsius = _first(kelvin, bad) - _ZERO_CELSIUS
        raise ValueError(f"{name}: got {celsius} °C, expected a temperature above -273.15 °C")
    return kelvin


# ----------------------------------------------------------------------------------------
# Stack (buoyancy) and wind flow
# ----------------------------------------------------------------------------------------


@overload
def stack_flow(  # type: ignore[overload-overlap]
    area: float,
    height_neutral_plane: float,
    temp_indoor: float,
    temp_outdoor: float,
    discharge_coefficient: float = ...,
) -> float: ...
@overload
def stack_flow(
    area: FloatOrArray,
    height_neutral_plane: FloatOrArray,
    temp_indoor: FloatOrArray,
    temp_outdoor: FloatOrArray,
    discharge_coefficient: FloatOrArray = ...,
) -> FloatArray: ...
def stack_flow(
    area: FloatOrArray,
    height_neutral_plane: FloatOrArray,
    temp_indoor: FloatOrArray,
    temp_outdoor: FloatOrArray,
    discharge_coefficient: FloatOrArray = 0.65,
) -> FloatOrArray:
    r"""Airflow driven by the stack (buoyancy) effect through openings.

    Parameters
    ----------
    area : float or array
        Free area of the openings [m²]; for an inlet and an outlet in series use
        :func:`effective_area_series`.
    height_neutral_plane : float or array
        Height from the middle of the lower opening to the neutral pressure level
        [m]. With equal lower and upper openings the neutral level lies half-way
        between them.
    temp_indoor : float or array
        Indoor air temperature [°C].
    temp_outdoor : float or array
        Outdoor air temperature [°C].
    discharge_coefficient : float or array, default 0.65
        Discharge coefficient of the openings [1]. 0.65 is the effectiveness
        built into the handbook's IP shortcut (:func:`stack_flow_ip`); a
        sharp-edged opening has about 0.61. For one opening with two-way flow
        use :func:`discharge_coefficient_two_way`.

    Returns
    -------
    flow : float or array
        Volume flow of air [m³/s], never negative: the direction follows the sign
        of ``temp_indoor - temp_outdoor``, the magnitude does not.

    Notes
    -----
    .. math::

        Q = C_D \, A \sqrt{2 g \, \Delta H_{NPL} \, |T_i - T_o| / T_{warm}}

    with temperatures in kelvin, g = 9.81 m/s² and :math:`T_{warm}` the warmer of
    :math:`T_i` and :math:`T_o` (the handbook writes :math:`T_i` and swaps in
    :math:`T_o` when outdoors is warmer). The flow is zero for zero area or zero
    temperature difference, proportional to :math:`\sqrt{\Delta H_{NPL}}` and
    symmetric in the sign of the temperature difference.

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals, "Ventilation and Infiltration"
       (1997 ch. 25 eq. 37; ch. 16 in later editions), stack-driven flow through
       openings.

    Examples
    --------
    >>> round(stack_flow(1.0, 1.5, 25.0, 15.0, discharge_coefficient=0.65), 4)
    0.6458
    """
    area_array = _array(area)
    height_array = _array(height_neutral_plane)
    coefficient_array = _array(discharge_coefficient)
    _require_non_negative("area", area_array, "m²")
    _require_non_negative("height_neutral_plane", height_array, "m")
    _require_non_negative("discharge_coefficient", coefficient_array)
    kelvin_indoor = _kelvin("temp_indoor", temp_indoor)
    kelvin_outdoor = _kelvin("temp_outdoor", temp_outdoor)
    kelvin_warm = np.maximum(kelvin_indoor, kelvin_outdoor)
    buoyancy = np.abs(kelvin_indoor - kelvin_outdoor) / kelvin_warm
    flow = coefficient_array * area_array * np.sqrt(2.0 * _GRAVITY * height_array * buoyancy)
    return _output(flow)


@overload
def discharge_coefficient_two_way(  # type: ignore[overload-overlap]
    temp_indoor: float, temp_outdoor: float
) -> float: ...
@overload
def discharge_coefficient_two_way(
    temp_indoor: FloatOrArray, temp_outdoor: FloatOrArray
) -> FloatArray: ...
def discharge_coefficient_two_way(
    temp_indoor: FloatOrArray, temp_outdoor: FloatOrArray
) -> FloatOrArray:
    r"""Discharge coefficient of one opening carrying flow both ways.

    Parameters
    ----------
    temp_indoor : float or array
        Indoor air temperature [°C].
    temp_outdoor : float or array
        Outdoor air temperature [°C].

    Returns
    -------
    discharge_coefficient : float or array
        Discharge coefficient [1], to pass to :func:`stack_flow`.

    Notes
    -----
    .. math::

        C_D = 0.40 + 0.0045 \, |T_i - T_o|

    with the difference in kelvin.

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals, "Ventilation and Infiltration"
       (1997 ch. 25; ch. 16 in later editions), two-way flow through one opening.

    Examples
    --------
    >>> round(discharge_coefficient_two_way(25.0, 15.0), 4)
    0.445
    """
    difference = np.abs(_array(temp_indoor) - _array(temp_outdoor))
    return _output(0.40 + 0.0045 * difference)


def effective_area_series(areas: Sequence[FloatOrArray]) -> FloatOrArray:
    r"""Effective area of openings that the same air passes in series.

    Parameters
    ----------
    areas : sequence of float or array
        Free area of each opening on the path, e.g. inlet and outlet [m²].

    Returns
    -------
    area : float or array
        Effective area of the path [m²]; zero when any opening is closed. It is
        never larger than the smallest opening.

    Notes
    -----
    .. math::

        \frac{1}{A_{eff}^2} = \sum_i \frac{1}{A_i^2}

    Two equal openings give :math:`A/\sqrt{2}`: an inlet and an outlet each
    1.41 times a required area pass as much air as one opening of that area.

    References
    ----------
    .. [1] BS 5925:1991, Code of practice for ventilation principles and
       designing for natural ventilation (openings in series).
    .. [2] MIL-HDBK-1011/2, Continental United States Airconditioned Buildings,
       Appendix C: equal inlet and outlet, A_i = 1.41 A.

    Examples
    --------
    >>> round(effective_area_series([1.0, 2.0]), 5)
    0.89443
    """
    if len(areas) == 0:
        raise ValueError("areas: got an empty sequence, expected at least one opening area")
    arrays = np.broadcast_arrays(*(_array(area) for area in areas))
    for array in arrays:
        _require_non_negative("areas", array, "m²")
    stacked = np.stack(arrays)
    any_closed = np.any(stacked == 0.0, axis=0)
    safe = np.where(stacked == 0.0, 1.0, stacked)
    area = np.where(any_closed, 0.0, 1.0 / np.sqrt(np.sum(1.0 / safe**2, axis=0)))
    return _output(np.asarray(area, dtype=np.float64))


def effective_area_parallel(areas: Sequence[FloatOrArray]) -> FloatOrArray:
    r"""Effective area of openings side by side, each from the same space to outdoors.

    Parameters
    ----------
    areas : sequence of float or array
        Free area of each opening [m²].

    Returns
    -------
    area : float or array
        Effective area [m²].

    Notes
    -----
    .. math::

        A_{eff} = \sum_i A_i

    References
    ----------
    .. [1] BS 5925:1991, Code of practice for ventilation principles and
       designing for natural ventilation (openings in parallel).

    Examples
    --------
    >>> effective_area_parallel([0.5, 0.25])
    0.75
    """
    if len(areas) == 0:
        raise ValueError("areas: got an empty sequence, expected at least one opening area")
    arrays = np.broadcast_arrays(*(_array(area) for area in areas))
    for array in arrays:
        _require_non_negative("areas", array, "m²")
    return _output(np.asarray(np.sum(np.stack(arrays), axis=0), dtype=np.float64))


@overload
def wind_flow(  # type: ignore[overload-overlap]
    area: float, wind_speed: float, effectiveness: float = ...
) -> float: ...
@overload
def wind_flow(
    area: FloatOrArray, wind_speed: FloatOrArray, effectiveness: FloatOrArray = ...
) -> FloatArray: ...
def wind_flow(
    area: FloatOrArray, wind_speed: FloatOrArray, effectiveness: FloatOrArray = 0.5
) -> FloatOrArray:
    r"""Airflow driven by wind through inlet openings.

    Parameters
    ----------
    area : float or array
        Free area of the inlet openings [m²].
    wind_speed : float or array
        Wind speed at the height of the openings [m/s], see
        :func:`wind_speed_at_height`.
    effectiveness : float or array, default 0.5
        Effectiveness of the openings [1]: 0.5-0.6 for wind perpendicular to the
        facade, 0.25-0.35 for diagonal wind. The default is the low end for
        perpendicular wind.

    Returns
    -------
    flow : float or array
        Volume flow of air [m³/s].

    Notes
    -----
    .. math::

        Q = C_v \, A \, U

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals, "Ventilation and Infiltration",
       flow caused by wind through openings.

    Examples
    --------
    >>> wind_flow(1.0, 3.0, effectiveness=0.5)
    1.5
    """
    area_array = _array(area)
    speed_array = _array(wind_speed)
    _require_non_negative("area", area_array, "m²")
    _require_non_negative("wind_speed", speed_array, "m/s")
    return _output(_array(effectiveness) * area_array * speed_array)


@overload
def wind_flow_pressure_coefficients(  # type: ignore[overload-overlap]
    area: float,
    wind_speed: float,
    pressure_coefficient_difference: float,
    discharge_coefficient: float = ...,
) -> float: ...
@overload
def wind_flow_pressure_coefficients(
    area: FloatOrArray,
    wind_speed: FloatOrArray,
    pressure_coefficient_difference: FloatOrArray,
    discharge_coefficient: FloatOrArray = ...,
) -> FloatArray: ...
def wind_flow_pressure_coefficients(
    area: FloatOrArray,
    wind_speed: FloatOrArray,
    pressure_coefficient_difference: FloatOrArray,
    discharge_coefficient: FloatOrArray = 0.61,
) -> FloatOrArray:
    r"""Wind-driven cross flow from the pressure coefficients of two facades.

    Parameters
    ----------
    area : float or array
        Effective area of the path through the building [m²], usually
        :func:`effective_area_series` of the inlet and the outlet.
    wind_speed : float or array
        Reference wind speed that the pressure coefficients refer to [m/s].
    pressure_coefficient_difference : float or array
        Difference of the wind pressure coefficients of the inlet and the outlet
        facade, :math:`C_{p,1} - C_{p,2}` [1]; its sign sets only the direction.
    discharge_coefficient : float or array, default 0.61
        Discharge coefficient of the openings [1], 0.61 for sharp-edged openings.

    Returns
    -------
    flow : float or array
        Volume flow of air [m³/s].

    Notes
    -----
    .. math::

        Q = C_d \, A_w \, U \sqrt{\Delta C_p}

    References
    ----------
    .. [1] BS 5925:1991, Code of practice for ventilation principles and
       designing for natural ventilation, wind-driven cross ventilation.

    Examples
    --------
    >>> round(wind_flow_pressure_coefficients(0.70711, 3.0, 1.0), 4)
    1.294
    """
    area_array = _array(area)
    speed_array = _array(wind_speed)
    _require_non_negative("area", area_array, "m²")
    _require_non_negative("wind_speed", speed_array, "m/s")
    root = np.sqrt(np.abs(_array(pressure_coefficient_difference)))
    return _output(_array(discharge_coefficient) * area_array * speed_array * root)


@overload
def combined_flow(flow_stack: float, flow_wind: float) -> float: ...  # type: ignore[overload-overlap]
@overload
def combined_flow(flow_stack: FloatOrArray, flow_wind: FloatOrArray) -> FloatArray: ...
def combined_flow(flow_stack: FloatOrArray, flow_wind: FloatOrArray) -> FloatOrArray:
    r"""Airflow from wind and stack acting together.

    Parameters
    ----------
    flow_stack : float or array
        Flow from the stack effect alone [m³/s].
    flow_wind : float or array
        Flow from wind alone [m³/s].

    Returns
    -------
    flow : float or array
        Combined volume flow [m³/s].

    Notes
    -----
    Flow grows with the square root of the sum of the driving heads, so the
    flows add as root-sum-square:

    .. math::

        Q = \sqrt{Q_s^2 + Q_w^2}

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals, "Ventilation and Infiltration",
       combined wind and stack effect.

    Examples
    --------
    >>> round(combined_flow(0.6458, 1.5), 4)
    1.6331
    """
    return _output(np.hypot(_array(flow_stack), _array(flow_wind)))


@overload
def stack_flow_ip(  # type: ignore[overload-overlap]
    area_ft2: float, height_openings_ft: float, temp_difference_degf: float
) -> float: ...
@overload
def stack_flow_ip(
    area_ft2: FloatOrArray, height_openings_ft: FloatOrArray, temp_difference_degf: FloatOrArray
) -> FloatArray: ...
def stack_flow_ip(
    area_ft2: FloatOrArray, height_openings_ft: FloatOrArray, temp_difference_degf: FloatOrArray
) -> FloatOrArray:
    r"""Stack flow by the handbook's inch-pound shortcut.

    Parameters
    ----------
    area_ft2 : float or array
        Free area of the inlets, or of the outlets if smaller [ft²].
    height_openings_ft : float or array
        Height from the inlets to the outlets [ft].
    temp_difference_degf : float or array
        Indoor minus outdoor temperature [°F difference]; only its size counts.

    Returns
    -------
    flow_cfm : float or array
        Volume flow of air [ft³/min].

    Notes
    -----
    .. math::

        Q = 9.4 \, A \sqrt{h \, |\Delta t|}

    The constant holds an effectiveness of 65 % and puts the neutral level
    half-way between inlet and outlet; it is :func:`stack_flow` in IP units
    within about 2 % for room temperatures.

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals (older editions), natural ventilation,
       stack effect; the constant 9.4 quoted from memory of those editions.

    Examples
    --------
    >>> round(stack_flow_ip(10.0, 20.0, 10.0))
    1329
    """
    area_array = _array(area_ft2)
    height_array = _array(height_openings_ft)
    _require_non_negative("area_ft2", area_array, "ft²")
    _require_non_negative("height_openings_ft", height_array, "ft")
    difference = np.abs(_array(temp_difference_degf))
    return _output(9.4 * area_array * np.sqrt(height_array * difference))


# ----------------------------------------------------------------------------------------
# Wind speed at the height of an opening
# ----------------------------------------------------------------------------------------


class Terrain(Enum):
    """Terrain category of the atmospheric boundary layer.

    ``exponent`` is the power-law exponent a [1] and ``boundary_layer_thickness``
    the thickness δ [m] of the boundary layer, from ASHRAE Handbook -
    Fundamentals, "Airflow Around Buildings" (ch. 24), Table 1.

    Examples
    --------
    >>> Terrain("suburban").exponent
    0.22
    """

    CITY = "city"
    """Large city centres, at least half the buildings taller than 21 m."""
    SUBURBAN = "suburban"
    """Urban and suburban areas, wooded areas, closely spaced obstructions."""
    OPEN = "open"
    """Open terrain with scattered obstructions under 10 m; met stations."""
    WATER = "water"
    """Flat, unobstructed areas exposed to wind over water."""

    @property
    def exponent(self) -> float:
        """Power-law exponent a [1]."""
        return _TERRAIN_PARAMETERS[self][0]

    @property
    def boundary_layer_thickness(self) -> float:
        """Boundary-layer thickness δ [m]."""
        return _TERRAIN_PARAMETERS[self][1]


_TERRAIN_PARAMETERS: MappingProxyType[Terrain, tuple[float, float]] = MappingProxyType(
    {
        Terrain.CITY: (0.33, 460.0),
        Terrain.SUBURBAN: (0.22, 370.0),
        Terrain.OPEN: (0.14, 270.0),
        Terrain.WATER: (0.10, 210.0),
    }
)


def _terrain(name: str, value: Terrain | str) -> Terrain:
    if isinstance(value, Terrain):
        return value
    try:
        return Terrain(value)
    except ValueError:
        names = ", ".join(member.value for member in Terrain)
        raise ValueError(f"{name}: got {value!r}, expected one of {names}") from None


@overload
def wind_speed_at_height(  # type: ignore[overload-overlap]
    wind_speed: float,
    height: float,
    terrain: Terrain | str,
    *,
    height_met: float = ...,
    terrain_met: Terrain | str = ...,
) -> float: ...
@overload
def wind_speed_at_height(
    wind_speed: FloatOrArray,
    height: FloatOrArray,
    terrain: Terrain | str,
    *,
    height_met: FloatOrArray = ...,
    terrain_met: Terrain | str = ...,
) -> FloatArray: ...
def wind_speed_at_height(
    wind_speed: FloatOrArray,
    height: FloatOrArray,
    terrain: Terrain | str,
    *,
    height_met: FloatOrArray = 10.0,
    terrain_met: Terrain | str = Terrain.OPEN,
) -> FloatOrArray:
    r"""Wind speed at a height on site from the speed measured at a met station.

    Parameters
    ----------
    wind_speed : float or array
        Wind speed measured at the met station [m/s].
    height : float or array
        Height above ground on site where the speed is wanted [m], e.g. the
        height of the openings; the power law holds up to the boundary-layer
        thickness of ``terrain``.
    terrain : Terrain or str
        Terrain around the site: ``"city"``, ``"suburban"``, ``"open"`` or
        ``"water"``.
    height_met : float or array, default 10.0
        Height of the met station's anemometer [m].
    terrain_met : Terrain or str, default Terrain.OPEN
        Terrain around the met station.

    Returns
    -------
    wind_speed : float or array
        Wind speed at ``height`` on site [m/s].

    Notes
    -----
    .. math::

        U_H = U_{met} \left(\frac{\delta_{met}}{H_{met}}\right)^{a_{met}}
              \left(\frac{H}{\delta}\right)^{a}

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals, "Airflow Around Buildings" (ch. 24),
       Table 1 (atmospheric boundary-layer parameters).

    Examples
    --------
    >>> round(wind_speed_at_height(1.0, 10.0, "city"), 4)
    0.4484
    """
    site = _terrain("terrain", terrain)
    met = _terrain("terrain_met", terrain_met)
    speed_array = _array(wind_speed)
    height_array = _array(height)
    height_met_array = _array(height_met)
    _require_non_negative("wind_speed", speed_array, "m/s")
    _require_positive("height", height_array, "m")
    _require_positive("height_met", height_met_array, "m")
    at_met = (met.boundary_layer_thickness / height_met_array) ** met.exponent
    on_site = (height_array / site.boundary_layer_thickness) ** site.exponent
    return _output(speed_array * at_met * on_site)


# ----------------------------------------------------------------------------------------
# Heat carried by ventilation air
# ----------------------------------------------------------------------------------------


@overload
def sensible_heat_flow(  # type: ignore[overload-overlap]
    flow: float,
    temp_difference: float,
    density: float = ...,
    specific_heat: float = ...,
) -> float: ...
@overload
def sensible_heat_flow(
    flow: FloatOrArray,
    temp_difference: FloatOrArray,
    density: FloatOrArray = ...,
    specific_heat: FloatOrArray = ...,
) -> FloatArray: ...
def sensible_heat_flow(
    flow: FloatOrArray,
    temp_difference: FloatOrArray,
    density: FloatOrArray = 1.2,
    specific_heat: FloatOrArray = 1005.0,
) -> FloatOrArray:
    r"""Sensible heat that a flow of ventilation air carries.

    Parameters
    ----------
    flow : float or array
        Volume flow of air [m³/s].
    temp_difference : float or array
        Temperature difference [K]; with ``temp_indoor - temp_outdoor`` the result
        is the heat removed from the space (positive when outdoors is cooler).
    density : float or array, default 1.2
        Air density [kg/m³]; scale with pressure at altitude, see
        :func:`air_density` and :func:`standard_atmospheric_pressure`.
    specific_heat : float or array, default 1005.0
        Specific heat capacity of the air [J/(kg·K)].

    Returns
    -------
    heat_flow : float or array
        Heat flow [W], with the sign of ``temp_difference``.

    Notes
    -----
    .. math::

        q = \rho \, c_p \, \dot V \, \Delta T

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals, "Ventilation and Infiltration",
       heat gain from ventilation air (sensible).

    Examples
    --------
    >>> round(sensible_heat_flow(0.6458, 10.0))
    7788
    """
    flow_array = _array(flow)
    _require_non_negative("flow", flow_array, "m³/s")
    return _output(_array(density) * _array(specific_heat) * flow_array * _array(temp_difference))


@overload
def air_density(temp_air: float, pressure: float = ...) -> float: ...  # type: ignore[overload-overlap]
@overload
def air_density(temp_air: FloatOrArray, pressure: FloatOrArray = ...) -> FloatArray: ...
def air_density(
    temp_air: FloatOrArray, pressure: FloatOrArray = _PRESSURE_SEA_LEVEL
) -> FloatOrArray:
    r"""Density of dry air from the ideal-gas law.

    Parameters
    ----------
    temp_air : float or array
        Air temperature [°C].
    pressure : float or array, default 101325.0
        Absolute pressure [Pa].

    Returns
    -------
    density : float or array
        Density of dry air [kg/m³].

    Notes
    -----
    .. math::

        \rho = \frac{p}{R_{da} \, T}

    with :math:`R_{da}` = 287.042 J/(kg·K) and T in kelvin. Water vapour lowers
    the density of moist air by under 1 % at room conditions.

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals (2017), ch. 1 "Psychrometrics",
       perfect-gas relation for dry air.

    Examples
    --------
    >>> round(air_density(20.0), 4)
    1.2042
    """
    kelvin = _kelvin("temp_air", temp_air)
    pressure_array = _array(pressure)
    _require_positive("pressure", pressure_array, "Pa")
    return _output(pressure_array / (_GAS_CONSTANT_DRY_AIR * kelvin))


@overload
def standard_atmospheric_pressure(altitude: float) -> float: ...  # type: ignore[overload-overlap]
@overload
def standard_atmospheric_pressure(altitude: FloatOrArray) -> FloatArray: ...
def standard_atmospheric_pressure(altitude: FloatOrArray) -> FloatOrArray:
    r"""Pressure of the standard atmosphere at an altitude.

    Parameters
    ----------
    altitude : float or array
        Elevation above sea level [m], valid from -5000 m to 11 000 m.

    Returns
    -------
    pressure : float or array
        Barometric pressure [Pa].

    Notes
    -----
    .. math::

        p = 101.325 \, (1 - 2.25577 \times 10^{-5} \, Z)^{5.2559} \ \mathrm{kPa}

    Air density, and with it the heat a given volume flow carries, scales with
    :math:`p / p_0`.

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals (2017), ch. 1 "Psychrometrics", eq. 3.

    Examples
    --------
    >>> round(standard_atmospheric_pressure(1500.0), 1)
    84555.9
    """
    altitude_array = _array(altitude)
    bad = (altitude_array < -5000.0) | (altitude_array > 11_000.0)
    if np.any(bad):
        raise ValueError(
            f"altitude: got {_first(altitude_array, bad)} m, expected -5000 m to 11000 m"
        )
    return _output(_PRESSURE_SEA_LEVEL * (1.0 - 2.25577e-5 * altitude_array) ** 5.2559)


# ----------------------------------------------------------------------------------------
# Units
# ----------------------------------------------------------------------------------------


@overload
def cfm_to_cubic_metres_per_second(flow_cfm: float) -> float: ...  # type: ignore[overload-overlap]
@overload
def cfm_to_cubic_metres_per_second(flow_cfm: FloatOrArray) -> FloatArray: ...
def cfm_to_cubic_metres_per_second(flow_cfm: FloatOrArray) -> FloatOrArray:
    """Convert a volume flow from ft³/min to m³/s (1 ft = 0.3048 m exactly).

    Examples
    --------
    >>> round(cfm_to_cubic_metres_per_second(1000.0), 6)
    0.471947
    """
    return _output(_array(flow_cfm) * _CUBIC_METRES_PER_SECOND_PER_CFM)


@overload
def cubic_metres_per_second_to_cfm(flow: float) -> float: ...  # type: ignore[overload-overlap]
@overload
def cubic_metres_per_second_to_cfm(flow: FloatOrArray) -> FloatArray: ...
def cubic_metres_per_second_to_cfm(flow: FloatOrArray) -> FloatOrArray:
    """Convert a volume flow from m³/s to ft³/min (1 ft = 0.3048 m exactly).

    Examples
    --------
    >>> round(cubic_metres_per_second_to_cfm(1.0), 2)
    2118.88
    """
    return _output(_array(flow) / _CUBIC_METRES_PER_SECOND_PER_CFM)


@overload
def watts_to_btu_per_hour(heat_flow: float) -> float: ...  # type: ignore[overload-overlap]
@overload
def watts_to_btu_per_hour(heat_flow: FloatOrArray) -> FloatArray: ...
def watts_to_btu_per_hour(heat_flow: FloatOrArray) -> FloatOrArray:
    """Convert a heat flow from W to Btu/h (International Table Btu, 1055.05585262 J).

    Examples
    --------
    >>> round(watts_to_btu_per_hour(1000.0), 2)
    3412.14
    """
    return _output(_array(heat_flow) / _WATTS_PER_BTU_PER_HOUR)


@overload
def btu_per_hour_to_watts(heat_flow_btu_per_hour: float) -> float: ...  # type: ignore[overload-overlap]
@overload
def btu_per_hour_to_watts(heat_flow_btu_per_hour: FloatOrArray) -> FloatArray: ...
def btu_per_hour_to_watts(heat_flow_btu_per_hour: FloatOrArray) -> FloatOrArray:
    """Convert a heat flow from Btu/h to W (International Table Btu, 1055.05585262 J).

    Examples
    --------
    >>> round(btu_per_hour_to_watts(12000.0), 2)
    3516.85
    """
    return _output(_array(heat_flow_btu_per_hour) * _WATTS_PER_BTU_PER_HOUR)


@overload
def tons_to_watts(heat_flow_tons: float) -> float: ...  # type: ignore[overload-overlap]
@overload
def tons_to_watts(heat_flow_tons: FloatOrArray) -> FloatArray: ...
def tons_to_watts(heat_flow_tons: FloatOrArray) -> FloatOrArray:
    """Convert tons of refrigeration (12 000 Btu/h each) to W.

    Examples
    --------
    >>> round(tons_to_watts(1.0), 2)
    3516.85
    """
    return _output(_array(heat_flow_tons) * _BTU_PER_HOUR_PER_TON * _WATTS_PER_BTU_PER_HOUR)


@overload
def watts_to_tons(heat_flow: float) -> float: ...  # type: ignore[overload-overlap]
@overload
def watts_to_tons(heat_flow: FloatOrArray) -> FloatArray: ...
def watts_to_tons(heat_flow: FloatOrArray) -> FloatOrArray:
    """Convert W to tons of refrigeration (12 000 Btu/h each).

    Examples
    --------
    >>> round(watts_to_tons(3516.85), 4)
    1.0
    """
    return _output(_array(heat_flow) / (_BTU_PER_HOUR_PER_TON * _WATTS_PER_BTU_PER_HOUR))


@overload
def square_feet_to_square_metres(area_ft2: float) -> float: ...  # type: ignore[overload-overlap]
@overload
def square_feet_to_square_metres(area_ft2: FloatOrArray) -> FloatArray: ...
def square_feet_to_square_metres(area_ft2: FloatOrArray) -> FloatOrArray:
    """Convert an area from ft² to m² (1 ft = 0.3048 m exactly).

    Examples
    --------
    >>> round(square_feet_to_square_metres(10.0), 7)
    0.9290304
    """
    return _output(_array(area_ft2) * _SQUARE_METRES_PER_SQUARE_FOOT)


@overload
def square_metres_to_square_feet(area: float) -> float: ...  # type: ignore[overload-overlap]
@overload
def square_metres_to_square_feet(area: FloatOrArray) -> FloatArray: ...
def square_metres_to_square_feet(area: FloatOrArray) -> FloatOrArray:
    """Convert an area from m² to ft² (1 ft = 0.3048 m exactly).

    Examples
    --------
    >>> round(square_metres_to_square_feet(1.0), 4)
    10.7639
    """
    return _output(_array(area) / _SQUARE_METRES_PER_SQUARE_FOOT)
