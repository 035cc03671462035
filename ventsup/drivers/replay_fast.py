"""The replay's fast path: the same runs as the per-step core, calling it only where needed.

For each zone, the evaluation times (ticks and urgent evaluations, as
:func:`ventsup.drivers.replay.evaluation_plan` makes them, or those recorded
in a ledger) are walked in order. The samples are aligned to those times
vectorised (sample-and-hold with staleness, as :func:`ventsup.core.inputs.read_point`;
for a recording, each evaluation holds the samples the daemon had handled
before it, :attr:`ZonePlan.held`), and :func:`ventsup.core.horizon.zone_features` gives the core's comparisons on
the inputs at every evaluation. Then, at each evaluation that must be looked at:

1. If the state (:func:`~ventsup.core.horizon.state_signature`), the feature
   codes, the state classes, the schedule membership and the timer flags
   (:func:`~ventsup.core.horizon.timers`) are those of an earlier *stationary*
   evaluation of the zone whose outcome is the current run's, the evaluation
   is counted into the run and the state advanced, without the core: the core
   would take the same branches.
2. Otherwise the core decides (:func:`ventsup.core.decide.decide`) with the
   zone's inputs and state.
3. After a stationary evaluation (it changed only bookkeeping,
   :func:`~ventsup.core.horizon.stationary`), the next evaluations repeat its
   outcome until the first one where a feature code changes or cannot be told,
   a state class changes (:func:`~ventsup.core.horizon.state_classes`: also the
   comparisons the latches make relevant), a timer runs out
   (:func:`~ventsup.core.horizon.next_timer`), a schedule edge passes, or an
   operator request arrives. Those evaluations are counted into the run and
   the state is advanced over them (:func:`~ventsup.core.horizon.advance`).
4. After any other evaluation, the next one is looked at.

The result is the list of :class:`~ventsup.drivers.replay.Run` that the
per-step reference gives (``tests/drivers/test_replay_fast.py`` checks this on
random logs). Zones are independent, so ``jobs`` spreads them over processes;
the result does not depend on ``jobs``.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass, field

import numpy as np
import numpy.typing as npt

from ventsup.config.model import SiteConfig
from ventsup.core.decide import decide, initial_state
from ventsup.core.horizon import (
    MARGIN,
    Readings,
    ZoneFeatures,
    advance_over,
    held_readings,
    next_timer,
    schedule_edges,
    schedule_membership,
    state_class_key,
    state_classes,
    state_signature,
    stationary,
    timers,
    zone_features,
)
from ventsup.core.inputs import Held, Sample, zone_inputs, zone_points
from ventsup.core.state import OverrideRequest, ZoneState
from ventsup.core.urgency import wind_levels
from ventsup.drivers.replay import TICK, Evaluation, Run, RunBuilder, run_key
from ventsup.edges.logs import PointLog, PointSeries

__all__ = [
    "Aligned",
    "Indoor",
    "ZonePlan",
    "ZoneResult",
    "align",
    "indoor_figures",
    "plan_from_evaluations",
    "plan_zones",
    "replay_fast",
    "replay_zone",
    "zone_points",
]

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.int64]
Progress = Callable[[int], None]


@dataclass(frozen=True, eq=False)
class ZonePlan:
    """A zone's evaluations: their times (in order), the triggers that are not ``tick``
    (by index), operator requests (by index), and, for a recording, how many of the
    log's samples in log order each had seen (``held``; None: those stamped at or
    before its time, see :class:`~ventsup.drivers.replay.Evaluation`)."""

    zone: str
    times: FloatArray
    triggers: Mapping[int, str] = field(default_factory=dict)
    requests: Mapping[int, OverrideRequest] = field(default_factory=dict)
    held: IntArray | None = None

    def __post_init__(self) -> None:
        # Copies (plain dicts, so that a plan can be sent to worker processes).
        object.__setattr__(self, "triggers", dict(self.triggers))
        object.__setattr__(self, "requests", dict(self.requests))

    def __len__(self) -> int:
        return int(self.times.size)

    def trigger(self, index: int) -> str:
        """What triggered evaluation ``index``."""
        return self.triggers.get(index, TICK)

    def evaluations(self) -> list[Evaluation]:
        """The plan as :class:`~ventsup.drivers.replay.Evaluation` records."""
        held = [None] * len(self) if self.held is None else self.held.tolist()
        return [
            Evaluation(float(t), self.zone, self.trigger(i), self.requests.get(i), held[i])
            for i, t in enumerate(self.times.tolist())
        ]


@dataclass(frozen=True)
class Indoor:
    """A zone's indoor temperature over the replay, as the core reads it at each evaluation.

    Each evaluation's value holds until the zone's next evaluation (the last
    until the end). ``above_hours`` is the time above the rule set's
    ``comfort.high`` [h], ``known_hours`` the time the value was known [h],
    ``peak`` the highest value [°C] (None if never known).
    """

    above_hours: float
    known_hours: float
    peak: float | None


@dataclass(frozen=True)
class ZoneResult:
    """One zone's runs, how many evaluations they cover, how often the core was
    called, and its indoor temperature figures."""

    zone: str
    runs: list[Run]
    evaluations: int
    decisions: int
    indoor: Indoor = Indoor(0.0, 0.0, None)


# --------------------------------------------------------------------------- plans


def _ticks(start: float, end: float, step: float) -> FloatArray:
    if not step > 0:
        raise ValueError(f"step must be positive, got {step} s")
    count = max(0, math.ceil((end - start) / step) + 1)
    ticks = start + np.arange(count, dtype=np.float64) * step
    return ticks[ticks < end]


def _previous_known(series: PointSeries, stale_after: float) -> npt.NDArray[np.bool_]:
    """For each sample: was the point's previous sample still fresh at its time?"""
    known = np.zeros(len(series), dtype=np.bool_)
    if len(series) > 1:
        known[1:] = series.t[1:] - series.t[:-1] <= stale_after
    return known


