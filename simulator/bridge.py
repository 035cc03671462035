"""The simulator over MQTT, in lock-step with a running ``ventsup run --sim-clock``.

:class:`MqttController` is a :class:`~simulator.loop.Controller` for
:func:`simulator.loop.run`: the same step loop as in process, but each
step's decisions come from the real daemon through a real broker. At the
first call of a step it plays the site's gateways and actuators:

1. publishes every point value the loop published for the step on the
   point's own topic, in the point's own format (unit, JSON field, words),
   in :func:`~ventsup.drivers.simclock.step_order` (urgent points last),
   then the clock message ``<prefix>/sim/clock`` with the step's time and
   how many point messages it has (all at QoS 0, written to the socket as
   one burst; the counts make the step complete, see
   :mod:`ventsup.drivers.simclock`);
2. waits for the acknowledgement ``<prefix>/sim/ack`` and for every output
   the acknowledgement counts (commands, zone states, opening states); no
   answer within ``timeout`` raises :class:`~simulator.errors.ControllerError`
   saying what was missing;
3. returns, per zone, a :class:`~ventsup.core.state.Decision` whose targets
   are the commands as the actuators received them (decoded from the
   command payloads: ``percent`` and ``fraction`` round as they do on a real
   site), ``None`` for an opening the controller released (its opening state
   says so), and whose mode, layer, cause, reason and interlock are the
   zone's last published state.

The loop then moves the actuators and advances the building, and the next
step is published only then: the daemon's time is the simulator's (see
:mod:`ventsup.drivers.simclock` for the protocol and why order holds), so a
run is deterministic and as fast as the two processes and the broker allow.

Start the daemon first (``ventsup run SITE --sim-clock``), with a fresh
ledger, then the simulator (``python -m simulator --site SITE --mqtt``); the
simulator waits for the controller's retained ``online`` status before its
first step. One simulator per controller.

Limits: points that share a topic must all have a ``json_path`` (their
values are published as one JSON object); a value dropped out of such a
topic makes the decoder reject the message for that point (counted as
rejected) rather than publishing nothing. A broker that loses messages (a
restart in the middle of a step: they are QoS 0) leaves the step short; the
bridge then stops with a :class:`~simulator.errors.ControllerError` saying
what is missing, and the run has to be started again.
"""

from __future__ import annotations

import json
import queue
import time
import uuid
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from types import TracebackType
from typing import Any

import numpy as np
import pandas as pd
from pydantic import ValidationError

from simulator.building import Building
from simulator.errors import ControllerError, SimulatorError
from simulator.loop import CoreController, Result, run
from simulator.scenario import Scenario
from simulator.weather import Weather
from ventsup.config.model import Point, PointKind, SiteConfig
from ventsup.config.units import parse_quantity
from ventsup.core.inputs import Held
from ventsup.core.state import Cause, Decision, Layer, Mode, ZoneState
from ventsup.drivers.messages import Topics
from ventsup.drivers.simclock import (
    ack_topic,
    clock_topic,
    step_order,
    watched_topics,
)
from ventsup.edges.codec import encode_command
from ventsup.edges.mqtt import (
    Disconnected,
    Message,
    MqttClient,
    MqttError,
    MqttSettings,
    Subscribed,
)

__all__ = [
    "BridgeStats",
    "CommandedCore",
    "MqttController",
    "decode_command",
    "encode_values",
    "open_hours",
    "run_mqtt",
]


# --------------------------------------------------------------------------- payloads


def _from_si(point: Point) -> Callable[[float], float]:
    """SI -> the point's unit: the inverse of the decoder's affine unit conversion."""
    quantity = point.kind.quantity
    if point.unit is None or quantity is None:
        return float
    zero = parse_quantity(f"0 {point.unit}", quantity)
    scale = (parse_quantity(f"1000000 {point.unit}", quantity) - zero) / 1e6
    return lambda value: (value - zero) / scale


@dataclass(frozen=True)
class _TopicPlan:
    """How the points of one topic are published (internal)."""

    topic: str
    points: tuple[tuple[str, Point, Callable[[float], float]], ...]
    as_json: bool


