"""The monthly report as one self-contained HTML page: tables, inline SVG charts, print style.

:func:`render_report` turns :class:`~ventsup.core.figures.Figures` into the
text of an HTML page that needs nothing else: no scripts, no fonts, no images
or styles from the network (every chart is inline SVG drawn here, the fonts
are the reader's own sans-serif). It writes no file; the caller does
(:mod:`ventsup.drivers.reporting`).

Every quantity is shown in the site's display units (``site.units``: SI or
IP); the TM52 temperature differences stay in kelvin, the unit its criteria
are written in, with °F beside them for an IP site. The print style sheet
fits A4 and Letter (the reader's paper size; margins only), keeps a white
background, and starts each main section on a new page.

Sections, in order: the data-quality note, any extra sections the caller
gives (``ventsup replay`` adds :func:`comparison_section`, rule sets side by
side or a sweep, or :func:`variant_section`), summary, hours by mode (one bar chart per zone),
temperatures with the opening overlaid (one chart per zone), opening by hour
and day (one heat map per zone), hours closed for wind (a wind rose), alarms
overrides and faults, actuator moves, controller offline, data coverage,
method, safety. :func:`chart_ids` lists the ids of the charts a page holds.
"""

from __future__ import annotations

import html
import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from datetime import datetime
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd

from ventsup.config.model import SiteConfig
from ventsup.config.units import UnitSystem
from ventsup.core import physics
from ventsup.core.figures import CAUSES, COMPASS, SITE, WIND_SPEED_EDGES, Figures
from ventsup.demo import CAUTIONS

__all__ = [
    "MODE_COLOURS",
    "chart_ids",
    "comparison_section",
    "render_report",
    "variant_section",
]

#: Fill colour of each mode in the charts, and of time without decisions.
MODE_COLOURS: dict[str, str] = {
    "free_cooling": "#2b8c84",
    "night_flush": "#3d5a80",
    "air_quality": "#8fbf6a",
    "override": "#e0b83a",
    "protected": "#d9643a",
    "released": "#a23b72",
    "fire_position": "#6d2e8c",
    "fault": "#9b2226",
    "interlock": "#f2a65a",
    "held": "#7d8590",
    "secured": "#b7bcc3",
    "unoccupied": "#c9d4e0",
    "idle": "#e1e4e8",
    "offline": "#ffffff",
}

_MODE_LABELS = {
    "free_cooling": "free cooling",
    "night_flush": "night flush",
    "air_quality": "air quality (CO₂)",
    "override": "operator override",
    "protected": "protected (weather, actuator)",
    "released": "released to fire system",
    "fire_position": "fire strategy position",
    "fault": "input fault",
    "interlock": "heating interlock",
    "held": "held (actuator care)",
    "secured": "security window",
    "unoccupied": "unoccupied, closed",
    "idle": "automatic, closed",
    "offline": "no record (offline)",
}
_CAUSE_LABELS = {
    "smoke": "Smoke alarm (released to the fire system)",
    "rain": "Rain",
    "wind": "Wind",
    "cold": "Cold outdoor air",
    "actuator": "Actuator fault",
    "fault": "Input fault (sensor value unknown)",
    "operator": "Operator override",
    "schedule": "Schedule and security window",
    "interlock": "Heating interlock",
}
# Bottom to top in the bars: open first, then limited, then closed.
_MODE_ORDER = (
    "free_cooling",
    "night_flush",
    "air_quality",
    "override",
    "held",
    "interlock",
    "protected",
    "fault",
    "released",
    "fire_position",
    "secured",
    "unoccupied",
    "idle",
)
_INPUT_LABELS = {
    "decision record": "Decision record (controller online)",
    "temp_indoor": "Indoor temperature",
    "occupied": "Occupancy (schedule, as recorded)",
    "temp_outdoor": "Outdoor temperature",
    "dew_point_outdoor": "Outdoor dew point (or humidity)",
    "wind_speed": "Wind speed",
    "wind_direction": "Wind direction",
    "rain": "Rain sensor",
    "co2": "CO₂",
    "heating": "Heating status (plant)",
}
_INDOOR = "#b23a48"
_OUTDOOR = "#2f6690"
_OPEN_FILL = "#9fd3cd"
_GRID = "#d9dce1"
_INK = "#1f2328"
_MUTED = "#5b636e"
_NO_DATA = "#f3f4f6"
_SPEED_COLOURS = ("#cfe8e4", "#8cc7bf", "#3f9a90", "#1d5f58", "#c9ccd1")  # last: unknown speed

_FT = 0.3048


def _slug(name: str) -> str:
    return "".join(c if c.isalnum() or c in "-_" else "-" for c in name)


def chart_ids(figures: Figures) -> list[str]:
    """The ``id`` of every chart (SVG) that :func:`render_report` draws for ``figures``."""
    ids: list[str] = []
    for kind in ("modes", "temperature", "heatmap"):
        ids += [f"chart-{kind}-{_slug(zone)}" for zone in figures.zones]
    ids.append("chart-windrose")
    return ids


# --------------------------------------------------------------------------- units


@dataclass(frozen=True)
class _Units:
    system: UnitSystem

    @property
    def ip(self) -> bool:
        return self.system == "IP"

    def temp(self, celsius: float) -> float:
        return celsius * 9.0 / 5.0 + 32.0 if self.ip else celsius

    @property
    def temp_unit(self) -> str:
        return "°F" if self.ip else "°C"

    def flow(self, m3s: float) -> float:
        return physics.cubic_metres_per_second_to_cfm(m3s) if self.ip else m3s

    @property
    def flow_unit(self) -> str:
        return "cfm" if self.ip else "m³/s"

    def volume(self, m3: float) -> float:
        return m3 / _FT**3 if self.ip else m3

    @property
    def volume_unit(self) -> str:
        return "ft³" if self.ip else "m³"

    def energy(self, kwh: float) -> float:
        return kwh / (physics.tons_to_watts(1.0) / 1000.0) if self.ip else kwh

    @property
    def energy_unit(self) -> str:
        return "ton·h" if self.ip else "kWh"

    def speed(self, ms: float) -> float:
        return ms * 3600.0 / 1609.344 if self.ip else ms

    @property
    def speed_unit(self) -> str:
        return "mph" if self.ip else "m/s"


def _number(value: float, digits: int = 1) -> str:
    if value is None or not math.isfinite(value):
        return "–"
    text = f"{value:,.{digits}f}"
    return text.replace(",", "\u202f")  # a thin space groups thousands in either system


def _esc(text: object) -> str:
    return html.escape(str(text), quote=True)


# --------------------------------------------------------------------------- page


