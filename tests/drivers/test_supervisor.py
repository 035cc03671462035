"""The daemon's logic without a broker: a list stands in for MQTT, a temp file for the ledger."""

from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from ventsup.config import SiteConfig, load_config_text
from ventsup.drivers.messages import (
    OverrideRefused,
    Topics,
    interlock_payload,
    json_payload,
    parse_override,
    request_id,
)
from ventsup.drivers.service import default_ledger_path
from ventsup.drivers.supervisor import Supervisor, urgent_zones
from ventsup.edges.clock import ManualClock
from ventsup.edges.ledger import Ledger
from ventsup.edges.mqtt import Connected, Disconnected, Message, MqttError

from .daemon_site import WARM_DAY, payload, site_text

PREFIX = "t"
T0 = 1_750_000_000.0  # 2025-06-15 15:06:40 UTC


class Broker:
    """Collects what the supervisor publishes."""

    def __init__(self) -> None:
        self.sent: list[tuple[str, bytes, int, bool]] = []
        self.fail = False

    def publish(
        self, topic: str, payload: bytes | str, *, qos: int = 1, retain: bool = False
    ) -> int:
        if self.fail:
            raise MqttError("the in-memory queue is full")
        data = payload.encode() if isinstance(payload, str) else payload
        self.sent.append((topic, data, qos, retain))
        return len(self.sent)

    def take(self) -> list[tuple[str, bytes, int, bool]]:
        sent, self.sent = self.sent, []
        return sent

    def commands(self) -> dict[str, bytes]:
        """Command topic -> payload of the commands sent since the last take()."""
        return {t: p for t, p, _, _ in self.sent if t.endswith(("/command", "/set"))}

    def last(self, topic: str) -> Any:
        for sent_topic, data, _, _ in reversed(self.sent):
            if sent_topic == topic:
                return json.loads(data)
        raise AssertionError(f"nothing published on {topic}; sent: {[s[0] for s in self.sent]}")


@pytest.fixture
def config() -> SiteConfig:
    return load_config_text(site_text(PREFIX), "site.yaml")


@pytest.fixture
def ledger(tmp_path: Path) -> Iterator[Ledger]:
    with Ledger.open(tmp_path / "ledger.db") as opened:
        yield opened


def message(point: str, value: str, t: float) -> Message:
    return Message(f"{PREFIX}/in/{point}", payload(point, value).encode(), 1, False, t)


def started(
    config: SiteConfig, broker: Broker, ledger: Ledger | None, clock: ManualClock, **kw: Any
) -> Supervisor:
    sup = Supervisor(config, broker, ledger=ledger, mono=clock.now, **kw)
    sup.restore(clock.now())
    sup.begin(clock.now())
    return sup


def warm(sup: Supervisor, clock: ManualClock) -> None:
    for point, value in WARM_DAY:
        clock.advance(0.01)
        sup.on_message(message(point, value, clock.now()))


def hall_commands(config: SiteConfig) -> tuple[str, str]:
    topics = Topics(config)
    return topics.command("hall", "north"), topics.command("hall", "south")


# --------------------------------------------------------------------------- topics


def test_topics_live_under_the_prefix(config: SiteConfig) -> None:
    topics = Topics(config)
    assert topics.status == "t/ctl/status"
    assert topics.state("hall") == "t/ctl/zones/hall/state"
    assert topics.command("hall", "north") == "t/ctl/zones/hall/openings/north/command"
    assert topics.command("hall", "south") == "t/site/hall/south/set"  # the site's own
    assert topics.override_zone("t/ctl/zones/hall/override") == "hall"
    assert topics.override_zone("t/ctl/zones/hall/override/result") is None
    assert topics.override_zone("t/ctl/zones//override") is None


def test_default_prefix_and_ledger_path(tmp_path: Path) -> None:
    text = site_text(PREFIX).replace(f"prefix: {PREFIX}/ctl\n", "")
    config = load_config_text(text, "site.yaml")
    assert Topics(config).status == "ventsup/test-hall/status"
    assert config.client_id == "ventsup-test-hall"
    assert default_ledger_path(config, tmp_path) == tmp_path / "var" / "ventsup-test-hall.db"


