"""The SQLite ledger: exact round trips, ordered recording, pruning, schema versions,
errors that name the file, crash safety and online backup.

Processes that must hold the ledger while the test acts (a writer killed after
a commit, a writer mid-transaction during a backup) are real child processes,
synchronised through their stdin and stdout pipes, never by sleeping.
"""

from __future__ import annotations

import json
import math
import re
import signal
import sqlite3
import subprocess
import sys
import tempfile
import textwrap
from collections.abc import Iterator
from pathlib import Path
from typing import Any, Literal

import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ventsup.config.errors import VentsupError
from ventsup.core.inputs import Sample
from ventsup.core.state import (
    Cause,
    Decision,
    Layer,
    Limit,
    Mode,
    OpeningState,
    OverrideState,
    WindLatch,
    ZoneState,
)
from ventsup.edges import ledger as ledger_module
from ventsup.edges.ledger import (
    SCHEMA_VERSION,
    BatchWriter,
    EventRecord,
    Ledger,
    LedgerError,
    MessageRecord,
    decision_from_row,
    decision_to_row,
    state_from_json,
    state_to_json,
)

REPO = Path(__file__).resolve().parents[2]
# Reading a child's pipe never waits longer than this, so a broken child fails the test.
CHILD_TIMEOUT_S = 60.0

# --------------------------------------------------------------------------- strategies

# NaN is left out on purpose: it is never equal to itself, so no value holding it is.
numbers = st.floats(allow_nan=False)
times = st.floats(min_value=0.0, max_value=4e9, allow_nan=False)
fractions = st.floats(min_value=0.0, max_value=1.0)
# Lone surrogates cannot be stored as UTF-8 text; everything else, NUL included, can.
SURROGATES: tuple[Literal["Cs"]] = ("Cs",)
texts = st.text(st.characters(exclude_categories=SURROGATES), max_size=12)
names = st.text(st.characters(exclude_categories=SURROGATES), min_size=1, max_size=8)
facts = st.dictionaries(names, st.one_of(numbers, texts, st.booleans(), st.none()), max_size=4)

opening_states = st.builds(
    OpeningState,
    target=st.none() | fractions,
    changed_at=st.none() | times,
    opened_at=st.none() | times,
    closed_at=st.none() | times,
    moves=st.lists(times, max_size=4).map(tuple),
    fault_since=st.none() | times,
)
overrides = st.builds(
    OverrideState,
    action=st.sampled_from(["open", "close", "hold"]),
    since=times,
    until=times,
    who=texts,
    why=texts,
    targets=st.dictionaries(names, fractions, max_size=3),
)
zone_states = st.builds(
    ZoneState,
    openings=st.dictionaries(names, opening_states, max_size=3),
    alarm_latched=st.booleans(),
    alarm_since=st.none() | times,
    alarm_clear_since=st.none() | times,
    rain_last_wet=st.none() | times,
    rain_since=st.none() | times,
    wind=st.dictionaries(names, st.builds(WindLatch, st.booleans(), st.none() | times), max_size=3),
    cooling=st.booleans(),
    flush=st.booleans(),
    air_quality=st.booleans(),
    override=st.none() | overrides,
    mode=st.none() | st.sampled_from(Mode),
    mode_since=st.none() | times,
    last_t=st.none() | times,
)
limits = st.builds(
    Limit,
    layer=st.sampled_from(Layer),
    cause=st.sampled_from(Cause),
    caps=st.dictionaries(names, fractions, max_size=3),
    reason=texts,
    facts=facts,
)
decisions = st.builds(
    Decision,
    zone=names,
    t=times,
    targets=st.dictionaries(names, st.none() | fractions, max_size=4),
    mode=st.sampled_from(Mode),
    layer=st.sampled_from(Layer),
    cause=st.sampled_from(Cause),
    reason=texts,
    windows_open=st.booleans(),
    open_area=st.floats(min_value=0.0, allow_infinity=False),
    limits=st.lists(limits, max_size=3).map(tuple),
    facts=facts,
    events=st.lists(texts, max_size=3).map(tuple),
)


