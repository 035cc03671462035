"""Airflow through the simulator's openings, against published formulas and worked examples.

Sources are named beside each check (see ../shared/CHECKS.md, "Airflow through
openings" and "Heat carried by ventilation air").
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from simulator.openings import (
    SINGLE_SIDED_WIND_COEFFICIENT,
    OpeningModel,
    discharge_coefficient_two_way,
    free_area,
    move_toward,
    neutral_plane_height,
    stack_flow,
    ventilation_heat,
    wind_effectiveness,
    zone_airflow,
)
from ventsup.core import physics


def pair(
    low_area: float = 1.0,
    high_area: float = 1.0,
    low_facing: float = 0.0,
    high_facing: float = 180.0,
    coefficient: float = 0.65,
) -> list[OpeningModel]:
    """A low opening at 1 m and a high one at 4 m (3 m apart), on opposite façades."""
    return [
        OpeningModel("low", low_area, low_facing, "low", 1.0, discharge_coefficient=coefficient),
        OpeningModel(
            "high", high_area, high_facing, "high", 4.0, discharge_coefficient=coefficient
        ),
    ]


# ------------------------------------------------------------------------- stack


def test_stack_flow_handbook_example() -> None:
    # ASHRAE Fundamentals, "Ventilation and Infiltration" (1997 ch. 25 eq. 37):
    # C_D 0.65, A 1 m², ΔH_NPL 1.5 m, 25 / 15 °C -> 0.6458 m³/s [calc].
    # Two equal openings 3 m apart put the neutral plane 1.5 m above the low one.
    flow = zone_airflow(pair(), [1.0, 1.0], 25.0, 15.0, 0.0, 0.0)
    assert flow.stack == pytest.approx(0.6458, abs=5e-5)
    assert flow.wind == 0.0
    assert flow.total == pytest.approx(0.6458, abs=5e-5)


def test_stack_flow_uses_the_warmer_temperature_and_is_symmetric() -> None:
    # Same chapter: the warmer temperature goes in the denominator when outdoors is warmer.
    warm_inside = zone_airflow(pair(), [1.0, 1.0], 25.0, 15.0, 0.0, 0.0).stack
    warm_outside = zone_airflow(pair(), [1.0, 1.0], 15.0, 25.0, 0.0, 0.0).stack
    assert warm_outside == pytest.approx(warm_inside, rel=1e-12)


def test_neutral_plane_of_openings_in_series() -> None:
    # Continuity through two openings in series: A_l² h = A_h² (ΔH - h) [calc].
    assert neutral_plane_height(1.0, 1.0, 3.0) == 1.5
    assert neutral_plane_height(2.0, 1.0, 10.0) == pytest.approx(2.0)
    assert neutral_plane_height(1.0, 2.0, 10.0) == pytest.approx(8.0)


@pytest.mark.parametrize(
    ("low", "high", "effective"),
    # CHECKS.md "openings in series": (1,1) -> 0.70711, (1,2) -> 0.89443 m² [calc];
    # MIL-HDBK-1011/2 App. C: equal inlet and outlet, A_i = 1.41 A.
    [(1.0, 1.0, 0.70711), (1.0, 2.0, 0.89443), (2.0, 1.0, 0.89443)],
)
def test_stack_flow_equals_the_series_area_over_the_full_height(
    low: float, high: float, effective: float
) -> None:
    # The neutral-plane form with the low area equals the series effective area
    # over the whole height difference (BS 5925:1991, openings in series).
    flow = zone_airflow(pair(low, high), [1.0, 1.0], 25.0, 15.0, 0.0, 0.0).stack
    assert physics.effective_area_series([low, high]) == pytest.approx(effective, abs=5e-6)
    expected = physics.stack_flow(effective, 3.0, 25.0, 15.0, discharge_coefficient=0.65)
    assert flow == pytest.approx(expected, rel=1e-5)


def test_three_openings_in_series_example() -> None:
    # CHECKS.md: (0.5, 0.5, 1) in series -> 0.33333 m² [calc]; two low openings of
    # 0.5 m² in parallel make 1 m², which with a high 1 m² gives 0.70711 m².
    assert physics.effective_area_series([0.5, 0.5, 1.0]) == pytest.approx(0.33333, abs=5e-6)
    openings = [
        OpeningModel("a", 0.5, 0.0, "low", 1.0, discharge_coefficient=0.65),
        OpeningModel("b", 0.5, 180.0, "low", 1.0, discharge_coefficient=0.65),
        OpeningModel("c", 1.0, 0.0, "high", 4.0, discharge_coefficient=0.65),
    ]
    flow = zone_airflow(openings, [1.0, 1.0, 1.0], 25.0, 15.0, 0.0, 0.0).stack
    assert flow == pytest.approx(physics.stack_flow(0.70711, 3.0, 25.0, 15.0, 0.65), rel=1e-5)


def test_single_opening_two_way_flow() -> None:
    # ASHRAE Fundamentals (same chapter): one opening carries flow both ways with
    # C_D = 0.40 + 0.0045 |ΔT|: ΔT 10 K -> 0.445; with A 1 m² and ΔH_NPL 1.5 m
    # -> 0.4421 m³/s [calc]. The neutral plane sits at mid-height of the
    # opening, so an opening 3 m tall has ΔH_NPL 1.5 m.
    assert discharge_coefficient_two_way(25.0, 15.0) == pytest.approx(0.445)
    window = OpeningModel("w", 1.0, 90.0, "low", 1.5, opening_height=3.0)
    flow = zone_airflow([window], [1.0], 25.0, 15.0, 0.0, 0.0)
    assert flow.stack == pytest.approx(0.4421, abs=5e-5)


def test_only_one_level_open_is_single_sided() -> None:
    # With the high opening closed, each open low opening exchanges air both ways.
    openings = pair()
    openings[0] = OpeningModel("low", 1.0, 0.0, "low", 1.0, opening_height=3.0)
    flow = zone_airflow(openings, [1.0, 0.0], 25.0, 15.0, 0.0, 0.0)
    assert flow.stack == pytest.approx(0.4421, abs=5e-5)


@given(
    area=st.floats(0.0, 20.0),
    height=st.floats(0.0, 30.0),
    indoor=st.floats(-20.0, 45.0),
    outdoor=st.floats(-30.0, 45.0),
    coefficient=st.floats(0.3, 0.9),
)
def test_stack_kernel_equals_the_shared_physics(
    area: float, height: float, indoor: float, outdoor: float, coefficient: float
) -> None:
    # The per-step float kernel restates ventsup.core.physics.stack_flow (one shared formula).
    expected = physics.stack_flow(area, height, indoor, outdoor, coefficient)
    assert stack_flow(area, height, indoor, outdoor, coefficient) == pytest.approx(
        expected, rel=1e-12, abs=1e-15
    )
    assert discharge_coefficient_two_way(indoor, outdoor) == pytest.approx(
        physics.discharge_coefficient_two_way(indoor, outdoor), rel=1e-12
    )


@given(
    fraction=st.floats(0.0, 1.0),
    indoor=st.floats(5.0, 40.0),
    difference=st.floats(0.0, 15.0),
)
def test_stack_flow_limits(fraction: float, indoor: float, difference: float) -> None:
    # CHECKS.md "limits": Q -> 0 as A -> 0 or ΔT -> 0; Q grows with the opening.
    flow = zone_airflow(pair(), [fraction, fraction], indoor, indoor - difference, 0.0, 0.0)
    if fraction == 0.0 or difference == 0.0:
        assert flow.stack == 0.0
    more = zone_airflow(
        pair(), [min(1.0, fraction + 0.1)] * 2, indoor, indoor - difference, 0.0, 0.0
    )
    assert more.stack >= flow.stack


def test_stack_flow_grows_with_the_square_root_of_height() -> None:
    # Q ∝ √ΔH (same handbook equation).
    def flow(top: float) -> float:
        openings = [
            OpeningModel("l", 1.0, 0.0, "low", 1.0),
            OpeningModel("h", 1.0, 180.0, "high", top),
        ]
        return zone_airflow(openings, [1.0, 1.0], 25.0, 15.0, 0.0, 0.0).stack

    assert flow(13.0) / flow(4.0) == pytest.approx(math.sqrt(12.0 / 3.0), rel=1e-12)


# ------------------------------------------------------------------------- wind


def test_wind_flow_handbook_example_and_combination() -> None:
    # ASHRAE Fundamentals: Q = C_v A U with C_v 0.5 (perpendicular), A 1 m², 3 m/s
    # -> 1.5 m³/s; combined with the stack flow 0.6458 as root-sum-square -> 1.6331.
    # Equal inlet (north, windward) and outlet (south) of 1 m² each.
    flow = zone_airflow(pair(), [1.0, 1.0], 25.0, 15.0, 3.0, 0.0)
    assert flow.wind == pytest.approx(1.5, rel=1e-9)
    assert flow.total == pytest.approx(1.6331, abs=5e-5)
    assert flow.total == pytest.approx(physics.combined_flow(flow.stack, flow.wind), rel=1e-12)


def test_wind_flow_matches_the_shared_function() -> None:
    flow = zone_airflow(pair(), [1.0, 1.0], 20.0, 20.0, 3.0, 0.0)
    assert flow.wind == pytest.approx(physics.wind_flow(1.0, 3.0, effectiveness=0.5), rel=1e-12)


@pytest.mark.parametrize(
    ("angle", "expected"),
    # ASHRAE Fundamentals: C_v 0.5-0.6 perpendicular, 0.25-0.35 diagonal [pub];
    # the simulator takes 0.5 and 0.3 and 0 along the façade [practice].
    [(0.0, 0.5), (45.0, 0.3), (90.0, 0.0), (135.0, 0.0), (22.5, 0.4)],
)
def test_wind_effectiveness_by_angle(angle: float, expected: float) -> None:
    assert wind_effectiveness(angle) == pytest.approx(expected)


def test_wind_direction_decides_windward_and_leeward() -> None:
    openings = pair()
    # Wind from the south: the high south opening is the inlet, the same flow.
    assert zone_airflow(openings, [1.0, 1.0], 20.0, 20.0, 3.0, 180.0).wind == pytest.approx(1.5)
    # Diagonal wind (45° off both normals would need a corner; here 45° off north).
    assert zone_airflow(openings, [1.0, 1.0], 20.0, 20.0, 3.0, 45.0).wind == pytest.approx(0.9)
    # Wind along both façades: no cross flow, only the single-sided share.
    along = zone_airflow(openings, [1.0, 1.0], 20.0, 20.0, 3.0, 90.0).wind
    assert along == pytest.approx(SINGLE_SIDED_WIND_COEFFICIENT * 2.0 * 3.0)


def test_larger_outlet_raises_wind_flow_up_to_root_two() -> None:
    # A much larger outlet approaches √2 times the equal-area flow; equal areas give
    # the handbook's inlet area (MIL-HDBK-1011/2 App. C, A_i = 1.41 A).
    equal = zone_airflow(pair(1.0, 1.0), [1.0, 1.0], 20.0, 20.0, 3.0, 0.0).wind
    large = zone_airflow(pair(1.0, 100.0), [1.0, 1.0], 20.0, 20.0, 3.0, 0.0).wind
    assert equal < large < math.sqrt(2.0) * equal
    assert large == pytest.approx(math.sqrt(2.0) * equal, rel=1e-3)


def test_single_sided_wind() -> None:
    # BS 5925:1991 / CIBSE AM10: single-sided ventilation by wind, Q = 0.025 A U [mem].
    window = OpeningModel("w", 2.0, 90.0, "low", 1.5)
    flow = zone_airflow([window], [0.5], 20.0, 20.0, 4.0, 90.0)
    assert flow.wind == pytest.approx(0.025 * 1.0 * 4.0)


def test_closed_openings_pass_no_air() -> None:
    assert zone_airflow(pair(), [0.0, 0.0], 25.0, 15.0, 8.0, 0.0) == (0.0, 0.0, 0.0)


# ------------------------------------------------------------------------- heat


def test_ventilation_heat_si() -> None:
    # Handbook form q = ρ c_p V̇ ΔT: 0.6458 m³/s, 10 K, ρ 1.2, c_p 1005 -> 7788 W [calc].
    assert ventilation_heat(0.6458, 25.0, 15.0) == pytest.approx(7788.3, abs=0.5)


def test_ventilation_heat_worked_example() -> None:
    # Engineering handbook worked example: 10 000 m³/h of air at 0 °C into a room at
    # 20 °C (c_p 1.005 kJ/(kg·K), ρ 1.202 kg/m³) -> 67 kW (67.112 unrounded).
    heat = ventilation_heat(10_000.0 / 3600.0, 20.0, 0.0, density=1.202)
    assert heat / 1000.0 == pytest.approx(67.112, abs=5e-4)


def test_ventilation_heat_ip_rule_of_thumb() -> None:
    # Common practice: q [Btu/h] = 1.08 cfm Δt[°F], 1.08 = 60 min/h x 0.075 lb/ft³ x
    # 0.24 Btu/(lb·°F): 1000 cfm, 10 °F -> 10 800 Btu/h. The simulator's SI form at the
    # same density (0.075 lb/ft³ = 1.2014 kg/m³) and c_p 1005 J/(kg·K) (vs 0.24
    # Btu/(lb·°F) = 1004.8) agrees within 0.1 %.
    flow = physics.cfm_to_cubic_metres_per_second(1000.0)
    density = 0.075 * 0.45359237 / 0.3048**3
    heat = ventilation_heat(flow, 10.0 * 5.0 / 9.0, 0.0, density=density)
    assert physics.watts_to_btu_per_hour(heat) == pytest.approx(10_800.0, rel=1e-3)


def test_ventilation_heat_si_rule_of_thumb() -> None:
    # ASHRAE Fundamentals ch. 18: q [W] = 1.23 Q[L/s] ΔT [mem]: 100 L/s, 5 K -> 615 W.
    assert ventilation_heat(0.1, 25.0, 20.0, density=1.2) == pytest.approx(615.0, rel=0.02)


def test_ventilation_heat_sign_follows_the_temperatures() -> None:
    assert ventilation_heat(1.0, 20.0, 25.0) < 0.0 < ventilation_heat(1.0, 25.0, 20.0)


# ------------------------------------------------------------------------- actuators


def test_free_area_is_linear_in_the_stroke() -> None:
    assert free_area(0.0, 3.2) == 0.0
    assert free_area(0.5, 3.2) == pytest.approx(1.6)
    assert free_area(1.0, 3.2) == 3.2
    assert free_area(1.5, 3.2) == 3.2


def test_actuator_travel_time() -> None:
    # A 60 s full stroke: 10 s steps from closed to open take six steps.
    position, trace = 0.0, []
    for _ in range(8):
        position = move_toward(position, 1.0, 10.0, 60.0)
        trace.append(round(position, 6))
    assert trace == [0.166667, 0.333333, 0.5, 0.666667, 0.833333, 1.0, 1.0, 1.0]
    assert move_toward(1.0, 0.3, 30.0, 60.0) == pytest.approx(0.5)
    assert move_toward(0.4, 0.3, 600.0, 60.0) == pytest.approx(0.3)