def _plan(config: SiteConfig) -> list[_TopicPlan]:
    by_topic: dict[str, list[tuple[str, Point, Callable[[float], float]]]] = {}
    for name, point in config.points.items():
        by_topic.setdefault(point.topic, []).append((name, point, _from_si(point)))
    order = step_order(config)
    plans = []
    for topic in sorted(by_topic, key=lambda topic: order[topic]):
        points = by_topic[topic]
        paths = [point.json_path for _, point, _ in points]
        if len(points) > 1 and None in paths:
            names = ", ".join(name for name, _, _ in points)
            raise SimulatorError(
                f"points {names} share the topic {topic!r} and not all of them have a "
                "json_path: the simulator cannot publish them as one message"
            )
        for path in paths:
            if path is not None and any(part.isdigit() for part in path.split(".")):
                raise SimulatorError(
                    f"json_path {path!r} on {topic!r} indexes a list; the simulator "
                    "publishes JSON objects only"
                )
        plans.append(_TopicPlan(topic, tuple(points), paths[0] is not None))
    return plans


def _word(point: Point, value: bool) -> str:
    words = point.true_words if value else point.false_words
    return words[0] if words else ("1" if value else "0")


def encode_values(plan: _TopicPlan, values: Mapping[str, float | bool]) -> bytes:
    """The payload a gateway would send for ``values`` (SI, by point name) on ``plan.topic``."""
    if not plan.as_json:
        name, point, convert = plan.points[0]
        value = values[name]
        if point.kind is PointKind.BINARY:
            return _word(point, bool(value)).encode()
        return repr(convert(float(value))).encode()
    document: dict[str, Any] = {}
    for name, point, convert in plan.points:
        if name not in values:
            continue
        value = values[name]
        encoded: Any = bool(value) if point.kind is PointKind.BINARY else convert(float(value))
        assert point.json_path is not None
        *parents, leaf = point.json_path.split(".")
        node = document
        for part in parents:
            node = node.setdefault(part, {})
        node[leaf] = encoded
    return json.dumps(document, allow_nan=False).encode()


def decode_command(payload: bytes, format: str) -> float:
    """An opening command as the actuator reads it: fraction 0-1.

    The inverse of :func:`ventsup.edges.codec.encode_command`.

    Raises
    ------
    ControllerError
        A payload that is not a command in ``format``.
    """
    text = payload.decode("utf-8", "replace").strip()
    try:
        if format == "fraction":
            value = float(text)
        elif format == "percent":
            value = float(text) / 100.0
        elif format == "words" and text.casefold() in ("open", "closed"):
            value = 1.0 if text.casefold() == "open" else 0.0
        else:
            raise ValueError(text)
    except ValueError:
        raise ControllerError(f"cannot read the command {text!r} as {format}") from None
    if not 0.0 <= value <= 1.0:
        raise ControllerError(f"command {text!r} is outside 0-100 %")
    return value


# --------------------------------------------------------------------------- controller


@dataclass
class BridgeStats:
    """What a bridge did: steps, messages each way, and the wall time spent waiting [s]."""

    steps: int = 0
    published: int = 0
    outputs: int = 0
    unexpected_outputs: int = 0
    accepted: int = 0
    rejected: int = 0
    waited: float = 0.0
    disconnects: int = 0
    notes: list[str] = field(default_factory=list)


