"""Line charts against one varied value, as self-contained SVG text.

:func:`panels_svg` draws one panel per quantity, stacked and sharing the
horizontal axis (the value varied: a swept threshold, an opening-area factor),
with one line per series in each panel (a zone, or the whole site). The text
needs nothing else: no script, no font, nothing from the network. It is a file
of its own (``sweep.svg`` of ``ventsup replay --sweep``, ``what-if.svg`` of
``python -m simulator --what-if``) or sits inline in the HTML report.

Every point carries its numbers, ``data-x`` and ``data-y`` (the value as
given, 12 significant digits) and a tooltip, and every line sits in a group
naming its panel and series (``data-panel``, ``data-series``), so a reader or
a test can read the chart back. A value that is not finite is left out of its
line. This module writes no file; its callers do.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from html import escape

__all__ = ["PALETTE", "Panel", "Series", "number_text", "panels_svg"]

#: Line colours in order, for series without a colour of their own.
PALETTE = ("#1f77b4", "#d62728", "#2ca02c", "#9467bd", "#ff7f0e", "#8c564b", "#17becf")


@dataclass(frozen=True)
class Series:
    """One line: its label and one value per point of the horizontal axis."""

    label: str
    values: tuple[float, ...]
    colour: str | None = None


@dataclass(frozen=True)
class Panel:
    """One quantity: its title (with the unit) and its lines.

    ``from_zero``: the scale starts at zero (hours, counts); otherwise it spans
    the values with a margin (temperatures).
    """

    title: str
    series: tuple[Series, ...]
    from_zero: bool = True


def number_text(value: float) -> str:
    """A value as a chart labels it: whole numbers without decimals, others to 0.1."""
    if not math.isfinite(value):
        return "-"
    if float(value).is_integer() and abs(value) < 1e15:
        return f"{int(value)}"
    return f"{value:.1f}"


def _attr(text: str) -> str:
    return escape(text, quote=True)


def _scale(panel: Panel) -> tuple[float, float]:
    """The lowest and highest value of a panel's scale."""
    known = [v for s in panel.series for v in s.values if math.isfinite(v)]
    if not known:
        return 0.0, 1.0
    low, high = min(known), max(known)
    if panel.from_zero:
        low = min(0.0, low)
        high = high * 1.1 if high > 0 else 1.0
        return low, high
    margin = (high - low) * 0.1 or max(abs(high) * 0.05, 0.5)
    return low - margin, high + margin