def _wind_levels(config: SiteConfig, zone: str) -> FloatArray:
    return np.array(wind_levels(config, zone), dtype=np.float64)


def _windward_key(config: SiteConfig, zone: str, direction: FloatArray) -> IntArray:
    """The zone's set of windward openings per direction, as a bit mask."""
    angle = config.rules_for(zone).wind.windward_angle
    key = np.zeros(direction.size, dtype=np.int64)
    for bit, opening in enumerate(config.zones[zone].openings.values()):
        diff = np.abs(opening.facing - direction) % 360.0
        within = np.minimum(diff, 360.0 - diff) <= angle
        key |= within.astype(np.int64) << bit
    return key


def _urgent_masks(
    config: SiteConfig,
    zone: str,
    log: PointLog,
    cache: dict[tuple[object, ...], npt.NDArray[np.bool_]],
) -> list[tuple[str, npt.NDArray[np.bool_]]]:
    """Per point, which samples make ``zone`` urgent (before the time window is applied).

    Vectorised :func:`ventsup.core.urgency.urgent_zones`, in its order of
    rules; zones with the same limits or openings share the work through ``cache``.
    """
    outdoor = config.outdoor
    spec = config.zones[zone]
    found: list[tuple[str, npt.NDArray[np.bool_]]] = []
    for name, series in log.series.items():
        if not len(series):
            continue
        if name in spec.smoke_alarms or name == outdoor.rain:
            key: tuple[object, ...] = ("binary", name)
        elif name == outdoor.wind_speed:
            key = ("speed", name, tuple(_wind_levels(config, zone).tolist()))
        elif name == outdoor.wind_direction:
            wind = config.rules_for(zone).wind
            facings = tuple(o.facing for o in spec.openings.values())
            key = ("direction", name, wind.windward_angle, facings)
        else:
            continue
        if key not in cache:
            cache[key] = _urgent_mask(config, zone, series, key[0])
        found.append((name, cache[key]))
    return found


