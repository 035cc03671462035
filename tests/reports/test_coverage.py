"""Poor data coverage is flagged, never filled in."""

from __future__ import annotations

import math

import pandas as pd
import pytest

from ventsup.core.figures import SITE, FigureOptions, compute_figures
from ventsup.core.state import Mode

from .sites import BERLIN, decision, epoch, frame, make_site

SITE_CONFIG = make_site(BERLIN, tick="10 min")
START = epoch(BERLIN, 2027, 7, 5, 8)
END = START + 10 * 3600  # 60 decisions, one every 10 min


def records(missing: int, **facts: float | None) -> pd.DataFrame:
    """Sixty decisions, open, occupied; the indoor temperature unknown in the first ``missing``."""
    decisions = []
    for k in range(60):
        values: dict[str, float | bool | None] = {
            "temp_indoor": None if k < missing else 24.0,
            "temp_outdoor": 18.0,
            "wind_speed": 2.0,
            "wind_direction": 180.0,
            "occupied": True,
        }
        values.update(facts)
        decisions.append(
            decision(
                START + 600 * k, mode=Mode.FREE_COOLING, targets={"low": 0.5, "high": 0.5}, **values
            )
        )
    return frame(SITE_CONFIG, decisions)


@pytest.mark.parametrize(("missing", "flagged"), [(0, False), (6, False), (7, True), (60, True)])
def test_a_share_below_the_threshold_is_flagged(missing: int, flagged: bool) -> None:
    # 54 of 60 known is exactly 90 %: not below the threshold; 53 of 60 is
    figures = compute_figures(records(missing), SITE_CONFIG, START, END)
    coverage = figures.coverage.set_index(["zone", "input"]).loc[("hall", "temp_indoor")]
    assert coverage["share_of_time"] == pytest.approx((60 - missing) / 60)
    assert coverage["share_of_decisions"] == pytest.approx((60 - missing) / 60)
    assert bool(coverage["flagged"]) == flagged
    hall = figures.totals.set_index("zone").loc["hall"]
    assert bool(hall["airflow_flagged"]) == flagged
    assert bool(hall["comfort_flagged"]) == flagged
    # nothing is filled in: only known time counts
    assert hall["comfort_known_hours"] == pytest.approx((60 - missing) / 6)
    assert hall["airflow_estimated_hours"] == pytest.approx((60 - missing) / 6)
    assert hall["open_hours"] == pytest.approx(10.0)
    assert any("temp_indoor known for" in flag for flag in figures.flags) == flagged


def test_the_threshold_is_a_choice() -> None:
    figures = compute_figures(
        records(7), SITE_CONFIG, START, END, options=FigureOptions(coverage_threshold=0.8)
    )
    assert not figures.coverage.set_index(["zone", "input"]).loc[("hall", "temp_indoor"), "flagged"]
    with pytest.raises(ValueError, match="coverage_threshold"):
        compute_figures(
            records(0), SITE_CONFIG, START, END, options=FigureOptions(coverage_threshold=90)
        )


def test_unknown_wind_gives_a_stack_only_estimate_and_a_flag() -> None:
    figures = compute_figures(records(0, wind_speed=None), SITE_CONFIG, START, END)
    hall = figures.totals.set_index("zone").loc["hall"]
    assert hall["airflow_stack_only_hours"] == pytest.approx(10.0)
    assert not hall["airflow_flagged"]  # an estimate, a lower one
    coverage = figures.coverage.set_index(["zone", "input"])
    assert coverage.loc[(SITE, "wind_speed"), "flagged"]
    assert "airflow (wind part)" in coverage.loc[(SITE, "wind_speed"), "used_for"]


def test_inputs_not_fitted_are_not_flagged() -> None:
    figures = compute_figures(records(0), SITE_CONFIG, START, END)
    co2 = figures.coverage.set_index(["zone", "input"]).loc[("hall", "co2")]
    assert not co2["configured"] and not co2["flagged"] and math.isnan(co2["share_of_time"])


def test_gaps_in_the_record_are_offline_and_flagged() -> None:
    kept = records(0)
    kept = kept[(kept["t"] < START + 3600) | (kept["t"] >= START + 3 * 3600)]
    figures = compute_figures(kept, SITE_CONFIG, START, END)
    hall = figures.totals.set_index("zone").loc["hall"]
    # the 00:50 decision holds 20 min (twice the tick); then nothing until 03:00
    assert hall["offline_hours"] == pytest.approx(2.0 - 1.0 / 6.0)
    assert hall["record_share"] == pytest.approx(1.0 - (2.0 - 1.0 / 6.0) / 10.0)
    assert hall["record_flagged"]
    outages = figures.outages[figures.outages["zone"] == SITE]
    assert len(outages) == 1 and outages["note"].iloc[0] == "no decisions recorded"


def test_a_day_without_a_reliable_outdoor_mean_is_not_filled() -> None:
    # outdoor temperature known for 17 of 24 hours (below 18 h) on one history day: no mean
    # that day, so no running mean for the next seven days until seven known days follow
    decisions = []
    start = epoch(BERLIN, 2027, 7, 1)
    for step in range(10 * 144):
        t = start + step * 600
        day, hour = divmod(step // 6, 24)
        unknown = day == 7 and hour >= 17
        decisions.append(
            decision(t, temp_indoor=24.0, temp_outdoor=None if unknown else 20.0, occupied=True)
        )
    site_frame = frame(SITE_CONFIG, decisions)
    period = start + 8 * 86400
    figures = compute_figures(site_frame, SITE_CONFIG, period, period + 2 * 86400)
    outdoor = figures.outdoor.set_index("date")
    assert outdoor.loc["2027-07-08", "temp_outdoor_share"] == pytest.approx(17 / 24)
    assert not outdoor.loc["2027-07-08", "daily_mean_used"]
    assert math.isnan(outdoor.loc["2027-07-09", "temp_running_mean_c"])
    assert math.isnan(outdoor.loc["2027-07-10", "temp_running_mean_c"])
    hall = figures.totals.set_index("zone").loc["hall"]
    assert hall["adaptive_known_hours"] == 0.0 and hall["adaptive_flagged"]
    assert any(
        "running mean of outdoor temperature unknown on 2 day(s)" in f for f in figures.flags
    )
