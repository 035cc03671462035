"""The command-line side of the live daemon: ``ventsup run``, ``override`` and ``status``.

:func:`run` starts a :class:`~ventsup.drivers.service.Service`, turns SIGTERM
and SIGINT into a clean stop and returns the exit status. :func:`send_override`
and :func:`show_status` are short-lived MQTT clients that talk to a running
daemon through its topics (see :class:`~ventsup.drivers.service.Topics`).
"""

from __future__ import annotations

import json
import logging
import queue
import signal
import threading
import time
import uuid
from collections.abc import Mapping
from datetime import datetime
from pathlib import Path
from types import FrameType
from typing import Any, TextIO
from zoneinfo import ZoneInfo

from ventsup.config.errors import VentsupError
from ventsup.config.model import Mqtt, SiteConfig
from ventsup.config.units import UnitError, format_quantity, parse_quantity
from ventsup.drivers.messages import Topics
from ventsup.drivers.service import Service
from ventsup.edges.logfmt import LogFormat, configure_logging
from ventsup.edges.mqtt import Message, MqttClient, MqttError, MqttSettings, Subscribed

__all__ = ["login", "run", "send_override", "show_status"]

_log = logging.getLogger("ventsup.run")

EXIT_OK = 0
EXIT_FAILED = 1
EXIT_USAGE = 2


def login(
    mqtt: Mqtt,
    *,
    username: str | None = None,
    password_file: str | None = None,
    password_env: str | None = None,
) -> Mqtt:
    """``mqtt`` with the user name and password source replaced where given.

    A password file given here is taken relative to the current directory.
    """
    update: dict[str, Any] = {}
    if username is not None:
        update["username"] = username
    if password_file is not None:
        update["password_file"] = str(Path(password_file).resolve())
        update["password_env"] = None
    elif password_env is not None:
        update["password_env"] = password_env
        update["password_file"] = None
    elif username is not None:
        update["password_file"] = update["password_env"] = None
    return mqtt.model_copy(update=update)


# --------------------------------------------------------------------------- run


def run(
    config: SiteConfig,
    *,
    config_path: Path,
    observe: bool = False,
    ledger: Path | None = None,
    log_format: LogFormat | None = None,
    sim_clock: bool = False,
) -> int:
    """Run the daemon until SIGTERM or SIGINT; 0 after a clean stop, 1 on a failure.

    ``sim_clock``: take the time from a simulator (see :mod:`ventsup.drivers.simclock`).
    """
    configure_logging(log_format or config.controller.log_format)
    service = Service(
        config,
        config_dir=config_path.resolve().parent,
        observe=observe,
        ledger_path=ledger,
        sim_clock=sim_clock,
    )
    try:
        service.start()
    except VentsupError as exc:
        _log.error("cannot start: %s", exc)
        return EXIT_FAILED

    def on_signal(number: int, _frame: FrameType | None) -> None:
        service.stop(f"signal {signal.Signals(number).name}")

    previous: dict[int, Any] = {}
    if threading.current_thread() is threading.main_thread():
        for wanted in (signal.SIGTERM, signal.SIGINT):
            previous[wanted] = signal.signal(wanted, on_signal)
    try:
        # A join with a timeout lets the main thread run the signal handlers.
        while not service.wait(0.5):
            pass
    finally:
        for number, handler in previous.items():
            signal.signal(number, handler)
    return service.exit_code


# --------------------------------------------------------------------------- override


def _client(mqtt: Mqtt, config_dir: Path, sink: queue.Queue[Any], topics: list[str]) -> MqttClient:
    """A short-lived client of the command line (its own client id, no status topic)."""
    settings = MqttSettings.from_config(
        mqtt, client_id=f"ventsup-cli-{uuid.uuid4().hex[:12]}", base_dir=config_dir
    )
    return MqttClient(settings, sink, subscriptions=topics)


def _wait_for(
    sink: queue.Queue[Any], deadline: float, wanted: type, match: Any = None
) -> Any | None:
    while True:
        remaining = deadline - time.monotonic()
        if remaining <= 0:
            return None
        try:
            item = sink.get(timeout=remaining)
        except queue.Empty:
            return None
        if isinstance(item, wanted) and (match is None or match(item)):
            return item


