"""The live daemon against a real mosquitto, driven by mosquitto_pub/mosquitto_sub and paho.

The daemon runs in a thread of the test process (:func:`.harness.daemon`), or
as ``python -m ventsup.cli run`` for the kill-and-restart test. Every wait is a
queue wait with a timeout (:class:`.harness.Watch`); nothing is timed. Tests
that must show an evaluation came from a message, not from the tick, set the
tick to an hour.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import uuid
from pathlib import Path
from typing import Any

import pytest

from ventsup.cli import main
from ventsup.config import load_config
from ventsup.drivers.service import Service
from ventsup.edges.ledger import Ledger
from ventsup.edges.mqtt import MqttClient, MqttError, MqttSettings

from .daemon_site import write_site
from .harness import (
    WAIT,
    client_tool,
    daemon,
    mosquitto_pub,
    mosquitto_sub_one,
    send,
    watching,
)

pytestmark = pytest.mark.broker

COMMANDS = ("/command", "/set")


def names(prefix: str) -> dict[str, str]:
    """The topics a test looks at."""
    ctl = f"{prefix}/ctl"
    return {
        "ctl": ctl,
        "north": f"{ctl}/zones/hall/openings/north/command",
        "south": f"{prefix}/site/hall/south/set",
        "window": f"{ctl}/zones/room/openings/window/command",
        "hall": f"{ctl}/zones/hall/state",
        "room": f"{ctl}/zones/room/state",
        "status": f"{ctl}/status",
        "heartbeat": f"{ctl}/heartbeat",
    }


def commands(watch: Any, since: int = 0) -> list[tuple[str, bytes]]:
    return [(m.topic, m.payload) for m in watch.seen[since:] if m.topic.endswith(COMMANDS)]


# --------------------------------------------------------------------------- in and out


def test_sensor_values_in_commands_and_state_out(
    tmp_path: Path, mosquitto: Any, topic_prefix: str
) -> None:
    host, port = mosquitto.host, mosquitto.port
    t = names(topic_prefix)
    site = write_site(tmp_path, topic_prefix, port=port)
    with watching(host, port, [f"{topic_prefix}/#"]) as watch, daemon(site):
        first = watch.json(t["hall"])
        assert (first["mode"], first["targets"]) == ("fault", {"north": 0.0, "south": 0.0})

        send(host, port, topic_prefix)
        watch.message(t["north"], lambda p: p == b"0.6")
        watch.message(t["south"], lambda p: p == b"60")  # the site's topic, in percent
        state = watch.json(t["hall"], lambda s: s["mode"] == "free_cooling")
        assert state["targets"] == {"north": 0.6, "south": 0.6}
        assert state["reason"].startswith("free cooling at 60 %: indoor 24.0 °C")
        assert state["inputs"]["temp_indoor"]["value"] == 24.0
        assert state["inputs"]["rain"]["value"] is False
        interlock = watch.json(f"{t['ctl']}/zones/hall/interlock", lambda s: s["windows_open"])
        assert interlock == {"windows_open": True, "open_area": 2.4}

        # Bad values are rejected, counted by reason and change nothing.
        mosquitto_pub(host, port, f"{topic_prefix}/in/t_hall", "NaN")
        mosquitto_pub(host, port, f"{topic_prefix}/in/t_room", "{not json")
        beat = watch.json(t["heartbeat"], lambda b: b["rejected_total"] == 2)
        assert beat["rejected"] == {"not_finite": 1, "not_json": 1}
        assert beat["accepted"] == 8
        assert beat["mqtt"]["callback_errors"] == 0

        # A newcomer reads the retained state and status with the real mosquitto_sub.
        retained = json.loads(mosquitto_sub_one(host, port, t["hall"]))
        assert (retained["mode"], retained["targets"]["north"]) == ("free_cooling", 0.6)
        assert mosquitto_sub_one(host, port, t["status"]) == "online"
        room = json.loads(mosquitto_sub_one(host, port, t["room"]))
        assert (room["mode"], room["targets"]) == ("idle", {"window": 0.0})
    # one command per change: closed at start, then open once
    assert commands(watch) == [
        (t["north"], b"0"),
        (t["south"], b"0"),
        (t["window"], b"0"),
        (t["north"], b"0.6"),
        (t["south"], b"60"),
    ]
    assert mosquitto_sub_one(host, port, t["status"]) == "offline"


def test_rain_and_smoke_act_without_waiting_for_the_tick(
    tmp_path: Path, mosquitto: Any, topic_prefix: str
) -> None:
    host, port = mosquitto.host, mosquitto.port
    t = names(topic_prefix)
    site = write_site(tmp_path, topic_prefix, port=port, tick="1 h")
    with watching(host, port, [f"{topic_prefix}/#"]) as watch, daemon(site):
        watch.json(t["hall"])  # the evaluation at start; the next tick is an hour away
        send(host, port, topic_prefix)
        watch.message(t["north"], lambda p: p == b"0.6")

        mosquitto_pub(host, port, f"{topic_prefix}/in/rain", "wet")
        watch.message(t["north"], lambda p: p == b"0")
        watch.message(t["south"], lambda p: p == b"0")
        state = watch.json(t["hall"], lambda s: s["mode"] == "protected")
        assert state["cause"] == "rain"

        mosquitto_pub(host, port, f"{topic_prefix}/in/smoke_room", "alarm")
        notice = watch.json(f"{t['ctl']}/zones/room/openings/window/state")
        assert (notice["released"], notice["target"], notice["command"]) == (True, None, None)
        released = watch.json(t["room"], lambda s: s["mode"] == "released")
        assert released["reason"].startswith("released to the fire system: smoke alarm smoke_room")
        assert released["alarm_latched"] is True
        mark = len(watch.seen)
        watch.json(t["heartbeat"])
    # the room's window was commanded once (closed, at start), never after the release
    assert [c for c in commands(watch) if c[0] == t["window"]] == [(t["window"], b"0")]
    assert not [c for c in commands(watch, mark) if c[0] == t["window"]]


def test_stale_indoor_sensor_leads_to_the_fault_state(
    tmp_path: Path, mosquitto: Any, topic_prefix: str
) -> None:
    host, port = mosquitto.host, mosquitto.port
    t = names(topic_prefix)
    site = write_site(tmp_path, topic_prefix, port=port, stale_indoor="1 s")
    with watching(host, port, [f"{topic_prefix}/#"]) as watch, daemon(site):
        watch.json(t["hall"])
        send(host, port, topic_prefix)
        watch.message(t["north"], lambda p: p == b"0.6")
        # t_hall is not sent again: a second later it is stale and never counts as good
        watch.message(t["north"], lambda p: p == b"0")
        state = watch.json(t["hall"], lambda s: s["mode"] == "fault")
        assert state["inputs"]["temp_indoor"]["status"] == "stale"
        assert "indoor temperature t_hall unknown (no valid value since" in state["reason"]
        assert state["reason"].endswith("fallback closed")


def test_override_and_its_expiry(
    tmp_path: Path, mosquitto: Any, topic_prefix: str, capsys: pytest.CaptureFixture[str]
) -> None:
    host, port = mosquitto.host, mosquitto.port
    t = names(topic_prefix)
    result = f"{t['ctl']}/zones/hall/override/result"
    site = write_site(tmp_path, topic_prefix, port=port, tick="1 h")
    with watching(host, port, [f"{topic_prefix}/#"]) as watch, daemon(site):
        watch.json(t["hall"])
        send(host, port, topic_prefix)
        watch.message(t["north"], lambda p: p == b"0.6")

        # A malformed request is answered, and the daemon carries on.
        bad = json.dumps({"id": "b1", "action": "shut", "who": "jo", "reason": "x"})
        mosquitto_pub(host, port, f"{t['ctl']}/zones/hall/override", bad)
        answer = watch.json(result, lambda a: a["id"] == "b1")
        assert answer["ok"] is False
        assert answer["error"].startswith("'action' must be one of open, close, hold, auto")

        # `ventsup override` waits for the answer and prints it.
        argv = ["override", str(site), "hall", "close", "--for", "2 s", "--reason", "cleaning"]
        assert main([*argv, "--who", "jo"]) == 0
        out = capsys.readouterr().out
        assert out.startswith("zone hall: close by jo until ")
        assert "mode override: closed by operator jo until" in out
        assert out.rstrip().endswith("openings: north 0 %, south 0 %")
        watch.message(t["north"], lambda p: p == b"0")
        watch.message(t["south"], lambda p: p == b"0")
        state = watch.json(t["hall"], lambda s: s["mode"] == "override")
        assert (state["override"]["who"], state["override"]["why"]) == ("jo", "cleaning")

        assert main(["status", str(site)]) == 0
        lines = capsys.readouterr().out.splitlines()
        assert lines[0] == f"controller {t['ctl']}: online"
        assert lines[1].startswith("hall  override (")
        assert lines[3].startswith("room  idle (")

        # Two seconds later the override ends by itself (the tick is an hour away).
        watch.message(t["north"], lambda p: p == b"0.6")
        back = watch.json(t["hall"], lambda s: s["mode"] != "override")
        assert (back["mode"], back["override"]) == ("free_cooling", None)
    with Ledger.open(tmp_path / "var" / "ventsup-test-hall.db") as ledger:
        events = [(e.kind, e.who) for e in ledger.events() if e.kind.startswith("override")]
        triggers = {trigger for _, trigger in ledger.decisions(zone="hall")}
    assert events == [("override", "jo"), ("override_end", "jo")]
    assert {"tick", "override", "input:rain"} <= triggers


# --------------------------------------------------------------------------- outages


def test_broker_restart_resubscribes_without_duplicate_moves(
    tmp_path: Path, mosquitto: Any, topic_prefix: str
) -> None:
    host, port = mosquitto.host, mosquitto.port
    t = names(topic_prefix)
    site = write_site(tmp_path, topic_prefix, port=port, tick="1 h")
    with watching(host, port, [f"{topic_prefix}/#"]) as watch, daemon(site) as service:
        watch.json(t["hall"])
        send(host, port, topic_prefix)
        watch.message(t["north"], lambda p: p == b"0.6")
        watch.message(t["south"], lambda p: p == b"60")
        # QoS 1 is at least once: a command the broker had delivered but not yet
        # acknowledged when it stopped is sent again by paho after the reconnect, by the
        # protocol and not by the daemon. Stop the broker once the daemon has published the
        # zone state that follows its commands and every ack is in, so that a second
        # command below can only be one the daemon decided to send.
        watch.json(t["hall"], lambda s: s["mode"] == "free_cooling")
        assert service.mqtt is not None and service.mqtt.wait_all_delivered(WAIT)

        mosquitto.stop()  # retained messages and sessions are gone with it
        mosquitto.start()
        watch.subscribed()
        mark = len(watch.seen)
        watch.message(t["status"], lambda p: p == b"online")
        republished = watch.json(t["hall"])  # retained outputs published again
        assert republished["mode"] == "free_cooling"

        # The daemon's subscriptions are back: rain acts at once.
        mosquitto_pub(host, port, f"{topic_prefix}/in/rain", "wet")
        watch.message(t["north"], lambda p: p == b"0")
        watch.message(t["south"], lambda p: p == b"0")
        watch.json(t["hall"], lambda s: s["mode"] == "protected")
        assert service.mqtt is not None and service.mqtt.stats.connects == 2
    # Nothing was sent twice: after the restart only the moves the rain asked for.
    assert commands(watch, mark) == [(t["north"], b"0"), (t["south"], b"0")]


def test_kill_and_restart_restores_latches_and_moves_no_window(
    tmp_path: Path, mosquitto: Any, topic_prefix: str
) -> None:
    host, port = mosquitto.host, mosquitto.port
    t = names(topic_prefix)
    site = write_site(tmp_path, topic_prefix, port=port, tick="0.5 s")
    ledger = tmp_path / "state" / "ledger.db"
    log = (tmp_path / "daemon.log").open("ab")

    def start() -> subprocess.Popen[bytes]:
        command = [sys.executable, "-m", "ventsup.cli", "run", str(site), "--ledger", str(ledger)]
        return subprocess.Popen(
            [*command, "--log-format", "json"], stdin=subprocess.DEVNULL, stdout=log, stderr=log
        )

    def daemon_log() -> str:
        return (tmp_path / "daemon.log").read_text(encoding="utf-8", errors="replace")

    with watching(host, port, [f"{topic_prefix}/#"]) as watch:
        process = start()
        try:
            watch.json(t["hall"])
            send(host, port, topic_prefix)
            watch.message(t["north"], lambda p: p == b"0.6")
            request = {"id": "k1", "action": "open", "position": 0.4, "duration": "2 h"}
            request |= {"who": "jo", "reason": "commissioning"}
            mosquitto_pub(host, port, f"{t['ctl']}/zones/hall/override", json.dumps(request))
            watch.message(t["north"], lambda p: p == b"0.4")  # sent before the answer
            until = watch.json(f"{t['ctl']}/zones/hall/override/result")["until"]
            mosquitto_pub(host, port, f"{topic_prefix}/in/smoke_room", "alarm")
            mosquitto_pub(host, port, f"{topic_prefix}/in/smoke_room", "normal")
            watch.json(t["room"], lambda s: "smoke alarm clear since" in s["reason"])
            # everything is in the ledger: nothing pending, every state saved
            watch.json(
                t["heartbeat"],
                lambda b: (
                    b["accepted"] == 10
                    and b["ledger"]["pending"] == 0
                    and b["ledger"]["unsaved_zones"] == 0
                ),
            )
            before = dict(commands(watch))

            process.kill()
            assert process.wait(WAIT) == -signal.SIGKILL
            watch.message(t["status"], lambda p: p == b"offline")  # the broker's last will
            mark = len(watch.seen)
            process = start()
            watch.message(t["status"], lambda p: p == b"online")
            hall = watch.json(t["hall"])
            room = watch.json(t["room"])
            assert (hall["mode"], hall["override"]["who"]) == ("override", "jo"), daemon_log()
            assert hall["override"]["until"] == until
            assert hall["targets"] == {"north": 0.4, "south": 0.4}
            assert (room["mode"], room["alarm_latched"]) == ("released", True)
            watch.json(t["heartbeat"], lambda b: b["counts"]["evaluations"] >= 4)
        finally:
            process.terminate()
            code = process.wait(WAIT)
            log.close()
        assert code == 0, daemon_log()
        watch.message(t["status"], lambda p: p == b"offline")
    # Restored targets were re-asserted as they were, never changed; the released
    # window was not commanded.
    after = commands(watch, mark)
    assert after, "the restored targets were not re-asserted"
    assert all(payload == before[topic] for topic, payload in after), (after, before)
    assert t["window"] not in {topic for topic, _ in after}
    assert '"message": "stopping: signal SIGTERM"' in daemon_log()


# --------------------------------------------------------------------------- security


def _password_broker(directory: Path, prefix: str) -> tuple[Any, dict[str, str]]:
    """Start a mosquitto with a password file and an ACL; returns it and the passwords."""
    from tests.conftest import BrokerProcess, find_mosquitto, free_port

    passwords = {user: uuid.uuid4().hex for user in ("ventsup", "operator", "viewer", "gateway")}
    password_file = directory / "passwd"
    for index, (user, password) in enumerate(passwords.items()):
        create = ["-c"] if index == 0 else []
        done = subprocess.run(
            [client_tool("mosquitto_passwd"), *create, "-b", str(password_file), user, password],
            capture_output=True,
            text=True,
            check=False,
        )
        assert done.returncode == 0, done.stderr
    ctl = f"{prefix}/ctl"
    acl = directory / "acl"
    acl.write_text(
        f"""\
