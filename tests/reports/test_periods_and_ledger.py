"""Report periods in the site's time zone, reports from the ledger, the hourly catch-up job
and ``ventsup report``.

A local month runs from midnight on its first day to midnight on the first of the
next month: a 31-day month with the spring change has 743 hours, one with the autumn
change 745 (EU rules: last Sundays of March and October; US: second Sunday of March,
first Sunday of November, so November has 721) [pub: the zone rules of the IANA tz
database, as Python's zoneinfo reads them].
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from ventsup.config.model import SiteConfig
from ventsup.core.figures import SITE, compute_figures
from ventsup.core.state import Decision, Mode
from ventsup.drivers.reporting import (
    ReportError,
    add_report_arguments,
    catch_up,
    cli_report,
    day_period,
    missing_reports,
    month_period,
    period_between,
    range_period,
    report_from_ledger,
    summary_file,
    write_report,
)
from ventsup.edges.html import chart_ids
from ventsup.edges.ledger import EventRecord, Ledger

from .sites import BERLIN, CHICAGO, decision, epoch, frame, make_site, site_yaml


@pytest.mark.parametrize(
    ("tz", "month", "hours"),
    [
        (BERLIN, "2027-03", 743),
        (BERLIN, "2027-10", 745),
        (BERLIN, "2027-06", 720),
        (CHICAGO, "2027-03", 743),
        (CHICAGO, "2027-11", 721),
        (CHICAGO, "2027-07", 744),
        (CHICAGO, "2027-12", 744),
    ],
)
def test_month_hours_follow_the_local_clock(tz: str, month: str, hours: int) -> None:
    period = month_period(tz, month)
    assert period.end - period.start == hours * 3600.0
    assert period.label == month


def steady_month(tz: str, month: str, step: float = 600.0) -> tuple[SiteConfig, pd.DataFrame]:
    site = make_site(tz, tick="10 min")
    period = month_period(tz, month)
    times = np.arange(period.start - 3600.0, period.end + 3600.0, step)
    decisions = [
        decision(t, mode=Mode.FREE_COOLING if (t // 3600) % 2 else Mode.IDLE,
                 targets={"low": 0.5, "high": 0.5} if (t // 3600) % 2 else {"low": 0.0, "high": 0.0},
                 temp_indoor=22.0, temp_outdoor=15.0)
        for t in times.tolist()
    ]  # fmt: skip
    return site, frame(site, decisions)


@pytest.mark.parametrize(
    ("tz", "month", "hours", "change_day", "change_hours"),
    [
        (BERLIN, "2027-03", 743, "2027-03-28", 23),
        (BERLIN, "2027-10", 745, "2027-10-31", 25),
        (CHICAGO, "2027-03", 743, "2027-03-14", 23),
        (CHICAGO, "2027-11", 721, "2027-11-07", 25),
    ],
)
def test_figures_count_dst_months_and_days_exactly(
    tz: str, month: str, hours: int, change_day: str, change_hours: int
) -> None:
    site, records = steady_month(tz, month)
    period = month_period(tz, month)
    figures = compute_figures(records, site, period.start, period.end)
    monthly = figures.monthly.set_index("zone").loc["hall"]
    assert monthly["hours"] == hours
    assert monthly["online_hours"] == pytest.approx(hours, abs=1e-9)
    assert monthly["offline_hours"] == pytest.approx(0.0, abs=1e-9)
    daily = figures.daily[figures.daily["zone"] == "hall"].set_index("date")
    assert len(daily) == int(period.label[-2:] in ("03", "10")) + 30
    assert daily.loc[change_day, "hours"] == change_hours
    assert (daily.drop(index=change_day)["hours"] == 24).all()
    # hourly rows: 23 or 25 on the change day; in autumn one local hour twice
    hourly = figures.hourly[
        (figures.hourly["zone"] == "hall") & (figures.hourly["date"] == change_day)
    ]
    assert len(hourly) == change_hours
    assert bool(hourly["hour"].value_counts().max() == 2) == (change_hours == 25)
    # free cooling every other hour (UTC), so half the month
    assert monthly["mode_free_cooling_hours"] == pytest.approx(hours / 2, abs=0.5)


def test_days_and_ranges() -> None:
    day = day_period(BERLIN, "2027-03-28")
    assert day.hours == 23
    assert day.label == "2027-03-28"
    week = range_period(BERLIN, "2027-06-03", "2027-06-09")
    assert week.hours == 7 * 24  # the --to day is included
    assert week.label == "2027-06-03_2027-06-09"
    noon = range_period(BERLIN, "2027-06-03T12:00", "2027-06-04T12:00")
    assert noon.hours == 24 and noon.kind == "range"
    assert period_between(BERLIN, week.start, week.start + 86400).kind == "day"
    june = month_period(BERLIN, "2027-06")
    assert period_between(BERLIN, june.start, june.end) == june
    with pytest.raises(ReportError, match="expected a month"):
        month_period(BERLIN, "2027-13")
    with pytest.raises(ReportError, match="not after"):
        range_period(BERLIN, "2027-06-09", "2027-06-03")
    with pytest.raises(ReportError, match="expected a date"):
        range_period(BERLIN, "June 3", "2027-06-09")


# --------------------------------------------------------------------------- ledger


def ledger_decisions(start: float, end: float) -> list[Decision]:
    decisions = []
    for t in np.arange(start, end, 600.0).tolist():
        hour = (t // 3600) % 24
        warm = 10 <= hour < 18
        decisions.append(
            decision(
                t,
                mode=Mode.FREE_COOLING if warm else Mode.IDLE,
                targets={"low": 0.6, "high": 0.6} if warm else {"low": 0.0, "high": 0.0},
                temp_indoor=24.0 if warm else 21.0,
                temp_outdoor=18.0,
                wind_speed=2.0,
                wind_direction=180.0,
                occupied=bool(8 <= hour < 18),
            )
        )
    return decisions


@pytest.fixture
def ledger_site(tmp_path: Path) -> tuple[SiteConfig, Path, Path]:
    """A site file and a ledger holding 2027-02-20 to 2027-04-03 (Berlin), every 10 min."""
    text = site_yaml(BERLIN, tick="10 min")
    config_path = tmp_path / "site.yaml"
    config_path.write_text(text, encoding="utf-8")
    site = make_site(BERLIN, tick="10 min")
    ledger_path = tmp_path / "var" / "site.db"
    stopped = (epoch(BERLIN, 2027, 3, 10, 9), epoch(BERLIN, 2027, 3, 10, 9, 30))
    decisions = [
        d
        for d in ledger_decisions(epoch(BERLIN, 2027, 2, 20), epoch(BERLIN, 2027, 4, 3))
        if not stopped[0] <= d.t < stopped[1]
    ]
    with Ledger.open(ledger_path) as ledger:
        ledger.record_decisions(decisions)
        ledger.record_events(
            [
                EventRecord(
                    epoch(BERLIN, 2027, 3, 10, 9), "stop", None, None, "stopped for an update"
                ),
                EventRecord(epoch(BERLIN, 2027, 3, 10, 9, 30), "start", None, None, "started"),
                EventRecord(
                    epoch(BERLIN, 2027, 3, 12, 14), "override", "hall", "pat", "open for an event"
                ),
            ]
        )
    return site, config_path, ledger_path


def test_report_from_the_ledger(ledger_site: tuple[SiteConfig, Path, Path], tmp_path: Path) -> None:
    site, _, ledger_path = ledger_site
    paths = report_from_ledger(site, ledger_path, month="2027-03", out_dir=tmp_path / "out")
    assert paths.html.name == "test-site-2027-03.html"
    assert all(path.exists() for path in paths.all())
    document = json.loads(paths.json.read_text(encoding="utf-8"))
    totals = {row["zone"]: row for row in document["tables"]["totals"]}
    assert totals[SITE]["hours"] == 743
    # the stop at 09:00 ends the 08:50 decision (without it, it would hold to 09:10);
    # the next decision is at 09:30
    assert totals["hall"]["offline_hours"] == pytest.approx(0.5, abs=1e-9)
    assert document["period"]["label"] == "2027-03"
    outages = document["tables"]["outages"]
    assert [o["note"] for o in outages if o["zone"] == SITE] == ["controller stopped"]
    assert [e["kind"] for e in document["tables"]["events"]] == ["stop", "start", "override"]
    # the running mean is known from the first day: the ledger holds the days before
    outdoor = [row for row in document["tables"]["outdoor"] if row["in_period"]]
    assert all(row["temp_running_mean_c"] == pytest.approx(18.0) for row in outdoor)
    summary = pd.read_csv(paths.csv["summary"])
    assert list(summary["period"].unique()) == ["whole period", "2027-03"]
    page = paths.html.read_text(encoding="utf-8")
    for chart in chart_ids(
        compute_figures(
            pd.DataFrame({"t": [], "zone": [], "mode": [], "cause": []}), site, 0.0, 3600.0
        )
    ):
        assert f'id="{chart}"' in page


def test_the_ledgers_own_table_works_but_flags_the_missing_facts(
    ledger_site: tuple[SiteConfig, Path, Path], tmp_path: Path
) -> None:
    site, _, ledger_path = ledger_site
    day = day_period(BERLIN, "2027-03-15")
    with Ledger.open(ledger_path) as ledger:
        table = ledger.decisions_frame(day.start - 1200, day.end)
    paths = write_report(site, table, day.start, day.end, tmp_path / "out")
    document = json.loads(paths.json.read_text(encoding="utf-8"))
    assert any("no input values" in flag for flag in document["flags"])
    hall = {row["zone"]: row for row in document["tables"]["totals"]}["hall"]
    assert hall["mode_free_cooling_hours"] == pytest.approx(8.0)
    assert hall["airflow_flagged"] and hall["comfort_flagged"]


def test_catch_up_writes_what_is_missing_once(
    ledger_site: tuple[SiteConfig, Path, Path], tmp_path: Path
) -> None:
    site, _, ledger_path = ledger_site
    out = tmp_path / "reports"
    with Ledger.open(ledger_path) as ledger:
        now = epoch(BERLIN, 2027, 4, 3, 12)
        missing = missing_reports(site, ledger, now, out)
        assert [p.label for p in missing if p.kind == "month"] == ["2027-02", "2027-03"]
        days = [p.label for p in missing if p.kind == "day"]
        assert days[0] == "2027-02-20" and days[-1] == "2027-04-02" and len(days) == 42
        first = catch_up(site, ledger, now, out)
        assert [p.html.name for p in first.reports] == [
            "test-site-2027-02.html",
            "test-site-2027-03.html",
        ]
        assert len(first.lines) == 42
        assert first.lines[0].startswith("2027-02-20 Test Site: free cooling 8.0 h")
        again = catch_up(site, ledger, now + 3600, out)
        assert again.reports == [] and again.lines == []
        # a month later, after downtime: April and its days, all offline after the 3rd
        later = catch_up(site, ledger, epoch(BERLIN, 2027, 5, 1, 0, 10), out)
        assert [p.html.name for p in later.reports] == ["test-site-2027-04.html"]
        assert len(later.lines) == 28
    lines = pd.read_csv(summary_file(site, out))
    assert lines["date"].is_unique and len(lines) == 42 + 28
    assert lines.set_index("date").loc["2027-04-10", "offline_hours"] == 24.0
    assert lines.set_index("date").loc["2027-03-28", "free_cooling_hours"] == 8.0


def test_the_hourly_job_across_the_spring_change(
    ledger_site: tuple[SiteConfig, Path, Path], tmp_path: Path
) -> None:
    # One job every hour from 26 March to 2 April, at half past (local time keeps the
    # half hour across the change): each day's line and the month's report are written
    # once, on the first run at least 5 minutes after they closed in Berlin.
    site, _, ledger_path = ledger_site
    out = tmp_path / "reports"
    lines: dict[str, float] = {}
    reports: dict[str, float] = {}
    with Ledger.open(ledger_path) as ledger:
        now = epoch(BERLIN, 2027, 3, 26, 0, 30)
        catch_up(site, ledger, now, out)  # the backlog before the sweep
        while now < epoch(BERLIN, 2027, 4, 2, 12):
            now += 3600.0
            result = catch_up(site, ledger, now, out)
            for line in result.lines:
                assert line[:10] not in lines, f"{line[:10]} written twice"
                lines[line[:10]] = now
            for paths in result.reports:
                assert paths.html.name not in reports, f"{paths.html.name} written twice"
                reports[paths.html.name] = now
    assert reports == {"test-site-2027-03.html": epoch(BERLIN, 2027, 4, 1, 0, 30)}
    expected = {f"2027-03-{d:02d}": epoch(BERLIN, 2027, 3, d + 1, 0, 30) for d in range(26, 31)}
    expected["2027-03-31"] = epoch(BERLIN, 2027, 4, 1, 0, 30)
    expected["2027-04-01"] = epoch(BERLIN, 2027, 4, 2, 0, 30)
    assert lines == expected  # the 23-hour 28th included
    summary = pd.read_csv(summary_file(site, out)).set_index("date")
    assert summary["free_cooling_hours"].loc["2027-03-28"] == 8.0


def run_cli(*argv: str) -> int:
    parser = argparse.ArgumentParser(prog="ventsup report")
    add_report_arguments(parser)
    return cli_report(parser.parse_args(list(argv)))


def test_cli_report(
    ledger_site: tuple[SiteConfig, Path, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    _, config_path, ledger_path = ledger_site
    out = tmp_path / "cli-out"
    assert (
        run_cli(
            str(config_path), "--month", "2027-03", "--ledger", str(ledger_path), "--out", str(out)
        )
        == 0
    )
    printed = capsys.readouterr().out
    assert "March 2027 (743 h)" in printed
    assert (out / "test-site-2027-03.html").exists()
    assert (
        run_cli(
            str(config_path),
            "--from",
            "2027-03-01",
            "--to",
            "2027-03-07",
            "--ledger",
            str(ledger_path),
            "--out",
            str(out),
            "--adaptive",
            "ashrae55",
        )
        == 0
    )
    assert (out / "test-site-2027-03-01_2027-03-07.html").exists()
    document = json.loads(
        (out / "test-site-2027-03-01_2027-03-07.json").read_text(encoding="utf-8")
    )
    assert document["adaptive_model"].startswith("ASHRAE 55-2020")
    assert run_cli(str(config_path), "--month", "March", "--ledger", str(ledger_path)) == 2
    assert (
        run_cli(
            str(config_path), "--month", "2027-03", "--from", "2027-03-01", "--to", "2027-03-02"
        )
        == 2
    )
    assert run_cli(str(config_path), "--from", "2027-03-01", "--ledger", str(ledger_path)) == 2
    assert (
        run_cli(str(config_path), "--month", "2027-03", "--ledger", str(tmp_path / "nowhere.db"))
        == 1
    )
    errors = capsys.readouterr().err
    assert "no ledger there" in errors
    assert run_cli(str(tmp_path / "missing.yaml"), "--month", "2027-03") == 2
