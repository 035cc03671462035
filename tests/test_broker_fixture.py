"""The ``mosquitto`` fixture, checked with the real command-line clients and paho."""

from __future__ import annotations

import dataclasses
import os
import queue
import re
import shutil
import socket
import subprocess
import threading
import uuid
from typing import Any

# The project bans paho outside ventsup.edges.mqtt; this test checks the broker with
# the real client library itself, before that module exists.
import paho.mqtt.client as mqtt  # noqa: TID251
import pytest

# mosquitto_sub -W exits with MOSQ_ERR_TIMEOUT when it received nothing in time:
# 27, measured with Debian's mosquitto-clients 2.0.11.
MOSQUITTO_SUB_TIMED_OUT = 27
# Upper bound for one client run; a waiting client gives up earlier with -W.
CLIENT_TIMEOUT_S = 30
# How long the paho test waits for each broker response before it gives up.
WAIT_S = 10


def run_client(tool: str, broker: Any, *args: str) -> subprocess.CompletedProcess[str]:
    """Run mosquitto_pub or mosquitto_sub against ``broker`` and return the result."""
    path = shutil.which(tool)
    if path is None:
        pytest.fail(
            f"{tool} is not installed: run `make broker` "
            "(or `sudo apt-get install mosquitto mosquitto-clients`)",
            pytrace=False,
        )
    return subprocess.run(
        [path, "-h", broker.host, "-p", str(broker.port), *args],
        stdin=subprocess.DEVNULL,
        capture_output=True,
        text=True,
        timeout=CLIENT_TIMEOUT_S,
        check=False,
    )


@pytest.mark.broker
def test_retained_message_is_kept_until_restart(mosquitto: Any, topic_prefix: str) -> None:
    topic = f"{topic_prefix}/retained"

    published = run_client("mosquitto_pub", mosquitto, "-t", topic, "-m", "hello", "-r", "-q", "1")
    assert published.returncode == 0, published.stderr

    received = run_client("mosquitto_sub", mosquitto, "-t", topic, "-C", "1", "-W", "5")
    assert (received.returncode, received.stdout) == (0, "hello\n"), received.stderr

    first_pid = mosquitto.process.pid
    mosquitto.stop()
    assert not mosquitto.process.running
    with pytest.raises(ConnectionRefusedError):
        socket.create_connection((mosquitto.host, mosquitto.port), timeout=5).close()

    mosquitto.start()
    assert mosquitto.process.running
    assert mosquitto.process.pid != first_pid

    published = run_client("mosquitto_pub", mosquitto, "-t", f"{topic_prefix}/after", "-m", "up")
    assert published.returncode == 0, published.stderr

    # Persistence is off, so the restarted broker has no retained message to hand out.
    gone = run_client("mosquitto_sub", mosquitto, "-t", topic, "-C", "1", "-W", "1")
    assert (gone.returncode, gone.stdout) == (MOSQUITTO_SUB_TIMED_OUT, ""), gone.stderr


