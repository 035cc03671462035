"""Outdoor weather for the simulator: files, CSV, a seeded synthetic generator, interpolation.

A :class:`Weather` is a pandas frame with a tz-aware UTC index and the columns
below, checked when it is made. Readers bring other sources to that shape;
:meth:`Weather.at` interpolates to the simulation's steps.

Nomenclature
------------
=====================  =======  ====================================================
column                 unit     quantity
=====================  =======  ====================================================
``temp_outdoor``       °C       outdoor dry-bulb temperature
``relative_humidity``  %        outdoor relative humidity, 0-100
``wind_speed``         m/s      wind speed at the met station (10 m, open terrain)
``wind_direction``     deg      where the wind comes from, clockwise from north
``rain``               bool     it rained in the interval ending at the timestamp
``ghi``                W/m²     global horizontal irradiance
``dni``                W/m²     direct normal irradiance
``dhi``                W/m²     diffuse horizontal irradiance
=====================  =======  ====================================================

Values are instantaneous at the timestamp except ``rain``. Hourly files that
label each hour by its end (TMY3, EPW) carry the irradiance summed over the
hour; the readers move it to the instants by averaging neighbouring hours, so
that it lines up with the sun (see :func:`from_hour_ending`).
"""

from __future__ import annotations

import math
import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from datetime import timedelta, timezone
from pathlib import Path
from types import MappingProxyType
from typing import Any

import numpy as np
import numpy.typing as npt
import pandas as pd

from simulator.errors import WeatherError
from simulator.solar import clear_sky_ghi, solar_position, split_global
from ventsup.core import psychro

__all__ = [
    "CLIMATES",
    "COLUMNS",
    "Climate",
    "Weather",
    "from_hour_ending",
    "read_csv",
    "read_epw",
    "synthetic",
    "to_epoch_seconds",
]

FloatArray = npt.NDArray[np.float64]

COLUMNS: tuple[str, ...] = (
    "temp_outdoor",
    "relative_humidity",
    "wind_speed",
    "wind_direction",
    "rain",
    "ghi",
    "dni",
    "dhi",
)
_NUMERIC = tuple(c for c in COLUMNS if c != "rain")
_IRRADIANCE = ("ghi", "dni", "dhi")
_RANGES: dict[str, tuple[float, float]] = {
    "temp_outdoor": (-90.0, 60.0),
    "relative_humidity": (0.0, 100.0),
    "wind_speed": (0.0, 100.0),
    "wind_direction": (0.0, 360.0),
    "ghi": (0.0, 1600.0),
    "dni": (0.0, 1600.0),
    "dhi": (0.0, 1600.0),
}
_EPOCH = pd.Timestamp("1970-01-01", tz="UTC")


def to_epoch_seconds(times: pd.DatetimeIndex) -> FloatArray:
    """Seconds since the Unix epoch of tz-aware times (the core's time axis)."""
    return np.asarray((times - _EPOCH).total_seconds(), dtype=np.float64)


