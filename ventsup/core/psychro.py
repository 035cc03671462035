"""Psychrometrics of moist air after ASHRAE Handbook - Fundamentals (2017), ch. 1, in SI.

Pure functions over floats or numpy arrays: a float in every numeric argument
gives a float back, an array in any of them gives an array broadcast from all
of them. There is no unit switch and no other module state.

Nomenclature
------------
======================== ============ ==============================================
name                     unit         quantity
======================== ============ ==============================================
``temp_air``             °C           dry-bulb air temperature
``temp_dew_point``       °C           dew-point temperature
``relative_humidity``    1            relative humidity as a fraction, 0-1 (not %)
``humidity_ratio``       kg/kg        mass of water vapour per mass of dry air
``vapour_pressure``      Pa           partial pressure of water vapour
``pressure``             Pa           absolute (barometric) pressure of the moist air
``enthalpy``             J/kg         specific enthalpy of moist air per kg of dry air,
                                      zero for dry air at 0 °C
======================== ============ ==============================================

The first ``@overload`` of each function (all floats in, float out) overlaps the
second (any array in, array out); that overlap is intended, hence the
``overload-overlap`` ignores.

References
----------
.. [1] ASHRAE Handbook - Fundamentals (2017), ch. 1 "Psychrometrics".
.. [2] Meyer, D. and Thevenard, D. (2019). PsychroLib: a library of psychrometric
   functions to calculate thermodynamic properties of air. Journal of Open
   Source Software, 4(33), 1137. https://doi.org/10.21105/joss.01137
"""

from __future__ import annotations

import math
from typing import Any, overload

import numpy as np
import numpy.typing as npt

__all__ = [
    "dew_point_from_humidity_ratio",
    "dew_point_from_relative_humidity",
    "dew_point_from_vapour_pressure",
    "humidity_ratio_from_dew_point",
    "humidity_ratio_from_relative_humidity",
    "humidity_ratio_from_vapour_pressure",
    "moist_air_enthalpy",
    "saturation_vapour_pressure",
    "vapour_pressure_from_humidity_ratio",
]

FloatArray = npt.NDArray[np.float64]
FloatOrArray = float | FloatArray

_ZERO_CELSIUS = 273.15  # [K]
_TRIPLE_POINT = 0.01  # [°C]
_TEMP_MIN = -100.0  # [°C], lower end of ASHRAE eq. 5
_TEMP_MAX = 200.0  # [°C], upper end of ASHRAE eq. 6
_PRESSURE_SEA_LEVEL = 101_325.0  # [Pa]
_MOLAR_MASS_RATIO = 0.621945  # water / dry air [1], ASHRAE 2017 ch. 1 eq. 20
_DEW_POINT_TOLERANCE = 1e-7  # [K], last Newton step; the error left is far smaller
_DEW_POINT_MAX_ITERATIONS = 50


def _array(value: FloatOrArray) -> FloatArray:
    return np.asarray(value, dtype=np.float64)


def _output(value: FloatArray) -> FloatOrArray:
    """Return a float for a 0-d result, the array otherwise."""
    return float(value) if value.ndim == 0 else value


def _first(value: FloatArray, mask: npt.NDArray[np.bool_]) -> float:
    return float(np.broadcast_to(value, mask.shape)[mask].flat[0])


def _require_temperature_range(name: str, temp: FloatArray) -> None:
    bad = (temp < _TEMP_MIN) | (temp > _TEMP_MAX)
    if np.any(bad):
        raise ValueError(
            f"{name}: got {_first(temp, bad)} °C, expected {_TEMP_MIN} °C to {_TEMP_MAX} °C"
            " (range of the ASHRAE saturation-pressure equations)"
        )


def _require_relative_humidity(relative_humidity: FloatArray) -> None:
    bad = ~((relative_humidity > 0.0) & (relative_humidity <= 1.0))
    if np.any(bad):
        raise ValueError(
            f"relative_humidity: got {_first(relative_humidity, bad)}, expected a fraction"
            " in (0, 1]; divide a percentage by 100"
        )


