"""Rule sets side by side: variants of a site, figures from runs, tables and a sweep chart.

- :func:`load_rules_variant` reads a rules file (a YAML mapping of rule-set
  name -> rules) and replaces the site's rule sets of those names, validated
  as the loader validates a site (errors with the rules file's lines).
- :func:`sweep_variants` makes one variant per value of one threshold
  (``free_cooling.open_above=22C:26C:0.5K``).
- :func:`zone_figures` and :func:`site_figures` turn replay results into
  figures per zone and for the site; :func:`comparison` lays several
  variants side by side; :func:`text_table` prints a table for the terminal
  and :func:`sweep_svg` draws the sweep (with :mod:`ventsup.edges.charts`).
- :func:`report_frame` gives the decisions table the monthly report reads,
  one row per evaluation.

How time is counted: each evaluation holds until the zone's next evaluation
(a run until the next run), and the last until the end of the replay.
"""

from __future__ import annotations

import copy
import itertools
import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from pydantic import ValidationError

from ventsup.config.checks import cross_check
from ventsup.config.errors import ConfigError, ConfigProblem
from ventsup.config.load import translate
from ventsup.config.model import SiteConfig
from ventsup.config.source import SourceMap, parse_yaml
from ventsup.core.figures import FACTS, SITE, FigureOptions, compute_figures
from ventsup.core.horizon import zone_features
from ventsup.core.state import Cause, Mode
from ventsup.drivers.replay import Run
from ventsup.drivers.replay_fast import ZonePlan, ZoneResult, align
from ventsup.edges.charts import Panel, Series, panels_svg
from ventsup.edges.logs import PointLog

__all__ = [
    "FIGURES",
    "Sweep",
    "comparison",
    "cooling_delivered",
    "evaluation_tick",
    "load_rules_variant",
    "parse_sweep",
    "report_frame",
    "site_figures",
    "sweep_svg",
    "sweep_variants",
    "text_table",
    "zone_figures",
]

#: The figures of a replay, in table order, with what each means.
FIGURES: Mapping[str, str] = {
    "hours": "time replayed [h]",
    "free_cooling_hours": "time in free cooling [h]",
    "open_hours": "time with openings commanded open (the HVAC interlock output) [h]",
    "above_comfort_hours": "time with the indoor temperature above comfort.high [h]",
    "peak_temp_indoor_c": "highest indoor temperature [°C]",
    "cooling_kwh": "sensible cooling delivered by outdoor air, the report's estimate [kWh]",
    "moves": "commanded target changes of the openings (after the first command)",
    "evaluations": "evaluations of the core's rules (zone-steps)",
    "decisions": "calls of the decision core",
}
_CLOSED_CAUSES = tuple(cause.value for cause in Cause)


# --------------------------------------------------------------------------- variants


def _site_data(config_path: Path) -> tuple[dict[str, Any], str]:
    text = config_path.read_text(encoding="utf-8")
    data, _, problems = parse_yaml(text, str(config_path))
    if problems or not isinstance(data, dict):
        raise ConfigError(problems or [ConfigProblem(str(config_path), None, "", "not a site")])
    return data, str(config_path)


def _validate(data: dict[str, Any], source: SourceMap) -> SiteConfig:
    try:
        config = SiteConfig.model_validate(data)
    except ValidationError as exc:
        raise ConfigError(translate(exc, data, source)) from None
    problems = cross_check(config, source)
    if problems:
        raise ConfigError(problems)
    return config


