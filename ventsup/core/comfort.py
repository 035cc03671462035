"""Comfort limits for free-running buildings and the CIBSE TM52 overheating check.

Adaptive comfort after ASHRAE 55 and EN 16798-1, the EN running mean of
outdoor temperature, the elevated-air-speed allowance and the three TM52
criteria. Pure functions over floats or numpy arrays (a float in every numeric
argument gives a float back, an array in any gives an array); the running mean
also takes a pandas Series and the TM52 assessment takes hourly Series.

Nomenclature
------------
============================== ====== ======================================================
name                           unit   quantity
============================== ====== ======================================================
``temp_running_mean``          °C     exponentially weighted running mean of the daily mean
                                      outdoor temperature (ASHRAE 55 calls it the prevailing
                                      mean outdoor air temperature)
``temp_daily_mean``            °C     daily mean outdoor air temperature
``temp_comfort``               °C     adaptive comfort (neutral) operative temperature
``temp_operative``             °C     indoor operative temperature
``temp_max``                   °C     TM52 upper comfort threshold, T_max
``delta_temperature``          K      TM52 ΔT = temp_operative - temp_max, rounded to whole K
``air_speed``                  m/s    average air speed at the occupants
``alpha``                      1      weight of the previous running mean, 0-1
``category``                   -      EN 16798-1 category "I", "II" or "III"
``acceptability``              %      ASHRAE 55 band, 80 or 90
============================== ====== ======================================================

Outside a model's validity range the comfort temperatures and limits are NaN
by default (``nan_outside_validity=True``), so that a value never looks valid
where the standard does not apply; pass ``False`` to extrapolate.

The first ``@overload`` of each function (all floats in, float out) overlaps the
second (any array in, array out); that overlap is intended, hence the
``overload-overlap`` ignores.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Collection, Sequence
from dataclasses import dataclass
from types import MappingProxyType
from typing import Literal, overload

import numpy as np
import numpy.typing as npt
import pandas as pd

__all__ = [
    "Category",
    "OverheatingAssessment",
    "ashrae55_comfort_limits",
    "ashrae55_comfort_temperature",
    "elevated_air_speed_allowance",
    "en16798_comfort_limits",
    "en16798_comfort_temperature",
    "running_mean_outdoor_temperature",
    "running_mean_outdoor_temperature_next",
    "running_mean_outdoor_temperature_seven_days",
    "tm52_delta_temperature",
    "tm52_max_temperature",
    "tm52_overheating",
]

FloatArray = npt.NDArray[np.float64]
FloatOrArray = float | FloatArray
Category = Literal["I", "II", "III"]

_ASHRAE_VALIDITY = (10.0, 33.5)  # [°C] prevailing mean outdoor temperature
_ASHRAE_HALF_BAND = MappingProxyType({80: 3.5, 90: 2.5})  # [K]
_EN_VALIDITY_UPPER = (10.0, 30.0)  # [°C] running mean, upper limits
_EN_VALIDITY_LOWER = (15.0, 30.0)  # [°C] running mean, lower limits
_EN_UPPER_OFFSET = MappingProxyType({"I": 2.0, "II": 3.0, "III": 4.0})  # [K]
_EN_LOWER_OFFSET = MappingProxyType({"I": 3.0, "II": 4.0, "III": 5.0})  # [K]
_SEVEN_DAY_WEIGHTS = (1.0, 0.8, 0.6, 0.5, 0.4, 0.3, 0.2)  # EN 16798-1, sum 3.8
_TM52_EXCEEDANCE_PERCENT = 3  # [%] criterion 1
_TM52_DAILY_WEIGHTED_LIMIT = 6  # [K·h] criterion 2
_TM52_UPPER_DELTA = 4  # [K] criterion 3: fails at ΔT >= 4 K
_MAY_TO_SEPTEMBER = (5, 6, 7, 8, 9)


def _array(value: FloatOrArray) -> FloatArray:
    return np.asarray(value, dtype=np.float64)


def _output(value: FloatArray) -> FloatOrArray:
    """Return a float for a 0-d result, the array otherwise."""
    return float(value) if value.ndim == 0 else value


def _within(value: FloatArray, bounds: tuple[float, float]) -> npt.NDArray[np.bool_]:
    return (value >= bounds[0]) & (value <= bounds[1])


def _category(category: str) -> Category:
    if category == "I":
        return "I"
    if category == "II":
        return "II"
    if category == "III":
        return "III"
    raise ValueError(f"category: got {category!r}, expected 'I', 'II' or 'III'")


# ----------------------------------------------------------------------------------------
# ASHRAE 55 adaptive model
# ----------------------------------------------------------------------------------------


@overload
def ashrae55_comfort_temperature(  # type: ignore[overload-overlap]
    temp_running_mean: float, *, nan_outside_validity: bool = ...
) -> float: ...
@overload
def ashrae55_comfort_temperature(
    temp_running_mean: FloatOrArray, *, nan_outside_validity: bool = ...
) -> FloatArray: ...
def ashrae55_comfort_temperature(
    temp_running_mean: FloatOrArray, *, nan_outside_validity: bool = True
) -> FloatOrArray:
    r"""Adaptive comfort operative temperature of ASHRAE 55.

    Parameters
    ----------
    temp_running_mean : float or array
        Prevailing mean outdoor air temperature [°C]; the model holds from
        10 °C to 33.5 °C, in occupant-controlled naturally conditioned spaces
        (no mechanical cooling or heating running, 1.0-1.5 met, clothing free
        to vary between 0.5 and 1.0 clo).
    nan_outside_validity : bool, default True
        Return NaN where ``temp_running_mean`` is outside 10-33.5 °C (both ends
        included); False extrapolates the line.

    Returns
    -------
    temp_comfort : float or array
        Comfort operative temperature [°C].

    Notes
    -----
    .. math::

        t_{cmf} = 0.31 \, \bar t_{pma(out)} + 17.8

    References
    ----------
    .. [1] ANSI/ASHRAE Standard 55-2020, Thermal Environmental Conditions for
       Human Occupancy, section 5.4 (adaptive model).

    Examples
    --------
    >>> round(ashrae55_comfort_temperature(20.0), 2)
    24.0
    """
    running_mean = _array(temp_running_mean)
    comfort = 0.31 * running_mean + 17.8
    if nan_outside_validity:
        comfort = np.where(_within(running_mean, _ASHRAE_VALIDITY), comfort, np.nan)
    return _output(np.asarray(comfort, dtype=np.float64))


@overload
def ashrae55_comfort_limits(  # type: ignore[overload-overlap]
    temp_running_mean: float,
    acceptability: Literal[80, 90] = ...,
    *,
    nan_outside_validity: bool = ...,
) -> tuple[float, float]: ...
@overload
def ashrae55_comfort_limits(
    temp_running_mean: FloatOrArray,
    acceptability: Literal[80, 90] = ...,
    *,
    nan_outside_validity: bool = ...,
) -> tuple[FloatArray, FloatArray]: ...
def ashrae55_comfort_limits(
    temp_running_mean: FloatOrArray,
    acceptability: Literal[80, 90] = 80,
    *,
    nan_outside_validity: bool = True,
) -> tuple[FloatOrArray, FloatOrArray]:
    r"""Lower and upper acceptable operative temperature of the ASHRAE 55 adaptive model.

    Parameters
    ----------
    temp_running_mean : float or array
        Prevailing mean outdoor air temperature [°C], valid from 10 °C to 33.5 °C.
    acceptability : {80, 90}, default 80
        Band for 80 % or 90 % acceptability [%].
    nan_outside_validity : bool, default True
        Return NaN outside 10-33.5 °C, see :func:`ashrae55_comfort_temperature`.

    Returns
    -------
    lower, upper : float or array
        Lower and upper limit of the operative temperature [°C], without the
        allowance for elevated air speed (add
        :func:`elevated_air_speed_allowance` to the upper limit).

    Notes
    -----
    .. math::

        t_{cmf} \pm 3.5 \text{ K (80 \%)}, \qquad t_{cmf} \pm 2.5 \text{ K (90 \%)}

    References
    ----------
    .. [1] ANSI/ASHRAE Standard 55-2020, section 5.4.

    Examples
    --------
    >>> tuple(round(limit, 2) for limit in ashrae55_comfort_limits(20.0, 80))
    (20.5, 27.5)
    """
    if acceptability not in _ASHRAE_HALF_BAND:
        raise ValueError(f"acceptability: got {acceptability!r}, expected 80 or 90 (percent)")
    half_band = _ASHRAE_HALF_BAND[acceptability]
    comfort = _array(
        ashrae55_comfort_temperature(
            _array(temp_running_mean), nan_outside_validity=nan_outside_validity
        )
    )
    return _output(comfort - half_band), _output(comfort + half_band)


@overload
def elevated_air_speed_allowance(  # type: ignore[overload-overlap]
    air_speed: float, temp_operative: float
) -> float: ...
@overload
def elevated_air_speed_allowance(
    air_speed: FloatOrArray, temp_operative: FloatOrArray
) -> FloatArray: ...
def elevated_air_speed_allowance(
    air_speed: FloatOrArray, temp_operative: FloatOrArray
) -> FloatOrArray:
    r"""Rise of the adaptive upper limit that elevated air speed allows.

    Parameters
    ----------
    air_speed : float or array
        Average air speed at the occupants [m/s].
    temp_operative : float or array
        Operative temperature [°C].

    Returns
    -------
    allowance : float or array
        Amount to add to the upper comfort limit [K]: 1.2 K from 0.6 m/s,
        1.8 K from 0.9 m/s and 2.2 K from 1.2 m/s, only where the operative
        temperature is 25 °C or more; 0 otherwise.

    Notes
    -----
    The table gives values at 0.6, 0.9 and 1.2 m/s; between them this takes
    the value of the lower speed (a step, no interpolation), as
    ``pythermalcomfort`` does. EN 16798-1 has the same increments for its
    upper limits.

    References
    ----------
    .. [1] ANSI/ASHRAE Standard 55-2020, section 5.4 (increase of the upper limits
       with average air speed).

    Examples
    --------
    >>> elevated_air_speed_allowance(0.9, 27.0)
    1.8
    """
    speed = _array(air_speed)
    bad = ~(speed >= 0.0)
    if np.any(bad):
        value = float(np.broadcast_to(speed, bad.shape)[bad].flat[0])
        raise ValueError(f"air_speed: got {value} m/s, expected >= 0 m/s")
    step = np.where(
        speed >= 1.2, 2.2, np.where(speed >= 0.9, 1.8, np.where(speed >= 0.6, 1.2, 0.0))
    )
    allowance = np.where(_array(temp_operative) >= 25.0, step, 0.0)
    return _output(np.asarray(allowance, dtype=np.float64))


# ----------------------------------------------------------------------------------------
# EN 16798-1 adaptive model and running mean
# ----------------------------------------------------------------------------------------


@overload
def en16798_comfort_temperature(  # type: ignore[overload-overlap]
    temp_running_mean: float, *, nan_outside_validity: bool = ...
) -> float: ...
@overload
def en16798_comfort_temperature(
    temp_running_mean: FloatOrArray, *, nan_outside_validity: bool = ...
) -> FloatArray: ...
def en16798_comfort_temperature(
    temp_running_mean: FloatOrArray, *, nan_outside_validity: bool = True
) -> FloatOrArray:
    r"""Adaptive comfort operative temperature of EN 16798-1.

    Parameters
    ----------
    temp_running_mean : float or array
        Running mean outdoor temperature [°C], see
        :func:`running_mean_outdoor_temperature`.
    nan_outside_validity : bool, default True
        Return NaN where ``temp_running_mean`` is outside 10-30 °C (both ends
        included).

    Returns
    -------
    temp_comfort : float or array
        Comfort operative temperature [°C].

    Notes
    -----
    .. math::

        \theta_c = 0.33 \, \theta_{rm} + 18.8

    References
    ----------
    .. [1] EN 16798-1:2019, Energy performance of buildings - Ventilation for
       buildings - Part 1, Annex B (adaptive criteria for buildings without
       mechanical cooling).

    Examples
    --------
    >>> round(en16798_comfort_temperature(20.0), 2)
    25.4
    """
    running_mean = _array(temp_running_mean)
    comfort = 0.33 * running_mean + 18.8
    if nan_outside_validity:
        comfort = np.where(_within(running_mean, _EN_VALIDITY_UPPER), comfort, np.nan)
    return _output(np.asarray(comfort, dtype=np.float64))


@overload
def en16798_comfort_limits(  # type: ignore[overload-overlap]
    temp_running_mean: float,
    category: Category = ...,
    *,
    nan_outside_validity: bool = ...,
) -> tuple[float, float]: ...
@overload
def en16798_comfort_limits(
    temp_running_mean: FloatOrArray,
    category: Category = ...,
    *,
    nan_outside_validity: bool = ...,
) -> tuple[FloatArray, FloatArray]: ...
def en16798_comfort_limits(
    temp_running_mean: FloatOrArray,
    category: Category = "II",
    *,
    nan_outside_validity: bool = True,
) -> tuple[FloatOrArray, FloatOrArray]:
    r"""Lower and upper operative temperature limits of an EN 16798-1 category.

    Parameters
    ----------
    temp_running_mean : float or array
        Running mean outdoor temperature [°C].
    category : {"I", "II", "III"}, default "II"
        Category of expectation; II is the normal level for new buildings.
    nan_outside_validity : bool, default True
        Return NaN for the upper limit outside 10-30 °C and for the lower limit
        outside 15-30 °C of running mean (both ends included). Below 15 °C the
        standard's lower limit for heated buildings applies instead.

    Returns
    -------
    lower, upper : float or array
        Lower and upper limit of the operative temperature [°C], without the
        elevated-air-speed allowance.

    Notes
    -----
    .. math::

        \theta_{up} = \theta_c + 2, 3, 4 \text{ K}, \qquad
        \theta_{low} = \theta_c - 3, 4, 5 \text{ K}

    for categories I, II, III, with :math:`\theta_c = 0.33 \, \theta_{rm} + 18.8`.
    The 15 °C start of the lower limits is quoted from memory of the standard's
    Annex B (the same as EN 15251:2007 Annex A.2); ``pythermalcomfort`` uses
    10-30 °C for both.

    References
    ----------
    .. [1] EN 16798-1:2019, Annex B (adaptive criteria for buildings without
       mechanical cooling).

    Examples
    --------
    >>> tuple(round(limit, 2) for limit in en16798_comfort_limits(20.0, "II"))
    (21.4, 28.4)
    """
    checked = _category(category)
    running_mean = _array(temp_running_mean)
    comfort = 0.33 * running_mean + 18.8
    lower = comfort - _EN_LOWER_OFFSET[checked]
    upper = comfort + _EN_UPPER_OFFSET[checked]
    if nan_outside_validity:
        lower = np.where(_within(running_mean, _EN_VALIDITY_LOWER), lower, np.nan)
        upper = np.where(_within(running_mean, _EN_VALIDITY_UPPER), upper, np.nan)
    return (
        _output(np.asarray(lower, dtype=np.float64)),
        _output(np.asarray(upper, dtype=np.float64)),
    )


@overload
def running_mean_outdoor_temperature_next(  # type: ignore[overload-overlap]
    temp_running_mean: float, temp_daily_mean: float, alpha: float = ...
) -> float: ...
@overload
def running_mean_outdoor_temperature_next(
    temp_running_mean: FloatOrArray, temp_daily_mean: FloatOrArray, alpha: float = ...
) -> FloatArray: ...
def running_mean_outdoor_temperature_next(
    temp_running_mean: FloatOrArray, temp_daily_mean: FloatOrArray, alpha: float = 0.8
) -> FloatOrArray:
    r"""Today's running mean outdoor temperature from yesterday's values.

    Parameters
    ----------
    temp_running_mean : float or array
        Yesterday's running mean outdoor temperature [°C].
    temp_daily_mean : float or array
        Yesterday's daily mean outdoor temperature [°C].
    alpha : float, default 0.8
        Weight of the previous running mean [1], 0 to below 1. EN 16798-1
        recommends 0.8; ASHRAE 55 allows 0.6-0.9.

    Returns
    -------
    temp_running_mean : float or array
        Today's running mean outdoor temperature [°C].

    Notes
    -----
    .. math::

        \theta_{rm,n} = (1 - \alpha) \, \theta_{ed,n-1} + \alpha \, \theta_{rm,n-1}

    References
    ----------
    .. [1] EN 16798-1:2019, Annex B, running mean outdoor temperature.

    Examples
    --------
    >>> round(running_mean_outdoor_temperature_next(15.0, 20.0), 2)
    16.0
    """
    if not 0.0 <= alpha < 1.0:
        raise ValueError(f"alpha: got {alpha}, expected 0 <= alpha < 1 (EN 16798-1 uses 0.8)")
    result = (1.0 - alpha) * _array(temp_daily_mean) + alpha * _array(temp_running_mean)
    return _output(np.asarray(result, dtype=np.float64))


@overload
def running_mean_outdoor_temperature(
    temp_daily_mean: pd.Series[float],
    alpha: float = ...,
    temp_running_mean_initial: float | None = ...,
) -> pd.Series[float]: ...
@overload
def running_mean_outdoor_temperature(
    temp_daily_mean: FloatArray,
    alpha: float = ...,
    temp_running_mean_initial: float | None = ...,
) -> FloatArray: ...
def running_mean_outdoor_temperature(
    temp_daily_mean: pd.Series[float] | FloatArray,
    alpha: float = 0.8,
    temp_running_mean_initial: float | None = None,
) -> pd.Series[float] | FloatArray:
    r"""Running mean outdoor temperature for each day of a daily series.

    Parameters
    ----------
    temp_daily_mean : pandas.Series or array
        Daily mean outdoor temperature of consecutive days [°C], oldest first,
        without gaps or NaN. A Series with a DatetimeIndex is checked for
        missing days.
    alpha : float, default 0.8
        Weight of the previous running mean [1], 0 to below 1.
    temp_running_mean_initial : float or None, default None
        Running mean on the first day [°C]. None starts from the first day's
        own daily mean, a cold start whose influence decays as
        :math:`\alpha^n` (under 1 % after three weeks at 0.8).

    Returns
    -------
    temp_running_mean : pandas.Series or array
        Running mean for each day [°C], built from the days before it; a Series
        keeps the input's index.

    Notes
    -----
    .. math::

        \theta_{rm,n} = (1 - \alpha) \, \theta_{ed,n-1} + \alpha \, \theta_{rm,n-1}

    References
    ----------
    .. [1] EN 16798-1:2019, Annex B, running mean outdoor temperature.

    Examples
    --------
    >>> running_mean_outdoor_temperature(np.array([10.0, 20.0, 20.0])).round(2).tolist()
    [10.0, 10.0, 12.0]
    """
    if not 0.0 <= alpha < 1.0:
        raise ValueError(f"alpha: got {alpha}, expected 0 <= alpha < 1 (EN 16798-1 uses 0.8)")
    if isinstance(temp_daily_mean, pd.Series):
        if isinstance(temp_daily_mean.index, pd.DatetimeIndex):
            _require_consecutive_days(temp_daily_mean.index)
        values = temp_daily_mean.to_numpy(dtype=np.float64)
    else:
        values = np.asarray(temp_daily_mean, dtype=np.float64)
    if values.ndim != 1 or values.size == 0:
        raise ValueError(
            f"temp_daily_mean: got shape {values.shape}, expected a 1-d series of daily means"
        )
    if np.any(np.isnan(values)):
        position = int(np.flatnonzero(np.isnan(values))[0])
        raise ValueError(
            f"temp_daily_mean: NaN at position {position}, expected a value for every day;"
            " fill or interpolate missing days first"
        )
    running_mean: FloatArray = np.empty(values.size, dtype=np.float64)
    running_mean[0] = values[0] if temp_running_mean_initial is None else temp_running_mean_initial
    for day in range(1, values.size):
        running_mean[day] = (1.0 - alpha) * values[day - 1] + alpha * running_mean[day - 1]
    if isinstance(temp_daily_mean, pd.Series):
        return pd.Series(running_mean, index=temp_daily_mean.index, name="temp_running_mean")
    return running_mean


def _require_consecutive_days(index: pd.DatetimeIndex) -> None:
    days = pd.DatetimeIndex([pd.Timestamp(day) for day in index.date])
    gaps = days[1:] - days[:-1]
    bad = np.flatnonzero(gaps != pd.Timedelta(days=1))
    if bad.size:
        after = index[int(bad[0])]
        raise ValueError(
            f"temp_daily_mean: the day after {after} is not the next calendar day,"
            " expected one value per consecutive day"
        )


def running_mean_outdoor_temperature_seven_days(temp_daily_mean: Sequence[float]) -> float:
    r"""Running mean outdoor temperature from the last seven daily means.

    Parameters
    ----------
    temp_daily_mean : sequence of 7 floats
        Daily mean outdoor temperature of the seven days before today, newest
        first: yesterday, the day before, ... [°C].

    Returns
    -------
    temp_running_mean : float
        Approximate running mean outdoor temperature [°C].

    Notes
    -----
    The standard's approximation where no running mean is being carried:

    .. math::

        \theta_{rm} = (\theta_{ed,-1} + 0.8 \theta_{ed,-2} + 0.6 \theta_{ed,-3}
        + 0.5 \theta_{ed,-4} + 0.4 \theta_{ed,-5} + 0.3 \theta_{ed,-6}
        + 0.2 \theta_{ed,-7}) / 3.8

    The weights are quoted from memory of EN 16798-1 (the same as EN 15251:2007
    eq. A.2). ``pythermalcomfort``'s ``running_mean_outdoor_temperature`` is a
    different finite sum, normalised by the sum of :math:`\alpha^i`.

    References
    ----------
    .. [1] EN 16798-1:2019, Annex B, approximate running mean.

    Examples
    --------
    >>> running_mean_outdoor_temperature_seven_days([20.0] * 7)
    20.0
    """
    values = np.asarray(temp_daily_mean, dtype=np.float64)
    if values.shape != (7,):
        raise ValueError(
            f"temp_daily_mean: got {values.size} values, expected the 7 days before today,"
            " newest first"
        )
    weights = np.asarray(_SEVEN_DAY_WEIGHTS)
    return float(np.dot(weights, values) / weights.sum())


# ----------------------------------------------------------------------------------------
# CIBSE TM52 overheating
# ----------------------------------------------------------------------------------------


@overload
def tm52_max_temperature(  # type: ignore[overload-overlap]
    temp_running_mean: float, category: Category = ...
) -> float: ...
@overload
def tm52_max_temperature(
    temp_running_mean: FloatOrArray, category: Category = ...
) -> FloatArray: ...
def tm52_max_temperature(
    temp_running_mean: FloatOrArray, category: Category = "II"
) -> FloatOrArray:
    r"""Upper comfort threshold T_max of CIBSE TM52.

    Parameters
    ----------
    temp_running_mean : float or array
        Running mean outdoor temperature [°C].
    category : {"I", "II", "III"}, default "II"
        Building category; II for normal expectation.

    Returns
    -------
    temp_max : float or array
        Maximum acceptable operative temperature [°C]. No validity range is
        applied, so every hour of a season gets a threshold.

    Notes
    -----
    .. math::

        T_{max} = 0.33 \, T_{rm} + 18.8 + \{2, 3, 4\} \text{ K}

    for categories I, II and III; for category II this is
    :math:`0.33 \, T_{rm} + 21.8`.

    References
    ----------
    .. [1] CIBSE TM52:2013, The limits of thermal comfort: avoiding overheating
       in European buildings, upper threshold T_max.

    Examples
    --------
    >>> round(tm52_max_temperature(20.0), 2)
    28.4
    """
    checked = _category(category)
    comfort = 0.33 * _array(temp_running_mean) + 18.8
    return _output(np.asarray(comfort + _EN_UPPER_OFFSET[checked], dtype=np.float64))


def _round_half_up(value: FloatArray) -> FloatArray:
    # Rounding to 1e-6 K first keeps binary noise (28.9 - 28.4 = 0.49999999999999645)
    # from pulling an exact half below the half-way mark.
    return np.asarray(np.floor(np.round(value, 6) + 0.5), dtype=np.float64)


@overload
def tm52_delta_temperature(  # type: ignore[overload-overlap]
    temp_operative: float, temp_max: float
) -> float: ...
@overload
def tm52_delta_temperature(temp_operative: FloatOrArray, temp_max: FloatOrArray) -> FloatArray: ...
def tm52_delta_temperature(temp_operative: FloatOrArray, temp_max: FloatOrArray) -> FloatOrArray:
    r"""TM52 temperature difference ΔT, rounded to a whole kelvin.

    Parameters
    ----------
    temp_operative : float or array
        Indoor operative temperature [°C].
    temp_max : float or array
        Upper comfort threshold [°C], see :func:`tm52_max_temperature`.

    Returns
    -------
    delta_temperature : float or array
        :math:`T_{op} - T_{max}` rounded to the nearest whole kelvin [K], halves
        rounded up (0.5 → 1, 1.5 → 2, 2.5 → 3, -0.5 → 0), not to even as
        Python's :func:`round` does.

    Notes
    -----
    .. math::

        \Delta T = \lfloor (T_{op} - T_{max}) + 0.5 \rfloor

    after rounding the difference to 1e-6 K, so that a difference meant to be
    exactly x.5 K is not read as x.4999... from floating-point arithmetic.

    References
    ----------
    .. [1] CIBSE TM52:2013, The limits of thermal comfort: avoiding overheating
       in European buildings: ΔT rounded to the nearest whole degree.

    Examples
    --------
    >>> tm52_delta_temperature(28.9, 28.4)
    1.0
    """
    return _output(_round_half_up(_array(temp_operative) - _array(temp_max)))


@dataclass(frozen=True)
class OverheatingAssessment:
    """Outcome of the three CIBSE TM52 criteria for one space over one season.

    Attributes
    ----------
    occupied_hours : int
        Occupied hours in the season that were assessed [h].
    hours_of_exceedance : int
        Criterion 1: occupied hours with ΔT >= 1 K [h].
    hours_of_exceedance_percent : float
        ``hours_of_exceedance`` as a share of ``occupied_hours`` [%].
    hours_of_exceedance_pass : bool
        True when ``hours_of_exceedance`` is at most 3 % of ``occupied_hours``.
    daily_weighted_exceedance_max : int
        Criterion 2: the largest daily sum of positive ΔT over occupied hours
        [K·h].
    days_over_daily_limit : int
        Days whose weighted exceedance is above 6 K·h [d].
    daily_weighted_exceedance_pass : bool
        True when no day is above 6 K·h.
    delta_temperature_max : int
        Criterion 3: the largest ΔT in an occupied hour [K].
    upper_limit_pass : bool
        True when ΔT stays below 4 K in every occupied hour.
    criteria_failed : int
        Number of criteria failed, 0-3.
    passed : bool
        True unless two or more criteria failed.
    """

    occupied_hours: int
    hours_of_exceedance: int
    hours_of_exceedance_percent: float
    hours_of_exceedance_pass: bool
    daily_weighted_exceedance_max: int
    days_over_daily_limit: int
    daily_weighted_exceedance_pass: bool
    delta_temperature_max: int
    upper_limit_pass: bool
    criteria_failed: int
    passed: bool


def tm52_overheating(
    temp_operative: pd.Series[float],
    temp_running_mean: pd.Series[float],
    occupied: pd.Series[bool],
    *,
    category: Category = "II",
    season_months: Collection[int] = _MAY_TO_SEPTEMBER,
) -> OverheatingAssessment:
    r"""Assess overheating in a free-running space by the three CIBSE TM52 criteria.

    Parameters
    ----------
    temp_operative : pandas.Series
        Hourly indoor operative temperature [°C] on a time-zone-aware
        DatetimeIndex, one value per hour (gaps allowed, samples closer than an
        hour not); months and days are taken in the index's time zone.
    temp_running_mean : pandas.Series
        Running mean outdoor temperature for each of those hours [°C], on the
        same index (the day's value repeated for its hours).
    occupied : pandas.Series of bool
        True for occupied hours, on the same index.
    category : {"I", "II", "III"}, default "II"
        Building category for :func:`tm52_max_temperature`.
    season_months : collection of int, default (5, 6, 7, 8, 9)
        Months assessed, May to September as TM52 prescribes; hours outside
        them are ignored.

    Returns
    -------
    OverheatingAssessment
        Each criterion's figure and verdict, and the overall verdict.

    Notes
    -----
    With :math:`T_{max}` from :func:`tm52_max_temperature` and
    :math:`\Delta T = T_{op} - T_{max}` rounded to whole kelvin, halves up
    (:func:`tm52_delta_temperature`), over the occupied hours of the season:

    1. hours of exceedance: the hours with :math:`\Delta T \ge 1` K are at most
       3 % of the occupied hours;
    2. daily weighted exceedance: on every calendar day
       :math:`W_e = \sum h_e \cdot \Delta T \le 6` K·h, summing one hour times
       :math:`\Delta T` for each occupied hour with :math:`\Delta T > 0`;
    3. upper limit temperature: :math:`\Delta T \ge 4` K never occurs.

    A space fails when two or more criteria fail.

    References
    ----------
    .. [1] CIBSE TM52:2013, The limits of thermal comfort: avoiding overheating
       in European buildings, the three overheating criteria.

    Examples
    --------
    >>> index = pd.date_range("2021-07-01 09:00", periods=10, freq="h", tz="Europe/London")
    >>> temp_operative = pd.Series(26.0, index=index)
    >>> temp_running_mean = pd.Series(20.0, index=index)
    >>> occupied = pd.Series(True, index=index)
    >>> tm52_overheating(temp_operative, temp_running_mean, occupied).passed
    True
    """
    checked = _category(category)
    index = temp_operative.index
    if not isinstance(index, pd.DatetimeIndex) or index.tz is None:
        raise ValueError(
            "temp_operative: expected a time-zone-aware DatetimeIndex, so that months and"
            " days are local; use .tz_localize(<site time zone>)"
        )
    for name, series in (("temp_running_mean", temp_running_mean), ("occupied", occupied)):
        if not series.index.equals(index):
            raise ValueError(f"{name}: index differs from temp_operative's; align them first")
    if not (index.is_unique and index.is_monotonic_increasing):
        raise ValueError("temp_operative: expected a unique, increasing index")
    if len(index) > 1:
        spacing = index[1:] - index[:-1]
        closest = int(np.argmin(spacing))
        if spacing[closest] < pd.Timedelta(hours=1):
            raise ValueError(
                f"temp_operative: samples {spacing[closest]} apart at {index[closest]},"
                " expected hourly values; resample to hourly means first"
            )
    if occupied.isna().any() or not pd.api.types.is_bool_dtype(occupied.dtype):
        raise ValueError(f"occupied: got dtype {occupied.dtype}, expected bool without NA")

    in_season = np.asarray(index.month.isin(list(season_months)), dtype=bool)
    selected = occupied.to_numpy(dtype=bool) & in_season
    occupied_hours = int(np.count_nonzero(selected))
    if occupied_hours == 0:
        raise ValueError(
            "occupied: no occupied hour in the season months"
            f" {sorted(season_months)}; TM52 needs occupied hours May to September"
        )
    operative = temp_operative.to_numpy(dtype=np.float64)[selected]
    running_mean = temp_running_mean.to_numpy(dtype=np.float64)[selected]
    for name, values in (("temp_operative", operative), ("temp_running_mean", running_mean)):
        if np.any(np.isnan(values)):
            first = index[selected][int(np.flatnonzero(np.isnan(values))[0])]
            raise ValueError(f"{name}: NaN at {first}, an occupied hour; fill it first")

    delta = tm52_delta_temperature(operative, tm52_max_temperature(running_mean, checked))

    hours_of_exceedance = int(np.count_nonzero(delta >= 1.0))
    hours_pass = 100 * hours_of_exceedance <= _TM52_EXCEEDANCE_PERCENT * occupied_hours

    local_days: list[dt.date] = list(index[selected].date)
    daily = pd.Series(np.maximum(delta, 0.0)).groupby(local_days).sum()
    daily_max = int(daily.max())
    days_over = int((daily > _TM52_DAILY_WEIGHTED_LIMIT).sum())
    daily_pass = days_over == 0

    delta_max = int(delta.max())
    upper_pass = delta_max < _TM52_UPPER_DELTA

    failed = sum(not verdict for verdict in (hours_pass, daily_pass, upper_pass))
    return OverheatingAssessment(
        occupied_hours=occupied_hours,
        hours_of_exceedance=hours_of_exceedance,
        hours_of_exceedance_percent=100.0 * hours_of_exceedance / occupied_hours,
        hours_of_exceedance_pass=hours_pass,
        daily_weighted_exceedance_max=daily_max,
        days_over_daily_limit=days_over,
        daily_weighted_exceedance_pass=daily_pass,
        delta_temperature_max=delta_max,
        upper_limit_pass=upper_pass,
        criteria_failed=failed,
        passed=failed < 2,
    )
