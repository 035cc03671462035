"""Logged point data for replay: CSV and Parquet, wide or long form (pandas, pyarrow).

A log becomes a :class:`PointLog`: per point, the times [s since the epoch,
UTC] and SI values of its samples, as columns (numpy arrays), so that a year
of one-minute data for a hundred zones fits in memory and can be searched
vectorised. :meth:`PointLog.samples` gives the same data as a list of
:class:`~ventsup.core.inputs.Sample` for the per-step replay.

Forms (see ``docs/replay.md``)
------------------------------
- **wide**: a ``timestamp`` column and one column per point, named as in the
  site config; one row per time, rows strictly increasing in time. An empty
  cell means "no sample". A header ``name [unit]`` (``outdoor_temp [degF]``)
  gives that column's unit; without one, values are SI.
- **long**: the columns ``timestamp``, ``point`` and ``value`` (and optionally
  ``unit``); one row per sample, rows in time order (equal times allowed for
  different points), no point twice at one time.

Values are SI unless a unit is given: °C, % RH, m/s, degrees from north, ppm,
opening fraction 0-1; binary points as 0/1, true/false or the point's own
true/false words. Values the daemon would reject (outside the point's
plausible range, infinite) are not held, as live; they are counted in
:attr:`PointLog.rejected`.

Times: an ISO 8601 timestamp with a UTC offset (``2027-06-15T14:00:00-05:00``,
``...Z``) is taken as it is; a naive one is read in the site's time zone (and
:attr:`PointLog.time_note` says so); a naive time that the daylight-saving
change makes ambiguous or skips is an error naming the row. Plain numbers are
seconds since the Unix epoch (UTC). Parquet timestamp columns may also be
datetimes (with or without a zone).

Errors::

    VentsupError        (ventsup.config.errors)
    └── LogError        a log that cannot be replayed; the message starts with
                        ``file:row`` (the header is row 1, the first data row 2)
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime, timedelta
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np
import numpy.typing as npt
import pandas as pd

from ventsup.config.errors import VentsupError
from ventsup.config.model import PointKind, SiteConfig
from ventsup.config.units import UnitError, parse_quantity
from ventsup.core.inputs import Sample

__all__ = [
    "LogError",
    "PointLog",
    "PointSeries",
    "iso_times",
    "needed_points",
    "parse_times",
    "read_log",
    "read_wide_csv",
    "write_table",
]

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.int64]

_TRUE = ("1", "true", "on", "yes")
_FALSE = ("0", "false", "off", "no")
_NAN_WORDS = ("nan", "na", "null", "none")
_CSV_SUFFIXES = (".csv", ".txt", ".csv.gz")
_PARQUET_SUFFIXES = (".parquet", ".pq")
_HEADER_UNIT = re.compile(r"^\s*(?P<name>[^\[\]\s]+)\s*\[(?P<unit>[^\[\]]+)\]\s*$")
_HAS_TIME = re.compile(r"\d[T ]\d{1,2}:\d{2}")
_OFFSET = re.compile(r"(?:[Zz]|[+-]\d{2}(?::?\d{2})?)$")
_EPOCH = re.compile(r"^[+-]?\d+(?:\.\d*)?$")
_NS = 1_000_000_000


class LogError(VentsupError):
    """A log file that cannot be replayed; the message names the file and row."""


# --------------------------------------------------------------------------- data


@dataclass(frozen=True, eq=False)
class PointSeries:
    """The samples of one point: times [s, UTC], SI values, and their place in the log.

    ``t`` is sorted (non-decreasing); ``order`` is each sample's position in
    the log, which breaks ties between samples of the same time (the later one
    is held). Binary values are 0.0 / 1.0 with ``binary`` set.
    """

    point: str
    t: FloatArray
    value: FloatArray
    order: IntArray
    binary: bool

    def __len__(self) -> int:
        return int(self.t.size)

    def sample(self, index: int) -> Sample:
        """Sample ``index`` as the core holds it (a bool for a binary point)."""
        raw = float(self.value[index])
        value: float | bool = raw == 1.0 if self.binary else raw
        return Sample(self.point, value, float(self.t[index]))


@dataclass(frozen=True, eq=False)
class PointLog:
    """Logged samples of a site, by point (see the module notes).

    ``source`` names where they came from; ``time_note`` says how timestamps
    were read; ``rejected`` counts the values not held, by point and reason
    (``out_of_range``, ``not_finite``).
    """

    series: Mapping[str, PointSeries]
    source: str = "<samples>"
    time_note: str = ""
    rejected: Mapping[str, Mapping[str, int]] = field(default_factory=dict)

    def __post_init__(self) -> None:
        # Copies (plain dicts, so that a log can be sent to worker processes).
        object.__setattr__(self, "series", dict(self.series))
        object.__setattr__(self, "rejected", {k: dict(v) for k, v in self.rejected.items()})

    @property
    def first(self) -> float | None:
        """Time of the earliest sample [s], None for an empty log."""
        times = [float(s.t[0]) for s in self.series.values() if len(s)]
        return min(times) if times else None

    @property
    def last(self) -> float | None:
        """Time of the latest sample [s], None for an empty log."""
        times = [float(s.t[-1]) for s in self.series.values() if len(s)]
        return max(times) if times else None

    def __len__(self) -> int:
        return sum(len(s) for s in self.series.values())

    def samples(self, *, log_order: bool = False) -> list[Sample]:
        """Every sample, by time and then in log order (what the per-step replay holds).

        With ``log_order``, in log order alone: a recording's order, in which the
        daemon handled them even where a recorded time went back.
        """
        keyed: list[tuple[float, int, Sample]] = []
        for series in self.series.values():
            for i in range(len(series)):
                keyed.append((float(series.t[i]), int(series.order[i]), series.sample(i)))
        if log_order:
            keyed.sort(key=lambda item: item[1])
        else:
            keyed.sort(key=lambda item: (item[0], item[1]))
        return [sample for _, _, sample in keyed]

    def only(self, points: Iterable[str]) -> PointLog:
        """The same log restricted to ``points`` (those it has)."""
        wanted = set(points)
        return PointLog(
            {name: s for name, s in self.series.items() if name in wanted},
            self.source,
            self.time_note,
            {name: n for name, n in self.rejected.items() if name in wanted},
        )

    @classmethod
    def from_samples(
        cls, samples: Sequence[Sample], config: SiteConfig, source: str = "<samples>"
    ) -> PointLog:
        """A log of ``samples`` (any order; ties keep the given order)."""
        by_point: dict[str, list[tuple[float, int, float]]] = {}
        for index, sample in enumerate(samples):
            if sample.point not in config.points:
                raise LogError(f"{source}: sample {index}: {sample.point!r} is not a point")
            by_point.setdefault(sample.point, []).append(
                (float(sample.t), index, float(sample.value))
            )
        series: dict[str, PointSeries] = {}
        for name, rows in by_point.items():
            rows.sort(key=lambda row: (row[0], row[1]))
            series[name] = PointSeries(
                name,
                np.array([r[0] for r in rows], dtype=np.float64),
                np.array([r[2] for r in rows], dtype=np.float64),
                np.array([r[1] for r in rows], dtype=np.int64),
                config.points[name].kind is PointKind.BINARY,
            )
        return cls(series, source)


def needed_points(config: SiteConfig, *, feedback: bool = False) -> list[str]:
    """The points that zones and the outdoor section read (feedback points only if asked)."""
    names: list[str] = [
        n
        for n in (
            config.outdoor.temperature,
            config.outdoor.humidity,
            config.outdoor.dew_point,
            config.outdoor.wind_speed,
            config.outdoor.wind_direction,
            config.outdoor.rain,
        )
        if n is not None
    ]
    for zone in config.zones.values():
        names += zone.temperature.sensors
        names += [n for n in (zone.co2, zone.heating) if n is not None]
        names += zone.smoke_alarms
        if feedback:
            names += [o.feedback for o in zone.openings.values() if o.feedback is not None]
    return list(dict.fromkeys(names))


# --------------------------------------------------------------------------- reading


def read_log(path: str | Path, config: SiteConfig, *, allow_missing: bool = False) -> PointLog:
    """Read a CSV or Parquet log, wide or long, into a :class:`PointLog`.

    The form is told from the columns (``timestamp, point, value`` is long);
    the file type from the suffix (``.csv``, ``.parquet``).

    Raises
    ------
    LogError
        An unreadable file; a missing ``timestamp`` column; unknown points; a
        point the zones read that has no column (unless ``allow_missing``;
        actuator feedback points may always be absent); unparseable, ambiguous
        or non-existent timestamps; rows out of time order or repeated; values
        that are not numbers or (binary points) not a known word; an unknown
        unit. Each with the file and the row.
    """
    path = Path(path)
    frame = _read_frame(path)
    columns = [str(c) for c in frame.columns]
    if "timestamp" not in columns:
        raise LogError(
            f"{path}:1: expected a 'timestamp' column, got {columns}; a wide log has "
            "'timestamp' and one column per point, a long log 'timestamp', 'point' and 'value'"
        )
    if {"point", "value"} <= set(columns) and set(columns) <= {
        "timestamp",
        "point",
        "value",
        "unit",
    }:
        log = _read_long(path, frame, config)
    else:
        log = _read_wide(path, frame, config)
    if not allow_missing:
        absent = [name for name in needed_points(config) if name not in log.series]
        if absent:
            raise LogError(
                f"{path}: no values for the points {', '.join(absent)}, which the zones read; "
                "a point never received counts as unknown (rain and wind as the worst case). "
                "Add the points to the log, or replay anyway with --allow-missing"
            )
    return log


def read_wide_csv(path: str | Path, config: SiteConfig) -> list[Sample]:
    """Read a wide CSV log into samples sorted by time (missing points allowed).

    Raises
    ------
    LogError
        As :func:`read_log`.
    """
    return read_log(path, config, allow_missing=True).samples()


def _read_frame(path: Path) -> pd.DataFrame:
    name = path.name.lower()
    try:
        if name.endswith(_PARQUET_SUFFIXES):
            try:
                return pd.read_parquet(path)
            except ImportError as exc:
                raise LogError(
                    f"{path}: reading Parquet needs pyarrow: pip install pyarrow"
                ) from exc
        if name.endswith(_CSV_SUFFIXES):
            return pd.read_csv(path, dtype=str, keep_default_na=False)
    except LogError:
        raise
    except FileNotFoundError:
        raise LogError(f"{path}: no such file; check the path") from None
    except (OSError, ValueError, UnicodeDecodeError) as exc:
        raise LogError(f"{path}: cannot read the log: {exc}") from exc
    raise LogError(f"{path}: unknown log type {path.suffix!r}; expected .csv or .parquet (.pq)")


def _row(index: int) -> int:
    """The row number people see: the header is row 1, the first data row 2."""
    return index + 2


def _text(value: object) -> str:
    return "" if value is None or (isinstance(value, float) and math.isnan(value)) else str(value)


# --------------------------------------------------------------------------- times


def _epoch_from_ns(ns: npt.NDArray[np.int64]) -> FloatArray:
    # Whole seconds and the fraction separately: int64 nanoseconds do not fit a double.
    seconds = (ns // _NS).astype(np.float64)
    return seconds + (ns % _NS).astype(np.float64) / 1e9


def parse_times(raw: pd.Series, path: Path, time_zone: str) -> tuple[FloatArray, str]:
    """Timestamps -> seconds since the epoch (UTC), and how they were read.

    Raises
    ------
    LogError
        Unparseable, mixed (some with a UTC offset, some without), ambiguous or
        non-existent (daylight saving) times, with the row.
    """
    n = len(raw)
    if n == 0:
        return np.zeros(0, dtype=np.float64), "no rows"
    if isinstance(raw.dtype, pd.DatetimeTZDtype):
        ns = raw.dt.tz_convert("UTC").dt.tz_localize(None).to_numpy("datetime64[ns]")
        _no_missing_times(pd.Series(ns), raw, path)
        return _epoch_from_ns(ns.astype(np.int64)), "timestamps with their time zone"
    if pd.api.types.is_datetime64_dtype(raw.dtype):
        naive = pd.Series(raw.to_numpy("datetime64[ns]"))
        _no_missing_times(naive, raw, path)
        return _localize(naive, raw, path, time_zone)
    if pd.api.types.is_numeric_dtype(raw.dtype) and not pd.api.types.is_bool_dtype(raw.dtype):
        values = raw.to_numpy(dtype=np.float64, na_value=np.nan)
        bad = ~np.isfinite(values)
        if bad.any():
            row = int(np.argmax(bad))
            raise LogError(f"{path}:{_row(row)}: timestamp {raw.iloc[row]!r} is not a time")
        return values.astype(np.float64), "timestamps in seconds since the epoch (UTC)"

    text = pd.Series([_text(v).strip() for v in raw], dtype=object)
    empty = (text == "").to_numpy()
    if empty.any():
        row = int(np.argmax(empty))
        raise LogError(f"{path}:{_row(row)}: empty timestamp; expected an ISO 8601 time")
    epoch = text.map(lambda s: bool(_EPOCH.match(s))).to_numpy(dtype=bool)
    if epoch.all():
        seconds: FloatArray = np.asarray(text.astype(float).to_numpy(), dtype=np.float64)
        return seconds, ("timestamps in seconds since the epoch (UTC)")
    # Parseable at all first (naive ones read as UTC only for this check).
    _no_missing_times(pd.to_datetime(text, format="ISO8601", utc=True, errors="coerce"), text, path)
    aware = text.map(lambda s: bool(_HAS_TIME.search(s) and _OFFSET.search(s))).to_numpy(dtype=bool)
    if aware.any() and not aware.all():
        row = int(np.argmax(aware != aware[0]))
        first = "has" if aware[0] else "has no"
        this = "has" if aware[row] else "has no"
        raise LogError(
            f"{path}:{_row(row)}: timestamp {text.iloc[row]!r} {this} UTC offset, but the "
            f"first one ({text.iloc[0]!r}) {first}; write every timestamp the same way"
        )
    if aware.all():
        parsed = pd.to_datetime(text, format="ISO8601", utc=True, errors="coerce")
        _no_missing_times(parsed, text, path)
        ns = parsed.dt.tz_localize(None).to_numpy("datetime64[ns]").astype(np.int64)
        return _epoch_from_ns(ns), "timestamps with their UTC offset"
    parsed = pd.to_datetime(text, format="ISO8601", errors="coerce")
    _no_missing_times(parsed, text, path)
    return _localize(pd.Series(parsed.to_numpy("datetime64[ns]")), text, path, time_zone)


def _no_missing_times(parsed: pd.Series, raw: pd.Series, path: Path) -> None:
    bad = parsed.isna().to_numpy()
    if bad.any():
        row = int(np.argmax(bad))
        raise LogError(
            f"{path}:{_row(row)}: timestamp {_text(raw.iloc[row])!r} is not an ISO 8601 time "
            "such as 2027-06-15T14:00:00-05:00 or 2027-06-15 14:00"
        )


def _localize(
    naive: pd.Series, raw: pd.Series, path: Path, time_zone: str
) -> tuple[FloatArray, str]:
    """Naive wall-clock times in ``time_zone`` -> epoch seconds; DST problems name the row."""
    tz = ZoneInfo(time_zone)
    stamps = pd.DatetimeIndex(naive)
    local = stamps.tz_localize(time_zone, ambiguous="NaT", nonexistent="NaT")
    bad = np.asarray(local.isna())
    if bad.any():
        row = int(np.argmax(bad))
        wall = stamps[row].to_pydatetime()
        text = _text(raw.iloc[row])
        early = wall.replace(tzinfo=tz, fold=0).utcoffset() or timedelta(0)
        late = wall.replace(tzinfo=tz, fold=1).utcoffset() or timedelta(0)
        if early > late:  # the autumn change: this wall-clock time comes twice
            raise LogError(
                f"{path}:{_row(row)}: timestamp {text!r} is ambiguous in {time_zone}: that "
                "wall-clock time happens twice when daylight saving time ends; write it with "
                f"its UTC offset ({_offset(early)} the first time, {_offset(late)} the second)"
            )
        raise LogError(
            f"{path}:{_row(row)}: timestamp {text!r} does not exist in {time_zone}: the clocks "
            "skip that hour when daylight saving time starts; write times with their UTC "
            "offset, or check the logger's clock"
        )
    ns = local.tz_convert("UTC").tz_localize(None).asi8
    return _epoch_from_ns(np.asarray(ns, dtype=np.int64)), (
        f"timestamps without a UTC offset, read in the site's time zone {time_zone}"
    )


def _offset(delta: timedelta) -> str:
    minutes = int(delta.total_seconds() // 60)
    sign = "+" if minutes >= 0 else "-"
    return f"{sign}{abs(minutes) // 60:02d}:{abs(minutes) % 60:02d}"


def iso_times(t: Iterable[float], time_zone: str) -> list[str]:
    """Epoch seconds as ISO 8601 local times with their UTC offset (to the second)."""
    tz = ZoneInfo(time_zone)
    out = []
    for value in t:
        when = datetime.fromtimestamp(float(value), tz)
        spec = "seconds" if when.microsecond == 0 else "milliseconds"
        out.append(when.isoformat(timespec=spec))
    return out


# --------------------------------------------------------------------------- values


@dataclass
class _Column:
    """Values of one point read from a column (wide) or from the rows naming it (long)."""

    rows: IntArray
    values: FloatArray
    rejected: dict[str, int] = field(default_factory=dict)


def _binary_words(config: SiteConfig, name: str) -> tuple[set[str], set[str]]:
    point = config.points[name]
    true = {w.strip().casefold() for w in (*_TRUE, *point.true_words)}
    false = {w.strip().casefold() for w in (*_FALSE, *point.false_words)}
    return true, false


def _parse_values(
    path: Path,
    config: SiteConfig,
    name: str,
    raw: pd.Series,
    rows: IntArray,
    unit: str | None,
    where: str,
) -> _Column:
    """Parse the cells ``raw`` (at data rows ``rows``) of point ``name``; empty cells dropped."""
    point = config.points[name]
    binary = point.kind is PointKind.BINARY
    if unit is not None:
        _check_unit(path, name, point.kind, unit, where)
    if binary and pd.api.types.is_bool_dtype(raw.dtype):
        keep = ~raw.isna().to_numpy()
        values = raw.to_numpy()[keep].astype(np.float64)
        return _Column(rows[keep], values)
    if pd.api.types.is_numeric_dtype(raw.dtype) and not pd.api.types.is_bool_dtype(raw.dtype):
        numbers = raw.to_numpy(dtype=np.float64, na_value=np.nan)
        keep = ~np.isnan(numbers)
        kept_rows, numbers = rows[keep], numbers[keep]
        if binary:
            bad = ~np.isin(numbers, (0.0, 1.0))
            if bad.any():
                i = int(np.argmax(bad))
                raise LogError(
                    f"{path}:{_row(int(kept_rows[i]))} {where}: got {numbers[i]!r}, expected "
                    "0 or 1 (or true/false) for a binary point"
                )
            return _Column(kept_rows, numbers)
        return _checked(config, name, kept_rows, numbers, unit)

    text = [_text(v).strip() for v in raw]
    keep_list = [bool(s) and s.casefold() not in _NAN_WORDS for s in text]
    keep = np.array(keep_list, dtype=bool) if text else np.zeros(0, dtype=bool)
    kept_rows = rows[keep]
    kept = [s for s, k in zip(text, keep_list, strict=True) if k]
    if binary:
        true, false = _binary_words(config, name)
        values = np.empty(len(kept), dtype=np.float64)
        for i, s in enumerate(kept):
            word = s.casefold()
            if word in true:
                values[i] = 1.0
            elif word in false:
                values[i] = 0.0
            else:
                try:
                    number = float(s)
                except ValueError:
                    number = math.nan
                if number not in (0.0, 1.0):
                    words = ", ".join(sorted(true | false))
                    raise LogError(
                        f"{path}:{_row(int(kept_rows[i]))} {where}: got {s!r}, expected one of "
                        f"{words}"
                    )
                values[i] = number
        return _Column(kept_rows, values)
    numbers = pd.to_numeric(pd.Series(kept, dtype=object), errors="coerce").to_numpy(
        dtype=np.float64, na_value=np.nan
    )
    bad = np.isnan(numbers)
    if bad.any():
        i = int(np.argmax(bad))
        raise LogError(
            f"{path}:{_row(int(kept_rows[i]))} {where}: got {kept[i]!r}, expected a number "
            f"({'in ' + unit if unit else 'SI: ' + _si_unit(point.kind)})"
        )
    return _checked(config, name, kept_rows, numbers, unit)


def _si_unit(kind: PointKind) -> str:
    return {
        PointKind.TEMPERATURE: "°C",
        PointKind.HUMIDITY: "% RH",
        PointKind.DEW_POINT: "°C",
        PointKind.WIND_SPEED: "m/s",
        PointKind.WIND_DIRECTION: "degrees from north",
        PointKind.CO2: "ppm",
        PointKind.POSITION: "opening fraction 0-1",
        PointKind.BINARY: "0/1",
    }[kind]


def _check_unit(path: Path, name: str, kind: PointKind, unit: str, where: str) -> None:
    quantity = kind.quantity
    if kind is PointKind.HUMIDITY:
        if unit.strip() != "%":
            raise LogError(f"{path}:1 {where}: unit {unit!r}, expected '%' for a humidity point")
        return
    if quantity is None:
        raise LogError(f"{path}:1 {where}: unit {unit!r}, but a {kind} point takes no unit")
    try:
        parse_quantity(f"1 {unit}", quantity)
    except UnitError as exc:
        raise LogError(f"{path}:1 {where}: unit {unit!r}: {exc}") from None


def _convert(values: FloatArray, kind: PointKind, unit: str) -> FloatArray:
    """Values in ``unit`` -> SI, each as the daemon converts a payload (rounded to 1e-9)."""
    quantity = kind.quantity
    if quantity is None or kind is PointKind.HUMIDITY:
        return values
    cache: dict[float, float] = {}
    out = np.empty_like(values)
    for i, v in enumerate(values.tolist()):
        if v not in cache:
            cache[v] = parse_quantity(f"{v!r} {unit}", quantity) if math.isfinite(v) else v
        out[i] = cache[v]
    return out


def _checked(
    config: SiteConfig, name: str, rows: IntArray, numbers: FloatArray, unit: str | None
) -> _Column:
    """Drop what the daemon would reject: infinite values and values out of the plausible range."""
    point = config.points[name]
    if unit is not None:
        numbers = _convert(numbers, point.kind, unit)
    low, high = point.plausible_range
    finite = np.isfinite(numbers)
    inside = finite & (numbers >= low) & (numbers <= high)
    rejected: dict[str, int] = {}
    if (~finite).any():
        rejected["not_finite"] = int((~finite).sum())
    if (finite & ~inside).any():
        rejected["out_of_range"] = int((finite & ~inside).sum())
    return _Column(rows[inside], numbers[inside], rejected)


def _unknown(path: Path, config: SiteConfig, names: Sequence[str], row: int) -> LogError:
    known = ", ".join(sorted(config.points))
    return LogError(
        f"{path}:{row}: {', '.join(repr(n) for n in names)} "
        f"{'is not a point' if len(names) == 1 else 'are not points'} of site "
        f"{config.site.name!r}; its points are {known}"
    )


def _read_wide(path: Path, frame: pd.DataFrame, config: SiteConfig) -> PointLog:
    columns: dict[str, tuple[str, str | None]] = {}  # column -> (point, unit)
    unknown: list[str] = []
    for column in (str(c) for c in frame.columns):
        if column == "timestamp":
            continue
        match = _HEADER_UNIT.match(column)
        name, unit = (match.group("name"), match.group("unit").strip()) if match else (column, None)
        if name not in config.points:
            unknown.append(column)
        elif any(point == name for point, _ in columns.values()):
            raise LogError(f"{path}:1: point {name!r} has two columns; keep one")
        else:
            columns[column] = (name, unit)
    if unknown:
        raise _unknown(path, config, unknown, 1)
    epoch, note = parse_times(frame["timestamp"], path, config.site.time_zone)
    for row in range(1, len(epoch)):
        if not epoch[row] > epoch[row - 1]:
            what = "repeats" if epoch[row] == epoch[row - 1] else "goes back in time from"
            raise LogError(
                f"{path}:{_row(row)}: timestamp {_text(frame['timestamp'].iloc[row])!r} {what} "
                f"the row above; a wide log has one row per time, in time order"
            )
    rows = np.arange(len(frame), dtype=np.int64)
    width = max(1, len(columns))
    series: dict[str, PointSeries] = {}
    rejected: dict[str, dict[str, int]] = {}
    for position, (column, (name, unit)) in enumerate(columns.items()):
        parsed = _parse_values(path, config, name, frame[column], rows, unit, f"column {column}")
        series[name] = PointSeries(
            name,
            epoch[parsed.rows],
            parsed.values,
            parsed.rows * width + position,
            config.points[name].kind is PointKind.BINARY,
        )
        if parsed.rejected:
            rejected[name] = parsed.rejected
    return PointLog(series, str(path), note, rejected)


def _read_long(path: Path, frame: pd.DataFrame, config: SiteConfig) -> PointLog:
    names = [_text(v).strip() for v in frame["point"]]
    unknown_rows = [i for i, n in enumerate(names) if n not in config.points]
    if unknown_rows:
        first = unknown_rows[0]
        bad = list(dict.fromkeys(names[i] for i in unknown_rows))
        raise _unknown(path, config, bad[:5], _row(first))
    epoch, note = parse_times(frame["timestamp"], path, config.site.time_zone)
    back = np.flatnonzero(epoch[1:] < epoch[:-1])
    if back.size:
        row = int(back[0]) + 1
        raise LogError(
            f"{path}:{_row(row)}: timestamp {_text(frame['timestamp'].iloc[row])!r} goes back in "
            "time from the row above; a long log has its rows in time order"
        )
    units = [_text(v).strip() or None for v in frame["unit"]] if "unit" in frame else None
    point_array = np.array(names, dtype=object)
    rows_all = np.arange(len(frame), dtype=np.int64)
    series: dict[str, PointSeries] = {}
    rejected: dict[str, dict[str, int]] = {}
    seen: dict[tuple[float, str], int] = {}
    for i in range(len(frame)):
        key = (float(epoch[i]), names[i])
        if key in seen:
            raise LogError(
                f"{path}:{_row(i)}: point {names[i]!r} at {_text(frame['timestamp'].iloc[i])!r} "
                f"repeats row {_row(seen[key])}; give each point once per time"
            )
        seen[key] = i
    for name in dict.fromkeys(names):
        mask = point_array == name
        rows = rows_all[mask]
        unit: str | None = None
        if units is not None:
            given = {units[int(r)] for r in rows}
            if len(given) > 1:
                raise LogError(
                    f"{path}: point {name!r} is given in several units {sorted(map(str, given))}; "
                    "use one unit per point"
                )
            unit = given.pop()
        raw = frame["value"].iloc[rows]
        parsed = _parse_values(path, config, name, raw, rows, unit, f"point {name}")
        series[name] = PointSeries(
            name,
            epoch[parsed.rows],
            parsed.values,
            parsed.rows,
            config.points[name].kind is PointKind.BINARY,
        )
        if parsed.rejected:
            rejected[name] = parsed.rejected
    return PointLog(series, str(path), note, rejected)


# --------------------------------------------------------------------------- writing


def write_table(frame: pd.DataFrame, path: str | Path) -> Path:
    """Write ``frame`` as CSV or Parquet, by the suffix of ``path``; returns the path.

    Raises
    ------
    LogError
        An unknown suffix, a missing Parquet engine or a file that cannot be written.
    """
    path = Path(path)
    name = path.name.lower()
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        if name.endswith(_PARQUET_SUFFIXES):
            try:
                frame.to_parquet(path, index=False)
            except ImportError as exc:
                raise LogError(
                    f"{path}: writing Parquet needs pyarrow: pip install pyarrow"
                ) from exc
        elif name.endswith(_CSV_SUFFIXES):
            frame.to_csv(path, index=False, lineterminator="\n")
        else:
            raise LogError(f"{path}: unknown table type {path.suffix!r}; expected .csv or .parquet")
    except OSError as exc:
        raise LogError(f"{path}: cannot write: {exc.strerror or exc}") from exc
    return path