def render_report(
    figures: Figures,
    config: SiteConfig,
    *,
    period_label: str,
    generated: str = "",
    cautions: Sequence[str] = CAUTIONS,
    extra_sections: Sequence[str] = (),
) -> str:
    """The report page for ``figures`` as HTML text.

    Parameters
    ----------
    figures : Figures
        What :func:`ventsup.core.figures.compute_figures` returned.
    config : SiteConfig
        The site (display units, comfort bands, openings).
    period_label : str
        How to name the period, e.g. ``"June 2027"``.
    generated : str, optional
        When and by what the page was made, printed in the footer.
    cautions : sequence of str
        The safety cautions printed at the end (default: ventsup's own).
    extra_sections : sequence of str
        HTML of further sections, placed as given after the data-quality note
        and before the summary (such as :func:`comparison_section`); the
        caller escapes what they hold.
    """
    units = _Units(config.site.units)
    tz = ZoneInfo(figures.time_zone)
    first = datetime.fromtimestamp(figures.start, tz)
    last = datetime.fromtimestamp(figures.end, tz)
    title = f"Free cooling and window report: {figures.site}, {period_label}"
    body = [
        "<header>",
        f"<h1>{_esc(title)}</h1>",
        f'<p class="lede">{_esc(first.strftime("%Y-%m-%d %H:%M"))} to '
        f"{_esc(last.strftime('%Y-%m-%d %H:%M'))} ({_esc(figures.time_zone)}), "
        f"{_number((figures.end - figures.start) / 3600.0, 0)} h. "
        f"Zones: {_esc(', '.join(figures.zones))}. Units: {_esc(config.site.units)}. "
        f"Adaptive comfort: {_esc(figures.adaptive_model)}.</p>",
        "</header>",
        _flags_section(figures),
        *extra_sections,
        _summary_section(figures, config, units, period_label),
        _modes_section(figures),
        _temperature_section(figures, config, units),
        _heatmap_section(figures),
        _wind_section(figures, units),
        _episodes_section(figures, tz),
        _moves_section(figures),
        _outages_section(figures, tz),
        _coverage_section(figures),
        _method_section(figures),
        _safety_section(cautions),
        f"<footer><p>{_esc(generated)}</p></footer>" if generated else "",
    ]
    return (
        "<!DOCTYPE html>\n"
        '<html lang="en">\n<head>\n<meta charset="utf-8">\n'
        '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
        f"<title>{_esc(title)}</title>\n<style>{_STYLE}</style>\n</head>\n<body>\n"
        + "\n".join(part for part in body if part)
        + "\n</body>\n</html>\n"
    )


_STYLE = """
:root { color-scheme: light; }
* { box-sizing: border-box; }
body { margin: 0 auto; max-width: 1040px; padding: 24px 28px 48px; background: #ffffff;
  color: #1f2328; font: 15px/1.45 system-ui, -apple-system, "Segoe UI", Roboto,
  "Helvetica Neue", Arial, "Noto Sans", "DejaVu Sans", sans-serif; }
h1 { font-size: 1.55rem; margin: 0 0 .3rem; }
h2 { font-size: 1.2rem; margin: 2.2rem 0 .6rem; padding-bottom: .2rem;
  border-bottom: 2px solid #d9dce1; }
h3 { font-size: 1rem; margin: 1.2rem 0 .4rem; }
p { margin: .4rem 0; }
.lede { color: #5b636e; }
.note { color: #5b636e; font-size: .9rem; }
table { border-collapse: collapse; width: 100%; margin: .4rem 0 1rem; font-size: .9rem; }
th, td { padding: .28rem .5rem; border-bottom: 1px solid #e3e5e8; vertical-align: top; }
th { text-align: left; font-weight: 600; background: #f6f7f9; }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; }
td.num { white-space: nowrap; }
tr.group td { font-weight: 600; background: #fbfbfc; padding-top: .6rem; }
.flagged { background: #fff4d6; }
.flag { color: #9a6700; font-weight: 700; }
.pass { color: #1a7f37; font-weight: 600; }
.fail { color: #b3261e; font-weight: 600; }
.flags { border: 1px solid #e9c46a; background: #fffaeb; padding: .6rem .9rem; margin: 1rem 0; }
.flags ul { margin: .3rem 0 0 1.1rem; padding: 0; }
figure { margin: .6rem 0 1.2rem; break-inside: avoid; }
figcaption { font-size: .9rem; color: #5b636e; margin-bottom: .3rem; }
svg { display: block; width: 100%; height: auto; max-width: 100%; }
svg text { font-family: inherit; fill: #1f2328; }
.legend { display: flex; flex-wrap: wrap; gap: .3rem 1rem; font-size: .85rem; margin: .2rem 0 .8rem; }
.legend span { display: inline-flex; align-items: center; gap: .35rem; }
.swatch { display: inline-block; width: .9rem; height: .9rem; border: 1px solid #9aa0a6; }
.rose { display: flex; flex-wrap: wrap; gap: 1rem 2rem; align-items: flex-start; }
.rose figure { flex: 0 1 460px; }
.rose table { flex: 1 1 260px; width: auto; }
.cautions { border-left: 4px solid #b3261e; padding: .3rem .9rem; }
#comparison-chart svg { max-width: 720px; }
footer { margin-top: 2rem; color: #5b636e; font-size: .85rem; }
@media print {
  @page { margin: 14mm 12mm; }
  body { max-width: none; padding: 0; font-size: 10.5pt; background: #ffffff; }
  section.page { break-before: page; }
  h2 { break-after: avoid; }
  table, figure, tr { break-inside: avoid; }
  * { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
  a { color: inherit; text-decoration: none; }
}
"""


# --------------------------------------------------------------------------- sections


def _flags_section(figures: Figures) -> str:
    if not figures.flags:
        return (
            '<section class="flags" id="data-quality"><strong>Data quality:</strong> every '
            f"figure of the summary rests on at least {_number(100 * figures.coverage_threshold, 0)} % of its "
            "input data.</section>"
        )
    items = "".join(f"<li>{_esc(flag)}</li>" for flag in figures.flags)
    return (
        '<section class="flags" id="data-quality"><strong><span class="flag">⚑</span> '
        "Data quality:</strong> these figures rest on less than "
        f"{_number(100 * figures.coverage_threshold, 0)} % of their input data and are marked "
        "⚑ below. Missing data is never filled in; the figures count only what was recorded."
        f"<ul>{items}</ul></section>"
    )


@dataclass(frozen=True)
class _Row:
    label: str
    render: Callable[[pd.Series], str]
    flag: str | None = None


def _hours(column: str, digits: int = 1) -> Callable[[pd.Series], str]:
    return lambda row: _number(float(row[column]), digits)


def _hours_share(column: str, base: str) -> Callable[[pd.Series], str]:
    def render(row: pd.Series) -> str:
        value, total = float(row[column]), float(row[base])
        share = f" ({_number(100.0 * value / total, 0)} %)" if total > 0 else ""
        return _number(value) + share

    return render