def load_rules_variant(config_path: str | Path, rules_path: str | Path) -> SiteConfig:
    """The site at ``config_path`` with its rule sets replaced by those in ``rules_path``.

    The rules file is a YAML mapping of rule-set name -> rules (as under
    ``rules:`` in a site file); each replaces the site's rule set of that name
    as a whole (sections it leaves out take their defaults).

    Raises
    ------
    ConfigError
        Every problem, with the rules file's name and lines: YAML errors, a
        name the site has no rule set for, and what the model and the
        cross-checks find.
    """
    config_path, rules_path = Path(config_path), Path(rules_path)
    site, _ = _site_data(config_path)
    file = str(rules_path)
    try:
        text = rules_path.read_text(encoding="utf-8")
    except OSError as exc:
        problem = ConfigProblem(file, None, "", f"cannot read the rules file: {exc.strerror}")
        raise ConfigError([problem]) from None
    data, source, problems = parse_yaml(text, file)
    if problems:
        raise ConfigError(problems)
    if not isinstance(data, dict) or not data:
        message = (
            "expected a mapping of rule-set name -> rules, such as 'hall: {free_cooling: ...}'"
        )
        raise ConfigError([ConfigProblem(file, source.line_of(()), "", message)])
    names = site.get("rules") or {}
    unknown = [
        ConfigProblem(
            file,
            source.key_line((name,)),
            str(name),
            f"the site has no rule set {name!r}; its rule sets are {', '.join(map(str, names))}",
        )
        for name in data
        if name not in names
    ]
    merged = copy.deepcopy(site)
    for name, rules in data.items():
        if name in names:
            merged["rules"][name] = rules
    lines = {("rules", *path): where for path, where in source.lines.items()}
    try:
        config = _validate(merged, SourceMap(file, lines, merged))
    except ConfigError as exc:
        found = [replace(p, path=p.path.removeprefix("rules.")) for p in exc.problems]
        raise ConfigError([*unknown, *found]) from None
    if unknown:
        raise ConfigError(unknown)
    return config


@dataclass(frozen=True)
class Sweep:
    """One threshold and its values: ``rule_set`` (None: every rule set), the key path
    within a rule set (``("free_cooling", "open_above")``) and the values as written."""

    spec: str
    rule_set: str | None
    path: tuple[str, ...]
    values: tuple[str, ...]

    @property
    def label(self) -> str:
        """``free_cooling.open_above`` (with the rule set when one is named)."""
        return ".".join((self.rule_set, *self.path) if self.rule_set else self.path)


_SWEEP = re.compile(r"^\s*(?P<key>[A-Za-z][\w.-]*)\s*=\s*(?P<a>[^:]+):(?P<b>[^:]+):(?P<s>[^:]+)$")
_AMOUNT = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(\S*)\s*$")
_DELTA_TWINS = {"k": "c", "degc": "c", "°c": "c", "c": "c", "f": "f", "degf": "f", "°f": "f"}
_MAX_SWEEP = 200


def parse_sweep(spec: str, config: SiteConfig) -> Sweep:
    """Read ``[RULE_SET.]SECTION.KEY=START:STOP:STEP`` (units allowed: ``22C:26C:0.5K``).

    Raises
    ------
    ValueError
        With what was expected.
    """
    expected = (
        "expected --sweep SECTION.KEY=START:STOP:STEP such as "
        "free_cooling.open_above=22C:26C:0.5K (optionally RULE_SET.SECTION.KEY)"
    )
    match = _SWEEP.match(spec)
    if match is None:
        raise ValueError(f"--sweep {spec!r}: {expected}")
    parts = tuple(match.group("key").split("."))
    rule_set = parts[0] if parts[0] in config.rules and len(parts) > 2 else None
    path = parts[1:] if rule_set else parts
    if len(path) != 2:
        raise ValueError(f"--sweep {spec!r}: {expected}")
    amounts = []
    for name in ("a", "b", "s"):
        found = _AMOUNT.match(match.group(name))
        if found is None:
            raise ValueError(f"--sweep {spec!r}: {match.group(name)!r} is not a number; {expected}")
        amounts.append((float(found.group(1)), found.group(2)))
    (start, unit), (stop, stop_unit), (step, step_unit) = amounts
    if stop_unit.lower() != unit.lower():
        raise ValueError(f"--sweep {spec!r}: give START and STOP in the same unit")
    twin = _DELTA_TWINS.get(unit.lower(), unit.lower())
    if step_unit and _DELTA_TWINS.get(step_unit.lower(), step_unit.lower()) != twin:
        raise ValueError(f"--sweep {spec!r}: STEP {step_unit!r} does not fit the unit {unit!r}")
    if not (step > 0 and stop >= start):
        raise ValueError(f"--sweep {spec!r}: expected STOP >= START and a positive STEP")
    count = math.floor((stop - start) / step + 1e-9) + 1
    if count > _MAX_SWEEP:
        raise ValueError(f"--sweep {spec!r}: {count} values; at most {_MAX_SWEEP}")
    values = tuple(
        f"{round(start + i * step, 9):g}{' ' + unit if unit else ''}" for i in range(count)
    )
    return Sweep(spec, rule_set, path, values)


