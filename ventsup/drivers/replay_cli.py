"""``ventsup replay``: the rules over logged data, several rule sets side by side.

:func:`add_replay_arguments` adds the command's options to a parser;
:func:`cli_replay` runs it and returns the exit status (0 done, 1 a log or an
output that cannot be used, 2 a bad configuration or command line).

What it writes (with ``--out DIR``; see ``docs/replay.md``):

- ``timeline.csv`` (or ``.parquet``; one per variant as ``timeline-<name>``):
  one row per run of a zone: start and end (ISO 8601 with the site's UTC
  offset), zone, evaluations, mode, layer, cause, the target of each opening,
  HVAC interlock, open area, what triggered it, the reason and the events;
- ``figures.csv``: figures per zone and for the site, per variant;
- ``comparison.csv``: the variants side by side (``--rules``, ``--sweep``);
- ``sweep.csv`` and ``sweep.svg`` for a sweep;
- ``report/``: the monthly report's page and tables for the replayed period,
  of the first variant (the site's own rules, or a sweep's first value); with
  several variants its page also holds them side by side (a section "Rule
  sets side by side" or "Sweep of <key>", in the site's display units, with
  the sweep chart inline), and each other variant's report is in
  ``report/<variant>/``, linked from that section.
"""

from __future__ import annotations

import argparse
import math
import re
import sys
import time
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import Any, TextIO
from zoneinfo import ZoneInfo

import pandas as pd

from ventsup.config.errors import ConfigError, VentsupError
from ventsup.config.load import load_config
from ventsup.config.model import SiteConfig
from ventsup.config.units import UnitError, parse_quantity
from ventsup.core.figures import SITE
from ventsup.core.state import Decision
from ventsup.drivers.recording import Recording, read_recording
from ventsup.drivers.replay import (
    Run,
    evaluation_plan,
    replay_evaluations,
    run_key,
    runs_from_decisions,
)
from ventsup.drivers.replay_compare import (
    comparison,
    cooling_delivered,
    evaluation_tick,
    load_rules_variant,
    parse_sweep,
    report_frame,
    site_figures,
    sweep_svg,
    sweep_variants,
    text_table,
)
from ventsup.drivers.replay_fast import (
    ZonePlan,
    ZoneResult,
    indoor_figures,
    plan_from_evaluations,
    plan_zones,
    replay_fast,
)
from ventsup.edges.html import comparison_section, variant_section
from ventsup.edges.logs import LogError, PointLog, iso_times, read_log, write_table

__all__ = [
    "ProgressBar",
    "Replayed",
    "add_replay_arguments",
    "cli_replay",
    "parse_instant",
    "plans_for",
    "replay_site",
    "timeline_frame",
]

EXIT_OK = 0
EXIT_FAILED = 1
EXIT_USAGE = 2

_SQLITE_MAGIC = b"SQLite format 3\x00"


# --------------------------------------------------------------------------- arguments