def _require_pressure(pressure: FloatArray) -> None:
    bad = ~(pressure > 0.0)
    if np.any(bad):
        raise ValueError(f"pressure: got {_first(pressure, bad)} Pa, expected a value > 0 Pa")


# ASHRAE 2017 ch. 1 eq. 5 (over ice) and eq. 6 (over water):
# ln p_ws = C1/T + C2 + C3 T + C4 T^2 + C5 T^3 + C6 T^4 + C7 ln T, T in K, p_ws in Pa.
_OVER_ICE = (
    -5.6745359e03,
    6.3925247,
    -9.6778430e-03,
    6.2215701e-07,
    2.0747825e-09,
    -9.4840240e-13,
    4.1635019,
)
_OVER_WATER = (
    -5.8002206e03,
    1.3914993,
    -4.8640239e-02,
    4.1764768e-05,
    -1.4452093e-08,
    0.0,
    6.5459673,
)


def _ln_pws(kelvin: Any, c: tuple[float, ...], log: Any) -> Any:
    """ln p_ws for floats (log=math.log) or arrays (log=np.log)."""
    return (
        c[0] / kelvin
        + c[1]
        + c[2] * kelvin
        + c[3] * kelvin**2
        + c[4] * kelvin**3
        + c[5] * kelvin**4
        + c[6] * log(kelvin)
    )


def _ln_pws_slope(kelvin: Any, c: tuple[float, ...]) -> Any:
    """d(ln p_ws)/dT [1/K] for floats or arrays."""
    return (
        -c[0] / kelvin**2
        + c[2]
        + 2.0 * c[3] * kelvin
        + 3.0 * c[4] * kelvin**2
        + 4.0 * c[5] * kelvin**3
        + c[6] / kelvin
    )


def _log_saturation_vapour_pressure(temp_air: FloatArray) -> FloatArray:
    """Natural log of the saturation vapour pressure [ln Pa], ASHRAE eq. 5 and 6."""
    kelvin = temp_air + _ZERO_CELSIUS
    over_ice = _ln_pws(kelvin, _OVER_ICE, np.log)
    over_water = _ln_pws(kelvin, _OVER_WATER, np.log)
    return np.asarray(np.where(temp_air <= _TRIPLE_POINT, over_ice, over_water), dtype=np.float64)


def _log_saturation_vapour_pressure_slope(temp_air: FloatArray) -> FloatArray:
    """Derivative of :func:`_log_saturation_vapour_pressure` [1/K]."""
    kelvin = temp_air + _ZERO_CELSIUS
    over_ice = _ln_pws_slope(kelvin, _OVER_ICE)
    over_water = _ln_pws_slope(kelvin, _OVER_WATER)
    return np.asarray(np.where(temp_air <= _TRIPLE_POINT, over_ice, over_water), dtype=np.float64)


def _dew_point_scalar(temp_air: float, relative_humidity: float) -> float:
    """The same Newton solution as the array path, in plain floats.

    The decision core calls this once per zone and evaluation; numpy's
    per-call overhead on 0-d arrays made it most of the cost of a decision.
    """
    if not -100.0 <= temp_air <= 200.0:
        _require_temperature_range("temp_air", _array(temp_air))
    if not 0.0 < relative_humidity <= 1.0:
        _require_relative_humidity(_array(relative_humidity))
    coefficients = _OVER_ICE if temp_air <= _TRIPLE_POINT else _OVER_WATER
    log_target: float = math.log(relative_humidity) + _ln_pws(
        temp_air + _ZERO_CELSIUS, coefficients, math.log
    )
    log_ratio = log_target - math.log(611.2)
    temp = min(max(243.12 * log_ratio / (17.62 - log_ratio), _TEMP_MIN), _TEMP_MAX)
    for _ in range(_DEW_POINT_MAX_ITERATIONS):
        c = _OVER_ICE if temp <= _TRIPLE_POINT else _OVER_WATER
        kelvin = temp + _ZERO_CELSIUS
        step: float = (_ln_pws(kelvin, c, math.log) - log_target) / _ln_pws_slope(kelvin, c)
        temp = min(max(temp - step, _TEMP_MIN), _TEMP_MAX)
        if abs(step) <= _DEW_POINT_TOLERANCE:
            return min(temp, temp_air)
    raise ArithmeticError(  # pragma: no cover - the iteration converges in < 10 steps
        f"dew point did not converge in {_DEW_POINT_MAX_ITERATIONS} iterations"
    )