def _urgent_mask(
    config: SiteConfig, zone: str, series: PointSeries, kind: object
) -> npt.NDArray[np.bool_]:
    new = series.value
    old_known = _previous_known(series, config.points[series.point].stale_after)
    changed = np.ones(new.size, dtype=np.bool_)
    changed[1:] = new[1:] != new[:-1]
    if kind == "binary":
        return ~old_known | changed
    if kind == "speed":
        key = np.searchsorted(_wind_levels(config, zone), new, side="left")
    else:
        key = _windward_key(config, zone, new)
    moved = np.ones(new.size, dtype=np.bool_)
    moved[1:] = key[1:] != key[:-1]
    return ~old_known | (changed & moved)


def plan_zones(
    config: SiteConfig,
    log: PointLog,
    start: float,
    end: float,
    step: float = 60.0,
    *,
    urgent: bool = True,
) -> dict[str, ZonePlan]:
    """Each zone's evaluations, vectorised: the same as :func:`~ventsup.drivers.replay.evaluation_plan`."""
    ticks = _ticks(start, end, step)
    plans: dict[str, ZonePlan] = {}
    cache: dict[tuple[object, ...], npt.NDArray[np.bool_]] = {}
    for zone in config.zones:
        found = []
        for name, mask in _urgent_masks(config, zone, log, cache) if urgent else []:
            series = log.series[name]
            mask = mask & (series.t > start) & (series.t < end)
            if mask.any():
                found.append((series.t[mask], series.order[mask], name))
        if not found:
            plans[zone] = ZonePlan(zone, ticks)
            continue
        times = np.concatenate([f[0] for f in found])
        orders = np.concatenate([f[1] for f in found])
        names = np.concatenate([np.full(f[0].size, i, dtype=np.int64) for i, f in enumerate(found)])
        sort = np.lexsort((orders, times))
        times, names = times[sort], names[sort]
        first = np.ones(times.size, dtype=np.bool_)
        first[1:] = times[1:] != times[:-1]
        urgent_times, urgent_names = times[first], names[first]
        all_times = np.concatenate([urgent_times, ticks])
        kind = np.concatenate(
            [np.zeros(urgent_times.size, dtype=np.int64), np.ones(ticks.size, dtype=np.int64)]
        )
        order = np.lexsort((kind, all_times))
        position = np.empty(order.size, dtype=np.int64)
        position[order] = np.arange(order.size)
        triggers = {
            int(position[i]): f"input:{found[int(urgent_names[i])][2]}"
            for i in range(urgent_times.size)
        }
        plans[zone] = ZonePlan(zone, all_times[order], triggers)
    return plans


def plan_from_evaluations(
    config: SiteConfig, evaluations: Iterable[Evaluation]
) -> dict[str, ZonePlan]:
    """Plans from explicit evaluations (a ledger's recorded times and triggers), in order."""
    times: dict[str, list[float]] = {zone: [] for zone in config.zones}
    triggers: dict[str, dict[int, str]] = {zone: {} for zone in config.zones}
    requests: dict[str, dict[int, OverrideRequest]] = {zone: {} for zone in config.zones}
    held: dict[str, list[int]] = {zone: [] for zone in config.zones}
    counted: bool | None = None
    for evaluation in evaluations:
        zone = evaluation.zone
        index = len(times[zone])
        if index and evaluation.t < times[zone][-1]:
            raise ValueError(f"evaluations of zone {zone!r} go back in time at t={evaluation.t!r}")
        if counted is None:
            counted = evaluation.held is not None
        elif counted != (evaluation.held is not None):
            raise ValueError(
                f"the evaluation of zone {zone!r} at t={evaluation.t!r} "
                f"{'lacks' if counted else 'has'} a count of held samples, unlike the first; "
                "give one for every evaluation or for none"
            )
        times[zone].append(evaluation.t)
        if evaluation.trigger != TICK:
            triggers[zone][index] = evaluation.trigger
        if evaluation.request is not None:
            requests[zone][index] = evaluation.request
        if evaluation.held is not None:
            held[zone].append(evaluation.held)
    return {
        zone: ZonePlan(
            zone,
            np.array(times[zone], dtype=np.float64),
            triggers[zone],
            requests[zone],
            np.array(held[zone], dtype=np.int64) if counted else None,
        )
        for zone in config.zones
    }


