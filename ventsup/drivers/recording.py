"""The daemon's own recording as replay input: the ledger's messages and decisions.

:func:`read_recording` turns a ledger (``docs/ledger.md``) into what a replay
needs: the accepted messages as samples (exactly the samples the daemon held),
and the recorded decisions' times and triggers as the evaluations, with each
operator request read back from its recorded message, so that the replay
evaluates when and as the daemon did.

Which messages a decision had seen
----------------------------------
The daemon handles one message at a time, and a decision sees the messages
handled before it, not every message stamped at or before its time: in one
step of a simulated clock all messages carry the step's time, and a rain or
wind change is evaluated at once, before the step's later messages are
handled; on the wall clock a message may wait in the queue while a tick is
evaluated. The ledger numbers every record in the order the daemon recorded
it (the ``seq`` column, :meth:`~ventsup.edges.ledger.Ledger.journal`), so
each evaluation carries how many of the samples, in recording order, the
daemon had held (:attr:`~ventsup.drivers.replay.Evaluation.held`), and the
samples are kept in that order (each sample's ``order`` in the log is its
place in the recording). Rows of a version 1 ledger have no number: each of
their decisions is taken to have seen every message stamped at or before it.

What a recording cannot say
---------------------------
- Every zone starts from the initial state. The daemon restores saved states
  at a restart; replay from the daemon's first start (``--from``) to compare
  from the beginning.
- The per-step reference holds the samples in the order it is given
  (:meth:`~ventsup.edges.logs.PointLog.samples`: by time, then in recording
  order). That is the recording order unless a recorded time goes back (a
  wall clock stepped back while the daemon ran); the fast path follows the
  recording order in any case.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

from ventsup.config.model import SiteConfig
from ventsup.core.inputs import Sample
from ventsup.core.state import Decision
from ventsup.drivers.replay import Evaluation
from ventsup.edges.ledger import Ledger, LedgerError, MessageRecord
from ventsup.edges.logs import LogError, PointLog

__all__ = ["Recording", "read_recording"]


@dataclass(frozen=True)
class Recording:
    """A ledger's recording of ``start <= t < end``, ready to replay.

    ``log`` holds the accepted messages (also those before ``start``, so
    that values are held at the first evaluation), each sample's ``order``
    its place in the recording; ``evaluations`` the recorded decisions'
    times, zones, triggers, operator requests and how many samples each had
    seen (``held``), in recording order; ``recorded`` the recorded decisions
    with their triggers, to compare against. ``skipped`` counts what could
    not be used (by reason).
    """

    log: PointLog
    evaluations: list[Evaluation]
    recorded: list[tuple[Decision, str]]
    start: float
    end: float
    skipped: dict[str, int]


def read_recording(
    path: str | Path,
    config: SiteConfig,
    start: float | None = None,
    end: float | None = None,
) -> Recording:
    """Read the recording of ``start <= t < end`` [s] from the ledger at ``path``.

    Messages of points the site no longer has and decisions of zones it no
    longer has are skipped and counted. ``start`` and ``end`` default to the
    first and just after the last recorded decision.

    Raises
    ------
    LogError
        No such file, not a ledger, no decisions in the period, or an override
        request that cannot be read back.
    """
    path = Path(path)
    if not path.is_file():
        raise LogError(f"{path}: no such ledger; check the path")
    from ventsup.drivers.messages import OverrideRefused, Topics, parse_override

    skipped: dict[str, int] = {}

    def skip(reason: str) -> None:
        skipped[reason] = skipped.get(reason, 0) + 1

    topics = Topics(config)
    recorded: list[tuple[Decision, str]] = []
    held: list[int] = []  # per recorded decision: how many samples came before it
    samples: list[Sample] = []
    requests: dict[str, list[tuple[float, bytes]]] = {}
    try:
        with Ledger.open(path) as ledger:
            for record in ledger.journal(start, end):
                if isinstance(record, tuple):
                    decision, trigger = record
                    if decision.zone in config.zones:
                        recorded.append((decision, trigger))
                        held.append(len(samples))
                    else:
                        skip("decisions of unknown zones")
                    continue
                if not isinstance(record, MessageRecord):
                    continue  # an event
                if record.outcome == "override":
                    zone = topics.override_zone(record.topic)
                    if zone is not None:
                        requests.setdefault(zone, []).append((record.t, record.payload))
                    continue
                sample = record.sample()
                if sample is None:
                    continue
                if sample.point not in config.points:
                    skip("messages of unknown points")
                    continue
                samples.append(sample)
    except LedgerError as exc:
        raise LogError(str(exc)) from exc
    if not recorded:
        raise LogError(f"{path}: no recorded decisions in the period to replay")
    first = recorded[0][0].t if start is None else start
    last = recorded[-1][0].t if end is None else end
    # Samples recorded after the last decision are held by none of them.
    del samples[held[-1] :]

    evaluations: list[Evaluation] = []
    used: dict[str, int] = {}
    for (decision, trigger), count in zip(recorded, held, strict=True):
        request = None
        if trigger == "override":
            pending = requests.get(decision.zone, [])
            index = used.get(decision.zone, 0)
            while index < len(pending) and pending[index][0] <= decision.t:
                candidate = pending[index]
                index += 1
                try:
                    request, _ = parse_override(candidate[1], config, decision.zone)
                except OverrideRefused as exc:
                    raise LogError(
                        f"{path}: the override request for zone {decision.zone!r} recorded at "
                        f"t={candidate[0]!r} cannot be read back: {exc}"
                    ) from exc
                break
            used[decision.zone] = index
            if request is None:
                skip("override decisions without their request")
        evaluations.append(Evaluation(decision.t, decision.zone, trigger, request, count))
    finish = last if end is not None else _after(recorded, config)
    log = PointLog.from_samples(samples, config, source=str(path))
    log = PointLog(
        log.series,
        str(path),
        "the daemon's receipt times (seconds since the epoch, UTC)",
        {},
    )
    return Recording(log, evaluations, recorded, first, finish, skipped)


def _after(recorded: Sequence[tuple[Decision, str]], config: SiteConfig) -> float:
    """Just after the last recorded decision: one tick later."""
    return recorded[-1][0].t + config.controller.tick