def add_replay_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the options of ``ventsup replay`` to ``parser`` (the replay subparser)."""
    parser.add_argument("config", help="the site file (YAML)")
    parser.add_argument(
        "--data",
        required=True,
        metavar="LOG",
        help="the logged data: CSV or Parquet, wide or long (see docs/replay.md), "
        "or the daemon's ledger (SQLite) to replay its recording",
    )
    parser.add_argument(
        "--rules",
        nargs="+",
        default=[],
        metavar="RULES.yaml",
        help="rule-set files (a mapping of rule-set name -> rules, replacing the site's rule "
        "sets of those names) to replay beside the site's own rules",
    )
    parser.add_argument(
        "--sweep",
        metavar="[RULE_SET.]SECTION.KEY=START:STOP:STEP",
        help="replay once per value of one threshold, e.g. free_cooling.open_above=22C:26C:0.5K",
    )
    parser.add_argument(
        "--from",
        dest="start",
        metavar="ISO",
        help="start of the replay (default: the first sample); a time without a UTC offset "
        "is read in the site's time zone",
    )
    parser.add_argument(
        "--to",
        dest="end",
        metavar="ISO",
        help="end of the replay, excluded (default: the end of the log)",
    )
    parser.add_argument(
        "--step",
        default=None,
        metavar="DURATION",
        help="time between ticks, e.g. 60s or 5 min (default: the site's controller.tick)",
    )
    parser.add_argument("--out", metavar="DIR", help="write the timeline, figures and report here")
    parser.add_argument(
        "--format", choices=("csv", "parquet"), default="csv", help="timeline file type (csv)"
    )
    parser.add_argument(
        "--jobs", type=int, default=1, metavar="N", help="spread the zones over N processes"
    )
    parser.add_argument(
        "--progress",
        action="store_true",
        help="show a progress bar on stderr even when it is not a terminal",
    )
    parser.add_argument(
        "--reference",
        action="store_true",
        help="evaluate every step with the core (slow; the fast path gives the same runs)",
    )
    parser.add_argument(
        "--allow-missing",
        action="store_true",
        help="replay even when the log lacks points the zones read (they count as unknown)",
    )
    parser.add_argument(
        "--no-report", action="store_true", help="do not write the report for the period"
    )


# --------------------------------------------------------------------------- progress


class ProgressBar:
    """A one-line progress bar on ``stream``, redrawn at most ten times a second.

    Shown when ``stream`` is a terminal or ``force`` is set; otherwise silent.
    """

    def __init__(
        self,
        total: int,
        stream: TextIO,
        *,
        force: bool = False,
        label: str = "replay",
        clock: Callable[[], float] = time.monotonic,
    ) -> None:
        self.total = max(total, 1)
        self.stream = stream
        self.enabled = force or bool(getattr(stream, "isatty", lambda: False)())
        self.label = label
        self.clock = clock
        self.done = 0
        self.started = clock()
        self._drawn = -math.inf

    def __call__(self, count: int) -> None:
        """``count`` more zone-steps are done."""
        self.done += count
        now = self.clock()
        if self.enabled and now - self._drawn >= 0.1:
            self._drawn = now
            self._draw(now)

    def _draw(self, now: float) -> None:
        share = min(1.0, self.done / self.total)
        filled = int(share * 30)
        bar = "#" * filled + "-" * (30 - filled)
        self.stream.write(
            f"\r{self.label} [{bar}] {share * 100:5.1f}%  {_count(self.done)}/{_count(self.total)} "
            f"zone-steps  {now - self.started:.0f} s"
        )
        self.stream.flush()

    def close(self) -> None:
        """Draw the final state and end the line."""
        if self.enabled:
            self._draw(self.clock())
            self.stream.write("\n")
            self.stream.flush()


def _count(n: int) -> str:
    if n >= 1_000_000:
        return f"{n / 1e6:.1f}M"
    if n >= 10_000:
        return f"{n / 1e3:.0f}k"
    return str(n)


# --------------------------------------------------------------------------- replay


def parse_instant(text: str, time_zone: str) -> float:
    """An ISO 8601 time -> seconds since the epoch; without an offset, in ``time_zone``.

    Raises
    ------
    ValueError
        Not a time, or a local time that daylight saving time skips or repeats.
    """
    try:
        when = datetime.fromisoformat(text.strip())
    except ValueError:
        raise ValueError(
            f"{text!r} is not an ISO 8601 time such as 2027-06-01, 2027-06-01T08:00 or "
            "2027-06-01T08:00-05:00"
        ) from None
    if when.tzinfo is not None:
        return when.timestamp()
    tz = ZoneInfo(time_zone)
    early, late = when.replace(tzinfo=tz, fold=0), when.replace(tzinfo=tz, fold=1)
    if early.utcoffset() != late.utcoffset():
        back = datetime.fromtimestamp(early.timestamp(), tz).replace(tzinfo=None)
        what = "does not exist" if back != when else "is ambiguous"
        raise ValueError(
            f"{text!r} {what} in {time_zone} (a daylight saving change); give its UTC offset"
        )
    return early.timestamp()


@dataclass
class Replayed:
    """One variant's replay: its site, plans, per-zone results and how long it took."""

    name: str
    config: SiteConfig
    plans: Mapping[str, ZonePlan]
    results: list[ZoneResult]
    seconds: float
    figures: pd.DataFrame = field(default_factory=pd.DataFrame)

    @property
    def runs(self) -> list[Run]:
        """Every run, zone by zone in site order."""
        return [run for result in self.results for run in result.runs]


