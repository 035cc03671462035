"""The daemon's hourly report catch-up (ReportJob), without a broker."""

from __future__ import annotations

from datetime import datetime
from pathlib import Path
from zoneinfo import ZoneInfo

from ventsup.config import load_config
from ventsup.drivers.replay import replay
from ventsup.drivers.reporting import summary_file
from ventsup.drivers.service import ReportJob
from ventsup.edges.clock import ManualClock
from ventsup.edges.ledger import Ledger
from ventsup.edges.logs import read_wide_csv

ROOT = Path(__file__).resolve().parents[2]
CHICAGO = ZoneInfo("America/Chicago")


def test_report_job_writes_the_closed_month_once_and_only_when_closed(tmp_path: Path) -> None:
    config = load_config(ROOT / "config" / "demo-site.yaml")
    samples = read_wide_csv(ROOT / "ventsup" / "data" / "demo-day.csv", config)
    decisions = list(replay(config, samples, samples[0].t, samples[-1].t + 300.0, 300.0))
    out = tmp_path / "reports"
    clock = ManualClock(datetime(2027, 6, 30, 12, 0, tzinfo=CHICAGO).timestamp())
    with Ledger.open(tmp_path / "site.db") as ledger:
        ledger.record_decisions(decisions)
        job = ReportJob(config, ledger, clock, out)

        # June 30 noon, site time: the bundled day (June 15) has closed, June has not.
        assert job.run_once() >= 1
        assert "2027-06-15" in summary_file(config, out).read_text(encoding="utf-8")
        assert not (out / "quarry-lane-commons-2027-06.html").exists()

        # July 1, 00:10 in Chicago (05:10 UTC): June has closed in the site's time zone.
        clock.set(datetime(2027, 7, 1, 0, 10, tzinfo=CHICAGO).timestamp())
        assert job.run_once() >= 1
        page = out / "quarry-lane-commons-2027-06.html"
        assert page.exists()
        written = page.stat().st_mtime_ns

        # An hour later nothing is missing: nothing is written again.
        clock.set(datetime(2027, 7, 1, 1, 10, tzinfo=CHICAGO).timestamp())
        assert job.run_once() == 0
        assert page.stat().st_mtime_ns == written