@dataclass(frozen=True, eq=False)
class Weather:
    """Outdoor weather on a tz-aware UTC index; see the module nomenclature.

    ``latitude`` and ``longitude`` [deg] say where the data were measured (the
    sun position for the irradiance on façades is taken there when known).
    ``source`` is a short description for reports.

    Raises
    ------
    WeatherError
        If a column is missing, a value is missing or out of range, or the
        index is not tz-aware, sorted and unique.
    """

    frame: pd.DataFrame
    latitude: float | None = None
    longitude: float | None = None
    source: str = ""
    _arrays: Mapping[str, FloatArray] = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        frame = self.frame
        where = f" ({self.source})" if self.source else ""
        if not isinstance(frame.index, pd.DatetimeIndex) or frame.index.tz is None:
            raise WeatherError(
                f"weather{where}: expected a tz-aware DatetimeIndex, got {type(frame.index).__name__}"
                + ("" if not isinstance(frame.index, pd.DatetimeIndex) else " without a time zone")
            )
        missing = [c for c in COLUMNS if c not in frame.columns]
        if missing:
            raise WeatherError(
                f"weather{where}: missing columns {missing}; expected {list(COLUMNS)}"
            )
        index = frame.index.tz_convert("UTC")
        if not index.is_monotonic_increasing or index.has_duplicates:
            raise WeatherError(f"weather{where}: timestamps must be sorted and unique")
        if len(index) < 2:
            raise WeatherError(f"weather{where}: expected at least two timestamps")
        clean = pd.DataFrame(index=index)
        for column in _NUMERIC:
            values = pd.to_numeric(frame[column], errors="coerce").to_numpy(dtype=np.float64)
            bad = ~np.isfinite(values)
            if bad.any():
                first = index[int(np.argmax(bad))]
                raise WeatherError(
                    f"weather{where}: {column} has {int(bad.sum())} missing or non-numeric "
                    f"values, the first at {first}; fill them before use"
                )
            low, high = _RANGES[column]
            out = (values < low) | (values > high)
            if out.any():
                i = int(np.argmax(out))
                raise WeatherError(
                    f"weather{where}: {column} = {float(values[i])!r} at {index[i]}, "
                    f"expected {low:g} to {high:g}"
                )
            clean[column] = values
        clean["rain"] = frame["rain"].to_numpy().astype(bool)
        clean = clean[list(COLUMNS)]
        object.__setattr__(self, "frame", clean)
        arrays = {c: clean[c].to_numpy(dtype=np.float64) for c in COLUMNS}
        object.__setattr__(self, "_arrays", MappingProxyType(arrays))

    @property
    def index(self) -> pd.DatetimeIndex:
        """The timestamps (UTC)."""
        return pd.DatetimeIndex(self.frame.index)

    @property
    def start(self) -> pd.Timestamp:
        """First timestamp (UTC)."""
        return pd.Timestamp(self.frame.index[0])

    @property
    def end(self) -> pd.Timestamp:
        """Last timestamp (UTC)."""
        return pd.Timestamp(self.frame.index[-1])

    def at(self, times: pd.DatetimeIndex) -> Weather:
        """The weather interpolated to ``times`` (tz-aware).

        Numbers are interpolated linearly; the wind direction through its unit
        vector (so 350° and 10° give 0°, not 180°); ``rain`` is the flag of the
        interval that contains each time (the first timestamp at or after it).
        Times up to one data interval beyond either end take the end's value;
        further out is an error.
        """
        if times.tz is None:
            raise WeatherError("times: expected tz-aware timestamps")
        source = to_epoch_seconds(self.index)
        target = to_epoch_seconds(times)
        interval = float(np.median(np.diff(source)))
        if len(target) and (target[0] < source[0] - interval or target[-1] > source[-1] + interval):
            raise WeatherError(
                f"weather{' (' + self.source + ')' if self.source else ''} covers "
                f"{self.start} to {self.end}; the run needs {times[0]} to {times[-1]}"
            )
        data: dict[str, Any] = {}
        for column in _NUMERIC:
            if column != "wind_direction":
                data[column] = np.interp(target, source, self._arrays[column])
        radians = np.radians(self._arrays["wind_direction"])
        east = np.interp(target, source, np.sin(radians))
        north = np.interp(target, source, np.cos(radians))
        data["wind_direction"] = np.mod(np.degrees(np.arctan2(east, north)), 360.0)
        after = np.clip(np.searchsorted(source, target, side="left"), 0, len(source) - 1)
        data["rain"] = self._arrays["rain"][after].astype(bool)
        frame = pd.DataFrame(data, index=times.tz_convert("UTC"))
        return Weather(frame, self.latitude, self.longitude, self.source)

    def array(self, column: str) -> FloatArray:
        """One column as a float array (``rain`` as 0/1); read-only."""
        values = self._arrays[column].view()
        values.flags.writeable = False
        return values

    def monthly_means(self, time_zone: str = "UTC") -> pd.DataFrame:
        """Mean of each numeric column per calendar month in ``time_zone``."""
        local = self.index.tz_convert(time_zone)
        keys = [local.year, local.month]
        return self.frame[list(_NUMERIC)].groupby(keys).mean().rename_axis(["year", "month"])


# ---------------------------------------------------------------------------------- readers