def send_override(
    config: SiteConfig,
    *,
    config_dir: Path,
    zone: str,
    action: str,
    reason: str,
    who: str,
    duration: str | None = None,
    position: str | None = None,
    timeout: float = 10.0,
    mqtt: Mqtt | None = None,
    out: TextIO,
    err: TextIO,
) -> int:
    """Publish an override request to the running controller and print its answer.

    Returns 0 when the controller applied it, 1 when it (or the broker)
    refused it or nobody answered, 2 for a request that is wrong before sending.
    """
    if zone not in config.zones:
        print(f"unknown zone {zone!r}; the zones are {', '.join(config.zones)}", file=err)
        return EXIT_USAGE
    request: dict[str, Any] = {
        "id": uuid.uuid4().hex,
        "action": action,
        "who": who,
        "reason": reason,
    }
    try:
        if duration is not None:
            request["duration"] = parse_quantity(duration, "duration")
        if position is not None:
            if action not in ("open", "hold"):
                print(f"--position applies to open and hold, not to {action}", file=err)
                return EXIT_USAGE
            request["position"] = parse_quantity(position, "fraction")
    except UnitError as exc:
        print(f"{exc}", file=err)
        return EXIT_USAGE
    topics = Topics(config)
    sink: queue.Queue[Any] = queue.Queue()
    deadline = time.monotonic() + timeout
    try:
        client = _client(mqtt or config.mqtt, config_dir, sink, [topics.override_result(zone)])
        client.connect()
    except MqttError as exc:
        print(f"ventsup override: {exc}", file=err)
        return EXIT_FAILED
    try:
        if _wait_for(sink, deadline, Subscribed) is None:
            print("ventsup override: the broker did not confirm the subscription", file=err)
            return EXIT_FAILED
        mid = client.publish(topics.override(zone), json.dumps(request).encode(), qos=1)
        refused = client.wait_delivered(mid, max(0.1, deadline - time.monotonic()))
        if refused is not None:
            print(
                f"ventsup override: the broker refused the request: {refused}; this user may "
                f"not publish to {topics.override(zone)}",
                file=err,
            )
            return EXIT_FAILED
        answer = _wait_for(
            sink,
            deadline,
            Message,
            lambda m: _answer_id(m.payload) == request["id"],
        )
    except MqttError as exc:
        print(f"ventsup override: {exc}", file=err)
        return EXIT_FAILED
    finally:
        client.close()
    if answer is None:
        print(
            f"ventsup override: no answer from the controller within {timeout:g} s; is "
            f"`ventsup run` running, and may this user publish to {topics.override(zone)}?",
            file=err,
        )
        return EXIT_FAILED
    result = json.loads(answer.payload)
    if not result.get("ok"):
        print(f"refused: {result.get('error')}", file=err)
        return EXIT_FAILED
    tz = ZoneInfo(config.site.time_zone)
    until = result.get("until")
    when = (
        f" until {datetime.fromtimestamp(until, tz):%Y-%m-%d %H:%M %Z}" if until is not None else ""
    )
    print(f"zone {zone}: {action} by {who}{when}", file=out)
    print(f"mode {result.get('mode')}: {result.get('reason')}", file=out)
    print(f"openings: {_openings(result.get('targets') or {}, config)}", file=out)
    return EXIT_OK


def _answer_id(payload: bytes) -> str | None:
    try:
        data = json.loads(payload)
    except ValueError:
        return None
    return data.get("id") if isinstance(data, dict) else None


def _openings(targets: Mapping[str, Any], config: SiteConfig) -> str:
    parts = []
    for name, value in targets.items():
        shown = (
            "released"
            if value is None
            else format_quantity(float(value), "fraction", config.site.units)
        )
        parts.append(f"{name} {shown}")
    return ", ".join(parts) or "none"


# --------------------------------------------------------------------------- status


def show_status(
    config: SiteConfig,
    *,
    config_dir: Path,
    timeout: float = 3.0,
    mqtt: Mqtt | None = None,
    out: TextIO,
    err: TextIO,
) -> int:
    """Print the controller's status and every zone's mode, openings and reason.

    Reads the retained topics for up to ``timeout`` [s] (less once every zone
    and the status are in). Returns 0 when every zone has a state, else 1.
    """
    topics = Topics(config)
    sink: queue.Queue[Any] = queue.Queue()
    try:
        client = _client(
            mqtt or config.mqtt, config_dir, sink, [topics.status, topics.state_filter]
        )
        client.connect()
    except MqttError as exc:
        print(f"ventsup status: {exc}", file=err)
        return EXIT_FAILED
    states: dict[str, dict[str, Any]] = {}
    status: str | None = None
    deadline = time.monotonic() + timeout
    try:
        while status is None or not set(config.zones) <= set(states):
            message = _wait_for(sink, deadline, Message)
            if message is None:
                break
            if message.topic == topics.status:
                status = message.payload.decode("utf-8", "replace")
                continue
            for zone in config.zones:
                if message.topic == topics.state(zone):
                    try:
                        states[zone] = json.loads(message.payload)
                    except ValueError:
                        states[zone] = {"mode": "?", "reason": "unreadable state payload"}
    finally:
        client.close()
    now = time.time()
    print(f"controller {topics.prefix}: {status or 'unknown (no status published)'}", file=out)
    width = max(len(zone) for zone in config.zones)
    missing = 0
    for zone in config.zones:
        state = states.get(zone)
        if state is None:
            missing += 1
            print(f"{zone:<{width}}  no state published", file=out)
            continue
        age = ""
        if isinstance(state.get("t"), int | float):
            age = f" ({max(0.0, now - state['t']):.0f} s ago)"
        observe = " [observe-only]" if state.get("observe") else ""
        print(
            f"{zone:<{width}}  {state.get('mode', '?')}{observe}{age}: "
            f"{_openings(state.get('targets') or {}, config)}",
            file=out,
        )
        print(f"{'':<{width}}  {state.get('reason', '')}", file=out)
    return EXIT_OK if missing == 0 else EXIT_FAILED
