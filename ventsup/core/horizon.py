"""When a zone's decision can change: timers, schedule edges and input comparisons (pure).

The replay's fast path (:mod:`ventsup.drivers.replay_fast`) calls
:func:`ventsup.core.decide.decide` only where something can change and
repeats the outcome in between. This module says where that is, from the
core's side, so that it sits beside the layers it mirrors:

- :func:`next_timer`, :func:`timer_flags` and :func:`next_schedule_edge`: the
  comparisons of the core on the *time*: a dry delay, a wind hold, an alarm's
  clear hold, an override's end, a minimum time open or closed, a move leaving
  the one-hour window, the feedback timeout, and the edges of the occupied,
  security and night-flush periods in local wall time (daylight saving
  changes included).
- :func:`zone_features`: the comparisons of the core on the *inputs* that do
  not depend on the state (a temperature against a threshold, an alarm known
  and active, ...), evaluated vectorised at every evaluation time.
- :func:`state_classes`: the comparisons of inputs against the *state* (the
  free-cooling fraction against the current target within the minimum step,
  actuator feedback against its command, the feedback of released openings,
  which gives the open area) and the input comparisons that the state's
  latches make relevant (a wind latch reads its limit while off and its reopen
  level while on; a comfort latch with hysteresis reads one of its two
  thresholds).
- :func:`state_signature`: what of the state the core's branches read, apart
  from the time comparisons.
- :func:`advance` and :func:`stationary`: the only state fields that change
  while nothing else does are bookkeeping: ``last_t``, the time of the last
  wet rain reading, the time the wind was last high, and moves older than an
  hour dropping out. :func:`advance` applies exactly that.

Why skipping is exact: :func:`decide` is a function of the inputs, the state
and the time, and it reads them only through the comparisons listed here and
through values that end up in the reason and the facts (which a run keeps
from its first evaluation only). Two evaluations whose states have the same
signature and whose feature codes, state classes, schedule membership and
timer flags are equal take exactly the same branches with the same
constants, so their outcome (mode, layer, cause, targets, interlock, open
area) is the same and, if one was stationary, so is the other. A comparison
that a vectorised approximation cannot settle (an averaged temperature or a
derived dew point within 1e-9 K or 1e-6 K of a threshold, a time within a
millisecond of a timer's end) is marked uncertain, and the replay asks the
core itself at that evaluation.
"""

from __future__ import annotations

import copy
import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, fields, replace
from datetime import datetime
from functools import cache
from zoneinfo import ZoneInfo

import numpy as np
import numpy.typing as npt

from ventsup.config.model import Period, RuleSet, SiteConfig, Wind
from ventsup.core import psychro
from ventsup.core.layers.actuator import HOUR, recent_moves
from ventsup.core.layers.protection import _latch
from ventsup.core.layers.schedule import in_period
from ventsup.core.state import WindLatch, ZoneState

__all__ = [
    "MARGIN",
    "Readings",
    "ZoneFeatures",
    "advance",
    "advance_over",
    "grid_readings",
    "held_readings",
    "horizon",
    "next_schedule_edge",
    "next_timer",
    "outdoor_dew_point",
    "schedule_edges",
    "schedule_membership",
    "schedule_periods",
    "state_class_key",
    "state_classes",
    "state_signature",
    "stationary",
    "timer_flags",
    "timers",
    "zone_features",
]

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]
IntArray = npt.NDArray[np.int64]
CodeArray = npt.NDArray[np.uint8]

#: Time comparisons are treated as flipping this much early [s], so that float rounding
#: (``t - since < hold`` against ``t >= since + hold``) can never let one slip.
MARGIN = 1e-3
#: Timers that ran out less than this before ``t`` [s] still count (see :func:`next_timer`).
_RECENT = 1.0
_WEEK_MINUTES = 7 * 1440
# Thursday 1970-01-01 was weekday 3 (Monday 0).
_EPOCH_WEEKDAY = 3
# Codes of one comparison of a value with a threshold.
_BELOW, _EQUAL, _ABOVE, _UNKNOWN = 0, 1, 2, 3
# Tolerances of the vectorised values that are not bit-exact [same unit as the value].
_MEAN_EPS = 1e-9  # a mean: numpy's sum against math.fsum
_DEW_EPS = 1e-6  # a dew point from humidity: array Newton solution against the scalar one
_FRACTION_EPS = 1e-8  # the free-cooling fraction, which the core rounds to 1e-9
_RELEASED_UNKNOWN = -1.0  # the class of a released opening whose feedback is unknown


# --------------------------------------------------------------------------- schedule


def schedule_periods(rules: RuleSet) -> tuple[Period, ...]:
    """The weekly periods the schedule layer reads: occupied, security, night-flush hours."""
    periods = (*rules.schedule.occupied, *rules.schedule.security)
    if rules.night_flush.enabled:
        periods += tuple(rules.night_flush.hours)
    return periods


def _boundaries(periods: Iterable[Period]) -> list[int]:
    """Minutes of the week (Monday 00:00 = 0) at which ``in_period`` of some period may flip."""
    found: set[int] = set()
    for period in periods:
        for day in period.days:
            found.add((day * 1440 + period.start_minute) % _WEEK_MINUTES)
            end_day = day if period.start_minute < period.end_minute else day + 1
            found.add((end_day * 1440 + period.end_minute) % _WEEK_MINUTES)
    return sorted(found)