def _summary_rows(config: SiteConfig, units: _Units, figures: Figures) -> list[_Row | str]:
    bands = {config.rules_for(zone).comfort for zone in figures.zones}
    if len(bands) == 1:
        band = next(iter(bands))
        band_text = (
            f"{_number(units.temp(band.low))}–{_number(units.temp(band.high))} {units.temp_unit}"
        )
    else:
        band_text = "each zone's rules.comfort"
    cause_rows: list[_Row | str] = [
        _Row(_CAUSE_LABELS[cause], _hours(f"cause_{cause}_hours")) for cause in CAUSES
    ]
    return [
        "Time",
        _Row("Hours in the period", _hours("hours", 0)),
        _Row("Controller recording", _hours("online_hours"), "record_flagged"),
        _Row("No record (offline)", _hours("offline_hours")),
        "Windows open",
        _Row("Free cooling", _hours("mode_free_cooling_hours")),
        _Row("Night flush", _hours("mode_night_flush_hours")),
        _Row("Air quality minimum opening", _hours("mode_air_quality_hours")),
        _Row("Open for any cause", _hours("open_hours")),
        "Closed, limited or overridden, by cause [h]",
        *cause_rows,
        "Outdoor air and cooling (estimates)",
        _Row(
            f"Outdoor air through the openings [{units.volume_unit}]",
            lambda row: _number(units.volume(float(row["air_volume_m3"])), 0),
            "airflow_flagged",
        ),
        _Row(
            f"Mean airflow while open [{units.flow_unit}]",
            lambda row: _number(units.flow(float(row["airflow_mean_m3s"])), 0 if units.ip else 2),
            "airflow_flagged",
        ),
        _Row(
            f"Highest hourly mean airflow [{units.flow_unit}]",
            lambda row: _number(units.flow(float(row["airflow_peak_m3s"])), 0 if units.ip else 2),
            "airflow_flagged",
        ),
        _Row(
            f"Cooling delivered [{units.energy_unit}]",
            lambda row: _number(units.energy(float(row["cooling_kwh"]))),
            "airflow_flagged",
        ),
        _Row(
            f"Heat let in while outdoors was warmer [{units.energy_unit}]",
            lambda row: _number(units.energy(float(row["heat_gain_kwh"]))),
            "airflow_flagged",
        ),
        "Comfort while occupied [h, share of occupied hours]",
        _Row("Occupied hours", _hours("occupied_hours")),
        _Row(
            f"Inside the fixed band {band_text}",
            _hours_share("comfort_fixed_hours", "occupied_hours"),
            "comfort_flagged",
        ),
        _Row("Below the fixed band", _hours_share("comfort_fixed_below_hours", "occupied_hours"), "comfort_flagged"),
        _Row("Above the fixed band", _hours_share("comfort_fixed_above_hours", "occupied_hours"), "comfort_flagged"),
        _Row(
            "Inside the adaptive band",
            _hours_share("comfort_adaptive_hours", "occupied_hours"),
            "adaptive_flagged",
        ),
        _Row("Below the adaptive band", _hours_share("comfort_adaptive_below_hours", "occupied_hours"), "adaptive_flagged"),
        _Row("Above the adaptive band", _hours_share("comfort_adaptive_above_hours", "occupied_hours"), "adaptive_flagged"),
        _Row(
            "Overheating hours (TM52: ΔT ≥ 1 K)",
            _hours_share("overheating_hours", "tm52_assessed_hours"),
            "tm52_flagged",
        ),
        "Actuators",
        _Row("Moves (all openings)", _hours("moves", 0)),
        _Row("Travel (full strokes)", _hours("travel", 1)),
    ]  # fmt: skip


def _table(
    rows: Sequence[_Row | str], table: pd.DataFrame, columns: Sequence[str], headers: Sequence[str]
) -> str:
    by_zone = {str(row["zone"]): row for _, row in table.iterrows()}
    head = "".join(f'<th class="num">{_esc(h)}</th>' for h in headers)
    lines = [f"<table><thead><tr><th>Figure</th>{head}</tr></thead><tbody>"]
    for spec in rows:
        if isinstance(spec, str):
            lines.append(
                f'<tr class="group"><td colspan="{len(columns) + 1}">{_esc(spec)}</td></tr>'
            )
            continue
        cells = []
        for zone in columns:
            row = by_zone.get(zone)
            if row is None:
                cells.append('<td class="num">–</td>')
                continue
            flagged = spec.flag is not None and bool(row[spec.flag])
            mark = ' <span class="flag" title="poor data coverage">⚑</span>' if flagged else ""
            css = "num flagged" if flagged else "num"
            cells.append(f'<td class="{css}">{_esc(spec.render(row))}{mark}</td>')
        lines.append(f"<tr><td>{_esc(spec.label)}</td>{''.join(cells)}</tr>")
    lines.append("</tbody></table>")
    return "".join(lines)


def _summary_section(figures: Figures, config: SiteConfig, units: _Units, period_label: str) -> str:
    columns = [SITE, *figures.zones]
    headers = ["Whole site", *figures.zones]
    rows = _summary_rows(config, units, figures)
    parts = [
        '<section id="summary">',
        f"<h2>Summary, {_esc(period_label)}</h2>",
        '<p class="note">Whole site: hours in which at least one zone was in that state '
        "(comfort: every occupied zone inside the band); air, cooling and moves summed over "
        "the zones. ⚑ marks a figure resting on too little data.</p>",
        _table(rows, figures.totals, columns, headers),
    ]
    months = figures.monthly["month"].unique().tolist()
    if len(months) > 1:
        for month in months:
            part = figures.monthly[figures.monthly["month"] == month]
            parts.append(f"<h3>{_esc(month)}</h3>")
            parts.append(_table(rows, part, columns, headers))
    parts.append(_overheating_table(figures, units))
    parts.append("</section>")
    return "".join(parts)


def _verdict(value: object) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "–"
    return '<span class="pass">pass</span>' if bool(value) else '<span class="fail">fail</span>'


def _overheating_table(figures: Figures, units: _Units) -> str:
    lines = [
        "<h3>Overheating: the three criteria of CIBSE TM52</h3>",
        '<p class="note">Over the assessed occupied hours of this period (TM52 assesses May to '
        "September); ΔT is the indoor temperature above T<sub>max</sub> = 0.33·T<sub>rm</sub> + "
        "21.8 °C, rounded to whole kelvin. A space fails when two criteria fail.</p>",
        "<table><thead><tr><th>Zone</th><th class=num>Assessed hours</th>"
        "<th class=num>1: hours ΔT ≥ 1 K (≤ 3 %)</th><th class=num>2: daily weighted "
        "exceedance (≤ 6 K·h)</th><th class=num>3: largest ΔT (&lt; 4 K)</th><th>Result</th>"
        "</tr></thead><tbody>",
    ]
    for row in figures.overheating.to_dict(orient="records"):
        mark = ' <span class="flag" title="poor data coverage">⚑</span>' if row["flagged"] else ""
        if row["occupied_hours"] is None or (
            isinstance(row["occupied_hours"], float) and math.isnan(row["occupied_hours"])
        ):
            lines.append(
                f"<tr><td>{_esc(row['zone'])}</td><td colspan=5>{_esc(row['note'])}{mark}</td></tr>"
            )
            continue
        delta = float(row["delta_temperature_max"])
        delta_text = f"{_number(delta, 0)} K" + (
            f" ({_number(delta * 1.8, 1)} °F)" if units.ip else ""
        )
        lines.append(
            f"<tr><td>{_esc(row['zone'])}</td>"
            f"<td class=num>{_number(float(row['occupied_hours']), 0)} of "
            f"{_number(float(row['occupied_whole_hours']), 0)}{mark}</td>"
            f"<td class=num>{_number(float(row['hours_of_exceedance']), 0)} h "
            f"({_number(float(row['hours_of_exceedance_percent']), 1)} %) "
            f"{_verdict(row['hours_of_exceedance_pass'])}</td>"
            f"<td class=num>{_number(float(row['daily_weighted_exceedance_max']), 0)} K·h "
            f"{_verdict(row['daily_weighted_exceedance_pass'])}</td>"
            f"<td class=num>{_esc(delta_text)} {_verdict(row['upper_limit_pass'])}</td>"
            f"<td>{_verdict(row['passed'])}</td></tr>"
        )
    lines.append("</tbody></table>")
    return "".join(lines)


