"""The MQTT client: the one module of ventsup that imports paho-mqtt.

A thin wrapper around a paho-mqtt 2.x client (callback API version 2) that
turns the network thread's callbacks into items on a :class:`queue.Queue`, so
that one worker thread of the driver can own all state. What it takes care of
(see ``LIBRARY-NOTES`` for the measurements behind each point):

- MQTT 5 by default, 3.1.1 when asked; TLS with a CA file and an optional client
  certificate; user name and password (read by :func:`read_password` from a
  file or an environment variable, never from the site file);
- TCP_NODELAY on every connection (with Nagle's algorithm a QoS 1 round trip on
  loopback took 44 ms instead of 0.3 ms);
- a retained ``online`` on the status topic after every connect, a retained
  ``offline`` last will, and an ``offline`` published before a deliberate
  disconnect (the broker sends the will only on a broken connection);
- automatic reconnect with a doubling delay, and the subscriptions made again in
  every on-connect (a restarted broker forgets sessions);
- every callback guarded: an exception is logged and counted and never stops
  paho's network thread; callbacks only put items on the queue (and, in
  on-connect, subscribe and publish the status);
- a failed first connect (unreachable broker, TLS failure, refused credentials,
  no answer) raises :class:`MqttError` with what to check, instead of paho's
  silent retrying;
- delivery of QoS 1 and 2 publishes tracked through on-publish; a publish the
  broker refuses (MQTT 5 "Not authorized") becomes a :class:`PublishRefused` item;
- for a lock-step exchange (``ventsup run --sim-clock`` and the simulator):
  no network thread if asked (the caller polls), QoS 0 subscriptions, a burst
  written corked into few TCP segments, and the socket read in large chunks
  (paho alone makes three system calls per packet).

Items put on the queue: :class:`Message`, :class:`Connected`,
:class:`Disconnected`, :class:`ConnectRefused`, :class:`Subscribed`,
:class:`PublishRefused`.

Errors::

    VentsupError            (ventsup.config.errors)
    └── MqttError           the broker cannot be reached, refuses us, or a publish
                            cannot be queued; the message says what to check

paho, socket and ssl errors are converted to :class:`MqttError` here
(``raise ... from exc``); nothing outside this module sees a paho type.
"""

from __future__ import annotations

import contextlib
import logging
import os
import queue
import select
import socket
import ssl
import threading
import time
from collections import OrderedDict
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

import paho.mqtt.client as paho  # noqa: TID251 - this module is the MQTT edge
from paho.mqtt.enums import CallbackAPIVersion, MQTTErrorCode, MQTTProtocolVersion  # noqa: TID251
from paho.mqtt.reasoncodes import ReasonCode  # noqa: TID251

from ventsup.config.errors import VentsupError
from ventsup.config.model import Mqtt
from ventsup.edges.clock import Clock, WallClock

__all__ = [
    "OFFLINE",
    "ONLINE",
    "ConnectRefused",
    "Connected",
    "Disconnected",
    "Message",
    "MqttClient",
    "MqttError",
    "MqttSettings",
    "MqttStats",
    "PublishRefused",
    "Subscribed",
    "TlsSettings",
    "read_password",
]

_log = logging.getLogger("ventsup.mqtt")

ONLINE = b"online"
OFFLINE = b"offline"
# Acknowledgements remembered for publishes whose mid the caller has not seen yet.
_ACKS_KEPT = 4096


class MqttError(VentsupError):
    """The broker cannot be reached or refuses us, or a publish cannot be queued."""


# --------------------------------------------------------------------------- settings


@dataclass(frozen=True)
class TlsSettings:
    """TLS files (paths already resolved) and whether to skip the host name check."""

    ca_file: str | None = None
    cert_file: str | None = None
    key_file: str | None = None
    insecure: bool = False