def _offset(tz: ZoneInfo, t: float) -> float:
    offset = datetime.fromtimestamp(t, tz).utcoffset()
    return 0.0 if offset is None else offset.total_seconds()


def _transition(tz: ZoneInfo, low: float, high: float) -> float:
    """The first whole second in (low, high] with the UTC offset of ``high`` (offsets differ)."""
    target = _offset(tz, high)
    lo, hi = math.floor(low), math.ceil(high)
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if _offset(tz, mid) == target:
            hi = mid
        else:
            lo = mid
    return float(hi)


def next_schedule_edge(periods: Sequence[Period], time_zone: str, t: float) -> float:
    """The earliest instant after ``t`` at which a period's membership may change.

    :func:`ventsup.core.layers.schedule.in_period` reads the local weekday, hour
    and minute. Between daylight saving changes the wall clock runs with the
    real one, so membership can only change where the wall clock reaches the
    start or end of a period; a daylight saving change (the wall clock jumps)
    is returned as an edge too. ``inf`` without periods.

    Parameters
    ----------
    periods : sequence of Period
        Weekly periods in local wall-clock time.
    time_zone : str
        IANA time zone of the site.
    t : float
        [s since the epoch, UTC].

    Returns
    -------
    float
        [s since the epoch, UTC], strictly after ``t``.

    Examples
    --------
    >>> from ventsup.config.model import Period
    >>> edge = next_schedule_edge([Period.parse("Mon-Fri 07:00-18:00")], "UTC", 0.0)
    >>> datetime.fromtimestamp(edge, ZoneInfo("UTC")).isoformat()
    '1970-01-02T07:00:00+00:00'
    """
    marks = _boundaries(periods)
    if not marks:
        return math.inf
    tz = ZoneInfo(time_zone)
    offset = _offset(tz, t)
    wall_minute = math.floor((t + offset) / 60.0)
    week_minute = (wall_minute + _EPOCH_WEEKDAY * 1440) % _WEEK_MINUTES
    later = [m for m in marks if m > week_minute]
    step = (later[0] - week_minute) if later else (_WEEK_MINUTES - week_minute + marks[0])
    edge = (wall_minute + step) * 60.0 - offset
    # A daylight saving change before the edge moves the wall clock: stop there.
    probe = t
    while probe < edge:
        nxt = min(probe + 86400.0, edge)
        if _offset(tz, nxt) != offset:
            return _transition(tz, probe, nxt)
        probe = nxt
    return edge


def schedule_edges(rules: RuleSet, time_zone: str, start: float, end: float) -> list[float]:
    """Every :func:`next_schedule_edge` of the rule set's periods in ``(start, end)``."""
    periods = schedule_periods(rules)
    edges: list[float] = []
    t = start
    while True:
        t = next_schedule_edge(periods, time_zone, t)
        if not t < end:
            return edges
        edges.append(t)


# --------------------------------------------------------------------------- timers


def _timer_ends(config: SiteConfig, zone: str, state: ZoneState) -> list[float]:
    """When each time comparison of the core on ``state`` flips [s], in a fixed order."""
    rules = config.rules_for(zone)
    ends: list[float] = []
    if state.alarm_latched and state.alarm_clear_since is not None:
        ends.append(state.alarm_clear_since + rules.alarm.clear_hold)
    if state.rain_last_wet is not None:
        ends.append(state.rain_last_wet + rules.rain.dry_delay)
    for latch in state.wind.values():
        if latch.active and latch.last_high is not None:
            ends.append(latch.last_high + rules.wind.hold)
    if state.override is not None:
        ends.append(state.override.until)
    care = rules.actuator
    for name in config.zones[zone].openings:
        opening = state.opening(name)
        if opening.opened_at is not None:
            ends.append(opening.opened_at + care.min_open_time)
        if opening.closed_at is not None:
            ends.append(opening.closed_at + care.min_closed_time)
        if opening.changed_at is not None:
            ends.append(opening.changed_at + care.feedback_timeout)
        if len(opening.moves) >= care.max_moves_per_hour:
            ends.extend(move + HOUR for move in opening.moves)
    return ends


def next_timer(config: SiteConfig, zone: str, state: ZoneState, t: float) -> float:
    """The earliest time after ``t`` at which a time comparison of the core on ``state`` may flip.

    The alarm's clear hold, the rain's dry delay, each wind latch's hold, an
    override's end, each opening's minimum time open and closed and feedback
    timeout, and (when the move limit is reached) each move leaving the
    one-hour window. A timer that ran out within a second before ``t`` is
    returned as it is, so that float rounding around ``t`` cannot hide it.
    ``inf`` when no timer runs. [s since the epoch, UTC]
    """
    return timers(config, zone, state, t)[1]


def timer_flags(config: SiteConfig, zone: str, state: ZoneState, t: float) -> bytes | None:
    """Which of the timers of :func:`next_timer` have run out at ``t``; None too close to tell.

    Two evaluations of states with the same :func:`state_signature` and the
    same flags, feature codes, state classes and schedule membership take the
    same branches of the core.
    """
    return timers(config, zone, state, t)[0]


