"""Replay logged samples through the decision core, step by step.

Sample and hold exactly as live: every sample up to the evaluation time is
held, each zone's inputs are read under its points' staleness, and
:func:`ventsup.core.decide.decide` is called per zone per tick.

UNFINISHED: immediate evaluation on safety points between ticks, the
vectorised fast path, rule sets side by side and the CLI arrive with the
replay work. This per-step loop is the reference the fast path must equal.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence

from ventsup.config.model import SiteConfig
from ventsup.core.decide import decide, initial_state
from ventsup.core.inputs import Held, Sample, hold, zone_inputs
from ventsup.core.state import Decision, ZoneState

__all__ = ["replay"]


def replay(
    config: SiteConfig,
    samples: Sequence[Sample],
    start: float,
    end: float,
    step: float = 60.0,
    progress: Callable[[float], None] | None = None,
) -> Iterator[Decision]:
    """Yield every zone's decision at each tick from ``start`` up to ``end`` [s].

    ``samples`` must be sorted by time. ``progress`` is called with the share
    done (0-1) once per tick.
    """
    if step <= 0:
        raise ValueError(f"step must be positive, got {step} s")
    held = Held()
    states: dict[str, ZoneState] = {zone: initial_state() for zone in config.zones}
    index = 0
    t = start
    while t < end:
        while index < len(samples) and samples[index].t <= t:
            held = hold(held, samples[index])
            index += 1
        for zone in config.zones:
            decision, states[zone] = decide(
                config, zone, zone_inputs(config, zone, held, t), states[zone], t
            )
            yield decision
        if progress is not None:
            progress((t - start) / (end - start))
        t += step
