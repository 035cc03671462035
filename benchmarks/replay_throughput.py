"""Replay throughput in zone-steps per second, beside a bare numpy baseline measured in the same run.

A year of one-minute data for 100 zones is generated in memory (seeded): an
invented site in America/Chicago whose zones share the demo site's two rule
sets (``config/demo-site.yaml``: every fifth zone a hall with four openings and
night flush, the others rooms), each zone with its own indoor temperature,
CO2 and smoke alarm points, and shared outdoor temperature, humidity, wind
speed and direction, rain and plant heating points.

Measured, all on the same arrays:

- **baseline**: a bare numpy pass evaluating a stateless open condition per
  zone and minute (indoor warm enough, outdoor within the band and cooler by
  the minimum difference, dry, calm);
- **fast path**: the full rule set (:mod:`ventsup.drivers.replay_fast`), every
  zone over the whole period, with the evaluation plan (ticks and urgent
  evaluations) built from the log;
- **per-step reference**: :func:`ventsup.drivers.replay.replay_evaluations`,
  the core at every evaluation, on a slice (a few zones over a few days; its
  rate is per zone-step, so it extrapolates), and the fast path on the same
  slice, whose runs must be identical.

Run: ``.venv/bin/python benchmarks/replay_throughput.py`` (about 3 minutes on
this two-core machine). The fast path replays 12 of the 100 zones over the
whole year by default (its rate is per zone-step and the zones are
independent; ``--fast-zones 100`` replays all, about 15 minutes on one core,
``--jobs 2`` halves that); the per-step reference runs on a slice, and the
time it would take for everything is extrapolated from its rate. ``--zones
10 --days 30`` for a quick look. No figure here is an assertion; the identity
check on the slice is (exit status 1 if it fails).
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
import yaml

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))

from ventsup.config.load import load_config_text  # noqa: E402
from ventsup.config.model import PointKind, SiteConfig  # noqa: E402
from ventsup.drivers.replay import (  # noqa: E402
    evaluation_plan,
    replay_evaluations,
    runs_from_decisions,
)
from ventsup.drivers.replay_fast import plan_zones, replay_fast, zone_points  # noqa: E402
from ventsup.edges.logs import PointLog, PointSeries  # noqa: E402

START = 1_798_783_200.0  # 2027-01-01 00:00 in America/Chicago
MINUTE = 60.0


def site(zones: int) -> SiteConfig:
    """The invented site: ``zones`` zones sharing the demo site's rule sets."""
    demo = yaml.safe_load((REPO / "config" / "demo-site.yaml").read_text(encoding="utf-8"))
    points: dict[str, dict[str, object]] = {
        "t_out": {"topic": "b/t_out", "kind": "temperature", "stale_after": "10 min"},
        "rh_out": {"topic": "b/rh_out", "kind": "humidity", "stale_after": "10 min"},
        "wind": {"topic": "b/wind", "kind": "wind_speed", "stale_after": "5 min"},
        "wind_dir": {"topic": "b/wind_dir", "kind": "wind_direction", "stale_after": "5 min"},
        "rain": {"topic": "b/rain", "kind": "binary", "stale_after": "5 min"},
        "heating": {"topic": "b/heating", "kind": "binary", "stale_after": "30 min"},
    }
    zone_map: dict[str, dict[str, object]] = {}
    for i in range(zones):
        name = f"z{i:03d}"
        for point, kind in (("t", "temperature"), ("co2", "co2"), ("smoke", "binary")):
            points[f"{name}_{point}"] = {"topic": f"b/{name}/{point}", "kind": kind}
        hall = i % 5 == 0
        openings = (
            {
                "low_north": {"area": "3 m2", "facing": "0 deg", "level": "low"},
                "low_south": {"area": "3 m2", "facing": "180 deg", "level": "low"},
                "high_north": {"area": "2 m2", "facing": "0 deg", "level": "high",
                               "rain_position": "10 %", "secure_position": "100 %"},
                "high_south": {"area": "2 m2", "facing": "180 deg", "level": "high",
                               "rain_position": "10 %", "secure_position": "100 %"},
            }
            if hall
            else {"windows": {"area": "1.5 m2", "facing": f"{(i * 37) % 360} deg", "level": "low"}}
        )  # fmt: skip
        zone_map[name] = {
            "rules": "hall" if hall else "rooms",
            "temperature": f"{name}_t",
            "co2": f"{name}_co2",
            "smoke_alarms": [f"{name}_smoke"],
            "heating": "heating",
            "openings": openings,
        }
    text = yaml.safe_dump(
        {
            "site": {"name": "Benchmark Campus", "time_zone": "America/Chicago"},
            "points": points,
            "outdoor": {
                "temperature": "t_out",
                "humidity": "rh_out",
                "wind_speed": "wind",
                "wind_direction": "wind_dir",
                "rain": "rain",
            },
            "zones": zone_map,
            "rules": demo["rules"],
        },
        sort_keys=False,
    )
    return load_config_text(text, "benchmark-site.yaml")