def timers(config: SiteConfig, zone: str, state: ZoneState, t: float) -> tuple[bytes | None, float]:
    """:func:`timer_flags` and :func:`next_timer` at once."""
    flags: bytearray | None = bytearray()
    nearest = math.inf
    for end in _timer_ends(config, zone, state):
        if end > t - _RECENT and end < nearest:
            nearest = end
        if flags is None:
            continue
        if t < end - MARGIN:
            flags.append(0)
        elif t > end + MARGIN:
            flags.append(1)
        else:
            flags = None
    return (None if flags is None else bytes(flags)), nearest


def state_signature(config: SiteConfig, zone: str, state: ZoneState) -> tuple[object, ...]:
    """What of ``state`` the core's branches read, apart from the time comparisons.

    The targets, latches and flags as they are, and of each time only whether
    it is set: how long ago it was is read only through the comparisons of
    :func:`timer_flags`. Left out are ``mode``, ``mode_since`` and ``last_t``
    (written, never read) and the operator's name and reason (only in the
    reason). Two evaluations whose states have equal signatures and whose timer
    flags, feature codes, state classes and schedule membership are equal take
    the same branches of the core.
    """
    limit = config.rules_for(zone).actuator.max_moves_per_hour
    openings = tuple(
        (
            name,
            o.target,
            o.changed_at is None,
            o.opened_at is None,
            o.closed_at is None,
            len(o.moves) >= limit,
            o.fault_since is None,
        )
        for name, o in sorted(state.openings.items())
    )
    wind = tuple(
        (key, latch.active, latch.last_high is None) for key, latch in sorted(state.wind.items())
    )
    override = state.override
    return (
        openings,
        state.alarm_latched,
        state.alarm_since is None,
        state.alarm_clear_since is None,
        state.rain_last_wet is None,
        state.rain_since is None,
        wind,
        state.cooling,
        state.flush,
        state.air_quality,
        None if override is None else (override.action, tuple(sorted(override.targets.items()))),
    )


def schedule_membership(rules: RuleSet, time_zone: str, t: float) -> tuple[bool, ...]:
    """Whether ``t`` lies in each of :func:`schedule_periods`, as the schedule layer reads it."""
    local = datetime.fromtimestamp(t, ZoneInfo(time_zone))
    return tuple(in_period(period, local) for period in schedule_periods(rules))


def horizon(config: SiteConfig, zone: str, state: ZoneState, t: float) -> float:
    """The earliest time after ``t`` at which the zone's decision could change on its own.

    The nearer of :func:`next_timer` and the next schedule edge of the zone's
    rule set; inputs that change are the caller's part (:func:`zone_features`).
    """
    rules = config.rules_for(zone)
    edge = next_schedule_edge(schedule_periods(rules), config.site.time_zone, t)
    return min(next_timer(config, zone, state, t), edge)


# --------------------------------------------------------------------------- state


@cache
def _wind_thresholds(wind: Wind) -> dict[str, float]:
    # As ventsup.core.layers.protection._wind names its four latches (do not mutate).
    return {
        "cap": wind.cap_above,
        "close": wind.close_above,
        "windward_cap": wind.windward_cap_above
        if wind.windward_cap_above is not None
        else wind.cap_above,
        "windward_close": wind.windward_close_above
        if wind.windward_close_above is not None
        else wind.close_above,
    }


def advance(
    config: SiteConfig,
    zone: str,
    state: ZoneState,
    t: float,
    rain_wet: bool,
    wind_speed: float,
) -> ZoneState:
    """The state after an evaluation at ``t`` that changes nothing but bookkeeping.

    ``rain_wet`` is True when the rain reading is wet or unknown (the core then
    takes it as wet), ``wind_speed`` the wind speed [m/s] (``inf`` when
    unknown). ``last_t`` becomes ``t``; the last wet time becomes ``t`` while
    wet; each wind latch is updated as the core updates it; moves older than an
    hour drop out.
    """
    wind = state.wind
    rules = config.rules_for(zone).wind
    thresholds = _wind_thresholds(rules)
    calm = not any(latch.active for latch in wind.values()) and all(
        wind_speed <= limit for limit in thresholds.values()
    )
    if wind and not calm:  # a calm wind leaves inactive latches as they are
        wind = {
            key: _latch(
                state.wind.get(key, WindLatch()),
                wind_speed,
                limit,
                rules.reopen_ratio,
                rules.hold,
                t,
            )
            for key, limit in thresholds.items()
        }
    openings = state.openings
    if any(o.moves and t - o.moves[0] >= HOUR for o in openings.values()):
        openings = {
            name: replace(opening, moves=recent_moves(opening.moves, t))
            for name, opening in openings.items()
        }
    # A shallow copy with four fields set: dataclasses.replace would validate and
    # rebuild every field, many times per second of replay.
    result = copy.copy(state)
    object.__setattr__(result, "openings", openings)
    object.__setattr__(result, "rain_last_wet", t if rain_wet else state.rain_last_wet)
    object.__setattr__(result, "wind", wind)
    object.__setattr__(result, "last_t", t)
    return result