# --------------------------------------------------------------------------- helpers


@pytest.fixture
def ledger(tmp_path: Path) -> Iterator[Ledger]:
    """A fresh ledger in the test's temporary folder."""
    with Ledger.open(tmp_path / "site" / "ledger.db") as opened:
        yield opened


def decision(zone: str, t: float, **changes: Any) -> Decision:
    """A plain decision of ``zone`` at ``t``; ``changes`` replace fields."""
    values: dict[str, Any] = {
        "zone": zone,
        "t": t,
        "targets": {"roof": 0.5, "door": None},
        "mode": Mode.FREE_COOLING,
        "layer": Layer.COMFORT,
        "cause": Cause.COMFORT,
        "reason": f"warm inside at {t}",
        "windows_open": True,
        "open_area": 1.25,
    }
    values.update(changes)
    return Decision(**values)


def message(t: float, topic: str = "site/t1", outcome: str = "accepted") -> MessageRecord:
    """An accepted temperature message at ``t``."""
    return MessageRecord(t, topic, b"21.5", "t1", outcome, 21.5)


def busy_state() -> ZoneState:
    """A state with a latched alarm, an override, wind latches and opening timers."""
    return ZoneState(
        openings={
            "roof": OpeningState(0.3, 100.0, 50.0, None, (60.0, 100.0), None),
            "door": OpeningState(None, None, None, 10.0, (), 90.0),
        },
        alarm_latched=True,
        alarm_since=120.5,
        wind={"north": WindLatch(True, 110.0)},
        override=OverrideState("hold", 100.0, 7300.0, "ana", "cleaning", {"roof": 0.3}),
        mode=Mode.RELEASED,
        mode_since=120.5,
        last_t=180.0,
    )


class Child:
    """A Python child process that runs ``script`` with the ledger path as ``argv[1]``.

    The test talks to it one line at a time: :meth:`send` writes a line to its
    stdin, :meth:`expect` reads one line of its stdout.
    """

    def __init__(self, script: str, path: Path) -> None:
        self.process = subprocess.Popen(
            [sys.executable, "-c", textwrap.dedent(script), str(path)],
            cwd=REPO,
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )

    def send(self, line: str) -> None:
        assert self.process.stdin is not None
        self.process.stdin.write(line + "\n")
        self.process.stdin.flush()

    def expect(self, expected: str) -> None:
        assert self.process.stdout is not None
        line = self.process.stdout.readline().strip()
        if line != expected:
            self.process.kill()
            _, errors = self.process.communicate(timeout=CHILD_TIMEOUT_S)
            pytest.fail(f"the child said {line!r}, expected {expected!r}; its stderr:\n{errors}")

    def kill(self) -> int:
        self.process.send_signal(signal.SIGKILL)
        self.process.communicate(timeout=CHILD_TIMEOUT_S)
        return self.process.returncode

    def finish(self) -> int:
        _, errors = self.process.communicate(timeout=CHILD_TIMEOUT_S)
        assert self.process.returncode == 0, errors
        return self.process.returncode


# --------------------------------------------------------------------------- round trips


@given(zone_states)
def test_state_json_round_trip_is_exact(state: ZoneState) -> None:
    assert state_from_json(state_to_json(state)) == state


@given(decisions)
def test_decision_row_round_trip_is_exact(original: Decision) -> None:
    assert decision_from_row(decision_to_row(original)) == original


@settings(max_examples=50)
@given(states=st.dictionaries(names, zone_states, max_size=3))
def test_states_round_trip_through_the_ledger(states: dict[str, ZoneState]) -> None:
    with tempfile.TemporaryDirectory() as folder, Ledger.open(Path(folder) / "l.db") as ledger:
        ledger.save_states(states, 1.0)
        assert ledger.load_states() == states


