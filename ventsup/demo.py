"""`ventsup demo`: the controller on an invented building, with nothing to install.

By default it simulates June 2027 at Quarry Lane Commons (an invented
library with a tall commons hall and two ordinary rooms) in closed loop: the
building simulator (``simulator/``: 5R1C zones, stack and wind airflow,
seeded synthetic weather, a scripted month of showers, a smoke drill, gusts,
a sensor dropout and a jammed vent) publishes sensor values, the same
decision core the daemon runs decides every minute, and the simulator moves
the openings. It ends with the monthly report written to ``out/demo/`` and a
one-screen summary. The core is asked only at the minutes whose outcome is
not known from the last one (see :mod:`simulator._steps`); the report's table
of decisions, one row per minute and zone, is read from the run
(:func:`simulate`), with the same figures as asking it every minute.

The coupling is in-process: no broker and no database are needed. The same
month over MQTT against a running ``ventsup run`` is what
``python -m simulator --mqtt`` is for, where available.

``--day`` instead replays one bundled, hand-shaped day (``tools/make_demo_log.py``)
and prints every change of each zone's mode with its reason.
"""

from __future__ import annotations

import argparse
import dataclasses
import sys
import time
from collections import defaultdict
from datetime import datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any, TextIO
from zoneinfo import ZoneInfo

if TYPE_CHECKING:
    from collections.abc import Callable

    import pandas as pd

    from simulator.building import Building
    from simulator.loop import Result
    from simulator.scenario import Scenario
    from simulator.weather import Weather
    from ventsup.config.model import SiteConfig

__all__ = ["CAUTIONS", "add_arguments", "main", "simulate"]

CAUTIONS = (
    "Safety: life-safety smoke control belongs to the listed fire system; ventsup only "
    "releases openings to it and never fights it.",
    "Pinch and security risks are handled at the actuators and by the site's procedures.",
    "Local codes and licensed engineers have the last word on how a building is ventilated.",
)

DATA = Path(__file__).parent / "data"
MONTH = ("2027-06-01", "2027-07-01")
WARM_UP_DAYS = 8


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """The demo's options (all optional: the defaults are the embedded demo)."""
    parser.add_argument("--site", type=Path, help="site file (default: the demo site)")
    parser.add_argument("--out", type=Path, default=Path("out/demo"), help="report folder")
    parser.add_argument("--step", type=float, default=60.0, help="time step [s] (default 60)")
    parser.add_argument(
        "--day",
        action="store_true",
        help="replay the bundled invented day instead of simulating a month",
    )
    parser.add_argument("--log", type=Path, help="with --day: a wide CSV log to replay")


def main(args: argparse.Namespace | None = None) -> int:
    """Run the demo; returns the exit status."""
    if args is None:
        parser = argparse.ArgumentParser(prog="ventsup demo")
        add_arguments(parser)
        args = parser.parse_args([])
    from ventsup.config import load_config

    config = load_config(args.site or DATA / "demo-site.yaml")
    if args.day:
        return _replay_day(config, args.log or DATA / "demo-day.csv", args.step, sys.stdout)
    return _simulate_month(config, args.out, args.step, sys.stdout)


# ---------------------------------------------------------------------------------- month


class _Recorder:
    """The decision core as the simulator's controller, asked every step, keeping every
    decision (the reference :func:`simulate` is tested against)."""

    def __init__(self, config: SiteConfig) -> None:
        from simulator.loop import CoreController

        self._core = CoreController(config, skip_repeats=False)
        self.decisions: list[Any] = []

    def __call__(self, zone: str, held: Any, state: Any, t: float) -> Any:
        decision, next_state = self._core(zone, held, state, t)
        self.decisions.append(decision)
        return decision, next_state


def simulate(
    config: SiteConfig,
    building: Building,
    weather: Weather,
    scenario: Scenario | None,
    start: object,
    end: object,
    step: float,
    *,
    every_step: bool = False,
    progress: Callable[[float], None] | None = None,
) -> tuple[Result, pd.DataFrame]:
    """The closed loop from ``start`` to ``end`` and the monthly report's decisions table.

    By default the simulator asks the decision core only where its outcome is not
    known (:class:`simulator.loop.CoreController` with ``skip_repeats``), and the
    table, one row per step and zone, is read from the run
    (:meth:`simulator.loop.Result.decisions_frame`). ``every_step``: ask the core
    every step and tabulate its decisions (:func:`ventsup.core.figures.decisions_to_frame`):
    the reference, several times slower, whose report figures the default's equal
    (``tests/simulator/test_demo_frame.py``). Only the reason text differs, where the
    core's outcome repeats: the table keeps the reason of the core's latest call.
    """
    from simulator.loop import run
    from ventsup.core.figures import decisions_to_frame

    recorder = _Recorder(config) if every_step else None
    result = run(
        config,
        building,
        weather,
        scenario,
        start,
        end,
        step,
        controller=recorder,
        progress=progress,
    )
    if recorder is None:
        return result, result.decisions_frame()
    return result, decisions_to_frame(recorder.decisions, config)


def _bar(label: str, out: TextIO) -> Any:
    started = time.monotonic()

    def show(share: float) -> None:
        filled = int(share * 30)
        elapsed = time.monotonic() - started
        print(
            f"\r{label} [{'#' * filled}{'.' * (30 - filled)}] {share:4.0%} {elapsed:4.0f} s",
            end="" if share < 1.0 else "\n",
            file=out,
            flush=True,
        )

    return show