def advance_over(
    config: SiteConfig,
    zone: str,
    state: ZoneState,
    times: FloatArray,
    rain_wet: BoolArray,
    wind_speed: FloatArray,
) -> ZoneState:
    """:func:`advance` over several evaluations in a row (``times`` in order), each
    changing nothing but bookkeeping, with their rain and wind readings.

    The last wet time becomes the last of ``times`` with a wet (or unknown)
    rain reading; each wind latch that is on takes the last time the wind was
    above its reopen level (no latch switches on or off over them: that is
    not bookkeeping); moves older than an hour at the last time drop out.
    """
    if not times.size:
        return state
    last = float(times[-1])
    wet = np.flatnonzero(rain_wet)
    last_wet = float(times[wet[-1]]) if wet.size else state.rain_last_wet
    wind = state.wind
    if any(latch.active for latch in wind.values()):
        rules = config.rules_for(zone).wind
        wind = dict(wind)
        for key, limit in _wind_thresholds(rules).items():
            latch = wind.get(key, WindLatch())
            if latch.active:
                high = np.flatnonzero(wind_speed > rules.reopen_ratio * limit)
                if high.size:
                    wind[key] = WindLatch(True, float(times[high[-1]]))
    openings = state.openings
    if any(o.moves and last - o.moves[0] >= HOUR for o in openings.values()):
        openings = {
            name: replace(opening, moves=recent_moves(opening.moves, last))
            for name, opening in openings.items()
        }
    result = copy.copy(state)
    object.__setattr__(result, "openings", openings)
    object.__setattr__(result, "rain_last_wet", last_wet)
    object.__setattr__(result, "wind", wind)
    object.__setattr__(result, "last_t", last)
    return result


#: The fields of ZoneState that the core reads (all but the mode and when it began).
_READ_FIELDS = tuple(f.name for f in fields(ZoneState) if f.name not in ("mode", "mode_since"))


def stationary(
    config: SiteConfig,
    zone: str,
    before: ZoneState,
    after: ZoneState,
    t: float,
    rain_wet: bool,
    wind_speed: float,
) -> bool:
    """True when an evaluation at ``t`` took ``before`` to ``after`` changing only bookkeeping.

    The mode and the time it began may differ too: the core writes them but
    never reads them (``mode_since`` stays while the mode does), so the next
    evaluation takes the same branches as this one. A wind latch that switches
    on or off is not bookkeeping (it changes which comparisons the core reads).
    """
    # A wind latch switching on or off is a change, though advance() would switch it too.
    if {k: w.active for k, w in after.wind.items()} != {
        k: w.active for k, w in before.wind.items()
    }:
        return False
    expected = advance(config, zone, before, t, rain_wet, wind_speed)
    return all(getattr(after, name) == getattr(expected, name) for name in _READ_FIELDS)


# --------------------------------------------------------------------------- features


@dataclass(frozen=True)
class Readings:
    """One point's readings at each evaluation time: ``ok`` (fresh) and ``value`` (NaN if not)."""

    ok: BoolArray
    value: FloatArray


def held_readings(
    times: FloatArray,
    sample_t: FloatArray,
    values: FloatArray,
    at: IntArray,
    stale_after: float,
) -> Readings:
    """A point's readings at ``times`` when the sample held at each is row ``at`` (-1:
    none yet) of ``sample_t`` and ``values``: fresh while ``t - sample_t <=
    stale_after``, as :func:`ventsup.core.inputs.read_point` reads a held sample."""
    safe = np.maximum(at, 0)
    ok = (at >= 0) & (times - sample_t[safe] <= stale_after)
    return Readings(ok, np.where(ok, values[safe], np.nan))


def grid_readings(
    t: FloatArray, published: FloatArray, stale_after: float
) -> tuple[IntArray, Readings]:
    """A point published on the time grid ``t`` (``published``: NaN where nothing was):
    the step of the sample held at each step (-1: none yet), and its readings."""
    at = np.where(np.isnan(published), -1, np.arange(t.size, dtype=np.int64))
    np.maximum.accumulate(at, out=at)
    return at, held_readings(t, t, published, at, stale_after)


@dataclass(frozen=True)
class ZoneFeatures:
    """The state-free comparisons of one zone's inputs at each evaluation (see the module notes).

    ``codes`` holds one column per comparison (0 below, 1 equal, 2 above, 3
    unknown, or a category); ``uncertain`` marks the evaluations where a
    vectorised value came too close to a threshold to tell. ``fraction`` is
    the free-cooling fraction the core would compute from the indoor
    temperature (NaN when it is unknown), ``fraction_exact`` where it is a
    constant (fully open, or the minimum opening). ``rain_wet`` and
    ``wind_speed`` feed :func:`advance`; ``feedback`` holds each opening's
    feedback readings. ``temp_indoor`` [°C] and ``dew_point_outdoor`` [°C] are
    the values the comfort layer reads (NaN when unknown; an average or a dew
    point from humidity to within 1e-6 K), for figures. ``conditional`` are the
    comparisons that the core reads or not depending on its latches: the wind
    speed against each wind latch's limit (``("limit", key)``) and reopen level
    (``("reopen", key)``), each opening windward or not (``("windward",
    opening)``), and the two thresholds of each comfort latch with hysteresis
    (``("cooling_on", "")`` ...); :func:`state_classes` adds those the state
    makes relevant (see :func:`_conditional_read`).
    """

    codes: CodeArray
    uncertain: BoolArray
    fraction: FloatArray
    fraction_exact: BoolArray
    rain_wet: BoolArray
    wind_speed: FloatArray
    feedback: Mapping[str, Readings]
    temp_indoor: FloatArray
    dew_point_outdoor: FloatArray
    conditional: Mapping[tuple[str, str], CodeArray]


