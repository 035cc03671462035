"""Airflow through openings and the heat ventilation air carries, against published values.

Each check names its source and its tag from shared/CHECKS.md: [pub] a published
source, [lib] a reference library, [calc] the formula evaluated by hand, [mem]
quoted from memory (to verify against the primary document), [practice] common
practice.
"""

from __future__ import annotations

import math

import numpy as np
import psychrolib
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ventsup.core.physics import (
    Terrain,
    air_density,
    btu_per_hour_to_watts,
    cfm_to_cubic_metres_per_second,
    combined_flow,
    cubic_metres_per_second_to_cfm,
    discharge_coefficient_two_way,
    effective_area_parallel,
    effective_area_series,
    sensible_heat_flow,
    square_feet_to_square_metres,
    square_metres_to_square_feet,
    stack_flow,
    stack_flow_ip,
    standard_atmospheric_pressure,
    tons_to_watts,
    watts_to_btu_per_hour,
    watts_to_tons,
    wind_flow,
    wind_flow_pressure_coefficients,
    wind_speed_at_height,
)

psychrolib.SetUnitSystem(psychrolib.SI)

PROPERTY = settings()

areas = st.floats(min_value=1e-3, max_value=50.0, allow_nan=False)
heights = st.floats(min_value=0.05, max_value=50.0, allow_nan=False)
temperatures = st.floats(min_value=-30.0, max_value=50.0, allow_nan=False)
coefficients = st.floats(min_value=0.1, max_value=1.0, allow_nan=False)


# ----------------------------------------------------------------------------------------
# Stack flow
# ----------------------------------------------------------------------------------------


def test_stack_flow_handbook_example() -> None:
    # ASHRAE Handbook Fundamentals, stack flow eq. (1997 ch. 25 eq. 37) [pub];
    # C_D 0.65, 1 m², ΔH_NPL 1.5 m, 25/15 °C -> 0.6458 m³/s evaluated by hand [calc]
    assert stack_flow(1.0, 1.5, 25.0, 15.0, 0.65) == pytest.approx(0.6458, abs=5e-5)


def test_stack_flow_uses_the_warmer_temperature_in_the_denominator() -> None:
    # ASHRAE Handbook Fundamentals, stack flow eq.: T_o replaces T_i when outdoors is
    # warmer [pub]; 0.65·sqrt(2·9.81·1.5·10/298.15) by hand [calc]
    expected = 0.65 * math.sqrt(2 * 9.81 * 1.5 * 10.0 / 298.15)
    assert stack_flow(1.0, 1.5, 15.0, 25.0, 0.65) == pytest.approx(expected, rel=1e-12)


def test_discharge_coefficient_two_way_example() -> None:
    # ASHRAE Handbook Fundamentals, same chapter, C_D = 0.40 + 0.0045·|ΔT| [pub]
    assert discharge_coefficient_two_way(25.0, 15.0) == pytest.approx(0.445, abs=1e-12)
    assert discharge_coefficient_two_way(15.0, 25.0) == pytest.approx(0.445, abs=1e-12)
    # same [pub]; ΔT 10 K -> Q 0.4421 m³/s with the other inputs as above [calc]
    coefficient = discharge_coefficient_two_way(25.0, 15.0)
    assert stack_flow(1.0, 1.5, 25.0, 15.0, coefficient) == pytest.approx(0.4421, abs=5e-5)


def test_stack_flow_ip_shortcut_example() -> None:
    # Older ASHRAE Fundamentals, Q = 9.4·A·sqrt(h·Δt), 65 % effectiveness [mem];
    # 10 ft², 20 ft, 10 °F -> 1329 cfm [calc]
    assert stack_flow_ip(10.0, 20.0, 10.0) == pytest.approx(1329.0, abs=0.5)
    assert stack_flow_ip(10.0, 20.0, -10.0) == pytest.approx(1329.0, abs=0.5)