def from_hour_ending(
    frame: pd.DataFrame,
    *,
    latitude: float | None = None,
    longitude: float | None = None,
    rain_column: str | None = None,
    source: str = "",
) -> Weather:
    """Weather from an hourly frame whose rows are labelled by the end of each hour.

    Accepts pvlib's names (``temp_air``, ``relative_humidity``, ``wind_speed``,
    ``wind_direction``, ``ghi``, ``dni``, ``dhi``) or this module's; the rain
    flag is a precipitation depth above zero in ``rain_column`` (default: the
    first of ``Lprecip depth (mm)``, ``precipitation``,
    ``liquid_precipitation_depth`` present). The index must be tz-aware.

    The irradiance of the hour ending at :math:`t_{i+1}` belongs to its middle;
    the value at the instant :math:`t_i` is the mean of the hours ending at
    :math:`t_i` and :math:`t_{i+1}` (linear interpolation between the hour
    centres), so a one-hour lag against the sun position does not bias the
    solar gains on east and west façades.

    Examples
    --------
    Read pvlib's TMY3 sample (``pvlib`` is needed only for the reading)::

        data, meta = pvlib.iotools.read_tmy3(path, coerce_year=1990)
        weather = from_hour_ending(data, latitude=meta["latitude"], longitude=meta["longitude"])
    """
    names = {"temp_air": "temp_outdoor"}
    renamed = frame.rename(columns=names)
    if rain_column is None:
        candidates = ("Lprecip depth (mm)", "precipitation", "liquid_precipitation_depth")
        rain_column = next((c for c in candidates if c in renamed.columns), None)
        if rain_column is None and "rain" not in renamed.columns:
            raise WeatherError(
                f"weather {source}: no precipitation column; expected one of {list(candidates)} "
                "or pass rain_column"
            )
    data = renamed.copy()
    if rain_column is not None:
        if rain_column not in renamed.columns:
            raise WeatherError(f"weather {source}: no column {rain_column!r} for the rain flag")
        depth = pd.to_numeric(renamed[rain_column], errors="coerce").fillna(0.0)
        data["rain"] = depth.to_numpy() > 0.0
    for column in _IRRADIANCE:
        if column in data.columns:
            values = pd.to_numeric(data[column], errors="coerce").to_numpy(dtype=np.float64)
            following = np.append(values[1:], values[-1])
            data[column] = 0.5 * (values + following)
    return Weather(data, latitude, longitude, source)


def read_epw(path: str | os.PathLike[str], *, year: int | None = None) -> Weather:
    """Read an EnergyPlus weather (EPW) file.

    The LOCATION line gives latitude, longitude and the standard-time offset;
    data rows are hours 1-24 labelled by their end in local standard time.
    Typical-year files mix years by month: the years are kept when they make
    a sorted index, otherwise every row is moved to ``year`` (default: the
    first row's). Missing values (EPW's 99.9, 999, 9999) in gaps of up to six
    hours are interpolated; longer gaps are an error. The rain flag is a
    liquid precipitation depth above zero or, where depths are missing, a
    present-weather code for rain, drizzle or thunderstorm.

    References
    ----------
    .. [1] U.S. DOE, EnergyPlus Auxiliary Programs, "Weather Converter
       Program", EnergyPlus Weather File (EPW) Data Dictionary.
    """
    file = os.fspath(path)
    try:
        lines = Path(file).read_text(encoding="latin-1").splitlines()
    except OSError as exc:
        raise WeatherError(f"{file}: cannot read the weather file: {exc.strerror or exc}") from exc
    if not lines or not lines[0].upper().startswith("LOCATION"):
        raise WeatherError(f"{file}:1: expected an EPW 'LOCATION,...' header line")
    location = lines[0].split(",")
    try:
        latitude, longitude, offset = (float(location[i]) for i in (6, 7, 8))
    except (IndexError, ValueError):
        raise WeatherError(
            f"{file}:1: expected latitude, longitude and time zone in fields 7-9 of LOCATION"
        ) from None
    rows = [line.split(",") for line in lines[8:] if line.strip()]
    if len(rows) < 2:
        raise WeatherError(f"{file}: expected hourly data rows after the 8 header lines")
    short = [i for i, row in enumerate(rows) if len(row) < 34]
    if short:
        raise WeatherError(
            f"{file}:{short[0] + 9}: expected 35 comma-separated fields, got {len(rows[short[0]])}"
        )

    def column(index: int, missing: float) -> FloatArray:
        values = np.array([_float(row[index]) for row in rows], dtype=np.float64)
        values[values >= missing] = np.nan
        return values

    try:
        years = [int(row[0]) for row in rows]
        months = [int(row[1]) for row in rows]
        days = [int(row[2]) for row in rows]
        hours = [int(row[3]) for row in rows]
    except ValueError as exc:
        raise WeatherError(f"{file}: bad date or hour field: {exc}") from None
    tz = timezone(timedelta(hours=offset))

    def stamps(year_of: list[int]) -> pd.DatetimeIndex:
        dates = pd.to_datetime(
            pd.DataFrame({"year": year_of, "month": months, "day": days}), errors="coerce"
        )
        base = dates + pd.to_timedelta(hours, unit="h")
        if base.isna().any():
            bad = int(np.argmax(base.isna().to_numpy()))
            raise WeatherError(f"{file}:{bad + 9}: not a calendar date")
        return pd.DatetimeIndex(base).tz_localize(tz).tz_convert("UTC")

    index = stamps(years)
    if year is not None or not (index.is_monotonic_increasing and index.is_unique):
        index = stamps([year if year is not None else years[0]] * len(rows))
    frame = pd.DataFrame(
        {
            "temp_outdoor": column(6, 99.9),
            "relative_humidity": column(8, 999.0),
            "ghi": column(13, 9999.0),
            "dni": column(14, 9999.0),
            "dhi": column(15, 9999.0),
            "wind_direction": column(20, 999.0),
            "wind_speed": column(21, 999.0),
        },
        index=index,
    )
    for name in frame.columns:
        frame[name] = _fill_gaps(frame[name], 6, f"{file}: {name}")
    depth = column(33, 999.0)
    codes = [row[26].strip() if len(row) > 26 else "" for row in rows]
    observed = [row[25].strip() == "0" if len(row) > 25 else False for row in rows]
    coded_rain = np.array(
        [
            ok and len(c) >= 3 and any(d != "9" for d in c[:3])
            for ok, c in zip(observed, codes, strict=True)
        ]
    )
    frame["rain"] = np.where(np.isnan(depth), coded_rain, np.nan_to_num(depth) > 0.0)
    return from_hour_ending(
        frame, latitude=latitude, longitude=longitude, rain_column=None, source=Path(file).name
    )