def plans_for(
    config: SiteConfig,
    log: PointLog,
    start: float,
    end: float,
    step: float,
    recording: Recording | None = None,
) -> dict[str, ZonePlan]:
    """Each zone's evaluations: as recorded, or ticks and urgent evaluations as live."""
    if recording is not None:
        return plan_from_evaluations(config, recording.evaluations)
    return plan_zones(config, log, start, end, step)


def replay_site(
    name: str,
    config: SiteConfig,
    log: PointLog,
    plans: Mapping[str, ZonePlan],
    start: float,
    end: float,
    *,
    step: float = 60.0,
    recording: Recording | None = None,
    jobs: int = 1,
    reference: bool = False,
    progress: Callable[[int], None] | None = None,
    cooling: bool = True,
) -> Replayed:
    """Replay ``log`` over ``plans`` (:func:`plans_for`) for one variant, fast or per step.

    The per-step ``reference`` makes its own evaluations (the daemon's rule,
    sample by sample) or takes the ``recording``'s, so that it checks the
    fast path's plans too. ``cooling`` computes the cooling delivered (one pass
    of the report's figures per zone); without it ``cooling_kwh`` is NaN.
    """
    began = time.perf_counter()
    if not reference:
        results = replay_fast(config, log, plans, end, jobs=jobs, progress=progress)
    else:
        # A recording's evaluations count the samples handled before them in recording order.
        samples = log.samples(log_order=recording is not None)
        if recording is not None:
            evaluations = recording.evaluations
        else:
            evaluations = evaluation_plan(config, samples, start, end, step)
        pairs = replay_evaluations(config, samples, evaluations)

        def counted() -> Iterator[tuple[Decision, str]]:
            for pair in pairs:
                yield pair
                if progress is not None:
                    progress(1)

        runs = runs_from_decisions(config, counted(), end)
        results = []
        for zone in config.zones:
            zone_runs = [run for run in runs if run.zone == zone]
            count = sum(run.evaluations for run in zone_runs)
            indoor = indoor_figures(config, zone, log, plans[zone], end)
            results.append(ZoneResult(zone, zone_runs, count, count, indoor))
    replayed = Replayed(name, config, plans, results, time.perf_counter() - began)
    kwh = (
        cooling_delivered(config, log, plans, results, start, end, evaluation_tick(plans))
        if cooling
        else None
    )
    replayed.figures = site_figures(results, start, end, kwh)
    return replayed


def timeline_frame(runs: Sequence[Run], config: SiteConfig) -> pd.DataFrame:
    """One row per run (see the module notes), in time order, zones in site order."""
    openings = sorted({name for zone in config.zones.values() for name in zone.openings})
    order = {zone: i for i, zone in enumerate(config.zones)}
    ordered = sorted(runs, key=lambda r: (r.start, order.get(r.zone, 0)))
    tz = config.site.time_zone
    rows: dict[str, list[Any]] = {
        "start": iso_times((r.start for r in ordered), tz),
        "end": iso_times((r.end for r in ordered), tz),
        "duration_s": [r.duration for r in ordered],
        "zone": [r.zone for r in ordered],
        "evaluations": [r.evaluations for r in ordered],
        "mode": [r.decision.mode.value for r in ordered],
        "layer": [int(r.decision.layer) for r in ordered],
        "cause": [r.decision.cause.value for r in ordered],
    }
    for name in openings:
        rows[f"target:{name}"] = [
            math.nan if r.decision.targets.get(name) is None else r.decision.targets[name]
            for r in ordered
        ]
    rows["released"] = [
        ",".join(n for n, v in r.decision.targets.items() if v is None) for r in ordered
    ]
    rows["windows_open"] = [r.decision.windows_open for r in ordered]
    rows["open_area_m2"] = [r.decision.open_area for r in ordered]
    rows["trigger"] = [r.trigger for r in ordered]
    rows["reason"] = [r.decision.reason for r in ordered]
    rows["events"] = [
        "; ".join(f"{iso_times([t], tz)[0]} {text}" for t, text in r.events) for r in ordered
    ]
    rows["t"] = [r.start for r in ordered]
    return pd.DataFrame(rows)


def _slug(name: str) -> str:
    return re.sub(r"[^A-Za-z0-9._-]+", "-", name).strip("-.") or "variant"


