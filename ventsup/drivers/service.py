"""The live daemon behind ``ventsup run``: MQTT in, the core, MQTT and the ledger out.

Threads and who owns what
-------------------------
One worker thread owns all state (held samples, zone states, what was last
commanded, counters, the ledger's batch writer) and is the only caller of the
core. paho's network thread only puts items on the worker's queue (see
:mod:`ventsup.edges.mqtt`); :meth:`Service.stop` (from the main thread's
signal handler, or a test) puts a :class:`Stop` item.
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
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ventsup.config.model import SiteConfig
from ventsup.drivers.messages import Topics
from ventsup.drivers.supervisor import Supervisor
from ventsup.edges.clock import Clock, WallClock
from ventsup.edges.ledger import Ledger, LedgerError
from ventsup.edges.mqtt import MqttClient, MqttSettings, Subscribed

__all__ = ["Service", "Stop", "default_ledger_path"]

_log = logging.getLogger("ventsup.service")

# After the broker answers the subscriptions, retained values arrive at once; wait
# this long for them before the first evaluation (never longer than startup_settle).
_RETAINED_QUIET = 0.25


def default_ledger_path(config: SiteConfig, config_dir: Path) -> Path:
    """``controller.ledger`` (or ``var/ventsup-<slug>.db``), relative to the config's folder."""
    name = config.controller.ledger or f"var/ventsup-{config.slug}.db"
    path = Path(name).expanduser()
    return path if path.is_absolute() else config_dir / path


# --------------------------------------------------------------------------- service


@dataclass(frozen=True)
class Stop:
    """Asks the worker to stop (put on its queue by :meth:`Service.stop`)."""

    reason: str = "stop requested"


class Service:
    """The daemon: a worker thread around a :class:`Supervisor`, fed by the MQTT client.

    ``start()`` opens the ledger, restores the states, connects to the broker
    (raising :class:`~ventsup.config.errors.VentsupError` subclasses with what
    to check) and starts the worker; ``stop()`` asks it to stop; ``wait()``
    joins it. On stop the worker publishes ``offline``, writes every pending
    record and closes the ledger.
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
    ) -> None:
        self.config = config
        self.config_dir = config_dir
        self.observe = observe
        self.ledger_path = (
            ledger_path if ledger_path is not None else default_ledger_path(config, config_dir)
        )
        self.clock = clock if clock is not None else WallClock()
        self.environ = environ
        self.topics = Topics(config)
        self.queue: queue.Queue[Any] = queue.Queue(maxsize=100_000)
        self.supervisor: Supervisor | None = None
        self.mqtt: MqttClient | None = None
        self.ledger: Ledger | None = None
        self.error: BaseException | None = None
        self._thread: threading.Thread | None = None
        self._stop = threading.Event()

    @property
    def subscriptions(self) -> list[str]:
        """The topic filters the daemon subscribes to: every point topic and override requests."""
        return [
            *dict.fromkeys(p.topic for p in self.config.points.values()),
            self.topics.override_filter,
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
            self.mqtt = MqttClient(
                settings, self.queue, subscriptions=self.subscriptions, clock=self.clock
            )
            self.supervisor = Supervisor(
                self.config, self.mqtt, ledger=self.ledger, observe=self.observe
            )
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
            why = self._loop()
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
                stats = self.mqtt.stats
                sup.heartbeat(
                    t,
                    {
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
                    },
                )
                next_heartbeat += controller.heartbeat
                if next_heartbeat <= now:
                    next_heartbeat = now + controller.heartbeat
            sup.maintain(t)

    def _shutdown(self, why: str) -> None:
        _log.info("stopping: %s", why)
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