def sweep_variants(
    config_path: str | Path, sweep: Sweep
) -> tuple[list[tuple[str, SiteConfig]], list[ConfigProblem]]:
    """One site per value of the sweep, and the problems of the values left out.

    A value that the model or the cross-checks refuse (an opening temperature
    at or below the closing one, say) is left out; its problems name the sweep
    and the value.

    Raises
    ------
    ConfigError
        When every value is refused.
    """
    site, _ = _site_data(Path(config_path))
    names = list(site.get("rules") or {})
    targets = [sweep.rule_set] if sweep.rule_set else names
    variants = []
    problems: list[ConfigProblem] = []
    for value in sweep.values:
        merged = copy.deepcopy(site)
        for name in targets:
            rules = merged["rules"].get(name) or {}
            merged["rules"][name] = rules
            section = rules.get(sweep.path[0])
            if not isinstance(section, dict):
                section = {}
                rules[sweep.path[0]] = section
            section[sweep.path[1]] = value
        file = f"--sweep {sweep.label}={value}"
        try:
            variants.append((value, _validate(merged, SourceMap(file, {}, merged))))
        except ConfigError as exc:
            problems.extend(exc.problems)
    if not variants:
        raise ConfigError(problems)
    return variants, problems


# --------------------------------------------------------------------------- figures


def _moves(runs: Sequence[Run]) -> int:
    moves = 0
    for before, after in itertools.pairwise(runs):
        for name, target in after.decision.targets.items():
            if target is not None and before.decision.targets.get(name) != target:
                moves += 1
    return moves


def zone_figures(
    result: ZoneResult, start: float, end: float, cooling_kwh: float = math.nan
) -> dict[str, Any]:
    """The figures of one zone (see :data:`FIGURES`), plus ``closed_<cause>_hours``:
    time with every opening commanded closed, by the cause of the decision.

    ``cooling_kwh`` is the zone's cooling delivered (:func:`cooling_delivered`),
    NaN when not computed."""
    runs = result.runs
    hours = {"free_cooling": 0.0, "open": 0.0}
    closed = dict.fromkeys(_CLOSED_CAUSES, 0.0)
    for run in runs:
        duration = max(0.0, min(run.end, end) - max(run.start, start)) / 3600.0
        decision = run.decision
        if decision.mode is Mode.FREE_COOLING:
            hours["free_cooling"] += duration
        if decision.windows_open:
            hours["open"] += duration
        targets = decision.targets.values()
        if targets and all(v == 0.0 for v in targets):
            closed[decision.cause.value] += duration
    peak = result.indoor.peak
    row: dict[str, Any] = {
        "zone": result.zone,
        "hours": (end - start) / 3600.0,
        "free_cooling_hours": hours["free_cooling"],
        "open_hours": hours["open"],
        "above_comfort_hours": result.indoor.above_hours,
        "peak_temp_indoor_c": math.nan if peak is None else peak,
        "cooling_kwh": cooling_kwh,
        "moves": _moves(runs),
        "evaluations": result.evaluations,
        "decisions": result.decisions,
    }
    row.update({f"closed_{cause}_hours": h for cause, h in closed.items()})
    return row


def site_figures(
    results: Sequence[ZoneResult],
    start: float,
    end: float,
    cooling: Mapping[str, float] | None = None,
) -> pd.DataFrame:
    """One row per zone and a last row ``(site)``: hours, moves, cooling and counts summed
    over the zones (zone-hours), the peak the highest of any zone.

    ``cooling`` maps a zone to its cooling delivered [kWh] (:func:`cooling_delivered`).
    """
    cooling = cooling or {}
    rows = [
        zone_figures(result, start, end, cooling.get(result.zone, math.nan)) for result in results
    ]
    frame = pd.DataFrame(rows)
    if frame.empty:
        return frame
    total: dict[str, Any] = {"zone": SITE}
    for column in frame.columns[1:]:
        values = frame[column]
        if column == "peak_temp_indoor_c":
            total[column] = values.max()
        else:  # a zone without an estimate leaves the site's total unknown
            total[column] = values.sum(skipna=False)
    return pd.concat([frame, pd.DataFrame([total])], ignore_index=True)


