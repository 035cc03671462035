"""Schedules across daylight saving time changes read as a wall clock reads.

A site with a security window 01:00-04:00, occupied hours Mon-Fri 07:00-19:00
and night flush hours 22:00-06:00 is evaluated minute by minute (UTC steps,
every real minute once) over the nights of the spring and autumn changes in
Europe/Berlin and America/New_York, and over the Monday after each change.

- Spring: the wall-clock hour 02:00-03:00 does not exist, so the security
  window lasts 2 real hours that night and the night flush 7.
- Autumn: the repeated hour lies inside the window both times, so the security
  window lasts 4 real hours and the night flush 9.
- Monday: occupied hours start at 07:00 and end at 19:00 local time.

Changes (IANA tz database): Europe/Berlin 2024-03-31 02:00 CET -> 03:00 CEST
and 2024-10-27 03:00 CEST -> 02:00 CET; America/New_York 2024-03-10 02:00 EST
-> 03:00 EDT and 2024-11-03 02:00 EDT -> 01:00 EST.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta
from typing import Any
from zoneinfo import ZoneInfo

import pytest

from ventsup.config.model import SiteConfig
from ventsup.core.decide import decide, initial_state
from ventsup.core.state import Layer, Mode

from .helpers import BENIGN, inputs, site

RULES: dict[str, Any] = {
    "schedule": {"occupied": ["Mon-Fri 07:00-19:00"], "security": ["01:00-04:00"]},
    "night_flush": {"enabled": True, "hours": "22:00-06:00"},
}
OPENINGS = {"high": {"secure_position": "100 %"}}  # the window limits the low opening only
# Warm enough for free cooling and for night flush, cool dry air outdoors. A measured
# dew point keeps the minute-by-minute sweep quick.
VALUES: dict[str, Any] = {
    **BENIGN,
    "temp_indoor": 25.0,
    "humidity_outdoor": None,
    "dew_point_outdoor": 8.0,
    "co2": None,
}
MINUTE = timedelta(minutes=1)


@dataclass(frozen=True)
class Change:
    """A DST change: the zone, the Sunday it happens, and the local hour repeated or skipped."""

    tz: str
    sunday: tuple[int, int, int]
    spring: bool
    odd_hour: int  # the wall-clock hour that is skipped (spring) or repeated (autumn)


CHANGES = [
    Change("Europe/Berlin", (2024, 3, 31), spring=True, odd_hour=2),
    Change("Europe/Berlin", (2024, 10, 27), spring=False, odd_hour=2),
    Change("America/New_York", (2024, 3, 10), spring=True, odd_hour=2),
    Change("America/New_York", (2024, 11, 3), spring=False, odd_hour=1),
]
IDS = ["berlin-spring", "berlin-autumn", "new-york-spring", "new-york-autumn"]


@dataclass(frozen=True)
class Minute:
    """What the schedule did at one real minute."""

    utc: datetime
    local: datetime
    security: bool
    mode: Mode


def sweep(config: SiteConfig, tz: str, start: datetime, end: datetime) -> Iterator[Minute]:
    """Evaluate every real minute from ``start`` to ``end`` (aware datetimes), in UTC steps."""
    zone = ZoneInfo(tz)
    utc = start.astimezone(UTC)
    while utc < end.astimezone(UTC):
        t = utc.timestamp()
        decision, _ = decide(config, "room", inputs(t, **VALUES), initial_state(), t)
        security = any(limit.layer == Layer.SCHEDULE for limit in decision.limits)
        yield Minute(utc, utc.astimezone(zone), security, decision.mode)
        utc += MINUTE


def local(
    tz: str, day: tuple[int, int, int], hour: int, minute: int = 0, fold: int = 0
) -> datetime:
    return datetime(*day, hour, minute, tzinfo=ZoneInfo(tz), fold=fold)


def day_before(day: tuple[int, int, int], days: int = -1) -> tuple[int, int, int]:
    moved = datetime(*day) + timedelta(days=days)
    return moved.year, moved.month, moved.day


@pytest.fixture(scope="module", params=CHANGES, ids=IDS)
def night(request: pytest.FixtureRequest) -> tuple[Change, list[Minute]]:
    """The change night, Saturday 20:00 to Sunday 08:00 local, minute by minute."""
    change: Change = request.param
    config = site(RULES, openings=OPENINGS, time_zone=change.tz)
    saturday = day_before(change.sunday)
    minutes = list(
        sweep(config, change.tz, local(change.tz, saturday, 20), local(change.tz, change.sunday, 8))
    )
    return change, minutes


def test_the_night_has_the_real_length(night: tuple[Change, list[Minute]]) -> None:
    change, minutes = night
    assert len(minutes) == (11 if change.spring else 13) * 60  # 12 wall-clock hours +- 1


def test_security_window_follows_the_wall_clock(night: tuple[Change, list[Minute]]) -> None:
    change, minutes = night
    secured = [m for m in minutes if m.security]
    assert len(secured) == (120 if change.spring else 240)  # real minutes
    # one unbroken stretch, from 01:00 to 03:59 on the wall clock
    assert secured == minutes[minutes.index(secured[0]) :][: len(secured)]
    assert secured[0].local.strftime("%H:%M") == "01:00"
    assert secured[-1].local.strftime("%H:%M") == "03:59"
    before, after = minutes.index(secured[0]) - 1, minutes.index(secured[-1]) + 1
    assert minutes[before].local.strftime("%H:%M") == "00:59"
    assert minutes[after].local.strftime("%H:%M") == "04:00"
    assert not minutes[before].security and not minutes[after].security


def test_the_odd_hour_is_skipped_or_repeated_inside_the_window(
    night: tuple[Change, list[Minute]],
) -> None:
    change, minutes = night
    sunday = datetime(*change.sunday).date()
    in_odd_hour = [
        m for m in minutes if m.local.date() == sunday and m.local.hour == change.odd_hour
    ]
    if change.spring:
        assert in_odd_hour == []  # 02:00-02:59 does not exist on the wall clock
    else:
        assert len(in_odd_hour) == 120  # the hour shows twice...
        assert {m.local.fold for m in in_odd_hour} == {0, 1}
        assert all(m.security for m in in_odd_hour)  # ...and is in the window both times


@pytest.mark.parametrize("change", CHANGES, ids=IDS)
def test_security_caps_the_low_opening_during_night_flush(change: Change) -> None:
    config = site(RULES, openings=OPENINGS, time_zone=change.tz)
    inside = local(change.tz, change.sunday, 3, 30).timestamp()
    decision, _ = decide(config, "room", inputs(inside, **VALUES), initial_state(), inside)
    assert decision.mode == Mode.NIGHT_FLUSH
    assert decision.targets == {"low": 0.0, "high": 1.0}
    assert "low limited by the security window (low 0 %)" in decision.reason


def test_night_flush_hours_follow_the_wall_clock(night: tuple[Change, list[Minute]]) -> None:
    change, minutes = night
    flushing = [m for m in minutes if m.mode == Mode.NIGHT_FLUSH]
    assert len(flushing) == (7 if change.spring else 9) * 60
    assert flushing[0].local.strftime("%a %H:%M") == "Sat 22:00"
    assert flushing[-1].local.strftime("%a %H:%M") == "Sun 05:59"
    assert all(m.mode == Mode.UNOCCUPIED for m in minutes if m not in flushing)


@pytest.mark.parametrize("change", CHANGES, ids=IDS)
def test_occupied_hours_on_the_monday_after(change: Change) -> None:
    config = site(RULES, openings=OPENINGS, time_zone=change.tz)
    monday = day_before(change.sunday, days=1)
    minutes = list(
        sweep(config, change.tz, local(change.tz, monday, 6, 0), local(change.tz, monday, 20, 0))
    )
    occupied = [m for m in minutes if m.mode == Mode.FREE_COOLING]
    assert len(occupied) == 12 * 60
    assert occupied[0].local.strftime("%a %H:%M") == "Mon 07:00"
    assert occupied[-1].local.strftime("%a %H:%M") == "Mon 18:59"
    # 07:00 on the wall clock is the right real instant after the change
    offset = occupied[0].local.utcoffset()
    assert offset is not None
    assert occupied[0].utc == datetime(*monday, 7, 0, tzinfo=UTC) - offset
    assert all(m.mode == Mode.UNOCCUPIED for m in minutes if m not in occupied)
    assert not any(m.security for m in minutes)


@pytest.mark.parametrize("change", CHANGES, ids=IDS)
def test_the_sunday_of_the_change_is_not_occupied(change: Change) -> None:
    config = site(RULES, openings=OPENINGS, time_zone=change.tz)
    noon = local(change.tz, change.sunday, 12).timestamp()
    decision, _ = decide(config, "room", inputs(noon, **VALUES), initial_state(), noon)
    assert decision.mode == Mode.UNOCCUPIED
