"""``ventsup replay --rules/--sweep --out``: the variants side by side in the report.

The first variant's report page holds the comparison table (the numbers of
``comparison.csv``, in the site's display units) and, for a sweep, the sweep
chart inline; every other variant has its own report under
``report/<variant>/``, linked both ways. The pages are opened in Debian's
headless chromium (marker ``browser``).
"""

from __future__ import annotations

import argparse
import json
import math
import xml.etree.ElementTree as ET
from dataclasses import dataclass, field
from html.parser import HTMLParser
from pathlib import Path

import pandas as pd
import pytest
import yaml

from tests.reports.browser import chromium, open_page
from ventsup.config.load import load_config
from ventsup.drivers.replay_cli import add_replay_arguments, cli_replay

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "config" / "demo-site.yaml"
DEMO_IP = REPO / "config" / "demo-site-ip.yaml"
DEMO_DAY = REPO / "ventsup" / "data" / "demo-day.csv"
PAGE = "quarry-lane-commons-2027-06-15_2027-06-15.html"


def replay(*argv: str | Path) -> None:
    parser = argparse.ArgumentParser()
    add_replay_arguments(parser)
    code = cli_replay(parser.parse_args([str(a) for a in argv]))
    assert code == 0


def hall_rules(tmp: Path, name: str, open_above: str, close_below: str) -> Path:
    """The demo's hall rules with free cooling between other temperatures."""
    rules = yaml.safe_load(DEMO.read_text(encoding="utf-8"))["rules"]["hall"]
    rules["free_cooling"].update({"open_above": open_above, "close_below": close_below})
    path = tmp / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(yaml.safe_dump({"hall": rules}), encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def rules_out(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The demo day with the site's rules, warmer.yaml and another warmer.yaml (SI site)."""
    tmp = tmp_path_factory.mktemp("rules")
    warmer = hall_rules(tmp, "warmer.yaml", "24 C", "23 C")
    cooler = hall_rules(tmp, "other/warmer.yaml", "22.5 C", "21.5 C")
    replay(DEMO, "--data", DEMO_DAY, "--rules", warmer, cooler, "--out", tmp / "out")
    return tmp / "out"


@pytest.fixture(scope="module")
def sweep_out(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A sweep of the opening temperature over the demo day, at the IP demo site."""
    tmp = tmp_path_factory.mktemp("sweep")
    sweep = "free_cooling.open_above=73F:75F:1F"
    replay(DEMO_IP, "--data", DEMO_DAY, "--sweep", sweep, "--out", tmp / "out")
    return tmp / "out"


@dataclass
class Comparison:
    """What the comparison section of a page holds."""

    columns: list[str] = field(default_factory=list)
    links: dict[str, str] = field(default_factory=dict)
    rows: dict[str, list[str]] = field(default_factory=dict)
    labels: dict[str, str] = field(default_factory=dict)
    all_links: list[str] = field(default_factory=list)


class _Reader(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.found = Comparison()
        self._column: str | None = None
        self._row: str | None = None
        self._cells: list[str] = []
        self._text: list[str] | None = None

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        attributes = dict(attrs)
        if tag == "a" and attributes.get("href"):
            self.found.all_links.append(str(attributes["href"]))
            if self._column is not None:
                self.found.links[self._column] = str(attributes["href"])
        if tag == "th" and attributes.get("data-column") is not None:
            self._column = str(attributes["data-column"])
            self.found.columns.append(self._column)
        if tag == "tr" and attributes.get("data-figure") is not None:
            self._row, self._cells = str(attributes["data-figure"]), []
        if tag == "td" and self._row is not None:
            self._text = []

    def handle_data(self, data: str) -> None:
        if self._text is not None:
            self._text.append(data)

    def handle_endtag(self, tag: str) -> None:
        if tag == "th":
            self._column = None
        if tag == "td" and self._text is not None:
            self._cells.append("".join(self._text))
            self._text = None
        if tag == "tr" and self._row is not None:
            self.found.labels[self._row] = self._cells[0]
            self.found.rows[self._row] = self._cells[1:]
            self._row = None


def read_page(path: Path) -> Comparison:
    reader = _Reader()
    reader.feed(path.read_text(encoding="utf-8"))
    return reader.found


def shown_number(text: str) -> float:
    """A number as the report shows it: thin spaces group thousands, '–' is unknown."""
    text = text.replace("\u202f", "").strip()
    return math.nan if text == "–" else float(text)


def digits_of(figure: str) -> int:
    return 0 if figure in ("moves", "evaluations", "decisions") else 1


def check_table(page: Comparison, csv: pd.DataFrame, *, ip: bool) -> None:
    """Every number of the page's table is the CSV's, as rounded for the page."""
    assert page.columns == list(csv.columns)
    assert list(page.rows) == list(csv.index)
    for figure, cells in page.rows.items():
        assert len(cells) == len(csv.columns), figure
        for text, value in zip(cells, csv.loc[figure], strict=True):
            expected = float(value)
            if figure == "peak_temp_indoor_c" and ip:
                expected = expected * 9.0 / 5.0 + 32.0
            if figure == "cooling_kwh" and ip:
                # ton of refrigeration = 12 000 Btu/h, 1 Btu/h = 0.29307107 W (ASHRAE
                # Handbook—Fundamentals, unit conversions): ton·h = kWh / 3.5168528
                expected = expected / (12_000 * 0.29307107 / 1000.0)
            shown = shown_number(text)
            # half a unit of the last digit shown
            assert abs(shown - expected) <= 0.5 * 10.0 ** -digits_of(figure) + 1e-9, (
                figure,
                text,
                value,
            )


def test_the_comparison_in_the_report_is_comparison_csv(rules_out: Path) -> None:
    csv = pd.read_csv(rules_out / "comparison.csv", index_col="figure")
    page = read_page(rules_out / "report" / PAGE)
    assert list(csv.columns) == ["site", "warmer", "warmer'"]
    check_table(page, csv, ip=False)
    assert page.labels["peak_temp_indoor_c"] == "Highest indoor temperature [°C]"
    assert page.labels["free_cooling_hours"] == "Free cooling [h]"
    # the rules differ, so the numbers do (the warmer hall opens later)
    assert page.rows["free_cooling_hours"][1] != page.rows["free_cooling_hours"][0]


def test_an_ip_site_shows_the_comparison_in_ip_units(sweep_out: Path) -> None:
    csv = pd.read_csv(sweep_out / "comparison.csv", index_col="figure")
    page = read_page(sweep_out / "report" / PAGE)
    assert list(csv.columns) == ["73 F", "74 F", "75 F"]
    check_table(page, csv, ip=True)
    assert page.labels["peak_temp_indoor_c"] == "Highest indoor temperature [°F]"
    assert "<h2>Sweep of free_cooling.open_above</h2>" in (sweep_out / "report" / PAGE).read_text(
        encoding="utf-8"
    )


def test_every_other_variant_has_its_report_linked_both_ways(rules_out: Path) -> None:
    report = rules_out / "report"
    # "warmer" and "warmer'" (two files of one name) get distinct folders and timelines
    assert (report / "warmer" / PAGE).is_file()
    assert (report / "warmer-2" / PAGE).is_file()
    assert (rules_out / "timeline-warmer-2.csv").is_file()
    main = read_page(report / PAGE)
    assert main.links == {"warmer": f"warmer/{PAGE}", "warmer'": f"warmer-2/{PAGE}"}
    for folder in ("warmer", "warmer-2"):
        page = report / folder / PAGE
        text = page.read_text(encoding="utf-8")
        assert 'id="comparison-table"' not in text
        assert "Rules replayed: warmer" in text
        back = [link for link in read_page(page).all_links if link.endswith(".html")]
        assert back == [f"../{PAGE}"]
        assert (page.parent / back[0]).resolve() == (report / PAGE).resolve()


def zone_totals(page: Path) -> pd.DataFrame:
    document = json.loads(page.with_suffix(".json").read_text(encoding="utf-8"))
    return pd.DataFrame(document["tables"]["totals"]).set_index("zone")


def test_each_variant_report_has_its_own_figures(rules_out: Path) -> None:
    """Only the hall's rules differ: its zone's figures differ, the rooms' do not, and each
    report's free-cooling hours are that variant's (figures.csv of the replay)."""
    report = rules_out / "report"
    pages = {"site": report / PAGE, "warmer": report / "warmer" / PAGE}
    pages["warmer'"] = report / "warmer-2" / PAGE
    totals = {name: zone_totals(page) for name, page in pages.items()}
    config = load_config(DEMO)
    hall = [zone for zone in config.zones if config.zones[zone].rules == "hall"]
    rooms = [zone for zone in config.zones if config.zones[zone].rules != "hall"]
    assert hall == ["commons"] and rooms
    column = "mode_free_cooling_hours"
    for zone in hall:
        values = [totals[name].loc[zone, column] for name in pages]
        assert len(set(values)) == 3, values
    for zone in rooms:
        assert len({round(totals[name].loc[zone, column], 9) for name in pages}) == 1
        assert totals["site"].loc[zone].equals(totals["warmer"].loc[zone])
    figures = pd.read_csv(rules_out / "figures.csv")
    for name in pages:
        mine = figures[figures["rules"] == name].set_index("zone")
        for zone in config.zones:
            # the report counts a decision until the next (at most two ticks), the replay a
            # run until the next run: the same on this day to the minute
            assert totals[name].loc[zone, column] == pytest.approx(
                mine.loc[zone, "free_cooling_hours"], abs=1 / 60 + 1e-9
            ), (name, zone)


def test_cooling_delivered_in_the_comparison_is_each_variants_report(rules_out: Path) -> None:
    """The replay computes cooling delivered zone by zone; each variant's report computes it
    over all zones at once (the report's own path): the same kWh per zone and for the site."""
    report = rules_out / "report"
    pages = {"site": report / PAGE, "warmer": report / "warmer" / PAGE}
    figures = pd.read_csv(rules_out / "figures.csv")
    comparison = pd.read_csv(rules_out / "comparison.csv", index_col="figure")
    for name, page in pages.items():
        totals = zone_totals(page)
        mine = figures[figures["rules"] == name].set_index("zone")
        for zone in [*load_config(DEMO).zones, "(site)"]:
            assert mine.loc[zone, "cooling_kwh"] == pytest.approx(
                totals.loc[zone, "cooling_kwh"], rel=1e-9
            ), (name, zone)
        assert comparison.loc["cooling_kwh", name] == pytest.approx(
            totals.loc["(site)", "cooling_kwh"], rel=1e-9
        )
    # the warmer hall opens later: less cooling delivered
    assert comparison.loc["cooling_kwh", "warmer"] < comparison.loc["cooling_kwh", "site"]
    labels = read_page(report / PAGE).labels
    assert labels["cooling_kwh"] == "Cooling delivered (estimate) [kWh]"


def test_one_variant_has_no_comparison_section(tmp_path: Path) -> None:
    replay(DEMO, "--data", DEMO_DAY, "--out", tmp_path)
    text = (tmp_path / "report" / PAGE).read_text(encoding="utf-8")
    assert 'id="comparison"' not in text and 'id="variant"' not in text
    assert [p.name for p in (tmp_path / "report").iterdir() if p.is_dir()] == []


def test_the_sweep_chart_in_the_report_is_the_sweep(sweep_out: Path) -> None:
    """The inline chart is well-formed SVG whose points are the numbers of sweep.csv."""
    text = (sweep_out / "report" / PAGE).read_text(encoding="utf-8")
    start = text.index('<svg id="chart-sweep"')
    chart = ET.fromstring(text[start : text.index("</svg>", start) + len("</svg>")])
    sweep = pd.read_csv(sweep_out / "sweep.csv")
    groups = chart.findall("{*}g")
    assert [g.get("data-series") for g in groups] == [
        "free-cooling hours",
        "hours open",
        "hours above comfort.high",
        "actuator moves",
    ]
    columns = ["free_cooling_hours", "open_hours", "above_comfort_hours", "moves"]
    for group, column in zip(groups, columns, strict=True):
        circles = group.findall("{*}circle")
        assert [float(c.get("data-x", "nan")) for c in circles] == [73.0, 74.0, 75.0]
        values = [float(c.get("data-y", "nan")) for c in circles]
        assert values == pytest.approx(list(sweep[column]), rel=1e-11)
    assert [p.name for p in sorted((sweep_out / "report").iterdir()) if p.is_dir()] == [
        "74-F",
        "75-F",
    ]


@pytest.mark.browser
def test_the_comparison_pages_open_in_chromium(
    rules_out: Path, sweep_out: Path, tmp_path: Path
) -> None:
    pages = [
        (sweep_out / "report" / PAGE, True),
        (rules_out / "report" / PAGE, False),
        (rules_out / "report" / "warmer" / PAGE, None),
    ]
    with chromium(tmp_path) as browser:
        for path, sweep in pages:
            page = open_page(browser, path)
            assert page.problems() == [], path
            assert page.requests() == [path.resolve().as_uri()], path
            rows = page.evaluate("document.querySelectorAll('#comparison-table tbody tr').length")
            if sweep is None:
                assert rows == 0
                continue
            assert rows >= 8
            box = page.evaluate(
                "(() => { const r = document.querySelector('#comparison-table')"
                ".getBoundingClientRect(); return [r.width, r.height]; })()"
            )
            assert box[0] > 500 and box[1] > 100
            # the table is shown as the HTML says: the rendered text has the CSV's columns
            header = page.evaluate(
                "Array.from(document.querySelectorAll('#comparison-table th[data-column]'))"
                ".map(e => e.innerText)"
            )
            columns = list(pd.read_csv(path.parent.parent / "comparison.csv", nrows=0).columns)
            assert [h.removesuffix(" (this page)") for h in header] == columns[1:]
            chart = page.evaluate(
                "(() => { const e = document.querySelector('svg#chart-sweep'); if (!e) return null;"
                " const r = e.getBoundingClientRect();"
                " return [r.width, r.height, e.querySelectorAll('polyline').length]; })()"
            )
            if sweep:
                assert chart is not None and chart[0] > 300 and chart[1] > 300
                assert chart[2] == 4
            else:
                assert chart is None