@overload
def saturation_vapour_pressure(temp_air: float) -> float: ...  # type: ignore[overload-overlap]
@overload
def saturation_vapour_pressure(temp_air: FloatOrArray) -> FloatArray: ...
def saturation_vapour_pressure(temp_air: FloatOrArray) -> FloatOrArray:
    r"""Saturation vapour pressure over liquid water, or over ice when freezing.

    Parameters
    ----------
    temp_air : float or array
        Air temperature [°C], -100 °C to 200 °C.

    Returns
    -------
    vapour_pressure : float or array
        Saturation vapour pressure [Pa].

    Notes
    -----
    Hyland and Wexler's equations as ASHRAE gives them, with T in kelvin: over
    ice (eq. 5)

    .. math::

        \ln p_{ws} = C_1/T + C_2 + C_3 T + C_4 T^2 + C_5 T^3 + C_6 T^4 + C_7 \ln T

    and over liquid water (eq. 6)

    .. math::

        \ln p_{ws} = C_8/T + C_9 + C_{10} T + C_{11} T^2 + C_{12} T^3 + C_{13} \ln T

    The handbook switches at the freezing point; like PsychroLib this switches
    at the triple point, 0.01 °C, where the two curves meet, so that the dew
    point inverse has no jump to cross.

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals (2017), ch. 1, eq. 5 and 6.

    Examples
    --------
    >>> round(saturation_vapour_pressure(25.0), 1)
    3169.2
    """
    temp = _array(temp_air)
    _require_temperature_range("temp_air", temp)
    return _output(np.exp(_log_saturation_vapour_pressure(temp)))


@overload
def dew_point_from_vapour_pressure(vapour_pressure: float) -> float: ...  # type: ignore[overload-overlap]
@overload
def dew_point_from_vapour_pressure(vapour_pressure: FloatOrArray) -> FloatArray: ...
def dew_point_from_vapour_pressure(vapour_pressure: FloatOrArray) -> FloatOrArray:
    r"""Dew-point temperature of air holding water vapour at a partial pressure.

    Parameters
    ----------
    vapour_pressure : float or array
        Partial pressure of water vapour [Pa], between the saturation pressures
        at -100 °C and 200 °C.

    Returns
    -------
    temp_dew_point : float or array
        Dew-point temperature [°C]; below 0.01 °C it is the frost point.

    Notes
    -----
    Solves :math:`p_{ws}(T_d) = p_w` by Newton iteration on
    :math:`\ln p_{ws}(T)`, a smooth, nearly linear function, with its
    analytic derivative, until the last step is below 1e-7 K. This is the
    method PsychroLib uses in place of the handbook's dew-point regressions
    (ASHRAE 2017 ch. 1 eq. 37 and 38), which are less accurate and cover a
    narrower range.

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals (2017), ch. 1, eq. 5, 6 and 36.
    .. [2] Meyer, D. and Thevenard, D. (2019). PsychroLib, J. Open Source
       Software 4(33), 1137, ``GetTDewPointFromVapPres``.

    Examples
    --------
    >>> round(dew_point_from_vapour_pressure(1584.6), 3)
    13.864
    """
    pressure = _array(vapour_pressure)
    low = np.exp(_log_saturation_vapour_pressure(np.array(_TEMP_MIN)))
    high = np.exp(_log_saturation_vapour_pressure(np.array(_TEMP_MAX)))
    bad = ~((pressure >= low) & (pressure <= high))
    if np.any(bad):
        raise ValueError(
            f"vapour_pressure: got {_first(pressure, bad)} Pa, expected {float(low):.3g} Pa"
            f" to {float(high):.6g} Pa (saturation at {_TEMP_MIN} °C and {_TEMP_MAX} °C)"
        )
    log_target = np.log(pressure)
    # Magnus-type first guess, within a few kelvin over the whole range.
    log_ratio = log_target - np.log(611.2)
    temp = np.clip(243.12 * log_ratio / (17.62 - log_ratio), _TEMP_MIN, _TEMP_MAX)
    for _ in range(_DEW_POINT_MAX_ITERATIONS):
        step = (_log_saturation_vapour_pressure(temp) - log_target) / (
            _log_saturation_vapour_pressure_slope(temp)
        )
        temp = np.clip(temp - step, _TEMP_MIN, _TEMP_MAX)
        if np.all(np.abs(step) <= _DEW_POINT_TOLERANCE):
            return _output(np.asarray(temp, dtype=np.float64))
    raise ArithmeticError(  # pragma: no cover - the iteration converges in < 10 steps
        f"dew point did not converge in {_DEW_POINT_MAX_ITERATIONS} iterations"
    )


