"""Support for the replay tests: a site for differential tests and random logs.

No tests here. :data:`SITE` is an invented site with every kind of input the
core reads (three indoor sensors averaged, a named sensor with a fallback, a
measured dew point or one from humidity, two smoke alarms, feedback of two
openings, windward limits, night flush, a security window across the
daylight-saving hour, a fallback position for an unknown indoor temperature).
:func:`random_log` makes a log of random walks on value grids (so thresholds
are hit exactly), with gaps, dropouts long enough to go stale, alarm, rain and
heating episodes and samples between the grid times.
"""

from __future__ import annotations

from datetime import datetime
from zoneinfo import ZoneInfo

import numpy as np

from ventsup.config.load import load_config_text
from ventsup.config.model import PointKind, SiteConfig
from ventsup.core.inputs import Sample

__all__ = ["DST_NIGHTS", "SITE", "epoch", "random_log", "site"]

SITE = """
site: {name: Differential Test Site, time_zone: TZ, units: SI}
points:
  t_out: {topic: d/t_out, kind: temperature, stale_after: 10 min}
  rh_out: {topic: d/rh_out, kind: humidity, stale_after: 10 min}
  dew_out: {topic: d/dew_out, kind: dew_point, stale_after: 10 min}
  wind: {topic: d/wind, kind: wind_speed, stale_after: 5 min}
  wind_dir: {topic: d/wind_dir, kind: wind_direction, stale_after: 5 min}
  rain: {topic: d/rain, kind: binary, stale_after: 5 min}
  hall_t1: {topic: d/hall_t1, kind: temperature, stale_after: 10 min}
  hall_t2: {topic: d/hall_t2, kind: temperature, stale_after: 10 min}
  hall_t3: {topic: d/hall_t3, kind: temperature, stale_after: 10 min}
  hall_co2: {topic: d/hall_co2, kind: co2, stale_after: 15 min}
  hall_smoke_a: {topic: d/hall_smoke_a, kind: binary, stale_after: 15 min}
  hall_smoke_b: {topic: d/hall_smoke_b, kind: binary, stale_after: 15 min}
  plant_heating: {topic: d/plant_heating, kind: binary, stale_after: 30 min}
  hall_low_pos: {topic: d/hall_low_pos, kind: position, stale_after: 10 min}
  hall_high_pos: {topic: d/hall_high_pos, kind: position, stale_after: 10 min}
  room_t: {topic: d/room_t, kind: temperature, stale_after: 10 min}
  room_t2: {topic: d/room_t2, kind: temperature, stale_after: 10 min}
  room_smoke: {topic: d/room_smoke, kind: binary, stale_after: 15 min}
  lab_t: {topic: d/lab_t, kind: temperature, stale_after: 10 min}
outdoor: {temperature: t_out, humidity: rh_out, DEW wind_speed: wind, wind_direction: wind_dir, rain: rain}
zones:
  hall:
    rules: hall
    temperature: {sensors: [hall_t1, hall_t2, hall_t3], aggregate: AGG}
    co2: hall_co2
    smoke_alarms: [hall_smoke_a, hall_smoke_b]
    heating: plant_heating
    openings:
      low: {area: 3 m2, facing: 0 deg, level: low, feedback: hall_low_pos, secure_position: 0 %}
      high: {area: 2 m2, facing: 135 deg, level: high, feedback: hall_high_pos, rain_position: 10 %, secure_position: 100 %, fire_position: 100 %}
  room:
    rules: room
    temperature: {sensors: [room_t, room_t2], aggregate: room_t}
    smoke_alarms: [room_smoke]
    heating: plant_heating
    openings:
      win: {area: 1.5 m2, facing: 90 deg, level: low}
  lab:
    rules: lab
    temperature: lab_t
    openings:
      win: {area: 1 m2, facing: 270 deg, level: low}
rules:
  hall:
    alarm: {clear_hold: 5 min}
    rain: {dry_delay: 10 min}
    wind: {cap_above: 8 m/s, cap_position: 30 %, close_above: 10 m/s, windward_cap_above: 6 m/s, windward_close_above: 9 m/s, windward_angle: 45 deg, reopen_ratio: 0.8, hold: 10 min}
    cold: {outdoor_below: 5 C}
    free_cooling: {open_above: 23 C, close_below: 22 C, full_open_at: 25 C, min_opening: 20 %, outdoor_min: 12 C, outdoor_max: 23 C, min_difference: 1 K, dew_point_max: 14 C}
    night_flush: {enabled: true, hours: "22:00-06:00", start_above: 24 C, stop_below: 21 C, min_difference: 3 K, outdoor_min: 12 C, dew_point_max: 12 C, position: 100 %}
    co2: {open_above: 1000 ppm, close_below: 800 ppm, position: 15 %, outdoor_min: 10 C}
    actuator: {min_open_time: 5 min, min_closed_time: 5 min, min_step: 10 %, max_moves_per_hour: 4, feedback_tolerance: 10 %, feedback_timeout: 3 min}
    schedule:
      occupied: ["Mon-Fri 07:00-21:00", "Sat 01:30-03:30"]
      security: ["01:00-02:30", "Sun 02:00-04:00"]
    indoor_unknown: hold
  room:
    rain: {dry_delay: 10 min}
    wind: {cap_above: 8 m/s, cap_position: 30 %, close_above: 10 m/s, reopen_ratio: 0.8, hold: 10 min}
    free_cooling: {open_above: 23 C, close_below: 22 C, full_open_at: 24 C, min_opening: 10 %, outdoor_min: 12 C, outdoor_max: 22 C, min_difference: 2 K, dew_point_max: 16 C, when: always}
    co2: {enabled: false}
    actuator: {min_open_time: 3 min, min_closed_time: 3 min, min_step: 20 %, max_moves_per_hour: 3}
    schedule:
      occupied: ["Mon-Sun 00:00-24:00"]
      security: ["02:15-03:15"]
    indoor_unknown: 30 %
  lab:
    free_cooling: {open_above: 22 C, close_below: 21.5 C, full_open_at: 26 C, min_opening: 0 %, outdoor_min: 5 C, outdoor_max: 30 C, min_difference: 0 K, dew_point_max: null}
    night_flush: {enabled: true, hours: ["Mon-Sun 01:00-05:00"], start_above: 22 C, stop_below: 20 C, min_difference: 1 K, outdoor_min: 5 C, dew_point_max: null, position: 50 %}
    actuator: {min_open_time: 0 s, min_closed_time: 0 s, min_step: 5 %, max_moves_per_hour: 2}
    schedule:
      occupied: ["Mon-Fri 08:00-17:00"]
"""