class MqttController:
    """A :class:`~simulator.loop.Controller` that is ``ventsup run --sim-clock`` over MQTT.

    Use as a context manager (connects and waits for the controller's
    ``online`` status) or call :meth:`connect` and :meth:`close`.

    Parameters
    ----------
    config : SiteConfig
        The site the daemon runs (same points, zones, prefix).
    host, port : optional
        The broker; default the site's ``mqtt`` section.
    timeout : float, default 30.0
        Longest wait [s] for the controller, per step and at the start.
    config_dir : Path, optional
        Where the site's relative TLS and password files are (default: here).
    protocol : {"3.1.1", "5", None}, default "3.1.1"
        The MQTT version of the simulator's own connection (the gateways and
        actuators it plays); ``None``: the site's, as the daemon uses. Field
        gateways mostly speak 3.1.1, the simulator reads no MQTT 5 feature, and
        paho parses a 3.1.1 packet several times faster (MQTT 5 builds a
        properties object per packet); the daemon keeps the site's version
        whatever this is (the broker translates).
    """

    def __init__(
        self,
        config: SiteConfig,
        *,
        host: str | None = None,
        port: int | None = None,
        timeout: float = 30.0,
        config_dir: Path | None = None,
        protocol: str | None = "3.1.1",
    ) -> None:
        self.config = config
        self.timeout = timeout
        update: dict[str, Any] = {}
        if host is not None:
            update["host"] = host
        if port is not None:
            update["port"] = port
        if protocol is not None:
            update["protocol"] = protocol
        try:  # checked as the site file's mqtt section is (model_copy would not)
            mqtt = type(config.mqtt).model_validate({**config.mqtt.model_dump(), **update})
        except ValidationError as exc:
            why = "; ".join(f"{'.'.join(map(str, e['loc']))}: {e['msg']}" for e in exc.errors())
            raise SimulatorError(f"MQTT settings for the simulator: {why}") from None
        try:
            self.settings = MqttSettings.from_config(
                mqtt,
                client_id=f"ventsup-sim-{uuid.uuid4().hex[:12]}",
                base_dir=config_dir if config_dir is not None else Path.cwd(),
            )
        except MqttError as exc:
            raise SimulatorError(str(exc)) from exc
        topics = Topics(config)
        self.topics = topics
        self.clock_topic = clock_topic(config)
        self.ack_topic = ack_topic(config)
        self.watched = watched_topics(config)
        self.plan = _plan(config)
        self.commands: dict[str, tuple[str, str, str]] = {}
        self.opening_states: dict[str, tuple[str, str]] = {}
        self.zone_states = {topics.state(zone): zone for zone in config.zones}
        for zone_name, zone in config.zones.items():
            for name, opening in zone.openings.items():
                self.commands[topics.command(zone_name, name)] = (
                    zone_name,
                    name,
                    opening.command_format,
                )
                self.opening_states[topics.opening_state(zone_name, name)] = (zone_name, name)
        self.stats = BridgeStats()
        self.targets: dict[tuple[str, str], float] = {}
        self.released: set[tuple[str, str]] = set()
        self.states: dict[str, dict[str, Any]] = {}
        # One thread publishes a step and then waits for its answer: the client has no
        # network thread of its own; waiting polls it, and its callbacks fill this queue.
        self._sink: queue.Queue[Any] = queue.Queue()
        self._client: MqttClient | None = None
        self._t: float | None = None
        self._decisions: dict[str, Decision] = {}

    # ----------------------------------------------------------------- connection

    def connect(self) -> None:
        """Connect, subscribe and wait until the controller is online.

        Raises
        ------
        ControllerError
            The broker cannot be reached or refuses the subscriptions, or the
            controller is not online within ``timeout``.
        """
        client = MqttClient(
            self.settings,
            self._sink,
            subscriptions=[self.ack_topic, self.topics.status, *sorted(self.watched)],
            subscription_qos=0,
            network_thread=False,
        )
        try:
            client.connect()
        except MqttError as exc:
            raise ControllerError(str(exc)) from exc
        self._client = client
        try:
            self._wait_online()
        except BaseException:
            self.close()
            raise

    def _wait_online(self) -> None:
        deadline = time.monotonic() + self.timeout
        subscribed = online = False
        while not (subscribed and online):
            item = self._next(deadline)
            if item is None:
                raise ControllerError(
                    f"no controller online on {self.topics.status} at {self.settings.where} "
                    f"within {self.timeout:g} s; start `ventsup run SITE --sim-clock` with the "
                    "same site file first"
                    + ("" if subscribed else " (the broker did not confirm the subscriptions)")
                )
            if isinstance(item, Subscribed):
                if item.refused:
                    raise ControllerError(
                        f"the broker refused the subscriptions {', '.join(item.refused)}"
                    )
                subscribed = True
            elif isinstance(item, Message) and item.topic == self.topics.status:
                online = item.payload == b"online"

    def close(self) -> None:
        """Disconnect; idempotent."""
        if self._client is not None:
            self._client.close()
            self._client = None

    def __enter__(self) -> MqttController:
        self.connect()
        return self

    def __exit__(
        self,
        kind: type[BaseException] | None,
        value: BaseException | None,
        traceback: TracebackType | None,
    ) -> None:
        self.close()

    def _next(self, deadline: float) -> Any | None:
        """The next item from the broker, None once ``deadline`` [monotonic s] has passed."""
        sink, client = self._sink, self._client
        while True:
            try:
                return sink.get_nowait()
            except queue.Empty:
                pass
            remaining = deadline - time.monotonic()
            if remaining <= 0 or client is None:
                return None
            try:
                client.poll(remaining)
            except MqttError as exc:
                raise ControllerError(str(exc)) from exc

    # ----------------------------------------------------------------- the step

    def __call__(
        self, zone: str, held: Held, state: ZoneState, t: float
    ) -> tuple[Decision, ZoneState]:
        """The controller's decision for ``zone`` at ``t``; the first call of a step runs it."""
        if t != self._t:
            self._exchange(held, t)
            self._t = t
        return self._decisions[zone], state

    def _exchange(self, held: Held, t: float) -> None:
        client = self._client
        if client is None:
            raise ControllerError("the MQTT controller is not connected; use it in a with block")
        step = self.stats.steps
        messages = 0
        try:
            with client.corked():  # the step's messages in as few segments as the kernel can
                for plan in self.plan:
                    values = {}
                    for name, _, _ in plan.points:
                        sample = held.get(name)
                        if sample is not None and sample.t == t:
                            values[name] = sample.value
                    if values:
                        client.publish(plan.topic, encode_values(plan, values), qos=0)
                        messages += 1
                tick = {"t": t, "step": step, "messages": messages}
                client.publish(self.clock_topic, json.dumps(tick).encode(), qos=0)
        except MqttError as exc:
            raise ControllerError(f"step {step}: cannot publish: {exc}") from exc
        self.stats.published += messages + 1
        started = time.monotonic()
        self._await(step, t)
        self.stats.waited += time.monotonic() - started
        self.stats.steps += 1
        self._decisions = {zone: self._decision(zone, step) for zone in self.config.zones}

    def _await(self, step: int, t: float) -> None:
        """Wait for the ack of ``step`` and every output it counts.

        Outputs are read as they come (a later step's cannot come before this
        step is acknowledged and the next one published); the ack's count
        says when all of this step's are in, whatever order they arrived in.
        """
        deadline = time.monotonic() + self.timeout
        ack: dict[str, Any] | None = None
        watched = self.watched
        while ack is None or self.stats.outputs < ack["outputs"]:
            item = self._next(deadline)
            if item is None:
                raise self._no_answer(step, t, ack)
            if isinstance(item, Disconnected):
                self.stats.disconnects += 1
                self.stats.notes.append(f"step {step}: lost the broker ({item.reason})")
            if not isinstance(item, Message) or item.retain:  # retained: from before this run
                continue
            if item.topic in watched:
                self._output(item)
            elif item.topic == self.ack_topic:
                data = json.loads(item.payload)
                if data.get("error"):
                    raise ControllerError(
                        f"the controller refused step {step} ({_when(t)}): {data['error']}"
                    )
                if data.get("step") == step:
                    ack = data
                    self.stats.accepted = int(data["accepted"])
                    self.stats.rejected = int(data["rejected"])
            elif item.topic == self.topics.status and item.payload != b"online":
                raise ControllerError(
                    f"the controller went {item.payload.decode(errors='replace')} at step "
                    f"{step} ({_when(t)})"
                )
        assert ack is not None
        if self.stats.outputs > ack["outputs"]:
            self.stats.unexpected_outputs = self.stats.outputs - int(ack["outputs"])

    def _no_answer(self, step: int, t: float, ack: Mapping[str, Any] | None) -> ControllerError:
        where = f"step {step} ({_when(t)})"
        if ack is None:
            return ControllerError(
                f"no acknowledgement of {where} on {self.ack_topic} within {self.timeout:g} s; "
                f"is `ventsup run SITE --sim-clock` running for this site at "
                f"{self.settings.where}, alone, with its prefix {self.config.topic_prefix!r}?"
            )
        return ControllerError(
            f"{where} was acknowledged with {ack['outputs']} outputs in all, but only "
            f"{self.stats.outputs} arrived within {self.timeout:g} s"
        )

    def _output(self, message: Message) -> None:
        topic = message.topic
        self.stats.outputs += 1
        command = self.commands.get(topic)
        if command is not None:
            zone, opening, fmt = command
            self.targets[(zone, opening)] = decode_command(message.payload, fmt)
            return
        # Released or not is the opening state's to say (it changes with every release and
        # every first command after one; per-topic order makes the last one the true one).
        opening_state = self.opening_states.get(topic)
        if opening_state is not None:
            if json.loads(message.payload).get("released"):
                self.released.add(opening_state)
            else:
                self.released.discard(opening_state)
            return
        zone_name = self.zone_states.get(topic)
        if zone_name is not None:
            self.states[zone_name] = json.loads(message.payload)

    def _decision(self, zone: str, step: int) -> Decision:
        state = self.states.get(zone)
        if state is None:
            raise ControllerError(
                f"the controller published no state for zone {zone!r} by step {step}"
            )
        targets: dict[str, float | None] = {
            opening: None
            if (zone, opening) in self.released
            else self.targets.get((zone, opening), 0.0)
            for opening in self.config.zones[zone].openings
        }
        return Decision(
            zone=zone,
            t=float(state["t"]),
            targets=targets,
            mode=Mode(state["mode"]),
            layer=Layer(state["layer_number"]),
            cause=Cause(state["cause"]),
            reason=str(state["reason"]),
            windows_open=bool(state["windows_open"]),
            open_area=float(state["open_area"]),
        )


