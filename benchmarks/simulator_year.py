"""How long a simulated year of the demo building takes at one-minute steps.

Run from the repository root::

    .venv/bin/python benchmarks/simulator_year.py            # per-step core sampled, then scaled
    .venv/bin/python benchmarks/simulator_year.py --full     # the per-step core for the year too

Each figure is printed beside a baseline measured in the same run on the same
machine (see benchmarks/README.md): a bare loop over the same 525 600 steps
that does only the thermal update of the three zones with numpy. The figures:

- ``baseline``: that bare loop;
- ``simulator``: :func:`simulator.loop.run` for the year with a stand-in
  controller that returns fixed decisions (no decision core), so everything the
  simulator does itself: weather, samples for every point, actuators, airflow,
  the zone model (a compiled kernel), the records;
- ``closed loop``: the same with the decision core as
  :func:`simulator.loop.run` uses it by default (:class:`simulator.loop.CoreController`,
  which skips the evaluations whose outcome is known), for the whole year;
- ``closed loop, core every step``: a controller that calls
  :func:`ventsup.core.inputs.zone_inputs` + :func:`ventsup.core.decide.decide`
  per zone per step (what the loop did before it skipped), for ``--days``
  days scaled to a year, or the whole year with ``--full``; and the core's
  own cost per call.

Nothing is asserted: the numbers are for people (no benchmark or test asserts an
absolute time).
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np
import pandas as pd

from simulator.building import load_building
from simulator.loop import FixedController, run
from simulator.weather import synthetic
from ventsup.config import load_config
from ventsup.core.decide import decide
from ventsup.core.inputs import Held, zone_inputs
from ventsup.core.state import Decision, ZoneState

ROOT = Path(__file__).resolve().parent.parent
STEP = 60.0
YEAR_STEPS = 365 * 24 * 60


class TimedCore:
    """The decision core, timing zone_inputs and decide separately."""

    def __init__(self, config: object) -> None:
        self.config = config
        self.inputs_seconds = 0.0
        self.decide_seconds = 0.0
        self.calls = 0

    def __call__(
        self, zone: str, held: Held, state: ZoneState, t: float
    ) -> tuple[Decision, ZoneState]:
        start = time.perf_counter()
        inputs = zone_inputs(self.config, zone, held, t)  # type: ignore[arg-type]
        middle = time.perf_counter()
        result = decide(self.config, zone, inputs, state, t)  # type: ignore[arg-type]
        self.decide_seconds += time.perf_counter() - middle
        self.inputs_seconds += middle - start
        self.calls += 1
        return result


def baseline(steps: int, zones: int = 3) -> float:
    """Seconds for a bare loop of ``steps`` Crank-Nicolson mass updates of ``zones`` zones."""
    rng = np.random.default_rng(0)
    forcing = rng.normal(20.0, 5.0, size=(steps, zones))
    inertia = np.full(zones, 2e8 / STEP)
    half = np.full(zones, 500.0)
    mass = np.full(zones, 20.0)
    start = time.perf_counter()
    for k in range(steps):
        mass = (mass * (inertia - half) + 2.0 * half * forcing[k]) / (inertia + half)
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--full", action="store_true", help="run the per-step core for the whole year too"
    )
    parser.add_argument("--days", type=float, default=3.0, help="per-step core sample [d]")
    args = parser.parse_args()

    config = load_config(ROOT / "config" / "demo-site.yaml")
    building = load_building(ROOT / "config" / "demo-building.yaml", config)
    weather = synthetic(41.2, -88.1, config.site.time_zone, "2023-12-31", "2025-01-02", seed=1)
    start = pd.Timestamp("2024-01-01", tz=config.site.time_zone)
    end = start + pd.Timedelta(minutes=YEAR_STEPS)

    base = baseline(YEAR_STEPS)
    print(f"{'figure':<44}{'seconds':>10}{'µs/step':>10}{'x baseline':>12}")

    def show(label: str, seconds: float, steps: int = YEAR_STEPS) -> None:
        per_step = seconds / steps * 1e6
        scaled = seconds * YEAR_STEPS / steps
        print(f"{label:<44}{scaled:>10.1f}{per_step:>10.1f}{scaled / base:>12.1f}")

    show("baseline: bare numpy thermal loop, 1 year", base)

    began = time.perf_counter()
    run(
        config,
        building,
        weather,
        start=start,
        end=end,
        step=STEP,
        controller=FixedController(config, 0.5),
    )
    show("simulator alone (fixed decisions), 1 year", time.perf_counter() - began)

    began = time.perf_counter()
    result = run(config, building, weather, start=start, end=end, step=STEP)
    show("closed loop with the core (skipping), 1 year", time.perf_counter() - began)
    skipping_calls = result.calls

    span = YEAR_STEPS if args.full else int(args.days * 24 * 60)
    core = TimedCore(config)
    began = time.perf_counter()
    run(
        config,
        building,
        weather,
        start=start,
        end=start + pd.Timedelta(minutes=span),
        step=STEP,
        controller=core,
    )
    elapsed = time.perf_counter() - began
    label = "closed loop, core every step, 1 year" + (
        "" if args.full else f" (from {args.days:g} d)"
    )
    show(label, elapsed, span)
    zones = len(config.zones)
    print(
        f"\nthe core per zone per step: zone_inputs {core.inputs_seconds / core.calls * 1e6:.0f} µs,"
        f" decide {core.decide_seconds / core.calls * 1e6:.0f} µs"
        f" ({core.calls} calls, {zones} zones);"
        f" share of the per-step closed loop: {(core.inputs_seconds + core.decide_seconds) / elapsed:.0%}"
        f"\nthe skipping closed loop asked the core {skipping_calls} times in"
        f" {YEAR_STEPS * zones} zone-steps ({skipping_calls / (YEAR_STEPS * zones):.2%})"
    )


if __name__ == "__main__":
    main()
