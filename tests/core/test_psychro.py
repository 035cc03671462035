"""Psychrometrics against ASHRAE Fundamentals 2017 ch. 1 as psychrolib 2.5 implements it.

psychrolib is a test reference only; the package does not import it. Tags as in
shared/CHECKS.md: [pub], [lib], [calc], [mem], [practice].
"""

from __future__ import annotations

import numpy as np
import psychrolib
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ventsup.core.psychro import (
    dew_point_from_humidity_ratio,
    dew_point_from_relative_humidity,
    dew_point_from_vapour_pressure,
    humidity_ratio_from_dew_point,
    humidity_ratio_from_relative_humidity,
    humidity_ratio_from_vapour_pressure,
    moist_air_enthalpy,
    saturation_vapour_pressure,
    vapour_pressure_from_humidity_ratio,
)

psychrolib.SetUnitSystem(psychrolib.SI)

PROPERTY = settings(max_examples=300)
SEA_LEVEL = 101_325.0  # [Pa]

temperatures = st.floats(min_value=-10.0, max_value=45.0, allow_nan=False)
humidities = st.floats(min_value=0.05, max_value=1.0, allow_nan=False)
pressures = st.floats(min_value=80_000.0, max_value=105_000.0, allow_nan=False)


# ----------------------------------------------------------------------------------------
# Published values (CHECKS.md, "Psychrometrics", sea level)
# ----------------------------------------------------------------------------------------


def test_dew_point_at_25_degrees_50_percent() -> None:
    # psychrolib 2.5 GetTDewPointFromRelHum (ASHRAE Fundamentals 2017 ch. 1) [lib]
    assert dew_point_from_relative_humidity(25.0, 0.5) == pytest.approx(13.864, abs=5e-4)


def test_humidity_ratio_at_25_degrees_50_percent() -> None:
    # psychrolib GetHumRatioFromRelHum [lib]
    assert humidity_ratio_from_relative_humidity(25.0, 0.5, SEA_LEVEL) == pytest.approx(
        0.0098810, abs=5e-8
    )


def test_enthalpy_at_25_degrees_50_percent() -> None:
    # psychrolib GetMoistAirEnthalpy [lib]
    humidity_ratio = humidity_ratio_from_relative_humidity(25.0, 0.5)
    assert moist_air_enthalpy(25.0, humidity_ratio) == pytest.approx(50_322.0, abs=0.5)


def test_dew_point_at_humidity_ratio_0_012() -> None:
    # psychrolib GetTDewPointFromHumRatio [lib]
    assert dew_point_from_humidity_ratio(0.012, SEA_LEVEL) == pytest.approx(16.837, abs=5e-4)


def test_enthalpy_datum_ip_versus_si() -> None:
    # CHECKS "enthalpy datum" [lib]: 28 Btu/lb on the IP scale (0 °F datum) is about
    # 47 kJ/kg on the SI scale (0 °C datum), not the 65 kJ/kg of a bare conversion.
    # A 75 °F state with h_IP = 28 Btu/lb: h = 0.240·t + W·(1061 + 0.444·t) (ASHRAE
    # 2017 ch. 1, IP edition) solved for W [calc]
    temp_degf = 75.0
    humidity_ratio = (28.0 - 0.240 * temp_degf) / (1061.0 + 0.444 * temp_degf)
    enthalpy = moist_air_enthalpy((temp_degf - 32.0) / 1.8, humidity_ratio)
    assert enthalpy == pytest.approx(47_000.0, abs=500.0)
    assert abs(enthalpy - 28.0 * 2326.0) > 15_000.0  # 1 Btu/lb = 2.326 kJ/kg [pub]


def test_saturation_pressure_at_boiling() -> None:
    # ASHRAE Fundamentals 2017 ch. 1 Table 3: p_ws(100 °C) = 101.418 kPa [mem]
    assert saturation_vapour_pressure(100.0) == pytest.approx(101_418.0, rel=1e-3)


