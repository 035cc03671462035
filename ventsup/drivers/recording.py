"""The daemon's own recording as replay input: the ledger's messages and decisions.

:func:`read_recording` turns a ledger (``docs/ledger.md``) into what a replay
needs: the accepted messages as samples (exactly the samples the daemon held),
and the recorded decisions' times and triggers as the evaluations, with each
operator request read back from its recorded message, so that the replay
evaluates when and as the daemon did.

What a recording cannot say
---------------------------
- The ledger keeps messages and decisions in separate tables, so the replay
  takes every message stamped at or before a decision's time as held at that
  decision. The daemon handles one queued message at a time; a message that
  waited in its queue while a tick was evaluated (stamped before the tick,
  handled after it) was not seen by that tick, and the replay may then differ
  at that one evaluation.
- Every zone starts from the initial state. The daemon restores saved states
  at a restart; replay from the daemon's first start (``--from``) to compare
  from the beginning.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

from ventsup.config.model import SiteConfig
from ventsup.core.inputs import Sample
from ventsup.core.state import Decision
from ventsup.drivers.replay import Evaluation
from ventsup.edges.ledger import Ledger, LedgerError
from ventsup.edges.logs import LogError, PointLog

__all__ = ["Recording", "read_recording"]


@dataclass(frozen=True)
class Recording:
    """A ledger's recording of ``start <= t < end``, ready to replay.

    ``log`` holds the accepted messages (also those before ``start``, so
    that values are held at the first evaluation); ``evaluations`` the
    recorded decisions' times, zones, triggers and operator requests, in
    order; ``recorded`` the recorded decisions with their triggers, to compare
    against. ``skipped`` counts what could not be used (by reason).
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
    try:
        with Ledger.open(path) as ledger:
            recorded = []
            for decision, trigger in ledger.decisions(start, end):
                if decision.zone in config.zones:
                    recorded.append((decision, trigger))
                else:
                    skip("decisions of unknown zones")
            if not recorded:
                raise LogError(f"{path}: no recorded decisions in the period to replay")
            first = recorded[0][0].t if start is None else start
            last = recorded[-1][0].t if end is None else end
            samples: list[Sample] = []
            requests: dict[str, list[tuple[float, bytes]]] = {}
            for record in ledger.messages(None, last if end is not None else None):
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
                if end is None and sample.t > last:
                    continue
                samples.append(sample)
    except LedgerError as exc:
        raise LogError(str(exc)) from exc

    evaluations: list[Evaluation] = []
    used: dict[str, int] = {}
    for decision, trigger in recorded:
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
        evaluations.append(Evaluation(decision.t, decision.zone, trigger, request))
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
