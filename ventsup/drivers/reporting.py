"""When and what to report: monthly reports, daily summary lines, and ``ventsup report``.

- :func:`write_report` computes the figures of a period from a decisions table
  (a replay or the ledger) and writes the HTML page, a JSON file and CSV files
  of the same figures, named ``<site>-<period>...``.
- :func:`report_from_ledger` reads a period (and the days before it, for the
  running mean) from the ledger and writes its report.
- :func:`missing_reports` and :func:`catch_up` serve the daemon's one hourly
  job: every month and day that has closed in the site's time zone and has no
  report (or summary line) yet is written, so the job is idempotent and
  catches up after downtime. (A cron trigger per month or day would skip runs
  across DST changes with APScheduler 3.11; one hourly job that decides in
  the site's time zone does not.)
- :func:`cli_report` is the ``ventsup report`` subcommand;
  :func:`add_report_arguments` adds its options to a parser.

Periods are local: a month runs from local midnight on its first day to local
midnight on the first of the next month, so March in Chicago or Berlin has
743 hours and October in Berlin 745.

Files are written to a temporary name and renamed into place, the HTML page
last, so a report whose page exists is complete.
"""

from __future__ import annotations

import argparse
import csv
import json
import math
import os
import re
import sys
import tempfile
import time
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from datetime import date, datetime, timedelta
from pathlib import Path
from typing import Any, Literal
from zoneinfo import ZoneInfo

import pandas as pd

from ventsup.config.errors import VentsupError
from ventsup.config.model import SiteConfig
from ventsup.core.figures import (
    SITE,
    EventLike,
    FigureOptions,
    Figures,
    compute_figures,
    decisions_to_frame,
)
from ventsup.edges.html import render_report
from ventsup.edges.ledger import Ledger, LedgerError

__all__ = [
    "CatchUp",
    "Period",
    "ReportError",
    "ReportPaths",
    "add_report_arguments",
    "catch_up",
    "cli_report",
    "day_period",
    "missing_reports",
    "month_period",
    "page_name",
    "period_between",
    "range_period",
    "report_from_ledger",
    "summary_file",
    "write_report",
]

#: Days of outdoor temperature read before a period, for the running mean (seven and a spare).
HISTORY_DAYS = 8
#: A period counts as closed this long after its end [s], so late records are in.
SETTLE = 300.0

_MONTH = re.compile(r"^(\d{4})-(\d{2})$")
_SUMMARY_FIELDS = (
    "date",
    "site",
    "free_cooling_hours",
    "night_flush_hours",
    "open_hours",
    "air_volume_m3",
    "cooling_kwh",
    "cooling_ton_hours",
    "offline_hours",
    "record_share",
    "flagged_figures",
)

# Summary field -> column of the daily table, where the names differ.
_SUMMARY_SOURCES = {
    "free_cooling_hours": "mode_free_cooling_hours",
    "night_flush_hours": "mode_night_flush_hours",
}


class ReportError(VentsupError):
    """A report cannot be made: a bad period, a missing ledger, an unwritable folder."""


# --------------------------------------------------------------------------- periods


@dataclass(frozen=True)
class Period:
    """A report period ``start <= t < end`` [s since the epoch, UTC].

    ``label`` names the files (``2027-06``, ``2027-06-15`` or
    ``2027-06-03_2027-06-09``, the last date included); ``title`` is for people
    (``June 2027``).
    """

    kind: Literal["month", "day", "range"]
    label: str
    title: str
    start: float
    end: float

    @property
    def hours(self) -> float:
        """Length of the period [h]."""
        return (self.end - self.start) / 3600.0


def _midnight(day: date, tz: ZoneInfo) -> float:
    return datetime(day.year, day.month, day.day, tzinfo=tz).timestamp()