class _Codes:
    """Collects comparison columns and the uncertain evaluations."""

    def __init__(self, n: int) -> None:
        self.n = n
        self.columns: list[CodeArray] = []
        self.uncertain = np.zeros(n, dtype=np.bool_)

    def category(self, codes: npt.NDArray[np.integer]) -> None:
        self.columns.append(np.asarray(codes, dtype=np.uint8))

    def compare(
        self,
        value: FloatArray,
        known: BoolArray,
        threshold: float,
        eps: FloatArray | float,
        *,
        keep: bool = True,
    ) -> CodeArray:
        """Codes of ``value`` against ``threshold``; within ``eps`` of it (eps > 0): uncertain.

        ``keep=False`` returns the codes without adding a column (for comparisons
        whose relevance depends on the state).
        """
        below = value < threshold - eps
        above = value > threshold + eps
        codes = np.full(self.n, _EQUAL, dtype=np.uint8)
        codes[below] = _BELOW
        codes[above] = _ABOVE
        codes[~known] = _UNKNOWN
        if not (np.isscalar(eps) and eps == 0):
            middle = known & ~below & ~above & (np.asarray(eps) > 0)
            self.uncertain |= middle
        if keep:
            self.columns.append(codes)
        return codes

    def array(self) -> CodeArray:
        if not self.columns:
            return np.zeros((self.n, 0), dtype=np.uint8)
        return np.stack(self.columns, axis=1)


def _status(readings: Readings) -> npt.NDArray[np.uint8]:
    """0 unknown, 1 false, 2 true (binary points)."""
    codes = np.zeros(readings.ok.size, dtype=np.uint8)
    codes[readings.ok & (readings.value == 0.0)] = 1
    codes[readings.ok & (readings.value == 1.0)] = 2
    return codes


def _missing(n: int) -> Readings:
    return Readings(np.zeros(n, dtype=np.bool_), np.full(n, np.nan))


def _indoor(
    config: SiteConfig, zone: str, readings: Mapping[str, Readings], n: int
) -> tuple[FloatArray, BoolArray, FloatArray]:
    """The aggregated indoor temperature, where it is known, and its tolerance per evaluation."""
    spec = config.zones[zone].temperature
    sensors = spec.sensors
    values = np.stack([readings.get(s, _missing(n)).value for s in sensors])
    fresh = np.stack([readings.get(s, _missing(n)).ok for s in sensors])
    known: BoolArray = np.asarray(fresh.any(axis=0), dtype=np.bool_)
    count = fresh.sum(axis=0)
    total = np.where(fresh, values, 0.0).sum(axis=0)
    mean = np.divide(total, count, out=np.full(n, np.nan), where=count > 0)
    zero = np.zeros(n)
    if spec.aggregate == "max" or len(sensors) == 1:
        return np.asarray(np.fmax.reduce(values, axis=0), dtype=np.float64), known, zero
    if spec.aggregate == "min":
        return np.asarray(np.fmin.reduce(values, axis=0), dtype=np.float64), known, zero
    eps: FloatArray = _MEAN_EPS * (1.0 + np.abs(np.nan_to_num(mean)))
    if spec.aggregate == "mean":
        return np.asarray(mean, dtype=np.float64), known, eps
    named = sensors.index(spec.aggregate)
    own = fresh[named]
    others = np.delete(np.arange(len(sensors)), named)
    other_count = fresh[others].sum(axis=0)
    other_total = np.where(fresh[others], values[others], 0.0).sum(axis=0)
    other_mean = np.divide(other_total, other_count, out=np.full(n, np.nan), where=other_count > 0)
    value = np.where(own, values[named], other_mean)
    return (
        np.asarray(value, dtype=np.float64),
        known,
        np.asarray(np.where(own, 0.0, eps), dtype=np.float64),
    )


def _dew_point(
    config: SiteConfig, readings: Mapping[str, Readings], temp_out: Readings, n: int
) -> tuple[FloatArray, BoolArray, FloatArray]:
    """The outdoor dew point as the comfort layer gets it: measured, or from humidity."""
    outdoor = config.outdoor
    measured = readings.get(outdoor.dew_point, _missing(n)) if outdoor.dew_point else _missing(n)
    humidity = readings.get(outdoor.humidity, _missing(n)) if outdoor.humidity else _missing(n)
    value = np.where(measured.ok, measured.value, np.nan)
    eps = np.zeros(n)
    derive = ~measured.ok & humidity.ok & temp_out.ok
    if derive.any():
        # Logged values repeat (sensor resolution): solve each pair once.
        pairs = temp_out.value[derive] + 1j * humidity.value[derive]
        unique, back = np.unique(pairs, return_inverse=True)
        rh = np.minimum(np.maximum(unique.imag, 1.0), 100.0) / 100.0
        derived = psychro.dew_point_from_relative_humidity(np.ascontiguousarray(unique.real), rh)
        value[derive] = np.asarray(derived, dtype=np.float64)[back.reshape(-1)]
        eps[derive] = _DEW_EPS
    return value, measured.ok | derive, eps