# --------------------------------------------------------------------------- one zone


@dataclass
class Aligned:
    """Sample-and-hold at each evaluation, per point: the series, the index of the held
    sample (-1: none yet) and the readings (fresh or not, and the value)."""

    series: dict[str, PointSeries]
    index: dict[str, IntArray]
    readings: dict[str, Readings]


def align(
    config: SiteConfig,
    zone: str,
    log: PointLog,
    times: FloatArray,
    held: IntArray | None = None,
) -> Aligned:
    """The samples of the zone's points held at each of ``times`` (as :func:`ventsup.core.inputs.read_point`).

    With ``held`` (a recording's counts, see :class:`ZonePlan`), evaluation
    ``k`` holds the samples whose place in the log (``order``) is below
    ``held[k]``, as :func:`~ventsup.core.inputs.hold` would in log order:
    of each point, the latest in time (the later in the log at one time).
    """
    series: dict[str, PointSeries] = {}
    index: dict[str, IntArray] = {}
    readings: dict[str, Readings] = {}
    for name in zone_points(config, zone):
        found = log.series.get(name)
        if found is None or not len(found):
            continue
        if held is None:
            at = np.searchsorted(found.t, times, side="right").astype(np.int64) - 1
        else:
            at = _held_at(found.order, held)
        series[name], index[name] = found, at
        readings[name] = held_readings(
            times, found.t, found.value, at, config.points[name].stale_after
        )
    return Aligned(series, index, readings)


def _held_at(order: IntArray, held: IntArray) -> IntArray:
    """Per count in ``held``: the row held among the rows with ``order`` below it, -1 if none.

    Rows are sorted by (time, order), so the one :func:`~ventsup.core.inputs.hold`
    keeps from any set of rows is the one with the highest row number.
    """
    by_order = np.argsort(order, kind="stable")
    best = np.maximum.accumulate(by_order)  # the highest row among the first j in log order
    seen = np.searchsorted(order[by_order], held, side="left")
    return np.where(seen > 0, best[np.maximum(seen - 1, 0)], -1).astype(np.int64)


def _indoor(
    config: SiteConfig, zone: str, times: FloatArray, end: float, t_in: FloatArray
) -> Indoor:
    if not times.size:
        return Indoor(0.0, 0.0, None)
    held = np.diff(np.append(times, max(end, float(times[-1]))))
    known = ~np.isnan(t_in)
    high = config.rules_for(zone).comfort.high
    above = known & (np.nan_to_num(t_in, nan=-np.inf) > high)
    peak = float(np.max(t_in[known])) if known.any() else None
    return Indoor(float(held[above].sum()) / 3600.0, float(held[known].sum()) / 3600.0, peak)


def indoor_figures(
    config: SiteConfig, zone: str, log: PointLog, plan: ZonePlan, end: float
) -> Indoor:
    """The zone's :class:`Indoor` figures over ``plan`` (for a replay by the reference)."""
    aligned = align(config, zone, log, plan.times, plan.held)
    features = zone_features(config, zone, aligned.readings, len(plan))
    return _indoor(config, zone, plan.times, end, features.temp_indoor)


def _held(aligned: Aligned, k: int) -> Held:
    samples: dict[str, Sample] = {}
    for name, at in aligned.index.items():
        i = int(at[k])
        if i >= 0:
            samples[name] = aligned.series[name].sample(i)
    return Held(samples)


def _forced(
    config: SiteConfig,
    zone: str,
    plan: ZonePlan,
    features: ZoneFeatures,
    edges: Sequence[float],
) -> IntArray:
    """The evaluations the core must decide whatever the state: a feature changes or is
    uncertain, an operator request, a schedule edge (and the first evaluation)."""
    n = len(plan)
    change = np.zeros(n, dtype=np.bool_)
    if n == 0:
        return np.zeros(0, dtype=np.int64)
    change[0] = True
    codes = features.codes
    if n > 1 and codes.shape[1]:
        change[1:] = np.any(codes[1:] != codes[:-1], axis=1)
    change |= features.uncertain
    change[1:] |= features.uncertain[:-1]
    for index in plan.requests:
        change[index] = True
    if len(edges):
        at = np.searchsorted(plan.times, np.asarray(edges) - MARGIN, side="left")
        change[at[at < n]] = True
    return np.flatnonzero(change).astype(np.int64)