# --------------------------------------------------------------------------- charts


def _legend(items: Sequence[tuple[str, str]]) -> str:
    spans = "".join(
        f'<span><i class="swatch" style="background:{colour}"></i>{_esc(label)}</span>'
        for colour, label in items
    )
    return f'<div class="legend">{spans}</div>'


def _svg_open(chart_id: str, width: int, height: int, label: str) -> str:
    return (
        f'<svg id="{_esc(chart_id)}" xmlns="http://www.w3.org/2000/svg" role="img" '
        f'viewBox="0 0 {width} {height}" aria-label="{_esc(label)}"><title>{_esc(label)}</title>'
        f'<rect x="0" y="0" width="{width}" height="{height}" fill="#ffffff"/>'
    )


def _text(x: float, y: float, text: str, *, anchor: str = "middle", size: int = 11, colour: str = _MUTED, extra: str = "") -> str:  # fmt: skip
    return (
        f'<text x="{x:.1f}" y="{y:.1f}" text-anchor="{anchor}" font-size="{size}" '
        f'style="fill:{colour}" {extra}>{_esc(text)}</text>'
    )


def _modes_section(figures: Figures) -> str:
    modes_present = [
        mode for mode in _MODE_ORDER if float(figures.totals[f"mode_{mode}_hours"].sum()) > 0.0
    ]
    legend = [(MODE_COLOURS[m], _MODE_LABELS[m]) for m in modes_present]
    legend.append(
        (
            "repeating-linear-gradient(45deg, #7d8590 0 1.5px, #ffffff 1.5px 4px)",
            _MODE_LABELS["offline"],
        )
    )
    parts = [
        '<section class="page" id="modes"><h2>Hours by mode, day by day</h2>',
        '<p class="note">Each bar is one day of one zone: the hours spent in each mode; the '
        "hatched part at the top is time without a record.</p>",
        _legend(legend),
    ]
    for zone in figures.zones:
        daily = figures.daily[figures.daily["zone"] == zone]
        parts.append(
            f"<figure><figcaption>{_esc(zone)}</figcaption>"
            f"{_mode_bars(daily, modes_present, f'chart-modes-{_slug(zone)}', zone)}</figure>"
        )
    parts.append("</section>")
    return "".join(parts)


def _mode_bars(daily: pd.DataFrame, modes: Sequence[str], chart_id: str, zone: str) -> str:
    width, height = 960, 230
    left, right, top, bottom = 44, 12, 10, 34
    plot_w, plot_h = width - left - right, height - top - bottom
    n = max(len(daily), 1)
    slot = plot_w / n
    bar = min(max(slot * 0.78, 1.0), 40.0)
    scale = plot_h / 25.0
    out = [
        _svg_open(chart_id, width, height, f"Hours by mode per day, {zone}"),
        f'<defs><pattern id="{chart_id}-hatch" width="6" height="6" '
        'patternUnits="userSpaceOnUse" patternTransform="rotate(45)">'
        '<rect width="6" height="6" fill="#ffffff"/>'
        '<line x1="0" y1="0" x2="0" y2="6" stroke="#7d8590" stroke-width="1.5"/></pattern></defs>',
    ]
    for grid in (0, 6, 12, 18, 24):
        y = top + plot_h - grid * scale
        out.append(
            f'<line x1="{left}" x2="{width - right}" y1="{y:.1f}" y2="{y:.1f}" stroke="{_GRID}" stroke-width="1"/>'
        )
        out.append(_text(left - 6, y + 4, f"{grid} h", anchor="end"))
    step = max(1, math.ceil(n / 16))
    for i, row in enumerate(daily.to_dict(orient="records")):
        x = left + i * slot + (slot - bar) / 2
        y = float(top + plot_h)
        for mode in modes:
            hours = float(row[f"mode_{mode}_hours"])
            if hours <= 0:
                continue
            h = hours * scale
            y -= h
            out.append(
                f'<rect x="{x:.2f}" y="{y:.2f}" width="{bar:.2f}" height="{h:.2f}" '
                f'fill="{MODE_COLOURS[mode]}"><title>{_esc(row["date"])}: '
                f"{_esc(_MODE_LABELS[mode])} {hours:.1f} h</title></rect>"
            )
        offline = max(float(row["hours"]) - float(row["online_hours"]), 0.0) * scale
        if offline > 0.0:
            out.append(
                f'<rect x="{x:.2f}" y="{y - offline:.2f}" width="{bar:.2f}" height="{offline:.2f}" '
                f'fill="url(#{chart_id}-hatch)"><title>{_esc(row["date"])}: no record '
                f"{offline / scale:.1f} h</title></rect>"
            )
        total = float(row["hours"]) * scale
        out.append(
            f'<rect x="{x:.2f}" y="{top + plot_h - total:.2f}" width="{bar:.2f}" '
            f'height="{total:.2f}" fill="none" stroke="#8c939c" stroke-width="0.8"/>'
        )
        if i % step == 0:
            out.append(_text(x + bar / 2, height - bottom + 16, str(row["date"])[8:10]))
    out.append(_text(left + plot_w / 2, height - 4, "day of month", size=11))
    out.append("</svg>")
    return "".join(out)


def _temperature_section(figures: Figures, config: SiteConfig, units: _Units) -> str:
    parts = [
        '<section class="page" id="temperatures"><h2>Temperatures and opening</h2>',
        '<p class="note">Hourly means: indoor (the zone\'s control temperature) and outdoor '
        "temperature, with the commanded opening (share of the zone's opening area) shaded "
        "against the right-hand scale; the grey band is the fixed comfort band.</p>",
        _legend(
            [
                (_INDOOR, "indoor"),
                (_OUTDOOR, "outdoor"),
                (_OPEN_FILL, "opening, % of area"),
                ("#eef0f2", "fixed comfort band"),
            ]
        ),
    ]
    for zone in figures.zones:
        hourly = figures.hourly[figures.hourly["zone"] == zone]
        band = config.rules_for(zone).comfort
        parts.append(
            f"<figure><figcaption>{_esc(zone)}</figcaption>"
            f"{_temperature_chart(hourly, figures, units, (band.low, band.high), zone)}</figure>"
        )
    parts.append("</section>")
    return "".join(parts)


