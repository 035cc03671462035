"""Helpers for the daemon's broker tests: real clients, a watcher, the daemon in a thread.

Waits are queue waits with a timeout, never sleeps; a wait that runs out fails
the test with what was seen, not with a timing assertion.
"""

from __future__ import annotations

import contextlib
import json
import queue
import shutil
import subprocess
import time
import uuid
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path
from typing import Any

import pytest

from ventsup.config import load_config
from ventsup.drivers.service import Service
from ventsup.edges.mqtt import Message, MqttClient, MqttSettings, Subscribed

from .daemon_site import WARM_DAY, payload

#: The longest any one wait may take before the test fails [s].
WAIT = 15.0
CLIENT_TIMEOUT = 30.0


def client_tool(name: str) -> str:
    path = shutil.which(name)
    if path is None:
        pytest.fail(f"{name} is not installed: run `make broker`", pytrace=False)
    return path


def mosquitto_pub(host: str, port: int, topic: str, message: str, *extra: str) -> None:
    """Publish with the real ``mosquitto_pub`` at QoS 1 and fail the test if it fails."""
    done = subprocess.run(
        [
            *(client_tool("mosquitto_pub"), "-h", host, "-p", str(port), "-q", "1"),
            *("-t", topic, "-m", message, *extra),
        ],
        stdin=subprocess.DEVNULL,
        capture_output=True,
        text=True,
        timeout=CLIENT_TIMEOUT,
        check=False,
    )
    assert done.returncode == 0, f"mosquitto_pub -t {topic} failed: {done.stderr}"


def mosquitto_sub_one(host: str, port: int, topic: str, *extra: str) -> str:
    """The first message on ``topic`` (a retained one at once) with ``mosquitto_sub -C 1``."""
    done = subprocess.run(
        [
            *(client_tool("mosquitto_sub"), "-h", host, "-p", str(port), "-t", topic),
            *("-C", "1", "-W", str(int(WAIT)), *extra),
        ],
        stdin=subprocess.DEVNULL,
        capture_output=True,
        text=True,
        timeout=CLIENT_TIMEOUT,
        check=False,
    )
    assert done.returncode == 0, f"mosquitto_sub -t {topic}: {done.returncode} {done.stderr}"
    return done.stdout.rstrip("\n")


def send(host: str, port: int, prefix: str, values: Sequence[tuple[str, str]] = WARM_DAY) -> None:
    """Publish point values as the site's gateways would (``<prefix>/in/<point>``)."""
    for point, value in values:
        mosquitto_pub(host, port, f"{prefix}/in/{point}", payload(point, value))


class Watch:
    """A subscriber (paho, through the MQTT edge) that remembers everything it saw."""

    def __init__(self, host: str, port: int, filters: Sequence[str], **settings: Any) -> None:
        self.items: queue.Queue[Any] = queue.Queue()
        self.seen: list[Message] = []
        options = {"client_id": f"watch-{uuid.uuid4().hex[:12]}", **settings}
        self.client = MqttClient(
            MqttSettings(host=host, port=port, reconnect_min=1, reconnect_max=1, **options),
            self.items,
            subscriptions=filters,
        )
        self.client.connect()
        self.subscribed()

    def subscribed(self) -> None:
        """Wait until the broker confirmed the subscriptions (again, after a reconnect)."""
        self._next(lambda item: isinstance(item, Subscribed), "the SUBACK")

    def _next(self, wanted: Callable[[Any], bool], what: str) -> Any:
        deadline = time.monotonic() + WAIT
        while True:
            try:
                item = self.items.get(timeout=max(0.0, deadline - time.monotonic()))
            except queue.Empty:
                shown = "\n".join(f"  {m.topic} {m.payload[:300]!r}" for m in self.seen[-20:])
                pytest.fail(f"waited {WAIT:g} s for {what}; the last messages seen:\n{shown}")
            if isinstance(item, Message):
                self.seen.append(item)
            if wanted(item):
                return item

    def message(self, topic: str, match: Callable[[bytes], bool] = lambda _: True) -> Message:
        """The next message on ``topic`` whose payload ``match`` accepts."""
        found: Message = self._next(
            lambda item: isinstance(item, Message) and item.topic == topic and match(item.payload),
            f"a message on {topic}",
        )
        return found

    def json(self, topic: str, match: Callable[[dict[str, Any]], bool] = lambda _: True) -> Any:
        """The next JSON message on ``topic`` that ``match`` accepts, decoded."""
        return json.loads(self.message(topic, lambda raw: match(json.loads(raw))).payload)

    def topics(self, since: int = 0) -> list[str]:
        return [m.topic for m in self.seen[since:]]

    def close(self) -> None:
        self.client.close()


@contextlib.contextmanager
def watching(host: str, port: int, filters: Sequence[str], **settings: Any) -> Iterator[Watch]:
    watch = Watch(host, port, filters, **settings)
    try:
        yield watch
    finally:
        watch.close()


@contextlib.contextmanager
def daemon(site: Path, **options: Any) -> Iterator[Service]:
    """``ventsup run`` in a thread of this process; stopped (and checked) on exit."""
    service = Service(load_config(site), config_dir=site.parent, **options)
    service.start()
    try:
        yield service
    finally:
        service.stop("test over")
        assert service.wait(WAIT), "the daemon did not stop"
    assert service.error is None, service.error