def test_saturation_pressure_is_continuous_at_the_triple_point() -> None:
    # Ice (eq. 5) and water (eq. 6) curves meet at 0.01 °C, 611.657 Pa (psychrolib
    # notes on GetSatVapPres) [lib]; within 0.01 % [calc]
    just_below = saturation_vapour_pressure(0.01)
    just_above = saturation_vapour_pressure(0.01 + 1e-9)
    assert just_below == pytest.approx(611.657, rel=1e-4)
    assert just_above == pytest.approx(just_below, rel=1e-4)


def test_over_ice_below_freezing() -> None:
    # Below the triple point the ice equation applies (ASHRAE 2017 ch. 1 eq. 5) [pub];
    # values from psychrolib GetSatVapPres [lib]
    for temp in (-40.0, -10.0, -0.5, 0.0):
        assert saturation_vapour_pressure(temp) == pytest.approx(
            psychrolib.GetSatVapPres(temp), rel=1e-12
        )


# ----------------------------------------------------------------------------------------
# Cross-check against psychrolib over -10..45 °C, 5..100 % RH
# ----------------------------------------------------------------------------------------


@PROPERTY
@given(temp=temperatures, humidity=humidities)
def test_dew_point_matches_psychrolib(temp: float, humidity: float) -> None:
    # psychrolib GetTDewPointFromRelHum [lib]; psychrolib stops its Newton iteration at
    # 1e-3 K, so compare to 1e-3 K
    assert dew_point_from_relative_humidity(temp, humidity) == pytest.approx(
        psychrolib.GetTDewPointFromRelHum(temp, humidity), abs=1e-3
    )


@PROPERTY
@given(temp=temperatures, humidity=humidities)
def test_dew_point_solves_the_saturation_equation(temp: float, humidity: float) -> None:
    # The inverse to 1e-6 K: p_ws(t_d) = φ·p_ws(t) to a relative 1e-7 (d ln p/dT is
    # under 0.09 /K here) [calc]
    dew_point = dew_point_from_relative_humidity(temp, humidity)
    assert saturation_vapour_pressure(dew_point) == pytest.approx(
        humidity * saturation_vapour_pressure(temp), rel=1e-7
    )


@PROPERTY
@given(temp=temperatures, humidity=humidities, pressure=pressures)
def test_humidity_ratio_and_enthalpy_match_psychrolib(
    temp: float, humidity: float, pressure: float
) -> None:
    # psychrolib GetHumRatioFromRelHum, GetMoistAirEnthalpy, GetSatVapPres [lib]
    humidity_ratio = humidity_ratio_from_relative_humidity(temp, humidity, pressure)
    assert humidity_ratio == pytest.approx(
        psychrolib.GetHumRatioFromRelHum(temp, humidity, pressure), rel=1e-6
    )
    assert moist_air_enthalpy(temp, humidity_ratio) == pytest.approx(
        psychrolib.GetMoistAirEnthalpy(temp, humidity_ratio), rel=1e-6
    )
    assert saturation_vapour_pressure(temp) == pytest.approx(
        psychrolib.GetSatVapPres(temp), rel=1e-6
    )