@overload
def dew_point_from_relative_humidity(  # type: ignore[overload-overlap]
    temp_air: float, relative_humidity: float
) -> float: ...
@overload
def dew_point_from_relative_humidity(
    temp_air: FloatOrArray, relative_humidity: FloatOrArray
) -> FloatArray: ...
def dew_point_from_relative_humidity(
    temp_air: FloatOrArray, relative_humidity: FloatOrArray
) -> FloatOrArray:
    r"""Dew-point temperature from dry-bulb temperature and relative humidity.

    Parameters
    ----------
    temp_air : float or array
        Air temperature [°C], -100 °C to 200 °C.
    relative_humidity : float or array
        Relative humidity as a fraction in (0, 1] [1].

    Returns
    -------
    temp_dew_point : float or array
        Dew-point temperature [°C], never above ``temp_air``.

    Notes
    -----
    .. math::

        p_w = \phi \, p_{ws}(t), \qquad p_{ws}(t_d) = p_w

    solved as in :func:`dew_point_from_vapour_pressure`.

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals (2017), ch. 1, eq. 5, 6, 12, 22 and 36.

    Examples
    --------
    >>> round(dew_point_from_relative_humidity(25.0, 0.5), 3)
    13.864
    """
    if isinstance(temp_air, float | int) and isinstance(relative_humidity, float | int):
        return _dew_point_scalar(float(temp_air), float(relative_humidity))
    temp = _array(temp_air)
    humidity = _array(relative_humidity)
    _require_relative_humidity(humidity)
    dew_point = _array(dew_point_from_vapour_pressure(humidity * saturation_vapour_pressure(temp)))
    return _output(np.asarray(np.minimum(dew_point, temp), dtype=np.float64))


@overload
def humidity_ratio_from_vapour_pressure(  # type: ignore[overload-overlap]
    vapour_pressure: float, pressure: float = ...
) -> float: ...
@overload
def humidity_ratio_from_vapour_pressure(
    vapour_pressure: FloatOrArray, pressure: FloatOrArray = ...
) -> FloatArray: ...
def humidity_ratio_from_vapour_pressure(
    vapour_pressure: FloatOrArray, pressure: FloatOrArray = _PRESSURE_SEA_LEVEL
) -> FloatOrArray:
    r"""Humidity ratio of moist air from the partial pressure of its water vapour.

    Parameters
    ----------
    vapour_pressure : float or array
        Partial pressure of water vapour [Pa], at least 0 and below ``pressure``.
    pressure : float or array, default 101325.0
        Absolute pressure of the moist air [Pa]; see
        ``ventsup.core.physics.standard_atmospheric_pressure`` for a site above
        sea level.

    Returns
    -------
    humidity_ratio : float or array
        Humidity ratio [kg/kg].

    Notes
    -----
    .. math::

        W = 0.621945 \, \frac{p_w}{p - p_w}

    Unlike PsychroLib, no lower bound of 1e-7 is imposed.

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals (2017), ch. 1, eq. 20.

    Examples
    --------
    >>> round(humidity_ratio_from_vapour_pressure(1584.6), 6)
    0.009881
    """
    partial = _array(vapour_pressure)
    total = _array(pressure)
    _require_pressure(total)
    bad = ~((partial >= 0.0) & (partial < total))
    if np.any(bad):
        raise ValueError(
            f"vapour_pressure: got {_first(partial, bad)} Pa, expected at least 0 Pa and"
            " below the total pressure"
        )
    return _output(_MOLAR_MASS_RATIO * partial / (total - partial))


