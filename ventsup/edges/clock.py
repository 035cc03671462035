"""Time for the drivers: the wall clock, and a manual clock for tests and simulations.

The core never reads a clock; the drivers read one of these and pass the time
in. Times are seconds since the Unix epoch (UTC), as floats.

>>> clock = ManualClock(1_700_000_000.0)
>>> clock.advance(60)
1700000060.0
>>> clock.now()
1700000060.0
"""

from __future__ import annotations

import math
import threading
import time
from typing import Protocol, runtime_checkable

__all__ = ["Clock", "ManualClock", "WallClock"]


@runtime_checkable
class Clock(Protocol):
    """Something that tells the time [s since the Unix epoch, UTC]."""

    def now(self) -> float:
        """The current time [s since the Unix epoch, UTC]."""
        ...


class WallClock:
    """The system's real-time clock (``time.time()``)."""

    def now(self) -> float:
        """The current time [s since the Unix epoch, UTC]."""
        return time.time()

    def __repr__(self) -> str:
        return "WallClock()"


class ManualClock:
    """A clock that moves only when told to; safe to read from several threads.

    Raises ``ValueError`` for a time that is not finite and for moving backwards.
    """

    def __init__(self, t: float = 0.0) -> None:
        self._lock = threading.Lock()
        self._t = self._checked(t)

    @staticmethod
    def _checked(t: float) -> float:
        if isinstance(t, bool) or not math.isfinite(t):
            raise ValueError(f"got time {t!r}, expected a finite number of seconds")
        return float(t)

    def now(self) -> float:
        """The time last set [s since the Unix epoch, UTC]."""
        with self._lock:
            return self._t

    def advance(self, seconds: float) -> float:
        """Move the clock forward by ``seconds`` (0 or more); returns the new time."""
        step = self._checked(seconds)
        if step < 0:
            raise ValueError(f"got {seconds!r} s, expected to advance by 0 s or more")
        with self._lock:
            self._t += step
            return self._t

    def set(self, t: float) -> None:
        """Set the time to ``t`` [s]; never earlier than the time already shown."""
        value = self._checked(t)
        with self._lock:
            if value < self._t:
                raise ValueError(
                    f"got time {value!r}, expected {self._t!r} or later: a clock never runs back"
                )
            self._t = value

    def __repr__(self) -> str:
        return f"ManualClock({self.now()!r})"
