"""The wall clock and the manual clock the drivers read."""

from __future__ import annotations

import math
import threading
import time

import pytest

from ventsup.edges.clock import Clock, ManualClock, WallClock


def test_wall_clock_reads_the_system_time() -> None:
    before = time.time()
    now = WallClock().now()
    assert before <= now <= time.time()
    assert isinstance(WallClock(), Clock)


def test_manual_clock_moves_only_when_told() -> None:
    clock = ManualClock(1_700_000_000.0)
    assert isinstance(clock, Clock)
    assert clock.now() == clock.now() == 1_700_000_000.0
    assert clock.advance(60) == 1_700_000_060.0
    clock.set(1_700_000_100.0)
    assert clock.now() == 1_700_000_100.0
    assert repr(clock) == "ManualClock(1700000100.0)"


@pytest.mark.parametrize("bad", [math.nan, math.inf, -math.inf, True])
def test_manual_clock_refuses_times_that_are_not_finite(bad: float) -> None:
    with pytest.raises(ValueError, match="expected a finite number of seconds"):
        ManualClock(bad)
    with pytest.raises(ValueError, match="expected a finite number of seconds"):
        ManualClock().advance(bad)


def test_manual_clock_never_runs_back() -> None:
    clock = ManualClock(100.0)
    with pytest.raises(ValueError, match="expected to advance by 0 s or more"):
        clock.advance(-1)
    with pytest.raises(ValueError, match=r"expected 100\.0 or later: a clock never runs back"):
        clock.set(99.0)


def test_manual_clock_is_safe_across_threads() -> None:
    clock = ManualClock(0.0)

    def tick() -> None:
        for _ in range(1000):
            clock.advance(1)

    workers = [threading.Thread(target=tick) for _ in range(4)]
    for worker in workers:
        worker.start()
    for worker in workers:
        worker.join()
    assert clock.now() == 4000.0
