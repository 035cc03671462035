"""The live daemon behind ``ventsup run``: MQTT in, the core, MQTT and the ledger out.

Threads and who owns what
-------------------------
One worker thread owns all state (held samples, zone states, what was last
commanded, counters, the ledger's batch writer) and is the only caller of the
core. paho's network thread only puts items on the worker's queue (see
:mod:`ventsup.edges.mqtt`; with a simulated clock there is no network
thread: the worker polls the client, and its callbacks run in the worker);
:meth:`Service.stop` (from the main thread's signal handler, or a test) puts
a :class:`Stop` item.
:class:`~ventsup.drivers.supervisor.Supervisor` is the worker's logic without
threads or broker, so it can be tested with a list standing in for the broker.

Why no scheduler
----------------
The worker already blocks on its queue, so it waits with a timeout until the
nearest deadline (the next tick, heartbeat, re-assert, override expiry, ledger
flush) instead of running APScheduler beside it: no second thread to
coordinate with, no misfire or coalescing settings (a late tick is simply one
tick), deadlines on the monotonic clock so that a wall-clock step (NTP) neither
bunches nor skips ticks, and a stop request is seen at once. Reports, when
they land, can still use APScheduler's hourly job (in UTC) as
``LIBRARY-NOTES`` advises.

Evaluation
----------
- every zone at start, once the broker's retained values have arrived (at
  most ``controller.startup_settle`` after connecting; urgent evaluations and
  override requests wait for this first one), then every ``controller.tick``;
- at once, in the same loop iteration, for the zones a message affects when it
  changes a smoke alarm or rain point's value, moves the wind speed across one
  of the zone's wind limits (or their reopen levels), or moves the wind
  direction so that the set of windward openings changes
  (:func:`~ventsup.drivers.supervisor.urgent_zones`); a value that becomes
  known counts as a change;
- at an override's expiry time, and when an override request arrives.

Outputs (topics under ``prefix``; see :class:`~ventsup.drivers.messages.Topics`)
-------------------------------------------------------------------------------
Commands go out per opening (QoS ``controller.command_qos``, not retained)
only when the encoded payload changes, and again every ``controller.reassert``.
A released opening gets one retained release notice on its opening state topic,
not a command. In observe-only mode nothing is commanded; everything else is
published. Zone state (every evaluation), interlock (on change), opening state
(on change) and the online/offline status are retained and published again
after every reconnect (a restarted broker may have lost them); commands are
not repeated on reconnect.

Simulated clock
---------------
With ``sim_clock=True`` (``ventsup run --sim-clock``) the daemon takes its
time from a simulator over MQTT instead of the wall clock, in lock-step: see
:mod:`ventsup.drivers.simclock` for why, the protocol and the ordering
argument. Only the worker's loop differs (:meth:`Service._sim_loop`: it
drives the MQTT client itself, without paho's network thread, and writes a
step's outputs and ack as one burst); the supervisor, and so decoding, urgent
evaluation, commands, states and the ledger, are those of a live run. The
ledger defaults to a ``-sim`` file beside the site's, so that simulated
records never mix with real ones.

Restart safety
--------------
Zone states whose targets, override or alarm latch changed are saved to the
ledger before anything is published; other changes are saved within
``controller.state_save_interval``. At start the states are restored and the
held samples rebuilt from the recorded messages that are not stale yet, so the
first evaluation sees what the last one saw and re-asserts the same targets.
"""

from __future__ import annotations

import contextlib
import logging
import math
import queue
import threading
import time
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ventsup.config.model import SiteConfig
from ventsup.drivers.messages import Topics
from ventsup.drivers.simclock import (
    CountingPublisher,
    Tick,
    ack_payload,
    ack_topic,
    clock_topic,
    parse_tick,
    sim_ledger_path,
    step_order,
    watched_topics,
)
from ventsup.drivers.supervisor import Publisher, Supervisor
from ventsup.edges.clock import Clock, ManualClock, WallClock
from ventsup.edges.ledger import Ledger, LedgerError
from ventsup.edges.mqtt import Message, MqttClient, MqttError, MqttSettings, Subscribed

__all__ = ["ReportJob", "Service", "Stop", "default_ledger_path"]

_log = logging.getLogger("ventsup.service")