def comparison(variants: Mapping[str, pd.DataFrame]) -> pd.DataFrame:
    """The site rows of several variants side by side: one row per figure, one column each.

    Closed-hours rows are kept when any variant has such hours.
    """
    columns = {}
    for name, figures in variants.items():
        site = figures[figures["zone"] == SITE]
        columns[name] = site.drop(columns="zone").iloc[0] if len(site) else pd.Series(dtype=float)
    table = pd.DataFrame(columns)
    keep = [
        index
        for index in table.index
        if not str(index).startswith("closed_") or bool((table.loc[index].fillna(0) != 0).any())
    ]
    table = table.loc[keep]
    table.index.name = "figure"
    return table


def _cell(value: Any) -> str:
    if isinstance(value, float | np.floating):
        number = float(value)
        if math.isnan(number):
            return "-"
        if number.is_integer() and abs(number) < 1e15:
            return f"{int(number)}"
        return f"{number:.1f}"
    return str(value)


def text_table(frame: pd.DataFrame, index: bool = True) -> str:
    """A plain aligned text table for the terminal."""
    headers: list[str] = ([str(frame.index.name or "")] if index else []) + [
        str(c) for c in frame.columns
    ]
    body: list[list[str]] = [
        ([str(i)] if index else []) + [_cell(v) for v in row]
        for i, row in zip(frame.index, frame.itertuples(index=False), strict=True)
    ]
    table = [headers, *body]
    widths = [max(len(r[c]) for r in table) for c in range(len(headers))]
    lines = []
    for number, row in enumerate(table):
        cells = [
            cell.ljust(widths[c]) if c == 0 and index else cell.rjust(widths[c])
            for c, cell in enumerate(row)
        ]
        lines.append("  ".join(cells).rstrip())
        if number == 0:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)


# --------------------------------------------------------------------------- chart


_SERIES = (
    ("free_cooling_hours", "free-cooling hours", "#1f77b4"),
    ("open_hours", "hours open", "#2ca02c"),
    ("above_comfort_hours", "hours above comfort.high", "#d62728"),
    ("moves", "actuator moves", "#9467bd"),
)


def sweep_svg(table: pd.DataFrame, label: str, title: str, *, chart_id: str | None = None) -> str:
    """A self-contained SVG: one small chart per figure against the swept value.

    ``table`` has one row per value: a ``value`` column (as written, with its
    unit) and the site figures. Drawn by :func:`ventsup.edges.charts.panels_svg`;
    ``chart_id`` names the ``svg`` element when it sits inline in a page.
    """
    values = [str(v) for v in table["value"]]
    numbers = []
    for text in values:
        found = _AMOUNT.match(text)
        numbers.append(float(found.group(1)) if found else math.nan)
    panels = [
        Panel(name, (Series(name, tuple(float(v) for v in table[column]), colour),))
        for column, name, colour in _SERIES
    ]
    return panels_svg(numbers, values, panels, title=title, x_title=label, chart_id=chart_id)


# --------------------------------------------------------------------------- report


def _occupied(config: SiteConfig, zone: str, times: np.ndarray) -> np.ndarray:
    local = pd.to_datetime(times, unit="s", utc=True).tz_convert(config.site.time_zone)
    periods = config.rules_for(zone).schedule.occupied
    minute = np.asarray(local.hour * 60 + local.minute)
    day = np.asarray(local.day_of_week)
    result = np.zeros(times.size, dtype=bool)
    for period in periods:
        days = np.isin(day, sorted(period.days))
        before = np.isin((day - 1) % 7, sorted(period.days))
        if period.start_minute < period.end_minute:
            inside = days & (minute >= period.start_minute) & (minute < period.end_minute)
        else:
            inside = (days & (minute >= period.start_minute)) | (
                before & (minute < period.end_minute)
            )
        result |= inside
    return result