def test_stack_flow_ip_shortcut_agrees_with_the_si_formula() -> None:
    # The IP constant is the SI stack equation with C_D 0.65 and the neutral level
    # half-way up (ΔH_NPL = h/2) [mem]; agreement within 3 % at room temperature [calc]
    area = square_feet_to_square_metres(10.0)
    height_neutral_plane = 20.0 * 0.3048 / 2.0  # 1 ft = 0.3048 m exactly
    flow = stack_flow(area, height_neutral_plane, 24.0, 24.0 - 10.0 / 1.8, 0.65)
    assert cubic_metres_per_second_to_cfm(flow) == pytest.approx(
        stack_flow_ip(10.0, 20.0, 10.0), rel=0.03
    )


def test_stack_flow_takes_arrays() -> None:
    # Vectorised form equals the scalar form, element by element [calc]
    temps_indoor = np.array([25.0, 15.0, 20.0])
    flows = stack_flow(np.array([1.0, 1.0, 2.0]), 1.5, temps_indoor, 15.0, 0.65)
    assert isinstance(flows, np.ndarray)
    expected = [
        stack_flow(a, 1.5, t, 15.0, 0.65)
        for a, t in zip([1.0, 1.0, 2.0], temps_indoor, strict=True)
    ]
    np.testing.assert_allclose(flows, expected, rtol=1e-12)


def test_stack_flow_refuses_a_negative_area() -> None:
    # Input check (STYLE: errors carry the value and the fix) [practice]
    with pytest.raises(ValueError, match=r"area: got -1\.0"):
        stack_flow(-1.0, 1.5, 25.0, 15.0)
    with pytest.raises(ValueError, match="temp_indoor"):
        stack_flow(1.0, 1.5, -300.0, 15.0)


@PROPERTY
@given(area=areas, height=heights, temp_indoor=temperatures, temp_outdoor=temperatures)
def test_stack_flow_is_zero_without_area_or_difference(
    area: float, height: float, temp_indoor: float, temp_outdoor: float
) -> None:
    # Limits: Q -> 0 as A -> 0 or ΔT -> 0 (CHECKS property tests) [calc]
    assert stack_flow(0.0, height, temp_indoor, temp_outdoor) == 0.0
    assert stack_flow(area, height, temp_indoor, temp_indoor) == 0.0
    # Q is linear in A, so it vanishes with A [calc]
    assert stack_flow(area * 1e-6, height, temp_indoor, temp_outdoor) == pytest.approx(
        1e-6 * stack_flow(area, height, temp_indoor, temp_outdoor), rel=1e-9, abs=1e-300
    )


@PROPERTY
@given(area=areas, height=heights, temp=temperatures, delta=st.floats(1e-9, 1e-3))
def test_stack_flow_vanishes_with_the_temperature_difference(
    area: float, height: float, temp: float, delta: float
) -> None:
    # Q <= C_D·A·sqrt(2·g·ΔH·ΔT/T_warm) with T_warm > 243 K: goes to 0 with ΔT [calc]
    bound = 0.65 * area * math.sqrt(2 * 9.81 * height * delta / 243.0)
    assert stack_flow(area, height, temp + delta, temp) <= bound * (1 + 1e-9)


@PROPERTY
@given(
    area=areas,
    height=heights,
    factor=st.floats(0.01, 100.0),
    temp_indoor=temperatures,
    temp_outdoor=temperatures,
)
def test_stack_flow_grows_with_the_root_of_the_height(
    area: float, height: float, factor: float, temp_indoor: float, temp_outdoor: float
) -> None:
    # Q ∝ sqrt(ΔH_NPL) (CHECKS property tests) [calc]
    base = stack_flow(area, height, temp_indoor, temp_outdoor)
    scaled = stack_flow(area, height * factor, temp_indoor, temp_outdoor)
    assert scaled == pytest.approx(math.sqrt(factor) * base, rel=1e-9, abs=1e-12)


@PROPERTY
@given(area=areas, height=heights, temp_indoor=temperatures, temp_outdoor=temperatures)
def test_stack_flow_is_symmetric_in_the_sign_of_the_difference(
    area: float, height: float, temp_indoor: float, temp_outdoor: float
) -> None:
    # Symmetric in the sign of ΔT (CHECKS property tests) [calc]
    assert stack_flow(area, height, temp_indoor, temp_outdoor) == stack_flow(
        area, height, temp_outdoor, temp_indoor
    )