def _smooth(rng: np.random.Generator, n: int, scale: float, keep: float) -> np.ndarray:
    """An AR(1) series ``x[i] = keep * x[i-1] + noise``: persistent noise of about ``scale``."""
    block = 256
    blocks = -(-n // block)
    noise = rng.normal(0.0, scale * np.sqrt(1 - keep * keep), blocks * block).reshape(blocks, -1)
    powers = keep ** (np.arange(block) + 1.0)
    partial = np.cumsum(noise / powers, axis=1)  # within a block, in closed form
    out = np.empty_like(partial)
    carry = 0.0
    for b in range(blocks):  # and the carry from block to block
        out[b] = powers * (carry + partial[b])
        carry = out[b, -1]
    return out.reshape(-1)[:n]


def _episodes(rng: np.random.Generator, n: int, per_day: float, minutes: float) -> np.ndarray:
    starts = rng.random(n) < per_day / 1440.0
    lengths = rng.exponential(minutes, n).astype(np.int64) + 1
    on = np.zeros(n + 1, dtype=np.int64)
    index = np.flatnonzero(starts)
    np.add.at(on, index, 1)
    np.add.at(on, np.minimum(index + lengths[index], n), -1)
    return (np.cumsum(on[:n]) > 0).astype(np.float64)


def log_for(config: SiteConfig, days: int, seed: int) -> PointLog:
    """One-minute samples of every point for ``days`` days (shared time and order arrays)."""
    rng = np.random.default_rng(seed)
    n = int(days * 1440)
    t = START + np.arange(n, dtype=np.float64) * MINUTE
    order = np.arange(n, dtype=np.int64)
    day = np.arange(n) / 1440.0
    hour = (np.arange(n) % 1440) / 60.0
    season = -np.cos(2 * np.pi * (day - 15) / 365.0)
    diurnal = -np.cos(2 * np.pi * (hour - 3) / 24.0)
    t_out = 11 + 13 * season + 5 * diurnal + _smooth(rng, n, 2.5, 0.999)
    rh = np.clip(65 - 15 * diurnal + _smooth(rng, n, 10.0, 0.998), 15, 100)
    wind = np.clip(3.5 + _smooth(rng, n, 2.5, 0.995), 0, 30)
    direction = (200 + np.cumsum(rng.normal(0, 2.0, n))) % 360
    rain = _episodes(rng, n, 0.4, 90)
    heating = (t_out < 10).astype(np.float64)
    weekday = ((np.arange(n) // 1440) + 4) % 7 < 5  # 2027-01-01 is a Friday
    occupied = weekday & (hour >= 7.5) & (hour < 18)
    values: dict[str, np.ndarray] = {
        "t_out": np.round(t_out, 1),
        "rh_out": np.round(rh),
        "wind": np.round(wind, 1),
        "wind_dir": np.round(direction),
        "rain": rain,
        "heating": heating,
    }
    for i, zone in enumerate(config.zones):
        gains = np.where(occupied, 2.5, 0.0) + 1.5 * diurnal
        t_in = 21.5 + 0.25 * (t_out - 15) + gains + _smooth(rng, n, 0.8, 0.999) + (i % 7) * 0.2
        co2 = 450 + np.where(occupied, 450 + 250 * rng.random(), 0) + _smooth(rng, n, 60, 0.99)
        values[f"{zone}_t"] = np.round(np.clip(t_in, 12, 34), 1)
        values[f"{zone}_co2"] = np.round(np.clip(co2, 380, 3000), -1)
        values[f"{zone}_smoke"] = _episodes(rng, n, 1 / 180.0, 20)
    series = {
        name: PointSeries(name, t, v, order, config.points[name].kind is PointKind.BINARY)
        for name, v in values.items()
    }
    return PointLog(series, "generated in memory", "timestamps in seconds since the epoch (UTC)")


def baseline(config: SiteConfig, log: PointLog) -> float:
    """Seconds for a bare numpy pass: a stateless free-cooling condition, every zone and minute."""
    rooms = config.rules["rooms"].free_cooling
    wind_cap = config.rules["rooms"].wind.cap_above
    t_out = log.series["t_out"].value
    dry = log.series["rain"].value == 0.0
    calm = log.series["wind"].value <= wind_cap
    began = time.perf_counter()
    opened = 0
    outdoor_ok = (t_out >= rooms.outdoor_min) & (t_out <= rooms.outdoor_max) & dry & calm
    for zone in config.zones:
        t_in = log.series[f"{zone}_t"].value
        wanted = (t_in >= rooms.open_above) & (t_in - t_out >= rooms.min_difference) & outdoor_ok
        opened += int(np.count_nonzero(wanted))
    seconds = time.perf_counter() - began
    if opened < 0:  # pragma: no cover - keeps the result alive
        print(opened)
    return seconds


def sliced(config: SiteConfig, zones: list[str]) -> SiteConfig:
    """The site with only ``zones``."""
    return config.model_copy(update={"zones": {z: config.zones[z] for z in zones}})


def window(log: PointLog, points: set[str], end: float) -> PointLog:
    """The samples of ``points`` before ``end``."""
    series = {}
    for name in points:
        found = log.series[name]
        stop = int(np.searchsorted(found.t, end, side="left"))
        series[name] = PointSeries(
            name, found.t[:stop], found.value[:stop], found.order[:stop], found.binary
        )
    return PointLog(series, log.source, log.time_note)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--zones", type=int, default=100, help="zones in the data (100)")
    parser.add_argument("--days", type=int, default=365, help="days of data (365)")
    parser.add_argument(
        "--fast-zones",
        type=int,
        default=12,
        help="zones the fast path replays over the whole period (12; 100 for all, about "
        "15 minutes on one core); its rate is per zone-step, zones are independent",
    )
    parser.add_argument("--jobs", type=int, default=1, help="processes for the fast path (1)")
    parser.add_argument("--seed", type=int, default=2027)
    parser.add_argument("--slice-zones", type=int, default=3)
    parser.add_argument("--slice-days", type=float, default=2.0)
    args = parser.parse_args()

    began = time.perf_counter()
    config = site(args.zones)
    log = log_for(config, args.days, args.seed)
    start, end = START, START + args.days * 86400.0
    steps = len(config.zones) * args.days * 1440
    print(
        f"data: {args.zones} zones x {args.days} days of 1-minute samples "
        f"({len(log) / 1e6:.0f} M samples, made in {time.perf_counter() - began:.0f} s)"
    )

    base_s = min(baseline(config, log) for _ in range(3))
    base_rate = steps / base_s
    print(
        f"baseline, numpy, stateless open condition, all {args.zones} zones: "
        f"{base_rate / 1e6:9.1f} M zone-steps/s ({base_s:.2f} s)"
    )

    fast_zones = list(config.zones)[: min(args.fast_zones, args.zones)]
    part = sliced(config, fast_zones)
    began = time.perf_counter()
    plans = plan_zones(part, log, start, end, MINUTE)
    results = replay_fast(part, log, plans, end, jobs=args.jobs)
    fast_s = time.perf_counter() - began
    evaluations = sum(r.evaluations for r in results)
    decisions = sum(r.decisions for r in results)
    runs = sum(len(r.runs) for r in results)
    fast_rate = evaluations / fast_s
    zone_days = len(fast_zones) * args.days
    print(
        f"fast path, full rule set, {len(fast_zones)} zones, jobs={args.jobs}: "
        f"{fast_rate / 1e6:9.3f} M zone-steps/s ({evaluations} evaluations in {fast_s:.0f} s; "
        f"{runs / zone_days:.1f} runs and {decisions / zone_days:.1f} calls of the core per "
        f"zone and day; all {args.zones} zones would take about "
        f"{fast_s * args.zones / len(fast_zones) / 60:.0f} min)"
    )

    zones = list(config.zones)[: args.slice_zones]
    part = sliced(config, zones)
    part_end = start + args.slice_days * 86400.0
    part_log = window(log, {p for z in zones for p in zone_points(part, z)}, part_end)
    samples = part_log.samples()
    began = time.perf_counter()
    plan = evaluation_plan(part, samples, start, part_end, MINUTE)
    reference = runs_from_decisions(part, replay_evaluations(part, samples, plan), part_end)
    ref_s = time.perf_counter() - began
    ref_rate = len(plan) / ref_s
    fast_part = replay_fast(
        part, part_log, plan_zones(part, part_log, start, part_end, MINUTE), part_end
    )
    identical = [run for r in fast_part for run in r.runs] == reference
    print(
        f"per-step reference, {len(zones)} zones over {args.slice_days:g} days: "
        f"{ref_rate / 1e6:9.4f} M zone-steps/s ({len(plan)} evaluations in {ref_s:.1f} s; "
        f"the whole data would take about {steps / ref_rate / 3600:.0f} h)"
    )
    print(f"fast path identical to the per-step core on that slice: {identical}")
    print(
        f"ratio fast path / baseline: 1/{base_rate / fast_rate:.0f} (target: 1/10 or better); "
        f"fast path / per-step reference: {fast_rate / ref_rate:.0f}x"
    )
    return 0 if identical else 1


if __name__ == "__main__":
    sys.exit(main())
