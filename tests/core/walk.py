"""A seeded random walk of zone evaluations, for the decision-identity check.

Each walk drives :func:`ventsup.core.decide.decide` closed loop (the state
returned is the state passed next) through drifting temperatures, humidity,
wind with gusts, rain showers, CO2, the plant's heating, smoke alarms, stale
and missing points, actuator feedback off its command and operator requests,
with evaluation gaps from 1 s to an hour, across both daylight-saving changes.
Everything depends only on the seed, so the same code gives the same calls.
"""

from __future__ import annotations

import random
from collections.abc import Iterator

from ventsup.config.model import SiteConfig
from ventsup.core.decide import decide, initial_state
from ventsup.core.inputs import Reading, ZoneInputs
from ventsup.core.state import Decision, OverrideRequest, ZoneState

__all__ = ["walk", "walk_starts"]


def walk_starts(time_zone: str) -> tuple[tuple[int, int, int], ...]:
    """Local start dates: the day before each 2024 clock change of the zone, and midsummer."""
    if time_zone.startswith("America/"):
        return ((2024, 3, 9), (2024, 11, 2), (2024, 7, 1))
    return ((2024, 3, 30), (2024, 10, 26), (2024, 7, 1))


def walk(
    config: SiteConfig, zone: str, start: float, steps: int, seed: int
) -> Iterator[tuple[Decision, ZoneState]]:
    """Yield ``steps`` decisions of ``zone`` and the state after each, from ``start`` [s]."""
    rng = random.Random(seed)
    openings = list(config.zones[zone].openings)
    n_alarms = len(config.zones[zone].smoke_alarms) or 1
    t_in, t_out, rh, wind, wind_dir, co2 = 22.0, 15.0, 60.0, 3.0, 200.0, 600.0
    rain = heating = smoke = False
    state = initial_state()
    t = start
    for _ in range(steps):
        t += rng.choice([1.0, 30.0, 60.0, 60.0, 300.0, 900.0, 3600.0 * rng.random()])
        t_in = min(32.0, max(10.0, t_in + rng.gauss(0.0, 0.3)))
        t_out = min(38.0, max(-10.0, t_out + rng.gauss(0.0, 0.5)))
        rh = min(100.0, max(5.0, rh + rng.gauss(0.0, 3.0)))
        gust = 8.0 if rng.random() < 0.02 else 0.0
        wind = max(0.0, wind + rng.gauss(0.0, 0.7) + gust - 0.3 * (wind - 3.0))
        wind_dir = (wind_dir + rng.gauss(0.0, 20.0)) % 360.0
        rain = not rain if rng.random() < (0.15 if rain else 0.01) else rain
        co2 = min(2500.0, max(380.0, co2 + rng.gauss(0.0, 60.0)))
        heating = not heating if rng.random() < 0.02 else heating
        smoke = not smoke if rng.random() < (0.05 if smoke else 0.003) else smoke

        def reading(point: str, value: float | bool, now: float = t) -> Reading:
            u = rng.random()
            if u < 0.01:
                return Reading.stale(point, now - rng.choice([100.0, 4000.0]))
            if u < 0.015:
                return Reading.missing(point if rng.random() < 0.5 else "")
            return Reading.ok(point, value, now - rng.choice([0.0, 10.0]))

        feedback = {}
        for name in openings:
            position = state.opening(name).target or 0.0
            if rng.random() < 0.05:
                position = rng.choice([0.0, 0.5, 1.0])
            if rng.random() < 0.7:
                feedback[name] = reading(f"{name}_pos", round(position + rng.gauss(0.0, 0.02), 3))
        inputs = ZoneInputs.of(
            temp_indoor=reading("t_in", round(t_in, 2)),
            temp_outdoor=reading("t_out", round(t_out, 2)),
            humidity_outdoor=reading("rh", round(rh, 1)) if rng.random() < 0.9 else None,
            dew_point_outdoor=reading("dew", round(t_out - 5.0, 2)) if rng.random() < 0.3 else None,
            wind_speed=reading("wind", round(wind, 2)),
            wind_direction=reading("wind_dir", round(wind_dir, 1)) if rng.random() < 0.9 else None,
            rain=reading("rain", rain),
            co2=reading("co2", round(co2)) if rng.random() < 0.95 else None,
            heating=reading("heating", heating) if rng.random() < 0.95 else None,
            alarms=[reading(f"smoke{k}", smoke and k == 0) for k in range(n_alarms)],
            feedback=feedback,
        )
        request = None
        if rng.random() < 0.01:
            request = OverrideRequest(
                rng.choice(["open", "close", "hold", "auto"]),
                duration=rng.choice([600.0, 7200.0, 1e6]),
                position=rng.choice([None, 0.4, 1.0]),
                who=rng.choice(["facilities", "night guard"]),
                why=rng.choice(["", "fresh air for an event"]),
            )
        decision, state = decide(config, zone, inputs, state, t, request)
        yield decision, state