def _temperature_chart(
    hourly: pd.DataFrame, figures: Figures, units: _Units, band: tuple[float, float], zone: str
) -> str:
    width, height = 960, 270
    left, right, top, bottom = 48, 48, 12, 36
    plot_w, plot_h = width - left - right, height - top - bottom
    chart_id = f"chart-temperature-{_slug(zone)}"
    out = [
        _svg_open(chart_id, width, height, f"Indoor and outdoor temperature and opening, {zone}")
    ]
    t = hourly["hour_start"].to_numpy(dtype=np.float64) + 1800.0
    indoor = np.array([units.temp(v) for v in hourly["temp_indoor_c"].to_numpy(dtype=np.float64)])
    outdoor = np.array([units.temp(v) for v in hourly["temp_outdoor_c"].to_numpy(dtype=np.float64)])
    fraction = hourly["opening_fraction"].to_numpy(dtype=np.float64)
    low, high = units.temp(band[0]), units.temp(band[1])
    known = np.concatenate(
        [indoor[np.isfinite(indoor)], outdoor[np.isfinite(outdoor)], [low, high]]
    )
    step = 10.0 if units.ip else 5.0
    y_min = math.floor(float(known.min()) / step) * step
    y_max = math.ceil(float(known.max()) / step) * step
    if y_max <= y_min:
        y_max = y_min + step
    t0, t1 = figures.start, figures.end

    def x_of(value: float) -> float:
        return left + (value - t0) / (t1 - t0) * plot_w

    def y_of(value: float) -> float:
        return top + plot_h - (value - y_min) / (y_max - y_min) * plot_h

    # fixed comfort band
    out.append(
        f'<rect x="{left}" y="{y_of(high):.1f}" width="{plot_w}" height="{y_of(low) - y_of(high):.1f}" fill="#eef0f2"/>'
    )
    # opening fraction, right-hand scale
    bars = []
    for start, value in zip(hourly["hour_start"].to_numpy(dtype=np.float64), fraction, strict=True):
        if not math.isfinite(value) or value <= 0.0:
            continue
        x0, x1 = x_of(start), x_of(min(start + 3600.0, t1))
        h = value * plot_h
        bars.append(
            f'<rect x="{x0:.2f}" y="{top + plot_h - h:.2f}" width="{max(x1 - x0, 0.5):.2f}" height="{h:.2f}"/>'
        )
    out.append(f'<g fill="{_OPEN_FILL}" fill-opacity="0.75">{"".join(bars)}</g>')
    value = y_min
    while value <= y_max + 1e-9:
        y = y_of(value)
        out.append(
            f'<line x1="{left}" x2="{left + plot_w}" y1="{y:.1f}" y2="{y:.1f}" stroke="{_GRID}" stroke-width="1"/>'
        )
        out.append(_text(left - 6, y + 4, f"{value:.0f}", anchor="end"))
        value += step
    for share in (0, 50, 100):
        y = top + plot_h - share / 100 * plot_h
        out.append(_text(left + plot_w + 6, y + 4, f"{share} %", anchor="start"))
    out.append(
        _text(
            14,
            top + plot_h / 2,
            units.temp_unit,
            extra=f'transform="rotate(-90 14 {top + plot_h / 2:.1f})"',
        )
    )
    out.append(_time_axis(figures, x_of, top + plot_h, height))
    for values, colour in ((outdoor, _OUTDOOR), (indoor, _INDOOR)):
        out.append(_polyline(t, values, x_of, y_of, colour))
    out.append(
        f'<rect x="{left}" y="{top}" width="{plot_w}" height="{plot_h}" fill="none" stroke="#8c939c" stroke-width="1"/>'
    )
    out.append("</svg>")
    return "".join(out)


def _polyline(
    t: np.ndarray,
    values: np.ndarray,
    x_of: Callable[[float], float],
    y_of: Callable[[float], float],
    colour: str,
) -> str:
    """A line broken wherever a value is unknown or an hour is missing."""
    lines: list[str] = []
    points: list[str] = []
    previous = None
    for time, value in zip(t.tolist(), values.tolist(), strict=True):
        gap = previous is not None and time - previous > 3600.0 * 1.5
        if not math.isfinite(value) or gap:
            if len(points) > 1:
                lines.append(" ".join(points))
            points = []
        if math.isfinite(value):
            points.append(f"{x_of(time):.1f},{y_of(value):.1f}")
        previous = time
    if len(points) > 1:
        lines.append(" ".join(points))
    return "".join(
        f'<polyline points="{p}" fill="none" stroke="{colour}" stroke-width="1.6" stroke-linejoin="round"/>'
        for p in lines
    )


def _time_axis(figures: Figures, x_of: Callable[[float], float], y: float, height: int) -> str:
    tz = ZoneInfo(figures.time_zone)
    days = figures.outdoor[figures.outdoor["in_period"]]["date"].astype(str).tolist()
    step = max(1, math.ceil(len(days) / 16))
    out = []
    for i, day in enumerate(days):
        midnight = datetime.fromisoformat(day).replace(tzinfo=tz).timestamp()
        if midnight < figures.start:
            midnight = figures.start
        x = x_of(midnight)
        out.append(
            f'<line x1="{x:.1f}" x2="{x:.1f}" y1="{y:.1f}" y2="{y + 4:.1f}" stroke="#8c939c"/>'
        )
        if i % step == 0:
            label = day[5:] if len(days) > 1 else day
            out.append(_text(x + 2, y + 16, label, anchor="start"))
    if len(days) == 1:
        for hour in (6, 12, 18):
            instant = datetime.fromisoformat(days[0]).replace(hour=hour, tzinfo=tz).timestamp()
            if figures.start <= instant < figures.end:
                out.append(_text(x_of(instant), y + 16, f"{hour:02d}:00"))
    return "".join(out)


def _heatmap_section(figures: Figures) -> str:
    parts = [
        '<section class="page" id="heatmap"><h2>Opening by hour and day</h2>',
        '<p class="note">Mean commanded opening (share of the zone\'s opening area) for each '
        "hour of each day; grey: no record or released to the fire system.</p>",
        _gradient_legend(),
    ]
    for zone in figures.zones:
        hourly = figures.hourly[figures.hourly["zone"] == zone]
        parts.append(
            f"<figure><figcaption>{_esc(zone)}</figcaption>"
            f"{_heatmap(hourly, figures, zone)}</figure>"
        )
    parts.append("</section>")
    return "".join(parts)


