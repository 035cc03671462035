"""The MQTT edge against a real mosquitto: connect, guard, publish, reconnect, last will."""

from __future__ import annotations

import queue
import socket
import threading
import time
import uuid
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest

from ventsup.config import Mqtt
from ventsup.edges.mqtt import (
    Connected,
    Disconnected,
    Message,
    MqttClient,
    MqttError,
    MqttSettings,
    Subscribed,
    read_password,
)

WAIT = 15.0


def settings(broker: Any, **options: Any) -> MqttSettings:
    base = {"client_id": f"test-{uuid.uuid4().hex[:12]}", "reconnect_min": 1, "reconnect_max": 1}
    return MqttSettings(broker.host, broker.port, **{**base, **options})


def next_item(
    items: queue.Queue[Any],
    kind: type,
    match: Any = None,
    poll: Callable[[float], Any] | None = None,
) -> Any:
    """The next item of ``kind`` (that ``match`` accepts), waiting at most WAIT seconds in all;
    with ``poll`` (a client without a network thread) driving the client while none is there."""
    deadline = time.monotonic() + WAIT
    while True:
        remaining = deadline - time.monotonic()
        try:
            item = items.get_nowait() if poll else items.get(timeout=max(0.0, remaining))
        except queue.Empty:
            if poll is None or remaining <= 0:
                pytest.fail(f"no {kind.__name__} within {WAIT:g} s")
            poll(min(0.1, remaining))
            continue
        if isinstance(item, kind) and (match is None or match(item)):
            return item


# --------------------------------------------------------------------------- no broker


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        port: int = probe.getsockname()[1]
        return port


def test_unreachable_broker_is_a_clear_error() -> None:
    port = free_port()
    client = MqttClient(MqttSettings("127.0.0.1", port, "test"))
    with pytest.raises(MqttError, match=f"127.0.0.1:{port}: connection refused; is the broker"):
        client.connect()


def test_password_from_a_file_or_the_environment(tmp_path: Path) -> None:
    (tmp_path / "pw").write_text("s3cret\n", encoding="utf-8")
    from_file = Mqtt(username="u", password_file="pw")
    assert read_password(from_file, tmp_path) == "s3cret"
    from_env = Mqtt(username="u", password_env="MQTT_PW")
    assert read_password(from_env, tmp_path, {"MQTT_PW": "other"}) == "other"
    assert read_password(Mqtt(), tmp_path) is None
    with pytest.raises(
        MqttError, match=r"cannot read the MQTT password from password_file .*/nope"
    ):
        read_password(Mqtt(username="u", password_file="nope"), tmp_path)
    (tmp_path / "empty").write_text("\n", encoding="utf-8")
    with pytest.raises(MqttError, match=r"password file .*empty is empty"):
        read_password(Mqtt(username="u", password_file="empty"), tmp_path)
    with pytest.raises(MqttError, match=r"environment variable MQTT_PW .* is not set or empty"):
        read_password(from_env, tmp_path, {})


def test_settings_from_config_resolve_files_and_hide_the_password(tmp_path: Path) -> None:
    (tmp_path / "pw").write_text("s3cret", encoding="utf-8")
    mqtt = Mqtt.model_validate(
        {
            "host": "broker",
            "tls": {"ca_file": "ca.crt"},
            "username": "u",
            "password_file": "pw",
            "keepalive": "90 s",
        }
    )
    made = MqttSettings.from_config(mqtt, client_id="c", base_dir=tmp_path, status_topic="s")
    assert (made.port, made.keepalive, made.password) == (8883, 90, "s3cret")
    assert made.tls is not None and made.tls.ca_file == str(tmp_path / "ca.crt")
    assert "s3cret" not in repr(made)


def test_missing_tls_files_are_a_clear_error(tmp_path: Path) -> None:
    mqtt = Mqtt.model_validate({"tls": {"ca_file": "missing.crt"}})
    made = MqttSettings.from_config(mqtt, client_id="c", base_dir=tmp_path)
    with pytest.raises(MqttError, match=r"cannot load the TLS files \(ca_file .*missing.crt\)"):
        MqttClient(made)


# --------------------------------------------------------------------------- broker