# ----------------------------------------------------------------------------------------
# Effective areas
# ----------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("areas_in_series", "expected"),
    [
        ((1.0, 1.0), 0.70711),  # 1/A² = Σ 1/A_i², by hand [calc]
        ((1.0, 2.0), 0.89443),  # same [calc]
        ((0.5, 0.5, 1.0), 0.33333),  # same [calc]
    ],
)
def test_effective_area_series_examples(
    areas_in_series: tuple[float, ...], expected: float
) -> None:
    assert effective_area_series(areas_in_series) == pytest.approx(expected, abs=5e-6)


def test_effective_area_series_equal_inlet_and_outlet() -> None:
    # MIL-HDBK-1011/2 App. C: equal inlet and outlet, A_i = 1.41·A [pub]; 1.41/sqrt(2)
    # = 0.997, so within 0.5 % [calc]
    assert effective_area_series([1.41, 1.41]) == pytest.approx(1.0, rel=5e-3)


def test_effective_area_series_is_zero_when_an_opening_is_closed() -> None:
    # Zero area -> 0, the limit of 1/A² -> ∞ [calc]
    assert effective_area_series([0.0, 1.0]) == 0.0
    result = effective_area_series([np.array([0.0, 1.0]), 1.0])
    np.testing.assert_allclose(result, [0.0, 1.0 / math.sqrt(2.0)], rtol=1e-12)


def test_effective_area_parallel_adds() -> None:
    # In parallel the areas add (CHECKS, openings in series/parallel) [calc]
    assert effective_area_parallel([0.5, 0.25, 1.0]) == pytest.approx(1.75, abs=1e-12)


def test_effective_area_refuses_empty_and_negative() -> None:
    # Input check [practice]
    with pytest.raises(ValueError, match="empty"):
        effective_area_series([])
    with pytest.raises(ValueError, match=r"areas: got -0\.5"):
        effective_area_parallel([1.0, -0.5])


@PROPERTY
@given(st.lists(areas, min_size=1, max_size=6))
def test_series_area_is_at_most_the_smallest_area(areas_in_series: list[float]) -> None:
    # Series area <= smallest area (CHECKS property tests); >= smallest/sqrt(n) [calc]
    result = effective_area_series(areas_in_series)
    smallest = min(areas_in_series)
    assert result <= smallest * (1 + 1e-12)
    assert result >= smallest / math.sqrt(len(areas_in_series)) * (1 - 1e-12)
    # parallel area >= largest area [calc]
    assert effective_area_parallel(areas_in_series) >= max(areas_in_series)


# ----------------------------------------------------------------------------------------
# Wind and combined flow
# ----------------------------------------------------------------------------------------


def test_wind_flow_example() -> None:
    # ASHRAE Fundamentals, Q = C_v·A·U [pub]; C_v 0.5, 1 m², 3 m/s -> 1.5 m³/s [calc]
    assert wind_flow(1.0, 3.0, 0.5) == pytest.approx(1.5, abs=1e-12)


def test_wind_flow_pressure_coefficients_example() -> None:
    # BS 5925:1991, Q = C_d·A_w·U·sqrt(ΔC_p) [mem]; C_d 0.61, A_w 0.70711, U 3,
    # ΔC_p 1.0 -> 1.2940 m³/s [calc]
    assert wind_flow_pressure_coefficients(0.70711, 3.0, 1.0, 0.61) == pytest.approx(
        1.2940, abs=5e-5
    )
    # sign of ΔC_p sets only the direction [calc]; the default C_d is the sharp-edged
    # opening's 0.61 (BS 5925:1991, CIBSE AM10) [mem]
    assert wind_flow_pressure_coefficients(0.70711, 3.0, -1.0) == pytest.approx(1.2940, abs=5e-5)


def test_combined_flow_example() -> None:
    # ASHRAE: flow ∝ sqrt(sum of heads) [pub]; root-sum-square [mem];
    # 0.6458 and 1.5 -> 1.6331 m³/s [calc]
    assert combined_flow(0.6458, 1.5) == pytest.approx(1.6331, abs=5e-5)


@PROPERTY
@given(
    flow_stack=st.floats(0.0, 100.0),
    flow_wind=st.floats(0.0, 100.0),
)
def test_combined_flow_lies_between_the_larger_and_the_sum(
    flow_stack: float, flow_wind: float
) -> None:
    # root-sum-square lies between max and sum [calc]
    result = combined_flow(flow_stack, flow_wind)
    assert max(flow_stack, flow_wind) <= result <= (flow_stack + flow_wind) * (1 + 1e-12)