def _shade(value: float) -> str:
    """White (closed) to deep teal (fully open)."""
    value = min(max(value, 0.0), 1.0)
    start, end = (255, 255, 255), (20, 94, 88)
    r, g, b = (round(a + (b_ - a) * value**0.8) for a, b_ in zip(start, end, strict=True))
    return f"#{r:02x}{g:02x}{b:02x}"


def _gradient_legend() -> str:
    stops = "".join(
        f'<span><i class="swatch" style="background:{_shade(v)}"></i>{round(v * 100)} %</span>'
        for v in (0.0, 0.25, 0.5, 0.75, 1.0)
    )
    return f'<div class="legend">{stops}<span><i class="swatch" style="background:{_NO_DATA}"></i>no record</span></div>'


def _heatmap(hourly: pd.DataFrame, figures: Figures, zone: str) -> str:
    days = figures.outdoor[figures.outdoor["in_period"]]["date"].astype(str).tolist()
    n = max(len(days), 1)
    left, top, right, bottom = 44, 8, 8, 30
    width = 960
    cell_w = (width - left - right) / n
    cell_h = 9.0
    height = int(top + 24 * cell_h + bottom)
    means = hourly.groupby(["date", "hour"], as_index=False)["opening_fraction"].mean()
    values = {
        (str(day), int(hour)): float(value)
        for day, hour, value in zip(
            means["date"], means["hour"], means["opening_fraction"], strict=True
        )
    }
    out = [
        _svg_open(f"chart-heatmap-{_slug(zone)}", width, height, f"Opening by hour and day, {zone}")
    ]
    for i, day in enumerate(days):
        for hour in range(24):
            value = values.get((day, hour), math.nan)
            colour = _shade(value) if math.isfinite(value) else _NO_DATA
            title = f"{day} {hour:02d}:00 " + (
                f"{value * 100:.0f} %" if math.isfinite(value) else "no record"
            )
            out.append(
                f'<rect x="{left + i * cell_w:.2f}" y="{top + hour * cell_h:.2f}" '
                f'width="{cell_w + 0.05:.2f}" height="{cell_h + 0.05:.2f}" fill="{colour}"><title>{_esc(title)}</title></rect>'
            )
    step = max(1, math.ceil(n / 16))
    for i, day in enumerate(days):
        if i % step == 0:
            out.append(_text(left + (i + 0.5) * cell_w, top + 24 * cell_h + 14, day[8:10]))
    for hour in (0, 6, 12, 18, 23):
        out.append(
            _text(left - 6, top + (hour + 0.8) * cell_h, f"{hour:02d}", anchor="end", size=10)
        )
    out.append(
        f'<rect x="{left}" y="{top}" width="{n * cell_w:.2f}" height="{24 * cell_h:.2f}" fill="none" stroke="#8c939c" stroke-width="0.8"/>'
    )
    out.append(_text(left + n * cell_w / 2, height - 2, "day of month; hours of the day downwards"))
    out.append("</svg>")
    return "".join(out)


def _wind_section(figures: Figures, units: _Units) -> str:
    wind = figures.wind[figures.wind["zone"] == SITE]
    edges = list(WIND_SPEED_EDGES)
    labels = []
    for i, low in enumerate(edges):
        if i + 1 < len(edges):
            labels.append(
                f"{_number(units.speed(low), 0)}–{_number(units.speed(edges[i + 1]), 0)} {units.speed_unit}"
            )
        else:
            labels.append(f"≥ {_number(units.speed(low), 0)} {units.speed_unit}")
    labels.append("speed unknown")
    unknown = float(wind[wind["sector"] < 0]["hours"].sum())
    total = float(wind["hours"].sum())
    note = (
        f"{_number(total)} h in which some zone was closed or limited for wind"
        + (f", {_number(unknown)} h of them with the wind direction unknown" if unknown > 0 else "")
        + "."
        if total > 0
        else "No hour was closed or limited for wind in this period."
    )
    return (
        '<section class="page" id="wind"><h2>Hours closed or limited for wind</h2>'
        f'<p class="note">By the direction the wind came from and its speed (whole site). {_esc(note)}</p>'
        + _legend(list(zip(_SPEED_COLOURS, labels, strict=True)))
        + '<div class="rose">'
        + f"<figure>{_wind_rose(wind)}</figure>{_wind_table(wind, labels)}</div></section>"
    )


def _wind_rose(wind: pd.DataFrame) -> str:
    size = 420
    centre = size / 2
    radius = centre - 40
    known = wind[wind["sector"] >= 0]
    by_sector = known.groupby("sector")["hours"].sum() if len(known) else pd.Series(dtype="float64")
    peak = float(by_sector.max()) if len(by_sector) else 0.0
    ring_step = _nice_step(peak / 4.0) if peak > 0 else 1.0
    outer = ring_step * max(1, math.ceil(peak / ring_step)) if peak > 0 else 4.0
    out = [
        _svg_open(
            "chart-windrose", size, size, "Hours closed or limited for wind, by wind direction"
        )
    ]
    for k in range(1, 5):
        value = outer * k / 4
        r = radius * math.sqrt(value / outer)
        out.append(
            f'<circle cx="{centre}" cy="{centre}" r="{r:.1f}" fill="none" stroke="{_GRID}"/>'
        )
        out.append(
            _text(centre + 3, centre - r + 11, f"{_number(value, 1)} h", anchor="start", size=10)
        )
    for sector, name in enumerate(COMPASS):
        angle = math.radians(sector * 22.5)
        x = centre + (radius + 16) * math.sin(angle)
        y = centre - (radius + 16) * math.cos(angle) + 4
        out.append(
            _text(
                x,
                y,
                name,
                size=11 if len(name) == 1 else 9,
                colour=_INK if len(name) == 1 else _MUTED,
            )
        )
    for sector in range(16):
        rows = known[known["sector"] == sector].sort_values("speed_class")
        cumulative = 0.0
        for row in rows.to_dict(orient="records"):
            inner_r = radius * math.sqrt(cumulative / outer)
            cumulative += float(row["hours"])
            outer_r = radius * math.sqrt(cumulative / outer)
            colour = (
                _SPEED_COLOURS[int(row["speed_class"])]
                if row["speed_class"] >= 0
                else _SPEED_COLOURS[-1]
            )
            out.append(
                f'<path d="{_wedge(centre, sector, inner_r, outer_r)}" fill="{colour}" stroke="#ffffff" stroke-width="0.6">'
                f"<title>{_esc(COMPASS[sector])}: {float(row['hours']):.2f} h</title></path>"
            )
    out.append("</svg>")
    return "".join(out)