@overload
def vapour_pressure_from_humidity_ratio(  # type: ignore[overload-overlap]
    humidity_ratio: float, pressure: float = ...
) -> float: ...
@overload
def vapour_pressure_from_humidity_ratio(
    humidity_ratio: FloatOrArray, pressure: FloatOrArray = ...
) -> FloatArray: ...
def vapour_pressure_from_humidity_ratio(
    humidity_ratio: FloatOrArray, pressure: FloatOrArray = _PRESSURE_SEA_LEVEL
) -> FloatOrArray:
    r"""Partial pressure of water vapour from the humidity ratio.

    Parameters
    ----------
    humidity_ratio : float or array
        Humidity ratio [kg/kg], at least 0.
    pressure : float or array, default 101325.0
        Absolute pressure of the moist air [Pa].

    Returns
    -------
    vapour_pressure : float or array
        Partial pressure of water vapour [Pa].

    Notes
    -----
    .. math::

        p_w = \frac{p \, W}{0.621945 + W}

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals (2017), ch. 1, eq. 20 solved for
       :math:`p_w`.

    Examples
    --------
    >>> round(vapour_pressure_from_humidity_ratio(0.012), 1)
    1918.0
    """
    ratio = _array(humidity_ratio)
    total = _array(pressure)
    _require_pressure(total)
    bad = ~(ratio >= 0.0)
    if np.any(bad):
        raise ValueError(f"humidity_ratio: got {_first(ratio, bad)} kg/kg, expected >= 0 kg/kg")
    return _output(total * ratio / (_MOLAR_MASS_RATIO + ratio))


@overload
def humidity_ratio_from_dew_point(  # type: ignore[overload-overlap]
    temp_dew_point: float, pressure: float = ...
) -> float: ...
@overload
def humidity_ratio_from_dew_point(
    temp_dew_point: FloatOrArray, pressure: FloatOrArray = ...
) -> FloatArray: ...
def humidity_ratio_from_dew_point(
    temp_dew_point: FloatOrArray, pressure: FloatOrArray = _PRESSURE_SEA_LEVEL
) -> FloatOrArray:
    r"""Humidity ratio of air with a given dew point.

    Parameters
    ----------
    temp_dew_point : float or array
        Dew-point temperature [°C], -100 °C to 200 °C.
    pressure : float or array, default 101325.0
        Absolute pressure of the moist air [Pa].

    Returns
    -------
    humidity_ratio : float or array
        Humidity ratio [kg/kg].

    Notes
    -----
    .. math::

        W = 0.621945 \, \frac{p_{ws}(t_d)}{p - p_{ws}(t_d)}

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals (2017), ch. 1, eq. 20 and 36.

    Examples
    --------
    >>> round(humidity_ratio_from_dew_point(16.837), 5)
    0.012
    """
    return humidity_ratio_from_vapour_pressure(saturation_vapour_pressure(temp_dew_point), pressure)