@settings(max_examples=50)
@given(rows=st.lists(decisions, max_size=4))
def test_decisions_round_trip_through_the_ledger(rows: list[Decision]) -> None:
    with tempfile.TemporaryDirectory() as folder, Ledger.open(Path(folder) / "l.db") as ledger:
        ledger.record_decisions(rows, "input:rain")
        # By time, then as recorded: what a stable sort by time gives.
        expected = [(row, "input:rain") for row in sorted(rows, key=lambda row: row.t)]
        assert list(ledger.decisions()) == expected


def test_decisions_come_back_equal_with_their_trigger(ledger: Ledger) -> None:
    rows = [
        decision(
            "atrium",
            10.0,
            limits=(Limit(Layer.PROTECTION, Cause.RAIN, {"roof": 0.0}, "rain", {"rain": True}),),
            facts={"temp_indoor": 24.1, "rain": False, "source": "t1", "co2": None},
            events=("alarm cleared",),
        ),
        decision("stair", 10.0, targets={"vent": None}, windows_open=False, open_area=0.0),
    ]
    ledger.record_decisions(rows, "override")
    assert list(ledger.decisions()) == [(rows[0], "override"), (rows[1], "override")]


def test_floats_come_back_bit_for_bit() -> None:
    awkward = (0.1 + 0.2, 5e-324, 1.7976931348623157e308, -0.0, 1 / 3, math.inf, -math.inf)
    state = ZoneState(openings={"roof": OpeningState(moves=awkward)}, last_t=-0.0)
    back = state_from_json(state_to_json(state))
    # float.hex() shows every bit, the sign of zero included.
    assert [x.hex() for x in back.openings["roof"].moves] == [x.hex() for x in awkward]
    assert back.last_t is not None and back.last_t.hex() == "-0x0.0p+0"


def test_state_json_keeps_types_apart() -> None:
    state = ZoneState(mode=Mode.IDLE, openings={"roof": OpeningState(target=None, moves=(1.0,))})
    back = state_from_json(state_to_json(state))
    assert type(back.mode) is Mode
    assert type(back.openings["roof"].moves) is tuple
    row = decision_to_row(decision("z", 1.0, facts={"flag": True, "one": 1.0, "n": 2}))
    facts = decision_from_row(row).facts
    assert [type(facts[key]) for key in ("flag", "one", "n")] == [bool, float, int]


def test_decision_row_has_one_column_per_field() -> None:
    row = decision_to_row(decision("z", 1.0))
    assert list(row) == [name for name in Decision.__dataclass_fields__]
    assert row["mode"] == "free_cooling" and row["layer"] == 6 and row["windows_open"] == 1
    assert json.loads(str(row["targets"])) == {"roof": 0.5, "door": None}


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ('{"colour": 1}', "state: ZoneState has no fields ['colour']"),
        ('{"alarm_latched": "yes"}', "state.alarm_latched: expected boolean, got 'yes'"),
        ('{"mode": "dancing"}', "state.mode: expected a Mode (one of ['released'"),
        (
            '{"openings": {"roof": {"target": "half"}}}',
            "state.openings.roof.target: expected number or null, got 'half'",
        ),
        ('{"override": {"action": "open"}}', "lacks required fields"),
        ("[]", "expected an object for ZoneState"),
        ('{"mode": null, "last_t": "noon"}', "state.last_t: expected number or null, got 'noon'"),
    ],
)
def test_state_from_json_says_what_is_wrong(text: str, expected: str) -> None:
    with pytest.raises(ValueError, match=re.escape(expected)):
        state_from_json(text)


def test_a_field_added_later_reads_as_its_default() -> None:
    assert state_from_json('{"cooling": true}') == ZoneState(cooling=True)


# --------------------------------------------------------------------------- state


def test_save_states_replaces_each_zone_and_keeps_the_others(ledger: Ledger) -> None:
    assert ledger.load_states() == {}
    ledger.save_states({"atrium": busy_state(), "stair": ZoneState()}, 100.0)
    ledger.save_states({"atrium": ZoneState(cooling=True)}, 160.0)
    assert ledger.load_states() == {"atrium": ZoneState(cooling=True), "stair": ZoneState()}