def _float(text: str) -> float:
    try:
        return float(text)
    except ValueError:
        return math.nan


def _fill_gaps(series: pd.Series, limit: int, where: str) -> FloatArray:
    values = series.to_numpy(dtype=np.float64)
    missing = np.isnan(values)
    if not missing.any():
        return values
    runs = np.diff(np.concatenate(([0], missing.astype(np.int8), [0])))
    starts, ends = np.flatnonzero(runs == 1), np.flatnonzero(runs == -1)
    longest = int((ends - starts).max())
    if longest > limit or missing.all():
        raise WeatherError(
            f"{where} has a gap of {longest} missing hours from {series.index[starts[0]]}; "
            f"at most {limit} are filled"
        )
    filled = series.interpolate(limit_direction="both")
    return filled.to_numpy(dtype=np.float64)


def read_csv(path: str | os.PathLike[str], *, time_zone: str = "UTC") -> Weather:
    """Read a simple weather CSV: a ``time`` column and the columns of :data:`COLUMNS`.

    ``time`` is ISO 8601; times without an offset are in ``time_zone``. Values
    are instantaneous at each time (``rain``: the interval ending there), in
    the units of the nomenclature; ``rain`` is 0/1 or true/false.
    """
    file = os.fspath(path)
    try:
        frame = pd.read_csv(file)
    except (OSError, pd.errors.ParserError, UnicodeDecodeError) as exc:
        raise WeatherError(f"{file}: cannot read the CSV: {exc}") from exc
    wanted = ("time", *COLUMNS)
    missing = [c for c in wanted if c not in frame.columns]
    if missing:
        raise WeatherError(
            f"{file}: missing columns {missing}; expected a header with {', '.join(wanted)}"
        )
    index = _times(frame["time"], time_zone, file)
    rain_text = frame["rain"].astype(str).str.strip().str.lower()
    unknown = ~rain_text.isin(["1", "0", "1.0", "0.0", "true", "false"])
    if unknown.any():
        row = int(np.argmax(unknown.to_numpy()))
        raise WeatherError(
            f"{file}:{row + 2}: column rain: got {frame['rain'].iloc[row]!r}, expected 0, 1, true or false"
        )
    data = frame[list(_NUMERIC)].copy()
    for name in _NUMERIC:
        numbers = pd.to_numeric(data[name], errors="coerce")
        if numbers.isna().any():
            row = int(np.argmax(numbers.isna().to_numpy()))
            raise WeatherError(
                f"{file}:{row + 2}: column {name}: got {data[name].iloc[row]!r}, expected a number"
            )
        data[name] = numbers.to_numpy(dtype=np.float64)
    data["rain"] = rain_text.str.startswith(("1", "t")).to_numpy()
    data.index = index
    return Weather(data, source=Path(file).name)


