"""The demo building and `ventsup demo` as a new user meets them."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from ventsup.cli import main

ROOT = Path(__file__).resolve().parent.parent


@pytest.mark.parametrize("name", ["demo-site.yaml", "demo-site-ip.yaml"])
def test_check_accepts_the_demo_site_in_both_unit_systems(
    name: str, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["check", str(ROOT / "config" / name)]) == 0
    out = capsys.readouterr().out
    assert "Quarry Lane Commons" in out
    assert "OK: 21 points, 3 zones, 6 openings" in out
    # Display units follow the site: the IP twin shows °F and ft², the SI one °C and m².
    assert ("°F" in out and "ft²" in out) if "ip" in name else ("°C" in out and "m²" in out)


def test_bundled_demo_files_are_the_config_folder_files() -> None:
    # ventsup/data holds links, so that `ventsup demo` and config/ can never drift apart.
    for name in ("demo-site.yaml", "demo-site-ip.yaml"):
        bundled = ROOT / "ventsup" / "data" / name
        assert bundled.read_bytes() == (ROOT / "config" / name).read_bytes()


def test_demo_day_replays_the_bundled_day_and_explains_each_change() -> None:
    result = subprocess.run(
        [sys.executable, "-m", "ventsup.cli", "demo", "--day"],
        capture_output=True,
        text=True,
        timeout=300,
        check=False,
    )
    assert result.returncode == 0, result.stderr
    out = result.stdout
    # The invented day carries a smoke drill at 14:09-14:15 and a shower at 12:36-13:00
    # (tools/make_demo_log.py); the decisions must show both with their reasons.
    assert "released to the fire system: smoke alarm commons_smoke active since 14:10" in out
    assert "rain since 12:40 (roof_rain = wet); dry delay 20 min" in out
    assert "Hours by mode" in out
    assert "listed fire system" in out


def test_demo_simulates_the_month_and_writes_its_report(tmp_path: Path) -> None:
    # The main job on embedded defaults, at 10-minute steps to keep the suite quick.
    result = subprocess.run(
        [sys.executable, "-m", "ventsup.cli", "demo", "--step", "600", "--out", str(tmp_path)],
        capture_output=True,
        text=True,
        timeout=600,
        check=False,
    )
    assert result.returncode == 0, result.stderr
    out = result.stdout
    assert "June 2027, per zone" in out
    for zone in ("commons", "classroom_east", "studio_west"):
        assert zone in out
    # The scripted drill (config/demo-scenario.yaml: 2027-06-16 10:30) must release the hall.
    assert "released to the fire system: smoke alarm commons_smoke active since 10:30" in out
    html = tmp_path / "quarry-lane-commons-2027-06.html"
    assert f"Report: {html}" in out
    page = html.read_text(encoding="utf-8")
    assert "listed fire system" in page
    assert (tmp_path / "quarry-lane-commons-2027-06-summary.csv").exists()
    assert "100%" in result.stderr  # progress was shown while it ran
