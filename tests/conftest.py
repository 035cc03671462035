"""Shared fixtures: a real mosquitto broker per test, and unique topic prefixes.

Broker tests carry ``@pytest.mark.broker`` and take the ``mosquitto`` fixture
(one broker per test) or ``mosquitto_module`` (one broker per test module, for
tests that only publish and subscribe under their own ``topic_prefix``). Each
broker is Debian's mosquitto on a free loopback port with its own config and log
file in a temporary directory. A missing mosquitto fails the test (it does not
skip it): run ``make broker``.
"""

from __future__ import annotations

import contextlib
import os
import re
import shutil
import socket
import subprocess
import time
import uuid
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

import pytest
from hypothesis import settings

# No timed assertions (the machines are noisy): hypothesis's per-example deadline
# of 200 ms is one, and failed under load. Speed belongs in benchmarks/.
settings.register_profile("ventsup", deadline=None)
settings.load_profile("ventsup")

BROKER_HOST = "127.0.0.1"
READY_TIMEOUT_S = 10.0
STOP_TIMEOUT_S = 5.0
START_MARK = "--- starting mosquitto"
# A free port can be taken by someone else between our probe and the broker's bind.
PORT_ATTEMPTS = 3


def find_mosquitto() -> str:
    """Return the path of the mosquitto broker binary, or fail the test with the fix."""
    # Debian installs the broker in /usr/sbin, which a non-root PATH may lack.
    found = shutil.which("mosquitto")
    if found is None and os.access("/usr/sbin/mosquitto", os.X_OK):
        found = "/usr/sbin/mosquitto"
    if found is None:
        pytest.fail(
            "mosquitto (the MQTT broker) is not installed; the broker tests need Debian's "
            "mosquitto and mosquitto-clients: run `make broker` "
            "(or `sudo apt-get install mosquitto mosquitto-clients`)",
            pytrace=False,
        )
    return found


def line_buffered() -> list[str]:
    """Command prefix that makes the broker write its log line by line, when possible.

    mosquitto buffers stdout when it is a file, so without this the log is only
    complete once the broker has exited (coreutils' stdbuf is on every Debian).
    """
    stdbuf = shutil.which("stdbuf")
    return [] if stdbuf is None else [stdbuf, "-oL"]