@pytest.mark.parametrize(
    ("terrain", "expected"),
    [
        # ASHRAE Fundamentals ch. 24 Table 1 [mem]; ratio at 10 m from a 10 m open-terrain
        # met station, evaluated by hand [calc]
        ("city", 0.4484),
        ("suburban", 0.7168),
        ("open", 1.0000),
        ("water", 1.1700),
    ],
)
def test_wind_speed_ratio_at_ten_metres(terrain: str, expected: float) -> None:
    assert wind_speed_at_height(1.0, 10.0, terrain) == pytest.approx(expected, abs=5e-5)
    assert wind_speed_at_height(1.0, 10.0, Terrain(terrain)) == pytest.approx(expected, abs=5e-5)


def test_terrain_table() -> None:
    # ASHRAE Fundamentals ch. 24 Table 1: a and δ [mem]
    table = {member.value: (member.exponent, member.boundary_layer_thickness) for member in Terrain}
    assert table == {
        "city": (0.33, 460.0),
        "suburban": (0.22, 370.0),
        "open": (0.14, 270.0),
        "water": (0.10, 210.0),
    }


def test_wind_speed_at_height_refuses_an_unknown_terrain() -> None:
    # Input check [practice]
    with pytest.raises(ValueError, match="terrain: got 'forest'"):
        wind_speed_at_height(5.0, 10.0, "forest")


# ----------------------------------------------------------------------------------------
# Heat carried by ventilation air
# ----------------------------------------------------------------------------------------


def test_sensible_heat_flow_example() -> None:
    # Handbook form q = ρ·c_p·V̇·ΔT [pub]; 0.6458 m³/s, 10 K, 1.2, 1005 -> 7788 W [calc]
    assert sensible_heat_flow(0.6458, 10.0) == pytest.approx(7788.0, abs=0.5)


def test_sensible_heat_flow_worked_example() -> None:
    # Engineering handbook worked example [pub]: 10 000 m³/h at 0 °C into a room at
    # 20 °C, c_p 1.005 kJ/(kg·K), ρ 1.202 kg/m³ -> 67 kW (67.112 kW unrounded)
    heat_flow = sensible_heat_flow(10_000.0 / 3600.0, 20.0, density=1.202, specific_heat=1005.0)
    assert heat_flow == pytest.approx(67_112.0, abs=1.0)


def test_ip_rule_of_thumb() -> None:
    # q[Btu/h] = 1.08·cfm·Δt[°F], 1.08 = 60·0.075·0.24 [practice]; [calc]
    constant = 60 * 0.075 * 0.24  # min/h · lb/ft³ · Btu/(lb·°F)
    assert constant == pytest.approx(1.08, abs=1e-12)
    # 1000 cfm, 10 °F -> 10 800 Btu/h [practice], here from the SI formula with
    # 0.075 lb/ft³ and 0.24 Btu/(lb·°F) converted exactly (1 lb = 0.45359237 kg,
    # 1 Btu/(lb·°F) = 4186.8 J/(kg·K)) [calc]
    density = 0.075 * 0.45359237 / 0.3048**3
    specific_heat = 0.24 * 4186.8
    heat_flow = sensible_heat_flow(
        cfm_to_cubic_metres_per_second(1000.0), 10.0 / 1.8, density, specific_heat
    )
    assert watts_to_btu_per_hour(heat_flow) == pytest.approx(10_800.0, rel=1e-3)
    # 1.10 for moist air, ASHRAE Fundamentals ch. 18 [mem]: c_p = 0.240 + 0.444·W with
    # W ≈ 0.01 (ASHRAE ch. 1 IP enthalpy eq.) [calc]
    constant_moist = 60 * 0.075 * (0.240 + 0.444 * 0.01)
    assert constant_moist == pytest.approx(1.10, abs=0.005)