def _slugs(names: Sequence[str]) -> list[str]:
    """A distinct file-name part per variant (``warmer`` and ``warmer'`` both slug to
    ``warmer``: the second becomes ``warmer-2``)."""
    taken: set[str] = set()
    slugs = []
    for name in names:
        base = slug = _slug(name)
        count = 1
        while slug in taken:
            count += 1
            slug = f"{base}-{count}"
        taken.add(slug)
        slugs.append(slug)
    return slugs


def _local(t: float, tz: str) -> str:
    return datetime.fromtimestamp(t, ZoneInfo(tz)).strftime("%Y-%m-%d %H:%M %Z")


def _recording_match(recording: Recording, replayed: Replayed) -> tuple[int, int]:
    """How many recorded evaluations the replay gives the same outcome, of how many."""
    recorded: dict[str, list[tuple[object, ...]]] = {}
    for decision, _ in recording.recorded:
        recorded.setdefault(decision.zone, []).append(run_key(decision))
    same = total = 0
    for result in replayed.results:
        keys = [run_key(run.decision) for run in result.runs for _ in range(run.evaluations)]
        theirs = recorded.get(result.zone, [])
        total += len(theirs)
        same += sum(a == b for a, b in zip(keys, theirs, strict=False))
    return same, total


def _print_summary(
    replayed: Replayed, start: float, end: float, out: TextIO, *, reference: bool
) -> None:
    config = replayed.config
    evaluations = sum(r.evaluations for r in replayed.results)
    decisions = sum(r.decisions for r in replayed.results)
    how = "per step (reference)" if reference else f"the core decided {decisions} of them"
    print(
        f"[{replayed.name}] {evaluations} evaluations; {how}; {len(replayed.runs)} runs; "
        f"{replayed.seconds:.1f} s ({evaluations / max(replayed.seconds, 1e-9):,.0f} zone-steps/s)",
        file=out,
    )
    figures = replayed.figures
    if figures.empty:
        return
    high = {zone: config.rules_for(zone).comfort.high for zone in config.zones}
    shown = pd.DataFrame(
        {
            "zone": figures["zone"],
            "free cooling h": figures["free_cooling_hours"],
            "open h": figures["open_hours"],
            "above comfort h": figures["above_comfort_hours"],
            "peak °C": figures["peak_temp_indoor_c"],
            "moves": figures["moves"],
            "closed by cause [h]": [
                ", ".join(
                    f"{c.removeprefix('closed_').removesuffix('_hours')} {row[c]:.1f}"
                    for c in figures.columns
                    if c.startswith("closed_") and row[c] > 0.005
                )
                or "-"
                for _, row in figures.iterrows()
            ],
        }
    ).set_index("zone")
    print(text_table(shown), file=out)
    limits = sorted({f"{v:g}" for v in high.values()})
    print(
        f"(comfort limit: comfort.high = {', '.join(limits)} °C; site row: zone-hours summed)",
        file=out,
    )