def panels_svg(
    x: Sequence[float],
    x_labels: Sequence[str],
    panels: Sequence[Panel],
    *,
    title: str,
    x_title: str,
    chart_id: str | None = None,
    width: int = 640,
    panel_height: int = 140,
) -> str:
    """The SVG text of ``panels`` against the values ``x`` (labelled ``x_labels``).

    Parameters
    ----------
    x : sequence of float
        The varied value at each point, in the order of the series' values.
    x_labels : sequence of str
        How to write each value under the axis (with its unit, as given).
    panels : sequence of Panel
        One panel per quantity, top to bottom; each series has one value per ``x``.
    title, x_title : str
        The chart's title and the name of the varied value.
    chart_id : str, optional
        ``id`` of the ``svg`` element (for a chart inline in a page).

    Raises
    ------
    ValueError
        A label or a series whose length differs from ``x``.
    """
    n = len(x)
    if len(x_labels) != n:
        raise ValueError(f"{len(x_labels)} labels for {n} values")
    for panel in panels:
        for series in panel.series:
            if len(series.values) != n:
                raise ValueError(
                    f"{panel.title}: series {series.label!r} has {len(series.values)} values "
                    f"for {n} points"
                )
    left, right = 70, 30
    inner_w = width - left - right
    labels = list(dict.fromkeys(s.label for p in panels for s in p.series))
    colours = {label: PALETTE[i % len(PALETTE)] for i, label in enumerate(labels)}
    legend = any(len(p.series) > 1 for p in panels)
    per_row = max(1, inner_w // 150)
    legend_h = 18 * math.ceil(len(labels) / per_row) if legend else 0
    top = 56 + legend_h
    step_h = panel_height + 30
    height = top + len(panels) * step_h + 30
    finite = [v for v in x if math.isfinite(v)]
    x_lo, x_hi = (min(finite), max(finite)) if finite else (0.0, 1.0)
    span = (x_hi - x_lo) or 1.0

    def px(value: float) -> float:
        if n == 1 or x_hi == x_lo:
            return left + inner_w / 2
        return left + (value - x_lo) / span * inner_w

    identity = f' id="{_attr(chart_id)}"' if chart_id else ""
    parts = [
        f'<svg{identity} xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
        f'viewBox="0 0 {width} {height}" role="img" aria-label="{_attr(title)}" '
        'font-family="sans-serif" font-size="12">',
        f"<title>{escape(title)}</title>",
        f'<rect x="0" y="0" width="{width}" height="{height}" fill="#ffffff"/>',
        f'<text x="{left}" y="22" font-size="15">{escape(title)}</text>',
    ]
    if legend:
        for i, label in enumerate(labels):
            lx = left + (i % per_row) * 150
            ly = 40 + (i // per_row) * 18
            parts.append(
                f'<rect x="{lx}" y="{ly - 9}" width="14" height="4" fill="{colours[label]}"/>'
                f'<text x="{lx + 20}" y="{ly - 3}">{escape(label)}</text>'
            )
    for number, panel in enumerate(panels):
        y0 = top + number * step_h
        y_lo, y_hi = _scale(panel)
        y_span = (y_hi - y_lo) or 1.0

        def py(value: float, y0: float = y0, y_lo: float = y_lo, y_span: float = y_span) -> float:
            return y0 + panel_height - (value - y_lo) / y_span * panel_height

        known = [v for s in panel.series for v in s.values if math.isfinite(v)]
        peak = max(known) if known else math.nan
        parts.append(
            f'<rect x="{left}" y="{y0}" width="{inner_w}" height="{panel_height}" fill="none" '
            'stroke="#999"/>'
        )
        parts.append(
            f'<text x="{left}" y="{y0 - 6}">{escape(panel.title)} (max {number_text(peak)})</text>'
        )
        low_label = y_lo if panel.from_zero else min(known, default=y_lo)
        parts.append(
            f'<text x="{left - 6}" y="{py(low_label) + 4:.1f}" text-anchor="end">'
            f"{number_text(low_label)}</text>"
        )
        if known:
            parts.append(
                f'<text x="{left - 6}" y="{py(peak) + 4:.1f}" text-anchor="end">'
                f"{number_text(peak)}</text>"
            )
        for series in panel.series:
            colour = series.colour or colours[series.label]
            points = [
                (px(a), py(b), a, b, label)
                for a, b, label in zip(x, series.values, x_labels, strict=True)
                if math.isfinite(a) and math.isfinite(b)
            ]
            parts.append(
                f'<g data-panel="{_attr(panel.title)}" data-series="{_attr(series.label)}">'
            )
            if points:
                line = " ".join(f"{cx:.1f},{cy:.1f}" for cx, cy, *_ in points)
                parts.append(
                    f'<polyline points="{line}" fill="none" stroke="{colour}" stroke-width="2"/>'
                )
            for cx, cy, a, b, label in points:
                parts.append(
                    f'<circle cx="{cx:.1f}" cy="{cy:.1f}" r="3" fill="{colour}" '
                    f'data-x="{a:.12g}" data-y="{b:.12g}"><title>{escape(series.label)}, '
                    f"{escape(label)}: {number_text(b)}</title></circle>"
                )
            parts.append("</g>")
    bottom = top + len(panels) * step_h - 12
    for a, label in zip(x, x_labels, strict=True):
        if math.isfinite(a):
            parts.append(
                f'<text x="{px(a):.1f}" y="{bottom}" text-anchor="middle" font-size="10">'
                f"{escape(label)}</text>"
            )
    parts.append(
        f'<text x="{left + inner_w / 2}" y="{height - 8}" text-anchor="middle">'
        f"{escape(x_title)}</text>"
    )
    parts.append("</svg>")
    return "\n".join(parts) + "\n"