@dataclass(frozen=True)
class MqttSettings:
    """Everything needed to connect; build from a site with :meth:`from_config`.

    ``status_topic``: when set, a retained ``online`` is published there after
    every connect, ``offline`` is the last will, and :meth:`MqttClient.close`
    publishes ``offline`` before disconnecting. ``max_queued`` bounds the
    publishes paho keeps in memory while disconnected.
    """

    host: str
    port: int
    client_id: str
    protocol: Literal["5", "3.1.1"] = "5"
    keepalive: int = 60
    tls: TlsSettings | None = None
    username: str | None = None
    password: str | None = field(default=None, repr=False)
    status_topic: str | None = None
    reconnect_min: float = 1.0
    reconnect_max: float = 60.0
    connect_timeout: float = 10.0
    max_queued: int = 10_000

    @classmethod
    def from_config(
        cls,
        mqtt: Mqtt,
        *,
        client_id: str,
        base_dir: Path,
        status_topic: str | None = None,
        environ: Mapping[str, str] | None = None,
    ) -> MqttSettings:
        """Settings from a site's ``mqtt`` section; relative file paths are read from ``base_dir``.

        Raises
        ------
        MqttError
            The password file cannot be read or the variable is not set.
        """
        tls = None
        if mqtt.tls is not None:
            tls = TlsSettings(
                ca_file=_resolve(base_dir, mqtt.tls.ca_file),
                cert_file=_resolve(base_dir, mqtt.tls.cert_file),
                key_file=_resolve(base_dir, mqtt.tls.key_file),
                insecure=mqtt.tls.insecure,
            )
        return cls(
            host=mqtt.host,
            port=mqtt.effective_port,
            client_id=client_id,
            protocol=mqtt.protocol,
            keepalive=round(mqtt.keepalive),
            tls=tls,
            username=mqtt.username,
            password=read_password(mqtt, base_dir, environ),
            status_topic=status_topic,
            reconnect_min=mqtt.reconnect_min,
            reconnect_max=mqtt.reconnect_max,
            connect_timeout=mqtt.connect_timeout,
        )

    @property
    def where(self) -> str:
        """``host:port``, for messages."""
        return f"{self.host}:{self.port}"


def _resolve(base_dir: Path, path: str | None) -> str | None:
    if path is None:
        return None
    return str(base_dir / Path(path).expanduser())


def read_password(
    mqtt: Mqtt, base_dir: Path, environ: Mapping[str, str] | None = None
) -> str | None:
    """The broker password from ``password_file`` or ``password_env``, None when neither is set.

    A trailing line break in the file is dropped; everything else is the password.

    Raises
    ------
    MqttError
        The file cannot be read, is empty, or the variable is not set or empty.
    """
    env = os.environ if environ is None else environ
    if mqtt.password_file is not None:
        path = _resolve(base_dir, mqtt.password_file)
        try:
            text = Path(str(path)).read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError) as exc:
            why = exc.strerror if isinstance(exc, OSError) and exc.strerror else str(exc)
            raise MqttError(
                f"cannot read the MQTT password from password_file {path}: {why}; "
                "the file must be readable by the service's user"
            ) from exc
        password = text.removesuffix("\n").removesuffix("\r")
        if not password:
            raise MqttError(f"the MQTT password file {path} is empty")
        return password
    if mqtt.password_env is not None:
        password = env.get(mqtt.password_env, "")
        if not password:
            raise MqttError(
                f"the environment variable {mqtt.password_env} (mqtt.password_env) is not set "
                "or empty; set it to the MQTT password in the service's environment"
            )
        return password
    return None


# --------------------------------------------------------------------------- items


@dataclass(frozen=True)
class Message:
    """A message received on a subscribed topic; ``t`` [s] is when it arrived."""

    topic: str
    payload: bytes
    qos: int
    retain: bool
    t: float

    def at(self, t: float) -> Message:
        """The same message stamped ``t`` (cheaper than ``dataclasses.replace``)."""
        return Message(self.topic, self.payload, self.qos, self.retain, t)


@dataclass(frozen=True)
class Connected:
    """The broker accepted a connection (the first or a reconnect)."""

    session_present: bool
    t: float


@dataclass(frozen=True)
class Disconnected:
    """The connection was lost (paho reconnects by itself) or closed on purpose."""

    reason: str
    t: float


@dataclass(frozen=True)
class ConnectRefused:
    """A reconnect was refused by the broker (bad credentials, not authorised...)."""

    reason: str
    t: float


@dataclass(frozen=True)
class Subscribed:
    """The broker answered a subscription: the topic filters granted and refused."""

    granted: tuple[str, ...]
    refused: tuple[str, ...]
    t: float


