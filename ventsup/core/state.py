"""What the decision core returns and remembers: decisions and zone state.

All of these are small frozen dataclasses, compared by value, so that tests,
the ledger and the replay can use them directly. Times are seconds since the
Unix epoch (UTC); positions are opening fractions 0-1, where ``None`` means
*released*: the controller is not commanding that opening.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from enum import IntEnum, StrEnum
from typing import Literal

__all__ = [
    "Cause",
    "Decision",
    "Layer",
    "Limit",
    "Mode",
    "OpeningState",
    "OverrideRequest",
    "OverrideState",
    "WindLatch",
    "ZoneState",
]


class Layer(IntEnum):
    """Priority layers, highest first. A layer can only make the result safer
    than the layers below it."""

    LIFE_SAFETY = 1
    PROTECTION = 2
    FAULT = 3
    OVERRIDE = 4
    SCHEDULE = 5
    COMFORT = 6
    ACTUATOR_CARE = 7


class Mode(StrEnum):
    """What a zone's openings are doing, in the trade's plain terms."""

    RELEASED = "released"  # alarm: not commanded, the fire system has them
    FIRE_POSITION = "fire_position"  # alarm: driven where the fire strategy says
    PROTECTED = "protected"  # closed or capped by rain, wind, cold or an actuator fault
    FAULT = "fault"  # closed or fallback because an input is unknown
    OVERRIDE = "override"  # an operator's open, close or hold
    SECURED = "secured"  # security window caps the openings
    UNOCCUPIED = "unoccupied"  # outside occupied and night-flush hours
    FREE_COOLING = "free_cooling"
    NIGHT_FLUSH = "night_flush"
    AIR_QUALITY = "air_quality"  # minimum opening for CO2
    INTERLOCK = "interlock"  # would cool, but the plant is heating the zone
    IDLE = "idle"  # automatic, nothing calls for opening
    HELD = "held"  # actuator care holds the last position for now


class Cause(StrEnum):
    """Why openings are closed or capped; the categories reports count hours by."""

    SMOKE = "smoke"
    RAIN = "rain"
    WIND = "wind"
    COLD = "cold"
    ACTUATOR = "actuator"
    FAULT = "fault"
    OPERATOR = "operator"
    SCHEDULE = "schedule"
    INTERLOCK = "interlock"
    COMFORT = "comfort"
    ACTUATOR_CARE = "actuator_care"


@dataclass(frozen=True)
class Limit:
    """A cap on some openings imposed by one layer for one cause.

    ``caps`` maps opening name to the highest fraction allowed. ``reason`` is a
    readable clause ("rain since 14:02 (roof_rain = wet); dry delay 20 min").
    """

    layer: Layer
    cause: Cause
    caps: dict[str, float]
    reason: str
    facts: dict[str, float | str | bool | None] = field(default_factory=dict)


@dataclass(frozen=True)
class Decision:
    """One evaluation of one zone.

    ``targets`` maps each opening to its target fraction, ``None`` when
    released. ``mode``, ``layer`` and ``cause`` say what decided; ``reason`` is
    one sentence with the values that decided it; ``limits`` lists every cap in
    force (also those that did not bind); ``facts`` the input values used.
    ``windows_open`` is the HVAC interlock output; ``open_area`` [m²] the free
    area commanded open; ``events`` notes transitions worth recording
    ("alarm latched", "override ended", ...).
    """

    zone: str
    t: float
    targets: dict[str, float | None]
    mode: Mode
    layer: Layer
    cause: Cause
    reason: str
    windows_open: bool
    open_area: float
    limits: tuple[Limit, ...] = ()
    facts: dict[str, float | str | bool | None] = field(default_factory=dict)
    events: tuple[str, ...] = ()


@dataclass(frozen=True)
class OverrideRequest:
    """An operator's request for a zone: ``open``, ``close``, ``hold`` or ``auto``.

    ``position`` sets the fraction for open or hold (open: default 1; hold:
    default the current targets). ``duration`` [s] is how long it lasts.
    """

    action: Literal["open", "close", "hold", "auto"]
    duration: float = 7200.0
    position: float | None = None
    who: str = "operator"
    why: str = ""


@dataclass(frozen=True)
class OverrideState:
    """An override in force until ``until``."""

    action: Literal["open", "close", "hold"]
    since: float
    until: float
    who: str
    why: str
    targets: dict[str, float]


@dataclass(frozen=True)
class OpeningState:
    """What the core remembers about one opening.

    ``target`` is the last commanded fraction (None: never commanded or
    released). ``changed_at`` is when it last changed, ``opened_at`` /
    ``closed_at`` when it last went from closed to open or back, ``moves`` the
    times of the comfort-layer moves within the last hour, ``fault_since`` when
    the actuator fault latched.
    """

    target: float | None = None
    changed_at: float | None = None
    opened_at: float | None = None
    closed_at: float | None = None
    moves: tuple[float, ...] = ()
    fault_since: float | None = None


@dataclass(frozen=True)
class WindLatch:
    """A wind limit, once exceeded, holds until calm for the hold time."""

    active: bool = False
    last_high: float | None = None


@dataclass(frozen=True)
class ZoneState:
    """Everything the core carries from one evaluation of a zone to the next."""

    openings: dict[str, OpeningState] = field(default_factory=dict)
    alarm_latched: bool = False
    alarm_since: float | None = None
    alarm_clear_since: float | None = None
    rain_last_wet: float | None = None
    rain_since: float | None = None
    wind: dict[str, WindLatch] = field(default_factory=dict)
    cooling: bool = False
    flush: bool = False
    air_quality: bool = False
    override: OverrideState | None = None
    mode: Mode | None = None
    mode_since: float | None = None
    last_t: float | None = None

    def opening(self, name: str) -> OpeningState:
        """The state of one opening (a fresh one if never seen)."""
        state = self.openings.get(name)
        return _NEVER_SEEN if state is None else state


_NEVER_SEEN = OpeningState()
