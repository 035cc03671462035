"""The airflow and cooling estimate for known geometry, and the adaptive limits it reports.

Airflow rows of shared/CHECKS.md, each with its source: stack flow Q = C_D·A·√(2g·ΔH·ΔT/T)
(ASHRAE Handbook Fundamentals 1997 ch. 25 eq. 37, later ch. 16) [pub], value [calc];
openings in series 1/A² = Σ 1/A_i² [calc] and MIL-HDBK-1011/2 App. C "equal inlet and
outlet: A_i = 1.41·A" [pub]; wind Q = C_v·A·U (ASHRAE Fundamentals) [pub]; combined
√(Q_s² + Q_w²) [mem]; sensible heat q = ρ·c_p·Q·ΔT [pub]; the IP stack shortcut
9.4·A·√(h·Δt) cfm (older ASHRAE Fundamentals) [mem]. Adaptive limits against
pythermalcomfort 4.8 [lib]: EN 16798-1:2019 (adaptive_en) and ASHRAE 55-2020
(adaptive_ashrae), with round_output=False.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pandas as pd
import pytest
from pythermalcomfort.models import adaptive_ashrae, adaptive_en

from ventsup.config.model import Opening
from ventsup.core.figures import (
    AirflowAssumptions,
    adaptive_limits,
    compute_figures,
    running_mean_from_daily_means,
    zone_airflow,
)
from ventsup.core.physics import stack_flow_ip
from ventsup.core.state import Mode

from .sites import BERLIN, decision, epoch, frame, make_site

NAN = np.array([np.nan])
ONE = np.array([1.0])


def opening(area: float, facing: float, level: str, height: float | None) -> Opening:
    return Opening(area=area, facing=facing, level=level, height=height)  # type: ignore[arg-type]


def pair(area_low: float, area_high: float, rise: float) -> dict[str, Opening]:
    """A low opening on the north facade and a high one on the south, ``rise`` metres apart."""
    return {
        "low": opening(area_low, 0.0, "low", 0.0),
        "high": opening(area_high, 180.0, "high", rise),
    }


def test_stack_through_two_levels_is_the_handbook_example() -> None:
    # 1 m² low and 1 m² high, 3 m apart: the neutral plane is half-way, ΔH_NPL 1.5 m;
    # C_D 0.65, 25/15 °C -> 0.6458 m³/s [pub] formula, [calc] value
    estimate = zone_airflow(
        pair(1.0, 1.0, 3.0), {"low": ONE, "high": ONE}, [25.0], [15.0], NAN, NAN
    )
    assert estimate.flow[0] == pytest.approx(0.6458, abs=5e-5)
    assert estimate.wind[0] == 0.0


@pytest.mark.parametrize(("low", "high", "series"), [(1.0, 1.0, 0.70711), (1.0, 2.0, 0.89443)])
def test_stack_uses_the_levels_in_series(low: float, high: float, series: float) -> None:
    # effective area of openings in series (1,1) -> 0.70711 m², (1,2) -> 0.89443 m² [calc];
    # the neutral plane lies where the two flows balance, h = H·A_high²/(A_low² + A_high²):
    # the low openings' flow over that height is the same flow [calc]
    rise, t_in, t_out = 3.0, 25.0, 15.0
    buoyancy = 2 * 9.81 * (t_in - t_out) / (t_in + 273.15)
    expected = 0.65 * series * math.sqrt(buoyancy * rise)
    neutral = rise * high**2 / (low**2 + high**2)
    assert expected == pytest.approx(0.65 * low * math.sqrt(buoyancy * neutral), rel=1e-4)
    estimate = zone_airflow(
        pair(low, high, rise), {"low": ONE, "high": ONE}, [t_in], [t_out], NAN, NAN
    )
    assert estimate.flow[0] == pytest.approx(expected, rel=1e-4)


def test_wind_through_equal_inlet_and_outlet() -> None:
    # inlet and outlet of 1.41421 m² each pass what one 1 m² opening would (MIL-HDBK-1011/2
    # App. C) [pub]; C_v 0.5 (perpendicular), 3 m/s -> 1.5 m³/s (ASHRAE Fundamentals) [pub]
    openings = {
        "north": opening(math.sqrt(2.0), 0.0, "low", 1.0),
        "south": opening(math.sqrt(2.0), 180.0, "low", 1.0),
    }
    estimate = zone_airflow(openings, {"north": ONE, "south": ONE}, [20.0], [20.0], [3.0], [0.0])
    assert estimate.wind[0] == pytest.approx(1.5, rel=1e-9)
    assert estimate.stack[0] == 0.0  # no temperature difference
    # diagonal wind (60° off the inlet): C_v 0.3 of the 0.25-0.35 range [pub]
    diagonal = zone_airflow(openings, {"north": ONE, "south": ONE}, [20.0], [20.0], [3.0], [60.0])
    assert diagonal.wind[0] == pytest.approx(0.9, rel=1e-9)
    # wind along the facades from one side only: no inlet in series with an outlet
    one_side = {"a": opening(1.0, 90.0, "low", 1.0), "b": opening(1.0, 90.0, "low", 1.0)}
    alone = zone_airflow(one_side, {"a": ONE, "b": ONE}, [20.0], [20.0], [3.0], [90.0])
    assert alone.wind[0] == 0.0


def test_wind_and_stack_combine_as_root_sum_square() -> None:
    # stack 0.6458 and wind 1.5 m³/s -> 1.6331 m³/s [mem]. Geometry: √2 m² low (north) and
    # high (south) 1.5 m apart, in series 1 m² over 1.5 m: the handbook's stack example;
    # wind 3 m/s from the north through the same pair in series: the C_v example
    openings = {
        "low": opening(math.sqrt(2.0), 0.0, "low", 0.0),
        "high": opening(math.sqrt(2.0), 180.0, "high", 1.5),
    }
    estimate = zone_airflow(openings, {"low": ONE, "high": ONE}, [25.0], [15.0], [3.0], [0.0])
    assert estimate.stack[0] == pytest.approx(0.6458, abs=5e-5)
    assert estimate.wind[0] == pytest.approx(1.5, rel=1e-9)
    assert estimate.flow[0] == pytest.approx(1.6331, abs=1e-4)


def test_the_ip_shortcut_agrees_within_two_percent() -> None:
    # 9.4·A·√(h·Δt): 10 ft², 20 ft, 10 °F -> 1329 cfm, with 65 % effectiveness and the
    # neutral plane half-way (older ASHRAE Fundamentals) [mem]; the same flow through
    # 10 ft² low and high openings 20 ft apart at room temperature (75/65 °F)
    ft, ft2 = 0.3048, 0.3048**2
    openings = pair(10 * ft2, 10 * ft2, 20 * ft)
    t_in, t_out = (75 - 32) / 1.8, (65 - 32) / 1.8
    # the shortcut takes the inlet area over half the height; two equal openings in
    # series (A/√2) over the full height give the same flow [calc]
    estimate = zone_airflow(openings, {"low": ONE, "high": ONE}, [t_in], [t_out], NAN, NAN)
    flow_cfm = estimate.flow[0] / (ft**3 / 60.0)
    assert stack_flow_ip(10.0, 20.0, 10.0) == pytest.approx(1329, abs=0.5)
    assert flow_cfm == pytest.approx(1329, rel=0.02)


def test_one_level_open_gives_two_way_flow() -> None:
    # C_D = 0.40 + 0.0045·|ΔT| (ASHRAE Fundamentals) [pub]; neutral plane at half the
    # opening's height, taken as √(area): our assumption, evaluated by hand [calc]
    openings = {"window": opening(1.44, 90.0, "low", 1.5)}
    estimate = zone_airflow(openings, {"window": np.array([0.5])}, [25.0], [15.0], NAN, NAN)
    coefficient = 0.40 + 0.0045 * 10.0
    expected = coefficient * 0.72 * math.sqrt(2 * 9.81 * 0.6 * 10.0 / 298.15)
    assert estimate.flow[0] == pytest.approx(expected, rel=1e-9)


def test_closed_released_and_unknown() -> None:
    openings = pair(1.0, 1.0, 3.0)
    targets = {"low": np.array([0.0, np.nan, 1.0, 1.0]), "high": np.array([0.0, 1.0, 1.0, 1.0])}
    t_in = np.array([np.nan, 25.0, np.nan, 25.0])
    estimate = zone_airflow(openings, targets, t_in, [15.0] * 4, [np.nan] * 4, [np.nan] * 4)
    assert estimate.flow[0] == 0.0  # closed carries no air, whatever the temperatures
    assert math.isnan(estimate.flow[1])  # released: position unknown
    assert math.isnan(estimate.flow[2])  # open, indoor temperature unknown
    assert estimate.flow[3] > 0.0
    # missing heights: no stack height between the levels, so two-way flow per opening
    flat = {"low": opening(1.0, 0.0, "low", None), "high": opening(1.0, 180.0, "high", None)}
    fallback = zone_airflow(flat, {"low": ONE, "high": ONE}, [25.0], [15.0], NAN, NAN)
    assert 0.0 < fallback.flow[0] < estimate.flow[3]


def test_cooling_delivered_by_an_hour_of_the_handbook_flow() -> None:
    # 0.6458 m³/s for an hour with outdoors 10 K cooler: q = 1.2·1005·0.6458·10 = 7788 W
    # [pub] handbook form, [calc] value; 7.788 kWh = 2.2145 ton-hours (12 000 Btu/h per ton)
    site = make_site(BERLIN, tick="10 min")
    start = epoch(BERLIN, 2027, 7, 1, 12)
    decisions = [
        decision(
            start + k * 600,
            mode=Mode.FREE_COOLING,
            targets={"low": 1.0, "high": 1.0},
            temp_indoor=25.0,
            temp_outdoor=15.0,
            occupied=True,
        )
        for k in range(6)
    ]
    figures = compute_figures(frame(site, decisions), site, start, start + 3600)
    hall = figures.totals.set_index("zone").loc["hall"]
    assert hall["open_hours"] == pytest.approx(1.0)
    assert hall["airflow_mean_m3s"] == pytest.approx(0.6458, abs=5e-5)
    assert hall["airflow_mean_cfm"] == pytest.approx(0.6458 / (0.3048**3 / 60), abs=0.2)
    assert hall["air_volume_m3"] == pytest.approx(0.6458 * 3600, abs=0.2)
    assert hall["cooling_kwh"] == pytest.approx(7.788, abs=1e-3)
    assert hall["cooling_ton_hours"] == pytest.approx(7.788 / 3.5168528, abs=1e-3)
    assert hall["heat_gain_kwh"] == 0.0
    assert hall["airflow_stack_only_hours"] == pytest.approx(1.0)  # no wind data


def test_heat_scales_with_air_density_at_altitude() -> None:
    # standard pressure at 1500 m is 84 555.9 Pa, a factor 0.8345 (ASHRAE Fundamentals
    # ch. 1 eq. 3 via psychrolib) [lib]
    site = make_site(BERLIN, tick="10 min", elevation="1500 m")
    start = epoch(BERLIN, 2027, 7, 1, 12)
    decisions = [
        decision(start + k * 600, mode=Mode.FREE_COOLING, targets={"low": 1.0, "high": 1.0},
                 temp_indoor=25.0, temp_outdoor=15.0)
        for k in range(6)
    ]  # fmt: skip
    figures = compute_figures(frame(site, decisions), site, start, start + 3600)
    cooling = figures.totals.set_index("zone").loc["hall", "cooling_kwh"]
    assert cooling == pytest.approx(7.788 * 84_555.9 / 101_325.0, abs=2e-3)


def test_assumptions_are_stated() -> None:
    text = " ".join(AirflowAssumptions().describe())
    for phrase in ("C_D 0.65", "0.40 + 0.0045", "C_v 0.5", "stack flow only", "1.2 kg/m³"):
        assert phrase in text


# --------------------------------------------------------------------------- comfort


RUNNING_MEANS = np.round(np.arange(10.0, 30.01, 0.25), 2)


def test_en16798_limits_match_pythermalcomfort() -> None:
    # EN 16798-1:2019 Annex B, category II: 0.33·θ_rm + 18.8 − 4 / + 3 K [pub];
    # pythermalcomfort.models.adaptive_en with round_output=False [lib]. Its lower limit
    # holds from 10 °C; ours (and EN 15251 Annex A.2, [mem]) from 15 °C, so compare there.
    lower, upper = adaptive_limits(RUNNING_MEANS, "en16798", category="II")
    reference = adaptive_en(
        tdb=25.0, tr=25.0, t_running_mean=RUNNING_MEANS, v=0.1, round_output=False
    )
    np.testing.assert_allclose(upper, reference.tmp_cmf_cat_ii_up, atol=1e-9)
    valid = RUNNING_MEANS >= 15.0
    np.testing.assert_allclose(
        lower[valid], np.asarray(reference.tmp_cmf_cat_ii_low)[valid], atol=1e-9
    )
    assert np.all(np.isnan(lower[~valid]))


def test_ashrae55_limits_match_pythermalcomfort() -> None:
    # ASHRAE 55-2020 §5.4: 0.31·t_pma + 17.8 ± 3.5 K for 80 % acceptability [pub];
    # pythermalcomfort.models.adaptive_ashrae, round_output=False [lib]
    running = RUNNING_MEANS[RUNNING_MEANS <= 30.0]
    lower, upper = adaptive_limits(running, "ashrae55", acceptability=80)
    reference = adaptive_ashrae(
        tdb=25.0, tr=25.0, t_running_mean=running, v=0.1, round_output=False
    )
    np.testing.assert_allclose(lower, reference.tmp_cmf_80_low, atol=1e-9)
    np.testing.assert_allclose(upper, reference.tmp_cmf_80_up, atol=1e-9)


def test_outside_the_validity_range_both_give_nan() -> None:
    # pythermalcomfort returns NaN outside 10-30 °C (EN) and 10-33.5 °C (ASHRAE) and warns [lib]
    for model, running in (
        ("en16798", 9.5),
        ("en16798", 30.5),
        ("ashrae55", 9.5),
        ("ashrae55", 34.0),
    ):
        lower, upper = adaptive_limits([running], model)  # type: ignore[arg-type]
        assert math.isnan(lower[0]) and math.isnan(upper[0])
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        outside = adaptive_en(tdb=25.0, tr=25.0, t_running_mean=9.5, v=0.1, round_output=False)
    assert math.isnan(outside.tmp_cmf_cat_ii_up)
    assert all(issubclass(w.category, UserWarning) for w in caught)


def test_rounded_library_output_needs_a_tolerance() -> None:
    # pythermalcomfort rounds to 0.1 K by default (round half to even): within 0.05 K [lib]
    lower, upper = adaptive_limits([17.3], "en16798")
    rounded = adaptive_en(tdb=25.0, tr=25.0, t_running_mean=17.3, v=0.1)
    assert upper[0] == pytest.approx(rounded.tmp_cmf_cat_ii_up, abs=0.05)
    assert lower[0] == pytest.approx(rounded.tmp_cmf_cat_ii_low, abs=0.05)


def test_running_mean_from_daily_means() -> None:
    # EN 16798-1:2019: θ_rm,n = 0.2·θ_ed,n-1 + 0.8·θ_rm,n-1; the seven-day formula
    # (θ_ed,-1 + 0.8 θ_ed,-2 + ... + 0.2 θ_ed,-7)/3.8 to start [pub, weights mem]
    means = pd.Series([10.0, 12.0, 14.0, 16.0, 18.0, 20.0, 22.0, 24.0, 26.0])
    running = running_mean_from_daily_means(means).to_numpy()
    assert np.all(np.isnan(running[:7]))  # seven days are needed first
    start = (22 + 0.8 * 20 + 0.6 * 18 + 0.5 * 16 + 0.4 * 14 + 0.3 * 12 + 0.2 * 10) / 3.8
    assert running[7] == pytest.approx(start, abs=1e-12)
    assert running[8] == pytest.approx(0.2 * 24.0 + 0.8 * start, abs=1e-12)


def test_a_missing_day_stops_the_running_mean_until_seven_days_are_known() -> None:
    # never filled: a day without a mean leaves the next day unknown, and the series
    # restarts with the seven-day formula once seven days in a row are known
    means = pd.Series([20.0] * 8 + [np.nan] + [21.0] * 8)
    running = running_mean_from_daily_means(means).to_numpy()
    assert running[8] == pytest.approx(20.0)  # from day 7's mean and running mean
    assert np.all(np.isnan(running[9:16]))
    assert running[16] == pytest.approx(21.0)