@pytest.mark.broker
def test_paho_v5_client_subscribes_and_receives(mosquitto: Any, topic_prefix: str) -> None:
    topic = f"{topic_prefix}/paho"
    connected = threading.Event()
    subscribed = threading.Event()
    messages: queue.Queue[mqtt.MQTTMessage] = queue.Queue()
    results: dict[str, Any] = {}
    errors: list[BaseException] = []

    # Callbacks run on paho's network thread, where an escaping exception would
    # silently stop the client: record it and wake the test instead.
    def on_connect(client: mqtt.Client, _u: Any, _f: Any, reason_code: Any, _p: Any) -> None:
        try:
            results["connect"] = reason_code
            if not reason_code.is_failure:
                client.subscribe(topic, qos=1)
        except BaseException as exc:
            errors.append(exc)
        finally:
            connected.set()

    def on_subscribe(_c: mqtt.Client, _u: Any, _mid: int, reason_codes: Any, _p: Any) -> None:
        results["subscribe"] = list(reason_codes)
        subscribed.set()

    def on_message(_c: mqtt.Client, _u: Any, message: mqtt.MQTTMessage) -> None:
        messages.put(message)

    client = mqtt.Client(
        mqtt.CallbackAPIVersion.VERSION2,
        client_id=f"ventsup-test-{uuid.uuid4().hex}",
        protocol=mqtt.MQTTProtocolVersion.MQTTv5,
    )
    client.on_connect = on_connect
    client.on_subscribe = on_subscribe
    client.on_message = on_message
    client.connect(mosquitto.host, mosquitto.port, keepalive=10)
    client.loop_start()
    try:
        assert connected.wait(WAIT_S), f"no CONNACK from {mosquitto.url}"
        assert not errors, errors
        assert not results["connect"].is_failure, results["connect"]
        assert subscribed.wait(WAIT_S), f"no SUBACK for {topic}"
        assert [code.value for code in results["subscribe"]] == [1]  # granted QoS 1

        properties = mqtt.Properties(mqtt.PacketTypes.PUBLISH)
        properties.ContentType = "application/json"
        info = client.publish(topic, b'{"temp_outdoor": 18.5}', qos=1, properties=properties)
        info.wait_for_publish(WAIT_S)
        assert info.is_published()

        message = messages.get(timeout=WAIT_S)
        assert message.topic == topic
        assert message.payload == b'{"temp_outdoor": 18.5}'
        assert message.qos == 1
        assert message.properties is not None
        assert message.properties.ContentType == "application/json"
    finally:
        client.disconnect()
        client.loop_stop()


@pytest.mark.broker
def test_module_broker_is_shared_and_reachable(mosquitto_module: Any, topic_prefix: str) -> None:
    topic = f"{topic_prefix}/module"
    published = run_client("mosquitto_pub", mosquitto_module, "-t", topic, "-m", "x", "-r")
    assert published.returncode == 0, published.stderr
    received = run_client("mosquitto_sub", mosquitto_module, "-t", topic, "-C", "1", "-W", "5")
    assert (received.returncode, received.stdout) == (0, "x\n"), received.stderr


@pytest.mark.broker
def test_broker_config_and_handle(mosquitto: Any) -> None:
    config = mosquitto.config_path.read_text(encoding="utf-8").splitlines()
    expected = [
        f"listener {mosquitto.port} 127.0.0.1",
        "allow_anonymous true",
        "persistence false",
        "log_dest stdout",
        "set_tcp_nodelay true",
        "max_queued_messages 10000",
    ]
    assert config[: len(expected)] == expected
    assert ("user root" in config) == (os.geteuid() == 0)
    assert mosquitto.host == "127.0.0.1"
    with pytest.raises(dataclasses.FrozenInstanceError):
        mosquitto.port = 1  # type: ignore[misc]

    mosquitto.stop()
    mosquitto.stop()  # idempotent
    log = mosquitto.process.output()
    assert "mosquitto version" in log
    assert "terminating" in log


def test_missing_mosquitto_fails_with_the_fix(
    request: pytest.FixtureRequest, monkeypatch: pytest.MonkeyPatch
) -> None:
    real_access = os.access

    def access_without_broker(path: Any, mode: int, **kwargs: Any) -> bool:
        if str(path) == "/usr/sbin/mosquitto":
            return False
        return real_access(path, mode, **kwargs)

    monkeypatch.setattr(shutil, "which", lambda *_args, **_kwargs: None)
    monkeypatch.setattr(os, "access", access_without_broker)
    with pytest.raises(pytest.fail.Exception, match="make broker"):
        request.getfixturevalue("mosquitto")


def test_topic_prefix_is_topic_safe_and_names_the_test(topic_prefix: str) -> None:
    root, _, leaf = topic_prefix.partition("/")
    assert root == "ventsup-test"
    assert leaf.startswith("test_topic_prefix_is_topic_safe_and_names_the_test-")
    assert re.fullmatch(r"[A-Za-z0-9_.-]+-[0-9a-f]{32}", leaf), topic_prefix
