"""Hypothesis strategies: random sequences of zone input steps for the demo site.

A :class:`Plain` step holds plain values (what :meth:`ZoneInputs.of` takes), a
time step of 10-600 s, how actuator feedback behaves and, now and then, an
operator request. Values come on 0.1 grids so that thresholds are hit exactly
now and then; any of them may be unknown (never received or stale).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any, Literal

from hypothesis import strategies as st

from ventsup.config.model import SiteConfig
from ventsup.core.decide import decide, initial_state
from ventsup.core.inputs import ZoneInputs
from ventsup.core.state import Decision, OverrideRequest, ZoneState

from .helpers import epoch

__all__ = [
    "CALM",
    "FIELDS",
    "Plain",
    "Record",
    "build_inputs",
    "grid",
    "replay",
    "sequences",
    "starts",
]

STALE = "stale"
Feedback = Literal["none", "follow", "stuck"]


@dataclass(frozen=True)
class Plain:
    """One evaluation's inputs as plain values, ``dt`` seconds after the previous one."""

    dt: int
    values: dict[str, Any]
    feedback: Feedback = "none"
    stuck_at: float = 0.0
    request: OverrideRequest | None = None


@dataclass(frozen=True)
class Record:
    """One evaluation: its time, inputs, the state before and the decision and state after."""

    t: float
    inputs: ZoneInputs
    before: ZoneState
    decision: Decision
    after: ZoneState
    plain: Plain = field(repr=False)


def grid(low: float, high: float, step: float = 0.1) -> st.SearchStrategy[float]:
    """Values from ``low`` to ``high`` on a grid of ``step``."""
    n = round((high - low) / step)
    return st.integers(0, n).map(lambda i: round(low + i * step, 6))


def now_and_then(
    usual: st.SearchStrategy[Any], rare: st.SearchStrategy[Any], one_in: int
) -> st.SearchStrategy[Any]:
    """``usual``, and about once in ``one_in`` draws ``rare``.

    A ``one_of`` of repeated branches would not do: Hypothesis picks the rare one
    far more often. The rare index sits in the middle, away from the ends that
    Hypothesis favours.
    """
    rare_index = one_in // 2
    return st.sampled_from(range(one_in)).flatmap(lambda i: rare if i == rare_index else usual)


def flag(one_in: int) -> st.SearchStrategy[bool]:
    """False, and about once in ``one_in`` draws True."""
    return now_and_then(st.just(False), st.just(True), one_in)


#: Each input's known values; a step changes a random few of them and keeps the rest.
FIELDS: dict[str, st.SearchStrategy[Any]] = {
    "temp_indoor": now_and_then(grid(21.0, 26.0), grid(16.0, 30.0), 4),
    "temp_outdoor": now_and_then(grid(10.0, 24.0), grid(-5.0, 32.0), 4),
    # a measured dew point mostly (the humidity path is slower), humidity sometimes
    "dew_point_outdoor": now_and_then(grid(0.0, 16.0), grid(-10.0, 22.0), 4),
    "humidity_outdoor": now_and_then(st.none(), grid(20.0, 95.0, 5.0), 4),
    "wind_speed": now_and_then(grid(0.0, 6.0), grid(0.0, 16.0), 8),
    "wind_direction": grid(0.0, 355.0, 5.0),
    "rain": flag(15),
    "co2": now_and_then(grid(400.0, 1300.0, 10.0), grid(350.0, 2000.0, 10.0), 4),
    "heating": flag(4),
}
#: The inputs a dropout can hit: for one step the point is never received (None) or stale.
DROPOUT = st.tuples(
    st.sampled_from([*FIELDS, "alarm"]).filter(lambda name: name != "humidity_outdoor"),
    st.sampled_from([None, STALE]),
)
#: Where a sequence starts: mild, dry, calm, nothing unknown.
CALM: dict[str, Any] = {
    "temp_indoor": 22.0,
    "temp_outdoor": 16.0,
    "dew_point_outdoor": 8.0,
    "humidity_outdoor": None,
    "wind_speed": 2.0,
    "wind_direction": 90.0,
    "rain": False,
    "co2": 600.0,
    "heating": False,
    "alarm": False,
}