@pytest.mark.broker
@pytest.mark.parametrize("protocol", ["5", "3.1.1"])
def test_subscribe_publish_receive(mosquitto: Any, topic_prefix: str, protocol: str) -> None:
    items: queue.Queue[Any] = queue.Queue()
    topic = f"{topic_prefix}/in"
    with MqttClient(settings(mosquitto, protocol=protocol), items, subscriptions=[topic]) as client:
        client.connect()
        assert isinstance(next_item(items, Connected), Connected)
        assert next_item(items, Subscribed).granted == (topic,)
        sock = client._client.socket()  # the one place a test looks inside
        assert isinstance(sock, socket.socket)
        assert sock.getsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY) == 1
        mid = client.publish(topic, b"21.5", qos=1)
        assert client.wait_delivered(mid, WAIT) is None
        message = next_item(items, Message)
        assert (message.topic, message.payload, message.qos) == (topic, b"21.5", 1)
        assert client.stats.delivered == 1
        with pytest.raises(MqttError, match="cannot publish to 'a/#'"):
            client.publish("a/#", b"x")


@pytest.mark.broker
def test_a_failing_callback_never_stops_the_network_thread(
    mosquitto: Any, topic_prefix: str
) -> None:
    class Flaky(queue.Queue[Any]):
        failed = False

        def put_nowait(self, item: Any) -> None:
            if isinstance(item, Message) and not self.failed:
                self.failed = True
                raise RuntimeError("the first message breaks the callback")
            super().put_nowait(item)

    items = Flaky()
    topic = f"{topic_prefix}/in"
    with MqttClient(settings(mosquitto), items, subscriptions=[topic]) as client:
        client.connect()
        next_item(items, Subscribed)
        for payload in (b"first", b"second"):
            client.wait_delivered(client.publish(topic, payload), WAIT)
        assert next_item(items, Message).payload == b"second"
        assert client.stats.callback_errors == 1


@pytest.mark.broker
def test_status_online_will_on_a_broken_connection_and_offline_on_close(
    mosquitto: Any, topic_prefix: str
) -> None:
    status = f"{topic_prefix}/status"
    watched: queue.Queue[Any] = queue.Queue()
    with MqttClient(settings(mosquitto), watched, subscriptions=[status]) as watcher:
        watcher.connect()
        items: queue.Queue[Any] = queue.Queue()
        client = MqttClient(settings(mosquitto, status_topic=status), items)
        client.connect()
        assert next_item(watched, Message).payload == b"online"
        # Until its ack arrives, the ``online`` is in flight and paho would send it
        # again after the reconnect (QoS 1 allows it): a second ``online`` here.
        next_item(items, Connected)
        assert client.wait_all_delivered(WAIT)
        # Break the connection without a DISCONNECT: the broker sends the last will,
        # and the client reconnects by itself.
        sock = client._client.socket()
        assert isinstance(sock, socket.socket)
        sock.shutdown(socket.SHUT_RDWR)
        assert next_item(watched, Message).payload == b"offline"
        next_item(items, Disconnected)
        next_item(items, Connected)
        assert next_item(watched, Message).payload == b"online"
        client.close()
        client.close()  # idempotent
        offline = next_item(watched, Message)
        assert (offline.payload, client.connected) == (b"offline", False)
        assert client.stats.connects == 2


@pytest.mark.broker
def test_wait_all_delivered_counts_a_publish_in_progress_on_another_thread(
    mosquitto: Any, topic_prefix: str
) -> None:
    items: queue.Queue[Any] = queue.Queue()
    with MqttClient(settings(mosquitto), items) as client:
        client.connect()
        # Hold a publish inside paho's publish() (the window before the edge knows
        # its message id): waiting for delivery must not answer "all delivered".
        inside, release = threading.Event(), threading.Event()
        paho_publish = client._client.publish

        def held(*args: Any, **kwargs: Any) -> Any:
            inside.set()
            assert release.wait(WAIT)
            return paho_publish(*args, **kwargs)

        client._client.publish = held  # type: ignore[method-assign]
        publisher = threading.Thread(
            target=client.publish, args=(f"{topic_prefix}/held", b"x"), kwargs={"qos": 1}
        )
        publisher.start()
        assert inside.wait(WAIT)
        assert client.wait_all_delivered(0.2) is False
        release.set()
        assert client.wait_all_delivered(WAIT) is True
        publisher.join(WAIT)
        assert client.stats.delivered >= 1 and client.stats.pending == 0


