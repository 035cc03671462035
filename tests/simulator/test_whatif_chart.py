"""``python -m simulator --what-if ... --out DIR``: the table as CSV and its chart as SVG.

The chart is read back as XML: one line per quantity and zone, each point
carrying the value it stands for, which must be the table's.
"""

from __future__ import annotations

import itertools
import math
import xml.etree.ElementTree as ET
from pathlib import Path

import pandas as pd
import pytest

from simulator.__main__ import WHAT_IF_CHART, _what_if_values, main, what_if_svg
from simulator.errors import SimulatorError
from ventsup.edges.charts import Panel, Series, panels_svg

ROOT = Path(__file__).resolve().parents[2]
QUANTITIES = [column for column, *_ in WHAT_IF_CHART]
# The panel titles for an SI site (the demo site).
TITLES = [
    "free-cooling hours [h]",
    "occupied hours above comfort.high [h]",
    "peak indoor temperature [°C]",
]


def lines(svg: ET.Element) -> dict[tuple[str, str], list[tuple[float, float, float]]]:
    """(panel, series) -> [(data-x, data-y, cy)] of each point, from the chart's groups."""
    found = {}
    for group in svg.findall("{*}g"):
        key = (group.get("data-panel", ""), group.get("data-series", ""))
        assert key not in found, key
        assert len(group.findall("{*}polyline")) == 1, key
        found[key] = [
            (
                float(c.get("data-x", "nan")),
                float(c.get("data-y", "nan")),
                float(c.get("cy", "nan")),
            )
            for c in group.findall("{*}circle")
        ]
    return found


def test_what_if_writes_its_table_and_chart(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "what-if"
    status = main(
        [
            "--start",
            "2024-05-01",
            "--end",
            "2024-05-02",
            "--step",
            "3600",
            "--what-if",
            "opening_area=2,0.5,1",
            "--out",
            str(out),
        ]
    )
    printed = capsys.readouterr().out
    assert status == 0
    assert f"wrote {out / 'what-if.csv'}" in printed and f"wrote {out / 'what-if.svg'}" in printed
    table = pd.read_csv(out / "what-if.csv")
    assert list(table.columns[:2]) == ["opening_area", "zone"]
    assert set(QUANTITIES) <= set(table.columns)
    zones = list(dict.fromkeys(table["zone"]))
    assert zones == ["commons", "classroom_east", "studio_west"]

    svg = ET.parse(out / "what-if.svg").getroot()  # well-formed XML
    assert svg.tag == "{http://www.w3.org/2000/svg}svg"
    found = lines(svg)
    # one line per quantity and zone
    assert sorted(found) == sorted((title, zone) for title in TITLES for zone in zones)
    for column, title in zip(QUANTITIES, TITLES, strict=True):
        for zone in zones:
            points = found[(title, zone)]
            mine = table[table["zone"] == zone].sort_values("opening_area")
            # the values against the parameter, in increasing order, are the table's
            assert [x for x, _, _ in points] == [0.5, 1.0, 2.0]
            assert [y for _, y, _ in points] == pytest.approx(list(mine[column]), rel=1e-11)
        # within a panel, a higher value is drawn higher up (a smaller y on the page)
        drawn = sorted(p for zone in zones for p in found[(title, zone)])
        by_value = sorted(drawn, key=lambda p: p[1])
        heights = [cy for _, _, cy in by_value]
        assert all(a >= b - 0.051 for a, b in itertools.pairwise(heights))


def test_what_if_in_the_units_of_an_ip_site(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "what-if"
    status = main(
        [
            "--site",
            str(ROOT / "config" / "demo-site-ip.yaml"),
            "--start",
            "2024-05-01",
            "--end",
            "2024-05-02",
            "--step",
            "3600",
            "--what-if",
            "hall.free_cooling.open_above=75F, 72 degF",
            "--out",
            str(out),
        ]
    )
    assert status == 0, capsys.readouterr().err
    # The table stays SI: 72 °F and 75 °F are (F - 32) x 5/9 °C (the definition
    # of the Fahrenheit scale; the site loader keeps 9 decimals).
    table = pd.read_csv(out / "what-if.csv")
    parameter = "hall.free_cooling.open_above"
    assert sorted(set(table[parameter])) == pytest.approx(
        [(72.0 - 32.0) * 5.0 / 9.0, (75.0 - 32.0) * 5.0 / 9.0], abs=1e-9
    )
    # The chart reads in the site's units: the values as given, temperatures in °F.
    svg = ET.parse(out / "what-if.svg").getroot()
    text = "".join(svg.itertext())
    assert f"{parameter} [°F]" in text
    found = lines(svg)
    peak = "peak indoor temperature [°F]"
    for zone in dict.fromkeys(table["zone"]):
        mine = table[table["zone"] == zone].sort_values(parameter)
        points = found[(peak, zone)]
        assert [x for x, _, _ in points] == pytest.approx([72.0, 75.0], abs=1e-6)
        assert [y for _, y, _ in points] == pytest.approx(
            list(mine["peak_temperature"] * 9.0 / 5.0 + 32.0), rel=1e-11
        )


def test_what_if_values_are_read_with_their_units(capsys: pytest.CaptureFixture[str]) -> None:
    assert _what_if_values("free_cooling.open_above=22, 23.5,74 F") == (
        "free_cooling.open_above",
        [22.0, 23.5, "74 F"],
    )
    with pytest.raises(SimulatorError, match=r"'warm' in 'comfort\.high=warm' is not a number"):
        _what_if_values("comfort.high=warm")
    with pytest.raises(SimulatorError, match="expected some values"):
        _what_if_values("comfort.high=,")
    status = main(
        ["--start", "2024-05-01", "--end", "2024-05-02", "--what-if", "opening_area=2 m2"]
    )
    assert status == 2
    assert "opening_area: got '2 m2', expected a number (a factor)" in capsys.readouterr().err


def test_what_if_svg_orders_values_and_leaves_out_unknowns() -> None:
    index = pd.MultiIndex.from_tuples(
        [(2.0, "hall"), (0.5, "hall"), (1.0, "hall")], names=["hall.comfort.high", "zone"]
    )
    table = pd.DataFrame(
        {
            "free_cooling_hours": [3.0, 1.0, 2.0],
            "hours_above_comfort": [0.0, 4.0, 1.5],
            "peak_temperature": [27.0, math.nan, 28.0],
            "cooling_kwh": [0.0, 0.0, 0.0],
        },
        index=index,
    )
    svg = ET.fromstring(what_if_svg(table, "test"))
    found = lines(svg)
    assert [(x, y) for x, y, _ in found[(TITLES[0], "hall")]] == [
        (0.5, 1.0),
        (1.0, 2.0),
        (2.0, 3.0),
    ]
    assert [(x, y) for x, y, _ in found[(TITLES[2], "hall")]] == [(1.0, 28.0), (2.0, 27.0)]
    assert "hall.comfort.high (SI)" in "".join(svg.itertext())


def test_out_without_what_if_is_refused(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    status = main(["--start", "2024-05-01", "--end", "2024-05-02", "--out", str(tmp_path)])
    assert status == 2
    assert "--out writes the what-if table and chart; give --what-if too" in capsys.readouterr().err


def test_a_series_of_the_wrong_length_is_refused() -> None:
    panel = Panel("hours", (Series("hall", (1.0, 2.0)),))
    with pytest.raises(ValueError, match="series 'hall' has 2 values for 3 points"):
        panels_svg([1.0, 2.0, 3.0], ["1", "2", "3"], [panel], title="t", x_title="x")
