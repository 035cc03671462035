"""Adaptive comfort limits, the running mean and the CIBSE TM52 criteria.

Cross-checked against pythermalcomfort 4.8 (a test reference only). Tags as in
shared/CHECKS.md: [pub], [lib], [calc], [mem], [practice].
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from pythermalcomfort.environment import running_mean_outdoor_temperature as ptc_running_mean
from pythermalcomfort.models import adaptive_ashrae, adaptive_en

from ventsup.core.comfort import (
    Category,
    OverheatingAssessment,
    ashrae55_comfort_limits,
    ashrae55_comfort_temperature,
    elevated_air_speed_allowance,
    en16798_comfort_limits,
    en16798_comfort_temperature,
    running_mean_outdoor_temperature,
    running_mean_outdoor_temperature_next,
    running_mean_outdoor_temperature_seven_days,
    tm52_delta_temperature,
    tm52_max_temperature,
    tm52_overheating,
)

PROPERTY = settings()


# ----------------------------------------------------------------------------------------
# ASHRAE 55 adaptive model
# ----------------------------------------------------------------------------------------


def test_ashrae55_comfort_temperature_and_bands() -> None:
    # ASHRAE 55-2020 §5.4: t_cmf = 0.31·t_pma + 17.8, ±3.5 K (80 %), ±2.5 K (90 %) [pub];
    # values at 20 °C by hand [calc]
    assert ashrae55_comfort_temperature(20.0) == pytest.approx(24.0, abs=1e-12)
    assert ashrae55_comfort_limits(20.0, 80) == pytest.approx((20.5, 27.5), abs=1e-12)
    assert ashrae55_comfort_limits(20.0, 90) == pytest.approx((21.5, 26.5), abs=1e-12)


@pytest.mark.parametrize(
    ("temp_running_mean", "valid"),
    # ASHRAE 55-2020 §5.4: valid for 10 <= t_pma <= 33.5 °C [pub]
    [(9.99, False), (10.0, True), (20.0, True), (33.5, True), (33.51, False)],
)
def test_ashrae55_validity_range_gives_nan(temp_running_mean: float, valid: bool) -> None:
    comfort = ashrae55_comfort_temperature(temp_running_mean)
    lower, upper = ashrae55_comfort_limits(temp_running_mean)
    assert math.isnan(comfort) is not valid
    assert math.isnan(lower) is not valid
    assert math.isnan(upper) is not valid
    # outside the range the line is still there when asked for [calc]
    assert ashrae55_comfort_temperature(
        temp_running_mean, nan_outside_validity=False
    ) == pytest.approx(0.31 * temp_running_mean + 17.8, abs=1e-12)


def test_ashrae55_limits_take_arrays() -> None:
    # Vectorised, NaN only where out of range [calc]
    lower, upper = ashrae55_comfort_limits(np.array([5.0, 20.0, 30.0]), 90)
    np.testing.assert_allclose(lower, [np.nan, 21.5, 24.6], atol=1e-12)
    np.testing.assert_allclose(upper, [np.nan, 26.5, 29.6], atol=1e-12)


def test_ashrae55_refuses_an_unknown_band() -> None:
    # Input check [practice]
    with pytest.raises(ValueError, match="expected 80 or 90"):
        ashrae55_comfort_limits(20.0, 85)  # type: ignore[call-overload]


@pytest.mark.parametrize(
    ("air_speed", "temp_operative", "expected"),
    [
        # ASHRAE 55 §5.4, air-speed table: at t_op >= 25 °C the upper limit rises 1.2 / 1.8 /
        # 2.2 K at 0.6 / 0.9 / 1.2 m/s [pub]
        (0.6, 25.0, 1.2),
        (0.9, 28.0, 1.8),
        (1.2, 30.0, 2.2),
        (2.0, 30.0, 2.2),
        # below 0.6 m/s or below 25 °C no allowance [pub]; steps between the table
        # speeds as pythermalcomfort takes them [lib]
        (0.59, 30.0, 0.0),
        (1.0, 24.9, 0.0),
        (1.1, 26.0, 1.8),
    ],
)
def test_elevated_air_speed_allowance(
    air_speed: float, temp_operative: float, expected: float
) -> None:
    assert elevated_air_speed_allowance(air_speed, temp_operative) == pytest.approx(
        expected, abs=1e-12
    )


@PROPERTY
@given(
    temp_running_mean=st.floats(10.0, 33.5),
    temp_operative=st.floats(10.0, 40.0),
    air_speed=st.floats(0.0, 2.0),
)
def test_ashrae55_matches_pythermalcomfort(
    temp_running_mean: float, temp_operative: float, air_speed: float
) -> None:
    # At exactly 25 °C pythermalcomfort 4.8 is not consistent with itself: its
    # ASHRAE function adds the air-speed allowance there, its EN function does
    # so or not depending on the running mean. The table's edge is checked in
    # test_elevated_air_speed_allowance; the cross-check keeps off the edge.
    assume(temp_operative != 25.0)
    # pythermalcomfort.models.adaptive_ashrae, round_output=False [lib]; with
    # tdb = tr the operative temperature is tdb
    reference = adaptive_ashrae(
        tdb=temp_operative,
        tr=temp_operative,
        t_running_mean=temp_running_mean,
        v=air_speed,
        round_output=False,
    )
    allowance = elevated_air_speed_allowance(air_speed, temp_operative)
    lower_80, upper_80 = ashrae55_comfort_limits(temp_running_mean, 80)
    lower_90, upper_90 = ashrae55_comfort_limits(temp_running_mean, 90)
    assert ashrae55_comfort_temperature(temp_running_mean) == pytest.approx(
        float(reference.tmp_cmf), abs=1e-9
    )
    assert lower_80 == pytest.approx(float(reference.tmp_cmf_80_low), abs=1e-9)
    assert lower_90 == pytest.approx(float(reference.tmp_cmf_90_low), abs=1e-9)
    assert upper_80 + allowance == pytest.approx(float(reference.tmp_cmf_80_up), abs=1e-9)
    assert upper_90 + allowance == pytest.approx(float(reference.tmp_cmf_90_up), abs=1e-9)


@pytest.mark.parametrize("temp_running_mean", [-5.0, 9.9, 33.6, 40.0])
def test_ashrae55_nan_outside_validity_like_pythermalcomfort(temp_running_mean: float) -> None:
    # pythermalcomfort returns NaN (and warns) outside 10-33.5 °C [lib]
    with pytest.warns(UserWarning, match="applicability limits"):
        reference = adaptive_ashrae(
            tdb=25.0, tr=25.0, t_running_mean=temp_running_mean, v=0.1, round_output=False
        )
    assert math.isnan(float(reference.tmp_cmf))
    assert math.isnan(ashrae55_comfort_temperature(temp_running_mean))


# ----------------------------------------------------------------------------------------
# EN 16798-1 adaptive model
# ----------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("category", "expected"),
    # EN 16798-1:2019: θ_c = 0.33·θ_rm + 18.8; upper +2/+3/+4 K, lower -3/-4/-5 K for
    # categories I/II/III [pub]; at θ_rm 20 °C by hand [calc]
    [("I", (22.4, 27.4)), ("II", (21.4, 28.4)), ("III", (20.4, 29.4))],
)
def test_en16798_limits_by_category(category: Category, expected: tuple[float, float]) -> None:
    assert en16798_comfort_temperature(20.0) == pytest.approx(25.4, abs=1e-12)
    assert en16798_comfort_limits(20.0, category) == pytest.approx(expected, abs=1e-12)


def test_en16798_validity_ranges() -> None:
    # Upper limits for 10-30 °C, lower limits for 15-30 °C of running mean
    # (EN 16798-1 Annex B / EN 15251 Annex A.2) [mem]
    lower, upper = en16798_comfort_limits(12.0)
    assert math.isnan(lower)
    assert upper == pytest.approx(0.33 * 12.0 + 21.8, abs=1e-12)
    lower, upper = en16798_comfort_limits(31.0)
    assert math.isnan(lower)
    assert math.isnan(upper)
    assert math.isnan(en16798_comfort_temperature(9.0))
    lower, upper = en16798_comfort_limits(12.0, nan_outside_validity=False)
    assert lower == pytest.approx(0.33 * 12.0 + 14.8, abs=1e-12)


def test_en16798_refuses_an_unknown_category() -> None:
    # Input check [practice]
    with pytest.raises(ValueError, match="category: got 'IV'"):
        en16798_comfort_limits(20.0, "IV")  # type: ignore[call-overload]


@PROPERTY
@given(
    temp_running_mean=st.floats(10.0, 30.0),
    temp_operative=st.floats(10.0, 40.0),
    air_speed=st.floats(0.0, 2.0),
)
def test_en16798_matches_pythermalcomfort(
    temp_running_mean: float, temp_operative: float, air_speed: float
) -> None:
    # At exactly 25 °C pythermalcomfort 4.8 is not consistent with itself: its
    # ASHRAE function adds the air-speed allowance there, its EN function does
    # so or not depending on the running mean. The table's edge is checked in
    # test_elevated_air_speed_allowance; the cross-check keeps off the edge.
    assume(temp_operative != 25.0)
    # pythermalcomfort.models.adaptive_en, round_output=False [lib]; the same
    # air-speed allowance on the upper limits [lib]
    reference = adaptive_en(
        tdb=temp_operative,
        tr=temp_operative,
        t_running_mean=temp_running_mean,
        v=air_speed,
        round_output=False,
    )
    allowance = elevated_air_speed_allowance(air_speed, temp_operative)
    assert en16798_comfort_temperature(temp_running_mean) == pytest.approx(
        float(reference.tmp_cmf), abs=1e-9
    )
    categories: tuple[tuple[Category, str], ...] = (("I", "i"), ("II", "ii"), ("III", "iii"))
    for category, suffix in categories:
        lower, upper = en16798_comfort_limits(temp_running_mean, category)
        assert upper + allowance == pytest.approx(
            float(getattr(reference, f"tmp_cmf_cat_{suffix}_up")), abs=1e-9
        )
        reference_lower = float(getattr(reference, f"tmp_cmf_cat_{suffix}_low"))
        if temp_running_mean >= 15.0:
            assert lower == pytest.approx(reference_lower, abs=1e-9)
        else:
            # pythermalcomfort applies 10-30 °C to the lower limits too [lib]; here
            # they start at 15 °C [mem]
            assert math.isnan(lower)
            extrapolated, _ = en16798_comfort_limits(
                temp_running_mean,
                category,
                nan_outside_validity=False,
            )
            assert extrapolated == pytest.approx(reference_lower, abs=1e-9)


# ----------------------------------------------------------------------------------------
# Running mean outdoor temperature
# ----------------------------------------------------------------------------------------


def test_running_mean_recursion() -> None:
    # EN 16798-1: θ_rm,n = 0.2·θ_ed,n-1 + 0.8·θ_rm,n-1 [pub]; by hand [calc]
    assert running_mean_outdoor_temperature_next(15.0, 20.0) == pytest.approx(16.0, abs=1e-12)
    result = running_mean_outdoor_temperature(np.array([10.0, 20.0, 20.0, 15.0]))
    # day 0 cold-starts from its own mean [practice]; then 10, 12, 13.6 [calc]
    np.testing.assert_allclose(result, [10.0, 10.0, 12.0, 13.6], atol=1e-12)
    result = running_mean_outdoor_temperature(
        np.array([10.0, 20.0]), temp_running_mean_initial=18.0
    )
    np.testing.assert_allclose(result, [18.0, 16.4], atol=1e-12)


def test_running_mean_series_keeps_its_index() -> None:
    # Series in, Series out, on the same daily index [practice]
    index = pd.date_range("2021-03-27", periods=4, freq="D", tz="Europe/London")  # over DST
    daily = pd.Series([10.0, 20.0, 20.0, 15.0], index=index)
    result = running_mean_outdoor_temperature(daily)
    assert isinstance(result, pd.Series)
    assert result.index.equals(index)
    np.testing.assert_allclose(result.to_numpy(), [10.0, 10.0, 12.0, 13.6], atol=1e-12)


def test_running_mean_refuses_gaps_and_nan() -> None:
    # Input check: the recursion needs every day [practice]
    index = pd.DatetimeIndex(["2021-06-01", "2021-06-02", "2021-06-04"])
    with pytest.raises(ValueError, match="not the next calendar day"):
        running_mean_outdoor_temperature(pd.Series([10.0, 11.0, 12.0], index=index))
    with pytest.raises(ValueError, match="NaN at position 1"):
        running_mean_outdoor_temperature(np.array([10.0, np.nan, 12.0]))
    with pytest.raises(ValueError, match="alpha"):
        running_mean_outdoor_temperature(np.array([10.0]), alpha=1.0)


@PROPERTY
@given(st.lists(st.floats(-5.0, 35.0), min_size=40, max_size=60))
def test_running_mean_matches_pythermalcomfort(daily_means: list[float]) -> None:
    # pythermalcomfort.environment.running_mean_outdoor_temperature, alpha 0.8 [lib]:
    # a finite sum normalised by Σ 0.8^i and rounded to 0.1 K, so compare with 0.06 K
    # after 40+ days, when the start value weighs under 0.8^40 ≈ 1e-4 [calc]
    running_mean = running_mean_outdoor_temperature(np.array(daily_means))
    today = running_mean_outdoor_temperature_next(running_mean[-1], daily_means[-1])
    assert today == pytest.approx(ptc_running_mean(daily_means[::-1], alpha=0.8), abs=0.06)


def test_running_mean_seven_days() -> None:
    # EN 16798-1 approximation (θ_ed-1 + 0.8θ_ed-2 + 0.6θ_ed-3 + 0.5θ_ed-4 + 0.4θ_ed-5
    # + 0.3θ_ed-6 + 0.2θ_ed-7)/3.8 [mem]; 76.1/3.8 by hand [calc]
    days = [22.0, 20.5, 19.0, 21.0, 18.5, 17.0, 16.5]
    assert running_mean_outdoor_temperature_seven_days(days) == pytest.approx(20.026316, abs=1e-6)
    assert running_mean_outdoor_temperature_seven_days([20.0] * 7) == pytest.approx(20.0)
    with pytest.raises(ValueError, match="expected the 7 days"):
        running_mean_outdoor_temperature_seven_days(days[:6])


# ----------------------------------------------------------------------------------------
# CIBSE TM52
# ----------------------------------------------------------------------------------------

TEMP_RUNNING_MEAN = 20.0  # [°C]
TEMP_MAX = 28.4  # [°C], 0.33·20 + 21.8, CIBSE TM52 Cat II [pub]; [calc]
TEMP_BELOW = TEMP_MAX - 2.0  # [°C], ΔT = -2 K: comfortable


def test_tm52_max_temperature() -> None:
    # CIBSE TM52 (2013): T_max = 0.33·T_rm + 21.8 for Cat II (18.8 + 3 K); Cat I +2 K,
    # Cat III +4 K [pub]; at T_rm 20 °C by hand [calc]
    assert tm52_max_temperature(TEMP_RUNNING_MEAN) == pytest.approx(TEMP_MAX, abs=1e-12)
    assert tm52_max_temperature(TEMP_RUNNING_MEAN, "I") == pytest.approx(27.4, abs=1e-12)
    assert tm52_max_temperature(TEMP_RUNNING_MEAN, "III") == pytest.approx(29.4, abs=1e-12)


@pytest.mark.parametrize(
    ("difference", "expected"),
    [
        # CIBSE TM52: ΔT rounded to the nearest whole degree [pub]; halves up, not
        # Python's round-half-even (round(0.5) == 0, round(2.5) == 2) [calc]
        (0.5, 1.0),
        (1.5, 2.0),
        (2.5, 3.0),
        (3.5, 4.0),
        (0.49, 0.0),
        (3.49, 3.0),
        (-0.5, 0.0),
        (-1.5, -1.0),
    ],
)
def test_tm52_delta_rounds_half_up(difference: float, expected: float) -> None:
    assert tm52_delta_temperature(TEMP_MAX + difference, TEMP_MAX) == expected


def test_tm52_delta_ignores_binary_noise() -> None:
    # 28.9 - 28.4 is 0.49999999999999645 in binary; an exact half still rounds up
    # (TM52 rounding) [pub]; [calc]
    assert 28.9 - tm52_max_temperature(TEMP_RUNNING_MEAN) < 0.5
    assert tm52_delta_temperature(28.9, tm52_max_temperature(TEMP_RUNNING_MEAN)) == 1.0


@PROPERTY
@given(st.floats(-20.0, 20.0))
def test_tm52_delta_is_a_whole_number_within_half_a_kelvin(difference: float) -> None:
    # Rounding to whole K moves a value by at most 0.5 K [calc]
    delta = tm52_delta_temperature(TEMP_MAX + difference, TEMP_MAX)
    assert delta == math.floor(delta)
    assert abs(delta - difference) <= 0.5 + 1e-6


def season(
    days: int = 10,
    occupied_from: int = 9,
    occupied_until: int = 19,
    start: str = "2021-06-01",
    tz: str = "Europe/London",
) -> tuple[pd.Series[float], pd.Series[float], pd.Series[bool]]:
    """Hourly frames for ``days`` days, occupied ``occupied_from``-``occupied_until``.

    Every hour sits 2 K below T_max; tests raise chosen hours. With the defaults
    there are 10 days × 10 h = 100 occupied hours, so 3 hours are exactly 3 %.
    """
    index = pd.date_range(start, periods=24 * days, freq="h", tz=tz)
    temp_operative = pd.Series(TEMP_BELOW, index=index)
    temp_running_mean = pd.Series(TEMP_RUNNING_MEAN, index=index)
    occupied = pd.Series((index.hour >= occupied_from) & (index.hour < occupied_until), index=index)
    return temp_operative, temp_running_mean, occupied


def raise_hour(temp_operative: pd.Series[float], when: str, delta: float) -> None:
    """Set the operative temperature at local time ``when`` to T_max + ``delta``."""
    timestamp = pd.Timestamp(when, tz=temp_operative.index.tz)  # type: ignore[attr-defined]
    temp_operative.loc[timestamp] = TEMP_MAX + delta


def test_tm52_comfortable_season_passes() -> None:
    # No hour above T_max: every criterion passes (CIBSE TM52) [pub]; [calc]
    result = tm52_overheating(*season())
    assert result == OverheatingAssessment(
        occupied_hours=100,
        hours_of_exceedance=0,
        hours_of_exceedance_percent=0.0,
        hours_of_exceedance_pass=True,
        daily_weighted_exceedance_max=0,
        days_over_daily_limit=0,
        daily_weighted_exceedance_pass=True,
        delta_temperature_max=-2,
        upper_limit_pass=True,
        criteria_failed=0,
        passed=True,
    )


@pytest.mark.parametrize(
    ("hours_raised", "passes"),
    # CIBSE TM52 criterion 1: hours with ΔT >= 1 K <= 3 % of occupied hours [pub];
    # 3 of 100 is exactly 3 % (pass), 4 of 100 is above (fail) [calc]
    [(3, True), (4, False)],
)
def test_tm52_criterion_1_at_the_limit(hours_raised: int, passes: bool) -> None:
    temp_operative, temp_running_mean, occupied = season()
    for day in range(hours_raised):  # one hour a day, so criterion 2 stays far off
        raise_hour(temp_operative, f"2021-06-0{day + 1} 12:00", 1.0)
    result = tm52_overheating(temp_operative, temp_running_mean, occupied)
    assert result.hours_of_exceedance == hours_raised
    assert result.hours_of_exceedance_percent == pytest.approx(hours_raised, abs=1e-12)
    assert result.hours_of_exceedance_pass is passes
    assert result.daily_weighted_exceedance_pass
    assert result.upper_limit_pass
    # one failed criterion is not enough to fail the space [pub]
    assert result.criteria_failed == (0 if passes else 1)
    assert result.passed


def test_tm52_criterion_1_counts_a_rounded_half() -> None:
    # ΔT 0.5 K rounds to 1 K and counts; 0.49 K does not (TM52 rounding) [pub]; [calc]
    temp_operative, temp_running_mean, occupied = season()
    raise_hour(temp_operative, "2021-06-01 12:00", 0.5)
    raise_hour(temp_operative, "2021-06-02 12:00", 0.49)
    result = tm52_overheating(temp_operative, temp_running_mean, occupied)
    assert result.hours_of_exceedance == 1


@pytest.mark.parametrize(
    ("deltas", "weighted", "passes"),
    # CIBSE TM52 criterion 2: daily weighted exceedance Σ h·ΔT <= 6 [pub];
    # 2+2+2 = 6 passes, 2+2+3 = 7 fails [calc]
    [((2.0, 2.0, 2.0), 6, True), ((2.0, 2.0, 3.0), 7, False)],
)
def test_tm52_criterion_2_at_the_limit(
    deltas: tuple[float, ...], weighted: int, passes: bool
) -> None:
    temp_operative, temp_running_mean, occupied = season()
    for hour, delta in zip((10, 11, 12), deltas, strict=True):
        raise_hour(temp_operative, f"2021-06-03 {hour}:00", delta)
    result = tm52_overheating(temp_operative, temp_running_mean, occupied)
    assert result.daily_weighted_exceedance_max == weighted
    assert result.days_over_daily_limit == (0 if passes else 1)
    assert result.daily_weighted_exceedance_pass is passes
    assert result.hours_of_exceedance == 3  # exactly 3 %: criterion 1 still passes
    assert result.hours_of_exceedance_pass
    assert result.passed


def test_tm52_criterion_2_uses_local_calendar_days() -> None:
    # Days are local calendar days (TM52 "in any one day") [pub]: two hours of ΔT 3 K
    # before and two after local midnight are 6 K·h on each day. In UTC (Berlin is
    # UTC+2 in summer) all four fall on one day, 12 K·h [calc]
    temp_operative, temp_running_mean, occupied = season(days=14, tz="Europe/Berlin")
    for when in ("2021-06-05 22:00", "2021-06-05 23:00", "2021-06-06 00:00", "2021-06-06 01:00"):
        raise_hour(temp_operative, when, 3.0)
        occupied.loc[pd.Timestamp(when, tz="Europe/Berlin")] = True
    result = tm52_overheating(temp_operative, temp_running_mean, occupied)
    assert result.occupied_hours == 144
    assert result.hours_of_exceedance == 4  # 2.8 %
    assert result.daily_weighted_exceedance_max == 6
    assert result.daily_weighted_exceedance_pass


@pytest.mark.parametrize(
    ("delta", "passes"),
    # CIBSE TM52 criterion 3: ΔT never >= 4 K [pub]; 3 K and 3.49 K (rounds to 3)
    # pass, 3.5 K (rounds half up to 4) and 4 K fail [calc]
    [(3.0, True), (3.49, True), (3.5, False), (4.0, False)],
)
def test_tm52_criterion_3_at_the_limit(delta: float, passes: bool) -> None:
    temp_operative, temp_running_mean, occupied = season()
    raise_hour(temp_operative, "2021-06-04 15:00", delta)
    result = tm52_overheating(temp_operative, temp_running_mean, occupied)
    assert result.delta_temperature_max == (3 if passes else 4)
    assert result.upper_limit_pass is passes
    assert result.hours_of_exceedance_pass
    assert result.daily_weighted_exceedance_pass
    assert result.passed  # one failed criterion alone does not fail the space [pub]


def test_tm52_two_failed_criteria_fail_the_space() -> None:
    # CIBSE TM52: a space fails if two or more criteria fail [pub]; one day with
    # ΔT 4 K and 3 K: Σ 7 K·h (criterion 2) and 4 K (criterion 3) [calc]
    temp_operative, temp_running_mean, occupied = season()
    raise_hour(temp_operative, "2021-06-05 14:00", 4.0)
    raise_hour(temp_operative, "2021-06-05 15:00", 3.0)
    result = tm52_overheating(temp_operative, temp_running_mean, occupied)
    assert result.hours_of_exceedance_pass
    assert not result.daily_weighted_exceedance_pass
    assert not result.upper_limit_pass
    assert result.criteria_failed == 2
    assert not result.passed


def test_tm52_three_failed_criteria_fail_the_space() -> None:
    # CIBSE TM52 [pub]: 5 hours of ΔT 4 K on one day fail all three [calc]
    temp_operative, temp_running_mean, occupied = season()
    for hour in range(10, 15):
        raise_hour(temp_operative, f"2021-06-06 {hour}:00", 4.0)
    result = tm52_overheating(temp_operative, temp_running_mean, occupied)
    assert result.hours_of_exceedance == 5
    assert result.daily_weighted_exceedance_max == 20
    assert result.criteria_failed == 3
    assert not result.passed


def test_tm52_only_occupied_hours_from_may_to_september_count() -> None:
    # CIBSE TM52: occupied hours of the non-heating season, May to September [pub];
    # a hot April and hot unoccupied nights are ignored [calc]
    temp_operative, temp_running_mean, occupied = season(days=70, start="2021-04-01")
    temp_operative[temp_operative.index.month == 4] = TEMP_MAX + 5.0  # type: ignore[attr-defined]
    temp_operative[~occupied & (temp_operative.index.month == 5)] = TEMP_MAX + 5.0  # type: ignore[attr-defined]
    result = tm52_overheating(temp_operative, temp_running_mean, occupied)
    assert result.occupied_hours == 400  # May 31 days + 9 days of June, 10 h each
    assert result.hours_of_exceedance == 0
    assert result.passed


def test_tm52_refuses_bad_inputs() -> None:
    # Input checks (STYLE: errors name the value and the fix) [practice]
    temp_operative, temp_running_mean, occupied = season()
    with pytest.raises(ValueError, match="time-zone-aware"):
        tm52_overheating(
            temp_operative.tz_localize(None),
            temp_running_mean.tz_localize(None),
            occupied.tz_localize(None),
        )
    with pytest.raises(ValueError, match="temp_running_mean: index differs"):
        tm52_overheating(temp_operative, temp_running_mean.iloc[1:], occupied)
    with pytest.raises(ValueError, match="no occupied hour"):
        tm52_overheating(*season(start="2021-01-10"))
    with pytest.raises(ValueError, match="expected bool"):
        tm52_overheating(temp_operative, temp_running_mean, occupied.astype(float))  # type: ignore[arg-type]
    half_hourly = pd.date_range("2021-06-01", periods=48, freq="30min", tz="UTC")
    with pytest.raises(ValueError, match="resample to hourly"):
        tm52_overheating(
            pd.Series(25.0, index=half_hourly),
            pd.Series(20.0, index=half_hourly),
            pd.Series(True, index=half_hourly),
        )
    gap = temp_operative.copy()
    gap.loc[pd.Timestamp("2021-06-02 10:00", tz="Europe/London")] = np.nan
    with pytest.raises(ValueError, match="temp_operative: NaN at 2021-06-02 10:00"):
        tm52_overheating(gap, temp_running_mean, occupied)
