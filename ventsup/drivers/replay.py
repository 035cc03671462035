"""Replay logged samples through the decision core, step by step: the reference.

Sample and hold exactly as live: every sample up to the evaluation time is
held, each zone's inputs are read under its points' staleness, and
:func:`ventsup.core.decide.decide` is called per zone per evaluation.

When zones are evaluated
------------------------
As the daemon does (:mod:`ventsup.drivers.service`): every zone at each tick
``start + k * step`` (``start`` included, ``end`` excluded), and, with
``urgent=True``, at once when a sample changes a smoke alarm or rain point's
value, moves the wind speed across one of a zone's wind limits or their reopen
levels, or changes a zone's windward openings (the daemon's own rule,
:func:`ventsup.core.urgency.urgent_zones`; a value that becomes known
counts as a change). A log has no message boundaries, so every sample of one
time is held before the urgent evaluations of that time; each zone is then
evaluated once, triggered by the first urgent point in log order, and a tick
at the same time follows. Samples at or before ``start`` are held without
urgent evaluations (the daemon evaluates nothing before its first tick).

This per-step loop is the reference: :mod:`ventsup.drivers.replay_fast` skips
the evaluations that cannot change anything and is tested to give the same
:class:`Run` records.

Runs
----
A replay's output is a list of :class:`Run`: consecutive evaluations of one
zone with the same outcome (mode, layer, cause, targets, HVAC interlock and
open area). A run keeps the complete :class:`~ventsup.core.state.Decision` of
its first evaluation, the number of evaluations it covers and every event of
them, and lasts until the zone's next run starts (or the replay ends): each
decision holds until the next evaluation, so a run's duration is the time its
targets were commanded.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass, field

from ventsup.config.model import SiteConfig
from ventsup.core.decide import decide, initial_state
from ventsup.core.inputs import Held, Sample, hold, read_point, zone_inputs
from ventsup.core.state import Decision, OverrideRequest, ZoneState

__all__ = [
    "TICK",
    "Evaluation",
    "Run",
    "RunBuilder",
    "evaluation_plan",
    "replay",
    "replay_evaluations",
    "run_key",
    "runs_from_decisions",
    "tick_times",
]

#: The trigger of a regular evaluation (as the ledger records it).
TICK = "tick"


@dataclass(frozen=True)
class Evaluation:
    """One evaluation of one zone: when, what triggered it, and an operator request with it.

    ``held`` is how many of the replay's samples, in the order given, the
    evaluation had seen (a recording says so: the daemon handles one message
    at a time); None for the rule of logs, every sample stamped at or before
    ``t``. Give it for every evaluation of a replay or for none.
    """

    t: float
    zone: str
    trigger: str = TICK
    request: OverrideRequest | None = None
    held: int | None = None

    def __post_init__(self) -> None:
        if self.held is not None and self.held < 0:
            raise ValueError(f"held must be a count of samples (0 or more), got {self.held}")


def tick_times(start: float, end: float, step: float) -> list[float]:
    """``start + k * step`` for every k with a time before ``end`` [s]."""
    if not step > 0:
        raise ValueError(f"step must be positive, got {step} s")
    times: list[float] = []
    k = 0
    while True:
        t = start + k * step
        if not t < end:
            return times
        times.append(t)
        k += 1


def _urgent_rule() -> Callable[
    [SiteConfig, str, float | bool | None, float | bool], tuple[str, ...]
]:
    # The daemon's own rule, so that a replay evaluates when the daemon would.
    from ventsup.core.urgency import urgent_zones

    return urgent_zones


def evaluation_plan(
    config: SiteConfig,
    samples: Sequence[Sample],
    start: float,
    end: float,
    step: float = 60.0,
    *,
    urgent: bool = True,
) -> list[Evaluation]:
    """Every evaluation of a replay, in order (see the module notes).

    ``samples`` must be sorted by time (ties in log order).
    """
    ticks = tick_times(start, end, step)
    by_time: dict[float, dict[str, str]] = {}
    if urgent:
        rule = _urgent_rule()
        held = Held()
        for sample in samples:
            if sample.t >= end:
                break
            if sample.point in config.points and sample.t > start:
                before = read_point(config, sample.point, held, sample.t)
                for zone in rule(config, sample.point, before.value, sample.value):
                    by_time.setdefault(sample.t, {}).setdefault(zone, f"input:{sample.point}")
            held = hold(held, sample)
    plan: list[Evaluation] = []
    urgent_times = sorted(by_time)
    i = 0
    for tick in ticks:
        while i < len(urgent_times) and urgent_times[i] <= tick:
            plan.extend(_urgent(config, urgent_times[i], by_time[urgent_times[i]]))
            i += 1
        plan.extend(Evaluation(tick, zone) for zone in config.zones)
    for t in urgent_times[i:]:
        plan.extend(_urgent(config, t, by_time[t]))
    return plan


def _urgent(config: SiteConfig, t: float, zones: dict[str, str]) -> list[Evaluation]:
    return [Evaluation(t, zone, zones[zone]) for zone in config.zones if zone in zones]


def replay_evaluations(
    config: SiteConfig,
    samples: Sequence[Sample],
    evaluations: Iterable[Evaluation],
    progress: Callable[[float], None] | None = None,
    *,
    total: int | None = None,
) -> Iterator[tuple[Decision, str]]:
    """The per-step reference: hold, read and decide at each evaluation, in order.

    ``samples`` sorted by time; ``evaluations`` in time order. An evaluation
    with a ``held`` count holds the first ``held`` samples instead of those
    stamped at or before its time: then ``samples`` are in the order the
    counts refer to (a recording's: :meth:`~ventsup.edges.logs.PointLog.samples`
    of its log gives it, unless a recorded time goes back), and the counts
    never decrease. Yields each decision with its trigger. ``progress`` gets
    the share done (0-1) after every evaluation when ``total`` (the number of
    evaluations) is given.
    """
    held = Held()
    states: dict[str, ZoneState] = {zone: initial_state() for zone in config.zones}
    index = 0
    for done, evaluation in enumerate(evaluations, start=1):
        t = evaluation.t
        if evaluation.held is None:
            while index < len(samples) and samples[index].t <= t:
                held = hold(held, samples[index])
                index += 1
        else:
            if evaluation.held < index or evaluation.held > len(samples):
                raise ValueError(
                    f"evaluation of zone {evaluation.zone!r} at t={t!r} holds "
                    f"{evaluation.held} samples, after {index} were held, of {len(samples)}"
                )
            while index < evaluation.held:
                held = hold(held, samples[index])
                index += 1
        zone = evaluation.zone
        decision, states[zone] = decide(
            config, zone, zone_inputs(config, zone, held, t), states[zone], t, evaluation.request
        )
        yield decision, evaluation.trigger
        if progress is not None and total:
            progress(done / total)


def replay(
    config: SiteConfig,
    samples: Sequence[Sample],
    start: float,
    end: float,
    step: float = 60.0,
    progress: Callable[[float], None] | None = None,
    *,
    urgent: bool = False,
) -> Iterator[Decision]:
    """Yield every zone's decision at each tick from ``start`` up to ``end`` [s].

    ``samples`` must be sorted by time. ``progress`` is called with the share
    done (0-1) once per evaluation. With ``urgent``, zones are also evaluated
    at once on alarm, rain and wind changes, as live (see the module notes).
    """
    plan = evaluation_plan(config, samples, start, end, step, urgent=urgent)
    for decision, _ in replay_evaluations(config, samples, plan, progress, total=len(plan)):
        yield decision


# --------------------------------------------------------------------------- runs


def run_key(decision: Decision) -> tuple[object, ...]:
    """What makes two evaluations of a zone the same outcome: mode, layer, cause,
    targets, HVAC interlock and open area (not the reason, facts or limits, which
    name the values of the moment)."""
    return (
        decision.mode,
        decision.layer,
        decision.cause,
        tuple(decision.targets.items()),
        decision.windows_open,
        decision.open_area,
    )


@dataclass(frozen=True)
class Run:
    """Consecutive evaluations of one zone with the same outcome (:func:`run_key`).

    ``start`` is the time of the first evaluation and ``end`` that of the
    zone's next run (or the end of the replay) [s since the epoch, UTC];
    ``evaluations`` how many evaluations the run covers; ``decision`` the
    complete decision of the first one and ``trigger`` what triggered it;
    ``events`` every event of the run's evaluations, with its time.
    """

    zone: str
    start: float
    end: float
    evaluations: int
    decision: Decision
    trigger: str
    events: tuple[tuple[float, str], ...] = ()

    @property
    def duration(self) -> float:
        """How long the run's targets were commanded [s]."""
        return self.end - self.start