# --------------------------------------------------------------------------- urgency


@pytest.mark.parametrize(
    ("point", "old", "new", "zones"),
    [
        ("rain", False, True, ("hall", "room")),
        ("rain", True, True, ()),
        ("rain", None, False, ("hall", "room")),  # becoming known counts as a change
        ("smoke_hall", False, True, ("hall",)),
        ("smoke_room", None, False, ("room",)),
        ("wind", 2.0, 3.0, ()),  # below every limit: the tick will do
        ("wind", 2.0, 9.0, ("hall", "room")),  # across the cap limit (8 m/s)
        ("wind", 7.0, 6.0, ("hall", "room")),  # below the cap's reopen level (6.4 m/s)
        ("wind", None, 1.0, ("hall", "room")),
        ("t_hall", 20.0, 30.0, ()),
        ("t_out", None, 30.0, ()),
    ],
)
def test_urgent_zones(
    config: SiteConfig, point: str, old: Any, new: Any, zones: tuple[str, ...]
) -> None:
    assert urgent_zones(config, point, old, new) == zones


# --------------------------------------------------------------------------- overrides


@pytest.mark.parametrize(
    ("body", "expected"),
    [
        ({"action": "open", "who": "jo", "reason": "test"}, ("open", 7200.0, None)),
        (
            {
                "action": "open",
                "who": "jo",
                "reason": "r",
                "duration": "90 min",
                "position": "30 %",
            },
            ("open", 5400.0, 0.3),
        ),
        ({"action": "hold", "who": "jo", "reason": "r", "duration": 60}, ("hold", 60.0, None)),
        ({"action": "auto", "who": "jo", "reason": "done"}, ("auto", 7200.0, None)),
    ],
)
def test_parse_override(
    config: SiteConfig, body: dict[str, Any], expected: tuple[Any, ...]
) -> None:
    request, rid = parse_override(json.dumps({**body, "id": "r1"}).encode(), config, "hall")
    assert (request.action, request.duration, request.position) == expected
    assert (request.who, rid) == ("jo", "r1")


@pytest.mark.parametrize(
    ("raw", "zone", "error"),
    [
        (b"open", "hall", "the request is not JSON"),
        (b"[1]", "hall", "the request must be a JSON object"),
        (b'{"action": "opn", "who": "a", "reason": "b"}', "hall", "'action' must be one of"),
        (b'{"action": "open", "reason": "b"}', "hall", "'who' is missing"),
        (b'{"action": "open", "who": "a", "reason": " "}', "hall", "'reason' must be a non-empty"),
        (b'{"action": "open", "who": "a", "reason": "b", "why": 1}', "hall", "unknown keys why"),
        (
            b'{"action": "open", "who": "a", "reason": "b", "duration": "3 d"}',
            "hall",
            "longer than the site allows (24 h",
        ),
        (b'{"action": "open", "who": "a", "reason": "b", "duration": 0}', "hall", "positive"),
        (b'{"action": "open", "who": "a", "reason": "b", "duration": "2 m/s"}', "hall", "'2 m/s'"),
        (
            b'{"action": "close", "who": "a", "reason": "b", "position": 0.5}',
            "hall",
            "open and hold",
        ),
        (b'{"action": "open", "who": "a", "reason": "b", "position": 1.5}', "hall", "from 0 to 1"),
        (b'{"action": "open", "who": "a", "reason": "b"}', "attic", "unknown zone 'attic'"),
        (b"{" * 5000, "hall", "at most 4096 accepted"),
        (b"\xff\xfe", "hall", "not JSON"),
    ],
)
def test_parse_override_refuses_with_the_reason(
    config: SiteConfig, raw: bytes, zone: str, error: str
) -> None:
    with pytest.raises(OverrideRefused, match=None) as caught:
        parse_override(raw, config, zone)
    assert error in str(caught.value)