@PROPERTY
@given(temp=temperatures, humidity=humidities, pressure=pressures)
def test_humidity_ratio_conversions_match_psychrolib(
    temp: float, humidity: float, pressure: float
) -> None:
    # psychrolib GetTDewPointFromHumRatio, GetVapPresFromHumRatio,
    # GetHumRatioFromTDewPoint, GetHumRatioFromVapPres [lib]
    humidity_ratio = psychrolib.GetHumRatioFromRelHum(temp, humidity, pressure)
    assert dew_point_from_humidity_ratio(humidity_ratio, pressure) == pytest.approx(
        psychrolib.GetTDewPointFromHumRatio(temp, humidity_ratio, pressure), abs=1e-3
    )
    assert vapour_pressure_from_humidity_ratio(humidity_ratio, pressure) == pytest.approx(
        psychrolib.GetVapPresFromHumRatio(humidity_ratio, pressure), rel=1e-6
    )
    dew_point = psychrolib.GetTDewPointFromRelHum(temp, humidity)
    assert humidity_ratio_from_dew_point(dew_point, pressure) == pytest.approx(
        psychrolib.GetHumRatioFromTDewPoint(dew_point, pressure), rel=1e-6
    )
    vapour_pressure = humidity * psychrolib.GetSatVapPres(temp)
    assert humidity_ratio_from_vapour_pressure(vapour_pressure, pressure) == pytest.approx(
        psychrolib.GetHumRatioFromVapPres(vapour_pressure, pressure), rel=1e-6
    )
    assert dew_point_from_vapour_pressure(vapour_pressure) == pytest.approx(
        psychrolib.GetTDewPointFromVapPres(temp, vapour_pressure), abs=1e-3
    )


# ----------------------------------------------------------------------------------------
# Arrays, round trips and input checks
# ----------------------------------------------------------------------------------------


def test_functions_take_arrays() -> None:
    # Vectorised form equals the scalar form, element by element [calc]
    temps = np.array([-10.0, 0.0, 0.01, 13.0, 25.0, 45.0])
    humidities_array = np.array([0.05, 0.3, 1.0, 0.5, 0.5, 0.9])
    dew_points = dew_point_from_relative_humidity(temps, humidities_array)
    assert isinstance(dew_points, np.ndarray)
    expected = [
        dew_point_from_relative_humidity(float(t), float(h))
        for t, h in zip(temps, humidities_array, strict=True)
    ]
    np.testing.assert_allclose(dew_points, expected, rtol=0, atol=1e-9)
    ratios = humidity_ratio_from_relative_humidity(temps, humidities_array)
    np.testing.assert_allclose(dew_point_from_humidity_ratio(ratios), dew_points, atol=1e-6)


def test_saturated_air_has_its_own_dew_point() -> None:
    # At 100 % RH the dew point is the dry bulb (definition) [pub]; within 1e-6 K [calc]
    for temp in (-10.0, 0.0, 0.01, 20.0, 45.0):
        assert dew_point_from_relative_humidity(temp, 1.0) == pytest.approx(temp, abs=1e-6)


@PROPERTY
@given(temp_dew_point=st.floats(-60.0, 60.0), pressure=pressures)
def test_dew_point_round_trip(temp_dew_point: float, pressure: float) -> None:
    # dew point -> humidity ratio -> dew point returns the start to 1e-6 K [calc]
    humidity_ratio = humidity_ratio_from_dew_point(temp_dew_point, pressure)
    assert dew_point_from_humidity_ratio(humidity_ratio, pressure) == pytest.approx(
        temp_dew_point, abs=1e-6
    )


def test_relative_humidity_in_percent_is_refused() -> None:
    # Input check: RH is a fraction 0-1 (STYLE: errors carry the value and the fix)
    # [practice]
    with pytest.raises(ValueError, match="divide a percentage by 100"):
        dew_point_from_relative_humidity(25.0, 50.0)
    with pytest.raises(ValueError, match=r"relative_humidity: got 0\.0"):
        humidity_ratio_from_relative_humidity(25.0, 0.0)


def test_out_of_range_inputs_are_refused() -> None:
    # Validity of ASHRAE 2017 ch. 1 eq. 5 and 6: -100 °C to 200 °C [pub]
    with pytest.raises(ValueError, match=r"temp_air: got 250\.0"):
        saturation_vapour_pressure(250.0)
    with pytest.raises(ValueError, match="vapour_pressure"):
        dew_point_from_vapour_pressure(0.0)
    with pytest.raises(ValueError, match=r"humidity_ratio: got -0\.001"):
        dew_point_from_humidity_ratio(-0.001)