@overload
def humidity_ratio_from_relative_humidity(  # type: ignore[overload-overlap]
    temp_air: float, relative_humidity: float, pressure: float = ...
) -> float: ...
@overload
def humidity_ratio_from_relative_humidity(
    temp_air: FloatOrArray, relative_humidity: FloatOrArray, pressure: FloatOrArray = ...
) -> FloatArray: ...
def humidity_ratio_from_relative_humidity(
    temp_air: FloatOrArray,
    relative_humidity: FloatOrArray,
    pressure: FloatOrArray = _PRESSURE_SEA_LEVEL,
) -> FloatOrArray:
    r"""Humidity ratio from dry-bulb temperature and relative humidity.

    Parameters
    ----------
    temp_air : float or array
        Air temperature [°C], -100 °C to 200 °C.
    relative_humidity : float or array
        Relative humidity as a fraction in (0, 1] [1].
    pressure : float or array, default 101325.0
        Absolute pressure of the moist air [Pa].

    Returns
    -------
    humidity_ratio : float or array
        Humidity ratio [kg/kg].

    Notes
    -----
    .. math::

        W = 0.621945 \, \frac{\phi \, p_{ws}(t)}{p - \phi \, p_{ws}(t)}

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals (2017), ch. 1, eq. 12, 20 and 22.

    Examples
    --------
    >>> round(humidity_ratio_from_relative_humidity(25.0, 0.5), 7)
    0.009881
    """
    humidity = _array(relative_humidity)
    _require_relative_humidity(humidity)
    partial = humidity * saturation_vapour_pressure(_array(temp_air))
    return humidity_ratio_from_vapour_pressure(partial, pressure)


@overload
def dew_point_from_humidity_ratio(  # type: ignore[overload-overlap]
    humidity_ratio: float, pressure: float = ...
) -> float: ...
@overload
def dew_point_from_humidity_ratio(
    humidity_ratio: FloatOrArray, pressure: FloatOrArray = ...
) -> FloatArray: ...
def dew_point_from_humidity_ratio(
    humidity_ratio: FloatOrArray, pressure: FloatOrArray = _PRESSURE_SEA_LEVEL
) -> FloatOrArray:
    r"""Dew-point temperature of air with a given humidity ratio.

    Parameters
    ----------
    humidity_ratio : float or array
        Humidity ratio [kg/kg], above 0.
    pressure : float or array, default 101325.0
        Absolute pressure of the moist air [Pa].

    Returns
    -------
    temp_dew_point : float or array
        Dew-point temperature [°C].

    Notes
    -----
    .. math::

        p_w = \frac{p \, W}{0.621945 + W}, \qquad p_{ws}(t_d) = p_w

    solved as in :func:`dew_point_from_vapour_pressure`. PsychroLib also caps
    the result at the dry-bulb temperature; with no dry bulb given, this does
    not.

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals (2017), ch. 1, eq. 20 and 36.

    Examples
    --------
    >>> round(dew_point_from_humidity_ratio(0.012), 3)
    16.837
    """
    return dew_point_from_vapour_pressure(
        vapour_pressure_from_humidity_ratio(humidity_ratio, pressure)
    )


@overload
def moist_air_enthalpy(temp_air: float, humidity_ratio: float) -> float: ...  # type: ignore[overload-overlap]
@overload
def moist_air_enthalpy(temp_air: FloatOrArray, humidity_ratio: FloatOrArray) -> FloatArray: ...
def moist_air_enthalpy(temp_air: FloatOrArray, humidity_ratio: FloatOrArray) -> FloatOrArray:
    r"""Specific enthalpy of moist air per kilogram of dry air.

    Parameters
    ----------
    temp_air : float or array
        Air temperature [°C].
    humidity_ratio : float or array
        Humidity ratio [kg/kg], at least 0.

    Returns
    -------
    enthalpy : float or array
        Specific enthalpy [J/kg], zero for dry air at 0 °C. The inch-pound
        scale starts at 0 °F: 28 Btu/lb there is about 47 kJ/kg here, not the
        65 kJ/kg a bare unit conversion gives.

    Notes
    -----
    .. math::

        h = 1.006 \, t + W \, (2501 + 1.86 \, t) \ \mathrm{kJ/kg}

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals (2017), ch. 1, eq. 30.

    Examples
    --------
    >>> round(moist_air_enthalpy(25.0, 0.0098810))
    50322
    """
    ratio = _array(humidity_ratio)
    bad = ~(ratio >= 0.0)
    if np.any(bad):
        raise ValueError(f"humidity_ratio: got {_first(ratio, bad)} kg/kg, expected >= 0 kg/kg")
    temp = _array(temp_air)
    return _output((1.006 * temp + ratio * (2501.0 + 1.86 * temp)) * 1000.0)
