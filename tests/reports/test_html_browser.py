"""The report opened in Debian's headless chromium: it loads with no console error and
no network request, shows every chart, draws a screenshot that is not blank, and
prints on A4 and Letter with a white page and each main section on a new page.

These tests need chromium (``apt-get install -y chromium``) and fail without it.
"""

from __future__ import annotations

import base64
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from ventsup.config.model import SiteConfig
from ventsup.core.figures import compute_figures
from ventsup.drivers.reporting import Period, ReportPaths, day_period, write_report
from ventsup.edges.html import chart_ids

from .browser import Page, chromium, open_page, pdf_pages, png_pixels

pytestmark = pytest.mark.browser


@pytest.fixture(scope="module")
def month_report(
    demo_config: SiteConfig,
    month_frame: pd.DataFrame,
    june: Period,
    tmp_path_factory: pytest.TempPathFactory,
) -> tuple[ReportPaths, list[str]]:
    out = tmp_path_factory.mktemp("month")
    paths = write_report(demo_config, month_frame, june.start, june.end, out, generated="test")
    figures = compute_figures(month_frame, demo_config, june.start, june.end)
    return paths, chart_ids(figures)


@pytest.fixture(scope="module")
def day_report_ip(
    demo_ip_config: SiteConfig, demo_frame: pd.DataFrame, tmp_path_factory: pytest.TempPathFactory
) -> tuple[ReportPaths, list[str]]:
    day = day_period(demo_ip_config.site.time_zone, "2027-06-15")
    out = tmp_path_factory.mktemp("day")
    paths = write_report(demo_ip_config, demo_frame, day.start, day.end, out, generated="test")
    figures = compute_figures(demo_frame, demo_ip_config, day.start, day.end)
    return paths, chart_ids(figures)


def check_loaded(page: Page, path: Path, charts: list[str]) -> None:
    assert page.problems() == []
    # the page itself is the only thing it loads
    assert page.requests() == [path.resolve().as_uri()]
    found = page.evaluate("Array.from(document.querySelectorAll('svg[id]')).map(e => e.id)")
    assert sorted(found) == sorted(charts)
    sizes = page.evaluate(
        "Array.from(document.querySelectorAll('svg[id]')).map(e => {"
        " const r = e.getBoundingClientRect(); return [e.id, r.width, r.height]; })"
    )
    for chart, width, height in sizes:
        assert width > 200 and height > 100, chart


def distinct_colours(png: bytes) -> tuple[int, float]:
    pixels = png_pixels(png)[..., :3].reshape(-1, 3)
    colours = len(np.unique(pixels, axis=0))
    not_white = float(np.mean(np.any(pixels < 245, axis=1)))
    return colours, not_white


@pytest.mark.parametrize("which", ["month_report", "day_report_ip"])
def test_the_report_opens_in_chromium(
    which: str, request: pytest.FixtureRequest, tmp_path: Path
) -> None:
    paths, charts = request.getfixturevalue(which)
    with chromium(tmp_path) as browser:
        page = open_page(browser, paths.html)
        check_loaded(page, paths.html, charts)
        height = page.evaluate("document.documentElement.scrollHeight")
        assert height > 3000
        shot = page.screenshot({"x": 0, "y": 0, "width": 1100, "height": height, "scale": 0.5})
        colours, drawn = distinct_colours(shot)
        assert colours > 200, "the page looks blank"
        assert drawn > 0.05
        # each chart on its own is drawn too
        for chart in charts:
            box = page.evaluate(
                f"(() => {{ const r = document.getElementById('{chart}').getBoundingClientRect();"
                " return {x: r.left + scrollX, y: r.top + scrollY, width: r.width, height: r.height}; })()"
            )
            colours, drawn = distinct_colours(page.screenshot({**box, "scale": 1}))
            assert colours >= 6 and drawn > 0.01, chart


def test_the_report_prints(month_report: tuple[ReportPaths, list[str]], tmp_path: Path) -> None:
    paths, _ = month_report
    with chromium(tmp_path) as browser:
        page = open_page(browser, paths.html)
        page.send("Emulation.setEmulatedMedia", {"media": "print"})
        style = page.evaluate(
            "(() => { const b = getComputedStyle(document.body);"
            " const s = Array.from(document.querySelectorAll('section.page'))"
            "   .map(e => getComputedStyle(e).breakBefore);"
            " return {background: b.backgroundColor, breaks: s}; })()"
        )
        assert style["background"] == "rgb(255, 255, 255)"
        assert style["breaks"] and set(style["breaks"]) == {"page"}
        sizes = {"A4": (8.27, 11.69), "Letter": (8.5, 11.0)}
        for name, (width, height) in sizes.items():
            pdf = page.send(
                "Page.printToPDF",
                {"paperWidth": width, "paperHeight": height, "printBackground": True},
            )["data"]
            pages = pdf_pages(base64.b64decode(pdf))
            assert pages >= 1 + len(style["breaks"]), name
        assert page.problems() == []


def test_a_missing_chromium_fails_with_the_fix(monkeypatch: pytest.MonkeyPatch) -> None:
    # the browser tests fail (never skip) when chromium is not there, and say how to fix it
    from . import browser as module

    monkeypatch.setattr(module.os, "access", lambda *args, **kwargs: False)
    monkeypatch.setattr(module.shutil, "which", lambda name: None)
    with pytest.raises(pytest.fail.Exception, match=r"apt-get install -y chromium"):
        module.find_chromium()
