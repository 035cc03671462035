"""`ventsup demo`: the decision core over a bundled day of an invented building.

UNFINISHED: this is the stand-in demo until the building simulator lands. It
replays one invented June day of Quarry Lane Commons (see
``tools/make_demo_log.py``) through the same decision core the daemon uses,
prints every change of each zone's mode or targets with its reason, then the
hours by mode. The simulator-driven month in closed loop replaces it.
"""

from __future__ import annotations

import argparse
import sys
from collections import defaultdict
from datetime import datetime
from pathlib import Path
from zoneinfo import ZoneInfo

from ventsup.config.load import load_config
from ventsup.drivers.replay import replay
from ventsup.edges.logs import read_wide_csv

__all__ = ["CAUTIONS", "main"]

CAUTIONS = (
    "Safety: life-safety smoke control belongs to the listed fire system; ventsup only "
    "releases openings to it and never fights it.",
    "Pinch and security risks are handled at the actuators and by the site's procedures.",
    "Local codes and licensed engineers have the last word on how a building is ventilated.",
)


def _data(name: str) -> Path:
    return Path(__file__).parent / "data" / name


def main(args: argparse.Namespace | None = None) -> int:
    """Run the demo; ``args.config`` / ``args.log`` override the bundled files."""
    config_path = Path(getattr(args, "config", None) or _data("demo-site.yaml"))
    log_path = Path(getattr(args, "log", None) or _data("demo-day.csv"))
    step = float(getattr(args, "step", None) or 60.0)
    out = sys.stdout
    config = load_config(config_path)
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
            moves[decision.zone] += sum(a != b for a, b in zip(previous[1], key[1], strict=True))
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
