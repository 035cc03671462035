"""``ventsup run --sim-clock``: the lock-step protocol's parts, and the daemon at its edges.

The closed loop with the simulator is in tests/simulator/test_bridge.py; here
the daemon is driven by hand with the real ``mosquitto_pub``, to show what a
simulator cannot easily show: a clock message that arrives before its step's
values, clocks refused, and stale retained values ignored.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pytest

from ventsup.config import load_config
from ventsup.drivers.service import Service
from ventsup.drivers.simclock import (
    CountingPublisher,
    Tick,
    ack_payload,
    ack_topic,
    clock_topic,
    parse_tick,
    sim_ledger_path,
    step_order,
    watched_topics,
)
from ventsup.edges.clock import WallClock
from ventsup.edges.ledger import Ledger

from .daemon_site import WARM_DAY, write_site
from .harness import daemon, mosquitto_pub, mosquitto_sub_one, send, watching

T0 = 1_719_943_200.0  # 2024-07-02 18:00 UTC


# --------------------------------------------------------------------------- the parts


def test_clock_messages_are_read_strictly() -> None:
    assert parse_tick(b'{"t": 1719943200, "step": 3, "messages": 8}') == Tick(T0, 3, 8)
    assert parse_tick(b'{"t": 1.5, "step": 0}') == Tick(1.5, 0, 0)
    for payload, expected in (
        (b"tick", "not JSON"),
        (b"[1, 2]", "a JSON object"),
        (b'{"t": NaN, "step": 0}', "'t' must be a finite number"),
        (b'{"t": true, "step": 0}', "'t' must be a finite number"),
        (b'{"t": 1, "step": 1.5}', "'step' must be an integer"),
        (b'{"t": 1, "step": 1, "messages": -1}', "'messages' must be a count"),
    ):
        with pytest.raises(ValueError, match=expected):
            parse_tick(payload)
    ack = json.loads(ack_payload(Tick(T0, 3, 8), outputs=5, accepted=8, rejected=1))
    assert ack == {"t": T0, "step": 3, "outputs": 5, "accepted": 8, "rejected": 1, "error": None}
    refused = json.loads(ack_payload(None, outputs=0, accepted=0, rejected=0, error="bad"))
    assert (refused["step"], refused["error"]) == (None, "bad")


def test_topics_and_the_order_within_a_step(tmp_path: Path) -> None:
    config = load_config(write_site(tmp_path, "p"))
    assert clock_topic(config) == "p/ctl/sim/clock"
    assert ack_topic(config) == "p/ctl/sim/ack"
    assert watched_topics(config) == {
        "p/ctl/zones/hall/state",
        "p/ctl/zones/room/state",
        "p/ctl/zones/hall/openings/north/command",
        "p/site/hall/south/set",  # the site's own command topic
        "p/ctl/zones/room/openings/window/command",
        "p/ctl/zones/hall/openings/north/state",
        "p/ctl/zones/hall/openings/south/state",
        "p/ctl/zones/room/openings/window/state",
    }
    order = step_order(config)
    ranked = sorted(order, key=order.__getitem__)
    # The site file's order, the points that trigger an urgent evaluation last.
    assert [topic.removeprefix("p/in/") for topic in ranked] == [
        "t_out",
        "rh_out",
        "t_hall",
        "t_room",
        "wind",
        "rain",
        "smoke_hall",
        "smoke_room",
    ]
    assert sim_ledger_path(Path("var/ventsup-x.db")) == Path("var/ventsup-x-sim.db")


def test_counting_publisher_counts_what_a_simulator_watches() -> None:
    sent: list[str] = []

    class Broker:
        def publish(
            self, topic: str, payload: bytes | str, *, qos: int = 1, retain: bool = False
        ) -> int:
            sent.append(topic)
            return len(sent)

    publisher = CountingPublisher(Broker(), ["a/state", "a/command"])
    for topic in ("a/state", "a/heartbeat", "a/command", "a/state"):
        publisher.publish(topic, b"x")
    assert (publisher.count, len(sent)) == (3, 4)


def test_a_simulated_clock_keeps_its_own_clock_and_ledger(tmp_path: Path) -> None:
    config = load_config(write_site(tmp_path, "p"))
    with pytest.raises(ValueError, match="keeps its own ManualClock"):
        Service(config, config_dir=tmp_path, sim_clock=True, clock=WallClock())
    service = Service(config, config_dir=tmp_path, sim_clock=True)
    assert service.ledger_path == tmp_path / "var" / "ventsup-test-hall-sim.db"
    assert service.clock.now() == 0.0
    assert "p/ctl/sim/clock" in service.subscriptions
    assert "p/ctl/sim/clock" not in Service(config, config_dir=tmp_path).subscriptions


# --------------------------------------------------------------------------- the daemon


def names(prefix: str) -> dict[str, str]:
    ctl = f"{prefix}/ctl"
    return {
        "clock": f"{ctl}/sim/clock",
        "ack": f"{ctl}/sim/ack",
        "hall": f"{ctl}/zones/hall/state",
        "north": f"{ctl}/zones/hall/openings/north/command",
    }


def tick(t: float, step: int, messages: int = 0) -> str:
    return json.dumps({"t": t, "step": step, "messages": messages})


@pytest.mark.broker
def test_a_step_waits_for_the_values_it_announces(
    tmp_path: Path, mosquitto: Any, topic_prefix: str
) -> None:
    host, port = mosquitto.host, mosquitto.port
    t = names(topic_prefix)
    site = write_site(tmp_path, topic_prefix, port=port, tick="1 min")
    with watching(host, port, [f"{topic_prefix}/#"]) as watch, daemon(site, sim_clock=True):
        # The clock first, its eight values after it (each by its own mosquitto_pub):
        # the step waits for them and handles them at the clock's time.
        mosquitto_pub(host, port, t["clock"], tick(T0, 0, len(WARM_DAY)))
        send(host, port, topic_prefix)
        ack = watch.json(t["ack"])
        assert (ack["t"], ack["step"], ack["error"]) == (T0, 0, None)
        assert (ack["accepted"], ack["rejected"]) == (len(WARM_DAY), 0)
        # The broker took the retained state before the ack (one connection, in order).
        state = json.loads(mosquitto_sub_one(host, port, t["hall"]))
        assert (state["t"], state["mode"]) == (T0, "free_cooling")
        assert state["inputs"]["temp_indoor"]["age"] == 0.0
        if (t["north"], b"0.6") not in [(m.topic, m.payload) for m in watch.seen]:
            watch.message(t["north"], lambda p: p == b"0.6")  # not retained: wait for it
        # Two zone states, three commands, three opening states.
        assert ack["outputs"] == 8
        # Nothing happens between clock messages: the next tick is a simulated minute away.
        mosquitto_pub(host, port, t["clock"], tick(T0 + 30.0, 1))
        assert watch.json(t["ack"], lambda a: a["step"] == 1)["outputs"] == 8
        mosquitto_pub(host, port, t["clock"], tick(T0 + 60.0, 2))
        assert watch.json(t["ack"], lambda a: a["step"] == 2)["outputs"] == 10  # two states
    with Ledger.open(tmp_path / "var" / "ventsup-test-hall-sim.db") as ledger:
        assert {m.t for m in ledger.messages()} == {T0}
        assert [(d.t, trigger) for d, trigger in ledger.decisions(zone="hall")] == [
            (T0, "tick"),
            (T0 + 60.0, "tick"),
        ]


@pytest.mark.broker
def test_clocks_that_cannot_be_followed_are_refused(
    tmp_path: Path, mosquitto: Any, topic_prefix: str
) -> None:
    host, port = mosquitto.host, mosquitto.port
    t = names(topic_prefix)
    site = write_site(tmp_path, topic_prefix, port=port)
    # A retained value from before the simulation is not an input of it.
    mosquitto_pub(host, port, f"{topic_prefix}/in/t_hall", "30", "-r")
    with watching(host, port, [f"{topic_prefix}/#"]) as watch, daemon(site, sim_clock=True):
        mosquitto_pub(host, port, t["clock"], tick(T0, 0))
        assert watch.json(t["ack"])["error"] is None
        state = json.loads(mosquitto_sub_one(host, port, t["hall"]))
        assert (state["t"], state["mode"]) == (T0, "fault")  # no indoor temperature
        mosquitto_pub(host, port, t["clock"], tick(T0 - 60.0, 1))
        refused = watch.json(t["ack"])
        assert refused["step"] == 1
        assert "step 1: got time" in refused["error"] and "never runs back" in refused["error"]
        mosquitto_pub(host, port, t["clock"], "next, please")
        unreadable = watch.json(t["ack"])
        assert unreadable["step"] is None and "not JSON" in unreadable["error"]
        mosquitto_pub(host, port, t["clock"], tick(T0 + 60.0, 2))
        assert watch.json(t["ack"])["error"] is None  # and it carries on
        state = json.loads(mosquitto_sub_one(host, port, t["hall"]))
        assert (state["t"], state["mode"]) == (T0 + 60.0, "fault")