def report_frame(
    config: SiteConfig,
    log: PointLog,
    plans: Mapping[str, ZonePlan],
    results: Sequence[ZoneResult],
) -> pd.DataFrame:
    """The decisions table of :func:`ventsup.core.figures.decisions_to_frame`, one row per
    evaluation: each run's outcome over its evaluations, with the facts of the moment
    read from the log (the values the core reads; see the module notes)."""
    frames = []
    openings = sorted({n for zone in config.zones.values() for n in zone.openings})
    for result in results:
        zone, plan = result.zone, plans[result.zone]
        n = len(plan)
        if not n or not result.runs:
            continue
        which = np.repeat(np.arange(len(result.runs)), [run.evaluations for run in result.runs])
        runs = result.runs
        aligned = align(config, zone, log, plan.times, plan.held)
        features = zone_features(config, zone, aligned.readings, n)
        spec = config.zones[zone]
        outdoor = config.outdoor

        def values(name: str | None, n: int = n, aligned: Any = aligned) -> np.ndarray:
            found = aligned.readings.get(name) if name is not None else None
            return np.full(n, np.nan) if found is None else found.value

        columns: dict[str, Any] = {
            "t": plan.times,
            "zone": np.full(n, zone, dtype=object),
            "mode": np.array([r.decision.mode.value for r in runs], dtype=object)[which],
            "layer": np.array([int(r.decision.layer) for r in runs])[which],
            "cause": np.array([r.decision.cause.value for r in runs], dtype=object)[which],
            "reason": np.array([r.decision.reason for r in runs], dtype=object)[which],
            "windows_open": np.array([r.decision.windows_open for r in runs])[which],
            "open_area": np.array([r.decision.open_area for r in runs])[which],
        }
        for name in openings:
            targets = [r.decision.targets.get(name) for r in runs]
            column = np.array([math.nan if v is None else v for v in targets], dtype=float)
            columns[f"target:{name}"] = column[which]
        heating = np.zeros(n) if spec.heating is None else values(spec.heating)
        facts = {
            "temp_indoor": features.temp_indoor,
            "temp_outdoor": values(outdoor.temperature),
            "dew_point_outdoor": features.dew_point_outdoor,
            "co2": values(spec.co2),
            "heating": heating,
            "occupied": _occupied(config, zone, plan.times).astype(float),
            "wind_speed": values(outdoor.wind_speed),
            "wind_direction": values(outdoor.wind_direction),
            "rain": values(outdoor.rain),
        }
        for name in FACTS:
            columns[f"fact:{name}"] = facts.get(name, np.full(n, np.nan))
        frames.append(pd.DataFrame(columns))
    if not frames:
        return pd.DataFrame()
    frame = pd.concat(frames, ignore_index=True)
    return frame.sort_values(["t"], kind="stable", ignore_index=True)


def cooling_delivered(
    config: SiteConfig,
    log: PointLog,
    plans: Mapping[str, ZonePlan],
    results: Sequence[ZoneResult],
    start: float,
    end: float,
    tick: float,
) -> dict[str, float]:
    """Each zone's sensible cooling delivered [kWh]: the monthly report's estimate.

    The same computation as the report's (:func:`ventsup.core.figures.compute_figures`
    over :func:`report_frame`: airflow through the commanded openings from their
    geometry and the logged temperatures), one zone at a time so that memory
    stays that of one zone's evaluations. NaN for a zone with no evaluations.
    """
    cooling: dict[str, float] = {}
    options = FigureOptions(tick=tick)
    for result in results:
        frame = report_frame(config, log, {result.zone: plans[result.zone]}, [result])
        value = math.nan
        if not frame.empty:
            totals = compute_figures(frame, config, start, end, options=options).totals
            row = totals[totals["zone"] == result.zone]
            if len(row):
                value = float(row["cooling_kwh"].iloc[0])
        cooling[result.zone] = value
    return cooling


def evaluation_tick(plans: Mapping[str, ZonePlan]) -> float:
    """The tick of the evaluations [s]: the shortest of the zones' median spacings (60 s
    when no zone has two evaluations). The report weights a decision by the time to
    the next one, capped at twice this."""
    ticks = [plan.times for plan in plans.values() if len(plan) > 1]
    if not ticks:
        return 60.0
    return float(min(float(np.median(np.diff(times))) for times in ticks))