_FIRST_CHUNK = 64
_LAST_CHUNK = 512


class _Epoch:
    """What the core's branches read at each evaluation while the zone is in one state.

    For a state (more exactly, a :func:`~ventsup.core.horizon.state_class_key`)
    the feature codes and the state classes (:func:`~ventsup.core.horizon.state_classes`)
    of each evaluation, as one byte string per evaluation ("row"), computed in
    growing chunks as the walk needs them, with where the row changes. States
    with the same class key share one (see :func:`_epoch`).
    """

    def __init__(self, config: SiteConfig, zone: str, state: ZoneState, features: ZoneFeatures):
        self.config, self.zone, self.state, self.features = config, zone, state, features
        self.lo = self.hi = 0
        self.size = _FIRST_CHUNK
        self.rows = np.zeros((0, 0), dtype=np.uint8)
        self.unsure = np.zeros(0, dtype=np.bool_)
        self.breaks = np.zeros(0, dtype=np.int64)

    def _cover(self, j: int) -> None:
        if self.lo <= j < self.hi:
            return
        features = self.features
        hi = min(len(features.fraction), j + self.size)
        self.size = min(self.size * 2, _LAST_CHUNK)
        classes, unsure = state_classes(self.config, self.zone, self.state, features, j, hi)
        m = hi - j
        rows = np.concatenate(
            [features.codes[j:hi], np.ascontiguousarray(classes).view(np.uint8).reshape(m, -1)],
            axis=1,
        )
        unsure = unsure | features.uncertain[j:hi]
        # Where a row differs from the one before it, or cannot be told (then the next too).
        change = unsure.copy()
        if m > 1:
            change[1:] |= np.any(rows[1:] != rows[:-1], axis=1) | unsure[:-1]
        change[0] = True
        self.rows, self.unsure, self.lo, self.hi = rows, unsure, j, hi
        self.breaks = np.flatnonzero(change).astype(np.int64) + j

    def row(self, j: int) -> bytes | None:
        """What the branches read at evaluation ``j``, None when it cannot be told."""
        self._cover(j)
        if self.unsure[j - self.lo]:
            return None
        return bytes(self.rows[j - self.lo].tobytes())

    def first_other(self, k: int, limit: int, allowed: set[bytes]) -> int:
        """The first evaluation in (k, limit) whose row is neither k's nor in ``allowed``."""
        base = self.row(k)
        if base is None:
            return k + 1
        j = k
        while True:
            position = int(np.searchsorted(self.breaks, j, side="right"))
            for at in self.breaks[position:].tolist():
                if at >= limit:
                    return limit
                row = self.row(at)
                if row is None or (row != base and row not in allowed):
                    return int(at)
            if self.hi >= limit:
                return limit
            self._cover(self.hi)  # the next chunk, which starts with a break
            j = self.lo - 1


def _epoch(
    config: SiteConfig,
    zone: str,
    state: ZoneState,
    features: ZoneFeatures,
    known: dict[tuple[object, ...], _Epoch],
) -> _Epoch:
    key = state_class_key(config, zone, state, features)
    found = known.get(key)
    if found is None:
        found = known[key] = _Epoch(config, zone, state, features)
    return found


