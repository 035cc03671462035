"""The three CIBSE TM52 overheating criteria in the figures, on hand-made records.

CIBSE TM52 (2013) [pub]: T_max = 0.33·T_rm + 21.8 °C (category II); ΔT = T_op − T_max
rounded to whole kelvin (halves up); (1) hours with ΔT ≥ 1 K at most 3 % of occupied
hours, (2) daily weighted exceedance Σ ΔT at most 6 K·h, (3) ΔT never 4 K or more; a
space fails when two criteria fail. With a steady 20 °C outdoors the running mean
is 20 °C and T_max = 28.4 °C [calc].

Each case: eight days of history (for the running mean), then ten days occupied
08:00-18:00 (100 occupied hours), decisions every 10 min, indoor 26 °C unless the
case makes some hours hotter.
"""

from __future__ import annotations

from collections.abc import Mapping

import pandas as pd
import pytest

from ventsup.core.figures import compute_figures
from ventsup.core.state import Mode

from .sites import BERLIN, decision, epoch, frame, make_site

T_MAX = 0.33 * 20.0 + 21.8  # [°C] at a running mean of 20 °C, category II [calc]
SITE = make_site(BERLIN, tick="10 min")
HISTORY_DAYS = 8
DAYS = 10


def assess(hot: Mapping[tuple[int, int], float]) -> tuple[pd.Series, pd.DataFrame]:
    """TM52 of the case: ``hot`` maps (day 0-9, hour 8-17) to that hour's indoor temperature."""
    decisions = []
    start = epoch(BERLIN, 2027, 7, 1)
    for day in range(HISTORY_DAYS + DAYS):
        for step in range(144):
            t = start + day * 86400 + step * 600
            hour = step // 6
            assessed = day - HISTORY_DAYS
            occupied = assessed >= 0 and 8 <= hour < 18
            temp = hot.get((assessed, hour), 26.0) if occupied else 24.0
            decisions.append(
                decision(
                    t,
                    mode=Mode.IDLE,
                    temp_indoor=temp,
                    temp_outdoor=20.0,
                    occupied=occupied,
                )
            )
    period_start = start + HISTORY_DAYS * 86400
    figures = compute_figures(
        frame(SITE, decisions), SITE, period_start, period_start + DAYS * 86400
    )
    row = figures.overheating.set_index("zone").loc["hall"]
    return row, figures.daily[figures.daily["zone"] == "hall"]


def test_the_threshold_and_its_rounding() -> None:
    row, _ = assess({})
    assert row["occupied_hours"] == 100
    assert row["passed"] and row["criteria_failed"] == 0
    # ΔT 0.5 K rounds up to 1 K: an hour of exceedance; 0.49 K rounds to 0 [pub]
    row, daily = assess({(0, 9): T_MAX + 0.5, (1, 9): T_MAX + 0.49})
    assert row["hours_of_exceedance"] == 1
    assert daily["overheating_hours"].tolist()[:2] == [1.0, 0.0]


@pytest.mark.parametrize(("hours", "passes"), [(3, True), (4, False)])
def test_criterion_1_hours_of_exceedance_at_3_percent(hours: int, passes: bool) -> None:
    # 3 of 100 occupied hours is 3 %: passes; 4 is 4 %: fails [pub]
    row, _ = assess({(day, 12): T_MAX + 1.0 for day in range(hours)})
    assert row["hours_of_exceedance"] == hours
    assert row["hours_of_exceedance_percent"] == pytest.approx(hours)
    assert row["hours_of_exceedance_pass"] == passes
    assert row["daily_weighted_exceedance_pass"] and row["upper_limit_pass"]
    assert row["passed"]  # one failed criterion is not a failed space


@pytest.mark.parametrize(
    ("hot", "weighted", "passes"),
    [
        ({(0, 10): T_MAX + 3.0, (0, 11): T_MAX + 3.0}, 6, True),
        ({(0, 10): T_MAX + 2.0, (0, 11): T_MAX + 2.0, (0, 12): T_MAX + 2.0}, 6, True),
        ({(0, 10): T_MAX + 3.0, (0, 11): T_MAX + 3.0, (0, 12): T_MAX + 0.5}, 7, False),
    ],
)
def test_criterion_2_daily_weighted_exceedance_at_6(
    hot: dict[tuple[int, int], float], weighted: int, passes: bool
) -> None:
    # W_e = Σ h·ΔT over a day's occupied hours; 6 K·h passes, 7 fails [pub]
    row, daily = assess(hot)
    assert row["daily_weighted_exceedance_max"] == weighted
    assert row["daily_weighted_exceedance_pass"] == passes
    assert daily["weighted_exceedance_max_kh"].iloc[0] == weighted
    assert row["days_over_daily_limit"] == (0 if passes else 1)


@pytest.mark.parametrize(("excess", "delta", "passes"), [(3.49, 3, True), (3.5, 4, False)])
def test_criterion_3_upper_limit_at_4_kelvin(excess: float, delta: int, passes: bool) -> None:
    # ΔT = 3.5 K rounds up to 4 K and fails; 3.49 K rounds to 3 K and passes [pub]
    row, _ = assess({(0, 14): T_MAX + excess})
    assert row["delta_temperature_max"] == delta
    assert row["upper_limit_pass"] == passes
    assert row["passed"]


def test_a_space_fails_when_two_criteria_fail() -> None:
    # criterion 1 (4 hours, 4 %) and criterion 3 (ΔT 4 K) fail; criterion 2 passes [pub]
    hot = {(day, 12): T_MAX + 1.0 for day in range(1, 4)}
    hot[(0, 12)] = T_MAX + 4.0
    row, _ = assess(hot)
    assert not row["hours_of_exceedance_pass"]
    assert row["daily_weighted_exceedance_pass"]
    assert not row["upper_limit_pass"]
    assert row["criteria_failed"] == 2
    assert not row["passed"]


def test_hours_without_a_temperature_are_left_out_and_flagged() -> None:
    # an unknown indoor temperature is never filled: the hour is not assessed
    decisions = []
    start = epoch(BERLIN, 2027, 7, 1)
    for day in range(HISTORY_DAYS + 1):
        for step in range(144):
            hour = step // 6
            occupied = day == HISTORY_DAYS and 8 <= hour < 18
            temp = None if occupied and hour < 10 else 26.0
            decisions.append(
                decision(
                    start + day * 86400 + step * 600,
                    temp_indoor=temp,
                    temp_outdoor=20.0,
                    occupied=occupied,
                )
            )
    period = start + HISTORY_DAYS * 86400
    figures = compute_figures(frame(SITE, decisions), SITE, period, period + 86400)
    row = figures.overheating.set_index("zone").loc["hall"]
    assert row["occupied_whole_hours"] == 10
    assert row["occupied_hours"] == 8
    assert row["assessed_share"] == pytest.approx(0.8)
    assert row["flagged"]
    assert any("TM52 hours assessed for 80.0 %" in flag for flag in figures.flags)