def test_a_damaged_state_names_the_zone_and_the_file(ledger: Ledger) -> None:
    ledger.save_states({"atrium": ZoneState()}, 1.0)
    with sqlite3.connect(ledger.path) as raw:
        raw.execute("UPDATE zone_state SET state = '{\"mode\": 3}'")
    raw.close()
    with pytest.raises(LedgerError, match=r"ledger\.db: the saved state of zone 'atrium'") as info:
        ledger.load_states()
    assert isinstance(info.value, VentsupError)


def test_states_survive_close_and_reopen(tmp_path: Path) -> None:
    path = tmp_path / "ledger.db"
    with Ledger.open(path) as first:
        first.save_states({"atrium": busy_state()}, 180.0)
    with Ledger.open(path) as second:
        assert second.load_states() == {"atrium": busy_state()}


# --------------------------------------------------------------------------- recording


def test_messages_come_back_by_time_then_insertion(ledger: Ledger) -> None:
    rows = [
        MessageRecord(20.0, "site/rain", b"wet", "rain", "accepted", True),
        MessageRecord(10.0, "site/t1", b"21.5", "t1", "accepted", 21.5),
        MessageRecord(20.0, "site/unknown", b"\x00\xff", None, "unknown_topic", None),
        MessageRecord(20.0, "site/t1", b"", "t1", "not_a_number", None),
        MessageRecord(15.0, "site/rain", b"0", "rain", "accepted", False),
        MessageRecord(15.0, "site/t1", b"99", "t1", "out_of_range", 99.0),
    ]
    ledger.record_messages(rows[:3])
    ledger.record_messages(rows[3:])
    assert list(ledger.messages()) == [rows[1], rows[4], rows[5], rows[0], rows[2], rows[3]]
    back = list(ledger.messages())
    assert [type(r.value) for r in back] == [float, bool, float, bool, type(None), type(None)]


def test_a_nan_value_comes_back_as_none(ledger: Ledger) -> None:
    # SQLite stores NaN as NULL; the codec rejects NaN payloads as not_finite anyway.
    ledger.record_messages([MessageRecord(1.0, "site/t1", b"nan", "t1", "not_finite", math.nan)])
    assert [r.value for r in ledger.messages()] == [None]


def test_time_filters_include_start_and_exclude_end(ledger: Ledger) -> None:
    ledger.record_messages([message(t) for t in (9.0, 10.0, 15.0, 20.0, 21.0)])
    assert [r.t for r in ledger.messages(10.0, 20.0)] == [10.0, 15.0]
    assert [r.t for r in ledger.messages(start=15.0)] == [15.0, 20.0, 21.0]
    assert [r.t for r in ledger.messages(end=10.0)] == [9.0]
    assert list(ledger.messages(30.0, 40.0)) == []


def test_decisions_filter_by_zone_and_time(ledger: Ledger) -> None:
    ledger.record_decisions([decision("atrium", 60.0), decision("stair", 60.0)])
    ledger.record_decisions([decision("atrium", 30.0)], "input:rain")
    ledger.record_decisions([decision("atrium", 120.0)])
    assert [(d.zone, d.t, trigger) for d, trigger in ledger.decisions()] == [
        ("atrium", 30.0, "input:rain"),
        ("atrium", 60.0, "tick"),
        ("stair", 60.0, "tick"),
        ("atrium", 120.0, "tick"),
    ]
    assert [d.t for d, _ in ledger.decisions(zone="atrium", start=30.0, end=120.0)] == [30.0, 60.0]


def test_events_filter_by_kind(ledger: Ledger) -> None:
    rows = [
        EventRecord(1.0, "start", None, None, "ventsup 0.1 started"),
        EventRecord(2.0, "override", "atrium", "ana", "open 50 % for 2 h: cleaning"),
        EventRecord(3.0, "override_end", "atrium", None, "override ended"),
        EventRecord(4.0, "override", "stair", "bo", "close for 1 h"),
    ]
    ledger.record_events(rows)
    assert list(ledger.events()) == rows
    assert list(ledger.events(kind="override")) == [rows[1], rows[3]]
    assert list(ledger.events(start=2.0, end=4.0, kind="override")) == [rows[1]]


