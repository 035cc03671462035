"""Decisions stay bit-for-bit what they were: a recorded digest of every evaluation.

The speed work on :func:`ventsup.core.decide.decide` (memos, plain context
attributes, the schedule read once) must not change a single output. Seeded
random walks (:mod:`tests.core.walk`) over the demo site in SI and IP units
and three small test sites run closed loop through both clock changes; each
evaluation's ``repr(decision)`` and ``repr(next_state)`` is hashed (repr
shows floats exactly, -0.0 included) and compared with the digests recorded
from the code before that work, in ``data/decide_walk.digests`` (8 bytes a
call, in walk order).

The digests pin today's behaviour, not a published figure: the layer tests
check the rules against their sources. When a decision is meant to change,
rewrite the file with ``.venv/bin/python -m tests.core.test_decide_identity
--write`` and say why in the commit.
"""

from __future__ import annotations

import hashlib
import sys
from collections.abc import Callable, Iterator
from pathlib import Path

import pytest

from tests.core.helpers import DEMO_IP, DEMO_SI, epoch, load_demo, site
from tests.core.walk import walk, walk_starts
from ventsup.config.model import SiteConfig
from ventsup.config.units import format_quantity
from ventsup.core import psychro
from ventsup.core.context import Context
from ventsup.core.decide import initial_state
from ventsup.core.inputs import ZoneInputs
from ventsup.core.layers.comfort import dew_point_outdoor

DIGESTS = Path(__file__).parent / "data" / "decide_walk.digests"
STEPS = 450
DIGEST_SIZE = 8

SITES: tuple[tuple[str, Callable[[], SiteConfig]], ...] = (
    ("demo SI", lambda: load_demo(DEMO_SI)),
    ("demo IP", lambda: load_demo(DEMO_IP)),
    ("base", site),
    (
        "hold, security window, fire position",
        lambda: site(
            {
                "indoor_unknown": "hold",
                "schedule": {"occupied": ["Mon-Fri 08:00-18:00"], "security": ["18:00-07:00"]},
                "free_cooling": {"when": "always"},
            },
            openings={"low": {"fire_position": "100 %"}},
        ),
    ),
    (
        "IP, New York, no heating point",
        lambda: site(
            {"indoor_unknown": "hold"},
            time_zone="America/New_York",
            units="IP",
            zone={"heating": None},
        ),
    ),
)


def _evaluations() -> Iterator[tuple[str, bytes]]:
    """(where, digest) of every evaluation of every walk, in a fixed order."""
    seed = 0
    for label, make in SITES:
        config = make()
        for zone in config.zones:
            for date in walk_starts(config.site.time_zone):
                seed += 1
                start = epoch(config.site.time_zone, *date, 12, 0)
                for step, (decision, state) in enumerate(walk(config, zone, start, STEPS, seed)):
                    text = f"{decision!r}\n{state!r}".encode()
                    digest = hashlib.blake2b(text, digest_size=DIGEST_SIZE).digest()
                    yield (
                        f"{label}, zone {zone}, walk from {date}, step {step}: {decision!r}",
                        digest,
                    )


def test_every_decision_and_state_as_recorded() -> None:
    recorded = DIGESTS.read_bytes()
    count = 0
    for where, digest in _evaluations():
        offset = count * DIGEST_SIZE
        assert digest == recorded[offset : offset + DIGEST_SIZE], f"first change at {where}"
        count += 1
    assert count * DIGEST_SIZE == len(recorded), "the walks and the recorded file differ in length"


@pytest.mark.parametrize("units", ["SI", "IP"])
def test_context_formatting_is_format_quantity(units: str) -> None:
    """The memo in Context.fmt gives what format_quantity gives, whatever was asked before
    (0.0 and -0.0, 1 and 1.0 and True are equal keys of a dict)."""
    config = site(units=units)
    ctx = Context(config, "room", ZoneInputs.of(), initial_state(), 0.0)
    values = [0.0, -0.0, 0.0, 1, 1.0, True, -0.04, 0.04, 22.75, 1e-12, -1e-12, 1200, 1200.0]
    quantities = ["fraction", "temperature", "temperature_delta", "speed", "duration"]
    for quantity in quantities:
        for value in values + values[::-1]:
            assert ctx.fmt(value, quantity) == format_quantity(value, quantity, units)
    assert ctx.fmt(-0.0, "fraction") == "-0 %"


def test_dew_point_memo_is_the_solution() -> None:
    """The comfort layer's memoised dew point equals the direct solution, ±0 °C included."""
    config = site()
    for temp, rh in [(0.0, 80.0), (-0.0, 80.0), (25.0, 50.0), (25.0, 50.0), (-0.0, 100.0)]:
        inputs = ZoneInputs.of(temp_outdoor=temp, humidity_outdoor=rh)
        ctx = Context(config, "room", inputs, initial_state(), 0.0)
        expected = psychro.dew_point_from_relative_humidity(temp, rh / 100.0)
        assert repr(dew_point_outdoor(ctx)) == repr(expected)


def _write() -> None:
    DIGESTS.parent.mkdir(exist_ok=True)
    DIGESTS.write_bytes(b"".join(digest for _, digest in _evaluations()))
    print(f"wrote {DIGESTS} ({DIGESTS.stat().st_size} bytes)")


if __name__ == "__main__" and sys.argv[1:] == ["--write"]:
    _write()