def _times(column: pd.Series, time_zone: str, file: str) -> pd.DatetimeIndex:
    """ISO 8601 times; those without an offset are in ``time_zone``."""
    try:
        times = pd.DatetimeIndex(pd.to_datetime(column, format="ISO8601"))
        return times.tz_localize(time_zone) if times.tz is None else times.tz_convert("UTC")
    except (ValueError, TypeError):
        pass  # mixed offsets or bad text: one by one, to name the row
    stamps = []
    for row, text in enumerate(column.astype(str), start=2):
        try:
            stamp = pd.Timestamp(text)
            if stamp.tz is None:
                stamp = stamp.tz_localize(time_zone)
        except ValueError:
            raise WeatherError(
                f"{file}:{row}: column time: got {text!r}, expected an ISO 8601 time"
            ) from None
        stamps.append(stamp.tz_convert("UTC"))
    return pd.DatetimeIndex(stamps)


# ---------------------------------------------------------------------------------- synthetic


@dataclass(frozen=True)
class Climate:
    """What a synthetic year should look like.

    Parameters
    ----------
    monthly_temp : tuple of 12 float
        Mean outdoor temperature of each calendar month, January first [°C].
    daily_range : float
        Mean difference between the afternoon high and the early-morning low [K].
    temp_variability : float
        Standard deviation of the day-to-day weather anomaly [K].
    variability_days : float
        Correlation time of that anomaly [d] (weather systems last a few days).
    dew_point_depression : float
        Mean of the daily mean temperature minus the dew point [K]: 3-5 humid,
        10-15 arid.
    wind_speed : float
        Mean wind speed at 10 m, open terrain [m/s].
    wind_direction : float
        Prevailing direction the wind comes from [deg].
    wind_steadiness : float
        Share of the mean wind that blows from the prevailing direction [0-1].
    wet_fraction : float
        Share of hours with rain [0-1].
    rain_spell : float
        Mean duration of a rain spell [h].
    clearness : float
        Mean clear-sky index of dry days [0-1]: 1 cloudless, 0.3 overcast.
    """

    monthly_temp: tuple[float, ...]
    daily_range: float = 9.0
    temp_variability: float = 2.5
    variability_days: float = 3.0
    dew_point_depression: float = 6.0
    wind_speed: float = 4.0
    wind_direction: float = 225.0
    wind_steadiness: float = 0.5
    wet_fraction: float = 0.07
    rain_spell: float = 3.0
    clearness: float = 0.65

    def __post_init__(self) -> None:
        if len(self.monthly_temp) != 12:
            raise ValueError(
                f"monthly_temp: got {len(self.monthly_temp)} values, expected 12 (January first)"
            )
        checks = {
            "daily_range": self.daily_range >= 0,
            "temp_variability": self.temp_variability >= 0,
            "variability_days": self.variability_days > 0,
            "dew_point_depression": self.dew_point_depression >= 0,
            "wind_speed": self.wind_speed > 0,
            "wind_direction": 0 <= self.wind_direction <= 360,
            "wind_steadiness": 0 <= self.wind_steadiness <= 1,
            "wet_fraction": 0 <= self.wet_fraction < 1,
            "rain_spell": self.rain_spell >= 1,
            "clearness": 0 < self.clearness <= 1,
        }
        for name, ok in checks.items():
            if not ok:
                raise ValueError(f"{name}: got {getattr(self, name)!r}, outside its range")


#: Invented but plausible climates, named by their Köppen-like character.
CLIMATES: Mapping[str, Climate] = MappingProxyType(
    {
        "humid_continental": Climate(
            (-5.0, -3.0, 3.0, 9.5, 15.5, 21.0, 23.5, 22.5, 18.5, 11.5, 4.5, -2.5),
            daily_range=10.0,
            dew_point_depression=5.0,
            wind_speed=4.5,
            wind_direction=225.0,
            wet_fraction=0.07,
        ),
        "marine": Climate(
            (5.0, 5.5, 7.0, 9.0, 12.0, 15.0, 17.0, 17.0, 15.0, 11.5, 8.0, 5.5),
            daily_range=7.0,
            dew_point_depression=3.0,
            wind_speed=5.5,
            wind_direction=240.0,
            wet_fraction=0.12,
            clearness=0.5,
        ),
        "hot_dry": Climate(
            (12.0, 14.0, 17.5, 21.5, 26.5, 31.0, 33.5, 33.0, 29.5, 23.0, 16.5, 12.0),
            daily_range=14.0,
            dew_point_depression=14.0,
            wind_speed=3.5,
            wind_direction=270.0,
            wet_fraction=0.02,
            clearness=0.85,
        ),
        "tropical": Climate(
            (26.5, 27.0, 27.5, 28.0, 28.0, 27.5, 27.5, 27.5, 27.5, 27.5, 27.0, 26.5),
            daily_range=7.0,
            temp_variability=1.0,
            dew_point_depression=3.0,
            wind_speed=3.0,
            wind_direction=90.0,
            wet_fraction=0.10,
            rain_spell=2.0,
            clearness=0.55,
        ),
    }
)