# After the broker answers the subscriptions, retained values arrive at once; wait
# this long for them before the first evaluation (never longer than startup_settle).
_RETAINED_QUIET = 0.25
# With a simulated clock, the longest the worker waits in the network before it
# looks for a stop request [s].
_SIM_POLL = 0.2


def default_ledger_path(config: SiteConfig, config_dir: Path) -> Path:
    """``controller.ledger`` (or ``var/ventsup-<slug>.db``), relative to the config's folder."""
    name = config.ledger_name
    path = Path(name).expanduser()
    return path if path.is_absolute() else config_dir / path


# --------------------------------------------------------------------------- service


@dataclass
class _SimSchedule:
    """What is next due in simulated time [s since the epoch]."""

    next_tick: float = math.inf


@dataclass
class _SimStep:
    """The step being gathered by the simulated clock's worker (see ``Service._sim_loop``)."""

    clock_topic: str
    order: Mapping[str, tuple[int, int]]
    schedule: _SimSchedule = field(default_factory=_SimSchedule)
    waiting: Tick | None = None  # its clock message, once it came
    pending: list[Message] = field(default_factory=list)  # its messages so far
    points: int = 0  # point messages in pending
    retained: int = 0  # retained messages ignored since the start

    def clear(self) -> None:
        """Start gathering the next step."""
        self.waiting, self.pending, self.points = None, [], 0


@dataclass(frozen=True)
class Stop:
    """Asks the worker to stop (put on its queue by :meth:`Service.stop`)."""

    reason: str = "stop requested"


class ReportJob:
    """The hourly report catch-up, on a thread of its own, off the control loop.

    Once soon after start and then every hour it writes whatever closed
    month's report and whatever day's summary line is missing
    (:func:`ventsup.drivers.reporting.catch_up`, idempotent, in the site's
    time zone), so downtime is caught up too. A plain interval in real time
    replaces calendar triggers on purpose: cron-style triggers skip runs
    across DST changes (see shared library notes). A month of records takes
    seconds to report, which must never delay a decision.
    """

    def __init__(
        self,
        config: SiteConfig,
        ledger: Ledger,
        clock: Clock,
        out_dir: Path,
        *,
        first: float = 60.0,
        interval: float = 3600.0,
    ) -> None:
        self.config = config
        self.ledger = ledger
        self.clock = clock
        self.out_dir = out_dir
        self.first = first
        self.interval = interval
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None

    def start(self) -> None:
        """Start the thread (a daemon thread: it never holds up a stop)."""
        self._thread = threading.Thread(target=self._run, name="ventsup-reports", daemon=True)
        self._thread.start()

    def stop(self, timeout: float = 5.0) -> None:
        """Ask the thread to stop and wait up to ``timeout`` seconds for it."""
        self._stop.set()
        if self._thread is not None:
            self._thread.join(timeout)

    def run_once(self) -> int:
        """Write what is missing now; returns the number of files and lines written."""
        from ventsup.drivers.reporting import catch_up  # pandas: only when reports run

        done = catch_up(self.config, self.ledger, self.clock.now(), self.out_dir)
        for paths in done.reports:
            _log.info("wrote the report %s", paths.html)
        return len(done.reports) + len(done.lines)

    def _run(self) -> None:
        wait = self.first
        while not self._stop.wait(wait):
            wait = self.interval
            try:
                self.run_once()
            except Exception:
                _log.exception("the report catch-up failed; trying again in an hour")


