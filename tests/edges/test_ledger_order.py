"""The ledger's shared recording order (``seq``, schema version 2) and the upgrade from version 1.

The order is what lets a replay know which messages each decision had seen
(``docs/ledger.md``); these tests check that it is the order records were
handed to the ledger, whatever their times and tables, across batches and
reopenings, and that a version 1 file opens, keeps its rows and reads back in
the order version 1 replays assumed.
"""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pytest

from ventsup.edges import ledger as ledger_module
from ventsup.edges.ledger import (
    SCHEMA_VERSION,
    BatchWriter,
    EventRecord,
    Ledger,
    LedgerError,
    MessageRecord,
    decision_to_row,
)

from .test_ledger import decision


def message(t: float, value: float) -> MessageRecord:
    return MessageRecord(t, "site/t_out", str(value).encode(), "t_out", "accepted", value)


def seqs(path: Path) -> dict[str, list[int | None]]:
    with sqlite3.connect(path) as raw:
        found = {
            table: [row[0] for row in raw.execute(f"SELECT seq FROM {table} ORDER BY id")]
            for table in ("messages", "decisions", "events")
        }
    raw.close()
    return found


def test_a_batch_keeps_the_order_records_were_added_across_tables(tmp_path: Path) -> None:
    path = tmp_path / "ledger.db"
    # Times tie and go back on purpose: the order is the order of add(), not of time.
    records = [
        message(10.0, 18.0),
        (decision("hall", 10.0), "input:t_out"),
        message(10.0, 19.0),
        EventRecord(10.0, "note", None, None, "a note"),
        message(9.5, 20.0),
        (decision("hall", 10.0), "tick"),
    ]
    with Ledger.open(path) as ledger:
        writer = BatchWriter(ledger, max_size=1000)
        for record in records:
            if isinstance(record, tuple):
                writer.add(record[0], 0.0, trigger=record[1])
            else:
                writer.add(record, 0.0)
        assert writer.flush() == len(records)
        assert list(ledger.journal()) == records
        # The plain readers keep their order: by time, then as written per table.
        assert [m.value for m in ledger.messages()] == [20.0, 18.0, 19.0]
    assert seqs(path) == {"messages": [1, 3, 5], "decisions": [2, 6], "events": [4]}


def test_numbers_continue_across_batches_writers_and_reopening(tmp_path: Path) -> None:
    path = tmp_path / "ledger.db"
    with Ledger.open(path) as ledger:
        ledger.record_messages([message(1.0, 18.0), message(2.0, 18.5)])
        ledger.record_decisions([decision("hall", 2.0)])
    with Ledger.open(path) as ledger:
        ledger.record_events([EventRecord(3.0, "start", None, None, "started again")])
        writer = BatchWriter(ledger)
        writer.add(message(3.0, 19.0), 0.0)
        writer.add(decision("hall", 3.0), 0.0)
        writer.flush()
        kinds = [type(record).__name__ for record in ledger.journal()]
    assert seqs(path) == {"messages": [1, 2, 5], "decisions": [3, 6], "events": [4]}
    first, second = ["MessageRecord", "MessageRecord", "tuple"], ["EventRecord", "MessageRecord"]
    assert kinds == [*first, *second, "tuple"]


def test_the_journal_filters_decisions_by_time_and_holds_earlier_messages(
    tmp_path: Path,
) -> None:
    with Ledger.open(tmp_path / "ledger.db") as ledger:
        ledger.record_messages([message(1.0, 18.0)])
        ledger.record_decisions([decision("hall", 1.0)])
        ledger.record_messages([message(2.0, 19.0)])
        ledger.record_decisions([decision("hall", 2.0)])
        ledger.record_messages([message(3.0, 20.0)])
        ledger.record_decisions([decision("hall", 3.0)])
        period = list(ledger.journal(2.0, 3.0))
        assert period == [message(1.0, 18.0), message(2.0, 19.0), (decision("hall", 2.0), "tick")]
        assert list(ledger.journal(2.0, 3.0, messages_start=2.0)) == period[1:]