def month_period(time_zone: str, month: str) -> Period:
    """The local calendar month ``"YYYY-MM"`` in ``time_zone``.

    >>> round(month_period("Europe/Berlin", "2027-03").hours)
    743
    """
    match = _MONTH.match(month.strip())
    if match is None or not 1 <= int(match.group(2)) <= 12:
        raise ReportError(f"month: got {month!r}, expected a month such as '2027-06'")
    year, number = int(match.group(1)), int(match.group(2))
    tz = ZoneInfo(time_zone)
    first = date(year, number, 1)
    following = date(year + (number == 12), number % 12 + 1, 1)
    return Period(
        "month", f"{year:04d}-{number:02d}", first.strftime("%B %Y"), _midnight(first, tz),
        _midnight(following, tz),
    )  # fmt: skip


def day_period(time_zone: str, day: date | str) -> Period:
    """One local day (``date`` or ``"YYYY-MM-DD"``) in ``time_zone``."""
    if isinstance(day, str):
        try:
            day = date.fromisoformat(day.strip())
        except ValueError:
            raise ReportError(f"day: got {day!r}, expected a date such as '2027-06-15'") from None
    tz = ZoneInfo(time_zone)
    return Period(
        "day", day.isoformat(), day.strftime("%A %d %B %Y"), _midnight(day, tz),
        _midnight(day + timedelta(days=1), tz),
    )  # fmt: skip


def _instant(text: str, tz: ZoneInfo, *, end: bool) -> float:
    """A date (whole day; the day after it for an end) or a local date-time [s]."""
    text = text.strip()
    try:
        if len(text) == 10:
            day = date.fromisoformat(text)
            return _midnight(day + timedelta(days=1) if end else day, tz)
        moment = datetime.fromisoformat(text)
    except ValueError:
        raise ReportError(
            f"got {text!r}, expected a date such as '2027-06-03' or a local time such as "
            "'2027-06-03T12:00'"
        ) from None
    if moment.tzinfo is None:
        moment = moment.replace(tzinfo=tz)
    return moment.timestamp()


def range_period(time_zone: str, start: str, end: str) -> Period:
    """From ``start`` to ``end`` as written on the command line.

    A date alone means the whole day: ``--from 2027-06-03 --to 2027-06-09``
    covers seven days, the 9th included. A date-time (local unless it carries
    an offset) is an exact instant, the end excluded.
    """
    tz = ZoneInfo(time_zone)
    first = _instant(start, tz, end=False)
    last = _instant(end, tz, end=True)
    if not last > first:
        raise ReportError(f"--to {end!r} is not after --from {start!r}")
    return period_between(time_zone, first, last)


def period_between(time_zone: str, start: float, end: float) -> Period:
    """The period ``start``-``end``, named as a month or a day when it is exactly one."""
    tz = ZoneInfo(time_zone)
    first = datetime.fromtimestamp(start, tz)
    if first.hour == 0 and first.minute == 0 and first.second == 0:
        month = month_period(time_zone, f"{first.year:04d}-{first.month:02d}")
        if first.day == 1 and (month.start, month.end) == (start, end):
            return month
        day = day_period(time_zone, first.date())
        if (day.start, day.end) == (start, end):
            return day
    last = datetime.fromtimestamp(end - 1.0, tz)
    fmt = "%Y-%m-%d" if first.time() == datetime.min.time() else "%Y-%m-%dT%H%M"
    label = f"{first.strftime(fmt)}_{last.strftime('%Y-%m-%d')}"
    title = f"{first.strftime('%d %B %Y')} to {last.strftime('%d %B %Y')}"
    return Period("range", label, title, start, end)


# --------------------------------------------------------------------------- writing


@dataclass(frozen=True)
class ReportPaths:
    """The files of one report."""

    html: Path
    json: Path
    csv: dict[str, Path] = field(default_factory=dict)

    def all(self) -> list[Path]:
        """Every file, the HTML page last."""
        return [self.json, *self.csv.values(), self.html]


def _stem(config: SiteConfig, period: Period) -> str:
    """What every file of a period's report is named before its suffix."""
    return f"{config.slug}-{period.label}"


def _base(config: SiteConfig, period: Period, out_dir: Path) -> Path:
    return out_dir / _stem(config, period)


def page_name(config: SiteConfig, period: Period) -> str:
    """The file name of a period's report page, as :func:`write_report` writes it."""
    return _stem(config, period) + ".html"