def _free_cooling_fraction(
    rules: RuleSet, t_in: FloatArray, known: BoolArray
) -> tuple[FloatArray, BoolArray]:
    """:func:`ventsup.core.layers.comfort.free_cooling_fraction`, vectorised (not rounded)."""
    fc = rules.free_cooling
    full = t_in >= fc.full_open_at
    low = (t_in <= fc.open_above) | (fc.full_open_at <= fc.open_above)
    span = fc.full_open_at - fc.open_above
    share = (t_in - fc.open_above) / (span if span > 0 else 1.0)
    value = np.where(
        full, 1.0, np.where(low, fc.min_opening, fc.min_opening + (1.0 - fc.min_opening) * share)
    )
    value = np.where(known, value, np.nan)
    return value, known & (full | low)


def outdoor_dew_point(
    config: SiteConfig, readings: Mapping[str, Readings], n: int
) -> tuple[FloatArray, BoolArray, FloatArray]:
    """The outdoor dew point [°C] as :func:`zone_features` gets it, where it is known, and
    its tolerance, at ``n`` evaluations (measured, or from temperature and humidity).

    It depends on outdoor points only, so a caller that asks for the features of
    many stretches of the same evaluations (the simulator) can compute it once
    and pass slices of it to :func:`zone_features`.
    """
    name = config.outdoor.temperature
    temp_out = readings.get(name, _missing(n)) if name else _missing(n)
    return _dew_point(config, readings, temp_out, n)


def zone_features(
    config: SiteConfig,
    zone: str,
    readings: Mapping[str, Readings],
    n: int,
    *,
    dew_point: tuple[FloatArray, BoolArray, FloatArray] | None = None,
) -> ZoneFeatures:
    """Every state-free comparison of the core on zone ``zone``'s inputs, at ``n`` evaluations.

    ``readings`` maps each point the zone reads to its readings at the
    evaluation times (points absent from it are never received). The columns
    mirror the layers: alarms; rain; wind speed against each limit and reopen
    level; each opening windward or not; the cold limit and the comfort
    layer's outdoor limits; the indoor temperature against each threshold;
    indoor minus outdoor against each minimum difference; the dew point
    against each maximum; CO2 against its limits; the heating status;
    feedback known; the free-cooling fraction against every position and cap
    it can meet (0, 1, night flush, CO2, wind cap, rain and security positions).
    ``dew_point``, when given, is :func:`outdoor_dew_point` of the same readings.
    """
    rules = config.rules_for(zone)
    spec = config.zones[zone]
    outdoor = config.outdoor
    codes = _Codes(n)

    def get(name: str | None) -> Readings:
        return _missing(n) if name is None else readings.get(name, _missing(n))

    for alarm in spec.smoke_alarms:
        codes.category(_status(get(alarm)))
    rain = get(outdoor.rain)
    codes.category(_status(rain))

    speed = get(outdoor.wind_speed)
    speed_value = np.where(speed.ok, speed.value, np.inf)
    everywhere = np.ones(n, dtype=np.bool_)
    wind = rules.wind
    # Which of these the core reads depends on the latches (see state_classes).
    conditional: dict[tuple[str, str], CodeArray] = {}
    for key, limit in _wind_thresholds(wind).items():
        conditional[("limit", key)] = codes.compare(speed_value, everywhere, limit, 0.0, keep=False)
        conditional[("reopen", key)] = codes.compare(
            speed_value, everywhere, wind.reopen_ratio * limit, 0.0, keep=False
        )
    codes.category(speed.ok.astype(np.uint8))
    direction = get(outdoor.wind_direction)
    for name, opening in spec.openings.items():
        diff = np.abs(opening.facing - direction.value) % 360.0
        angle = np.minimum(diff, 360.0 - diff)
        conditional[("windward", name)] = codes.compare(
            angle, direction.ok, wind.windward_angle, 0.0, keep=False
        )

    temp_out = get(outdoor.temperature)
    fc, nf, co2r = rules.free_cooling, rules.night_flush, rules.co2
    codes.compare(temp_out.value, temp_out.ok, rules.cold.outdoor_below, 0.0)

    def block(role: str, name: str, found: CodeArray) -> None:
        # Read by the comfort layer only while its latch for ``role`` is on (see
        # state_classes): the outdoor air's permission to cool, ventilate or flush.
        conditional[(f"block_{role}", name)] = found

    for role, name, threshold in (
        ("cooling", "outdoor_min", fc.outdoor_min),
        ("cooling", "outdoor_max", fc.outdoor_max),
        ("flush", "outdoor_min", nf.outdoor_min),
        ("air", "outdoor_min", co2r.outdoor_min),
    ):
        block(role, name, codes.compare(temp_out.value, temp_out.ok, threshold, 0.0, keep=False))

    t_in, t_in_known, t_in_eps = _indoor(config, zone, readings, n)
    # The hysteresis pairs: which one the core reads depends on its latch.
    for key, threshold in (
        ("cooling_on", fc.open_above),
        ("cooling_off", fc.close_below),
        ("flush_on", nf.start_above),
        ("flush_off", nf.stop_below),
    ):
        conditional[(key, "")] = codes.compare(t_in, t_in_known, threshold, t_in_eps, keep=False)
    codes.compare(t_in, t_in_known, fc.full_open_at, t_in_eps)
    difference = t_in - temp_out.value
    both = t_in_known & temp_out.ok
    for role, threshold in (("cooling", fc.min_difference), ("flush", nf.min_difference)):
        block(
            role, "min_difference", codes.compare(difference, both, threshold, t_in_eps, keep=False)
        )

    dew, dew_known, dew_eps = (
        _dew_point(config, readings, temp_out, n) if dew_point is None else dew_point
    )
    block("cooling_or_flush", "dew_point_known", dew_known.astype(np.uint8))
    for role, maximum in (("cooling", fc.dew_point_max), ("flush", nf.dew_point_max)):
        if maximum is not None:
            block(
                role, "dew_point_max", codes.compare(dew, dew_known, maximum, dew_eps, keep=False)
            )

    co2 = get(spec.co2)
    conditional[("air_on", "")] = codes.compare(co2.value, co2.ok, co2r.open_above, 0.0, keep=False)
    conditional[("air_off", "")] = codes.compare(
        co2.value, co2.ok, co2r.close_below, 0.0, keep=False
    )
    if spec.heating is not None:
        block("any", "heating", _status(get(spec.heating)))

    feedback: dict[str, Readings] = {}
    for name, opening in spec.openings.items():
        if opening.feedback is not None:
            feedback[name] = get(opening.feedback)
            codes.category(feedback[name].ok.astype(np.uint8))

    fraction, fraction_exact = _free_cooling_fraction(rules, t_in, t_in_known)
    fraction_eps = np.where(fraction_exact, 0.0, _FRACTION_EPS)
    positions = {0.0, 1.0, nf.position, co2r.position, wind.cap_position}
    for opening in spec.openings.values():
        positions |= {opening.rain_position, opening.secure_position}
        if not isinstance(opening.fire_position, str):
            positions.add(opening.fire_position)
    for position in sorted(positions):
        codes.compare(fraction, t_in_known, position, fraction_eps)

    rain_wet = ~rain.ok | (rain.value == 1.0)
    return ZoneFeatures(
        codes.array(),
        codes.uncertain,
        fraction,
        fraction_exact,
        rain_wet,
        speed_value,
        feedback,
        np.where(t_in_known, t_in, np.nan),
        np.where(dew_known, dew, np.nan),
        conditional,
    )


