"""Time per call of :func:`ventsup.core.decide.decide` on a simulated week, beside a bare baseline.

The calls are captured from a closed-loop simulated week of the demo building
(``config/demo-site.yaml``, ``config/demo-building.yaml``, synthetic June
weather, seed 1, one-minute steps, three zones): every ``(zone, inputs,
state, t)`` the simulator asked the core. Then, over exactly those calls:

- **baseline**: a bare Python loop evaluating a stateless open condition per
  call (indoor warm enough, outdoor within the band and cooler by the minimum
  difference, dry, calm), reading the same inputs;
- **decide**: the core on every call (open loop: each call gets the state the
  simulation recorded), in a child process per code tree, best of
  ``--repeats`` passes of CPU time;
- with ``--against DIR``, the same in a copy of another version of the code
  (for example ``git archive HEAD | tar -x -C /tmp/head``), timed in turns
  with this tree in the same run, and the outputs of both compared call by
  call (``repr`` of every Decision and next ZoneState; exit status 1 if any
  differs).

Run: ``.venv/bin/python benchmarks/decide_calls.py [--days 7] [--against
DIR]`` from the repository root (about a minute for the week). No figure here
is an assertion.
"""

from __future__ import annotations

import argparse
import dataclasses
import hashlib
import pickle
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

REPO = Path(__file__).resolve().parents[1]


def capture(days: float) -> list[tuple[str, dict[str, Any], Any, float]]:
    """The core's calls in a simulated week, inputs as plain fields (a mapping proxy does not pickle)."""
    import pandas as pd

    from simulator.building import load_building
    from simulator.loop import run
    from simulator.weather import synthetic
    from ventsup.config import load_config
    from ventsup.core.decide import decide
    from ventsup.core.inputs import zone_inputs

    config = load_config(REPO / "config" / "demo-site.yaml")
    building = load_building(REPO / "config" / "demo-building.yaml", config)
    weather = synthetic(41.2, -88.1, config.site.time_zone, "2024-06-01", "2024-06-12", seed=1)
    calls: list[tuple[str, dict[str, Any], Any, float]] = []

    def controller(zone: str, held: Any, state: Any, t: float) -> Any:
        inputs = zone_inputs(config, zone, held, t)
        fields = {f.name: getattr(inputs, f.name) for f in dataclasses.fields(inputs)}
        fields["feedback"] = dict(fields["feedback"])
        calls.append((zone, fields, state, t))
        return decide(config, zone, inputs, state, t)

    start = pd.Timestamp("2024-06-03", tz=config.site.time_zone)
    end = start + pd.Timedelta(days=days)
    run(config, building, weather, start=start, end=end, step=60.0, controller=controller)
    return calls


def baseline(calls: list[tuple[str, dict[str, Any], Any, float]], repeats: int) -> float:
    """Best CPU time [s] of a bare loop evaluating a stateless open condition per call."""
    from ventsup.config import load_config

    config = load_config(REPO / "config" / "demo-site.yaml")
    rules = {z: config.rules[config.zones[z].rules].free_cooling for z in config.zones}
    wind_limit = {z: config.rules[config.zones[z].rules].wind.cap_above for z in config.zones}
    best = float("inf")
    for _ in range(repeats):
        opened = 0
        t0 = time.process_time()
        for zone, fields, _state, _t in calls:
            fc = rules[zone]
            t_in = fields["temp_indoor"].value
            t_out = fields["temp_outdoor"].value
            wind = fields["wind_speed"].value
            if (
                t_in is not None
                and t_out is not None
                and wind is not None
                and t_in >= fc.open_above
                and fc.outdoor_min <= t_out <= fc.outdoor_max
                and t_in - t_out >= fc.min_difference
                and fields["rain"].value is False
                and wind <= wind_limit[zone]
            ):
                opened += 1
        best = min(best, time.process_time() - t0)
    return best


def time_tree(code: str, calls_file: str, repeats: int) -> None:
    """Child process: time decide() of the tree at ``code`` over the calls; print JSON-ish result."""
    sys.path.insert(0, code)
    import ventsup
    from ventsup.config import load_config
    from ventsup.core.decide import decide
    from ventsup.core.inputs import ZoneInputs

    assert Path(ventsup.__file__).resolve().is_relative_to(Path(code).resolve()), ventsup.__file__
    with open(calls_file, "rb") as handle:
        raw = pickle.load(handle)
    calls = [(zone, ZoneInputs(**fields), state, t) for zone, fields, state, t in raw]
    config = load_config(REPO / "config" / "demo-site.yaml")
    best = float("inf")
    for _ in range(repeats):
        t0 = time.process_time()
        for zone, inputs, state, t in calls:
            decide(config, zone, inputs, state, t)
        best = min(best, time.process_time() - t0)
    digest = hashlib.sha256()
    for zone, inputs, state, t in calls:
        decision, next_state = decide(config, zone, inputs, state, t)
        digest.update(f"{decision!r}\n{next_state!r}\n".encode())
    print(best, digest.hexdigest())


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--days", type=float, default=7.0, help="days simulated (default 7)")
    parser.add_argument("--repeats", type=int, default=3, help="passes per timing, best kept")
    parser.add_argument("--rounds", type=int, default=2, help="turns of tree and --against")
    parser.add_argument("--against", help="another code tree to time and compare with")
    parser.add_argument("--time-tree", nargs=2, metavar=("CODE", "CALLS"), help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.time_tree:
        time_tree(*args.time_tree, args.repeats)
        return 0

    sys.path.insert(0, str(REPO))
    t0 = time.perf_counter()
    calls = capture(args.days)
    print(f"captured {len(calls)} calls in {time.perf_counter() - t0:.0f} s")
    base = baseline(calls, args.repeats)
    trees = {"this tree": str(REPO)}
    if args.against:
        trees["--against"] = str(Path(args.against).resolve())
    results: dict[str, list[tuple[float, str]]] = {name: [] for name in trees}
    with tempfile.NamedTemporaryFile(suffix=".pickle") as handle:
        pickle.dump(calls, handle)
        handle.flush()
        for _ in range(args.rounds):
            for name, code in trees.items():
                out = subprocess.run(
                    [sys.executable, __file__, "--repeats", str(args.repeats),
                     "--time-tree", code, handle.name],
                    check=True, capture_output=True, text=True, cwd="/",
                ).stdout.split()  # fmt: skip
                results[name].append((float(out[0]), out[1]))
    n = len(calls)
    print(f"baseline (bare open condition): {base / n * 1e6:.2f} µs a call")
    best: dict[str, float] = {}
    for name, runs in results.items():
        best[name] = min(r[0] for r in runs)
        ratio = best[name] / base
        print(f"decide, {name}: {best[name] / n * 1e6:.1f} µs a call ({ratio:.0f}x the baseline)")
    if args.against:
        print(f"this tree / --against: {best['this tree'] / best['--against']:.2f}")
        digests = {r[1] for runs in results.values() for r in runs}
        if len(digests) != 1:
            print("OUTPUTS DIFFER between the trees")
            return 1
        print(f"outputs identical on all {n} calls")
    return 0


if __name__ == "__main__":
    sys.exit(main())