def requests() -> st.SearchStrategy[OverrideRequest | None]:
    request = st.builds(
        OverrideRequest,
        action=st.sampled_from(["open", "close", "hold", "auto"]),
        duration=st.integers(60, 7200).map(float),
        position=st.one_of(st.none(), grid(0.0, 1.0, 0.05)),
        who=st.just("tester"),
    )
    return now_and_then(st.none(), request, 16)


@st.composite
def sequences(draw: st.DrawFn, min_size: int = 5, max_size: int = 30) -> list[Plain]:
    """A list of steps; each changes a few inputs of the one before (the first: of CALM).

    Now and then a step has an active alarm, a dropout of one point, an operator
    request, or actuator feedback stuck at one position.
    """
    changes = st.fixed_dictionaries({}, optional=FIELDS)
    n = draw(st.integers(min_size, max_size))
    known_values = dict(CALM)
    plan: list[Plain] = []
    for _ in range(n):
        known_values = {**known_values, **draw(changes)}
        values = {**known_values, "alarm": draw(flag(30))}
        dropout = draw(now_and_then(st.none(), DROPOUT, 6))
        if dropout is not None:
            values[dropout[0]] = dropout[1]
        plan.append(
            Plain(
                dt=draw(st.integers(10, 600)),
                values=values,
                feedback=draw(
                    now_and_then(st.sampled_from(["none", "follow"]), st.just("stuck"), 8)
                ),
                stuck_at=draw(grid(0.0, 1.0, 0.25)),
                request=draw(requests()),
            )
        )
    return plan


#: 2024-01-01 00:00 in the demo site's zone; starts fall anywhere in that year.
YEAR = epoch("America/Chicago", 2024, 1, 1)


def starts() -> st.SearchStrategy[float]:
    """A time in 2024, mostly in the working day (when the comfort layer has work)."""
    day = st.integers(0, 365).map(lambda d: YEAR + d * 86400.0)
    time_of_day = now_and_then(st.integers(6 * 3600, 20 * 3600), st.integers(0, 86399), 3)
    return st.builds(lambda d, s: d + s, day, time_of_day)


def build_inputs(
    config: SiteConfig, zone: str, plain: Plain, t: float, previous: Decision | None
) -> ZoneInputs:
    """The zone's inputs for one step; the same plain step always gives equal inputs."""
    values = dict(plain.values)
    stale = [name for name, value in values.items() if value == STALE and name != "alarm"]
    for name in stale:
        values[name] = 0.0
    alarm = values.pop("alarm")
    n_alarms = len(config.zones[zone].smoke_alarms)
    alarms: list[bool | None] = [False if alarm == STALE else alarm] * n_alarms
    if alarm == STALE:
        stale += [f"alarm_{i}" for i in range(1, n_alarms + 1)]
    with_feedback = [n for n, o in config.zones[zone].openings.items() if o.feedback is not None]
    feedback: dict[str, float | None] = {}
    if plain.feedback == "follow" and previous is not None:
        feedback = {n: previous.targets.get(n) for n in with_feedback}
    elif plain.feedback == "stuck":
        feedback = dict.fromkeys(with_feedback, plain.stuck_at)
    return ZoneInputs.of(alarms=alarms, feedback=feedback, stale=stale, t=t, **values)


def replay(
    config: SiteConfig,
    zone: str,
    start: float,
    plan: Sequence[Plain],
    state: ZoneState | None = None,
) -> list[Record]:
    """Run ``plan`` through :func:`decide`, carrying the state from step to step."""
    current = initial_state() if state is None else state
    t = start
    records: list[Record] = []
    previous: Decision | None = None
    for plain in plan:
        t += plain.dt
        zone_inputs = build_inputs(config, zone, plain, t, previous)
        decision, after = decide(config, zone, zone_inputs, current, t, request=plain.request)
        records.append(Record(t, zone_inputs, current, decision, after, plain))
        current, previous = after, decision
    return records