@dataclass
class RunBuilder:
    """Collects one zone's evaluations into runs (the reference and the fast path share it)."""

    zone: str
    runs: list[Run] = field(default_factory=list)
    _first: Decision | None = None
    _trigger: str = TICK
    _key: tuple[object, ...] = ()
    _count: int = 0
    _events: list[tuple[float, str]] = field(default_factory=list)

    def add(self, decision: Decision, trigger: str, repeats: int = 0) -> None:
        """One evaluation (``decision``), then ``repeats`` skipped ones with the same outcome."""
        key = run_key(decision)
        if self._first is None or key != self._key:
            self._close(decision.t)
            self._first, self._trigger, self._key = decision, trigger, key
        self._count += 1 + repeats
        self._events.extend((decision.t, text) for text in decision.events)

    @property
    def key(self) -> tuple[object, ...] | None:
        """The outcome (:func:`run_key`) of the current run, None before the first evaluation."""
        return self._key if self._first is not None else None

    def extend(self, repeats: int) -> None:
        """``repeats`` more evaluations with the outcome of the last one."""
        if repeats:
            if self._first is None:
                raise ValueError("extend() before any add()")
            self._count += repeats

    def _close(self, end: float) -> None:
        if self._first is not None:
            self.runs.append(
                Run(
                    self.zone,
                    self._first.t,
                    end,
                    self._count,
                    self._first,
                    self._trigger,
                    tuple(self._events),
                )
            )
        self._first, self._count, self._events = None, 0, []

    def finish(self, end: float) -> list[Run]:
        """Close the last run at ``end`` (the end of the replay) and return all runs."""
        self._close(end)
        return self.runs


def runs_from_decisions(
    config: SiteConfig, decisions: Iterable[tuple[Decision, str]], end: float
) -> list[Run]:
    """Run-length records of per-step decisions, by zone in site order, each zone in time order."""
    builders = {zone: RunBuilder(zone) for zone in config.zones}
    for decision, trigger in decisions:
        builders[decision.zone].add(decision, trigger)
    return [run for builder in builders.values() for run in builder.finish(end)]
