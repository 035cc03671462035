"""The view of one zone at one time that every layer reads.

Formatting lives here so that every reason sentence uses the site's display
units and the site's wall-clock time.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from functools import cached_property
from typing import Protocol
from zoneinfo import ZoneInfo

from ventsup.config.model import Opening, RuleSet, SiteConfig, Zone
from ventsup.config.units import format_quantity
from ventsup.core.state import ZoneState

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


@dataclass(frozen=True)
class Context:
    """One zone, its rules, its inputs and its previous state, at time ``t``."""

    config: SiteConfig
    zone_name: str
    inputs: object  # ventsup.core.inputs.ZoneInputs; typed loosely to keep layers decoupled
    state: ZoneState
    t: float

    @cached_property
    def zone(self) -> Zone:
        return self.config.zones[self.zone_name]

    @cached_property
    def rules(self) -> RuleSet:
        return self.config.rules[self.zone.rules]

    @cached_property
    def openings(self) -> dict[str, Opening]:
        return self.zone.openings

    @cached_property
    def tz(self) -> ZoneInfo:
        return ZoneInfo(self.config.site.time_zone)

    @cached_property
    def local(self) -> datetime:
        """``t`` as wall-clock time in the site's time zone."""
        return datetime.fromtimestamp(self.t, self.tz)

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
        return format_quantity(value, quantity, self.config.site.units)

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