def _wind_table(wind: pd.DataFrame, labels: Sequence[str]) -> str:
    """Hours closed or limited for wind by direction, as numbers beside the rose."""
    if wind.empty:
        return ""
    table = wind.pivot_table(
        index="sector", columns="speed_class", values="hours", aggfunc="sum", fill_value=0.0
    )
    classes = sorted(table.columns)
    head = "".join(f'<th class="num">{_esc(labels[c])} [h]</th>' for c in classes)
    rows = []
    for sector in table.index:
        name = COMPASS[int(sector)] if sector >= 0 else "unknown"
        cells = "".join(
            f'<td class="num">{_number(float(table.loc[sector, c]), 2)}</td>' for c in classes
        )
        rows.append(f"<tr><td>{_esc(name)}</td>{cells}</tr>")
    return (
        f"<table><thead><tr><th>From</th>{head}</tr></thead><tbody>{''.join(rows)}</tbody></table>"
    )


def _nice_step(value: float) -> float:
    exponent = math.floor(math.log10(value))
    for factor in (1.0, 2.0, 2.5, 5.0, 10.0):
        step = factor * 10.0**exponent
        if step >= value:
            return step
    return 10.0 ** (exponent + 1)


def _wedge(centre: float, sector: int, inner: float, outer: float) -> str:
    half = math.radians(22.5 / 2 * 0.9)
    middle = math.radians(sector * 22.5)
    a0, a1 = middle - half, middle + half

    def point(r: float, a: float) -> str:
        return f"{centre + r * math.sin(a):.2f},{centre - r * math.cos(a):.2f}"

    return (
        f"M{point(inner, a0)} L{point(outer, a0)} A{outer:.2f},{outer:.2f} 0 0 1 {point(outer, a1)} "
        f"L{point(inner, a1)} A{inner:.2f},{inner:.2f} 0 0 0 {point(inner, a0)} Z"
    )


# --------------------------------------------------------------------------- tables


def _when(t: float, tz: ZoneInfo) -> str:
    return datetime.fromtimestamp(t, tz).strftime("%Y-%m-%d %H:%M")


def _episodes_section(figures: Figures, tz: ZoneInfo) -> str:
    parts = [
        '<section class="page" id="overrides"><h2>Fire alarms, operator overrides and faults</h2>'
    ]
    if figures.episodes.empty:
        parts.append("<p>None in this period.</p>")
    else:
        parts.append(
            "<table><thead><tr><th>Zone</th><th>What</th><th>From</th><th>To</th>"
            '<th class="num">Hours</th><th>Reason (first recorded)</th></tr></thead><tbody>'
        )
        for row in figures.episodes.to_dict(orient="records"):
            later = int(row["reasons"]) - 1
            more = f" ({later} later reason{'s' if later > 1 else ''})" if later > 0 else ""
            parts.append(
                f"<tr><td>{_esc(row['zone'])}</td><td>{_esc(row['kind'])}</td>"
                f"<td>{_when(float(row['start']), tz)}</td><td>{_when(float(row['end']), tz)}</td>"
                f'<td class="num">{_number(float(row["hours"]), 2)}</td>'
                f"<td>{_esc(row['reason'])}{_esc(more)}</td></tr>"
            )
        parts.append("</tbody></table>")
    if not figures.events.empty:
        parts.append(
            "<h3>Recorded events</h3><table><thead><tr><th>When</th><th>Kind</th><th>Zone</th>"
            "<th>Who</th><th>Text</th></tr></thead><tbody>"
        )
        for row in figures.events.to_dict(orient="records"):
            parts.append(
                f"<tr><td>{_when(float(row['t']), tz)}</td><td>{_esc(row['kind'])}</td>"
                f"<td>{_esc(row['zone'] or 'controller')}</td><td>{_esc(row['who'] or '')}</td>"
                f"<td>{_esc(row['text'])}</td></tr>"
            )
        parts.append("</tbody></table>")
    parts.append("</section>")
    return "".join(parts)


def _moves_section(figures: Figures) -> str:
    totals = (
        figures.moves.groupby(["zone", "opening"], sort=False)[["moves", "travel"]]
        .sum()
        .reset_index()
    )
    days = max(int(figures.outdoor["in_period"].sum()), 1)
    parts = [
        '<section id="moves"><h2>Actuator moves</h2>',
        '<p class="note">A move is a change of the commanded position; travel adds up the '
        "changes in full strokes (closed to fully open is one).</p>",
        "<table><thead><tr><th>Zone</th><th>Opening</th><th class=num>Moves</th>"
        "<th class=num>Moves a day</th><th class=num>Travel (strokes)</th><th class=num>Busiest day</th></tr></thead><tbody>",
    ]
    for row in totals.to_dict(orient="records"):
        mine = figures.moves[
            (figures.moves["zone"] == row["zone"]) & (figures.moves["opening"] == row["opening"])
        ]
        busiest = int(mine["moves"].max()) if len(mine) else 0
        parts.append(
            f"<tr><td>{_esc(row['zone'])}</td><td>{_esc(row['opening'])}</td>"
            f"<td class=num>{int(row['moves'])}</td><td class=num>{_number(float(row['moves']) / days, 1)}</td>"
            f"<td class=num>{_number(float(row['travel']), 1)}</td><td class=num>{busiest}</td></tr>"
        )
    parts.append("</tbody></table></section>")
    return "".join(parts)


def _outages_section(figures: Figures, tz: ZoneInfo) -> str:
    site = figures.outages[figures.outages["zone"] == SITE]
    total = figures.totals[figures.totals["zone"] == SITE]
    offline = float(total["offline_hours"].iloc[0]) if len(total) else math.nan
    parts = [
        '<section id="offline"><h2>Controller offline</h2>',
        f"<p>{_number(offline)} h without a record in this period "
        f"(a decision counts for at most {_number(figures.max_gap / 60.0, 0)} min).</p>",
    ]
    if len(site):
        parts.append(
            "<table><thead><tr><th>From</th><th>To</th><th class=num>Hours</th><th>Note</th>"
            "</tr></thead><tbody>"
        )
        for row in site.to_dict(orient="records"):
            parts.append(
                f"<tr><td>{_when(float(row['start']), tz)}</td><td>{_when(float(row['end']), tz)}</td>"
                f"<td class=num>{_number(float(row['hours']), 2)}</td><td>{_esc(row['note'])}</td></tr>"
            )
        parts.append("</tbody></table>")
    zone_only = figures.outages[figures.outages["zone"] != SITE]
    if len(zone_only) > len(site) * max(len(figures.zones), 1):
        parts.append(
            '<p class="note">Some zones also lack decisions while others were recorded; see the CSV.</p>'
        )
    parts.append("</section>")
    return "".join(parts)