def test_request_id_of_a_bad_request() -> None:
    assert request_id(b'{"id": "abc", "action": 5}') == "abc"
    assert request_id(b"nonsense") is None


# --------------------------------------------------------------------------- supervisor


def test_first_evaluation_closes_while_inputs_are_unknown(config: SiteConfig) -> None:
    broker, clock = Broker(), ManualClock(T0)
    started(config, broker, None, clock)
    north, south = hall_commands(config)
    assert broker.commands()[north] == b"0"
    assert broker.commands()[south] == b"0"
    state = broker.last(Topics(config).state("hall"))
    assert (state["mode"], state["cause"]) == ("fault", "fault")
    assert state["inputs"]["rain"] == {
        "point": "rain",
        "value": None,
        "status": "missing",
        "age": None,
    }


def test_commands_only_on_change_and_reassert(config: SiteConfig) -> None:
    broker, clock = Broker(), ManualClock(T0)
    sup = started(config, broker, None, clock)
    broker.take()
    warm(sup, clock)
    north, south = hall_commands(config)
    # the last urgent point (rain) evaluated both zones: the hall opens to 60 %
    assert broker.commands() == {north: b"0.6", south: b"60"}
    state = broker.last(Topics(config).state("hall"))
    assert (state["mode"], state["targets"]) == ("free_cooling", {"north": 0.6, "south": 0.6})
    assert broker.last(Topics(config).interlock("hall")) == {"windows_open": True, "open_area": 2.4}
    broker.take()

    clock.advance(60)
    sup.evaluate(config.zones, clock.now(), "tick")
    assert broker.commands() == {}  # same targets: no command, only state
    assert any(t == Topics(config).state("hall") for t, *_ in broker.take())

    clock.advance(3600)
    sup.reassert(clock.now())
    assert broker.commands() == {
        north: b"0.6",
        south: b"60",
        Topics(config).command("room", "window"): b"0",
    }


def test_rejected_and_unknown_messages_are_counted_by_reason(
    config: SiteConfig, ledger: Ledger
) -> None:
    broker, clock = Broker(), ManualClock(T0)
    sup = started(config, broker, ledger, clock)
    for raw in (b"nan", b"hot", b"999", b"x" * 2000):
        sup.on_message(Message(f"{PREFIX}/in/t_out", raw, 0, False, clock.now()))
    sup.on_message(Message(f"{PREFIX}/in/t_room", b"{21", 0, False, clock.now()))
    sup.on_message(Message(f"{PREFIX}/in/elsewhere", b"1", 0, False, clock.now()))
    assert sup.rejected == {
        "not_finite": 1,
        "not_a_number": 1,
        "out_of_range": 1,
        "too_large": 1,
        "not_json": 1,
    }
    assert sup.counts["unknown_topics"] == 1
    assert sup.counts["accepted"] == 0
    sup.heartbeat(clock.now())
    beat = broker.last(Topics(config).heartbeat)
    assert beat["rejected_total"] == 5
    assert beat["unknown_topics"] == 1
    sup.maintain(clock.now(), force=True)
    outcomes = [(r.point, r.outcome) for r in ledger.messages()]
    assert outcomes == [
        ("t_out", "not_finite"),
        ("t_out", "not_a_number"),
        ("t_out", "out_of_range"),
        ("t_out", "too_large"),
        ("t_room", "not_json"),
        (None, "unknown_topic"),
    ]


def test_smoke_alarm_releases_once_and_sends_no_command(config: SiteConfig) -> None:
    broker, clock = Broker(), ManualClock(T0)
    sup = started(config, broker, None, clock)
    warm(sup, clock)
    broker.take()
    clock.advance(1)
    sup.on_message(message("smoke_hall", "true", clock.now()))
    topics = Topics(config)
    assert broker.commands() == {}
    notice = broker.last(topics.opening_state("hall", "north"))
    assert (notice["released"], notice["target"]) == (True, None)
    assert broker.last(topics.state("hall"))["mode"] == "released"
    broker.take()
    clock.advance(60)
    sup.evaluate(config.zones, clock.now(), "tick")
    clock.advance(3600)
    sup.reassert(clock.now())
    sent = broker.take()
    assert not [t for t, *_ in sent if "/hall/openings/" in t or t.endswith("/set")]