def cli_replay(args: argparse.Namespace) -> int:
    """Run ``ventsup replay`` with the parsed ``args``; returns the exit status."""
    out, err = sys.stdout, sys.stderr
    config_path = Path(args.config)
    try:
        config = load_config(config_path)
    except ConfigError as exc:
        for problem in exc.problems:
            print(problem, file=err)
        print(f"FAILED: {len(exc.problems)} problem(s) in {config_path}", file=err)
        return EXIT_USAGE
    tz = config.site.time_zone
    if args.jobs < 1:
        print(f"--jobs must be at least 1, got {args.jobs}", file=err)
        return EXIT_USAGE
    if args.rules and args.sweep:
        print("give --rules or --sweep, not both", file=err)
        return EXIT_USAGE
    try:
        step = parse_quantity(args.step, "duration") if args.step else config.controller.tick
        if not step > 0:
            raise UnitError("expected a positive duration such as 60s")
        start = parse_instant(args.start, tz) if args.start else None
        end = parse_instant(args.end, tz) if args.end else None
    except (UnitError, ValueError) as exc:
        print(f"ventsup replay: {exc}", file=err)
        return EXIT_USAGE
    if start is not None and end is not None and not end > start:
        print("ventsup replay: --to must be after --from", file=err)
        return EXIT_USAGE

    variants: list[tuple[str, SiteConfig]] = [("site", config)]
    sources = {"site": f"The site's own rules, from {config_path}"}
    note = ""
    sweep = None
    try:
        for file in args.rules:
            name = Path(file).stem
            while name in {n for n, _ in variants}:
                name += "'"
            variants.append((name, load_rules_variant(config_path, file)))
            sources[name] = f"The site's rule sets replaced by those of {file}"
        if args.rules:
            note = f"The site's own rules (site) beside those of {', '.join(args.rules)}."
        if args.sweep:
            sweep = parse_sweep(args.sweep, config)
            variants, refused = sweep_variants(config_path, sweep)
            sources = {
                name: f"The site's rules with {sweep.label} = {name}" for name, _ in variants
            }
            note = f"One replay per value of {sweep.label} (--sweep {sweep.spec})."
            for problem in refused:
                print(f"left out: {problem}", file=err)
                note += f" Left out: {problem}."
    except ConfigError as exc:
        for problem in exc.problems:
            print(problem, file=err)
        print(f"FAILED: {len(exc.problems)} problem(s) in the rules", file=err)
        return EXIT_USAGE
    except ValueError as exc:
        print(f"ventsup replay: {exc}", file=err)
        return EXIT_USAGE

    data = Path(args.data)
    recording = None
    try:
        if _is_ledger(data):
            recording = read_recording(data, config, start, end)
            log = recording.log
            start, end = recording.start, recording.end
        else:
            log = read_log(data, config, allow_missing=args.allow_missing)
            if log.first is None:
                raise LogError(f"{data}: the log holds no samples")
            start = log.first if start is None else start
            end = (log.last or start) + step if end is None else end
            if not end > start:
                raise LogError(f"{data}: the log ends before the replay starts")
    except LogError as exc:
        print(f"ventsup replay: {exc}", file=err)
        return EXIT_FAILED

    print(
        f"ventsup replay: {config.site.name}, {_local(start, tz)} to {_local(end, tz)} "
        f"({tz}), {len(config.zones)} zones",
        file=out,
    )
    print(f"data: {data} ({len(log)} samples; {log.time_note})", file=out)
    if recording is not None:
        print(
            f"evaluations: as recorded ({len(recording.evaluations)}); skipped: "
            f"{recording.skipped or 'nothing'}",
            file=out,
        )
    else:
        print(
            f"evaluations: every {step:g} s and at once on alarm, rain and wind changes", file=out
        )
    for point, reasons in log.rejected.items():
        counts = ", ".join(f"{n} {reason.replace('_', ' ')}" for reason, n in reasons.items())
        print(f"not held (as live): {point}: {counts}", file=out)

    replays: list[Replayed] = []
    try:
        for name, variant in variants:
            plans = plans_for(variant, log, start, end, step, recording)
            bar = ProgressBar(
                sum(len(p) for p in plans.values()), err, force=args.progress, label=name
            )
            replayed = replay_site(
                name,
                variant,
                log,
                plans,
                start,
                end,
                step=step,
                recording=recording,
                jobs=args.jobs,
                reference=args.reference,
                progress=bar,
                # shown only beside other variants, or written with --out
                cooling=len(variants) > 1 or bool(args.out),
            )
            bar.close()
            replays.append(replayed)
            if len(variants) == 1 or sweep is None:
                _print_summary(replayed, start, end, out, reference=args.reference)
    except VentsupError as exc:
        print(f"ventsup replay: {exc}", file=err)
        return EXIT_FAILED

    if recording is not None:
        same, total = _recording_match(recording, replays[0])
        print(
            f"recording: the replay gives the recorded outcome at {same} of {total} evaluations",
            file=out,
        )
    table = comparison({r.name: r.figures for r in replays}) if len(replays) > 1 else None
    if table is not None:
        if sweep is not None:
            table.columns = [str(c) for c in table.columns]
            print(f"\nsweep of {sweep.label} (site totals, zone-hours):", file=out)
        else:
            print("\nrule sets side by side (site totals, zone-hours):", file=out)
        print(text_table(table), file=out)
    if args.out:
        try:
            written = _write(
                args, config, log, replays, table, sweep, start, end, sources=sources, note=note
            )
        except (VentsupError, OSError) as exc:
            print(f"ventsup replay: {exc}", file=err)
            return EXIT_FAILED
        print(f"wrote {', '.join(str(p) for p in written)}", file=out)
    return EXIT_OK