def _page(config: SiteConfig, period: Period, out_dir: Path) -> Path:
    return out_dir / page_name(config, period)


def _write_text(path: Path, text: str) -> None:
    """Write ``text`` to ``path`` through a temporary file renamed into place."""
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        handle, temporary = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
        try:
            with os.fdopen(handle, "w", encoding="utf-8", newline="") as file:
                file.write(text)
            os.chmod(temporary, 0o644)  # mkstemp makes it private; a report is for reading
            os.replace(temporary, path)
        except BaseException:
            Path(temporary).unlink(missing_ok=True)
            raise
    except OSError as exc:
        raise ReportError(f"{path}: cannot write the report: {exc.strerror or exc}") from exc


def _csv_text(table: pd.DataFrame) -> str:
    return table.to_csv(index=False, lineterminator="\n", float_format="%.6g")


def write_report(
    config: SiteConfig,
    frame: pd.DataFrame,
    start: float,
    end: float,
    out_dir: str | os.PathLike[str],
    events: Iterable[EventLike] | None = None,
    *,
    options: FigureOptions | None = None,
    generated: str | None = None,
    extra_sections: Sequence[str] = (),
) -> ReportPaths:
    """Compute the figures of ``start <= t < end`` and write the report files.

    Parameters
    ----------
    config : SiteConfig
        The site.
    frame : DataFrame
        Decisions (:func:`ventsup.core.figures.decisions_to_frame` of a replay
        or of the ledger's decisions; the ledger's ``decisions_frame`` works
        too, but has no facts, so airflow, comfort and coverage come out
        flagged). Rows before ``start`` are history, see
        :func:`~ventsup.core.figures.compute_figures`.
    start, end : float
        The period [s since the epoch, UTC].
    out_dir : path
        Folder for the files (created if needed).
    events : iterable of EventLike, optional
        The ledger's events of the period (starts, stops, overrides, ...).
    options : FigureOptions, optional
        Adaptive model, coverage threshold, ...
    generated : str, optional
        Footer text; default says when and by which ventsup.
    extra_sections : sequence of str, optional
        HTML of further sections for the page (see
        :func:`ventsup.edges.html.render_report`), such as the rule sets
        side by side of a replay.

    Returns
    -------
    ReportPaths
        ``<slug>-<period>.html``, ``.json`` and ``-<table>.csv`` files.
    """
    figures = compute_figures(frame, config, start, end, events=events, options=options)
    period = period_between(config.site.time_zone, start, end)
    return _write_figures(config, figures, period, Path(out_dir), generated, extra_sections)


def _generated_by() -> str:
    from ventsup import __version__

    stamp = datetime.now().astimezone().strftime("%Y-%m-%d %H:%M %Z")
    return f"Made by ventsup {__version__} on {stamp}."


def _write_figures(
    config: SiteConfig,
    figures: Figures,
    period: Period,
    out_dir: Path,
    generated: str | None,
    extra_sections: Sequence[str] = (),
) -> ReportPaths:
    base = _base(config, period, out_dir)
    tables = figures.tables()
    summary = pd.concat(
        [
            figures.totals.rename(columns={"period": "month"}).assign(month="whole period"),
            figures.monthly,
        ],
        ignore_index=True,
    ).rename(columns={"month": "period"})
    csv_tables = {
        "summary": summary,
        **{k: v for k, v in tables.items() if k not in ("totals", "monthly")},
    }
    paths = ReportPaths(
        html=_page(config, period, out_dir),
        json=base.with_name(base.name + ".json"),
        csv={name: base.with_name(f"{base.name}-{name}.csv") for name in csv_tables},
    )
    document = figures.to_dict()
    document["period"] = {"label": period.label, "title": period.title, "kind": period.kind}
    _write_text(
        paths.json, json.dumps(document, ensure_ascii=False, indent=1, allow_nan=False) + "\n"
    )
    for name, table in csv_tables.items():
        _write_text(paths.csv[name], _csv_text(table))
    page = render_report(
        figures,
        config,
        period_label=period.title,
        generated=generated if generated is not None else _generated_by(),
        extra_sections=extra_sections,
    )
    _write_text(paths.html, page)
    return paths