def synthetic(
    latitude: float,
    longitude: float,
    time_zone: str,
    start: str | pd.Timestamp,
    end: str | pd.Timestamp,
    climate: Climate | str = "humid_continental",
    seed: int = 0,
) -> Weather:
    """Hourly synthetic weather for any place and climate, reproducible with ``seed``.

    Parameters
    ----------
    latitude, longitude : float
        Where [deg]; they set the sun and the time of the daily cycle.
    time_zone : str
        IANA time zone; naive ``start``/``end`` are local to it, and calendar
        months (for the monthly means) are counted in it.
    start, end : str or Timestamp
        The span; the data run from the hour at or before ``start`` to the
        hour at or after ``end``.
    climate : Climate or str
        A :class:`Climate` or the name of one in :data:`CLIMATES`.
    seed : int
        Seed of the random generator: the same seed gives the same weather.

    Notes
    -----
    - Temperature: a curve through the months plus a daily cycle peaking at
      15:00 solar time (its range shrinks on cloudy days) plus an AR(1)
      anomaly of ``temp_variability`` with ``variability_days`` memory. The
      month nodes of the curve are then adjusted (a few fixed-point passes)
      so that every calendar month in the span has exactly the requested
      mean, without steps at month boundaries.
    - Rain: a two-state Markov chain per hour with mean spell ``rain_spell``
      and stationary wet share ``wet_fraction``.
    - Sun: Haurwitz clear-sky global irradiance at the computed sun position
      times a daily clear-sky index (beta-distributed around ``clearness``;
      0.25 while it rains), split into direct and diffuse by Erbs.
    - Humidity: the dew point follows the daily mean temperature minus
      ``dew_point_depression`` with its own anomaly (near saturation in rain);
      relative humidity from the saturation pressures (ASHRAE Fundamentals
      ch. 1, :mod:`ventsup.core.psychro`).
    - Wind: a prevailing vector plus AR(1) fluctuations (a Rayleigh-like speed
      distribution), a mild afternoon maximum, scaled to the mean speed.
    """
    params = CLIMATES[climate] if isinstance(climate, str) else climate
    first = _timestamp(start, time_zone).floor("h")
    last = _timestamp(end, time_zone).ceil("h")
    if not last > first:
        raise WeatherError(f"synthetic weather: end {end} is not after start {start}")
    index = pd.date_range(first, last, freq="h", tz="UTC")
    t = to_epoch_seconds(index)
    n = len(t)
    rng = np.random.default_rng(seed)
    local = index.tz_convert(time_zone)
    month_key = np.asarray(local.year * 12 + local.month - 1)
    solar_hour = np.mod(t / 3600.0 + longitude / 15.0, 24.0)
    day = np.floor((t / 3600.0 + longitude / 15.0) / 24.0).astype(np.int64)
    day_index = day - day[0]
    n_days = int(day_index[-1]) + 1

    # Rain, clouds
    p_stop = 1.0 / params.rain_spell
    p_start = params.wet_fraction * p_stop / (1.0 - params.wet_fraction)
    draws = rng.random(n)
    rain = np.zeros(n, dtype=bool)
    wet = rng.random() < params.wet_fraction
    for i in range(n):
        wet = draws[i] >= p_stop if wet else draws[i] < p_start
        rain[i] = wet
    concentration = 6.0
    daily_clearness = rng.beta(
        params.clearness * concentration, (1.0 - params.clearness) * concentration + 1e-9, n_days
    )
    clearness = np.where(rain, 0.25, daily_clearness[day_index])

    # Temperature
    anomaly = _ar1(rng, n, params.temp_variability, params.variability_days * 24.0)
    range_scale = (0.5 + clearness) / (0.5 + params.clearness)
    daily = -0.5 * params.daily_range * range_scale * np.cos(2 * np.pi * (solar_hour - 3.0) / 24.0)
    targets = np.array([params.monthly_temp[k % 12] for k in month_key], dtype=np.float64)
    temp = _match_monthly_means(t, month_key, targets, daily + anomaly)

    # Humidity
    daily_mean = pd.Series(temp).rolling(24, center=True, min_periods=1).mean().to_numpy()
    dew_anomaly = _ar1(rng, n, 1.5, 48.0)
    dew = daily_mean - params.dew_point_depression + dew_anomaly
    dew = np.where(rain, temp - 0.5, np.minimum(dew, temp - 0.2))
    saturation = psychro.saturation_vapour_pressure(np.clip(temp, -90.0, 60.0))
    vapour = psychro.saturation_vapour_pressure(np.clip(dew, -90.0, 60.0))
    humidity = np.clip(100.0 * vapour / saturation, 5.0, 100.0)

    # Wind
    prevailing = np.radians(params.wind_direction)
    mean_vector = params.wind_steadiness
    gust = math.sqrt(max(1.0 - params.wind_steadiness**2, 0.05))
    east = mean_vector * math.sin(prevailing) + _ar1(rng, n, gust, 12.0)
    north = mean_vector * math.cos(prevailing) + _ar1(rng, n, gust, 12.0)
    speed = np.hypot(east, north) * (1.0 + 0.25 * np.cos(2 * np.pi * (solar_hour - 14.0) / 24.0))
    speed *= params.wind_speed / float(np.mean(speed))
    direction = np.mod(np.degrees(np.arctan2(east, north)), 360.0)

    # Sun
    zenith, _ = solar_position(t, latitude, longitude)
    ghi = clear_sky_ghi(zenith) * clearness
    dni, dhi = split_global(ghi, zenith, t)

    frame = pd.DataFrame(
        {
            "temp_outdoor": temp,
            "relative_humidity": humidity,
            "wind_speed": speed,
            "wind_direction": direction,
            "rain": rain,
            "ghi": ghi,
            "dni": dni,
            "dhi": dhi,
        },
        index=index,
    )
    name = climate if isinstance(climate, str) else "custom climate"
    return Weather(frame, latitude, longitude, f"synthetic {name}, seed {seed}")