@pytest.mark.parametrize("trigger", ["", "input:", "timer", "Tick"])
def test_an_unknown_trigger_is_refused_before_writing(ledger: Ledger, trigger: str) -> None:
    with pytest.raises(ValueError, match="unknown decision trigger"):
        ledger.record_decisions([decision("atrium", 1.0)], trigger)
    assert list(ledger.decisions()) == []


def test_records_check_what_they_hold() -> None:
    with pytest.raises(ValueError, match="unknown event kind 'party'"):
        EventRecord(1.0, "party", None, None, "")
    with pytest.raises(ValueError, match="needs an outcome"):
        MessageRecord(1.0, "site/t1", b"1", "t1", "", 1.0)
    loose = bytearray(b"x")
    assert MessageRecord(1.0, "a", loose, None, "unknown_topic", None).payload == b"x"  # type: ignore[arg-type]


def test_an_accepted_message_gives_its_sample() -> None:
    assert message(5.0).sample() == Sample("t1", 21.5, 5.0)
    assert message(5.0, outcome="out_of_range").sample() is None
    assert MessageRecord(5.0, "x", b"", None, "unknown_topic", None).sample() is None


def test_a_batch_of_thousands_is_one_call(ledger: Ledger) -> None:
    rows = [message(float(i // 3), topic=f"site/p{i}") for i in range(5000)]
    ledger.record_messages(rows)
    assert list(ledger.messages()) == rows


def test_reading_never_blocks_writing(ledger: Ledger) -> None:
    ledger.record_messages([message(float(t)) for t in range(3000)])
    reading = ledger.messages()
    first = next(reading)
    # A write while a read is half way: the reader keeps its own snapshot.
    ledger.record_messages([message(5000.0)])
    rest = list(reading)
    assert first.t == 0.0 and len(rest) == 2999
    assert len(list(ledger.messages())) == 3001


def test_decisions_frame_has_one_column_per_opening(ledger: Ledger) -> None:
    ledger.record_decisions(
        [
            decision("atrium", 60.0, targets={"roof": 0.5, "door": None}),
            decision("stair", 60.0, targets={"vent": 1.0}, layer=Layer.PROTECTION),
            decision("atrium", 120.0, targets={"roof": 0.0, "door": 0.25}, windows_open=False),
        ]
    )
    frame = ledger.decisions_frame(0.0, 1000.0)
    assert list(frame.columns) == [
        "t",
        "zone",
        "mode",
        "layer",
        "cause",
        "reason",
        "windows_open",
        "open_area",
        "target:door",
        "target:roof",
        "target:vent",
    ]
    assert frame["t"].tolist() == [60.0, 60.0, 120.0]
    assert frame["layer"].tolist() == [6, 2, 6]
    assert frame["windows_open"].tolist() == [True, True, False]
    assert frame["mode"].tolist() == ["free_cooling"] * 3
    pd.testing.assert_series_equal(
        frame["target:door"], pd.Series([math.nan, math.nan, 0.25], name="target:door")
    )
    assert frame["target:roof"].tolist()[0::2] == [0.5, 0.0]
    assert frame.dtypes["t"] == "float64" and frame.dtypes["layer"] == "int64"


def test_an_empty_decisions_frame_still_has_its_columns(ledger: Ledger) -> None:
    frame = ledger.decisions_frame(0.0, 10.0)
    assert frame.empty
    assert list(frame.columns)[:3] == ["t", "zone", "mode"]
    assert frame.dtypes["t"] == "float64" and frame.dtypes["windows_open"] == "bool"


# --------------------------------------------------------------------------- prune


def test_prune_deletes_old_records_and_keeps_the_states(tmp_path: Path) -> None:
    with Ledger.open(tmp_path / "ledger.db", retention=100.0) as ledger:
        ledger.save_states({"atrium": busy_state()}, 0.0)
        ledger.record_messages([message(t) for t in (0.0, 50.0, 100.0, 150.0)])
        ledger.record_decisions([decision("atrium", t) for t in (10.0, 110.0)])
        ledger.record_events([EventRecord(t, "note", None, None, "") for t in (49.0, 200.0)])
        # Older than the retention: t < 150 - 100, so t = 50 itself stays.
        assert ledger.prune(150.0) == 3
        assert [r.t for r in ledger.messages()] == [50.0, 100.0, 150.0]
        assert [d.t for d, _ in ledger.decisions()] == [110.0]
        assert [e.t for e in ledger.events()] == [200.0]
        assert ledger.load_states() == {"atrium": busy_state()}
        assert ledger.prune(150.0) == 0


def test_retention_must_be_positive(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match="retention must be a positive"):
        Ledger.open(tmp_path / "ledger.db", retention=0.0)


# --------------------------------------------------------------------------- batches


def test_batch_writer_flushes_at_its_size(ledger: Ledger) -> None:
    writer = BatchWriter(ledger, max_size=3, max_age=1e9)
    assert writer.add(message(1.0), now=0.0) == 0
    assert writer.add(decision("atrium", 1.0), now=0.0, trigger="input:rain") == 0
    assert list(ledger.messages()) == []
    assert writer.add(EventRecord(1.0, "note", None, None, "x"), now=0.0) == 3
    assert len(writer) == 0
    assert len(list(ledger.messages())) == 1
    assert [trigger for _, trigger in ledger.decisions()] == ["input:rain"]
    assert len(list(ledger.events())) == 1


def test_batch_writer_flushes_at_its_age_by_the_times_given(ledger: Ledger) -> None:
    writer = BatchWriter(ledger, max_size=500, max_age=2.0)
    assert writer.add(message(1.0), now=100.0) == 0
    assert writer.add(message(2.0), now=101.9) == 0
    assert writer.flush_if_due(101.99) == 0
    assert writer.add(message(3.0), now=102.0) == 3
    # The age counts from the oldest record pending, so a new batch starts afresh.
    assert writer.add(message(4.0), now=103.0) == 0
    assert writer.flush_if_due(105.0) == 1
    assert writer.flush_if_due(200.0) == 0


def test_batch_writer_keeps_its_records_when_a_write_fails(tmp_path: Path) -> None:
    ledger = Ledger.open(tmp_path / "ledger.db")
    writer = BatchWriter(ledger)
    writer.add(message(1.0), now=0.0)
    ledger.close()
    with pytest.raises(LedgerError, match=r"ledger\.db: the ledger is closed"):
        writer.flush()
    assert len(writer) == 1
    assert writer.discard() == 1 and writer.flush() == 0


def test_batch_writer_refuses_what_it_cannot_store(ledger: Ledger) -> None:
    writer = BatchWriter(ledger)
    with pytest.raises(TypeError, match="got str"):
        writer.add("hello", now=0.0)  # type: ignore[arg-type]
    with pytest.raises(ValueError, match="unknown decision trigger"):
        writer.add(decision("atrium", 1.0), now=0.0, trigger="later")
    assert len(writer) == 0


# --------------------------------------------------------------------------- the file


def test_the_file_is_in_wal_mode_with_normal_sync_and_foreign_keys(ledger: Ledger) -> None:
    # Synchronous and foreign_keys are per connection: ask the ledger's own.
    connection = ledger._connection
    assert connection is not None
    assert connection.execute("PRAGMA journal_mode").fetchone() == ("wal",)
    assert connection.execute("PRAGMA synchronous").fetchone() == (1,)  # NORMAL
    assert connection.execute("PRAGMA foreign_keys").fetchone() == (1,)
    assert connection.execute("SELECT version FROM schema_version").fetchall() == [
        (SCHEMA_VERSION,)
    ]


def test_a_newer_schema_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "ledger.db"
    Ledger.open(path).close()
    with sqlite3.connect(path) as raw:
        raw.execute("UPDATE schema_version SET version = ?", (SCHEMA_VERSION + 1,))
    raw.close()
    with pytest.raises(LedgerError) as info:
        Ledger.open(path)
    message = str(info.value)
    assert message.startswith(str(path))
    assert f"schema version {SCHEMA_VERSION + 1}, written by a newer ventsup" in message
    assert "Upgrade ventsup" in message


def test_the_migration_hook_brings_an_older_ledger_forward(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    path = tmp_path / "ledger.db"
    with Ledger.open(path) as old:
        old.save_states({"atrium": busy_state()}, 1.0)

    def add_a_table(connection: sqlite3.Connection) -> None:
        connection.execute("CREATE TABLE notes (id INTEGER PRIMARY KEY, text TEXT)")

    monkeypatch.setattr(ledger_module, "SCHEMA_VERSION", SCHEMA_VERSION + 1)
    monkeypatch.setattr(ledger_module, "_MIGRATIONS", [*ledger_module._MIGRATIONS, add_a_table])
    with Ledger.open(path) as new:
        assert new.load_states() == {"atrium": busy_state()}
    with sqlite3.connect(path) as raw:
        assert raw.execute("SELECT version FROM schema_version").fetchone() == (SCHEMA_VERSION + 1,)
        assert raw.execute("SELECT count(*) FROM notes").fetchone() == (0,)
    raw.close()


def test_another_programs_database_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "other.db"
    with sqlite3.connect(path) as raw:
        raw.execute("CREATE TABLE things (x)")
    raw.close()
    with pytest.raises(LedgerError, match=r"other\.db: not a ventsup ledger"):
        Ledger.open(path)


def test_a_folder_in_place_of_the_file_is_a_ledger_error_naming_it(tmp_path: Path) -> None:
    path = tmp_path / "ledger.db"
    path.mkdir()
    with pytest.raises(
        LedgerError, match=f"^{re.escape(str(path))}: cannot open the ledger"
    ) as info:
        Ledger.open(path)
    assert isinstance(info.value.__cause__, sqlite3.Error)


def test_a_file_that_is_not_a_database_is_a_ledger_error_naming_it(tmp_path: Path) -> None:
    path = tmp_path / "ledger.db"
    path.write_bytes(b"this is not a database, just some text that is long enough " * 20)
    with pytest.raises(LedgerError, match=f"^{re.escape(str(path))}: cannot open") as info:
        Ledger.open(path)
    assert isinstance(info.value.__cause__, sqlite3.DatabaseError)


def test_a_folder_that_cannot_be_made_is_a_ledger_error_naming_the_file(tmp_path: Path) -> None:
    (tmp_path / "occupied").write_text("a file where the folder should go")
    path = tmp_path / "occupied" / "ledger.db"
    with pytest.raises(LedgerError, match=f"^{re.escape(str(path))}: cannot create"):
        Ledger.open(path)


def test_a_closed_ledger_says_so(tmp_path: Path) -> None:
    with Ledger.open(tmp_path / "ledger.db") as ledger:
        pass
    assert ledger.closed
    ledger.close()  # idempotent
    with pytest.raises(LedgerError, match=r"ledger\.db: the ledger is closed"):
        ledger.save_states({}, 0.0)
    with pytest.raises(LedgerError, match="the ledger is closed"):
        list(ledger.messages())


# --------------------------------------------------------------------------- crash safety

STATE_WRITER = """
    import sqlite3, sys
    from ventsup.edges.ledger import Ledger, state_from_json
    import json

    ledger = Ledger.open(sys.argv[1])
    while True:
        line = sys.stdin.readline()
        if not line:
            break
        request = json.loads(line)
        if request == "tear":
            # A second connection starts a big write and never commits it; the tiny
            # cache makes SQLite spill its pages into the write-ahead log first.
            torn = sqlite3.connect(sys.argv[1], isolation_level=None)
            torn.execute("PRAGMA cache_size = 10")
            torn.execute("BEGIN IMMEDIATE")
            torn.execute("UPDATE zone_state SET state = 'torn', t = -1")
            torn.execute(
                "INSERT INTO messages (t, topic, payload, outcome) "
                "VALUES (1, 'x', randomblob(2000000), 'accepted')"
            )
            print("tearing", flush=True)
            continue
        states = {zone: state_from_json(text) for zone, text in request["states"].items()}
        ledger.save_states(states, request["t"])
        print("saved", request["t"], flush=True)
"""


def test_a_killed_writer_leaves_the_last_committed_states(tmp_path: Path) -> None:
    path = tmp_path / "ledger.db"
    snapshots = [
        {"atrium": ZoneState(), "stair": ZoneState(cooling=True)},
        {"atrium": busy_state(), "stair": ZoneState(flush=True, last_t=120.0)},
        {"atrium": ZoneState(alarm_latched=True, alarm_since=180.0)},
    ]
    child = Child(STATE_WRITER, path)
    for t, states in enumerate(snapshots):
        child.send(json.dumps({"t": t, "states": {z: state_to_json(s) for z, s in states.items()}}))
        child.expect(f"saved {t}")
    child.send(json.dumps("tear"))
    child.expect("tearing")
    # The uncommitted pages really are in the log: recovery has to leave them out.
    assert path.with_name(path.name + "-wal").stat().st_size > 2_000_000
    assert child.kill() == -signal.SIGKILL

    with Ledger.open(path) as ledger:
        assert ledger.load_states() == {
            "atrium": ZoneState(alarm_latched=True, alarm_since=180.0),
            "stair": ZoneState(flush=True, last_t=120.0),
        }
        assert list(ledger.messages()) == []
        # Nothing torn anywhere: SQLite's own check of the whole file.
        connection = ledger._connection
        assert connection is not None
        assert connection.execute("PRAGMA integrity_check").fetchall() == [("ok",)]


# --------------------------------------------------------------------------- backup

HELD_WRITER = """
    import sqlite3, sys
    from ventsup.edges.ledger import EventRecord, Ledger

    ledger = Ledger.open(sys.argv[1])
    ledger.record_events([EventRecord(float(t), "note", None, None, f"n{t}") for t in range(3)])
    ledger.save_states({}, 0.0)
    writing = sqlite3.connect(sys.argv[1], isolation_level=None)
    writing.execute("BEGIN IMMEDIATE")
    writing.execute("INSERT INTO events (t, kind, text) VALUES (9, 'note', 'uncommitted')")
    print("writing", flush=True)
    sys.stdin.readline()
    writing.execute("ROLLBACK")
    ledger.close()
    print("done", flush=True)
"""


def test_backup_while_another_process_writes(tmp_path: Path) -> None:
    path = tmp_path / "ledger.db"
    child = Child(HELD_WRITER, path)
    child.expect("writing")
    try:
        with Ledger.open(path) as reader:
            copy = reader.backup(tmp_path / "backups" / "copy.db")
    finally:
        child.send("go")
        child.expect("done")
        child.finish()
    assert copy == tmp_path / "backups" / "copy.db"
    with Ledger.open(copy) as restored:
        assert [e.text for e in restored.events()] == ["n0", "n1", "n2"]


def test_backup_of_the_ledger_being_written(ledger: Ledger, tmp_path: Path) -> None:
    writer = BatchWriter(ledger, max_size=100)
    for t in range(250):
        writer.add(message(float(t)), now=0.0)
    ledger.save_states({"atrium": busy_state()}, 250.0)
    first = ledger.backup(tmp_path / "first.db")
    writer.flush()
    second = ledger.backup(tmp_path / "second.db")
    # The copy is one self-contained file, not in write-ahead-log mode.
    with sqlite3.connect(first) as raw:
        assert raw.execute("PRAGMA journal_mode").fetchone() == ("delete",)
    raw.close()
    with Ledger.open(first) as copy:
        assert len(list(copy.messages())) == 200
        assert copy.load_states() == {"atrium": busy_state()}
    with Ledger.open(second) as copy:
        assert len(list(copy.messages())) == 250


def test_backup_onto_itself_is_refused(ledger: Ledger) -> None:
    with pytest.raises(LedgerError, match="onto itself"):
        ledger.backup(ledger.path)