# --------------------------------------------------------------------------- ledger


def _read_frame(
    config: SiteConfig, ledger: Ledger, start: float, end: float, max_gap: float
) -> pd.DataFrame:
    """The decisions of the period with the decision before it, and the days before it
    of one zone (the outdoor temperature is the site's, so one zone's facts suffice)."""
    period = decisions_to_frame(ledger.decisions(start - max_gap, end + max_gap), config)
    first_zone = next(iter(config.zones))
    history = decisions_to_frame(
        ledger.decisions(start - HISTORY_DAYS * 86400.0, start - max_gap, zone=first_zone), config
    )
    if history.empty:
        return period
    return pd.concat([history, period], ignore_index=True)


def _max_gap(config: SiteConfig, options: FigureOptions | None) -> float:
    options = options or FigureOptions()
    tick = options.tick if options.tick is not None else config.controller.tick
    return options.max_gap if options.max_gap is not None else 2.0 * tick


def _report_period(
    config: SiteConfig,
    ledger: Ledger,
    period: Period,
    out_dir: Path,
    options: FigureOptions | None,
    generated: str | None,
) -> tuple[ReportPaths, Figures]:
    gap = _max_gap(config, options)
    frame = _read_frame(config, ledger, period.start, period.end, gap)
    events = list(ledger.events(period.start - gap, period.end))
    figures = compute_figures(
        frame, config, period.start, period.end, events=events, options=options
    )
    return _write_figures(config, figures, period, out_dir, generated), figures


def report_from_ledger(
    config: SiteConfig,
    ledger_path: str | os.PathLike[str],
    *,
    month: str | None = None,
    start: float | None = None,
    end: float | None = None,
    out_dir: str | os.PathLike[str] = "reports",
    options: FigureOptions | None = None,
    generated: str | None = None,
) -> ReportPaths:
    """Write the report of one month (``"2027-06"``) or of ``start``-``end`` from a ledger.

    Raises
    ------
    ReportError
        Neither or both of a month and a start/end, or no ledger at the path.
    LedgerError
        The ledger cannot be read.
    """
    if (month is None) == (start is None or end is None):
        raise ReportError("give either a month ('2027-06') or both start and end")
    tz = config.site.time_zone
    if month is not None:
        period = month_period(tz, month)
    else:
        assert start is not None and end is not None
        period = period_between(tz, start, end)
    path = Path(ledger_path)
    if not path.is_file():
        raise ReportError(f"{path}: no ledger there; give the daemon's ledger with --ledger")
    with Ledger.open(path, retention=config.controller.retention) as ledger:
        paths, _ = _report_period(config, ledger, period, Path(out_dir), options, generated)
    return paths


# --------------------------------------------------------------------------- daemon


def summary_file(config: SiteConfig, out_dir: str | os.PathLike[str]) -> Path:
    """The CSV file of daily summary lines: ``<slug>-daily-summary.csv``."""
    return Path(out_dir) / f"{config.slug}-daily-summary.csv"


def _summarised_days(path: Path) -> set[str]:
    try:
        with path.open(encoding="utf-8", newline="") as file:
            return {row["date"] for row in csv.DictReader(file) if row.get("date")}
    except FileNotFoundError:
        return set()
    except (OSError, csv.Error, KeyError) as exc:
        raise ReportError(f"{path}: cannot read the daily summary: {exc}") from exc


def _first_decision(ledger: Ledger) -> float | None:
    for decision, _ in ledger.decisions():
        return decision.t
    return None