def _timestamp(value: str | pd.Timestamp, time_zone: str) -> pd.Timestamp:
    stamp = pd.Timestamp(value)
    if stamp.tz is None:
        stamp = stamp.tz_localize(time_zone)
    return stamp.tz_convert("UTC")


def _ar1(rng: np.random.Generator, n: int, sigma: float, memory: float) -> FloatArray:
    """An AR(1) series of standard deviation ``sigma`` and correlation time ``memory`` [steps]."""
    phi = math.exp(-1.0 / memory)
    shocks = rng.normal(0.0, sigma * math.sqrt(1.0 - phi * phi), n)
    values = np.empty(n)
    value = rng.normal(0.0, sigma)
    for i in range(n):
        value = phi * value + shocks[i]
        values[i] = value
    return values


def _match_monthly_means(
    t: FloatArray, month_key: npt.NDArray[np.int64], targets: FloatArray, wiggle: FloatArray
) -> FloatArray:
    """``wiggle`` plus a smooth curve through month nodes so each month's mean is its target.

    The curve is piecewise linear through one node at the middle of each
    (partial) month; the nodes start at the targets and are corrected by each
    month's remaining error until it is below 1e-6 K (a contraction: a month's
    own node weighs most in its mean).
    """
    keys, inverse = np.unique(month_key, return_inverse=True)
    counts = np.bincount(inverse).astype(np.float64)
    centres = np.bincount(inverse, weights=t) / counts
    wanted = np.bincount(inverse, weights=targets) / counts
    nodes = wanted.copy()
    curve = np.interp(t, centres, nodes) if len(keys) > 1 else np.full_like(t, nodes[0])
    for _ in range(200):
        values = curve + wiggle
        error = np.bincount(inverse, weights=values) / counts - wanted
        if np.max(np.abs(error)) < 1e-6:
            break
        nodes -= error
        curve = np.interp(t, centres, nodes) if len(keys) > 1 else np.full_like(t, nodes[0])
    return np.asarray(curve + wiggle)