def _is_ledger(path: Path) -> bool:
    if path.suffix.lower() in (".db", ".sqlite", ".sqlite3", ".ledger"):
        return True
    try:
        with path.open("rb") as handle:
            return handle.read(len(_SQLITE_MAGIC)) == _SQLITE_MAGIC
    except OSError:
        return False


def _write(
    args: argparse.Namespace,
    config: SiteConfig,
    log: PointLog,
    replays: Sequence[Replayed],
    table: pd.DataFrame | None,
    sweep: Any,
    start: float,
    end: float,
    *,
    sources: Mapping[str, str],
    note: str,
) -> list[Path]:
    folder = Path(args.out)
    folder.mkdir(parents=True, exist_ok=True)
    suffix = ".parquet" if args.format == "parquet" else ".csv"
    written: list[Path] = []
    figures = []
    slugs = _slugs([replayed.name for replayed in replays])
    for replayed, slug in zip(replays, slugs, strict=True):
        name = "timeline" if len(replays) == 1 else f"timeline-{slug}"
        written.append(
            write_table(timeline_frame(replayed.runs, replayed.config), folder / f"{name}{suffix}")
        )
        frame = replayed.figures.copy()
        frame.insert(0, "rules", replayed.name)
        figures.append(frame)
    written.append(write_table(pd.concat(figures, ignore_index=True), folder / "figures.csv"))
    if table is not None:
        written.append(write_table(table.reset_index(), folder / "comparison.csv"))
    chart = ""
    if sweep is not None:
        rows = []
        for replayed in replays:
            site = replayed.figures[replayed.figures["zone"] == SITE].drop(columns="zone")
            row = site.iloc[0].to_dict() if len(site) else {}
            rows.append({"value": replayed.name, **row})
        sweep_table = pd.DataFrame(rows)
        written.append(write_table(sweep_table, folder / "sweep.csv"))
        svg = folder / "sweep.svg"
        title = f"{config.site.name}: sweep of {sweep.label}"
        svg.write_text(sweep_svg(sweep_table, sweep.label, title), encoding="utf-8")
        written.append(svg)
        chart = sweep_svg(sweep_table, sweep.label, title, chart_id="chart-sweep")
    if args.no_report:
        return written
    report = folder / "report"
    if table is None:
        return written + _report(replays[0], log, start, end, report)
    # The other variants first: the first variant's page links to theirs.
    page = _page_name(config, start, end)
    links: dict[str, str] = {}
    others: list[Path] = []
    for replayed, slug in zip(replays[1:], slugs[1:], strict=True):
        back = variant_section(
            replayed.name, what=sources.get(replayed.name, replayed.name), comparison=f"../{page}"
        )
        paths = _report(replayed, log, start, end, report / slug, [back])
        if paths:
            links[replayed.name] = paths[0].relative_to(report).as_posix()
        others += paths
    heading = f"Sweep of {sweep.label}" if sweep is not None else "Rule sets side by side"
    section = comparison_section(
        table, config, heading=heading, shown=replays[0].name, links=links, chart=chart, note=note
    )
    return written + _report(replays[0], log, start, end, report, [section]) + others


def _page_name(config: SiteConfig, start: float, end: float) -> str:
    """The file name of the report page of ``start``-``end``."""
    from ventsup.drivers.reporting import page_name, period_between

    return page_name(config, period_between(config.site.time_zone, start, end))


def _report(
    replayed: Replayed,
    log: PointLog,
    start: float,
    end: float,
    folder: Path,
    extra_sections: Sequence[str] = (),
) -> list[Path]:
    """The monthly report's files for the replayed period of one variant (its page)."""
    from ventsup.core.figures import FigureOptions
    from ventsup.drivers.reporting import write_report

    frame = report_frame(replayed.config, log, replayed.plans, replayed.results)
    if frame.empty:
        return []
    tick = evaluation_tick(replayed.plans)
    paths = write_report(
        replayed.config,
        frame,
        start,
        end,
        folder,
        options=FigureOptions(tick=tick),
        extra_sections=extra_sections,
    )
    return [paths.html]