def missing_reports(
    config: SiteConfig,
    ledger: Ledger,
    now: float,
    out_dir: str | os.PathLike[str],
    *,
    settle: float = SETTLE,
) -> list[Period]:
    """Months without a report page and days without a summary line, closed by ``now``.

    From the month and day of the ledger's first decision up to the last
    month and day that ended at least ``settle`` seconds before ``now`` (in
    the site's time zone), oldest first, months before days.
    """
    first = _first_decision(ledger)
    if first is None:
        return []
    tz_name = config.site.time_zone
    tz = ZoneInfo(tz_name)
    out = Path(out_dir)
    first_local = datetime.fromtimestamp(first, tz).date()
    months: list[Period] = []
    year, number = first_local.year, first_local.month
    while True:
        period = month_period(tz_name, f"{year:04d}-{number:02d}")
        if period.end + settle > now:
            break
        if not _page(config, period, out).exists():
            months.append(period)
        year, number = year + (number == 12), number % 12 + 1
    done = _summarised_days(summary_file(config, out))
    days: list[Period] = []
    day = first_local
    while True:
        period = day_period(tz_name, day)
        if period.end + settle > now:
            break
        if period.label not in done:
            days.append(period)
        day += timedelta(days=1)
    return months + days


@dataclass(frozen=True)
class CatchUp:
    """What :func:`catch_up` wrote: report files and daily summary lines."""

    reports: list[ReportPaths]
    lines: list[str]


def _summary_row(figures: Figures, day: str) -> dict[str, Any]:
    daily = figures.daily
    row = daily[(daily["zone"] == SITE) & (daily["date"] == day)].iloc[0]
    flagged = sum(
        bool(row[name])
        for name in (
            "record_flagged",
            "airflow_flagged",
            "comfort_flagged",
            "adaptive_flagged",
            "tm52_flagged",
        )
    )
    values: dict[str, Any] = {"date": day, "site": figures.site, "flagged_figures": flagged}
    for name in _SUMMARY_FIELDS[2:-1]:
        value = float(row[_SUMMARY_SOURCES.get(name, name)])
        values[name] = "" if not math.isfinite(value) else round(value, 4)
    return values


def _summary_line(values: dict[str, Any]) -> str:
    flags = values["flagged_figures"]
    return (
        f"{values['date']} {values['site']}: free cooling {values['free_cooling_hours']:.1f} h, "
        f"night flush {values['night_flush_hours']:.1f} h, open {values['open_hours']:.1f} h, "
        f"cooling {values['cooling_kwh']:.1f} kWh ({values['cooling_ton_hours']:.1f} ton-h), "
        f"offline {values['offline_hours']:.1f} h"
        + (f", {flags} figure(s) with poor data" if flags else "")
    )


def _append_summary(path: Path, rows: Sequence[dict[str, Any]]) -> None:
    if not rows:
        return
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        new = not path.exists() or path.stat().st_size == 0
        with path.open("a", encoding="utf-8", newline="") as file:
            writer = csv.DictWriter(file, fieldnames=_SUMMARY_FIELDS, lineterminator="\n")
            if new:
                writer.writeheader()
            for row in sorted(rows, key=lambda r: str(r["date"])):
                writer.writerow(row)
            file.flush()
            os.fsync(file.fileno())
    except OSError as exc:
        raise ReportError(f"{path}: cannot write the daily summary: {exc.strerror or exc}") from exc


def catch_up(
    config: SiteConfig,
    ledger: Ledger,
    now: float,
    out_dir: str | os.PathLike[str],
    *,
    options: FigureOptions | None = None,
    settle: float = SETTLE,
) -> CatchUp:
    """Write every missing monthly report and daily summary line; safe to call every hour.

    Each closed month without a page gets its report; each closed day without
    a line in :func:`summary_file` gets one (taken from its month's figures
    when that month is reported in the same call). Running it again writes
    nothing new.
    """
    out = Path(out_dir)
    missing = missing_reports(config, ledger, now, out, settle=settle)
    wanted_days = {p.label for p in missing if p.kind == "day"}
    reports: list[ReportPaths] = []
    rows: dict[str, dict[str, Any]] = {}
    for period in (p for p in missing if p.kind == "month"):
        paths, figures = _report_period(config, ledger, period, out, options, None)
        reports.append(paths)
        for day in figures.daily[figures.daily["zone"] == SITE]["date"].astype(str):
            if day in wanted_days:
                rows[day] = _summary_row(figures, day)
    for period in (p for p in missing if p.kind == "day" and p.label not in rows):
        gap = _max_gap(config, options)
        frame = _read_frame(config, ledger, period.start, period.end, gap)
        events = list(ledger.events(period.start - gap, period.end))
        figures = compute_figures(
            frame, config, period.start, period.end, events=events, options=options
        )
        rows[period.label] = _summary_row(figures, period.label)
    ordered = [rows[day] for day in sorted(rows)]
    _append_summary(summary_file(config, out), ordered)
    return CatchUp(reports=reports, lines=[_summary_line(row) for row in ordered])


