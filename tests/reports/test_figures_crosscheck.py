"""The figures against an independent calculation over the same records.

The independent calculation does not cut intervals: it lays a regular grid of
instants over the period (one second for the demo day, one minute for the
month, both exact for records on whole seconds or minutes) and finds the
decision in force at each instant with :func:`pandas.merge_asof` (the last
decision at or before it, no older than the longest gap), then counts grid
instants. Hours per zone, hours for the whole site (at least one zone), air
volume, comfort hours, actuator moves and coverage must agree.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from pythermalcomfort.models import adaptive_en

from ventsup.config.model import SiteConfig
from ventsup.core.figures import (
    CAUSES,
    MODES,
    SITE,
    compute_figures,
    decisions_to_frame,
    zone_airflow,
)
from ventsup.core.physics import standard_atmospheric_pressure
from ventsup.drivers.reporting import Period, day_period

HOURS = 1e-6  # [h] agreement expected: both count the same whole seconds


def in_force(
    frame: pd.DataFrame, config: SiteConfig, start: float, end: float, step: int, max_gap: float
) -> pd.DataFrame:
    """One row per grid instant and zone: the decision in force then (NaN columns if none)."""
    grid = pd.DataFrame({"when": np.arange(int(start), int(end), step, dtype=np.int64)})
    local = pd.to_datetime(grid["when"], unit="s", utc=True).dt.tz_convert(config.site.time_zone)
    grid["date"] = local.dt.strftime("%Y-%m-%d")
    parts = []
    for zone, openings in ((z, config.zones[z].openings) for z in config.zones):
        rows = frame[frame["zone"] == zone].copy()
        rows["when"] = rows["t"].round().astype(np.int64)
        # Two decisions at the same second: the one recorded last stands.
        rows = rows.drop_duplicates("when", keep="last").sort_values("when")
        rows = rows.drop(columns=["zone"])
        targets = {o: rows[f"target:{o}"].to_numpy() for o in openings}
        estimate = zone_airflow(
            openings,
            targets,
            rows["fact:temp_indoor"].to_numpy(),
            rows["fact:temp_outdoor"].to_numpy(),
            rows["fact:wind_speed"].to_numpy(),
            rows["fact:wind_direction"].to_numpy(),
        )
        rows["flow"] = estimate.flow
        rows["is_open"] = np.any(np.column_stack([targets[o] > 0 for o in openings]), axis=1)
        matched = pd.merge_asof(
            grid,
            rows,
            on="when",
            direction="backward",
            tolerance=int(max_gap) - step,  # covers [t, t + max_gap)
        )
        matched["zone"] = zone
        matched["online"] = matched["t"].notna()
        parts.append(matched)
    return pd.concat(parts, ignore_index=True)


def hours(mask: pd.Series, frame: pd.DataFrame, step: int, by: list[str]) -> pd.Series:
    return frame[mask.to_numpy()].groupby(by).size() * step / 3600.0


def irregular(demo_frame: pd.DataFrame) -> pd.DataFrame:
    """The demo day with urgent evaluations between ticks and two gaps in the record."""
    frame = demo_frame.copy()
    start = float(frame["t"].min())
    urgent = frame[(frame["zone"] == "commons") & (frame["t"] % 3600 == 0)].copy()
    urgent["t"] = urgent["t"] + 17.0  # an alarm-driven evaluation 17 s after the tick
    urgent["mode"] = "protected"
    urgent["cause"] = "rain"
    for column in [c for c in frame.columns if c.startswith("target:")]:
        urgent[column] = np.where(urgent[column].notna(), 0.0, np.nan)
    same_second = frame[(frame["zone"] == "studio_west") & (frame["t"] == start + 3 * 3600)].copy()
    same_second["mode"] = "override"
    same_second["cause"] = "operator"
    frame = pd.concat([frame, urgent, same_second], ignore_index=True)
    gap_zone = (frame["zone"] == "classroom_east") & frame["t"].between(
        start + 5 * 3600, start + 6 * 3600
    )
    gap_site = frame["t"].between(start + 20 * 3600 + 30, start + 20 * 3600 + 600)
    return frame[~(gap_zone | gap_site)].reset_index(drop=True)


@pytest.fixture(scope="module")
def day(demo_config: SiteConfig) -> Period:
    return day_period(demo_config.site.time_zone, "2027-06-15")


def test_hours_by_mode_and_cause_match_a_grid_count(
    demo_config: SiteConfig, demo_frame: pd.DataFrame, day: Period
) -> None:
    frame = irregular(demo_frame)
    figures = compute_figures(frame, demo_config, day.start, day.end)
    grid = in_force(frame, demo_config, day.start, day.end, 1, figures.max_gap)
    daily = figures.daily.set_index(["zone", "date"])
    assert figures.max_gap == 120.0  # twice the demo site's 1 min tick
    checks = {
        "online_hours": grid["online"],
        "open_hours": grid["is_open"].fillna(False).astype(bool),
        "occupied_hours": grid["fact:occupied"] == 1.0,
        **{f"mode_{m}_hours": grid["mode"] == m for m in MODES},
        **{f"cause_{c}_hours": grid["cause"] == c for c in CAUSES},
    }
    for column, mask in checks.items():
        expected = hours(mask, grid, 1, ["zone", "date"])
        for zone in demo_config.zones:
            got = daily.loc[(zone, "2027-06-15"), column]
            want = expected.get((zone, "2027-06-15"), 0.0)
            assert got == pytest.approx(want, abs=HOURS), (zone, column)
        # the whole site: instants at which at least one zone was in that state
        site = grid[mask.to_numpy()].groupby("when").size()
        assert daily.loc[(SITE, "2027-06-15"), column] == pytest.approx(
            len(site) / 3600.0, abs=HOURS
        ), column
    # The site's gap: the last decisions at 20:00 (commons: the urgent one at 20:00:17,
    # holding to 20:02:17), the next at 20:11.
    offline = daily.loc[(SITE, "2027-06-15"), "offline_hours"]
    assert offline == pytest.approx((660 - 137) / 3600.0, abs=HOURS)
    # The classroom's own gap: 04:59 holds to 05:01, the next at 06:01; and 20:02-20:11.
    assert daily.loc[("classroom_east", "2027-06-15"), "offline_hours"] == pytest.approx(
        (3600 + 540) / 3600.0, abs=HOURS
    )
    assert daily.loc[("commons", "2027-06-15"), "cause_rain_hours"] > 24 * 17 / 3600.0


def test_air_volume_comfort_and_cooling_match_a_grid_sum(
    demo_config: SiteConfig, demo_frame: pd.DataFrame, day: Period
) -> None:
    frame = irregular(demo_frame)
    figures = compute_figures(frame, demo_config, day.start, day.end)
    grid = in_force(frame, demo_config, day.start, day.end, 1, figures.max_gap)
    daily = figures.daily.set_index(["zone", "date"])
    flow = grid["flow"].where(grid["is_open"].fillna(False).astype(bool), 0.0).fillna(0.0)
    # Heat: ρ·c_p·Q·ΔT with ρ 1.2 kg/m³ at sea level scaled to 190 m (ASHRAE Fundamentals
    # ch. 1 eq. 3) and c_p 1005 J/(kg·K) [pub]
    density = 1.2 * standard_atmospheric_pressure(190.0) / 101_325.0
    heat = density * 1005.0 * flow * (grid["fact:temp_indoor"] - grid["fact:temp_outdoor"])
    band = demo_config.rules_for("commons").comfort
    occupied = grid["fact:occupied"] == 1.0
    inside = occupied & grid["fact:temp_indoor"].between(band.low, band.high)
    for zone in demo_config.zones:
        mine = grid["zone"] == zone
        key = (zone, "2027-06-15")
        assert daily.loc[key, "air_volume_m3"] == pytest.approx(flow[mine].sum(), rel=1e-9)
        assert daily.loc[key, "cooling_kwh"] == pytest.approx(
            heat[mine].clip(lower=0).sum() / 3.6e6, rel=1e-9
        )
        assert daily.loc[key, "comfort_fixed_hours"] == pytest.approx(
            (inside & mine).sum() / 3600.0, abs=HOURS
        )
    # the site is comfortable at an instant when some zone is occupied and all occupied are inside
    anyone = occupied.groupby(grid["when"]).any()
    spoiled = (occupied & ~inside).groupby(grid["when"]).any()
    site_inside = int((anyone & ~spoiled).sum())
    assert daily.loc[(SITE, "2027-06-15"), "comfort_fixed_hours"] == pytest.approx(
        site_inside / 3600.0, abs=HOURS
    )
    assert daily.loc[(SITE, "2027-06-15"), "air_volume_m3"] == pytest.approx(flow.sum(), rel=1e-9)


def test_moves_count_changes_of_commanded_targets(
    demo_config: SiteConfig, demo_frame: pd.DataFrame, day: Period
) -> None:
    figures = compute_figures(demo_frame, demo_config, day.start, day.end)
    got = figures.moves.groupby(["zone", "opening"])["moves"].sum()
    for zone, config in demo_config.zones.items():
        rows = demo_frame[demo_frame["zone"] == zone].sort_values("t", kind="stable")
        for opening in config.openings:
            commanded = rows[f"target:{opening}"].dropna()  # released spells skipped
            changes = int((commanded.diff().fillna(0.0) != 0.0).sum())
            assert got[(zone, opening)] == changes, (zone, opening)
    assert int(figures.totals.set_index("zone").loc[SITE, "moves"]) == int(got.sum())


def test_coverage_is_the_share_of_recorded_time_with_a_value(
    demo_config: SiteConfig, demo_frame: pd.DataFrame, day: Period
) -> None:
    frame = irregular(demo_frame)
    lost = (frame["zone"] == "studio_west") & (frame["t"] < day.start + 4 * 3600)
    frame.loc[lost, "fact:temp_indoor"] = np.nan
    figures = compute_figures(frame, demo_config, day.start, day.end)
    grid = in_force(frame, demo_config, day.start, day.end, 1, figures.max_gap)
    coverage = figures.coverage.set_index(["zone", "input"])
    for zone in demo_config.zones:
        mine = grid[(grid["zone"] == zone) & grid["online"]]
        want = mine["fact:temp_indoor"].notna().mean()
        assert coverage.loc[(zone, "temp_indoor"), "share_of_time"] == pytest.approx(want, abs=1e-9)
    assert coverage.loc[("studio_west", "temp_indoor"), "flagged"]
    assert not coverage.loc[("commons", "temp_indoor"), "flagged"]


def test_a_month_of_records_matches_a_minute_grid(
    demo_config: SiteConfig, month_frame: pd.DataFrame, june: Period
) -> None:
    figures = compute_figures(month_frame, demo_config, june.start, june.end)
    grid = in_force(month_frame, demo_config, june.start, june.end, 60, figures.max_gap)
    monthly = figures.monthly.set_index(["zone", "month"])
    totals = figures.totals.set_index("zone")
    for column, mask in {
        "online_hours": grid["online"],
        "mode_free_cooling_hours": grid["mode"] == "free_cooling",
        "mode_night_flush_hours": grid["mode"] == "night_flush",
        "open_hours": grid["is_open"].fillna(False).astype(bool),
        "cause_wind_hours": grid["cause"] == "wind",
    }.items():
        expected = hours(mask, grid, 60, ["zone"])
        for zone in demo_config.zones:
            assert monthly.loc[(zone, "2027-06"), column] == pytest.approx(
                expected.get(zone, 0.0), abs=HOURS
            ), (zone, column)
            assert totals.loc[zone, column] == monthly.loc[(zone, "2027-06"), column]
    assert totals.loc[SITE, "hours"] == 720.0
    # no decisions 10:00-15:00 on the outage day; the 09:59 one holds for its 2 min
    assert totals.loc[SITE, "offline_hours"] == pytest.approx(5.0 - 1.0 / 60.0, abs=HOURS)
    # daily rows add up to the month
    daily = figures.daily[figures.daily["zone"] == "commons"]
    assert daily["mode_free_cooling_hours"].sum() == pytest.approx(
        monthly.loc[("commons", "2027-06"), "mode_free_cooling_hours"], rel=1e-12
    )


def test_adaptive_comfort_hours_match_pythermalcomfort_limits(
    demo_config: SiteConfig, month_frame: pd.DataFrame, june: Period
) -> None:
    # EN 16798-1:2019 Annex B category II through pythermalcomfort 4.8's adaptive_en,
    # round_output=False [lib]; the running mean θ_rm = 0.2·θ_ed,-1 + 0.8·θ_rm,-1 from
    # daily means, started with the seven-day formula (EN 16798-1 [pub]), here by hand.
    figures = compute_figures(month_frame, demo_config, june.start, june.end)
    history_start = float(month_frame["t"].min())
    grid = in_force(month_frame, demo_config, history_start, june.end, 60, figures.max_gap)
    outdoor = grid[grid["zone"] == "commons"]
    day_length = outdoor.groupby("date").size() * 60.0
    known = outdoor[outdoor["fact:temp_outdoor"].notna()]
    share = known.groupby("date").size() * 60.0 / day_length
    means = known.groupby("date")["fact:temp_outdoor"].mean().where(share >= 0.75)
    days = list(means.index)
    running: dict[str, float] = {}
    for n, date in enumerate(days):
        if n and days[n - 1] in running and np.isfinite(means.iloc[n - 1]):
            running[date] = 0.2 * means.iloc[n - 1] + 0.8 * running[days[n - 1]]
        elif n >= 7 and means.iloc[n - 7 : n].notna().all():
            weights = [1.0, 0.8, 0.6, 0.5, 0.4, 0.3, 0.2]
            previous = means.iloc[n - 7 : n][::-1].to_numpy()
            running[date] = float(np.dot(weights, previous) / 3.8)
    table = figures.outdoor.set_index("date")
    for date, value in running.items():
        assert table.loc[date, "temp_running_mean_c"] == pytest.approx(value, abs=1e-9), date

    period = grid[(grid["when"] >= june.start) & (grid["zone"] != "")].copy()
    period["rm"] = period["date"].map(running)
    occupied = (period["fact:occupied"] == 1.0) & period["fact:temp_indoor"].notna()
    chosen = period[occupied & period["rm"].notna()]
    limits = adaptive_en(
        tdb=chosen["fact:temp_indoor"].to_numpy(),
        tr=chosen["fact:temp_indoor"].to_numpy(),
        t_running_mean=chosen["rm"].to_numpy(),
        v=0.1,
        round_output=False,
    )
    inside = (chosen["fact:temp_indoor"] >= limits.tmp_cmf_cat_ii_low) & (
        chosen["fact:temp_indoor"] <= limits.tmp_cmf_cat_ii_up
    )
    expected = chosen[inside.to_numpy()].groupby("zone").size() * 60 / 3600.0
    totals = figures.totals.set_index("zone")
    for zone in demo_config.zones:
        assert totals.loc[zone, "comfort_adaptive_hours"] == pytest.approx(
            expected.get(zone, 0.0), abs=HOURS
        ), zone
        assert totals.loc[zone, "adaptive_known_hours"] == pytest.approx(
            len(chosen[chosen["zone"] == zone]) * 60 / 3600.0, abs=HOURS
        )


def test_a_replay_and_the_same_decisions_from_a_table_agree(
    demo_config: SiteConfig, demo_decisions: list, demo_frame: pd.DataFrame, day: Period
) -> None:
    # The figures take any iterable of decisions: (decision, trigger) pairs as the
    # ledger yields them give the same table as the decisions alone.
    pairs = decisions_to_frame([(d, "tick") for d in demo_decisions], demo_config)
    pd.testing.assert_frame_equal(pairs, demo_frame)
    a = compute_figures(demo_frame, demo_config, day.start, day.end)
    b = compute_figures(pairs.sample(frac=1.0, random_state=3), demo_config, day.start, day.end)
    pd.testing.assert_frame_equal(a.daily, b.daily)