def _when(t: float) -> str:
    return pd.Timestamp(t, unit="s", tz="UTC").isoformat()


class CommandedCore:
    """The decision core in process, its targets as actuators read them off the commands.

    Over MQTT the actuators get each target through its command payload
    (three decimals, or whole percent); this controller does the same in
    process, so that an in-process run and a run against the daemon in
    lock-step can be compared step for step.
    """

    def __init__(self, config: SiteConfig) -> None:
        self.core = CoreController(config)
        self.formats = {
            zone_name: {name: opening.command_format for name, opening in zone.openings.items()}
            for zone_name, zone in config.zones.items()
        }

    def __call__(
        self, zone: str, held: Held, state: ZoneState, t: float
    ) -> tuple[Decision, ZoneState]:
        """Decide ``zone`` at ``t`` with the core; targets through the command encoding."""
        decision, state = self.core(zone, held, state, t)
        formats = self.formats[zone]
        targets = {
            name: None
            if value is None
            else decode_command(encode_command(value, formats[name]), formats[name])
            for name, value in decision.targets.items()
        }
        return replace(decision, targets=targets), state


# --------------------------------------------------------------------------- runs


def run_mqtt(
    site_config: SiteConfig,
    building: Building,
    weather: Weather,
    scenario: Scenario | None = None,
    start: object = None,
    end: object = None,
    step: float = 60.0,
    *,
    host: str | None = None,
    port: int | None = None,
    timeout: float = 30.0,
    config_dir: Path | None = None,
    zones: Sequence[str] | None = None,
    initial_temperature: float = 21.0,
    progress: Callable[[float], None] | None = None,
    protocol: str | None = "3.1.1",
) -> tuple[Result, BridgeStats]:
    """:func:`simulator.loop.run` against a running ``ventsup run --sim-clock``.

    Arguments as for :func:`~simulator.loop.run`, plus the broker, the
    per-step ``timeout`` and the ``protocol`` of :class:`MqttController`.
    Returns the result and what the bridge counted.
    """
    with MqttController(
        site_config,
        host=host,
        port=port,
        timeout=timeout,
        config_dir=config_dir,
        protocol=protocol,
    ) as controller:
        result = run(
            site_config,
            building,
            weather,
            scenario,
            start,
            end,
            step,
            controller=controller,
            zones=zones,
            initial_temperature=initial_temperature,
            progress=progress,
        )
    return result, controller.stats


def open_hours(result: Result, mode: Mode | str = Mode.FREE_COOLING) -> dict[str, float]:
    """The simulator's own record: hours per zone with an opening open while in ``mode``.

    A step counts when the zone's decision for it was ``mode`` and any of its
    openings stood open (position > 0) at the step's end: what the building
    saw, not what the controller says it did.
    """
    value = Mode(mode).value
    hours = result.step / 3600.0
    found = {}
    for zone, frame in result.zones.items():
        positions = frame[[c for c in frame.columns if c.startswith("position.")]].to_numpy()
        open_now = (positions > 0.0).any(axis=1) if positions.size else np.zeros(len(frame), bool)
        found[zone] = float(((frame["mode"] == value).to_numpy() & open_now).sum()) * hours
    return found