# --------------------------------------------------------------------------- command line


def add_report_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the options of ``ventsup report`` to ``parser`` (see :func:`cli_report`)."""
    parser.add_argument("config", metavar="CONFIG", help="the site file (YAML)")
    parser.add_argument(
        "--month", help="the month to report, such as 2027-06 (default: last month)"
    )
    parser.add_argument(
        "--from", dest="start", metavar="START", help="first day (2027-06-03) or local time"
    )
    parser.add_argument(
        "--to", dest="end", metavar="END", help="last day, included (2027-06-09), or local time"
    )
    parser.add_argument("--ledger", metavar="PATH", help="the ledger (default: the daemon's)")
    parser.add_argument(
        "--out", metavar="DIR", default="reports", help="folder for the files (default: reports)"
    )
    parser.add_argument(
        "--adaptive",
        choices=("en16798", "ashrae55"),
        default="en16798",
        help="adaptive comfort model: EN 16798-1 category II (default) or ASHRAE 55 80 %%",
    )


def _previous_month(time_zone: str, now: float) -> str:
    today = datetime.fromtimestamp(now, ZoneInfo(time_zone)).date()
    last = today.replace(day=1) - timedelta(days=1)
    return f"{last.year:04d}-{last.month:02d}"


def cli_report(args: argparse.Namespace) -> int:
    """Run ``ventsup report``; returns the exit status (0 ok, 1 failed, 2 bad input).

    ``args`` (as :func:`add_report_arguments` makes them): ``config`` (path of
    the site file), ``month`` (``"YYYY-MM"`` or None), ``start`` and ``end``
    (``--from``/``--to``: a date, the ``--to`` day included, or a local
    date-time; or None), ``ledger`` (path or None: the daemon's default,
    ``controller.ledger`` or ``var/ventsup-<site>.db`` beside the site file),
    ``out`` (folder, default ``reports``), ``adaptive`` (``"en16798"`` or
    ``"ashrae55"``, optional). Without a month or a range it reports the last
    closed month.
    """
    from ventsup.config import ConfigError, load_config

    try:
        config = load_config(args.config)
    except ConfigError as exc:
        for problem in exc.problems:
            print(problem, file=sys.stderr)
        print(f"FAILED: {len(exc.problems)} problem(s) in {args.config}", file=sys.stderr)
        return 2
    month = getattr(args, "month", None)
    start_text = getattr(args, "start", None)
    end_text = getattr(args, "end", None)
    tz = config.site.time_zone
    try:
        if month is not None and (start_text or end_text):
            raise ReportError("give either --month or --from/--to, not both")
        if (start_text is None) != (end_text is None):
            raise ReportError("give both --from and --to")
        if start_text is not None and end_text is not None:
            period = range_period(tz, start_text, end_text)
        else:
            period = month_period(tz, month or _previous_month(tz, time.time()))
    except ReportError as exc:
        print(f"ventsup report: {exc}", file=sys.stderr)
        return 2
    ledger_path = getattr(args, "ledger", None)
    if ledger_path is None:
        from ventsup.drivers.service import default_ledger_path

        path = default_ledger_path(config, Path(args.config).resolve().parent)
    else:
        path = Path(ledger_path)
    options = FigureOptions(adaptive=getattr(args, "adaptive", None) or "en16798")
    try:
        paths = report_from_ledger(
            config,
            path,
            start=period.start,
            end=period.end,
            out_dir=getattr(args, "out", None) or "reports",
            options=options,
        )
    except (ReportError, LedgerError) as exc:
        print(f"ventsup report: {exc}", file=sys.stderr)
        return 1
    print(f"ventsup report: {config.site.name}, {period.title} ({period.hours:.0f} h)")
    for written in paths.all():
        print(f"  {written}")
    return 0