def _coverage_section(figures: Figures) -> str:
    parts = [
        '<section class="page" id="coverage"><h2>Data coverage</h2>',
        f'<p class="note">Share of the recorded time (and of the decisions) in which each input '
        f"had a valid value. Below {_number(100 * figures.coverage_threshold, 0)} % the figures "
        "that use it are marked ⚑.</p>",
        "<table><thead><tr><th>Zone</th><th>Input</th><th class=num>Time known</th>"
        "<th class=num>Decisions known</th><th>Used for</th></tr></thead><tbody>",
    ]
    for row in figures.coverage.to_dict(orient="records"):
        zone = "whole site" if row["zone"] == SITE else row["zone"]
        if not row["configured"]:
            parts.append(
                f"<tr><td>{_esc(zone)}</td><td>{_esc(_INPUT_LABELS.get(row['input'], row['input']))}</td>"
                f"<td class=num>not fitted</td><td class=num>–</td><td>{_esc(row['used_for'])}</td></tr>"
            )
            continue
        mark = ' <span class="flag">⚑</span>' if row["flagged"] else ""
        css = "num flagged" if row["flagged"] else "num"
        parts.append(
            f"<tr><td>{_esc(zone)}</td><td>{_esc(_INPUT_LABELS.get(row['input'], row['input']))}</td>"
            f'<td class="{css}">{_number(100 * float(row["share_of_time"]), 1)} %{mark}</td>'
            f"<td class=num>{_number(100 * float(row['share_of_decisions']), 1)} %</td>"
            f"<td>{_esc(row['used_for'])}</td></tr>"
        )
    parts.append("</tbody></table></section>")
    return "".join(parts)


def _method_section(figures: Figures) -> str:
    items = "".join(f"<li>{_esc(line)}</li>" for line in figures.assumptions)
    return (
        '<section id="method"><h2>How the figures are made</h2><ul>'
        f"<li>Each decision counts until the zone's next decision, for at most "
        f"{_number(figures.max_gap / 60.0, 0)} min; longer gaps count as offline. Days and "
        f"months follow the wall clock of {_esc(figures.time_zone)}.</li>"
        f"<li>Adaptive comfort: {_esc(figures.adaptive_model)}, with the running mean of "
        "outdoor temperature from the recorded daily means (0.2 × yesterday's mean + 0.8 × "
        "yesterday's running mean; the seven-day formula to start).</li>"
        "<li>Overheating: CIBSE TM52 (2013) on hourly means, category II.</li>"
        f"{items}</ul></section>"
    )


def _safety_section(cautions: Sequence[str]) -> str:
    items = "".join(f"<li>{_esc(line)}</li>" for line in cautions)
    return (
        f'<section id="safety" class="cautions"><h2>Safety cautions</h2><ul>{items}</ul></section>'
    )


# --------------------------------------------------------------------------- rule sets


#: Rows of the side-by-side table: figure -> (label, kind); kind picks the unit.
_COMPARISON_ROWS = {
    "hours": ("Time replayed", "hours"),
    "free_cooling_hours": ("Free cooling", "hours"),
    "open_hours": ("Openings commanded open", "hours"),
    "above_comfort_hours": ("Indoor temperature above comfort.high", "hours"),
    "peak_temp_indoor_c": ("Highest indoor temperature", "temp"),
    "cooling_kwh": ("Cooling delivered (estimate)", "energy"),
    "moves": ("Actuator moves (commanded changes)", "count"),
    "evaluations": ("Evaluations of the rules (zone-steps)", "count"),
    "decisions": ("Calls of the decision core", "count"),
}
_CLOSED_LABELS = {
    **_CAUSE_LABELS,
    "comfort": "Comfort rules (no free cooling called for)",
    "actuator_care": "Actuator care (minimum times, move limit)",
}


def _comparison_row(figure: str, units: _Units) -> tuple[str, Callable[[float], str]]:
    """Label (with the unit) and how to show a value of one figure of the replay."""
    if figure.startswith("closed_") and figure.endswith("_hours"):
        cause = figure.removeprefix("closed_").removesuffix("_hours")
        label, kind = f"All openings closed: {_CLOSED_LABELS.get(cause, cause)}", "hours"
    else:
        label, kind = _COMPARISON_ROWS.get(figure, (figure, "number"))
    if kind == "hours":
        return f"{label} [h]", lambda v: _number(v, 1)
    if kind == "temp":
        return f"{label} [{units.temp_unit}]", lambda v: _number(units.temp(v), 1)
    if kind == "energy":
        return f"{label} [{units.energy_unit}]", lambda v: _number(units.energy(v), 1)
    if kind == "count":
        return label, lambda v: _number(v, 0)
    return label, lambda v: _number(v, 2)


def comparison_section(
    table: pd.DataFrame,
    config: SiteConfig,
    *,
    heading: str,
    shown: str,
    links: Mapping[str, str] | None = None,
    chart: str = "",
    note: str = "",
) -> str:
    """A report section with several replays of one site side by side.

    Parameters
    ----------
    table : DataFrame
        One row per figure (index: the figure's name, as in
        ``ventsup.drivers.replay_compare.comparison``; values SI), one column
        per rule set or swept value.
    config : SiteConfig
        The site (display units).
    heading : str
        The section's title, e.g. ``"Rule sets side by side"``.
    shown : str
        The column whose figures the rest of the page shows.
    links : mapping of str to str, optional
        Column -> address of that column's own report page.
    chart : str, optional
        SVG text shown above the table (a sweep chart).
    note : str, optional
        A sentence printed under the heading.
    """
    units = _Units(config.site.units)
    links = links or {}
    columns = [str(c) for c in table.columns]
    head = []
    for column in columns:
        name = _esc(column)
        if column in links:
            name = f'<a href="{_esc(links[column])}">{name}</a>'
        if column == shown:
            name += " (this page)"
        head.append(f'<th class="num" data-column="{_esc(column)}">{name}</th>')
    lines = [
        '<section id="comparison">',
        f"<h2>{_esc(heading)}</h2>",
        f'<p class="note">{_esc(note)}</p>' if note else "",
        '<p class="note">Whole site: hours summed over the zones (zone-hours); the highest '
        "temperature of any zone. A replay keeps the logged temperatures (the windows did what "
        "they did when the log was made), so the temperature figures differ between rule sets "
        f"only through comfort.high. The rest of this page shows {_esc(shown)}"
        + ("; each other column's own report is linked from its name." if links else ".")
        + "</p>",
        f'<figure id="comparison-chart">{chart}</figure>' if chart else "",
        f'<table id="comparison-table"><thead><tr><th>Figure</th>{"".join(head)}</tr></thead>'
        "<tbody>",
    ]
    for figure, row in table.iterrows():
        label, show = _comparison_row(str(figure), units)
        cells = "".join(f'<td class="num">{_esc(show(float(v)))}</td>' for v in row.to_numpy())
        lines.append(f'<tr data-figure="{_esc(figure)}"><td>{_esc(label)}</td>{cells}</tr>')
    lines.append("</tbody></table></section>")
    return "".join(lines)


def variant_section(name: str, *, what: str, comparison: str | None = None) -> str:
    """A short section naming which rules a replay's page shows.

    ``what`` says where the rules came from (a file, a swept value);
    ``comparison`` is the address of the page with every variant side by side.
    """
    back = (
        f' Every variant side by side: <a href="{_esc(comparison)}">the comparison</a>.'
        if comparison
        else ""
    )
    return (
        f'<section id="variant"><h2>Rules replayed: {_esc(name)}</h2>'
        f"<p>{_esc(what)}.{back}</p></section>"
    )