class _Schedule:
    """Schedule membership at an evaluation time, computed once per stretch between edges."""

    def __init__(self, config: SiteConfig, zone: str, edges: Sequence[float]) -> None:
        self.rules = config.rules_for(zone)
        self.time_zone = config.site.time_zone
        self.edges = np.asarray(edges, dtype=np.float64)
        self.known: dict[int, tuple[bool, ...]] = {}

    def at(self, t: float) -> tuple[bool, ...]:
        stretch = int(np.searchsorted(self.edges, t, side="right"))
        near = (stretch < self.edges.size and self.edges[stretch] - t < MARGIN) or (
            stretch > 0 and t - self.edges[stretch - 1] < MARGIN
        )
        if near:  # the core rounds the time to the microsecond: ask it as the core would
            return schedule_membership(self.rules, self.time_zone, t)
        if stretch not in self.known:
            self.known[stretch] = schedule_membership(self.rules, self.time_zone, t)
        return self.known[stretch]


def replay_zone(
    config: SiteConfig,
    zone: str,
    log: PointLog,
    plan: ZonePlan,
    end: float,
    progress: Progress | None = None,
    *,
    edges: Sequence[float] | None = None,
) -> ZoneResult:
    """The fast path for one zone: its runs (see the module notes).

    ``end`` closes the last run [s]. ``progress`` is told how many evaluations
    were covered since its last call. ``edges`` are the zone's schedule edges
    (computed when not given).
    """
    times = plan.times
    n = len(plan)
    builder = RunBuilder(zone)
    if n == 0:
        return ZoneResult(zone, builder.finish(end), 0, 0)
    if edges is None:
        edges = schedule_edges(
            config.rules_for(zone),
            config.site.time_zone,
            float(times[0]) - 1.0,
            float(times[-1]) + 1.0,
        )
    aligned = align(config, zone, log, times, plan.held)
    features = zone_features(config, zone, aligned.readings, n)
    forced = _forced(config, zone, plan, features, edges)
    schedule = _Schedule(config, zone, edges)
    state = initial_state()
    epochs: dict[tuple[object, ...], _Epoch] = {}
    epoch = _epoch(config, zone, state, features, epochs)
    # (state signature, schedule membership, timer flags) -> {row: outcome} of the
    # stationary evaluations seen: the core takes the same branches again.
    memo: dict[tuple[object, ...], dict[bytes, tuple[object, ...]]] = {}
    signature: tuple[object, ...] = ()
    signed: object = None
    decisions = 0
    reported = 0
    k = 0
    while k < n:
        t = float(times[k])
        request = plan.requests.get(k)
        flags, timer = timers(config, zone, state, t)
        context = None
        row = None
        if request is None and flags is not None and builder.key is not None:
            row = epoch.row(k)
            if row is not None:
                # Only decide() makes a new openings dict; advance() keeps it unless moves
                # leave the hour: the same dict, the same signature.
                if signed is not state.openings:
                    signature = state_signature(config, zone, state)
                    signed = state.openings
                context = (signature, schedule.at(t), flags)
        seen = memo.get(context) if context is not None else None
        if seen is not None and row is not None and seen.get(row) == builder.key:
            # The same branches as an earlier stationary evaluation with this outcome.
            decided, steady, after = False, True, state
            builder.extend(1)
        else:
            inputs = zone_inputs(config, zone, _held(aligned, k), t)
            decision, after = decide(config, zone, inputs, state, t, request)
            decisions += 1
            decided = True
            builder.add(decision, plan.trigger(k))
            steady = request is None and stationary(
                config,
                zone,
                state,
                after,
                t,
                bool(features.rain_wet[k]),
                float(features.wind_speed[k]),
            )
            if not steady:
                epoch = _epoch(config, zone, after, features, epochs)
            else:
                if context is not None and row is not None:
                    memo.setdefault(context, {})[row] = run_key(decision)
                    seen = memo[context]
                timer = next_timer(config, zone, after, t)
        following = k + 1
        if steady:
            last = k
            if following < n:
                position = int(np.searchsorted(forced, k, side="right"))
                limit = int(forced[position]) if position < forced.size else n
                if timer < math.inf:
                    due = int(np.searchsorted(times, timer - MARGIN, side="left"))
                    limit = min(limit, max(due, following))
                if limit > following:
                    # Until then the context is the same: rows already seen with the
                    # current outcome repeat it too.
                    current = builder.key
                    allowed = (
                        {r for r, outcome in seen.items() if outcome == current}
                        if seen is not None and context is not None
                        else set()
                    )
                    limit = epoch.first_other(k, limit, allowed)
                if limit > following:
                    builder.extend(limit - following)
                    last, following = limit - 1, limit
            if not decided or last > k:
                first = k if not decided else k + 1
                after = advance_over(
                    config,
                    zone,
                    after,
                    times[first : last + 1],
                    features.rain_wet[first : last + 1],
                    features.wind_speed[first : last + 1],
                )
        state = after
        k = following
        if progress is not None and k - reported >= 10_000:
            progress(k - reported)
            reported = k
    if progress is not None and n > reported:
        progress(n - reported)
    indoor = _indoor(config, zone, times, end, features.temp_indoor)
    return ZoneResult(zone, builder.finish(end), n, decisions, indoor)


