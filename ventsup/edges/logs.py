"""Logged point data for replay: CSV in wide form (pandas).

A wide log has a ``timestamp`` column and one column per point, named as in
the site config, holding SI values (°C, % RH, m/s, degrees, ppm, opening
fraction; binary points as 0/1 or true/false). Empty cells mean "no sample".
Timestamps with an offset are taken as they are; naive ones are read in the
site's time zone.

UNFINISHED: long form, Parquet and the daemon's own recording arrive with the
replay work; this reader serves the demo and the tests of the core.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from ventsup.config.errors import VentsupError
from ventsup.config.model import PointKind, SiteConfig
from ventsup.core.inputs import Sample

__all__ = ["LogError", "read_wide_csv"]

_TRUE = {"1", "true", "on", "yes"}
_FALSE = {"0", "false", "off", "no"}


class LogError(VentsupError):
    """A log file that cannot be replayed; the message names the file and row."""


def read_wide_csv(path: str | Path, config: SiteConfig) -> list[Sample]:
    """Read a wide CSV log into samples sorted by time.

    Raises
    ------
    LogError
        Unknown point columns, unparseable or unsorted or duplicate timestamps,
        and values that are not numbers, each with the file and row (the
        header is row 1).
    """
    path = Path(path)
    try:
        frame = pd.read_csv(path, dtype=str, keep_default_na=False)
    except (OSError, pd.errors.ParserError, UnicodeDecodeError) as exc:
        raise LogError(f"{path}: cannot read the log: {exc}") from exc
    if "timestamp" not in frame.columns:
        raise LogError(f"{path}:1: expected a 'timestamp' column, got {list(frame.columns)}")
    unknown = [c for c in frame.columns if c != "timestamp" and c not in config.points]
    if unknown:
        raise LogError(f"{path}:1: columns {unknown} are not points of site {config.site.name!r}")

    times = pd.to_datetime(frame["timestamp"], errors="coerce", utc=False, format="ISO8601")
    bad = times.isna()
    if bad.any():
        row = int(bad.to_numpy().argmax())
        raise LogError(
            f"{path}:{row + 2}: timestamp {frame['timestamp'].iloc[row]!r} is not an ISO 8601 time"
        )
    epoch = _epoch_seconds(times, config.site.time_zone)
    for row in range(1, len(epoch)):
        if epoch[row] <= epoch[row - 1]:
            what = "repeats" if epoch[row] == epoch[row - 1] else "goes back in time from"
            raise LogError(
                f"{path}:{row + 2}: timestamp {frame['timestamp'].iloc[row]!r} {what} the row above"
            )

    samples: list[Sample] = []
    for column in frame.columns:
        if column == "timestamp":
            continue
        binary = config.points[column].kind is PointKind.BINARY
        for row, text in enumerate(frame[column]):
            text = text.strip()
            if not text:
                continue
            samples.append(Sample(column, _value(path, row, column, text, binary), epoch[row]))
    samples.sort(key=lambda s: s.t)
    return samples


def _epoch_seconds(times: pd.Series, time_zone: str) -> list[float]:
    if times.dt.tz is None:
        times = times.dt.tz_localize(time_zone, ambiguous="raise", nonexistent="raise")
    return [ts.timestamp() for ts in times]


def _value(path: Path, row: int, column: str, text: str, binary: bool) -> float | bool:
    if binary:
        word = text.lower()
        if word in _TRUE:
            return True
        if word in _FALSE:
            return False
        raise LogError(f"{path}:{row + 2} {column}: got {text!r}, expected 0/1 or true/false")
    try:
        return float(text)
    except ValueError:
        raise LogError(f"{path}:{row + 2} {column}: got {text!r}, expected a number") from None
