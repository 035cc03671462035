"""The step loop of :func:`simulator.loop.run`: spans of compiled physics between decisions (internal).

The physics of the building does not depend on the controller except through
its decisions (each opening's target and whether the windows count as open,
for the HVAC interlock). So the loop alternates:

1. at step ``k``, the controller decides each zone that it must decide;
2. :func:`simulator._kernel.run_steps` advances every zone over a span of
   steps with those decisions held, and the points are published for each
   step of the span (:class:`Points`, vectorised, faults included);
3. the span is kept up to the first step ``m`` at which some zone must be
   decided again, the state is taken from the end of step ``m - 1``, and the
   loop goes on at ``m``.

Which steps must be decided
---------------------------
Any controller but the decision core's own (:class:`~simulator.loop.CoreController`
with ``skip_repeats``) is asked every step, as before, and
:class:`~simulator.loop.FixedController` (which decides the same whatever
its inputs) once.

For the decision core the rule is that of the replay's fast path
(:mod:`ventsup.drivers.replay_fast`), with the closed loop's inputs: after an
evaluation that changed only bookkeeping (:func:`ventsup.core.horizon.stationary`),
the core would take exactly the same branches, and so repeat the same outcome
(mode, layer, cause, targets, windows open), at every later step as long as

- the comparisons of the core on the zone's inputs give the same codes
  (:func:`ventsup.core.horizon.zone_features`) and none is too close to tell,
- the comparisons of the inputs with the state give the same classes
  (:func:`ventsup.core.horizon.state_classes`),
- no timer of the state runs out (:func:`ventsup.core.horizon.next_timer`)
  and no schedule edge passes (:func:`ventsup.core.horizon.schedule_edges`).

Those steps are not decided: the outcome is recorded again and the zone's
state is advanced as the core would advance it
(:func:`ventsup.core.horizon.advance_over`, folded in before the state is
next read). As in the replay, a stationary evaluation is also remembered by
its context (state signature, schedule membership, timer flags) and its row
of codes and classes: a later step with the same context and a remembered
row whose outcome is the current one repeats it too, within a window and at
a timer or schedule edge alike. Scripted events reach the core only through
the inputs, so the codes cover them.

The codes of a zone are computed ahead over a span of up to
:data:`LOOK_AHEAD` steps of physics with the outcomes held, and kept: they
stay true until the outcome of a zone whose physics feeds the zone's points
changes (its own, and those sharing a heating status point), which cuts them
at that step. The reason text of a decision is kept where the core was
called, which is every step whose outcome differs from the step before
(:attr:`simulator.loop.Result.changes`).

``tests/simulator/test_skip.py`` runs the same closed loops with and without
skipping over scenarios with rain, gusts, a smoke drill, dropouts, jams,
schedule edges and daylight saving changes and checks that every recorded
value and every state the skipping run holds are the same.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import numpy.typing as npt

from simulator import _kernel
from simulator.building import Reporting
from ventsup.config.model import PointKind, SiteConfig
from ventsup.core.decide import decide, initial_state
from ventsup.core.horizon import (
    MARGIN,
    Readings,
    ZoneFeatures,
    advance_over,
    grid_readings,
    outdoor_dew_point,
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
from ventsup.core.state import Cause, Decision, Mode, ZoneState

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.int64]
BoolArray = npt.NDArray[np.bool_]
Trace = Callable[[int, int, ZoneState], None]
Change = tuple[float, str, str, int, str, str, str]

MODES = tuple(Mode)
CAUSES = tuple(Cause)
_MODE_INDEX = {mode: i for i, mode in enumerate(MODES)}
_CAUSE_INDEX = {cause: i for i, cause in enumerate(CAUSES)}
#: Steps of physics computed ahead while a zone's inputs are checked: at first, and at most
#: (the span doubles with each check and halves when an outcome change cuts it).
LOOK_AHEAD = (64, 512)
_NONE = object()  # nothing held / no value (faulted points)

# Kinds of per-step points.
TEMPERATURE, CO2, HEATING, POSITION = 0, 1, 2, 3


def round_to(values: FloatArray, resolution: FloatArray | float) -> FloatArray:
    """``values`` rounded to the nearest multiple of ``resolution`` (0: as they are).

    Half-way values go to the even multiple (numpy's rounding); NaN stays NaN.
    The multiple is rounded again to 9 decimals so that it reads as written
    (27.2, not 27.200000000000003) in a payload.
    """
    step = np.asarray(resolution, dtype=np.float64)
    safe = np.where(step > 0.0, step, 1.0)
    rounded = np.round(np.round(values / safe) * safe, 9)
    return np.asarray(np.where(step > 0.0, rounded, values))


def topic_groups(config: SiteConfig, names: Sequence[str]) -> IntArray:
    """For each point of ``names``, the number of its topic among theirs (0, 1, ...)."""
    ids: dict[str, int] = {}
    return np.array(
        [ids.setdefault(config.points[name].topic, len(ids)) for name in names], dtype=np.int64
    )


@dataclass
class _Dynamic:
    """A point published from the simulated state each step (a column of the spans)."""

    name: str
    kind: int
    source: Any  # zone index, zone indices (heating) or opening index
    offset: float
    binary: bool
    low: float
    high: float
    stale_after: float
    fault: tuple[list[int], list[float]] | None
    # Faulted points: what was held before the current span (as published) and
    # the fault state (stuck value, last value published).
    value: Any = None
    stuck: Any = _NONE
    published_last: Any = _NONE


class Points:
    """Every sourced point: the outdoor and scripted ones precomputed for the run, the
    per-step ones published span by span from the simulated state.

    A span holds, for steps ``k0`` to ``k1`` and each per-step point (a column),
    the value published (NaN: none) and the step of the sample held (-1: none);
    :attr:`rows` keeps what each per-step point published over the whole run.

    Every point is published as the gateways of ``reporting`` would: a
    measured value rounded to the resolution of its kind, and with
    ``on_change`` only when it changed or is due again (see
    :func:`simulator._kernel.report_on_change`). The outdoor and scripted
    points come already published so, by the plan of the run
    (``simulator.loop._Plan._publish_static``).
    """

    def __init__(
        self,
        config: SiteConfig,
        t: FloatArray,
        static_published: dict[str, FloatArray],
        dynamic: Sequence[tuple[str, int, Any, float]],
        faults: Any,
        reporting: Reporting | None = None,
    ) -> None:
        reporting = Reporting() if reporting is None else reporting
        self.repeat = reporting.repeat if reporting.on_change else None
        self.t = t
        self.t_list: list[float] = t.tolist()
        n = t.size
        self.static_last: dict[str, IntArray] = {}
        self.static_published = static_published
        # A value is made a Python object only where the core is asked (held()).
        self.static_binary = {
            name for name in static_published if config.points[name].kind is PointKind.BINARY
        }
        self.readings: dict[str, Readings] = {}
        for name, published in static_published.items():
            last, readings = grid_readings(t, published, config.points[name].stale_after)
            self.static_last[name] = last
            self.readings[name] = readings
        by_name: dict[str, _Dynamic] = {}
        for name, kind, source, offset in dynamic:
            point = config.points[name]
            low, high = point.plausible_range
            fault = faults.get(name)
            by_name[name] = _Dynamic(
                name,
                kind,
                source,
                offset,
                point.kind is PointKind.BINARY,
                low,
                high,
                point.stale_after,
                None if fault is None else (fault[0].tolist(), fault[1].tolist()),
            )
        self.dynamic = list(by_name.values())
        self.column = {p.name: j for j, p in enumerate(self.dynamic)}

        def of(kind: int) -> tuple[IntArray, list[Any]]:
            found = [(j, p.source) for j, p in enumerate(self.dynamic) if p.kind == kind]
            return np.array([j for j, _ in found], dtype=np.int64), [src for _, src in found]

        self.temperature, sources = of(TEMPERATURE)
        self.temperature_zones = np.array(sources, dtype=np.int64)
        self.temperature_offsets = np.array(
            [self.dynamic[j].offset for j in self.temperature], dtype=np.float64
        )
        self.co2, sources = of(CO2)
        self.co2_zones = np.array(sources, dtype=np.int64)
        self.heating, sources = of(HEATING)
        self.heating_zones = [list(zis) for zis in sources]
        self.position, sources = of(POSITION)
        self.position_openings = np.array(sources, dtype=np.int64)
        # A heating status is published whatever it is; the others within their range.
        self.lows = np.array([-np.inf if p.kind == HEATING else p.low for p in self.dynamic])
        self.highs = np.array([np.inf if p.kind == HEATING else p.high for p in self.dynamic])
        self.faulted = [j for j, p in enumerate(self.dynamic) if p.fault is not None]
        count = len(self.dynamic)
        # A heating status is a binary point: never rounded.
        self.resolution = np.array(
            [
                0.0 if p.binary else reporting.resolution.get(config.points[p.name].kind, 0.0)
                for p in self.dynamic
            ]
        )
        self.rows = np.full((n, count), np.nan)
        # Points that share a topic are one message: reported together (see report_on_change).
        self.groups = topic_groups(config, [p.name for p in self.dynamic])
        # What is held before the current span: the step published (-1: never), the value.
        self.last = np.full(count, -1, dtype=np.int64)
        self.last_value = np.full(count, np.nan)
        # The current span.
        self.k0 = 0
        self.held_at = np.zeros((0, count), dtype=np.int64)
        self.published = np.zeros((0, count))
        self.objects: dict[int, list[Any]] = {}
        self.carry: dict[int, list[tuple[Any, Any]]] = {}

    # ------------------------------------------------------------------ publish

    def publish(
        self,
        k0: int,
        k1: int,
        state: FloatArray,
        position: FloatArray,
        zone_rows: FloatArray,
        position_rows: FloatArray,
    ) -> None:
        """Publish the per-step points at steps ``k0`` to ``k1`` (included).

        ``state`` and ``position`` are the simulated state at the start of step
        ``k0``; ``zone_rows`` and ``position_rows`` hold the steps from ``k0`` to
        ``k1 - 1``. What a point publishes at a step is the state at its start.
        """
        m = k1 - k0 + 1
        values = np.empty((m, len(self.dynamic)))
        rows = zone_rows[k0:k1]
        if self.temperature.size:
            zis, offsets = self.temperature_zones, self.temperature_offsets
            values[0, self.temperature] = (
                state[zis, _kernel.S_AIR] + state[zis, _kernel.S_GRADIENT] * offsets
            )
            values[1:, self.temperature] = rows[:, zis, 1] + rows[:, zis, 5] * offsets
        if self.co2.size:
            values[0, self.co2] = state[self.co2_zones, _kernel.S_CO2]
            values[1:, self.co2] = rows[:, self.co2_zones, 10]
        for j, zis in zip(self.heating.tolist(), self.heating_zones, strict=True):
            values[0, j] = float(bool(np.any(state[zis, _kernel.S_HEATING] > 0.0)))
            values[1:, j] = np.any(rows[:, zis, 9] > 0.0, axis=1)
        if self.position.size:
            values[0, self.position] = position[self.position_openings]
            values[1:, self.position] = position_rows[k0:k1, self.position_openings]
        if self.resolution.any():
            values = round_to(values, self.resolution)
        sent = (values >= self.lows) & (values <= self.highs)
        self.objects, self.carry = {}, {}
        for j in self.faulted:
            point = self.dynamic[j]
            sent[:, j], self.objects[j], self.carry[j] = self._faulted(point, k0, values[:, j])
        if self.repeat is not None:
            self._report_on_change(values, sent, k0)
        steps = np.arange(k0, k1 + 1, dtype=np.int64)[:, None]
        if sent.all():
            self.published = values
            self.held_at = np.broadcast_to(steps, values.shape)
        else:
            self.published = np.where(sent, values, np.nan)
            held_at = np.where(sent, steps, self.last)
            np.maximum.accumulate(held_at, axis=0, out=held_at)
            self.held_at = held_at
        self.rows[k0 : k1 + 1] = self.published
        self.k0 = k0

    def _report_on_change(self, values: FloatArray, sent: BoolArray, k0: int) -> None:
        """Clear ``sent`` where a gateway reporting on change stays quiet (in place)."""
        assert self.repeat is not None
        last = self.last
        last_t = np.where(last >= 0, self.t[np.maximum(last, 0)], np.nan)
        last_value = self.last_value.copy()  # the span may be cut: keep() carries it
        t = self.t[k0 : k0 + values.shape[0]]
        _kernel.report_on_change(values, sent, t, self.repeat, last_t, last_value, self.groups)
        for j in self.faulted:
            objects = self.objects[j]
            for i in np.flatnonzero(~sent[:, j]).tolist():
                objects[i] = None

    def _faulted(
        self, point: _Dynamic, k0: int, values: FloatArray
    ) -> tuple[BoolArray, list[Any], list[tuple[Any, Any]]]:
        """A faulted point's samples, step by step as the scripted faults lay them
        (``values``, the true values, become the values published)."""
        assert point.fault is not None
        codes, fault_values = point.fault
        stuck, last = point.stuck, point.published_last
        sent = np.zeros(values.size, dtype=np.bool_)
        objects: list[Any] = []
        carry: list[tuple[Any, Any]] = []
        for i, raw in enumerate(values.tolist()):
            k = k0 + i
            value: Any = bool(raw) if point.kind == HEATING else raw
            code = codes[k]
            published = True
            if code == 0:
                stuck = _NONE
            elif code == 1:  # dropout: nothing published
                published = False
            elif code == 2:  # stuck at the given value or the last one published
                if stuck is _NONE:
                    given = fault_values[k]
                    stuck = given if not math.isnan(given) else (value if last is _NONE else last)
                value = stuck
            else:  # spike
                value = bool(fault_values[k]) if point.binary else fault_values[k]
            if published and not point.binary and not point.low <= value <= point.high:
                published = False  # the decoder would reject it
            if published:
                last = value
                sent[i] = True
                values[i] = float(value)
            objects.append(value if published else None)
            carry.append((stuck, last))
        return sent, objects, carry

    def _value(self, j: int, at: int) -> Any:
        """The value of column ``j`` published at step ``at`` (held before the span or in it)."""
        if at < self.k0:
            point = self.dynamic[j]
            if point.fault is not None:
                return point.value
            value = float(self.last_value[j])
        elif j in self.objects:
            return self.objects[j][at - self.k0]
        else:
            value = float(self.published[at - self.k0, j])
        return bool(value) if self.dynamic[j].kind == HEATING else value

    def keep(self, through: int) -> None:
        """The span is kept through step ``through``: carry the held samples on."""
        i = through - self.k0
        at = self.held_at[i]
        inside = np.flatnonzero(at >= self.k0)
        self.last[inside] = at[inside]
        self.last_value[inside] = self.published[at[inside] - self.k0, inside]
        for j in self.faulted:
            point = self.dynamic[j]
            if at[j] >= self.k0:
                point.value = self.objects[j][int(at[j]) - self.k0]
            point.stuck, point.published_last = self.carry[j][i]

    # ------------------------------------------------------------------ read

    def held(self, names: Sequence[str], s: int) -> Held:
        """The samples held at step ``s`` of the points ``names`` (a published span covers it)."""
        samples: dict[str, Sample] = {}
        t_list = self.t_list
        for name in names:
            last = self.static_last.get(name)
            if last is not None:
                at = int(last[s])
                if at >= 0:
                    value = float(self.static_published[name][at])
                    held = bool(value) if name in self.static_binary else value
                    samples[name] = Sample(name, held, t_list[at])
                continue
            j = self.column.get(name)
            if j is not None:
                at = int(self.held_at[s - self.k0, j])
                if at >= 0:
                    samples[name] = Sample(name, self._value(j, at), t_list[at])
        return Held(samples)

    def span_readings(self, names: Sequence[str], k0: int, k1: int) -> dict[str, Readings]:
        """Each point's readings at steps ``k0`` to ``k1`` (included), as the core reads them."""
        found: dict[str, Readings] = {}
        t = self.t[k0 : k1 + 1]
        lo, hi = k0 - self.k0, k1 + 1 - self.k0
        for name in names:
            readings = self.readings.get(name)
            if readings is not None:
                found[name] = Readings(readings.ok[k0 : k1 + 1], readings.value[k0 : k1 + 1])
                continue
            j = self.column.get(name)
            if j is None:
                continue
            held_at = self.held_at[lo:hi, j]
            stale_after = self.dynamic[j].stale_after
            if held_at[0] >= self.k0:  # held from the span itself
                ok = t - self.t[held_at] <= stale_after
                value = self.published[held_at - self.k0, j]
            else:
                safe = np.maximum(held_at, 0)
                ok = (held_at >= 0) & (t - self.t[safe] <= stale_after)
                value = np.where(
                    held_at >= self.k0,
                    self.published[np.maximum(held_at - self.k0, 0), j],
                    self.last_value[j],
                )
            found[name] = Readings(ok, np.where(ok, value, np.nan))
        return found


# ---------------------------------------------------------------------------------- loop


@dataclass
class Kernel:
    """The arrays :func:`simulator._kernel.run_steps` reads (see its module notes)."""

    series: FloatArray
    zone_series: FloatArray
    zone_const: FloatArray
    opening_const: FloatArray
    jammed: BoolArray
    jam_position: FloatArray
    co2_outdoor: float
    opening_zone: list[int]
    opening_names: list[str]


@dataclass
class _Zone:
    """What the loop keeps per zone between steps."""

    name: str
    openings: tuple[int, ...]
    opening_names: tuple[str, ...]
    points: list[str]
    edges: IntArray  # steps at which a schedule edge forces a decision
    state: ZoneState
    decision: Decision | None = None
    outcome: tuple[int, int, int, bool] = (0, 0, 0, False)
    physics: tuple[object, ...] | None = None
    # The repeat window, open while `active`: the zone repeats its outcome at the
    # steps up to `checked` (whose inputs give the row `base`, or a row that a
    # stationary evaluation in the same `context` gave with the same outcome:
    # `memo`; `broken`: the next one does not) and before `limit` (a timer or a
    # schedule edge). At `limit` it repeats again if its state, time and inputs
    # read as at such an evaluation (the memo), else the core decides.
    active: bool = False
    broken: bool = False
    checked: int = -1
    limit: int = 0
    base: npt.NDArray[np.uint8] | None = None
    # The rows of the last check: steps `rows_from` to `rows_to` (the inputs there
    # still hold), with the state classes of `class_key`, and which cannot be told.
    features: ZoneFeatures | None = None
    rows: npt.NDArray[np.uint8] | None = None
    unsure: BoolArray | None = None
    rows_from: int = 0
    rows_to: int = -1
    class_key: tuple[object, ...] | None = None
    # (state signature, schedule membership, timer flags) of the window; None: unknown.
    context: tuple[object, ...] | None = None
    key: tuple[object, ...] = ()  # the outcome, as the run records it
    memo: dict[tuple[object, ...], dict[bytes, tuple[object, ...]]] = field(default_factory=dict)
    _allowed: tuple[tuple[object, ...], npt.NDArray[np.void]] | None = None
    ahead: int = LOOK_AHEAD[0]
    # The repeated steps whose bookkeeping is not yet in `state` (-1: none).
    pending: int = -1
    pending_to: int = -1

    def repeats_until(self) -> int:
        """The first step at which the zone must be looked at again."""
        return min(self.checked + 1, self.limit)

    def needs_check(self, n: int) -> bool:
        """Whether checking the inputs further could let the zone repeat longer."""
        return self.active and not self.broken and self.checked < min(self.limit, n - 1)

    def cut(self, k: int) -> None:
        """The inputs after step ``k`` change: what was checked beyond it no longer holds."""
        if self.rows_to > k:
            self.rows_to = k
            self.ahead = max(LOOK_AHEAD[0], self.ahead // 2)
        if self.checked > k:
            self.checked, self.broken = k, False

    def scan(self) -> None:
        """Extend ``checked`` over the kept rows that equal the base."""
        if self.base is None or self.rows is None or self.unsure is None:
            return
        start = self.checked + 1 - self.rows_from
        stop = self.rows_to + 1 - self.rows_from
        if start < 0 or start >= stop:
            return
        unsure = self.unsure[start:stop]
        other = np.zeros(unsure.size, dtype=np.bool_)
        if self.rows.shape[1]:
            # Each row as one opaque value, so that rows compare as wholes.
            opaque = np.dtype((np.void, self.rows.shape[1]))
            rows = self.rows[start:stop].view(opaque).ravel()
            allowed = self.allowed(opaque)
            if allowed.size > 8:
                other = ~np.isin(rows, allowed)
            else:
                other = rows != allowed[0]
                for row in allowed[1:]:
                    other &= rows != row
        found = np.flatnonzero(unsure | other)
        if found.size:
            self.checked, self.broken = self.checked + int(found[0]), True
        else:
            self.checked = self.rows_to

    def rebase(self, k: int) -> None:
        """Decided at ``k``: the kept row at ``k`` (when there is one) is the new base."""
        self.base, self.checked, self.broken = None, k, False
        if self.rows is None or self.unsure is None or not self.rows_from <= k <= self.rows_to:
            return
        if self.unsure[k - self.rows_from]:
            self.broken = True
            return
        self.base = self.rows[k - self.rows_from]
        if self.context is not None:
            self.memo.setdefault(self.context, {})[self.base.tobytes()] = self.key
        self.scan()

    def allowed(self, opaque: np.dtype[np.void]) -> npt.NDArray[np.void]:
        """The base and the rows with which a stationary evaluation in this context had
        this outcome, as ``opaque`` values."""
        assert self.base is not None
        seen = self.memo.get(self.context, {}) if self.context is not None else {}
        # Rows are only ever added to the memo (an outcome follows from its branches).
        tag = (self.context, self.key, len(seen), self.base.tobytes())
        if self._allowed is None or self._allowed[0] != tag:
            rows = {self.base.tobytes()}
            rows.update(row for row, key in seen.items() if key == self.key)
            found = np.frombuffer(b"".join(sorted(rows)), dtype=opaque)
            self._allowed = (tag, found)
        return self._allowed[1]


class Loop:
    """One run of the step loop (see the module notes)."""

    def __init__(
        self,
        config: SiteConfig,
        core_config: SiteConfig | None,
        controller: Any,
        constant: bool,
        t: FloatArray,
        step: float,
        kernel: Kernel,
        points: Points,
        zone_names: Sequence[str],
        zone_openings: Sequence[tuple[int, ...]],
        dependents: Sequence[set[int]],
        initial_temperature: float,
        rain_wet: BoolArray,
        wind_speed: FloatArray,
        trace: Trace | None,
    ) -> None:
        self.core = core_config  # the core's config when repeats are skipped
        self.controller = controller
        self.constant = constant
        self.t = t
        self.t_list = points.t_list
        self.n = n = t.size
        self.dt = step
        self.kernel = kernel
        self.points = points
        self.dependents = dependents
        self.rain_wet = rain_wet
        self.wind_speed = wind_speed
        self.trace = trace
        zones = len(zone_names)
        openings = len(kernel.opening_zone)
        self.state = np.empty((zones, 5))
        self.state[:, _kernel.S_MASS] = initial_temperature
        self.state[:, _kernel.S_AIR] = initial_temperature
        self.state[:, _kernel.S_GRADIENT] = 0.0
        self.state[:, _kernel.S_CO2] = kernel.co2_outdoor
        self.state[:, _kernel.S_HEATING] = 0.0
        self.position = np.zeros(openings)
        self.targets = np.full(openings, np.nan)
        self.windows_open = np.zeros(zones, dtype=np.bool_)
        self.zone_rows = np.empty((n, zones, 11))
        self.position_rows = np.empty((n, openings))
        self.target_rows = np.empty((n, openings))
        self.outcomes = np.empty((zones, n, 4), dtype=np.int8)
        self.changes: list[Change] = []
        # (t, zone, reason) whenever the reason of a zone's latest decision changes.
        self.reasons: list[tuple[float, str, str]] = []
        self.all_points = list(config.points)
        self.calls = 0  # of the controller (or the core)
        self.dew_point: tuple[FloatArray, BoolArray, FloatArray] = (
            outdoor_dew_point(core_config, points.readings, n)
            if core_config is not None
            else (np.zeros(0), np.zeros(0, dtype=np.bool_), np.zeros(0))
        )
        span = (float(t[0]) - 1.0, float(t[-1]) + 1.0) if n else (0.0, 0.0)
        self.zones: list[_Zone] = []
        for zi, name in enumerate(zone_names):
            edges = np.zeros(0, dtype=np.int64)
            if self.core is not None:
                found = schedule_edges(self.core.rules_for(name), self.core.site.time_zone, *span)
                if found:
                    at = np.searchsorted(t, np.asarray(found) - MARGIN, side="left")
                    edges = np.unique(at[at < n]).astype(np.int64)
            self.zones.append(
                _Zone(
                    name=name,
                    openings=tuple(zone_openings[zi]),
                    opening_names=tuple(kernel.opening_names[oi] for oi in zone_openings[zi]),
                    points=zone_points(config, name),
                    edges=edges,
                    state=initial_state(),
                )
            )

    # ------------------------------------------------------------------ run

    def run(self, progress: Callable[[float], None] | None) -> None:
        n = self.n
        if n == 0:
            return
        report_every = max(1, n // 100)
        next_report = 0
        self.points.publish(0, 0, self.state, self.position, self.zone_rows, self.position_rows)
        k = 0
        while k < n:
            self._decide(k)
            end = self._kernel_end(k)
            state, position = self.state.copy(), self.position.copy()
            kernel = self.kernel
            _kernel.run_steps(
                k,
                end,
                self.dt,
                kernel.series,
                kernel.zone_series,
                kernel.zone_const,
                kernel.opening_const,
                kernel.jammed,
                kernel.jam_position,
                self.targets,
                self.windows_open,
                kernel.co2_outdoor,
                self.state,
                self.position,
                self.zone_rows,
                self.position_rows,
                self.target_rows,
            )
            last_input = min(end, n - 1)
            self.points.publish(k, last_input, state, position, self.zone_rows, self.position_rows)
            if self.core is not None:
                self._check(k, last_input)
            m = min([end, *(z.repeats_until() if z.active else k + 1 for z in self.zones)])
            self._keep(k, m, end)
            k = m
            if progress is not None and next_report <= k < n:  # 1.0 once, at the end
                progress(k / n)
                next_report = (k // report_every + 1) * report_every
        for zi, zone in enumerate(self.zones):
            self._fold(zi, zone)
        if progress is not None:
            progress(1.0)

    def _decide(self, k: int) -> None:
        """Decide every zone that cannot repeat its outcome at step ``k``."""
        t = self.t_list[k]
        held_all: Held | None = None
        for zi, zone in enumerate(self.zones):
            if zone.active and k <= zone.checked:
                if k < zone.limit:
                    if zone.pending < 0:
                        zone.pending = k
                    continue
                self._fold(zi, zone)
                if self._renew(k, zone):
                    zone.pending = k
                    continue
            self._fold(zi, zone)
            before = zone.state
            if self.core is not None:
                held = self.points.held(zone.points, k)
                decision, after = decide(
                    self.core, zone.name, zone_inputs(self.core, zone.name, held, t), before, t
                )
            else:
                if held_all is None:
                    held_all = self.points.held(self.all_points, k)
                decision, after = self.controller(zone.name, held_all, before, t)
            self.calls += 1
            zone.state = after
            if self.trace is not None:
                self.trace(k, zi, after)
            self._take(k, zi, zone, decision)
            if self.core is not None:
                self._open_window(k, zone, before, after)
            elif self.constant:
                zone.active, zone.broken, zone.checked, zone.limit = True, True, self.n, self.n + 1

    def _take(self, k: int, zi: int, zone: _Zone, decision: Decision) -> None:
        """Record ``decision`` as the zone's outcome from step ``k`` on."""
        previous = zone.decision
        wanted = decision.targets
        if previous is None or decision.mode is not previous.mode or wanted != previous.targets:
            self.changes.append(_change(self.t_list[k], decision))
        if previous is None or decision.reason != previous.reason:
            self.reasons.append((self.t_list[k], decision.zone, decision.reason))
        zone.decision = decision
        zone.outcome = (
            _MODE_INDEX[decision.mode],
            int(decision.layer),
            _CAUSE_INDEX[decision.cause],
            bool(decision.windows_open),
        )
        targets = tuple(wanted.get(name) for name in zone.opening_names)
        physics = (targets, decision.windows_open)
        if physics != zone.physics:
            zone.physics = physics
            for oi, target in zip(zone.openings, targets, strict=True):
                self.targets[oi] = math.nan if target is None else target
            self.windows_open[zi] = decision.windows_open
            # The zones this one's physics feeds saw it held beyond k: look again from k + 1.
            zone.cut(k)
            for other in self.dependents[zi]:
                self.zones[other].cut(k)

    def _open_window(self, k: int, zone: _Zone, before: ZoneState, after: ZoneState) -> None:
        """After the core decided at ``k``: may the zone repeat this outcome?"""
        core = self.core
        assert core is not None
        t = self.t_list[k]
        zone.active = stationary(
            core, zone.name, before, after, t, bool(self.rain_wet[k]), float(self.wind_speed[k])
        )
        if not zone.active:
            zone.base = None
            return
        flags = timers(core, zone.name, before, t)[0]
        zone.key = (zone.outcome, zone.physics)
        zone.context = (
            None
            if flags is None
            else (
                state_signature(core, zone.name, before),
                schedule_membership(core.rules_for(zone.name), core.site.time_zone, t),
                flags,
            )
        )
        self._set_limit(k, zone, next_timer_after=timers(core, zone.name, after, t)[1])
        # The rows kept from the last check hold where the inputs are the same (a
        # changed outcome cut them at k); a state that reads them otherwise (another
        # state class key) classifies the same features anew.
        if zone.features is not None and zone.rows_from <= k <= zone.rows_to:
            key = state_class_key(core, zone.name, after, zone.features)
            if key != zone.class_key:
                self._classify(zone, after, key)
        else:
            zone.rows = None
        zone.rebase(k)

    def _classify(self, zone: _Zone, state: ZoneState, key: tuple[object, ...]) -> None:
        """The rows of the zone's kept features as ``state`` reads them."""
        core, features = self.core, zone.features
        assert core is not None and features is not None
        m = zone.rows_to + 1 - zone.rows_from
        # The classes read the targets and latches of the state, which the pending
        # bookkeeping of repeated steps (see _fold) leaves as they are.
        classes, unsure = state_classes(core, zone.name, state, features, 0, m)
        zone.rows = np.concatenate(
            [features.codes[:m], np.ascontiguousarray(classes).view(np.uint8).reshape(m, -1)],
            axis=1,
        )
        zone.unsure = unsure | features.uncertain[:m]
        zone.class_key = key

    def _set_limit(self, k: int, zone: _Zone, next_timer_after: float) -> None:
        """The zone's next decision is due at the next timer or schedule edge after ``k``."""
        limit = self.n
        if next_timer_after < math.inf:
            due = int(np.searchsorted(self.t, next_timer_after - MARGIN, side="left"))
            limit = min(limit, max(due, k + 1))
        later = int(np.searchsorted(zone.edges, k, side="right"))
        if later < zone.edges.size:
            limit = min(limit, int(zone.edges[later]))
        zone.limit = limit

    def _renew(self, k: int, zone: _Zone) -> bool:
        """At the window's limit: does the zone read as at an earlier stationary evaluation?

        The replay's rule (:mod:`ventsup.drivers.replay_fast`): the same state
        signature, schedule membership and timer flags, with inputs giving the
        same row (``k`` is within the checked steps, so the row is known), take
        the same branches as that evaluation; if its outcome is the current
        one, the zone repeats it and a new window opens in this context.
        """
        core = self.core
        if core is None or zone.rows is None or not zone.rows_from <= k <= zone.rows_to:
            return False
        t = self.t_list[k]
        flags, timer = timers(core, zone.name, zone.state, t)
        if flags is None:
            return False
        context = (
            state_signature(core, zone.name, zone.state),
            schedule_membership(core.rules_for(zone.name), core.site.time_zone, t),
            flags,
        )
        row = zone.rows[k - zone.rows_from]
        if zone.memo.get(context, {}).get(row.tobytes()) != zone.key:
            return False
        zone.context, zone.base, zone.checked, zone.broken = context, row, k, False
        zone.scan()
        self._set_limit(k, zone, timer)
        return True

    def _kernel_end(self, k: int) -> int:
        """How far to run the physics from ``k``: to the first step some zone must be
        looked at, or further ahead when the inputs of some zone must be checked."""
        n = self.n
        known = n
        for zone in self.zones:
            if not zone.active:
                known = k + 1
            elif not zone.needs_check(n):
                known = min(known, zone.repeats_until())
        ahead = [
            k + zone.ahead for zone in self.zones if zone.needs_check(n) and zone.checked < known
        ]
        if ahead:
            return max(k + 1, min(n, max(ahead)))
        return max(k + 1, min(n, known))

    def _check(self, k: int, last: int) -> None:
        """Check the inputs of the zones that need it over steps ``k`` to ``last``."""
        core = self.core
        assert core is not None
        m = last - k + 1
        for zone in self.zones:
            if not zone.needs_check(self.n) or zone.checked >= last:
                continue
            readings = self.points.span_readings(zone.points, k, last)
            dew = self.dew_point
            features = zone_features(
                core,
                zone.name,
                readings,
                m,
                dew_point=(dew[0][k : last + 1], dew[1][k : last + 1], dew[2][k : last + 1]),
            )
            zone.features, zone.rows_from, zone.rows_to = features, k, last
            self._classify(zone, zone.state, state_class_key(core, zone.name, zone.state, features))
            if zone.base is None:  # decided at k: its own inputs are the base
                zone.rebase(k)
            else:
                zone.scan()
            # The rows hold until the outcome of a zone feeding these inputs changes
            # (see _Zone.cut), however often the rows differ from the base.
            zone.ahead = min(LOOK_AHEAD[1], zone.ahead * 2)

    def _keep(self, k: int, m: int, end: int) -> None:
        """Keep steps ``k`` to ``m - 1`` of the span that ran to ``end``."""
        if m < end:
            last = m - 1
            self.state[:, _kernel.S_MASS] = self.zone_rows[last, :, 4]
            self.state[:, _kernel.S_AIR] = self.zone_rows[last, :, 1]
            self.state[:, _kernel.S_GRADIENT] = self.zone_rows[last, :, 5]
            self.state[:, _kernel.S_CO2] = self.zone_rows[last, :, 10]
            self.state[:, _kernel.S_HEATING] = self.zone_rows[last, :, 9] > 0.0
            self.position[:] = self.position_rows[last]
        self.points.keep(m - 1)
        for zi, zone in enumerate(self.zones):
            self.outcomes[zi, k:m] = zone.outcome
            if self.core is None or not zone.active:
                continue
            if zone.pending < 0 and m - 1 > k:  # decided at k, repeated after it
                zone.pending = k + 1
            if zone.pending >= 0:
                zone.pending_to = m - 1

    def _fold(self, zi: int, zone: _Zone) -> None:
        """Put the bookkeeping of the zone's repeated steps into its state."""
        if zone.pending < 0 or self.core is None:
            zone.pending = -1
            return
        first, last = zone.pending, zone.pending_to + 1
        zone.state = advance_over(
            self.core,
            zone.name,
            zone.state,
            self.t[first:last],
            self.rain_wet[first:last],
            self.wind_speed[first:last],
        )
        zone.pending = -1
        if self.trace is not None:
            self.trace(last - 1, zi, zone.state)


def _change(t: float, decision: Decision) -> Change:
    """One row of :attr:`simulator.loop.Result.changes`."""
    shown = ", ".join(
        f"{name}={'released' if value is None else f'{value:.0%}'}"
        for name, value in decision.targets.items()
    )
    return (
        t,
        decision.zone,
        decision.mode.value,
        int(decision.layer),
        decision.cause.value,
        shown,
        decision.reason,
    )