def _stays(want: float, current: float, min_step: float) -> bool:
    """Actuator care keeps ``current`` for a comfort wish ``want``: equal, or a small step."""
    return want == current or (round(abs(want - current), 9) < min_step and want not in (0.0, 1.0))


def state_classes(
    config: SiteConfig,
    zone: str,
    state: ZoneState,
    features: ZoneFeatures,
    lo: int,
    hi: int,
) -> tuple[FloatArray, BoolArray]:
    """The comparisons of inputs against ``state`` at evaluations ``lo`` to ``hi`` (excluded).

    Per opening with a target: whether actuator care would keep the target
    for the free-cooling fraction (the minimum step); per opening with
    feedback: whether the feedback is off its command by more than the
    tolerance, or, when released, the feedback itself (it gives the open
    area); and the wind comparisons the latches make relevant. Returns the
    class columns and the evaluations that cannot be told.
    """
    rules = config.rules_for(zone)
    care, free_cooling = rules.actuator, rules.free_cooling
    m = hi - lo
    columns: list[FloatArray] = []
    uncertain = np.zeros(m, dtype=np.bool_)
    fraction = features.fraction[lo:hi]
    exact = features.fraction_exact[lo:hi]
    known = ~np.isnan(fraction)
    for name, opening in config.zones[zone].openings.items():
        current = state.opening(name).target
        if current is not None:
            distance = np.abs(fraction - current)
            column = np.full(m, float(_UNKNOWN))
            column[known & (distance < care.min_step - _FRACTION_EPS)] = _BELOW
            column[known & (distance > care.min_step + _FRACTION_EPS)] = _ABOVE
            for value in (1.0, free_cooling.min_opening):  # the values of the exact branches
                at = exact & (fraction == value)
                column[at] = _BELOW if _stays(value, current, care.min_step) else _ABOVE
            column[known & (fraction == current)] = _BELOW
            unsure = known & (column == _UNKNOWN)
            column[unsure] = _EQUAL
            uncertain |= unsure
            columns.append(column)
        if opening.feedback is None:
            continue
        readings = features.feedback[name]
        ok, position = readings.ok[lo:hi], readings.value[lo:hi]
        if current is None:
            columns.append(np.where(ok, position, _RELEASED_UNKNOWN))
        else:
            off = np.abs(position - current) > care.feedback_tolerance
            columns.append(np.where(ok, np.where(off, float(_ABOVE), float(_BELOW)), _UNKNOWN))
    possible: dict[str, BoolArray] | None = None
    for key in _conditional_read(config, zone, state, features.conditional):
        column = features.conditional[key][lo:hi].astype(np.float64)
        if key[0].startswith("block_"):
            if possible is None:
                possible = _latches_possible(config, zone, state, features, lo, hi)
            column = np.where(possible[key[0].removeprefix("block_")], column, _NOT_READ)
        columns.append(column)
    array = np.stack(columns, axis=1) if columns else np.zeros((m, 0))
    return array, uncertain