@dataclass(frozen=True)
class PublishRefused:
    """The broker refused a publish (under MQTT 5: "Not authorized" and the like)."""

    topic: str
    reason: str
    t: float


@dataclass(frozen=True)
class MqttStats:
    """Counters of one client since it was made."""

    connects: int = 0
    disconnects: int = 0
    callback_errors: int = 0
    dropped: int = 0  # items the queue had no room for
    published: int = 0
    delivered: int = 0
    refused: int = 0
    pending: int = 0  # QoS 1/2 publishes not yet acknowledged


# --------------------------------------------------------------------------- TLS


class _TrackingContext(ssl.SSLContext):
    """An SSL context that remembers the last socket it wrapped.

    paho leaves a socket open when the TLS handshake fails (the handshake runs
    after the wrap); remembering it lets us close it.
    """

    last: ssl.SSLSocket | None = None

    def wrap_socket(self, *args: Any, **kwargs: Any) -> ssl.SSLSocket:
        sock = super().wrap_socket(*args, **kwargs)
        self.last = sock
        return sock


def _tls_context(tls: TlsSettings) -> _TrackingContext:
    context = _TrackingContext(ssl.PROTOCOL_TLS_CLIENT)
    context.minimum_version = ssl.TLSVersion.TLSv1_2
    try:
        if tls.ca_file is not None:
            context.load_verify_locations(cafile=tls.ca_file)
        else:
            context.load_default_certs()
        if tls.cert_file is not None:
            context.load_cert_chain(tls.cert_file, tls.key_file)
    except (OSError, ssl.SSLError) as exc:
        files = ", ".join(
            f"{name} {value}"
            for name, value in (
                ("ca_file", tls.ca_file),
                ("cert_file", tls.cert_file),
                ("key_file", tls.key_file),
            )
            if value is not None
        )
        why = exc.strerror if isinstance(exc, OSError) and exc.strerror else str(exc)
        raise MqttError(f"cannot load the TLS files ({files or 'system CAs'}): {why}") from exc
    if tls.insecure:
        context.check_hostname = False
    return context


# --------------------------------------------------------------------------- client

# Bytes taken from the socket at once by _BufferedClient.
_READ_CHUNK = 65536


class _BufferedClient(paho.Client):
    """paho's client, reading the socket in large chunks.

    paho 2.x reads each packet with at least three receive calls (command
    byte, length, body), and its loop reads one packet per ``select()`` when
    no message waits for an acknowledgement (QoS 0 traffic): dozens of system
    calls, each releasing the GIL, for a burst of small messages. Here a
    receive takes up to 64 KiB, paho is served the bytes it asks for from
    that buffer, and :meth:`loop_read` carries on while buffered bytes are
    left (a ``select()`` cannot see them). The buffer belongs to one socket:
    a new socket (a reconnect) starts empty.

    This overrides paho's private ``_sock_recv`` (only ``_packet_read``
    calls it), so it is tied to paho 2.x (pinned below 3). It is used only
    for a client without a network thread (the lock-step exchange of
    ``ventsup run --sim-clock`` and the simulator), whose broker tests
    exercise it with every message; the live daemon runs stock paho.
    """

    _rsock: object = None
    _rbuf: bytes = b""
    _rpos: int = 0

    def _sock_recv(self, bufsize: int) -> bytes:
        if self._rsock is not self._sock or self._rpos >= len(self._rbuf):
            self._rsock, self._rbuf, self._rpos = None, b"", 0
            data: bytes = super()._sock_recv(_READ_CHUNK)  # raises BlockingIOError when dry
            if not data:
                return data
            self._rsock, self._rbuf = self._sock, data
        start = self._rpos
        self._rpos = start + bufsize
        return self._rbuf[start : self._rpos]

    def loop_read(self, max_packets: int = 1) -> MQTTErrorCode:
        rc = super().loop_read(max_packets)
        while (
            rc == MQTTErrorCode.MQTT_ERR_SUCCESS
            and self._sock is not None
            and self._rsock is self._sock
            and self._rpos < len(self._rbuf)
        ):
            rc = super().loop_read(max_packets)
        return rc