def site(tz: str = "Europe/Berlin", aggregate: str = "mean", dew: bool = True) -> SiteConfig:
    """The differential site in time zone ``tz``; ``aggregate`` of the hall's three
    sensors (max, mean, min or hall_t2); ``dew`` adds a measured dew point point."""
    text = (
        SITE.replace("TZ", tz)
        .replace("AGG", aggregate)
        .replace("DEW ", "dew_point: dew_out, " if dew else "")
    )
    return load_config_text(text, "differential-site.yaml")


def epoch(tz: str, year: int, month: int, day: int, hour: int = 0, minute: int = 0) -> float:
    """Seconds since the epoch of a local wall-clock time."""
    return datetime(year, month, day, hour, minute, tzinfo=ZoneInfo(tz)).timestamp()


#: Nights of daylight saving changes (IANA tz database): Europe/Berlin 2024-03-31 02:00 ->
#: 03:00 and 2024-10-27 03:00 -> 02:00; America/New_York 2024-03-10 02:00 -> 03:00 and
#: 2024-11-03 02:00 -> 01:00. The replays start at local midnight.
DST_NIGHTS = (
    ("Europe/Berlin", (2024, 3, 31)),
    ("Europe/Berlin", (2024, 10, 27)),
    ("America/New_York", (2024, 3, 10)),
    ("America/New_York", (2024, 11, 3)),
)