user ventsup
topic read {prefix}/in/#
topic write {prefix}/site/#
topic write {ctl}/status
topic write {ctl}/heartbeat
topic write {ctl}/zones/+/state
topic write {ctl}/zones/+/interlock
topic write {ctl}/zones/+/openings/+/command
topic write {ctl}/zones/+/openings/+/state
topic write {ctl}/zones/+/override/result
topic read {ctl}/zones/+/override

user operator
topic write {ctl}/zones/+/override
topic read {ctl}/#

user viewer
topic read {ctl}/#

user gateway
topic write {prefix}/in/#
topic read {prefix}/site/#
""",
        encoding="utf-8",
    )
    port = free_port()
    config = directory / "mosquitto.conf"
    lines = [
        f"listener {port} 127.0.0.1",
        "allow_anonymous false",
        f"password_file {password_file}",
        f"acl_file {acl}",
        "persistence false",
        "log_dest stdout",
        "set_tcp_nodelay true",
    ]
    if os.geteuid() == 0:
        lines.append("user root")
    config.write_text("\n".join(lines) + "\n", encoding="utf-8")
    broker = BrokerProcess(find_mosquitto(), config, directory / "mosquitto.log", "127.0.0.1", port)
    broker.start()
    return broker, passwords


def test_acl_lets_only_operators_override_and_only_the_controller_command(
    tmp_path: Path, topic_prefix: str, capsys: pytest.CaptureFixture[str]
) -> None:
    t = names(topic_prefix)
    broker, passwords = _password_broker(tmp_path, topic_prefix)
    host, port = broker.host, broker.port
    try:
        (tmp_path / "ventsup.password").write_text(passwords["ventsup"] + "\n", encoding="utf-8")
        (tmp_path / "operator.password").write_text(passwords["operator"], encoding="utf-8")
        login = "username: ventsup\npassword_file: ventsup.password\n"
        site = write_site(tmp_path, topic_prefix, port=port, tick="1 h", mqtt_extra=login)
        viewer = {"username": "viewer", "password": passwords["viewer"]}
        gateway = ["-u", "gateway", "-P", passwords["gateway"]]
        result = f"{t['ctl']}/zones/hall/override/result"
        with watching(host, port, [f"{t['ctl']}/#"], **viewer) as watch, daemon(site):
            watch.json(t["hall"])
            for point, value in (("t_out", "18"), ("rh_out", "50"), ("t_hall", "24")):
                mosquitto_pub(host, port, f"{topic_prefix}/in/{point}", value, *gateway)
            for point, value in (("t_room", '{"value": 21}'), ("wind", "2")):
                mosquitto_pub(host, port, f"{topic_prefix}/in/{point}", value, *gateway)
            for point in ("smoke_hall", "smoke_room", "rain"):
                mosquitto_pub(host, port, f"{topic_prefix}/in/{point}", "false", *gateway)
            watch.message(t["north"], lambda p: p == b"0.6")

            # A viewer may read but not override: the broker refuses (MQTT 5 says so).
            request = {"id": "v1", "action": "open", "who": "eve", "reason": "let me in"}
            denied = subprocess.run(
                [
                    *(client_tool("mosquitto_pub"), "-h", host, "-p", str(port), "-V", "mqttv5"),
                    *("-u", "viewer", "-P", passwords["viewer"], "-q", "1"),
                    *("-t", f"{t['ctl']}/zones/hall/override", "-m", json.dumps(request)),
                ],
                capture_output=True,
                text=True,
                timeout=WAIT,
                check=False,
            )
            assert "Not authorized" in denied.stderr, denied
            # Through paho (MQTT 5) the refusal comes back as the PUBACK's reason.
            mid = watch.client.publish(f"{t['ctl']}/zones/hall/override", json.dumps(request))
            assert watch.client.wait_delivered(mid, WAIT) == "Not authorized"
            # Nor may anyone but the controller write a command.
            mid = watch.client.publish(t["north"], b"1")
            assert watch.client.wait_delivered(mid, WAIT) == "Not authorized"

            # An operator may: through `ventsup override` with its own login.
            operator = ["--username", "operator", "--password-file"]
            operator.append(str(tmp_path / "operator.password"))
            argv = ["override", str(site), "hall", "close", "--reason", "window cleaning"]
            assert main([*argv, "--who", "ops", *operator]) == 0, capsys.readouterr()
            watch.message(t["north"], lambda p: p == b"0")
            watch.json(result)
            # the only answer the controller ever gave: the viewer's requests never reached it
            answers = [json.loads(m.payload) for m in watch.seen if m.topic == result]
            assert [(a["ok"], a["who"]) for a in answers] == [(True, "ops")]
            assert b"1" not in {payload for _, payload in commands(watch)}

        # Wrong credentials are a clear error at start-up, not endless retrying.
        wrong = MqttSettings(host, port, "ventsup-wrong", username="ventsup", password="nope")
        with pytest.raises(MqttError, match="refused the connection: Not authorized"):
            MqttClient(wrong).connect()
    finally:
        broker.stop()


def _openssl(*args: str, cwd: Path) -> None:
    done = subprocess.run(
        [client_tool("openssl"), *args], cwd=cwd, capture_output=True, text=True, check=False
    )
    assert done.returncode == 0, done.stderr


def _certificates(directory: Path) -> None:
    """A throwaway CA and broker certificate for 127.0.0.1, and an unrelated CA."""
    ec = ["-newkey", "ec", "-pkeyopt", "ec_paramgen_curve:prime256v1", "-nodes"]
    _openssl("req", "-x509", *ec, "-keyout", "ca.key", "-out", "ca.crt", "-days", "2",
             "-subj", "/CN=ventsup test CA", cwd=directory)  # fmt: skip
    _openssl("req", *ec, "-keyout", "server.key", "-out", "server.csr",
             "-subj", "/CN=127.0.0.1", cwd=directory)  # fmt: skip
    (directory / "san.cnf").write_text("subjectAltName=IP:127.0.0.1\n", encoding="utf-8")
    _openssl("x509", "-req", "-in", "server.csr", "-CA", "ca.crt", "-CAkey", "ca.key",
             "-CAcreateserial", "-out", "server.crt", "-days", "2", "-extfile", "san.cnf",
             cwd=directory)  # fmt: skip
    _openssl("req", "-x509", *ec, "-keyout", "other.key", "-out", "other.crt", "-days", "2",
             "-subj", "/CN=some other CA", cwd=directory)  # fmt: skip


def test_tls_with_the_wrong_ca_is_refused(tmp_path: Path, topic_prefix: str) -> None:
    from tests.conftest import BrokerProcess, find_mosquitto, free_port

    _certificates(tmp_path)
    port = free_port()
    lines = [
        f"listener {port} 127.0.0.1",
        f"cafile {tmp_path / 'ca.crt'}",
        f"certfile {tmp_path / 'server.crt'}",
        f"keyfile {tmp_path / 'server.key'}",
        "allow_anonymous true",
        "persistence false",
        "log_dest stdout",
    ]
    if os.geteuid() == 0:
        lines.append("user root")
    (tmp_path / "mosquitto.conf").write_text("\n".join(lines) + "\n", encoding="utf-8")
    broker = BrokerProcess(
        find_mosquitto(), tmp_path / "mosquitto.conf", tmp_path / "mosquitto.log", "127.0.0.1", port
    )
    broker.start()
    try:
        t = names(topic_prefix)
        wrong = write_site(
            tmp_path, topic_prefix, port=port, mqtt_extra="tls: {ca_file: other.crt}\n"
        )
        done = subprocess.run(
            [sys.executable, "-m", "ventsup.cli", "run", str(wrong)],
            stdin=subprocess.DEVNULL,
            capture_output=True,
            text=True,
            timeout=60,
            check=False,
        )
        assert done.returncode == 1, done
        assert (
            f"TLS: cannot verify the certificate of the broker at 127.0.0.1:{port}" in done.stderr
        )
        assert "other.crt" in done.stderr

        # The right CA connects (so it was the CA that was refused, not TLS as such).
        right = write_site(tmp_path, topic_prefix, port=port, mqtt_extra="tls: {ca_file: ca.crt}\n")
        service = Service(load_config(right), config_dir=tmp_path)
        service.start()
        try:
            assert service.mqtt is not None and service.mqtt.connected
        finally:
            service.stop()
            assert service.wait(WAIT)
        done = subprocess.run(
            [
                *(client_tool("mosquitto_sub"), "-h", "127.0.0.1", "-p", str(port)),
                *("--cafile", str(tmp_path / "ca.crt"), "-t", t["status"]),
                *("-C", "1", "-W", str(int(WAIT))),
            ],
            capture_output=True,
            text=True,
            timeout=60,
            check=False,
        )
        assert done.stdout == "offline\n", done
    finally:
        broker.stop()


# --------------------------------------------------------------------------- commissioning


def test_observe_only_sends_no_command(tmp_path: Path, mosquitto: Any, topic_prefix: str) -> None:
    host, port = mosquitto.host, mosquitto.port
    t = names(topic_prefix)
    site = write_site(tmp_path, topic_prefix, port=port)
    with watching(host, port, [f"{topic_prefix}/#"]) as watch, daemon(site, observe=True):
        watch.json(t["hall"])
        send(host, port, topic_prefix)
        opening = watch.json(f"{t['ctl']}/zones/hall/openings/north/state", lambda s: s["target"])
        assert (opening["command"], opening["commanded"]) == ("0.6", False)
        state = watch.json(t["hall"], lambda s: s["mode"] == "free_cooling")
        assert (state["targets"], state["observe"]) == ({"north": 0.6, "south": 0.6}, True)
        watch.json(t["heartbeat"], lambda b: b["accepted"] == 8)
    assert commands(watch) == []