def test_observe_only_publishes_state_but_no_command(config: SiteConfig) -> None:
    broker, clock = Broker(), ManualClock(T0)
    sup = started(config, broker, None, clock, observe=True)
    warm(sup, clock)
    clock.advance(3600)
    sup.reassert(clock.now())
    assert broker.commands() == {}
    topics = Topics(config)
    state = broker.last(topics.state("hall"))
    assert (state["mode"], state["observe"]) == ("free_cooling", True)
    opening = broker.last(topics.opening_state("hall", "north"))
    assert (opening["target"], opening["commanded"]) == (0.6, False)


def test_override_is_applied_answered_and_recorded(config: SiteConfig, ledger: Ledger) -> None:
    broker, clock = Broker(), ManualClock(T0)
    sup = started(config, broker, ledger, clock)
    warm(sup, clock)
    topics = Topics(config)
    broker.take()
    body = {"id": "q1", "action": "close", "duration": "5 min", "who": "jo", "reason": "cleaning"}
    sup.on_message(
        Message(topics.override("hall"), json.dumps(body).encode(), 1, False, clock.now())
    )
    answer = broker.last(topics.override_result("hall"))
    assert answer["ok"] is True
    assert (answer["id"], answer["mode"], answer["until"]) == ("q1", "override", clock.now() + 300)
    north, south = hall_commands(config)
    assert broker.commands() == {north: b"0", south: b"0"}

    sup.on_message(Message(topics.override("hall"), b'{"action": "shut"}', 1, False, clock.now()))
    refused = broker.last(topics.override_result("hall"))
    assert refused["ok"] is False and "'action' must be one of" in refused["error"]

    clock.advance(300)
    broker.take()
    sup.expire(clock.now())
    assert broker.commands() == {north: b"0.6", south: b"60"}
    sup.maintain(clock.now(), force=True)
    events = [(e.kind, e.zone, e.who) for e in ledger.events() if e.kind.startswith("override")]
    assert events == [("override", "hall", "jo"), ("override_end", "hall", "jo")]
    triggers = [trigger for _, trigger in ledger.decisions(zone="hall")]
    assert "override" in triggers and "input:rain" in triggers


def test_override_waits_for_the_first_evaluation(config: SiteConfig) -> None:
    broker, clock = Broker(), ManualClock(T0)
    sup = Supervisor(config, broker, mono=clock.now)
    sup.restore(clock.now())
    topics = Topics(config)
    body = b'{"action": "open", "who": "jo", "reason": "air"}'
    sup.on_message(Message(topics.override("room"), body, 1, False, clock.now()))
    assert broker.sent == []
    sup.begin(clock.now())
    assert broker.last(topics.override_result("room"))["ok"] is True


def test_restart_restores_state_and_inputs_and_moves_nothing(
    config: SiteConfig, tmp_path: Path
) -> None:
    clock = ManualClock(T0)
    with Ledger.open(tmp_path / "ledger.db") as ledger:
        first = Broker()
        sup = started(config, first, ledger, clock)
        warm(sup, clock)
        clock.advance(1)
        sup.on_message(message("smoke_room", "true", clock.now()))
        clock.advance(1)
        sup.on_message(message("smoke_room", "false", clock.now()))  # latched for clear_hold
        before = {**first.commands()}
        sup.shutdown(clock.now(), "test")
    clock.advance(30)
    with Ledger.open(tmp_path / "ledger.db") as ledger:
        second = Broker()
        sup = started(config, second, ledger, clock)
    topics = Topics(config)
    north, south = hall_commands(config)
    # re-asserted, not changed: the same payloads as before the restart
    assert second.commands() == {north: before[north], south: before[south]}
    assert broker_mode(second, topics, "hall") == "free_cooling"
    room = second.last(topics.state("room"))
    assert (room["mode"], room["alarm_latched"]) == ("released", True)
    assert sup.states["room"].alarm_latched