def _simulate_month(config: SiteConfig, out_dir: Path, step: float, out: TextIO) -> int:
    import pandas as pd

    from simulator.building import load_building
    from simulator.scenario import load_scenario
    from simulator.weather import synthetic
    from ventsup.drivers.reporting import write_report

    site = config.site
    tz = site.time_zone
    building = load_building(DATA / "demo-building.yaml", config)
    scenario = load_scenario(DATA / "demo-scenario.yaml", config)
    location = (site.location.latitude, site.location.longitude) if site.location else (41.0, -88.0)
    start, end = (pd.Timestamp(day, tz=tz) for day in MONTH)
    # A week before June gives the adaptive comfort model its running mean of
    # outdoor temperature from the first day of the report.
    warm_up = start - pd.Timedelta(days=WARM_UP_DAYS)
    weather = synthetic(
        *location, tz, warm_up - pd.Timedelta(days=1), end + pd.Timedelta(days=1), seed=7
    )
    print(
        f"ventsup demo: {site.name} (an invented building), June 2027 in closed loop with the "
        f"building simulator, decisions every {step:.0f} s (after {WARM_UP_DAYS} days of "
        f"warm-up).\n"
        f"Scenario: {scenario.name}.",
        file=out,
    )
    result, frame = simulate(
        config,
        building,
        weather,
        scenario,
        warm_up,
        end,
        step,
        progress=_bar("simulating", sys.stderr),
    )
    print("writing the monthly report ...", file=sys.stderr, flush=True)
    paths = write_report(config, frame, start.timestamp(), end.timestamp(), out_dir)

    june = {zone: frame[frame.index >= start] for zone, frame in result.zones.items()}
    summary = dataclasses.replace(result, zones=june).summary()
    print("\nJune 2027, per zone", file=out)
    header = (
        f"{'zone':<15}{'free cooling h':>15}{'night flush h':>14}{'open h':>8}"
        f"{'above comfort h':>16}{'peak °C':>9}{'cooled kWh':>11}"
    )
    print(header, file=out)
    for zone, row in summary.iterrows():
        print(
            f"{zone!s:<15}{row['free_cooling_hours']:>15.1f}{row['night_flush_hours']:>14.1f}"
            f"{row['open_hours']:>8.1f}{row['hours_above_comfort']:>16.1f}"
            f"{row['peak_temperature']:>9.1f}{row['cooling_kwh']:>11.0f}",
            file=out,
        )
    changes = result.changes[result.changes["time"] >= start]
    print(f"\n{len(changes)} changes of mode or targets. A few of them:", file=out)
    shown: set[str] = set()
    for _, change in changes.iterrows():
        mode = str(change.get("mode", ""))
        if mode in shown or mode in ("idle", "unoccupied", "secured"):
            continue
        shown.add(mode)
        when = pd.Timestamp(change["time"]).tz_convert(tz)
        print(f"  {when:%a %d %H:%M}  {change['zone']:<15} {change['reason']}", file=out)
    print(f"\nReport: {paths.html}", file=out)
    print(" ".join(CAUTIONS), file=out)
    return 0


# ---------------------------------------------------------------------------------- day


def _replay_day(config: SiteConfig, log_path: Path, step: float, out: TextIO) -> int:
    from ventsup.drivers.replay import replay
    from ventsup.edges.logs import read_wide_csv

    samples = read_wide_csv(log_path, config)
    tz = ZoneInfo(config.site.time_zone)
    start, end = samples[0].t, samples[-1].t + 300.0
    day = datetime.fromtimestamp(start, tz)
    print(
        f"ventsup demo: {config.site.name} (invented), {day:%A %Y-%m-%d}, {len(config.zones)} zones, "
        f"decisions every {step:.0f} s from the bundled log {log_path.name}",
        file=out,
    )
    print("Each line: local time, zone, mode [layer], targets, reason.\n", file=out)

    last: dict[str, tuple[object, ...]] = {}
    seconds: dict[str, dict[str, float]] = defaultdict(lambda: defaultdict(float))
    moves: dict[str, int] = defaultdict(int)
    evaluations = 0
    for decision in replay(config, samples, start, end, step):
        evaluations += 1
        seconds[decision.zone][decision.mode.value] += step
        key = (decision.mode, tuple(decision.targets.values()))
        previous = last.get(decision.zone)
        if previous is not None and previous[1] != key[1]:
            before: tuple[object, ...] = previous[1]  # type: ignore[assignment]
            moves[decision.zone] += sum(a != b for a, b in zip(before, key[1], strict=True))
        if previous != key:
            last[decision.zone] = key
            when = datetime.fromtimestamp(decision.t, tz).strftime("%H:%M")
            targets = " ".join(
                f"{name}={'rel' if v is None else f'{v * 100:.0f}%'}"
                for name, v in decision.targets.items()
            )
            print(
                f"{when}  {decision.zone:<15} {decision.mode.value:<13}[{decision.layer.name.lower()}]"
                f"  {targets}\n       {decision.reason}",
                file=out,
            )
            for event in decision.events:
                print(f"       event: {event}", file=out)

    modes = sorted({m for zone in seconds.values() for m in zone})
    print("\nHours by mode", file=out)
    print(f"{'zone':<15}" + "".join(f"{m:>14}" for m in modes) + f"{'moves':>8}", file=out)
    for zone, by_mode in seconds.items():
        row = "".join(f"{by_mode.get(m, 0.0) / 3600:>14.1f}" for m in modes)
        print(f"{zone:<15}{row}{moves[zone]:>8}", file=out)
    print(f"\n{evaluations} decisions. " + " ".join(CAUTIONS), file=out)
    return 0
