"""The daemon's logic without threads or broker: decode, hold, decide, publish, record.

One :class:`Supervisor` is owned by the service's worker thread (see
:mod:`ventsup.drivers.service` for the threads, the evaluation rules and the
restart safety); tests drive it directly with a list standing in for the
broker. :func:`urgent_zones` is the rule for evaluating at once between ticks.
"""

from __future__ import annotations

import logging
import time
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, fields, replace
from typing import Any, Protocol

from ventsup import __version__
from ventsup.config.model import SiteConfig
from ventsup.core.decide import decide, initial_state
from ventsup.core.inputs import Held, ZoneInputs, hold, read_point, zone_inputs
from ventsup.core.state import Decision, OverrideRequest, ZoneState
from ventsup.core.urgency import urgent_zones
from ventsup.drivers.messages import (
    OverrideRefused,
    Topics,
    interlock_payload,
    iso_time,
    json_payload,
    parse_override,
    request_id,
    state_payload,
)
from ventsup.edges.codec import Rejection, decode_reading, encode_command
from ventsup.edges.ledger import BatchWriter, EventRecord, Ledger, LedgerError, MessageRecord
from ventsup.edges.mqtt import (
    Connected,
    ConnectRefused,
    Disconnected,
    Message,
    MqttError,
    PublishRefused,
    Subscribed,
)

__all__ = [
    "Publisher",
    "Supervisor",
    "urgent_zones",
]  # urgent_zones re-exported from ventsup.core.urgency

_log = logging.getLogger("ventsup.service")

# Rejections and unknown topics are logged as warnings at most this often per kind [s].
_LOG_EVERY = 60.0
# Records kept in memory while the ledger cannot be written, before they are dropped.
_MAX_UNWRITTEN = 100_000
_PRUNE_EVERY = 86400.0


def _event_kind(text: str) -> str:
    if text.startswith("alarm"):
        return "alarm"
    if text.startswith("override"):
        ended = ("expired" in text) or ("ended" in text) or ("nothing to end" in text)
        return "override_end" if ended else "override"
    if text.startswith("actuator"):
        return "fault"
    return "note"


def _important(prev: ZoneState, new: ZoneState) -> bool:
    """A change that must reach the ledger before anything is published."""
    if {n: s.target for n, s in prev.openings.items()} != {
        n: s.target for n, s in new.openings.items()
    }:
        return True
    return (
        prev.override != new.override
        or prev.alarm_latched != new.alarm_latched
        or prev.alarm_clear_since != new.alarm_clear_since
    )


_STATE_FIELDS = tuple(f.name for f in fields(ZoneState) if f.name != "last_t")


def _changed(prev: ZoneState, new: ZoneState) -> bool:
    """Whether anything but the time of the last evaluation differs (unsaved until it is saved)."""
    return any(getattr(prev, name) != getattr(new, name) for name in _STATE_FIELDS)


# --------------------------------------------------------------------------- supervisor


class Publisher(Protocol):
    """Where the supervisor's messages go (the MQTT client, or a list in tests)."""

    def publish(
        self, topic: str, payload: bytes | str, *, qos: int = 1, retain: bool = False
    ) -> int: ...


class _RateLimit:
    """Say a recurring problem at most once per interval; count the rest."""

    def __init__(self, every: float) -> None:
        self.every = every
        self._last: dict[object, tuple[float, int]] = {}

    def __call__(self, key: object, now: float) -> int | None:
        """None to stay quiet, else how many were kept quiet since the last time."""
        last = self._last.get(key)
        if last is None or now - last[0] >= self.every:
            self._last[key] = (now, 0)
            return 0 if last is None else last[1]
        self._last[key] = (last[0], last[1] + 1)
        return None


@dataclass
class _Sent:
    """What was last published for one opening."""

    payload: bytes | None  # the command payload; None when released
    t: float  # when it was last sent (or would have been, in observe-only mode)