def broker_mode(broker: Broker, topics: Topics, zone: str) -> str:
    mode: str = broker.last(topics.state(zone))["mode"]
    return mode


def test_reconnect_republishes_retained_outputs_but_no_command(config: SiteConfig) -> None:
    broker, clock = Broker(), ManualClock(T0)
    sup = started(config, broker, None, clock)
    warm(sup, clock)
    broker.take()
    sup.handle(Connected(False, clock.now()), clock.now())
    sent = broker.take()
    topics = Topics(config)
    assert {t for t, *_ in sent} >= {
        topics.state("hall"),
        topics.state("room"),
        topics.interlock("hall"),
        topics.opening_state("hall", "north"),
    }
    assert all(retain for *_, retain in sent)
    assert not [t for t, *_ in sent if t.endswith(("/command", "/set"))]


def test_publish_errors_are_counted_not_raised(config: SiteConfig) -> None:
    broker, clock = Broker(), ManualClock(T0)
    broker.fail = True
    sup = started(config, broker, None, clock)
    warm(sup, clock)
    assert sup.counts["publish_errors"] > 0
    assert sup.states["hall"].openings["north"].target == 0.6


def test_words_format_sends_part_open_as_closed(config: SiteConfig) -> None:
    text = site_text(PREFIX).replace("command_format: percent", "command_format: words")
    words = load_config_text(text, "site.yaml")
    broker, clock = Broker(), ManualClock(T0)
    sup = started(words, broker, None, clock)
    warm(sup, clock)
    _, south = hall_commands(words)
    assert broker.commands()[south] == b"closed"


def test_interlock_payload_is_strict_json(config: SiteConfig) -> None:
    broker, clock = Broker(), ManualClock(T0)
    sup = started(config, broker, None, clock)
    assert json.loads(interlock_payload(sup.decisions["hall"])) == {
        "windows_open": False,
        "open_area": 0.0,
    }


def test_json_payload_is_strict_with_or_without_non_finite_values() -> None:
    # Encoded as it is when it can be, cleaned first when it cannot: the same JSON either way.
    plain = {"a": 1.5, "b": [1, (2.0, "x")], "c": {"d": None, "e": True}, "f": "°C"}
    assert json_payload(plain) == json.dumps(plain, ensure_ascii=False).encode("utf-8")
    odd = {"a": float("nan"), "b": [float("inf"), 1.0], "c": {"d": -float("inf")}}
    assert json_payload(odd) == b'{"a": null, "b": [null, 1.0], "c": {"d": null}}'
    nested = {"a": {"b": 2.5}.items().mapping, "c": float("nan")}  # a mapping, not a dict
    assert json.loads(json_payload(nested)) == {"a": {"b": 2.5}, "c": None}


def test_while_the_broker_is_away_only_commands_are_queued(config: SiteConfig) -> None:
    broker, clock = Broker(), ManualClock(T0)
    sup = started(config, broker, None, clock)
    warm(sup, clock)
    broker.take()
    sup.handle(Disconnected("Unspecified error", clock.now()), clock.now())
    clock.advance(1)
    sup.on_message(message("rain", "wet", clock.now()))
    clock.advance(3600)
    sup.reassert(clock.now())
    sup.heartbeat(clock.now())
    assert sup.next_reassert() is None
    north, south = hall_commands(config)
    # the moves go out (QoS 1 waits for the broker); state, heartbeat and re-asserts do not
    assert [(t, p) for t, p, *_ in broker.take()] == [(north, b"0"), (south, b"0")]
    sup.handle(Connected(False, clock.now()), clock.now())
    state = broker.last(Topics(config).state("hall"))
    assert (state["mode"], state["cause"]) == ("protected", "rain")
    assert sup.next_reassert() is not None