def free_port(host: str = BROKER_HOST) -> int:
    """Return a TCP port that was free on ``host`` a moment ago."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as probe:
        probe.bind((host, 0))
        port: int = probe.getsockname()[1]
        return port


def write_config(directory: Path, port: int, host: str = BROKER_HOST) -> Path:
    """Write a minimal test broker config for ``host:port`` and return its path."""
    lines = [
        f"listener {port} {host}",
        "allow_anonymous true",
        "persistence false",
        "log_dest stdout",
        "set_tcp_nodelay true",
        # The default (1000) drops QoS 1 messages to a subscriber behind in a burst.
        "max_queued_messages 10000",
    ]
    if os.geteuid() == 0:
        # As root, mosquitto drops to user "mosquitto", which cannot read 0700 temp dirs.
        lines.append("user root")
    path = directory / "mosquitto.conf"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


class BrokerNotReady(RuntimeError):
    """The broker process exited, or did not accept connections in time."""


@dataclass
class BrokerProcess:
    """The running mosquitto process behind a :class:`Broker`; replaced on each start.

    The broker's stdout and stderr go to ``log_path`` (appended across restarts)
    rather than to a pipe, so a chatty broker can never block on a full pipe.
    """

    binary: str
    config_path: Path
    log_path: Path
    host: str
    port: int
    popen: subprocess.Popen[bytes] | None = field(default=None, repr=False)
    stopped_on_request: bool = False

    @property
    def pid(self) -> int | None:
        """The process id of the current broker, or None when stopped."""
        return None if self.popen is None else self.popen.pid

    @property
    def running(self) -> bool:
        """True while a started broker process has not exited."""
        return self.popen is not None and self.popen.poll() is None

    def output(self) -> str:
        """Everything the broker wrote so far (all runs)."""
        try:
            return self.log_path.read_text(encoding="utf-8", errors="replace")
        except FileNotFoundError:
            return ""

    def start(self) -> None:
        """Start the broker and return once it accepts TCP connections."""
        if self.running:
            raise RuntimeError(f"mosquitto is already running on {self.host}:{self.port}")
        self.stopped_on_request = False
        with self.log_path.open("ab") as log:
            log.write(f"{START_MARK} on {self.host}:{self.port}\n".encode())
            log.flush()
            self.popen = subprocess.Popen(
                [*line_buffered(), self.binary, "-c", str(self.config_path)],
                stdin=subprocess.DEVNULL,
                stdout=log,
                stderr=subprocess.STDOUT,
            )
        self._wait_until_ready()

    def stop(self) -> int | None:
        """Stop the broker (terminate, then kill after a grace period); idempotent.

        Returns the exit code, or None when it was not started.
        """
        if self.popen is None:
            return None
        self.stopped_on_request = True
        if self.popen.poll() is None:
            self.popen.terminate()
            try:
                self.popen.wait(STOP_TIMEOUT_S)
            except subprocess.TimeoutExpired:
                self.popen.kill()
                self.popen.wait(STOP_TIMEOUT_S)
        return self.popen.returncode

    def _accepts_connections(self) -> bool:
        try:
            with socket.create_connection((self.host, self.port), timeout=0.5):
                return True
        except OSError:
            return False

    def _log_says_running(self) -> bool:
        # Another program that grabbed the port would also accept the connection;
        # with a line-buffered log, also wait for the broker to say it is up.
        return not line_buffered() or " running" in self.output().rpartition(START_MARK)[2]

    def _wait_until_ready(self) -> None:
        assert self.popen is not None
        deadline = time.monotonic() + READY_TIMEOUT_S
        while True:
            code = self.popen.poll()
            if code is not None:
                raise BrokerNotReady(
                    f"mosquitto exited with code {code} before accepting connections on "
                    f"{self.host}:{self.port}; config {self.config_path}; its output:\n"
                    f"{self.output()}"
                )
            if self._accepts_connections() and self._log_says_running():
                return
            if time.monotonic() > deadline:
                self.stop()
                raise BrokerNotReady(
                    f"mosquitto did not accept connections on {self.host}:{self.port} within "
                    f"{READY_TIMEOUT_S:g} s; config {self.config_path}; its output:\n"
                    f"{self.output()}"
                )
            time.sleep(0.01)


@dataclass(frozen=True)
class Broker:
    """A mosquitto broker started for a test, on ``host:port``.

    ``stop()`` and ``start()`` restart it on the same port with the same config
    (persistence is off: retained messages and sessions are gone after a restart).
    ``process`` holds the current process: ``process.popen``, ``process.pid``,
    ``process.running`` and ``process.output()`` (the broker's log).
    """

    host: str
    port: int
    process: BrokerProcess = field(compare=False)
    config_path: Path

    def start(self) -> None:
        """Start the broker again on the same port; returns once it accepts connections."""
        self.process.start()

    def stop(self) -> None:
        """Stop the broker: terminate, wait up to 5 s, then kill."""
        self.process.stop()

    @property
    def url(self) -> str:
        """``mqtt://host:port``, for log messages and CLI options."""
        return f"mqtt://{self.host}:{self.port}"


@contextlib.contextmanager
def running_broker(directory: Path) -> Iterator[Broker]:
    """Start a mosquitto broker with its config and log in ``directory``; stop it on exit.

    Fails the calling test when mosquitto is missing, does not come up, or died
    during the test without being asked to stop.
    """
    binary = find_mosquitto()
    log_path = directory / "mosquitto.log"
    process: BrokerProcess | None = None
    for attempt in range(1, PORT_ATTEMPTS + 1):
        log_path.unlink(missing_ok=True)
        port = free_port()
        config_path = write_config(directory, port)
        process = BrokerProcess(binary, config_path, log_path, BROKER_HOST, port)
        try:
            process.start()
        except BrokerNotReady as exc:
            problem = str(exc)
        else:
            break
        if attempt == PORT_ATTEMPTS or "Address already in use" not in problem:
            pytest.fail(problem, pytrace=False)
    assert process is not None
    broker = Broker(BROKER_HOST, process.port, process, process.config_path)
    try:
        yield broker
    finally:
        died = process.popen is not None and process.popen.poll() is not None
        crashed = died and not process.stopped_on_request
        code = process.stop()
        if crashed:
            pytest.fail(
                f"mosquitto on {broker.host}:{broker.port} exited with code {code} during "
                f"the test without being stopped; its output:\n{process.output()}",
                pytrace=False,
            )


def unique_prefix(request: pytest.FixtureRequest) -> str:
    """Return a topic prefix no other test uses: ``ventsup-test/<test name>-<uuid>``.

    The test name is kept (made topic-safe) to make broker logs readable.
    """
    name = re.sub(r"[^A-Za-z0-9_.-]+", "_", request.node.name)[:60]
    return f"ventsup-test/{name}-{uuid.uuid4().hex}"


@pytest.fixture
def mosquitto(tmp_path: Path) -> Iterator[Broker]:
    """A mosquitto broker of its own for this test, on a free loopback port."""
    directory = tmp_path / "mosquitto"
    directory.mkdir()
    with running_broker(directory) as broker:
        yield broker


@pytest.fixture(scope="module")
def mosquitto_module(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Broker]:
    """A mosquitto broker shared by the tests of one module; do not stop it in a test."""
    with running_broker(tmp_path_factory.mktemp("mosquitto")) as broker:
        yield broker


@pytest.fixture
def topic_prefix(request: pytest.FixtureRequest) -> str:
    """A topic prefix unique to this test (see :func:`unique_prefix`)."""
    return unique_prefix(request)