_NOT_READ = 9.0  # the class of a comparison the core does not read at that evaluation


def _latches_possible(
    config: SiteConfig, zone: str, state: ZoneState, features: ZoneFeatures, lo: int, hi: int
) -> dict[str, BoolArray]:
    """Where each comfort latch may be on at evaluations ``lo`` to ``hi`` (a superset).

    The comfort layer sets ``cooling = t_in >= open_above or (latch and t_in >=
    close_below)`` (when allowed), ``flush`` likewise with start_above and
    stop_below (``>``), and ``air`` with CO2; schedule and occupancy are left
    out, so that this is never narrower than the core.
    """
    rules = config.rules_for(zone)
    codes = features.conditional

    def at_least(key: str, strict: bool = False) -> BoolArray:
        found = codes[(key, "")][lo:hi]
        above: BoolArray = np.asarray(found == _ABOVE, dtype=np.bool_)
        return above if strict else above | (found == _EQUAL)

    m = hi - lo
    never = np.zeros(m, dtype=np.bool_)
    cooling = (
        at_least("cooling_on") | (state.cooling & at_least("cooling_off"))
        if rules.free_cooling.enabled
        else never
    )
    flush = (
        at_least("flush_on") | (state.flush & at_least("flush_off", strict=True))
        if rules.night_flush.enabled
        else never
    )
    air = (
        at_least("air_on") | (state.air_quality & at_least("air_off", strict=True))
        if rules.co2.enabled
        else never
    )
    return {
        "cooling": cooling,
        "flush": flush,
        "air": air,
        "cooling_or_flush": cooling | flush,
        "any": cooling | flush | air,
    }


def state_class_key(
    config: SiteConfig, zone: str, state: ZoneState, features: ZoneFeatures
) -> tuple[object, ...]:
    """What :func:`state_classes` depends on in ``state``: the targets and which
    conditional comparisons are read. Equal keys give equal classes."""
    targets = tuple(state.opening(name).target for name in config.zones[zone].openings)
    read = tuple(_conditional_read(config, zone, state, features.conditional))
    return (targets, read, state.cooling, state.flush, state.air_quality)


def _conditional_read(
    config: SiteConfig,
    zone: str,
    state: ZoneState,
    conditional: Mapping[tuple[str, str], CodeArray],
) -> list[tuple[str, str]]:
    """The comparisons of :attr:`ZoneFeatures.conditional` the core reads in ``state``.

    All of them before the first evaluation. Otherwise:

    - :func:`ventsup.core.layers.protection._latch` reads the limit of a latch
      that is off and the reopen level of one that is on;
    - an opening's windward side matters only when a windward latch and its
      plain twin differ (one on, the other off);
    - the comfort layer's latches with hysteresis (``x >= on or (latch and
      x > off)`` with ``off`` below ``on``) read only ``on`` while the latch
      is off and only ``off`` while it is on: free cooling (open_above,
      close_below), night flush (start_above, stop_below) and CO2 (open_above,
      close_below). The free-cooling fraction's own comparisons are in the
      codes and state classes;
    - the outdoor air's permission to cool, flush or ventilate (outdoor
      limits, minimum difference, dew point, heating status) is read only
      while the latch it serves may be on; these are always returned and
      masked per evaluation in :func:`state_classes`.
    """
    if not state.wind:
        return list(conditional)
    rules = config.rules_for(zone)
    fc, nf, co2 = rules.free_cooling, rules.night_flush, rules.co2
    latches = {
        "cooling": (state.cooling, fc.close_below < fc.open_above),
        "flush": (state.flush, nf.stop_below < nf.start_above),
        "air": (state.air_quality, co2.close_below < co2.open_above),
    }
    sides = any(
        state.wind.get(f"windward_{k}", WindLatch()).active != state.wind.get(k, WindLatch()).active
        for k in ("cap", "close")
    )
    read = []
    for kind, key in conditional:
        if kind.startswith("block_"):
            wanted = True  # masked where the latch is off (state_classes)
        elif kind == "windward":
            wanted = sides
        elif kind in ("limit", "reopen"):
            wanted = (kind == "reopen") == state.wind.get(key, WindLatch()).active
        else:
            name, which = kind.rsplit("_", 1)
            on, ordered = latches[name]
            wanted = not ordered or (which == "off") == on
        if wanted:
            read.append((kind, key))
    return read