@pytest.mark.broker
def test_qos1_waits_out_a_broker_restart(mosquitto: Any, topic_prefix: str) -> None:
    items: queue.Queue[Any] = queue.Queue()
    with MqttClient(settings(mosquitto), items) as client:
        client.connect()
        mosquitto.stop()
        next_item(items, Disconnected)
        mid = client.publish(f"{topic_prefix}/queued", b"x", qos=1)
        with pytest.raises(MqttError, match="did not acknowledge a publish"):
            client.wait_delivered(mid, 0.2)
        mosquitto.start()
        next_item(items, Connected)
        assert client.wait_delivered(mid, WAIT) is None
        assert client.stats.pending == 0


def test_subscription_qos_is_checked() -> None:
    with pytest.raises(ValueError, match="subscription_qos must be 0, 1 or 2, got 3"):
        MqttClient(MqttSettings("127.0.0.1", 1, "test"), subscription_qos=3)


@pytest.mark.broker
@pytest.mark.parametrize("network_thread", [True, False])
def test_a_corked_burst_and_a_large_message_arrive_whole_and_in_order(
    mosquitto: Any, topic_prefix: str, network_thread: bool
) -> None:
    # The client reads the socket in 64 KiB chunks and hands paho many packets from one
    # read: a burst of small messages, one larger than a chunk, and more small ones must
    # come out exactly as they went in, in order.
    topic = f"{topic_prefix}/burst"
    sent = [f"{n:04d}".encode() for n in range(150)]
    sent.insert(100, bytes(range(256)) * 1000)  # 256 000 bytes: four chunks and more
    items: queue.Queue[Any] = queue.Queue()
    receiver = MqttClient(
        settings(mosquitto),
        items,
        subscriptions=[topic],
        subscription_qos=0,
        network_thread=network_thread,
    )
    with receiver, MqttClient(settings(mosquitto), queue.Queue()) as sender:
        receiver.connect()
        sender.connect()
        poll = None if network_thread else receiver.poll

        def received(kind: type) -> Any:
            return next_item(items, kind, poll=poll)

        received(Subscribed)
        with sender.corked():
            mids = [sender.publish(topic, payload, qos=1) for payload in sent]
        sock = sender._client.socket()  # the one place a test looks inside
        assert isinstance(sock, socket.socket)
        if hasattr(socket, "TCP_CORK"):
            assert sock.getsockopt(socket.IPPROTO_TCP, socket.TCP_CORK) == 0  # uncorked after
        for mid in mids:
            assert sender.wait_delivered(mid, WAIT) is None
        messages = [received(Message) for _ in sent]
        assert [m.payload for m in messages] == sent
        assert {(m.topic, m.qos) for m in messages} == {(topic, 0)}


@pytest.mark.broker
def test_without_a_network_thread_poll_drives_it_and_reconnects(
    mosquitto: Any, topic_prefix: str
) -> None:
    items: queue.Queue[Any] = queue.Queue()
    topic = f"{topic_prefix}/in"
    client = MqttClient(settings(mosquitto), items, subscriptions=[topic], network_thread=False)
    with pytest.raises(RuntimeError, match="network_thread=False"):
        client.poll(0.0)  # not connected yet

    def polled(kind: type) -> Any:
        return next_item(items, kind, poll=client.poll)

    with client:
        client.connect()  # answered without a network thread: connect polls too
        polled(Subscribed)
        mid = client.publish(topic, b"21.5", qos=1)
        assert client.wait_delivered(mid, WAIT) is None  # polls while it waits
        assert polled(Message).payload == b"21.5"
        mosquitto.stop()
        polled(Disconnected)
        mosquitto.start()
        polled(Connected)  # poll reconnected, and subscribed again
        polled(Subscribed)
        client.publish(topic, b"22.0", qos=1)
        assert polled(Message).payload == b"22.0"
        assert client.stats.connects == 2
    with MqttClient(settings(mosquitto), queue.Queue()) as threaded:
        threaded.connect()
        with pytest.raises(RuntimeError, match="network_thread=False"):
            threaded.poll(0.0)