class Service:
    """The daemon: a worker thread around a :class:`Supervisor`, fed by the MQTT client.

    ``start()`` opens the ledger, restores the states, connects to the broker
    (raising :class:`~ventsup.config.errors.VentsupError` subclasses with what
    to check) and starts the worker; ``stop()`` asks it to stop; ``wait()``
    joins it. On stop the worker publishes ``offline``, writes every pending
    record and closes the ledger.

    With ``sim_clock`` the time comes from a simulator (see the module
    docstring); the service then keeps its own :class:`ManualClock` (no
    ``clock`` may be given) and restores the states at the first simulated time.
    """

    def __init__(
        self,
        config: SiteConfig,
        *,
        config_dir: Path,
        observe: bool = False,
        ledger_path: Path | None = None,
        clock: Clock | None = None,
        environ: Mapping[str, str] | None = None,
        sim_clock: bool = False,
    ) -> None:
        self.config = config
        self.config_dir = config_dir
        self.observe = observe
        self.sim_clock = sim_clock
        if ledger_path is None:
            ledger_path = default_ledger_path(config, config_dir)
            if sim_clock:
                ledger_path = sim_ledger_path(ledger_path)
        self.ledger_path = ledger_path
        if sim_clock and clock is not None:
            raise ValueError("a service with sim_clock keeps its own ManualClock; give no clock")
        self.manual_clock = ManualClock() if sim_clock else None
        self.clock: Clock = (
            self.manual_clock if self.manual_clock is not None else (clock or WallClock())
        )
        self.environ = environ
        self.topics = Topics(config)
        self.queue: queue.Queue[Any] = queue.Queue(maxsize=100_000)
        self.supervisor: Supervisor | None = None
        self.mqtt: MqttClient | None = None
        self.ledger: Ledger | None = None
        self.error: BaseException | None = None
        self.outputs: CountingPublisher | None = None
        self._thread: threading.Thread | None = None
        self._stop = threading.Event()
        self.reports: ReportJob | None = None

    @property
    def subscriptions(self) -> list[str]:
        """The topic filters the daemon subscribes to: every point topic and override requests."""
        return [
            *dict.fromkeys(p.topic for p in self.config.points.values()),
            self.topics.override_filter,
            *([clock_topic(self.config)] if self.sim_clock else []),
        ]

    def start(self) -> None:
        """Open the ledger, restore, connect and start the worker thread.

        Raises
        ------
        LedgerError, MqttError
            The ledger cannot be used, or the broker cannot be reached or refuses us.
        """
        if self._thread is not None:
            raise RuntimeError("the service was already started")
        settings = MqttSettings.from_config(
            self.config.mqtt,
            client_id=self.config.client_id,
            base_dir=self.config_dir,
            status_topic=self.topics.status,
            environ=self.environ,
        )
        self.ledger = Ledger.open(self.ledger_path, retention=self.config.controller.retention)
        try:
            # With a simulated clock the worker drives the network itself (see _sim_loop).
            self.mqtt = MqttClient(
                settings,
                self.queue,
                subscriptions=self.subscriptions,
                clock=self.clock,
                network_thread=not self.sim_clock,
            )
            publisher: Publisher = self.mqtt
            if self.sim_clock:
                publisher = self.outputs = CountingPublisher(self.mqtt, watched_topics(self.config))
            self.supervisor = Supervisor(
                self.config, publisher, ledger=self.ledger, observe=self.observe
            )
            if not self.sim_clock:  # with a simulated clock: at the first simulated time
                self.supervisor.restore(self.clock.now())
            _log.info(
                "connecting to the broker at %s as %s; topics under %s",
                settings.where,
                settings.client_id,
                self.topics.prefix,
            )
            self.mqtt.connect()
        except BaseException:
            self.ledger.close()
            raise
        self._thread = threading.Thread(target=self._work, name="ventsup-worker", daemon=True)
        self._thread.start()
        if not self.sim_clock:  # simulated runs report through the simulator's own tools
            self.reports = ReportJob(
                self.config, self.ledger, self.clock, self.ledger_path.parent / "reports"
            )
            self.reports.start()

    def stop(self, reason: str = "stop requested") -> None:
        """Ask the worker to stop; returns at once (see :meth:`wait`)."""
        self._stop.set()
        # On a full queue the worker sees the event at its next wake-up.
        with contextlib.suppress(queue.Full):
            self.queue.put_nowait(Stop(reason))

    def wait(self, timeout: float | None = None) -> bool:
        """Wait for the worker to finish; True once it has."""
        if self._thread is None:
            return True
        self._thread.join(timeout)
        return not self._thread.is_alive()

    @property
    def running(self) -> bool:
        """True while the worker thread runs."""
        return self._thread is not None and self._thread.is_alive()

    @property
    def exit_code(self) -> int:
        """0 after a requested stop, 1 when the worker ended on an error."""
        return 0 if self.error is None else 1

    # ----------------------------------------------------------------- worker

    def _work(self) -> None:
        why = "stop requested"
        try:
            why = self._sim_loop() if self.sim_clock else self._loop()
        except BaseException as exc:
            self.error = exc
            why = f"internal error: {exc!r}"
            _log.exception("the worker stopped on an error")
        finally:
            self._shutdown(why)

    def _loop(self) -> str:
        sup = self.supervisor
        assert sup is not None and self.mqtt is not None
        controller = self.config.controller
        now = time.monotonic()
        settle_until = now + controller.startup_settle
        next_tick = math.inf
        next_heartbeat = now + min(controller.heartbeat, max(controller.startup_settle, 0.5))
        while True:
            now = time.monotonic()
            t = self.clock.now()
            deadlines = [next_heartbeat, next_tick if sup.ready else settle_until]
            for epoch in (sup.next_reassert(), sup.next_expiry()):
                if epoch is not None:
                    deadlines.append(now + (epoch - t))
            write = sup.next_write()
            if write is not None:
                deadlines.append(write)
            timeout = max(0.0, min(deadlines) - now)
            try:
                item = self.queue.get(timeout=timeout)
            except queue.Empty:
                item = None
            if isinstance(item, Stop) or self._stop.is_set():
                return item.reason if isinstance(item, Stop) else "stop requested"
            now = time.monotonic()
            t = self.clock.now()
            if item is not None:
                if isinstance(item, Subscribed) and not sup.ready:
                    settle_until = min(settle_until, now + _RETAINED_QUIET)
                try:
                    sup.handle(item, t)
                except Exception:
                    # One bad item must never stop the daemon.
                    sup.counts["evaluation_errors"] += 1
                    _log.exception("handling %s failed; carrying on", type(item).__name__)
            if not sup.ready and now >= settle_until:
                sup.begin(t)
                next_tick = now + controller.tick
            elif sup.ready and now >= next_tick:
                sup.evaluate(self.config.zones, sup.eval_time(t), "tick")
                next_tick += controller.tick
                if next_tick <= now:  # late (a busy or suspended host): one tick, not a burst
                    next_tick = now + controller.tick
            sup.expire(t)
            sup.reassert(t)
            if now >= next_heartbeat:
                sup.heartbeat(t, self._heartbeat_extra())
                next_heartbeat += controller.heartbeat
                if next_heartbeat <= now:
                    next_heartbeat = now + controller.heartbeat
            sup.maintain(t)

    def _heartbeat_extra(self) -> dict[str, Any]:
        assert self.mqtt is not None
        stats = self.mqtt.stats
        return {
            "mqtt": {
                "connected": self.mqtt.connected,
                "connects": stats.connects,
                "disconnects": stats.disconnects,
                "callback_errors": stats.callback_errors,
                "dropped": stats.dropped,
                "pending": stats.pending,
                "refused": stats.refused,
            },
            "queue": self.queue.qsize(),
        }

    # ----------------------------------------------------------------- simulated clock

    def _sim_loop(self) -> str:
        """The worker with a simulated clock: act on clock messages only (see ``simclock``).

        The worker drives the MQTT client itself (made without a network
        thread): in lock-step one side always waits for the other, so a
        second thread would only add a hand-off per message. Point and
        override messages wait in a list until the clock message of their
        step, and the clock message waits until as many point messages as it
        announces have arrived. Broker events (connect, subscribe, refusals)
        are handled when they come. The ledger is written and the heartbeat
        published on the wall clock, as in a live run: that changes when, not
        what, and the heartbeat says the process is alive.
        """
        sup, clock, inbox, mqtt = self.supervisor, self.manual_clock, self.queue, self.mqtt
        assert sup is not None and clock is not None and mqtt is not None
        step = _SimStep(clock_topic(self.config), step_order(self.config))
        next_heartbeat = time.monotonic()
        _log.info("simulated clock: the time comes from %s", step.clock_topic)
        while True:
            if inbox.empty():
                deadlines = [next_heartbeat]
                write = sup.next_write()
                if write is not None:
                    deadlines.append(write)
                # Short polls: a stop request from another thread is seen within one.
                mqtt.poll(min(_SIM_POLL, max(0.0, min(deadlines) - time.monotonic())))
            while True:  # what the poll brought (callbacks ran in this thread)
                try:
                    item = inbox.get_nowait()
                except queue.Empty:
                    break
                if isinstance(item, Stop):
                    return item.reason
                self._sim_item(item, step)
            if self._stop.is_set():
                return "stop requested"
            now = time.monotonic()
            if now >= next_heartbeat:
                sup.heartbeat(clock.now(), self._heartbeat_extra())
                next_heartbeat = now + self.config.controller.heartbeat
            sup.maintain(clock.now())

    def _sim_item(self, item: object, step: _SimStep) -> None:
        """One item from the broker: a step's message, its clock message, or a broker event."""
        sup, clock = self.supervisor, self.manual_clock
        assert sup is not None and clock is not None
        if not isinstance(item, Message):
            try:
                sup.handle(item, clock.now())
            except Exception:
                sup.counts["evaluation_errors"] += 1
                _log.exception("handling %s failed; carrying on", type(item).__name__)
            return
        if item.retain:  # a value from before the simulation
            step.retained += 1
            if step.retained == 1:
                _log.info("simulated clock: ignoring retained %s", item.topic)
            return
        if item.topic != step.clock_topic:
            step.pending.append(item)
            step.points += item.topic in sup.topic_points
        else:
            if step.waiting is not None:
                _log.warning(
                    "simulated clock: step %d got %d of %d point messages before the "
                    "next clock message; handling it with those",
                    step.waiting.step,
                    step.points,
                    step.waiting.messages,
                )
                self._sim_step(step)
            try:
                step.waiting = parse_tick(item.payload)
            except ValueError as exc:
                self._sim_ack(None, str(exc))
        if step.waiting is not None and step.points >= step.waiting.messages:
            self._sim_step(step)

    def _sim_step(self, step: _SimStep) -> None:
        """Handle the gathered step: its messages, what is due, then the acknowledgement;
        then start gathering the next one."""
        tick = step.waiting
        assert tick is not None and self.mqtt is not None and self.manual_clock is not None
        try:
            self.manual_clock.set(tick.t)
        except ValueError as exc:
            self._sim_ack(tick, f"step {tick.step}: {exc}")
        else:
            with self.mqtt.corked():  # the step's outputs and its ack in few segments
                self._sim_outputs(tick, step)
        step.clear()

    def _sim_outputs(self, tick: Tick, step: _SimStep) -> None:
        sup = self.supervisor
        assert sup is not None
        messages, order, schedule = step.pending, step.order, step.schedule
        t = tick.t
        controller = self.config.controller
        if not sup.ready:
            sup.restore(t)
        # One order whatever the broker's: the site's points, urgent ones last, then the rest.
        ranked = sorted(
            enumerate(messages), key=lambda item: (*order.get(item[1].topic, (2, 0)), item[0])
        )
        for _, message in ranked:
            try:
                sup.handle(message.at(t), t)
            except Exception:
                sup.counts["evaluation_errors"] += 1
                _log.exception("handling a message on %s failed; carrying on", message.topic)
        if not sup.ready:
            sup.begin(t)
            schedule.next_tick = t + controller.tick
        elif t >= schedule.next_tick:
            sup.evaluate(self.config.zones, sup.eval_time(t), "tick")
            schedule.next_tick += controller.tick
            if schedule.next_tick <= t:
                schedule.next_tick = t + controller.tick
        sup.expire(t)
        sup.reassert(t)
        self._sim_ack(tick, None)

    def _sim_ack(self, tick: Tick | None, error: str | None) -> None:
        """Publish the acknowledgement, after every output of the step (same connection, QoS 1)."""
        sup, outputs = self.supervisor, self.outputs
        assert sup is not None and outputs is not None and self.mqtt is not None
        if error is not None:
            _log.error("simulated clock: %s", error)
        payload = ack_payload(
            tick,
            outputs=outputs.count,
            accepted=sup.counts["accepted"],
            rejected=sum(sup.rejected.values()),
            error=error,
        )
        try:
            self.mqtt.publish(ack_topic(self.config), payload, qos=1)
        except MqttError as exc:
            _log.error("simulated clock: cannot acknowledge: %s", exc)

    def _shutdown(self, why: str) -> None:
        _log.info("stopping: %s", why)
        if self.reports is not None:
            self.reports.stop()  # before the ledger closes under it
        try:
            if self.mqtt is not None:
                self.mqtt.close()
        except Exception:
            _log.exception("closing the MQTT connection failed")
        try:
            if self.supervisor is not None:
                self.supervisor.shutdown(self.clock.now(), why)
        except Exception:
            _log.exception("writing the ledger at shutdown failed")
        try:
            if self.ledger is not None:
                self.ledger.close()
        except LedgerError:
            _log.exception("closing the ledger failed")
        _log.info("stopped")