def test_si_rule_of_thumb() -> None:
    # q[W] = 1.23·Q[L/s]·ΔT[K], ASHRAE Fundamentals ch. 18 [mem]: 100 L/s, 5 K -> 615 W.
    # 1.23 is ρ·c_p of standard moist air: ρ at 20 °C, c_p = 1006 + 1860·W with W ≈ 0.01
    # (ASHRAE 2017 ch. 1 eq. 30) [calc]; within 1 %
    heat_flow = sensible_heat_flow(0.100, 5.0, air_density(20.0), 1006.0 + 1860.0 * 0.01)
    assert heat_flow == pytest.approx(615.0, rel=0.01)


def test_standard_pressure_at_altitude() -> None:
    # ASHRAE Fundamentals ch. 1 eq. 3 via psychrolib [lib]: 1500 m -> 84 555.9 Pa,
    # factor 0.8345
    assert standard_atmospheric_pressure(1500.0) == pytest.approx(84_555.9, abs=0.1)
    assert standard_atmospheric_pressure(1500.0) == pytest.approx(
        psychrolib.GetStandardAtmPressure(1500.0), rel=1e-12
    )
    assert standard_atmospheric_pressure(1500.0) / 101_325.0 == pytest.approx(0.8345, abs=5e-5)
    assert standard_atmospheric_pressure(0.0) == pytest.approx(101_325.0, abs=1e-9)


def test_heat_flow_scales_with_pressure_at_altitude() -> None:
    # CHECKS "altitude": scale by p/p₀ (ideal gas, ASHRAE 2017 ch. 1) [lib]; [calc]
    pressure = standard_atmospheric_pressure(1500.0)
    ratio = air_density(20.0, pressure) / air_density(20.0)
    assert ratio == pytest.approx(0.8345, abs=5e-5)
    at_altitude = sensible_heat_flow(0.6458, 10.0, density=1.2 * ratio)
    assert at_altitude == pytest.approx(7788.0 * 0.8345, rel=2e-4)


@PROPERTY
@given(temp=st.floats(-40.0, 60.0), pressure=st.floats(50_000.0, 110_000.0))
def test_air_density_matches_psychrolib(temp: float, pressure: float) -> None:
    # psychrolib GetDryAirDensity, ASHRAE Fundamentals 2017 ch. 1 [lib]
    assert air_density(temp, pressure) == pytest.approx(
        psychrolib.GetDryAirDensity(temp, pressure), rel=1e-12
    )


# ----------------------------------------------------------------------------------------
# Units
# ----------------------------------------------------------------------------------------


def test_unit_helpers() -> None:
    # International yard and pound agreement (1959): 1 ft = 0.3048 m exactly [pub];
    # International Table Btu = 1055.05585262 J [pub]; ton of refrigeration =
    # 12 000 Btu/h = 3516.85 W [practice]; values by hand [calc]
    assert cfm_to_cubic_metres_per_second(1000.0) == pytest.approx(0.4719474432, rel=1e-12)
    assert cubic_metres_per_second_to_cfm(0.4719474432) == pytest.approx(1000.0, rel=1e-12)
    assert watts_to_btu_per_hour(1.0) == pytest.approx(3.412141633, rel=1e-9)
    assert btu_per_hour_to_watts(3.412141633) == pytest.approx(1.0, rel=1e-9)
    assert tons_to_watts(1.0) == pytest.approx(3516.85, abs=0.01)
    assert watts_to_tons(3516.8528420667) == pytest.approx(1.0, rel=1e-10)
    assert square_feet_to_square_metres(1.0) == pytest.approx(0.09290304, rel=1e-12)
    assert square_metres_to_square_feet(0.09290304) == pytest.approx(1.0, rel=1e-12)


@PROPERTY
@given(st.floats(-1e6, 1e6))
def test_unit_helpers_round_trip(value: float) -> None:
    # Each pair is an exact inverse up to rounding [calc]
    assert cubic_metres_per_second_to_cfm(cfm_to_cubic_metres_per_second(value)) == pytest.approx(
        value, rel=1e-12, abs=1e-9
    )
    assert btu_per_hour_to_watts(watts_to_btu_per_hour(value)) == pytest.approx(
        value, rel=1e-12, abs=1e-9
    )
    assert watts_to_tons(tons_to_watts(value)) == pytest.approx(value, rel=1e-12, abs=1e-9)
    assert square_metres_to_square_feet(square_feet_to_square_metres(value)) == pytest.approx(
        value, rel=1e-12, abs=1e-9
    )