def _walk(
    rng: np.random.Generator,
    n: int,
    low: float,
    high: float,
    grid: float,
    start: float,
    step_max: int,
    jump: float = 0.02,
) -> np.ndarray:
    values = np.empty(n)
    x = start
    for i in range(n):
        if rng.random() < jump:
            x = rng.uniform(low, high)
        else:
            x += int(rng.integers(-step_max, step_max + 1)) * grid
        x = min(max(x, low), high)
        values[i] = round(round(x / grid) * grid, 6)
    return values


def _episodes(rng: np.random.Generator, n: int, rate: float, mean_length: float) -> np.ndarray:
    values = np.zeros(n)
    i = 0
    while i < n:
        if rng.random() < rate:
            length = int(rng.exponential(mean_length)) + 1
            values[i : i + length] = 1.0
            i += length
        i += 1
    return values


def random_log(
    config: SiteConfig, rng: np.random.Generator, start: float, hours: float, dt: int
) -> list[Sample]:
    """Samples of every point of the differential site for ``hours`` from ``start``.

    Each point is sampled on a grid of ``dt`` seconds, densely or sparsely, now
    and then off the grid, sometimes with a silent stretch; a few points are
    left out altogether. Sorted by time.
    """
    n = int(hours * 3600 / dt)
    times = start + np.arange(n) * dt
    walks = {
        "t_out": _walk(rng, n, 2.0, 28.0, 0.1, rng.uniform(10, 22), 3),
        "rh_out": _walk(rng, n, 20.0, 100.0, 5.0, 60.0, 1),
        "dew_out": _walk(rng, n, 0.0, 18.0, 0.5, 10.0, 1),
        "wind": _walk(rng, n, 0.0, 13.0, 0.5, rng.uniform(0, 10), 2, jump=0.05),
        "wind_dir": _walk(rng, n, 0.0, 355.0, 5.0, 90.0, 3, jump=0.05),
        "rain": _episodes(rng, n, 0.01, 10),
        "hall_t1": _walk(rng, n, 18.0, 28.0, 0.1, rng.uniform(21, 25), 2),
        "hall_t2": _walk(rng, n, 18.0, 28.0, 0.1, rng.uniform(21, 25), 2),
        "hall_t3": _walk(rng, n, 18.0, 28.0, 0.1, rng.uniform(21, 25), 2),
        "hall_co2": _walk(rng, n, 400.0, 1400.0, 10.0, 700.0, 4),
        "hall_smoke_a": _episodes(rng, n, 0.003, 5),
        "hall_smoke_b": _episodes(rng, n, 0.002, 3),
        "plant_heating": _episodes(rng, n, 0.01, 20),
        "hall_low_pos": _walk(rng, n, 0.0, 1.0, 0.1, 0.0, 1, jump=0.1),
        "hall_high_pos": _walk(rng, n, 0.0, 1.0, 0.1, 0.0, 1, jump=0.1),
        "room_t": _walk(rng, n, 18.0, 28.0, 0.1, rng.uniform(21, 25), 2),
        "room_t2": _walk(rng, n, 18.0, 28.0, 0.1, rng.uniform(21, 25), 2),
        "room_smoke": _episodes(rng, n, 0.003, 5),
        "lab_t": _walk(rng, n, 16.0, 28.0, 0.25, rng.uniform(19, 25), 2),
    }
    rows: list[tuple[float, str, float | bool]] = []
    for name, values in walks.items():
        if name not in config.points or rng.random() >= 0.97:
            continue
        keep = rng.random(n) < rng.choice([1.0, 0.9, 0.6, 0.3])
        if rng.random() < 0.5:  # a silent stretch, long enough to go stale
            first = int(rng.integers(0, n))
            keep[first : first + int(rng.integers(1, max(2, n // 4)))] = False
        binary = config.points[name].kind is PointKind.BINARY
        for i in np.flatnonzero(keep):
            off_grid = float(rng.integers(1, dt)) if dt > 1 and rng.random() < 0.25 else 0.0
            value: float | bool = bool(values[i]) if binary else float(values[i])
            rows.append((float(times[i]) + off_grid, name, value))
    rows.sort(key=lambda row: row[0])
    return [Sample(name, value, t) for t, name, value in rows]