class MqttClient:
    """One connection to the broker, kept up by paho's network thread.

    ``sink`` receives the items (see the module docstring); ``subscriptions``
    are topic filters subscribed at ``subscription_qos`` (default 1) after
    every connect. A subscriber that has its own check of completeness (the
    simulator's lock-step counts) may take QoS 0: the broker then sends it
    no message that waits for an acknowledgement.

    With ``network_thread=False`` no paho thread is started: the one thread
    that uses the client drives the network itself with :meth:`poll`, the
    callbacks run inside it, and a publish is written to the socket at once.
    That is for a lock-step exchange (one thread that publishes, then waits
    for the answer): it saves a thread hand-off per message. Connection
    losses are retried from :meth:`poll`, at most every ``reconnect_min``;
    publish, poll and close from that thread only. Use :meth:`connect` once,
    :meth:`publish` from any thread (never from a callback while waiting),
    and :meth:`close` at the end.
    """

    def __init__(
        self,
        settings: MqttSettings,
        sink: queue.Queue[Any] | None = None,
        *,
        subscriptions: Sequence[str] = (),
        clock: Clock | None = None,
        subscription_qos: int = 1,
        network_thread: bool = True,
    ) -> None:
        if subscription_qos not in (0, 1, 2):
            raise ValueError(f"subscription_qos must be 0, 1 or 2, got {subscription_qos!r}")
        self.settings = settings
        self._subscription_qos = subscription_qos
        self._network_thread = network_thread
        self._next_reconnect = 0.0
        self._sink: queue.Queue[Any] = sink if sink is not None else queue.Queue()
        self._subscriptions = tuple(dict.fromkeys(subscriptions))
        self._clock = clock if clock is not None else WallClock()
        self._cond = threading.Condition()
        self._counts = dict.fromkeys(
            ("connects", "disconnects", "callback_errors", "dropped", "published", "delivered"), 0
        )
        self._counts["refused"] = 0
        self._pending: dict[int, str] = {}  # mid -> topic, awaiting on-publish
        # QoS 1/2 publishes handed to paho and not yet in _pending (another thread's
        # wait_all_delivered must not take "nothing pending" for "all delivered").
        self._publishing = 0
        # mid -> (monotonic time of the acknowledgement, failure reason or None)
        self._acks: OrderedDict[int, tuple[float, str | None]] = OrderedDict()
        self._subscribe_mids: dict[int, tuple[str, ...]] = {}
        self._first_connack = threading.Event()
        self._first_reason: ReasonCode | None = None
        self._connected = False
        self._closing = False
        self._started = False
        self._tls_context: _TrackingContext | None = None
        self._tracking = False  # whether on_publish is set
        self._client = self._make_client()

    # ----------------------------------------------------------------- setup

    def _make_client(self) -> paho.Client:
        s = self.settings
        v5 = s.protocol == "5"
        # The chunked reader overrides a private paho method: only the lock-step exchange,
        # where it pays, relies on it; a live daemon (a few messages a second) runs stock paho.
        client_class = paho.Client if self._network_thread else _BufferedClient
        client = client_class(
            CallbackAPIVersion.VERSION2,
            client_id=s.client_id,
            protocol=MQTTProtocolVersion.MQTTv5 if v5 else MQTTProtocolVersion.MQTTv311,
            clean_session=None if v5 else True,
        )
        # Our guards catch everything; this is the second line of defence.
        client.suppress_exceptions = True
        client.enable_logger(logging.getLogger("ventsup.mqtt.paho"))
        client.reconnect_delay_set(
            max(1, round(s.reconnect_min)), max(1, round(s.reconnect_max), round(s.reconnect_min))
        )
        client.max_queued_messages_set(s.max_queued)
        client.connect_timeout = s.connect_timeout
        if s.username is not None:
            client.username_pw_set(s.username, s.password)
        if s.status_topic is not None:
            client.will_set(s.status_topic, OFFLINE, qos=1, retain=True)
        if s.tls is not None:
            self._tls_context = _tls_context(s.tls)
            client.tls_set_context(self._tls_context)
            if s.tls.insecure:
                client.tls_insecure_set(True)
        client.on_connect = self._guard("connect", self._on_connect)
        client.on_connect_fail = self._guard("connect_fail", self._on_connect_fail)
        client.on_disconnect = self._guard("disconnect", self._on_disconnect)
        client.on_message = self._guard("message", self._on_message)
        # on_publish is set with the first QoS 1 or 2 publish (see publish()): for QoS 0,
        # paho calls it after every write with two new objects, and nothing waits for it.
        client.on_subscribe = self._guard("subscribe", self._on_subscribe)
        return client

    def _guard(self, name: str, body: Callable[..., None]) -> Callable[..., None]:
        def guarded(*args: Any) -> None:
            try:
                body(*args)
            except Exception:
                self._count("callback_errors")
                _log.exception(
                    "error in the MQTT %s callback (counted; the network thread carries on)", name
                )

        return guarded

    def _count(self, name: str, n: int = 1) -> None:
        with self._cond:
            self._counts[name] += n

    def _put(self, item: object) -> None:
        try:
            self._sink.put_nowait(item)
        except queue.Full:
            self._count("dropped")

    # ----------------------------------------------------------------- callbacks

    def _on_connect(
        self, client: paho.Client, _userdata: Any, flags: Any, reason: ReasonCode, _props: Any
    ) -> None:
        now = self._clock.now()
        if reason.is_failure:
            if not self._first_connack.is_set():
                self._first_reason = reason
                self._first_connack.set()
            else:
                _log.error("the broker at %s refused to reconnect: %s", self.settings.where, reason)
            self._put(ConnectRefused(str(reason), now))
            return
        sock = client.socket()
        if isinstance(sock, socket.socket):
            sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
        with self._cond:
            self._connected = True
            self._counts["connects"] += 1
        if self._subscriptions:
            result, mid = client.subscribe(
                [(topic, self._subscription_qos) for topic in self._subscriptions]
            )
            if result == MQTTErrorCode.MQTT_ERR_SUCCESS and mid is not None:
                with self._cond:
                    self._subscribe_mids[mid] = self._subscriptions
        if self.settings.status_topic is not None:
            # Tracked like any QoS 1 publish: until the broker acknowledges it, a
            # broken connection makes paho send it again after the reconnect.
            self.publish(self.settings.status_topic, ONLINE, qos=1, retain=True)
        self._put(Connected(bool(flags.session_present), now))
        if not self._first_connack.is_set():
            self._first_reason = reason
            self._first_connack.set()

    def _on_connect_fail(self, _client: paho.Client, _userdata: Any) -> None:
        self._close_failed_tls_socket()
        _log.debug("reconnect to %s failed; paho retries", self.settings.where)

    def _on_disconnect(
        self, _client: paho.Client, _userdata: Any, _flags: Any, reason: ReasonCode, _props: Any
    ) -> None:
        with self._cond:
            was_connected, self._connected = self._connected, False
            if was_connected:
                self._counts["disconnects"] += 1
            closing = self._closing
        if was_connected:
            if not closing:
                _log.warning(
                    "lost the connection to the broker at %s (%s); reconnecting",
                    self.settings.where,
                    reason,
                )
            self._put(Disconnected(str(reason), self._clock.now()))

    def _on_message(self, _client: paho.Client, _userdata: Any, message: paho.MQTTMessage) -> None:
        self._put(
            Message(
                topic=message.topic,
                payload=bytes(message.payload),
                qos=message.qos,
                retain=bool(message.retain),
                t=self._clock.now(),
            )
        )

    def _on_publish(
        self, _client: paho.Client, _userdata: Any, mid: int, reason: ReasonCode, _props: Any
    ) -> None:
        failure = str(reason) if reason.is_failure else None
        with self._cond:
            self._acks[mid] = (time.monotonic(), failure)
            self._acks.move_to_end(mid)
            while len(self._acks) > _ACKS_KEPT:
                self._acks.popitem(last=False)
            topic = self._pending.pop(mid, None)
            if topic is not None:
                self._settle(topic, failure)
            self._cond.notify_all()

    def _settle(self, topic: str, failure: str | None) -> None:
        """Count one acknowledged publish (call with the lock held)."""
        if failure is None:
            self._counts["delivered"] += 1
            return
        self._counts["refused"] += 1
        _log.error("the broker refused a publish to %s: %s", topic, failure)
        self._put(PublishRefused(topic, failure, self._clock.now()))

    def _on_subscribe(
        self,
        _client: paho.Client,
        _userdata: Any,
        mid: int,
        reasons: list[ReasonCode],
        _props: Any,
    ) -> None:
        with self._cond:
            topics = self._subscribe_mids.pop(mid, ())
        granted = tuple(t for t, r in zip(topics, reasons, strict=False) if not r.is_failure)
        refused = tuple(t for t, r in zip(topics, reasons, strict=False) if r.is_failure)
        if refused:
            _log.error("the broker refused the subscriptions %s", ", ".join(refused))
        self._put(Subscribed(granted, refused, self._clock.now()))

    # ----------------------------------------------------------------- use

    @property
    def connected(self) -> bool:
        """True while the broker has accepted the current connection."""
        with self._cond:
            return self._connected

    @property
    def stats(self) -> MqttStats:
        """A snapshot of the counters."""
        with self._cond:
            return MqttStats(pending=len(self._pending), **self._counts)

    def connect(self) -> None:
        """Connect, start the network thread and wait for the broker to accept us.

        Raises
        ------
        MqttError
            The broker cannot be reached, the TLS handshake fails, the broker
            refuses the connection (bad credentials, not authorised), or no
            answer comes within ``connect_timeout``. Nothing keeps retrying then.
        """
        if self._started:
            raise MqttError("connect() was already called on this client")
        s = self.settings
        self._started = True
        try:
            if s.protocol == "5":
                self._client.connect(s.host, s.port, s.keepalive, clean_start=True)
            else:
                self._client.connect(s.host, s.port, s.keepalive)
        except ssl.SSLCertVerificationError as exc:
            self._close_failed_tls_socket()
            ca = s.tls.ca_file if s.tls is not None and s.tls.ca_file else "the system's CAs"
            raise MqttError(
                f"TLS: cannot verify the certificate of the broker at {s.where} "
                f"({exc.verify_message}); check that mqtt.tls.ca_file ({ca}) is the CA that "
                "signed the broker's certificate and that mqtt.host is a name in it"
            ) from exc
        except ssl.SSLError as exc:
            self._close_failed_tls_socket()
            raise MqttError(
                f"TLS handshake with the broker at {s.where} failed: {exc.reason or exc}; "
                "is that port a TLS listener, and are the TLS files right?"
            ) from exc
        except ConnectionRefusedError as exc:
            raise MqttError(
                f"cannot connect to the MQTT broker at {s.where}: connection refused; "
                "is the broker running and listening on that port?"
            ) from exc
        except TimeoutError as exc:
            raise MqttError(
                f"cannot connect to the MQTT broker at {s.where}: no answer within "
                f"{s.connect_timeout:g} s (mqtt.connect_timeout)"
            ) from exc
        except (OSError, ValueError) as exc:
            why = exc.strerror if isinstance(exc, OSError) and exc.strerror else str(exc)
            raise MqttError(f"cannot connect to the MQTT broker at {s.where}: {why}") from exc
        if self._network_thread:
            self._client.loop_start()
            accepted = self._first_connack.wait(s.connect_timeout)
        else:
            deadline = time.monotonic() + s.connect_timeout
            while not self._first_connack.is_set() and time.monotonic() < deadline:
                self._run_once(min(0.1, max(0.0, deadline - time.monotonic())))
            accepted = self._first_connack.is_set()
        if not accepted:
            self._stop_network()
            raise MqttError(
                f"the broker at {s.where} did not accept the MQTT connection within "
                f"{s.connect_timeout:g} s; is it an MQTT {'TLS ' if s.tls else ''}port? "
                "A broker that requires a client certificate that was not given "
                "(mqtt.tls.cert_file) looks like this too"
            )
        reason = self._first_reason
        if reason is not None and reason.is_failure:
            self._stop_network()
            hint = ""
            if reason.getName() in ("Bad user name or password", "Not authorized"):
                hint = (
                    "; check mqtt.username and the password (password_file or password_env)"
                    " and the broker's password file"
                )
            raise MqttError(f"the broker at {s.where} refused the connection: {reason}{hint}")

    def publish(
        self, topic: str, payload: bytes | str, *, qos: int = 1, retain: bool = False
    ) -> int:
        """Queue a publish and return its message id; delivery is tracked for QoS 1 and 2.

        While disconnected, QoS 1 and 2 publishes wait in memory (up to
        ``max_queued``) and go out after the reconnect; QoS 0 ones are lost.

        Raises
        ------
        MqttError
            An invalid topic or payload, or the in-memory queue is full.
        """
        started = time.monotonic()
        if qos > 0:
            if not self._tracking:  # before the publish: its ack may come at once
                self._tracking = True
                self._client.on_publish = self._guard("publish", self._on_publish)
            with self._cond:
                self._publishing += 1
        try:
            info = self._client.publish(topic, payload, qos=qos, retain=retain)
        except (ValueError, TypeError) as exc:
            self._publish_failed(qos)
            raise MqttError(f"cannot publish to {topic!r}: {exc}") from exc
        except BaseException:
            self._publish_failed(qos)
            raise
        if info.rc == MQTTErrorCode.MQTT_ERR_QUEUE_SIZE:
            self._publish_failed(qos)
            raise MqttError(
                f"cannot publish to {topic!r}: {self.settings.max_queued} messages already "
                "wait for the broker"
            )
        with self._cond:
            self._counts["published"] += 1
            if qos > 0:
                self._publishing -= 1
                self._cond.notify_all()
                ack = self._acks.get(info.mid)
                if ack is not None and ack[0] >= started:  # acknowledged before we got here
                    self._settle(topic, ack[1])
                else:
                    self._acks.pop(info.mid, None)  # a stale one from a wrapped-around mid
                    self._pending[info.mid] = topic
        return int(info.mid)

    def _publish_failed(self, qos: int) -> None:
        """A QoS 1/2 publish that paho refused is no longer in progress."""
        if qos > 0:
            with self._cond:
                self._publishing -= 1
                self._cond.notify_all()

    @contextlib.contextmanager
    def corked(self) -> Iterator[None]:
        """Hold back what is written inside the block and send it as few TCP segments.

        With TCP_NODELAY every publish is a segment of its own, and on
        loopback each one wakes the broker: a burst of small messages (a
        simulator's step) costs a process switch per message. With
        ``TCP_CORK`` (Linux) the kernel keeps them until the block ends.
        Only what is written to the socket inside the block is held: with a
        network thread that writes later, or on a system without
        ``TCP_CORK``, this changes nothing. Never changes what is sent.
        """
        sock = self._client.socket()
        cork = getattr(socket, "TCP_CORK", None)
        if cork is None or not isinstance(sock, socket.socket):
            yield
            return
        try:
            sock.setsockopt(socket.IPPROTO_TCP, cork, 1)
        except OSError:  # a socket closed under us: nothing to hold back
            yield
            return
        try:
            yield
        finally:
            with contextlib.suppress(OSError):
                sock.setsockopt(socket.IPPROTO_TCP, cork, 0)

    def poll(self, timeout: float) -> None:
        """Send and receive for up to ``timeout`` [s]; only for a client without a network thread.

        Returns after the first batch of incoming packets has been handled
        (their callbacks run here), or after ``timeout``. While the
        connection is lost it tries to reconnect, at most every
        ``reconnect_min`` seconds, waiting in between.

        Raises
        ------
        RuntimeError
            The client has a network thread, or :meth:`connect` was not called.
        """
        if self._network_thread or not self._started:
            raise RuntimeError("poll() is for a connected client made with network_thread=False")
        rc = self._run_once(max(0.0, timeout))
        if rc == MQTTErrorCode.MQTT_ERR_SUCCESS or self._closing:
            return
        now = time.monotonic()
        if now < self._next_reconnect:
            time.sleep(min(max(0.0, timeout), self._next_reconnect - now))  # reconnect backoff
            return
        self._next_reconnect = now + max(self.settings.reconnect_min, 0.1)
        try:
            self._client.reconnect()
        except (OSError, ValueError) as exc:
            _log.debug("reconnect to %s failed: %s", self.settings.where, exc)

    def _run_once(self, timeout: float) -> MQTTErrorCode:
        """One turn of paho's external-loop API: wait for the socket, read, write, keep alive.

        Not paho's own ``loop()``: that makes a socket pair for other threads to
        wake it with, and then every publish writes a byte to it (a system
        call per message that nobody needs here).
        """
        client = self._client
        sock = client.socket()
        if sock is None:
            return MQTTErrorCode.MQTT_ERR_NO_CONN
        buffered = isinstance(sock, ssl.SSLSocket) and sock.pending() > 0  # not seen by select
        try:
            readable, _, _ = select.select(
                [sock], [sock] if client.want_write() else [], [], 0.0 if buffered else timeout
            )
        except (OSError, ValueError):  # closed under us: paho finds out when it reads
            readable = [sock]
        rc = MQTTErrorCode.MQTT_ERR_SUCCESS
        if readable or buffered:
            rc = client.loop_read()
        if rc == MQTTErrorCode.MQTT_ERR_SUCCESS and client.want_write():
            rc = client.loop_write()
        if rc == MQTTErrorCode.MQTT_ERR_SUCCESS:
            rc = client.loop_misc()
        return rc

    def _wait(self, timeout: float) -> None:
        """Wait for a callback (call with the lock held); pumps the network without a thread."""
        if self._network_thread:
            self._cond.wait(timeout)
            return
        self._cond.release()
        try:
            self.poll(min(timeout, 0.1))
        finally:
            self._cond.acquire()

    def wait_delivered(self, mid: int, timeout: float) -> str | None:
        """Wait until publish ``mid`` (QoS 1 or 2) is acknowledged.

        Returns None when the broker accepted it, else the broker's reason for
        refusing it (MQTT 5). Never call this from a callback.

        Raises
        ------
        MqttError
            No acknowledgement within ``timeout`` [s].
        """
        deadline = time.monotonic() + timeout
        with self._cond:
            while mid in self._pending:
                remaining = deadline - time.monotonic()
                if remaining <= 0:
                    raise MqttError(
                        f"the broker at {self.settings.where} did not acknowledge a publish "
                        f"to {self._pending[mid]!r} within {timeout:g} s"
                    )
                self._wait(remaining)
            ack = self._acks.get(mid)
            return None if ack is None else ack[1]

    def wait_all_delivered(self, timeout: float) -> bool:
        """Wait until no QoS 1 or 2 publish is pending; True if none is left.

        A publish another thread is making counts from the moment it is handed
        to paho, so "nothing pending" is never read in the middle of one.
        """
        deadline = time.monotonic() + timeout
        with self._cond:
            while self._pending or self._publishing:
                remaining = deadline - time.monotonic()
                if remaining <= 0:
                    return False
                self._wait(remaining)
            return True

    def close(self, timeout: float = 3.0) -> None:
        """Publish the retained ``offline`` (if any status topic), disconnect, stop the thread.

        Waits up to ``timeout`` [s] for pending publishes and the ``offline``
        to be acknowledged; idempotent.
        """
        with self._cond:
            if self._closing:
                return
            self._closing = True
        if not self._started:
            return
        if self.connected:
            self.wait_all_delivered(timeout / 2)
            if self.settings.status_topic is not None:
                try:
                    mid = self.publish(self.settings.status_topic, OFFLINE, qos=1, retain=True)
                    self.wait_delivered(mid, timeout / 2)
                except MqttError as exc:
                    _log.warning("could not publish 'offline' before disconnecting: %s", exc)
        self._stop_network()

    def _stop_network(self) -> None:
        # paho logs "Client is not connected" at error level once the socket is gone.
        self._client.disable_logger()
        self._client.disconnect()
        self._client.loop_stop()
        # paho closes its socket when its loop ends on a disconnect; a loop stopped
        # while still connecting may leave it open.
        sock = self._client.socket()
        if sock is not None:
            with contextlib.suppress(OSError):
                sock.close()
        self._close_failed_tls_socket()

    def _close_failed_tls_socket(self) -> None:
        context = self._tls_context
        if context is None or context.last is None:
            return
        sock, context.last = context.last, None
        if sock is not self._client.socket():
            with contextlib.suppress(OSError):
                sock.close()

    def __enter__(self) -> MqttClient:
        return self

    def __exit__(self, *exc_info: object) -> None:
        self.close()

    def __repr__(self) -> str:
        state = "connected" if self.connected else "not connected"
        return f"MqttClient({self.settings.client_id!r} at {self.settings.where}, {state})"