class Supervisor:
    """The daemon's logic, owned by one thread: decode, hold, decide, publish, record.

    Every method takes the time ``t`` [s since the epoch] it acts at; ``mono``
    is a monotonic clock for the batch writer and log rate limits. Publishing
    errors are logged and counted, never raised: a broken output must not
    stop the control of the other zones.
    """

    def __init__(
        self,
        config: SiteConfig,
        publisher: Publisher,
        *,
        ledger: Ledger | None = None,
        observe: bool = False,
        mono: Callable[[], float] = time.monotonic,
    ) -> None:
        self.config = config
        self.topics = Topics(config)
        self.publisher = publisher
        self.ledger = ledger
        self.observe = observe
        self.mono = mono
        controller = config.controller
        self.batch = (
            None
            if ledger is None
            else BatchWriter(ledger, max_size=500, max_age=controller.record_interval)
        )
        self.held = Held()
        self.states: dict[str, ZoneState] = {zone: initial_state() for zone in config.zones}
        self.decisions: dict[str, Decision] = {}
        self.inputs: dict[str, ZoneInputs] = {}
        self.sent: dict[tuple[str, str], _Sent] = {}
        self.opening_states: dict[tuple[str, str], bytes] = {}
        self.interlocks: dict[str, bytes] = {}
        self.topic_points: dict[str, list[str]] = {}
        for name, point in config.points.items():
            self.topic_points.setdefault(point.topic, []).append(name)
        self.ready = False
        # While the broker is away, retained outputs and heartbeats are not queued
        # (they are published again on reconnect); commands are, at QoS 1.
        self.connected = True
        self.deferred: list[Message] = []
        self.unsaved: set[str] = set()
        self.unsaved_since: float | None = None
        self.expiries_tried: set[tuple[str, float]] = set()
        self.words_warned: set[tuple[str, str]] = set()
        self.started_t: float | None = None
        self.last_evaluation: float | None = None
        self.last_prune: float | None = None
        self.rate_limit = _RateLimit(_LOG_EVERY)
        self.counts: dict[str, int] = dict.fromkeys(
            (
                "accepted",
                "unknown_topics",
                "evaluations",
                "urgent_evaluations",
                "commands",
                "overrides_applied",
                "overrides_refused",
                "publish_errors",
                "evaluation_errors",
                "ledger_errors",
                "recorded",
            ),
            0,
        )
        self.rejected: dict[str, int] = {}

    # ----------------------------------------------------------------- start

    def restore(self, t: float) -> None:
        """Load the saved zone states and rebuild the held samples that are not stale at ``t``."""
        self.started_t = t
        if self.ledger is None:
            return
        saved = self.ledger.load_states()
        for zone in self.config.zones:
            if zone in saved:
                self.states[zone] = saved[zone]
        gone = sorted(set(saved) - set(self.config.zones))
        if gone:
            _log.info("ignoring saved states of zones no longer configured: %s", ", ".join(gone))
        window = max(point.stale_after for point in self.config.points.values())
        restored = 0
        for record in self.ledger.messages(t - window, None):
            sample = record.sample()
            if sample is not None and sample.point in self.config.points:
                self.held = hold(self.held, sample)
                restored += 1
        fresh = sum(1 for name in self.held if read_point(self.config, name, self.held, t).known)
        text = (
            f"ventsup {__version__} started{' in observe-only mode' if self.observe else ''}; "
            f"restored the state of {len(set(saved) & set(self.config.zones))} zones and "
            f"{fresh} fresh point values"
        )
        _log.info(text)
        self.record(EventRecord(t, "start", None, None, text))
        self.prune(t)

    def begin(self, t: float) -> None:
        """Start evaluating: every zone now, then any override request that waited."""
        if self.ready:
            return
        self.ready = True
        if self.started_t is None:
            self.started_t = t
        self.evaluate(self.config.zones, t, "tick")
        deferred, self.deferred = self.deferred, []
        for message in deferred:
            self.on_message(replace(message, t=max(message.t, t)))

    # ----------------------------------------------------------------- input

    def handle(self, item: object, t: float) -> None:
        """Dispatch one queue item from the MQTT edge."""
        if isinstance(item, Message):
            self.on_message(item)
        elif isinstance(item, Connected):
            self.connected = True
            self.on_connected(t)
        elif isinstance(item, Disconnected):
            self.connected = False
            self.record(
                EventRecord(t, "note", None, None, f"broker connection lost: {item.reason}")
            )
        elif isinstance(item, ConnectRefused):
            self.record(
                EventRecord(t, "fault", None, None, f"broker refused to reconnect: {item.reason}")
            )
        elif isinstance(item, PublishRefused):
            self.counts["publish_errors"] += 1
            self.record(
                EventRecord(
                    t,
                    "fault",
                    None,
                    None,
                    f"broker refused a publish to {item.topic}: {item.reason}",
                )
            )
        elif isinstance(item, Subscribed):
            if item.refused:
                self.record(
                    EventRecord(
                        t,
                        "fault",
                        None,
                        None,
                        f"broker refused the subscriptions {', '.join(item.refused)}",
                    )
                )
        else:
            _log.error("ignoring an unexpected queue item %r", item)

    def on_message(self, message: Message) -> None:
        """Decode, record and hold one incoming message; evaluate at once if it is urgent."""
        zone = self.topics.override_zone(message.topic)
        if zone is not None:
            if not self.ready:
                self.deferred.append(message)
                return
            self.on_override(zone, message)
            return
        names = self.topic_points.get(message.topic)
        if names is None:
            self.counts["unknown_topics"] += 1
            self.record(
                MessageRecord(
                    message.t, message.topic, message.payload, None, "unknown_topic", None
                )
            )
            self._say(("unknown", message.topic), f"message on an unknown topic {message.topic!r}")
            return
        urgent: dict[str, str] = {}  # zone -> the point that made it urgent
        for name in names:
            point = self.config.points[name]
            result = decode_reading(name, point, message.payload, message.t)
            if isinstance(result, Rejection):
                self._rejected(message, result)
                continue
            self.counts["accepted"] += 1
            self.record(
                MessageRecord(
                    message.t, message.topic, message.payload, name, "accepted", result.value
                )
            )
            # What the point read before this value; only an evaluating supervisor needs it.
            before = read_point(self.config, name, self.held, message.t) if self.ready else None
            self.held = hold(self.held, result)
            if before is not None:
                for zone_name in urgent_zones(self.config, name, before.value, result.value):
                    urgent.setdefault(zone_name, name)
        by_point: dict[str, list[str]] = {}
        for zone_name, name in urgent.items():
            by_point.setdefault(name, []).append(zone_name)
        for name, zones in by_point.items():
            self.counts["urgent_evaluations"] += 1
            self.evaluate(zones, self.eval_time(message.t), f"input:{name}")

    def _rejected(self, message: Message, rejection: Rejection) -> None:
        self.rejected[rejection.reason] = self.rejected.get(rejection.reason, 0) + 1
        self.record(
            MessageRecord(
                message.t, message.topic, message.payload, rejection.point, rejection.reason, None
            )
        )
        self._say(
            ("rejected", rejection.point, rejection.reason),
            f"rejected a value of point {rejection.point} on {message.topic}: "
            f"{rejection.reason}: {rejection.detail}",
        )

    def _say(self, key: object, text: str) -> None:
        quiet = self.rate_limit(key, self.mono())
        if quiet is None:
            _log.debug(text)
        elif quiet:
            _log.warning("%s (and %d more like it since the last warning)", text, quiet)
        else:
            _log.warning(text)

    def on_override(self, zone: str, message: Message) -> None:
        """Apply an operator's override request and answer it on the result topic."""
        try:
            request, rid = parse_override(message.payload, self.config, zone)
        except OverrideRefused as exc:
            self._refuse(zone, message, str(exc), request_id(message.payload))
            return
        t = self.eval_time(message.t)
        decision = self.evaluate([zone], t, "override", request=request)
        if decision is None:
            self._refuse(zone, message, "the evaluation failed; see the controller's log", rid)
            return
        self.counts["overrides_applied"] += 1
        self.record(
            MessageRecord(message.t, message.topic, message.payload, None, "override", None)
        )
        state = self.states[zone]
        until = state.override.until if state.override is not None else None
        answer = {
            "id": rid,
            "ok": True,
            "zone": zone,
            "action": request.action,
            "who": request.who,
            "until": until,
            "until_time": iso_time(until),
            "mode": decision.mode.value,
            "targets": dict(decision.targets),
            "reason": decision.reason,
        }
        _log.info(
            "override %s of zone %s by %s: %s", request.action, zone, request.who, request.why
        )
        self._publish(self.topics.override_result(zone), json_payload(answer), qos=1, retain=False)

    def _refuse(self, zone: str, message: Message, why: str, request_id: str | None) -> None:
        self.counts["overrides_refused"] += 1
        self.record(
            MessageRecord(message.t, message.topic, message.payload, None, "override_refused", None)
        )
        _log.warning("refused an override request for zone %s: %s", zone, why)
        answer = {"id": request_id, "ok": False, "zone": zone, "error": why}
        self._publish(self.topics.override_result(zone), json_payload(answer), qos=1, retain=False)

    def on_connected(self, t: float) -> None:
        """After a (re)connect: publish every retained output again; never the commands."""
        if not self.decisions:
            return
        self.record(EventRecord(t, "note", None, None, "broker connection (re)established"))
        for zone, decision in self.decisions.items():
            self._publish(
                self.topics.state(zone),
                state_payload(
                    decision, self.states[zone], self.inputs.get(zone), observe=self.observe
                ),
                qos=1,
                retain=True,
            )
            if zone in self.interlocks:
                self._publish(
                    self.topics.interlock(zone), self.interlocks[zone], qos=1, retain=True
                )
        for (zone, opening), payload in self.opening_states.items():
            self._publish(self.topics.opening_state(zone, opening), payload, qos=1, retain=True)

    # ----------------------------------------------------------------- evaluation

    def eval_time(self, t: float) -> float:
        """The time to evaluate at for an input that arrived at ``t`` [s].

        A message stamped before the last evaluation (it waited in the queue)
        must not make a zone's time run backwards.
        """
        return t if self.last_evaluation is None else max(t, self.last_evaluation)

    def evaluate(
        self,
        zones: Iterable[str],
        t: float,
        trigger: str,
        request: OverrideRequest | None = None,
    ) -> Decision | None:
        """Evaluate ``zones`` at ``t``, record, save and publish; returns the last decision."""
        last: Decision | None = None
        for zone in zones:
            prev = self.states[zone]
            inputs = zone_inputs(self.config, zone, self.held, t)
            try:
                decision, state = decide(self.config, zone, inputs, prev, t, request)
            except Exception:
                self.counts["evaluation_errors"] += 1
                _log.exception(
                    "evaluating zone %s failed; its openings keep their last command", zone
                )
                self.record(EventRecord(t, "fault", zone, None, "evaluation failed (see the log)"))
                continue
            self.states[zone] = state
            self.decisions[zone] = decision
            self.inputs[zone] = inputs
            self.last_evaluation = t
            self.counts["evaluations"] += 1
            self.record(decision, trigger=trigger)
            for text in decision.events:
                who = request.who if request is not None else None
                if who is None and prev.override is not None and text.startswith("override"):
                    who = prev.override.who
                self.record(EventRecord(t, _event_kind(text), zone, who, text))
            if _important(prev, state):
                self._save({zone: state}, t)
            elif _changed(prev, state):
                self.unsaved.add(zone)
                if self.unsaved_since is None:
                    self.unsaved_since = self.mono()
            self._act(zone, decision, prev, t)
            last = decision
        return last

    def _act(self, zone: str, decision: Decision, prev: ZoneState, t: float) -> None:
        for opening, target in decision.targets.items():
            key = (zone, opening)
            if target is None:
                self._release(zone, opening, decision, t)
                continue
            payload = self._encode(zone, opening, target)
            sent = self.sent.get(key)
            changed = sent is None or sent.payload != payload
            due = (
                sent is not None
                and self.connected
                and t - sent.t >= self.config.controller.reassert
            )
            if changed or due:
                moved = prev.opening(opening).target != target
                self._command(zone, opening, payload, t, why="change" if moved else "re-assert")
                if moved:
                    who = prev.override.who if prev.override is not None else None
                    self.record(
                        EventRecord(
                            t,
                            "command",
                            zone,
                            who,
                            f"{opening} to {payload.decode()}"
                            + (" (observe-only: not sent)" if self.observe else ""),
                        )
                    )
            if changed:
                state = {
                    "zone": zone,
                    "opening": opening,
                    "released": False,
                    "target": target,
                    "command": payload.decode(),
                    "commanded": not self.observe,
                    "since": t,
                }
                self._opening_state(zone, opening, state)
        self._publish(
            self.topics.state(zone),
            state_payload(decision, self.states[zone], self.inputs.get(zone), observe=self.observe),
            qos=1,
            retain=True,
            offline=False,
        )
        interlock = interlock_payload(decision)
        if self.interlocks.get(zone) != interlock:
            self.interlocks[zone] = interlock
            self._publish(self.topics.interlock(zone), interlock, qos=1, retain=True, offline=False)

    def _encode(self, zone: str, opening: str, target: float) -> bytes:
        fmt = self.config.zones[zone].openings[opening].command_format
        try:
            return encode_command(target, fmt)
        except ValueError:
            # 'words' cannot say part-open: closed is the safe side (a rain or wind cap
            # of 10 % must never become a full "open").
            if (zone, opening) not in self.words_warned:
                self.words_warned.add((zone, opening))
                _log.warning(
                    "opening %s of zone %s takes open/closed words; part-open target %g "
                    "is sent as closed (use command_format fraction or percent)",
                    opening,
                    zone,
                    target,
                )
            return encode_command(1.0 if target >= 1.0 else 0.0, fmt)

    def _command(self, zone: str, opening: str, payload: bytes, t: float, *, why: str) -> None:
        self.sent[(zone, opening)] = _Sent(payload, t)
        if self.observe:
            return
        topic = self.topics.command(zone, opening)
        qos = self.config.controller.command_qos
        if self._publish(topic, payload, qos=qos, retain=False):
            self.counts["commands"] += 1
            _log.info("command %s %s -> %s (%s)", zone, opening, payload.decode(), why)

    def _release(self, zone: str, opening: str, decision: Decision, t: float) -> None:
        key = (zone, opening)
        sent = self.sent.get(key)
        if sent is not None and sent.payload is None:
            return
        self.sent[key] = _Sent(None, t)
        state = {
            "zone": zone,
            "opening": opening,
            "released": True,
            "target": None,
            "command": None,
            "commanded": False,
            "since": t,
            "reason": decision.reason,
        }
        self._opening_state(zone, opening, state)
        self.record(EventRecord(t, "command", zone, None, f"{opening} released: {decision.reason}"))
        _log.warning("zone %s opening %s released: %s", zone, opening, decision.reason)

    def _opening_state(self, zone: str, opening: str, state: Mapping[str, Any]) -> None:
        payload = json_payload(state)
        self.opening_states[(zone, opening)] = payload
        self._publish(
            self.topics.opening_state(zone, opening), payload, qos=1, retain=True, offline=False
        )

    def reassert(self, t: float) -> None:
        """Send again every command last sent ``controller.reassert`` ago or longer.

        Not while the broker is away: re-asserts would only pile up in memory.
        """
        if not self.connected:
            return
        every = self.config.controller.reassert
        for (zone, opening), sent in list(self.sent.items()):
            if sent.payload is not None and t - sent.t >= every:
                self._command(zone, opening, sent.payload, t, why="re-assert")

    def next_reassert(self) -> float | None:
        """When the next re-assert is due [s since the epoch], None if nothing is commanded."""
        times = [sent.t for sent in self.sent.values() if sent.payload is not None]
        if not times or not self.connected:
            return None
        return min(times) + self.config.controller.reassert

    def expire(self, t: float) -> None:
        """Evaluate the zones whose override ends at or before ``t`` (once per override)."""
        if not self.ready:
            return
        zones = []
        for zone, state in self.states.items():
            if state.override is not None and state.override.until <= t:
                key = (zone, state.override.until)
                if key not in self.expiries_tried:
                    self.expiries_tried.add(key)
                    zones.append(zone)
        if zones:
            self.evaluate(zones, self.eval_time(t), "tick")
        self.expiries_tried = {
            (zone, until)
            for zone, until in self.expiries_tried
            if (override := self.states[zone].override) is not None and override.until == until
        }

    def next_expiry(self) -> float | None:
        """The earliest override end still to act on [s since the epoch], None if none."""
        if not self.ready:
            return None
        ends = [
            s.override.until
            for zone, s in self.states.items()
            if s.override is not None and (zone, s.override.until) not in self.expiries_tried
        ]
        return min(ends) if ends else None

    # ----------------------------------------------------------------- outputs

    def _publish(
        self, topic: str, payload: bytes, *, qos: int, retain: bool, offline: bool = True
    ) -> bool:
        """Publish; False when it failed (counted) or was skipped (``offline=False``)."""
        if not offline and not self.connected:
            return False
        try:
            self.publisher.publish(topic, payload, qos=qos, retain=retain)
        except MqttError as exc:
            self.counts["publish_errors"] += 1
            self._say(("publish", topic), f"cannot publish to {topic}: {exc}")
            return False
        return True

    def heartbeat(self, t: float, extra: Mapping[str, Any] | None = None) -> None:
        """Publish the heartbeat: uptime, message counts, last evaluation, ledger."""
        body: dict[str, Any] = {
            "t": t,
            "time": iso_time(t),
            "version": __version__,
            "uptime": 0.0 if self.started_t is None else round(t - self.started_t, 3),
            "observe": self.observe,
            "accepted": self.counts["accepted"],
            "rejected": dict(sorted(self.rejected.items())),
            "rejected_total": sum(self.rejected.values()),
            "unknown_topics": self.counts["unknown_topics"],
            "last_evaluation": self.last_evaluation,
            "counts": dict(self.counts),
            "ledger": {
                "pending": 0 if self.batch is None else len(self.batch),
                "recorded": self.counts["recorded"],
                "unsaved_zones": len(self.unsaved),
            },
        }
        if extra:
            body.update(extra)
        self._publish(self.topics.heartbeat, json_payload(body), qos=1, retain=False, offline=False)

    # ----------------------------------------------------------------- ledger

    def record(
        self, record: MessageRecord | Decision | EventRecord, *, trigger: str = "tick"
    ) -> None:
        """Queue one record for the ledger (written in batches)."""
        if self.batch is None:
            return
        try:
            self.counts["recorded"] += self.batch.add(record, self.mono(), trigger=trigger)
        except LedgerError as exc:
            self._ledger_failed(exc)

    def _save(self, states: Mapping[str, ZoneState], t: float) -> None:
        if self.ledger is None:
            return
        try:
            self.ledger.save_states(states, t)
        except LedgerError as exc:
            self._ledger_failed(exc)
            self.unsaved.update(states)
            return
        self.unsaved.difference_update(states)
        if not self.unsaved:
            self.unsaved_since = None

    def _ledger_failed(self, exc: LedgerError) -> None:
        self.counts["ledger_errors"] += 1
        self._say(("ledger",), f"ledger: {exc}")
        if self.batch is not None and len(self.batch) > _MAX_UNWRITTEN:
            dropped = self.batch.discard()
            _log.error("dropped %d records the ledger could not take", dropped)

    def maintain(self, t: float, *, force: bool = False) -> None:
        """Write due records and states (all of them with ``force``); prune once a day."""
        if self.batch is not None:
            try:
                written = self.batch.flush() if force else self.batch.flush_if_due(self.mono())
                self.counts["recorded"] += written
            except LedgerError as exc:
                self._ledger_failed(exc)
        interval = self.config.controller.state_save_interval
        if self.unsaved and (
            force
            or (self.unsaved_since is not None and self.mono() - self.unsaved_since >= interval)
        ):
            self._save({zone: self.states[zone] for zone in sorted(self.unsaved)}, t)
        if self.last_prune is None or t - self.last_prune >= _PRUNE_EVERY:
            self.prune(t)

    def prune(self, t: float) -> None:
        """Delete records older than the retention period."""
        self.last_prune = t
        if self.ledger is None:
            return
        try:
            deleted = self.ledger.prune(t)
        except LedgerError as exc:
            self._ledger_failed(exc)
            return
        if deleted:
            _log.info("pruned %d records older than the retention period", deleted)

    def next_write(self) -> float | None:
        """When records or states are next due to be written [monotonic s], None if idle."""
        due: list[float] = []
        if self.batch is not None and len(self.batch):
            due.append(self.mono() + self.config.controller.record_interval / 2)
        if self.unsaved_since is not None:
            due.append(self.unsaved_since + self.config.controller.state_save_interval)
        return min(due) if due else None

    def shutdown(self, t: float, why: str) -> None:
        """Record the stop, save every zone's state and write every pending record."""
        self.record(EventRecord(t, "stop", None, None, f"ventsup stopped: {why}"))
        if self.ledger is not None and self.decisions:
            self.unsaved.update(self.decisions)
        self.maintain(t, force=True)