# --------------------------------------------------------------------------- all zones


def _span(plans: Mapping[str, ZonePlan]) -> tuple[float, float] | None:
    """First and last evaluation time of all plans (schedule edges are computed over it)."""
    firsts = [float(p.times[0]) for p in plans.values() if len(p)]
    lasts = [float(p.times[-1]) for p in plans.values() if len(p)]
    return (min(firsts) - 1.0, max(lasts) + 1.0) if firsts else None


def _replay_group(
    config: SiteConfig,
    zones: Sequence[str],
    log: PointLog,
    plans: Mapping[str, ZonePlan],
    end: float,
    span: tuple[float, float] | None,
    progress: Progress | None = None,
) -> list[ZoneResult]:
    edges: dict[str, list[float]] = {}
    results = []
    for zone in zones:
        rules = config.zones[zone].rules
        if rules not in edges and span is not None:
            edges[rules] = schedule_edges(config.rules[rules], config.site.time_zone, *span)
        results.append(
            replay_zone(config, zone, log, plans[zone], end, progress, edges=edges.get(rules, []))
        )
    return results


def _groups(plans: Mapping[str, ZonePlan], count: int) -> list[list[str]]:
    """Zones in ``count`` groups of about equal numbers of evaluations."""
    groups: list[list[str]] = [[] for _ in range(count)]
    load = [0] * count
    for zone in sorted(plans, key=lambda z: -len(plans[z])):
        lightest = load.index(min(load))
        groups[lightest].append(zone)
        load[lightest] += len(plans[zone])
    return [g for g in groups if g]


def replay_fast(
    config: SiteConfig,
    log: PointLog,
    plans: Mapping[str, ZonePlan],
    end: float,
    *,
    jobs: int = 1,
    progress: Progress | None = None,
) -> list[ZoneResult]:
    """Every zone's runs, by the fast path; zones in site order whatever ``jobs`` is.

    ``jobs`` > 1 spreads the zones over that many processes
    (:class:`~concurrent.futures.ProcessPoolExecutor`); ``progress`` is told
    the evaluations covered as zones (``jobs`` > 1) or stretches of a zone
    (``jobs`` = 1) finish.
    """
    if jobs < 1:
        raise ValueError(f"jobs must be at least 1, got {jobs}")
    zones = [zone for zone in config.zones if zone in plans]
    span = _span({z: plans[z] for z in zones})
    if jobs == 1 or len(zones) < 2:
        return _replay_group(config, zones, log, plans, end, span, progress)
    by_zone: dict[str, ZoneResult] = {}
    groups = _groups({z: plans[z] for z in zones}, min(jobs * 2, len(zones)))
    with ProcessPoolExecutor(max_workers=jobs) as pool:
        futures = {}
        for group in groups:
            points = {p for zone in group for p in zone_points(config, zone)}
            future = pool.submit(
                _replay_group,
                config,
                group,
                log.only(points),
                {z: plans[z] for z in group},
                end,
                span,
            )
            futures[future] = group
        for future in as_completed(futures):
            for result in future.result():
                by_zone[result.zone] = result
                if progress is not None:
                    progress(result.evaluations)
    return [by_zone[zone] for zone in zones]
