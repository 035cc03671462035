"""The simulated clock of ``ventsup run --sim-clock``: lock-step with a simulator over MQTT.

Why a clock topic, and not a faster wall clock
----------------------------------------------
A simulator that drives the daemon through the broker must know when the
daemon has handled a step before it moves its actuators and advances its
building; and the run must give the same decisions every time. Speeding up
the wall clock gives neither: the daemon would tick whenever its host gets
round to it. So in this mode the daemon has no time of its own. The
simulator publishes the time, and the daemon acts only when told: on each
clock message it sets its :class:`~ventsup.edges.clock.ManualClock`, handles
the sensor messages of that step stamped with that time, runs what is due
(the tick, override expiry, re-asserts, heartbeat; all in simulated time),
and acknowledges once its outputs for the step are published. Everything
else of the daemon (decoding, the hold, urgent evaluation on rain, smoke and
wind, commands, states, the ledger) is the very code of a live run: the
mode adds a loop (:meth:`~ventsup.drivers.service.Service.start` with
``sim_clock=True``), not a second controller.

Protocol (topics under the controller's ``prefix``; never retained)
------------------------------------------------------------------
``<prefix>/sim/clock``, simulator to controller::

    {"t": 1719943200.0, "step": 17, "messages": 21}

``t`` the step's time [s since the epoch, UTC], ``step`` its number (echoed),
``messages`` how many messages the simulator published on point topics for
this step, all before this one.

``<prefix>/sim/ack``, controller to simulator, after the step's outputs::

    {"t": 1719943200.0, "step": 17, "outputs": 5012, "accepted": 357,
     "rejected": 0, "error": null}

``outputs`` counts every message the controller has published so far on the
topics a simulator watches (:func:`watched_topics`: opening commands, zone
states, opening states); ``accepted`` and ``rejected`` count point values so
far; ``error`` says why a clock message was refused (unreadable, or a time
earlier than the last one), else null.

Ordering argument
-----------------
MQTT promises order only per topic (for one publisher, one subscriber and
one QoS; MQTT 3.1.1 section 4.6, MQTT 5 section 4.6); mosquitto in practice
also keeps the order across topics of one connection, but the protocol does
not rely on it:

1. Lock-step: the simulator publishes step k+1 only after it has the ack of
   step k, and the controller publishes that ack only after it has handled
   every message of step k. So any point message that reaches the controller
   after it acknowledged step k belongs to step k+1, and any output that
   reaches the simulator after it received the ack of step k and all the
   outputs the ack counts belongs to step k+1.
2. Counts, not arrival order: the clock message says how many point messages
   the step has; the controller holds the clock message until that many have
   arrived. The ack carries the running count of outputs; the simulator waits
   until it has received that many. A message delivered late, across topics,
   is still waited for.
3. Per-topic order is enough for the content, which is read only once the
   step is complete: the last command on an opening's topic is the last one
   sent, the last opening state says whether it is released, and the last
   state on a zone's topic is the zone's last evaluation of the step.
4. One processing order: the controller handles a step's messages in the
   order of :func:`step_order` (the site file's points, the points that
   trigger an urgent evaluation last, then override requests), whatever order
   they arrived in, so two runs evaluate with the same partial inputs and
   record the same decisions; urgent points last also means the evaluation
   they trigger sees every value of the step, as the in-process loop does.

Quality of service: the simulator publishes its point values and clock
messages at QoS 0 and subscribes at QoS 0; the controller publishes as in a
live run (commands at ``controller.command_qos``, states at 1) and the ack at
QoS 1. The counts above, not MQTT acknowledgements, say that a step is
complete, so QoS 1 would add a round of acknowledgements per message and no
guarantee: a message the broker loses (a restart in the middle of a step)
leaves its step short, and the simulator stops with an error that says what
is missing instead of going on without it.

Speed: both sides drive their MQTT client from the one thread that waits
(:class:`~ventsup.edges.mqtt.MqttClient` with ``network_thread=False``), and
write a step's messages corked (:meth:`~ventsup.edges.mqtt.MqttClient.corked`),
so that a step costs a few process switches rather than one per message.

Retained messages are stale in a simulation (a value from before the run) and
are dropped by both sides. Override requests (``ventsup override``) are
applied at the next step, in simulated time. The ledger is written and the
heartbeat published on the wall clock, as in a live run (the heartbeat says
the process is alive; its ``t`` is the simulated time). A simulated clock
never runs back: one run per daemon start, with a fresh ledger.
"""

from __future__ import annotations

import json
import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ventsup.config.model import SiteConfig
from ventsup.drivers.messages import Topics, json_payload
from ventsup.drivers.supervisor import Publisher