def test_pruning_everything_starts_the_numbers_again_without_mixing_orders(
    tmp_path: Path,
) -> None:
    path = tmp_path / "ledger.db"
    with Ledger.open(path, retention=10.0) as ledger:
        ledger.record_messages([message(1.0, 18.0)])
        ledger.record_decisions([decision("hall", 1.0)])
        assert ledger.prune(100.0) == 2
        ledger.record_messages([message(100.0, 19.0)])
        assert list(ledger.journal()) == [message(100.0, 19.0)]
    assert seqs(path)["messages"] == [1]


# --------------------------------------------------------------------------- version 1 files


def version_1_ledger(path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """A ledger as ventsup with schema version 1 wrote it (the first migration only)."""
    with monkeypatch.context() as patch:
        patch.setattr(ledger_module, "SCHEMA_VERSION", 1)
        patch.setattr(ledger_module, "_MIGRATIONS", ledger_module._MIGRATIONS[:1])
        Ledger.open(path).close()
    rows = [decision("hall", 2.0), decision("hall", 1.0)]  # written out of time order
    with sqlite3.connect(path) as raw:
        raw.executemany(
            "INSERT INTO messages (t, topic, payload, point, outcome, value, value_is_bool) "
            "VALUES (?, 'site/t_out', ?, 't_out', 'accepted', ?, 0)",
            [
                (t, str(value).encode(), value)
                for t, value in ((2.0, 19.0), (1.0, 18.0), (3.0, 20.0))
            ],
        )
        for row in rows:
            values = dict(decision_to_row(row), triggered_by="tick")
            names = ", ".join(values)
            marks = ", ".join(f":{name}" for name in values)
            raw.execute(f"INSERT INTO decisions ({names}) VALUES ({marks})", values)
        raw.execute("INSERT INTO events (t, kind, text) VALUES (1.0, 'start', 'started')")
        assert raw.execute("SELECT version FROM schema_version").fetchone() == (1,)
    raw.close()


def test_a_version_1_ledger_is_brought_forward_and_reads_as_before(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    path = tmp_path / "old.db"
    version_1_ledger(path, monkeypatch)
    with Ledger.open(path) as ledger:
        assert [m.value for m in ledger.messages()] == [18.0, 19.0, 20.0]
        assert [d.t for d, _ in ledger.decisions()] == [1.0, 2.0]
        # Unnumbered rows: by time, messages before decisions before events at one time.
        assert list(ledger.journal()) == [
            message(1.0, 18.0),
            (decision("hall", 1.0), "tick"),
            EventRecord(1.0, "start", None, None, "started"),
            message(2.0, 19.0),
            (decision("hall", 2.0), "tick"),
            message(3.0, 20.0),
        ]
        # New records are numbered and come after every old one, whatever their time.
        ledger.record_messages([message(0.5, 17.0)])
        assert list(ledger.journal())[-1] == message(0.5, 17.0)
    with sqlite3.connect(path) as raw:
        assert raw.execute("SELECT version FROM schema_version").fetchone() == (SCHEMA_VERSION,)
    raw.close()
    numbers = seqs(path)
    assert numbers == {
        "messages": [None, None, None, 1],
        "decisions": [None, None],
        "events": [None],
    }


def test_an_order_that_goes_back_is_an_error_naming_the_file(tmp_path: Path) -> None:
    path = tmp_path / "ledger.db"
    with Ledger.open(path) as ledger:
        ledger.record_messages([message(1.0, 18.0), message(2.0, 19.0)])
    with sqlite3.connect(path) as raw:  # not something ventsup writes
        raw.execute("UPDATE messages SET seq = 3 - seq")
    raw.close()
    with Ledger.open(path) as ledger, pytest.raises(LedgerError) as info:
        list(ledger.journal())
    assert str(info.value).startswith(f"{path}: the messages table's recording order goes back")
