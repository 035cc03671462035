"""The report page as text: self-contained, escaped, in the site's units, with every chart."""

from __future__ import annotations

import html
import re

import pandas as pd
import pytest

from ventsup.config.model import SiteConfig
from ventsup.core.figures import MODES, Figures, compute_figures
from ventsup.core.state import Cause, Mode
from ventsup.demo import CAUTIONS
from ventsup.drivers.reporting import Period, day_period
from ventsup.edges import html as report_html
from ventsup.edges.html import MODE_COLOURS, chart_ids, render_report

from .sites import BERLIN, decision, epoch, frame, make_site


@pytest.fixture(scope="module")
def day(demo_config: SiteConfig) -> Period:
    return day_period(demo_config.site.time_zone, "2027-06-15")


@pytest.fixture(scope="module")
def demo_figures(demo_config: SiteConfig, demo_frame: pd.DataFrame, day: Period) -> Figures:
    return compute_figures(demo_frame, demo_config, day.start, day.end)


def test_the_page_needs_nothing_from_outside(
    demo_config: SiteConfig, demo_figures: Figures
) -> None:
    page = render_report(demo_figures, demo_config, period_label="15 June 2027")
    assert page.startswith("<!DOCTYPE html>")
    assert not re.search(r"\b(src|href)\s*=", page)
    assert "<script" not in page and "@import" not in page and "<link" not in page
    assert set(re.findall(r"https?://[^\"' )]+", page)) == {"http://www.w3.org/2000/svg"}
    for chart in chart_ids(demo_figures):
        assert page.count(f'id="{chart}"') == 1, chart
    for caution in CAUTIONS:
        assert html.escape(caution) in page
    assert "@media print" in page and "break-before: page" in page


def test_every_mode_has_a_colour_and_a_place() -> None:
    assert set(report_html._MODE_ORDER) == set(MODES)
    assert set(MODES) <= set(MODE_COLOURS)


def test_units_follow_the_site(
    demo_config: SiteConfig, demo_ip_config: SiteConfig, demo_figures: Figures
) -> None:
    si = render_report(demo_figures, demo_config, period_label="15 June 2027")
    ip = render_report(demo_figures, demo_ip_config, period_label="15 June 2027")
    assert "[m³/s]" in si and "[kWh]" in si and "20.0–25.0 °C" in si
    assert "[cfm]" in ip and "[ton·h]" in ip and "[ft³]" in ip and "68.0–77.0 °F" in ip
    assert "[m³/s]" not in ip and "[kWh]" not in ip and "m/s" not in ip
    assert "mph" in ip


def test_text_from_the_record_is_escaped() -> None:
    site = make_site(BERLIN)
    start = epoch(BERLIN, 2027, 7, 1)
    decisions = [
        decision(start + k * 600, mode=Mode.OVERRIDE, cause=Cause.OPERATOR,
                 reason="opened by operator <b>pat</b> & co: <script>alert(1)</script>",
                 targets={"low": 1.0, "high": 1.0}, temp_indoor=22.0, temp_outdoor=18.0)
        for k in range(6)
    ]  # fmt: skip
    figures = compute_figures(frame(site, decisions), site, start, start + 3600)
    page = render_report(figures, site, period_label="a test hour")
    assert "<script>" not in page and "<b>pat</b>" not in page
    assert "&lt;b&gt;pat&lt;/b&gt; &amp; co: &lt;script&gt;" in page
    assert "operator override" in page


def test_poor_coverage_is_marked(
    demo_config: SiteConfig, demo_frame: pd.DataFrame, day: Period
) -> None:
    records = demo_frame.copy()
    records.loc[records["zone"] == "commons", "fact:temp_indoor"] = float("nan")
    figures = compute_figures(records, demo_config, day.start, day.end)
    page = render_report(figures, demo_config, period_label="15 June 2027")
    assert "zone commons: temp_indoor known for 0.0 % of the time" in page
    assert page.count('class="num flagged"') >= 5
    assert "⚑" in page
