"""The view of one zone at one time that every layer reads.

Formatting lives here so that every reason sentence uses the site's display
units and the site's wall-clock time.
"""

from __future__ import annotations

from collections.abc import Callable
from datetime import datetime
from functools import lru_cache
from typing import Any, Protocol, TypeVar
from zoneinfo import ZoneInfo

from ventsup.config.model import Opening, RuleSet, SiteConfig, Zone
from ventsup.config.units import format_quantity
from ventsup.core.state import ZoneState

T = TypeVar("T")

__all__ = ["Context", "ReadingLike"]


class ReadingLike(Protocol):
    """What the core needs of an input reading (see :mod:`ventsup.core.inputs`)."""

    @property
    def point(self) -> str | None: ...

    @property
    def value(self) -> float | bool | None: ...

    @property
    def status(self) -> str: ...

    @property
    def sample_t(self) -> float | None: ...


def known(reading: ReadingLike) -> bool:
    """True when a reading holds a valid, fresh value."""
    return reading.status == "ok" and reading.value is not None


# The site's local time of an evaluation time: every zone evaluated at one tick asks
# for the same one. A bounded memo of a pure function (datetimes are immutable).
_local_time = lru_cache(maxsize=64)(datetime.fromtimestamp)


def value_memo(function: Callable[..., T], maxsize: int) -> Callable[..., T]:
    """A bounded memo of a pure ``function`` of hashable arguments for the core.

    Keys are typed (ints, floats and bools apart). A call whose first argument
    (the value) is a float equal to zero is not memoised: 0.0 and -0.0 are equal
    keys, but a function may tell them apart (a formatted "-0 %", a sign in a
    result); put the value that may be zero first.
    """
    cached = lru_cache(maxsize=maxsize, typed=True)(function)

    def call(value: Any, *rest: Any) -> T:
        if value == 0.0 and value.__class__ is float:
            return function(value, *rest)
        return cached(value, *rest)

    return call


# format_quantity is pure and the same few values recur at every evaluation (the
# rule set's limits, held readings): a bounded memo saves most of the formatting.
_format_memo = value_memo(format_quantity, 4096)


class Context:
    """One zone, its rules, its inputs and its previous state, at time ``t``.

    Read-only by convention. The zone, its rules and openings are plain
    attributes set once here (the layers read them dozens of times per
    evaluation); the local time is worked out on first use only.
    """

    __slots__ = (
        "_local",
        "_units",
        "config",
        "inputs",
        "openings",
        "rules",
        "state",
        "t",
        "tz",
        "zone",
        "zone_name",
    )

    config: SiteConfig
    zone_name: str
    inputs: object  # ventsup.core.inputs.ZoneInputs; typed loosely to keep layers decoupled
    state: ZoneState
    t: float
    zone: Zone
    rules: RuleSet
    openings: dict[str, Opening]
    tz: ZoneInfo

    def __init__(
        self, config: SiteConfig, zone_name: str, inputs: object, state: ZoneState, t: float
    ) -> None:
        self.config = config
        self.zone_name = zone_name
        self.inputs = inputs
        self.state = state
        self.t = t
        self.zone = config.zones[zone_name]
        self.rules = config.rules[self.zone.rules]
        self.openings = self.zone.openings
        self.tz = ZoneInfo(config.site.time_zone)  # zoneinfo keeps one instance per key
        self._units = config.site.units
        self._local: datetime | None = None

    @property
    def local(self) -> datetime:
        """``t`` as wall-clock time in the site's time zone."""
        if self._local is None:
            self._local = _local_time(self.t, self.tz)
        return self._local

    def clock(self, t: float | None) -> str:
        """Wall-clock ``HH:MM`` of a time (with the date when it is not today)."""
        if t is None:
            return "unknown"
        when = datetime.fromtimestamp(t, self.tz)
        if when.date() == self.local.date():
            return when.strftime("%H:%M")
        return when.strftime("%Y-%m-%d %H:%M")

    def fmt(self, value: float | None, quantity: str) -> str:
        """A value in the site's display units."""
        return _format_memo(value, quantity, self._units)

    def input(self, name: str) -> ReadingLike:
        """One of the zone inputs by field name."""
        reading: ReadingLike = getattr(self.inputs, name)
        return reading

    def label(self, reading: ReadingLike, fallback: str) -> str:
        """The point name to show in a reason."""
        return reading.point or fallback

    def unknown_since(self, reading: ReadingLike) -> str:
        """'stale since 14:02' or 'never received'."""
        if reading.status == "missing" or reading.sample_t is None:
            return "never received"
        return f"no valid value since {self.clock(reading.sample_t)}"