__all__ = [
    "CountingPublisher",
    "Tick",
    "ack_payload",
    "ack_topic",
    "clock_topic",
    "parse_tick",
    "sim_ledger_path",
    "step_order",
    "watched_topics",
]


def clock_topic(config: SiteConfig) -> str:
    """``<prefix>/sim/clock``: where the simulator publishes the time."""
    return f"{config.topic_prefix}/sim/clock"


def ack_topic(config: SiteConfig) -> str:
    """``<prefix>/sim/ack``: where the controller says a step is handled."""
    return f"{config.topic_prefix}/sim/ack"


def watched_topics(config: SiteConfig) -> frozenset[str]:
    """The controller's outputs a simulator needs: commands, zone states, opening states."""
    topics = Topics(config)
    watched: set[str] = set()
    for zone_name, zone in config.zones.items():
        watched.add(topics.state(zone_name))
        for opening in zone.openings:
            watched.add(topics.command(zone_name, opening))
            watched.add(topics.opening_state(zone_name, opening))
    return frozenset(watched)


def _urgent_points(config: SiteConfig) -> set[str]:
    """Points whose change can trigger an evaluation at once (see ``urgent_zones``)."""
    outdoor = config.outdoor
    urgent = {outdoor.rain, outdoor.wind_speed}
    if outdoor.wind_direction is not None:
        urgent.add(outdoor.wind_direction)
    for zone in config.zones.values():
        urgent.update(zone.smoke_alarms)
    return urgent


def step_order(config: SiteConfig) -> dict[str, tuple[int, int]]:
    """Point topic -> its sort key within a step: (0 or 1 for urgent, index in the site file).

    Topics not listed (override requests, unknown ones) come after every point topic.
    """
    urgent = _urgent_points(config)
    order: dict[str, tuple[int, int]] = {}
    for index, (name, point) in enumerate(config.points.items()):
        rank = 1 if name in urgent else 0
        known = order.get(point.topic)
        order[point.topic] = (max(rank, known[0]), known[1]) if known else (rank, index)
    return order


def sim_ledger_path(path: Path) -> Path:
    """``var/ventsup-x.db`` -> ``var/ventsup-x-sim.db``: simulated records never mix with a site's."""
    return path.with_name(f"{path.stem}-sim{path.suffix}")


@dataclass(frozen=True)
class Tick:
    """One clock message: the step's time [s], its number, how many point messages it has."""

    t: float
    step: int
    messages: int = 0


def parse_tick(payload: bytes) -> Tick:
    """Read a clock message.

    Raises
    ------
    ValueError
        Not a JSON object with a finite ``t``, an integer ``step`` and a
        non-negative integer ``messages`` (optional, default 0).
    """
    try:
        data = json.loads(payload.decode("utf-8"))
    except (UnicodeDecodeError, ValueError, RecursionError):
        raise ValueError(
            'the clock message is not JSON; expected {"t": <s>, "step": <n>, "messages": <n>}'
        ) from None
    if not isinstance(data, dict):
        raise ValueError("the clock message must be a JSON object")
    t, step, messages = data.get("t"), data.get("step"), data.get("messages", 0)
    if isinstance(t, bool) or not isinstance(t, int | float) or not math.isfinite(t):
        raise ValueError(f"'t' must be a finite number of seconds since the epoch, got {t!r}")
    if isinstance(step, bool) or not isinstance(step, int):
        raise ValueError(f"'step' must be an integer, got {step!r}")
    if isinstance(messages, bool) or not isinstance(messages, int) or messages < 0:
        raise ValueError(f"'messages' must be a count (0 or more), got {messages!r}")
    return Tick(float(t), step, messages)


def ack_payload(
    tick: Tick | None,
    *,
    outputs: int,
    accepted: int,
    rejected: int,
    error: str | None = None,
) -> bytes:
    """The acknowledgement of ``tick`` (None: a clock message that could not be read)."""
    body: Mapping[str, Any] = {
        "t": None if tick is None else tick.t,
        "step": None if tick is None else tick.step,
        "outputs": outputs,
        "accepted": accepted,
        "rejected": rejected,
        "error": error,
    }
    return json_payload(body)


class CountingPublisher:
    """A :class:`~ventsup.drivers.supervisor.Publisher` that counts publishes to ``watched``.

    Only publishes handed on without an error count: those are the ones a
    subscriber can receive.
    """

    def __init__(self, inner: Publisher, watched: Iterable[str]) -> None:
        self.inner = inner
        self.watched = frozenset(watched)
        self.count = 0

    def publish(
        self, topic: str, payload: bytes | str, *, qos: int = 1, retain: bool = False
    ) -> int:
        """Publish through the inner publisher; count it if ``topic`` is watched."""
        mid = self.inner.publish(topic, payload, qos=qos, retain=retain)
        if topic in self.watched:
            self.count += 1
        return mid
