"""The SQLite ledger: zone state that survives a restart, and the recording of a site.

One file per site (standard library :mod:`sqlite3`), in write-ahead-log mode with
``synchronous=NORMAL`` (a committed transaction survives a crash of the
process; a power cut may lose the last few commits but never corrupts the
file) and foreign keys on. The ledger keeps:

- **state**: the latest :class:`~ventsup.core.state.ZoneState` of each zone, as
  JSON (:func:`state_to_json`), replaced in one transaction by
  :meth:`Ledger.save_states` and restored by :meth:`Ledger.load_states`;
- **recording**: every input message (:class:`MessageRecord`), every
  :class:`~ventsup.core.state.Decision` with what triggered it, and notable
  events (:class:`EventRecord`), written in batches (:class:`BatchWriter`),
  read back in order, and pruned after the retention period. One sequence
  number (``seq``) shared by the three tables keeps the order in which the
  daemon recorded them (:meth:`Ledger.journal`), so that a replay knows which
  messages each decision had seen.

The format (tables, columns, units, outcomes) is documented in
``docs/ledger.md``. Times are seconds since the Unix epoch (UTC) throughout;
time filters include ``start`` and exclude ``end``.

Errors::

    VentsupError            (ventsup.config.errors)
    └── LedgerError         the ledger file cannot be opened, read or written;
                            the message names the file and what was being done

Every :mod:`sqlite3` error is converted to :class:`LedgerError` at this
boundary (``raise ... from exc``). A :class:`Ledger` may be shared between
threads (each call holds a lock); a :class:`BatchWriter` belongs to one thread.
Reading iterators use a connection of their own, so they see one consistent
snapshot and never block the writer.
"""

from __future__ import annotations

import heapq
import json
import math
import sqlite3
import threading
import types
from collections.abc import Callable, Iterator, Mapping, Sequence
from contextlib import contextmanager, suppress
from dataclasses import MISSING, dataclass, fields, is_dataclass
from enum import Enum
from functools import cache
from pathlib import Path
from typing import Any, Final, Literal, TypeAlias, Union, get_args, get_origin, get_type_hints

import pandas as pd

from ventsup.config.errors import VentsupError
from ventsup.core.inputs import Sample
from ventsup.core.state import Decision, ZoneState

__all__ = [
    "DEFAULT_RETENTION",
    "EVENT_KINDS",
    "SCHEMA_VERSION",
    "BatchWriter",
    "EventRecord",
    "Ledger",
    "LedgerError",
    "MessageRecord",
    "decision_from_row",
    "decision_to_row",
    "state_from_json",
    "state_to_json",
]

#: The schema version this ventsup writes; a ledger with a higher version is refused.
SCHEMA_VERSION: Final = 2
#: How long recorded rows are kept by default [s]: 400 days, a year and a month to compare.
DEFAULT_RETENTION: Final = 400 * 86400.0
#: The kinds of :class:`EventRecord`.
EVENT_KINDS: Final = frozenset(
    {"alarm", "command", "fault", "note", "override", "override_end", "start", "stop"}
)

# "VSUP": marks the file as a ventsup ledger (PRAGMA application_id, header offset 68).
_APPLICATION_ID: Final = 0x56535550
# How long a statement waits for another connection's write lock [s].
_BUSY_TIMEOUT: Final = 10.0
# Rows fetched at a time by the reading iterators.
_FETCH_SIZE: Final = 1000
_RECORD_TABLES: Final = ("messages", "decisions", "events")
_DECISION_JSON_FIELDS: Final = ("targets", "limits", "facts", "events")

Trigger: TypeAlias = str
RowValue: TypeAlias = str | float | int | None


class LedgerError(VentsupError):
    """The ledger file cannot be opened, read or written; the message names the file."""


# --------------------------------------------------------------------------- records


@dataclass(frozen=True)
class MessageRecord:
    """One input message as the daemon received it.

    ``t`` [s] is the receipt time the daemon stamped the sample with; ``payload``
    the raw bytes; ``point`` the configured point the topic maps to (None for an
    unknown topic); ``outcome`` ``"accepted"`` or the rejection reason
    (``"out_of_range"``, ``"unknown_topic"``, ... see ``docs/ledger.md``);
    ``value`` the decoded SI value (None when there is none).
    """

    t: float
    topic: str
    payload: bytes
    point: str | None
    outcome: str
    value: float | bool | None

    def __post_init__(self) -> None:
        if not self.outcome:
            raise ValueError(
                f"a message record needs an outcome ('accepted' or a rejection reason), "
                f"got {self.outcome!r} for topic {self.topic!r}"
            )
        if not isinstance(self.payload, bytes):
            # bytearray and memoryview payloads would come back as bytes and compare unequal.
            object.__setattr__(self, "payload", bytes(self.payload))

    def sample(self) -> Sample | None:
        """The held sample this message gave (accepted, with a point and value), else None."""
        if self.outcome != "accepted" or self.point is None or self.value is None:
            return None
        return Sample(self.point, self.value, self.t)


@dataclass(frozen=True)
class EventRecord:
    """Something worth a line in the record: a start, an override, an alarm, a fault...

    ``kind`` is one of :data:`EVENT_KINDS`; ``zone`` and ``who`` are None when
    they do not apply; ``text`` is a readable sentence.
    """

    t: float
    kind: str
    zone: str | None
    who: str | None
    text: str

    def __post_init__(self) -> None:
        if self.kind not in EVENT_KINDS:
            raise ValueError(
                f"unknown event kind {self.kind!r}; expected one of {sorted(EVENT_KINDS)}"
            )


def _check_trigger(trigger: str) -> None:
    if trigger in ("tick", "override") or (trigger.startswith("input:") and len(trigger) > 6):
        return
    raise ValueError(
        f"unknown decision trigger {trigger!r}; expected 'tick', 'override' or 'input:<point>'"
    )


# --------------------------------------------------------------------------- JSON


class _Mismatch(ValueError):
    """A stored value does not have the type its field declares.

    ``path`` collects the field names and indices on the way out (innermost
    first), so that the happy path never builds a path string.
    """

    def __init__(self, problem: str) -> None:
        super().__init__(problem)
        self.problem = problem
        self.path: list[str] = []

    def at(self, root: str) -> str:
        """The message with the full path of the value, e.g. ``state.openings.roof.target: ...``."""
        return f"{root}{''.join(reversed(self.path))}: {self.problem}"


_SCALAR_TYPES: Final[Mapping[Any, tuple[type, ...]]] = {
    float: (int, float),  # an int stays an int: JSON keeps 1 and 1.0 apart
    int: (int,),
    bool: (bool,),
    str: (str,),
    type(None): (type(None),),
}
_Decoder: TypeAlias = Callable[[Any], Any]


@cache
def _field_names(cls: type) -> tuple[str, ...]:
    return tuple(f.name for f in fields(cls))


def _plain(value: object) -> object:
    """``value`` as JSON-ready lists, dicts and scalars (enums by value)."""
    if value is None or type(value) in (str, float, int, bool):
        return value
    if isinstance(value, Enum):
        return value.value
    if is_dataclass(value) and not isinstance(value, type):
        return {name: _plain(getattr(value, name)) for name in _field_names(type(value))}
    if isinstance(value, Mapping):
        plain: dict[str, object] = {}
        for key, item in value.items():
            if not isinstance(key, str):
                raise TypeError(f"keys must be str to be stored as JSON, got {key!r}")
            plain[key] = _plain(item)
        return plain
    if isinstance(value, tuple | list):
        return [_plain(item) for item in value]
    if isinstance(value, str | int | float):  # subclasses, e.g. numpy's float64
        return value
    raise TypeError(f"cannot store {type(value).__name__} {value!r} as JSON")


# json writes floats with repr(), which reads back to the same float exactly;
# Infinity and NaN are written as Python's (and JSON5's) extension words.
_ENCODER: Final = json.JSONEncoder(ensure_ascii=False, separators=(",", ":"))


def _dumps(value: object) -> str:
    return _ENCODER.encode(_plain(value))


def _describe(hint: Any) -> str:
    """A type hint in words, for error messages: ``Mode | None`` -> ``Mode or null``."""
    if hint is type(None):
        return "null"
    origin = get_origin(hint)
    if origin is Union or origin is types.UnionType:
        return " or ".join(_describe(option) for option in get_args(hint))
    if origin is Literal:
        return " or ".join(repr(option) for option in get_args(hint))
    if origin is dict:
        return f"object of {_describe(get_args(hint)[1])}"
    if origin is tuple:
        return f"array of {_describe(get_args(hint)[0])}"
    words = {float: "number", int: "integer", bool: "boolean", str: "string"}
    if isinstance(hint, type):
        return words.get(hint, hint.__name__)
    return str(hint)


@cache
def _decoder(hint: Any) -> _Decoder:
    """A function that checks a value read from JSON against ``hint`` and rebuilds it.

    Built once per type hint; it raises :class:`_Mismatch` for a value that does
    not fit.
    """
    origin = get_origin(hint)
    union = origin is Union or origin is types.UnionType
    options = get_args(hint) if union else (hint,)
    if all(option in _SCALAR_TYPES for option in options):
        return _scalar_decoder(hint, options)
    if union:
        return _union_decoder(hint, options)
    if origin is Literal:
        return _literal_decoder(hint)
    if origin is dict:
        return _dict_decoder(get_args(hint)[1])
    if origin is tuple:
        args = get_args(hint)
        if len(args) != 2 or args[1] is not Ellipsis:
            raise TypeError(f"no JSON decoding for {hint!r}: only tuple[X, ...] is supported")
        return _tuple_decoder(args[0])
    if isinstance(hint, type) and issubclass(hint, Enum):
        return _enum_decoder(hint)
    if isinstance(hint, type) and is_dataclass(hint):
        return _dataclass_decoder(hint)
    raise TypeError(f"no JSON decoding for {hint!r}")


def _scalar_decoder(hint: Any, options: tuple[Any, ...]) -> _Decoder:
    allowed = frozenset(kind for option in options for kind in _SCALAR_TYPES[option])
    expected = _describe(hint)

    def decode(value: Any) -> Any:
        if type(value) in allowed:
            return value
        raise _Mismatch(f"expected {expected}, got {value!r}")

    return decode


def _union_decoder(hint: Any, options: tuple[Any, ...]) -> _Decoder:
    others = [option for option in options if option is not type(None)]
    if len(others) == 1:
        inner = _decoder(others[0])

        def decode_optional(value: Any) -> Any:
            # "X or null" holding a value: X's own message says more (the field inside).
            return None if value is None else inner(value)

        return decode_optional
    decoders = [_decoder(option) for option in options]
    expected = _describe(hint)

    def decode(value: Any) -> Any:
        for option in decoders:
            try:
                return option(value)
            except _Mismatch:
                continue
        raise _Mismatch(f"expected {expected}, got {value!r}")

    return decode


def _literal_decoder(hint: Any) -> _Decoder:
    choices = get_args(hint)
    expected = _describe(hint)

    def decode(value: Any) -> Any:
        if any(type(value) is type(choice) and value == choice for choice in choices):
            return value
        raise _Mismatch(f"expected {expected}, got {value!r}")

    return decode


def _dict_decoder(item_hint: Any) -> _Decoder:
    item = _decoder(item_hint)
    expected = f"expected an object of {_describe(item_hint)}"

    def decode(value: Any) -> Any:
        if type(value) is not dict:
            raise _Mismatch(f"{expected}, got {value!r}")
        result = {}
        for key, entry in value.items():
            try:
                result[key] = item(entry)
            except _Mismatch as exc:
                exc.path.append(f".{key}")
                raise
        return result

    return decode


def _tuple_decoder(item_hint: Any) -> _Decoder:
    item = _decoder(item_hint)
    expected = f"expected an array of {_describe(item_hint)}"

    def decode(value: Any) -> Any:
        if type(value) is not list:
            raise _Mismatch(f"{expected}, got {value!r}")
        result = []
        for index, entry in enumerate(value):
            try:
                result.append(item(entry))
            except _Mismatch as exc:
                exc.path.append(f"[{index}]")
                raise
        return tuple(result)

    return decode


def _enum_decoder(cls: type[Enum]) -> _Decoder:
    members = {member.value: member for member in cls}
    base = int if issubclass(cls, int) else str
    expected = f"expected a {cls.__name__} (one of {list(members)})"

    def decode(value: Any) -> Any:
        # The type test keeps True from passing as Layer 1.
        if type(value) is base and value in members:
            return members[value]
        raise _Mismatch(f"{expected}, got {value!r}")

    return decode


def _dataclass_decoder(cls: type) -> _Decoder:
    hints = get_type_hints(cls)
    names = _field_names(cls)
    decoders = {name: _decoder(hints[name]) for name in names}
    # A field added later with a default reads as that default from an older snapshot.
    required = frozenset(
        f.name for f in fields(cls) if f.default is MISSING and f.default_factory is MISSING
    )

    def decode(value: Any) -> Any:
        if type(value) is not dict:
            raise _Mismatch(f"expected an object for {cls.__name__}, got {value!r}")
        arguments = {}
        for name, entry in value.items():
            field_decoder = decoders.get(name)
            if field_decoder is None:
                unknown = sorted(set(value) - set(names))
                raise _Mismatch(f"{cls.__name__} has no fields {unknown}")
            try:
                arguments[name] = field_decoder(entry)
            except _Mismatch as exc:
                exc.path.append(f".{name}")
                raise
        if not required <= arguments.keys():
            missing = sorted(required - arguments.keys())
            raise _Mismatch(f"{cls.__name__} lacks required fields {missing}")
        return cls(**arguments)

    return decode


def state_to_json(state: ZoneState) -> str:
    """``state`` as compact JSON; :func:`state_from_json` gives back an equal ZoneState.

    Dataclasses become objects with one key per field, enums their values,
    tuples arrays; floats are written so that they read back exactly.
    """
    return _dumps(state)


def state_from_json(text: str) -> ZoneState:
    """The ZoneState that :func:`state_to_json` wrote.

    Raises
    ------
    ValueError
        Not JSON, or a value that does not fit its field (the message gives the
        field's path, e.g. ``state.openings.roof.target``).
    """
    try:
        state = _decoder(ZoneState)(json.loads(text))
    except _Mismatch as exc:
        raise ValueError(exc.at("state")) from None
    assert isinstance(state, ZoneState)
    return state


_DECISION_FIELDS: Final = _field_names(Decision)


def decision_to_row(decision: Decision) -> dict[str, RowValue]:
    """``decision`` as one row of the ``decisions`` table (without its trigger).

    Scalars stay scalars (enums by value, ``windows_open`` as 0 or 1);
    ``targets``, ``limits``, ``facts`` and ``events`` are JSON text.
    """
    row: dict[str, RowValue] = {}
    for name in _DECISION_FIELDS:
        value = getattr(decision, name)
        if name in _DECISION_JSON_FIELDS:
            row[name] = _dumps(value)
        elif name == "windows_open":
            row[name] = int(bool(value))
        elif isinstance(value, Enum):
            row[name] = value.value
        else:
            row[name] = value
    return row


@cache
def _decision_column_decoders() -> dict[str, _Decoder]:
    hints = get_type_hints(Decision)
    return {name: _decoder(hints[name]) for name in _DECISION_FIELDS}


def decision_from_row(row: Mapping[str, Any]) -> Decision:
    """The Decision that :func:`decision_to_row` wrote; other keys (``id``, trigger) are ignored.

    Raises
    ------
    ValueError
        A missing column, unreadable JSON or a value that does not fit its field.
    """
    decoders = _decision_column_decoders()
    values: dict[str, Any] = {}
    for name in _DECISION_FIELDS:
        try:
            value = row[name]
        except KeyError:
            raise ValueError(f"decision: the row has no {name!r} column") from None
        try:
            if name in _DECISION_JSON_FIELDS:
                if not isinstance(value, str):
                    raise _Mismatch(f"expected JSON text, got {value!r}")
                values[name] = decoders[name](json.loads(value))
            elif name == "windows_open":
                if type(value) not in (int, bool) or value not in (0, 1):
                    raise _Mismatch(f"expected 0 or 1, got {value!r}")
                values[name] = bool(value)
            else:
                values[name] = decoders[name](value)
        except _Mismatch as exc:
            raise ValueError(exc.at(f"decision.{name}")) from None
    return Decision(**values)


# --------------------------------------------------------------------------- schema


def _migrate_0_to_1(connection: sqlite3.Connection) -> None:
    """Create the first schema in an empty file."""
    for statement in (
        f"PRAGMA application_id = {_APPLICATION_ID}",
        """CREATE TABLE schema_version (
            id INTEGER PRIMARY KEY CHECK (id = 1),
            version INTEGER NOT NULL
        )""",
        """CREATE TABLE zone_state (
            zone TEXT PRIMARY KEY,
            t REAL NOT NULL,
            state TEXT NOT NULL
        )""",
        """CREATE TABLE messages (
            id INTEGER PRIMARY KEY,
            t REAL NOT NULL,
            topic TEXT NOT NULL,
            payload BLOB NOT NULL,
            point TEXT,
            outcome TEXT NOT NULL CHECK (outcome <> ''),
            value REAL,
            value_is_bool INTEGER NOT NULL DEFAULT 0 CHECK (value_is_bool IN (0, 1))
        )""",
        "CREATE INDEX messages_t ON messages (t)",
        """CREATE TABLE decisions (
            id INTEGER PRIMARY KEY,
            t REAL NOT NULL,
            zone TEXT NOT NULL,
            triggered_by TEXT NOT NULL,
            mode TEXT NOT NULL,
            layer INTEGER NOT NULL,
            cause TEXT NOT NULL,
            reason TEXT NOT NULL,
            windows_open INTEGER NOT NULL CHECK (windows_open IN (0, 1)),
            open_area REAL NOT NULL,
            targets TEXT NOT NULL,
            limits TEXT NOT NULL,
            facts TEXT NOT NULL,
            events TEXT NOT NULL
        )""",
        "CREATE INDEX decisions_t ON decisions (t)",
        "CREATE INDEX decisions_zone_t ON decisions (zone, t)",
        """CREATE TABLE events (
            id INTEGER PRIMARY KEY,
            t REAL NOT NULL,
            kind TEXT NOT NULL,
            zone TEXT,
            who TEXT,
            text TEXT NOT NULL
        )""",
        "CREATE INDEX events_t ON events (t)",
    ):
        connection.execute(statement)


def _migrate_1_to_2(connection: sqlite3.Connection) -> None:
    """Add the shared recording order: a ``seq`` column in messages, decisions and events.

    Rows written before have none (NULL): :meth:`Ledger.journal` orders them
    before every numbered row, by time, messages first at one time (the order
    version 1 replays assumed). Adding a nullable column rewrites no row.

    No index: the single writer inserts each table's rows in the order of
    their numbers, so the ids (the primary key) follow the numbers within a
    table, and reading in recording order or finding the last number goes
    through the primary key. An index on ``seq`` would cost every insert a
    second B-tree update (about a fifth of the write rate, measured).
    """
    for table in _RECORD_TABLES:
        connection.execute(f"ALTER TABLE {table} ADD COLUMN seq INTEGER")


#: The forward migration hook: entry ``n`` brings a ledger from version ``n`` to
#: ``n + 1`` inside the opening transaction. To change the schema, append a
#: function here and raise :data:`SCHEMA_VERSION`; never edit an entry once released.
_MIGRATIONS: list[Callable[[sqlite3.Connection], None]] = [_migrate_0_to_1, _migrate_1_to_2]


def _read_version(connection: sqlite3.Connection, path: Path) -> int:
    """The file's schema version: 0 for an empty file."""
    tables = {
        name
        for (name,) in connection.execute("SELECT name FROM sqlite_master WHERE type = 'table'")
    }
    if "schema_version" not in tables:
        if tables:
            raise LedgerError(
                f"{path}: not a ventsup ledger (it has tables {sorted(tables)} but no "
                "schema_version); give the ledger a file of its own"
            )
        return 0
    row = connection.execute("SELECT version FROM schema_version WHERE id = 1").fetchone()
    if row is None or not isinstance(row[0], int):
        raise LedgerError(f"{path}: the schema_version table holds no version; restore a backup")
    version: int = row[0]
    return version


def _refuse_newer(version: int, path: Path) -> None:
    if version > SCHEMA_VERSION:
        raise LedgerError(
            f"{path}: the ledger has schema version {version}, written by a newer ventsup; "
            f"this ventsup reads versions up to {SCHEMA_VERSION}. Upgrade ventsup, or point "
            "it at another ledger file"
        )


def _migrate(connection: sqlite3.Connection, path: Path) -> None:
    """Bring the file to :data:`SCHEMA_VERSION`, or refuse a newer one."""
    application_id = connection.execute("PRAGMA application_id").fetchone()[0]
    if application_id not in (0, _APPLICATION_ID):
        raise LedgerError(
            f"{path}: not a ventsup ledger (application id {application_id:#x}); "
            "give the ledger a file of its own"
        )
    # Read first without a lock, so that opening a current ledger never waits for a writer.
    version = _read_version(connection, path)
    _refuse_newer(version, path)
    if version == SCHEMA_VERSION:
        return
    connection.execute("BEGIN IMMEDIATE")
    try:
        version = _read_version(connection, path)  # another process may have migrated meanwhile
        _refuse_newer(version, path)
        for step in range(version, SCHEMA_VERSION):
            _MIGRATIONS[step](connection)
        connection.execute(
            "INSERT INTO schema_version (id, version) VALUES (1, ?) "
            "ON CONFLICT (id) DO UPDATE SET version = excluded.version",
            (SCHEMA_VERSION,),
        )
        connection.execute("COMMIT")
    except BaseException:
        _rollback_quietly(connection)
        raise


def _rollback_quietly(connection: sqlite3.Connection) -> None:
    # The error that caused the rollback says more than a failing rollback would.
    if connection.in_transaction:
        with suppress(sqlite3.Error):
            connection.execute("ROLLBACK")


def _connect(path: Path) -> sqlite3.Connection:
    # isolation_level=None: no implicit transactions; every write says BEGIN IMMEDIATE.
    return sqlite3.connect(
        path, timeout=_BUSY_TIMEOUT, isolation_level=None, check_same_thread=False
    )


def _time_filter(
    start: float | None, end: float | None, extra: Mapping[str, object] | None = None
) -> tuple[str, list[object]]:
    """``WHERE`` clause and parameters for ``start <= t < end`` and column equalities."""
    clauses: list[str] = []
    parameters: list[object] = []
    if start is not None:
        clauses.append("t >= ?")
        parameters.append(start)
    if end is not None:
        clauses.append("t < ?")
        parameters.append(end)
    for column, value in (extra or {}).items():
        if value is not None:
            clauses.append(f"{column} = ?")
            parameters.append(value)
    return (" WHERE " + " AND ".join(clauses) if clauses else ""), parameters


_INSERT_DECISION: Final = (
    f"INSERT INTO decisions ({', '.join(_DECISION_FIELDS)}, triggered_by, seq) "
    f"VALUES ({', '.join(':' + name for name in _DECISION_FIELDS)}, :triggered_by, :seq)"
)
_INSERT_MESSAGE: Final = (
    "INSERT INTO messages (t, topic, payload, point, outcome, value, value_is_bool, seq) "
    "VALUES (?, ?, ?, ?, ?, ?, ?, ?)"
)
_INSERT_EVENT: Final = (
    "INSERT INTO events (t, kind, zone, who, text, seq) VALUES (?, ?, ?, ?, ?, ?)"
)
# The last sequence number given (0 in a ledger without numbered rows). Each table's
# numbered rows have increasing ids (see _migrate_1_to_2): its newest row has its highest
# number, found through the primary key without an index on seq.
_LAST_SEQ: Final = (
    "SELECT max("
    + ", ".join(
        f"coalesce((SELECT seq FROM {table} ORDER BY id DESC LIMIT 1), 0)"
        for table in _RECORD_TABLES
    )
    + ")"
)
#: A record as the ledger writes it, in recording order.
_Record: TypeAlias = MessageRecord | tuple[Decision, Trigger] | EventRecord
_FRAME_COLUMNS: Final = (
    "t",
    "zone",
    "mode",
    "layer",
    "cause",
    "reason",
    "windows_open",
    "open_area",
)


def _message_row(record: MessageRecord, seq: int) -> tuple[object, ...]:
    value = record.value
    return (
        record.t,
        record.topic,
        record.payload,
        record.point,
        record.outcome,
        None if value is None else float(value),
        int(isinstance(value, bool)),
        seq,
    )


def _message_from_row(row: Sequence[Any]) -> MessageRecord:
    t, topic, payload, point, outcome, value, value_is_bool = row
    if value is not None and value_is_bool:
        value = bool(value)
    return MessageRecord(t, topic, bytes(payload), point, outcome, value)


# --------------------------------------------------------------------------- ledger


class Ledger:
    """One site's ledger file. Open with :meth:`Ledger.open`; use as a context manager.

    ``retention`` [s] is how long :meth:`prune` keeps recorded rows.
    """

    def __init__(self, connection: sqlite3.Connection, path: Path, retention: float) -> None:
        self._connection: sqlite3.Connection | None = connection
        self._path = path
        self._retention = retention
        self._lock = threading.RLock()

    # ----------------------------------------------------------------- life cycle

    @classmethod
    def open(cls, path: str | Path, *, retention: float = DEFAULT_RETENTION) -> Ledger:
        """Open the ledger at ``path``, creating its folders and schema if needed.

        Raises
        ------
        LedgerError
            The file or its folder cannot be created or opened, it is not a
            ventsup ledger, it has a newer schema version, or its file system
            does not support write-ahead logging.
        ValueError
            ``retention`` is not a positive number of seconds.
        """
        path = Path(path)
        if not retention > 0:
            raise ValueError(f"retention must be a positive number of seconds, got {retention!r}")
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise LedgerError(f"{path}: cannot create the ledger's folder: {exc}") from exc
        try:
            connection = _connect(path)
        except sqlite3.Error as exc:
            raise LedgerError(f"{path}: cannot open the ledger: {exc}") from exc
        try:
            mode = connection.execute("PRAGMA journal_mode = WAL").fetchone()[0]
            if str(mode).lower() != "wal":
                raise LedgerError(
                    f"{path}: cannot use write-ahead logging (journal mode stays {mode!r}); "
                    "keep the ledger on a local file system"
                )
            connection.execute("PRAGMA synchronous = NORMAL")
            connection.execute("PRAGMA foreign_keys = ON")
            _migrate(connection, path)
        except sqlite3.Error as exc:
            connection.close()
            raise LedgerError(f"{path}: cannot open the ledger: {exc}") from exc
        except BaseException:
            connection.close()
            raise
        return cls(connection, path, retention)

    def close(self) -> None:
        """Close the file (idempotent); anything not yet committed is lost."""
        with self._lock:
            if self._connection is not None:
                connection, self._connection = self._connection, None
                try:
                    connection.close()
                except sqlite3.Error as exc:
                    raise LedgerError(f"{self._path}: cannot close the ledger: {exc}") from exc

    def __enter__(self) -> Ledger:
        return self

    def __exit__(self, *exc_info: object) -> None:
        self.close()

    def __repr__(self) -> str:
        state = "closed" if self._connection is None else "open"
        return f"Ledger({str(self._path)!r}, {state})"

    @property
    def path(self) -> Path:
        """The ledger file."""
        return self._path

    @property
    def retention(self) -> float:
        """How long recorded rows are kept [s]."""
        return self._retention

    @property
    def closed(self) -> bool:
        """True once :meth:`close` has been called."""
        return self._connection is None

    # ----------------------------------------------------------------- plumbing

    def _open_connection(self) -> sqlite3.Connection:
        if self._connection is None:
            raise LedgerError(f"{self._path}: the ledger is closed")
        return self._connection

    @contextmanager
    def _errors(self, action: str) -> Iterator[None]:
        """Convert sqlite3 (and unstorable text) errors into LedgerError naming the file."""
        try:
            yield
        except sqlite3.Error as exc:
            raise LedgerError(f"{self._path}: cannot {action}: {exc}") from exc
        except UnicodeEncodeError as exc:
            raise LedgerError(
                f"{self._path}: cannot {action}: text is not valid Unicode: {exc}"
            ) from exc

    @contextmanager
    def _transaction(self, action: str) -> Iterator[sqlite3.Connection]:
        """One write transaction (BEGIN IMMEDIATE ... COMMIT), rolled back on any error."""
        with self._lock, self._errors(action):
            connection = self._open_connection()
            connection.execute("BEGIN IMMEDIATE")
            try:
                yield connection
                connection.execute("COMMIT")
            except BaseException:
                _rollback_quietly(connection)
                raise

    @contextmanager
    def _reader(self, action: str) -> Iterator[sqlite3.Connection]:
        """A read-only connection of its own in one read transaction: one consistent snapshot."""
        with self._lock:
            self._open_connection()
        with self._errors(action):
            reader = _connect(self._path)
        try:
            with self._errors(action):
                reader.execute("PRAGMA query_only = ON")
                reader.execute("BEGIN")
            yield reader
        finally:
            reader.close()

    def _rows(
        self, reader: sqlite3.Connection, action: str, query: str, parameters: Sequence[object]
    ) -> Iterator[tuple[Any, ...]]:
        """Rows of ``query`` on ``reader``, fetched a batch at a time."""
        with self._errors(action):
            cursor = reader.execute(query, parameters)
        while True:
            with self._errors(action):
                rows = cursor.fetchmany(_FETCH_SIZE)
            if not rows:
                return
            yield from rows

    def _read(
        self, action: str, query: str, parameters: Sequence[object]
    ) -> Iterator[tuple[Any, ...]]:
        """Rows of ``query`` from a connection of their own, in one read transaction."""
        with self._reader(action) as reader:
            yield from self._rows(reader, action, query, parameters)

    # ----------------------------------------------------------------- state

    def save_states(self, states: Mapping[str, ZoneState], t: float) -> None:
        """Store each zone's state as of ``t`` [s], all in one transaction.

        Each zone's snapshot replaces its previous one; zones not in ``states``
        keep theirs.
        """
        rows = [(zone, t, state_to_json(state)) for zone, state in states.items()]
        with self._transaction("save the zone states") as connection:
            connection.executemany(
                "INSERT INTO zone_state (zone, t, state) VALUES (?, ?, ?) "
                "ON CONFLICT (zone) DO UPDATE SET t = excluded.t, state = excluded.state",
                rows,
            )

    def load_states(self) -> dict[str, ZoneState]:
        """Every zone's last saved state, by zone name (empty for a new ledger).

        Raises
        ------
        LedgerError
            A stored state that cannot be read back (the message names the zone).
        """
        with self._lock, self._errors("load the zone states"):
            rows = (
                self._open_connection()
                .execute("SELECT zone, state FROM zone_state ORDER BY zone")
                .fetchall()
            )
        states: dict[str, ZoneState] = {}
        for zone, text in rows:
            try:
                states[zone] = state_from_json(text)
            except ValueError as exc:
                raise LedgerError(
                    f"{self._path}: the saved state of zone {zone!r} cannot be read: {exc}"
                ) from exc
        return states

    # ----------------------------------------------------------------- recording

    def _write(self, records: Sequence[_Record], action: str) -> int:
        """Insert ``records`` in one transaction, numbered in the given order; returns how many.

        The numbers continue from the highest in the file, read inside the
        write transaction, so that they follow the order of the commits even
        if another connection has written meanwhile.
        """
        message_rows: list[tuple[object, ...]] = []
        decision_rows: list[dict[str, object]] = []
        event_rows: list[tuple[object, ...]] = []
        for record in records:
            if isinstance(record, tuple):
                _check_trigger(record[1])
        with self._transaction(action) as connection:
            seq = int(connection.execute(_LAST_SEQ).fetchone()[0])
            for record in records:
                seq += 1
                if isinstance(record, MessageRecord):
                    message_rows.append(_message_row(record, seq))
                elif isinstance(record, EventRecord):
                    event_rows.append(
                        (record.t, record.kind, record.zone, record.who, record.text, seq)
                    )
                else:
                    decision, trigger = record
                    row: dict[str, object] = dict(decision_to_row(decision))
                    row["triggered_by"] = trigger
                    row["seq"] = seq
                    decision_rows.append(row)
            if message_rows:
                connection.executemany(_INSERT_MESSAGE, message_rows)
            if decision_rows:
                connection.executemany(_INSERT_DECISION, decision_rows)
            if event_rows:
                connection.executemany(_INSERT_EVENT, event_rows)
        return len(message_rows) + len(decision_rows) + len(event_rows)

    def record_messages(self, rows: Sequence[MessageRecord]) -> None:
        """Record input messages, accepted and rejected, in one transaction."""
        self._write(rows, "record messages")

    def record_decisions(self, rows: Sequence[Decision], trigger: str = "tick") -> None:
        """Record decisions in one transaction, each with what triggered its evaluation.

        ``trigger`` is ``"tick"``, ``"override"`` or ``"input:<point>"`` (an
        urgent evaluation on a change of that point); anything else is a ValueError.
        """
        _check_trigger(trigger)
        self._write([(decision, trigger) for decision in rows], "record decisions")

    def record_events(self, rows: Sequence[EventRecord]) -> None:
        """Record events in one transaction."""
        self._write(rows, "record events")

    def prune(self, now: float) -> int:
        """Delete recorded rows older than the retention (``t < now - retention``).

        The zone states are never pruned. Returns the number of rows deleted.
        """
        cutoff = now - self._retention
        if math.isnan(cutoff):
            raise ValueError(f"prune needs a time, got now={now!r}")
        deleted = 0
        with self._transaction("prune old records") as connection:
            for table in _RECORD_TABLES:
                deleted += connection.execute(
                    f"DELETE FROM {table} WHERE t < ?", (cutoff,)
                ).rowcount
        return deleted

    # ----------------------------------------------------------------- reading

    def messages(
        self, start: float | None = None, end: float | None = None
    ) -> Iterator[MessageRecord]:
        """Recorded messages with ``start <= t < end``, by time, then as recorded."""
        where, parameters = _time_filter(start, end)
        query = (
            "SELECT t, topic, payload, point, outcome, value, value_is_bool FROM messages"
            f"{where} ORDER BY t, id"
        )
        for row in self._read("read messages", query, parameters):
            yield _message_from_row(row)

    def decisions(
        self, start: float | None = None, end: float | None = None, zone: str | None = None
    ) -> Iterator[tuple[Decision, str]]:
        """Recorded ``(decision, trigger)`` pairs with ``start <= t < end``, by time, then as recorded.

        ``zone`` keeps only that zone's decisions.
        """
        where, parameters = _time_filter(start, end, {"zone": zone})
        columns = ", ".join(_DECISION_FIELDS)
        query = f"SELECT {columns}, triggered_by FROM decisions{where} ORDER BY t, id"
        for row in self._read("read decisions", query, parameters):
            yield self._decision(row)

    def _decision(self, row: Sequence[Any]) -> tuple[Decision, str]:
        """A ``(decision, trigger)`` from the columns of the decision and ``triggered_by``."""
        values = dict(zip(_DECISION_FIELDS, row, strict=False))
        try:
            decision = decision_from_row(values)
        except ValueError as exc:
            raise LedgerError(
                f"{self._path}: a recorded decision of zone {values['zone']!r} at "
                f"t={values['t']!r} cannot be read: {exc}"
            ) from exc
        return decision, row[len(_DECISION_FIELDS)]

    def _ordered(
        self,
        reader: sqlite3.Connection,
        table: str,
        columns: str,
        where: str,
        parameters: Sequence[object],
        make: Callable[[tuple[Any, ...]], _Record],
    ) -> Iterator[tuple[tuple[float, ...], _Record]]:
        """``(order key, record)`` of a record table's rows in recording order.

        Rows without a number (written before schema version 2) come first, by
        time and then as written, with the table's rank at one time (messages
        before decisions before events); then the numbered rows by number.
        ``make`` builds the record from the row's ``columns``.
        """
        rank = _RECORD_TABLES.index(table)
        action = f"read {table}"
        clause = f"{where} AND" if where else " WHERE"
        query = f"SELECT t, id, {columns} FROM {table}{clause} seq IS NULL ORDER BY t, id"
        for row in self._rows(reader, action, query, parameters):
            yield (0, row[0], rank, row[1]), make(row[2:])
        query = f"SELECT seq, {columns} FROM {table}{clause} seq IS NOT NULL ORDER BY id"
        last = 0
        for row in self._rows(reader, action, query, parameters):
            if row[0] <= last:
                raise LedgerError(
                    f"{self._path}: the {table} table's recording order goes back at "
                    f"seq={row[0]!r} after {last!r}; it was not written by ventsup's ledger"
                )
            last = row[0]
            yield (1, last), make(row[1:])

    def journal(
        self,
        start: float | None = None,
        end: float | None = None,
        *,
        messages_start: float | None = None,
    ) -> Iterator[MessageRecord | tuple[Decision, str] | EventRecord]:
        """Every record in the order the daemon recorded it: what a replay needs to know
        which messages each decision had seen.

        Decisions (as ``(decision, trigger)``) and events with ``start <= t < end``;
        messages with ``messages_start <= t < end`` (by default every message
        before ``end``, so that a replay holds the values the first decision
        read). The order is the ``seq`` column's; rows of a version 1 ledger,
        which have none, come first, by time, messages before decisions before
        events at one time (the order the version 1 replay assumed). All rows
        come from one snapshot of the file.
        """
        with self._reader("read the recording") as reader:
            where, parameters = _time_filter(messages_start, end)
            messages = self._ordered(
                reader,
                "messages",
                "t, topic, payload, point, outcome, value, value_is_bool",
                where,
                parameters,
                _message_from_row,
            )
            where, parameters = _time_filter(start, end)
            columns = f"{', '.join(_DECISION_FIELDS)}, triggered_by"
            decisions = self._ordered(
                reader, "decisions", columns, where, parameters, self._decision
            )
            events = self._ordered(
                reader,
                "events",
                "t, kind, zone, who, text",
                where,
                parameters,
                lambda row: EventRecord(*row),
            )
            for _, record in heapq.merge(messages, decisions, events, key=lambda item: item[0]):
                yield record

    def events(
        self, start: float | None = None, end: float | None = None, kind: str | None = None
    ) -> Iterator[EventRecord]:
        """Recorded events with ``start <= t < end`` (of one ``kind`` if given), in order."""
        where, parameters = _time_filter(start, end, {"kind": kind})
        query = f"SELECT t, kind, zone, who, text FROM events{where} ORDER BY t, id"
        for t, event_kind, event_zone, who, text in self._read("read events", query, parameters):
            yield EventRecord(t, event_kind, event_zone, who, text)

    def decisions_frame(
        self, start: float | None = None, end: float | None = None, zone: str | None = None
    ) -> pd.DataFrame:
        """Recorded decisions with ``start <= t < end`` as a table, for reports.

        Columns: ``t`` [s, float], ``zone``, ``mode``, ``layer`` (int), ``cause``,
        ``reason``, ``windows_open`` (bool), ``open_area`` [m²], then one
        ``target:<opening>`` column per opening seen (sorted by name; opening
        fraction 0-1, NaN when released or not in that decision). Rows are in
        time order, then as recorded.
        """
        where, parameters = _time_filter(start, end, {"zone": zone})
        query = f"SELECT {', '.join(_FRAME_COLUMNS)}, targets FROM decisions{where} ORDER BY t, id"
        rows = list(self._read("read decisions", query, parameters))
        columns = list(zip(*rows, strict=True)) if rows else [()] * (len(_FRAME_COLUMNS) + 1)
        frame = pd.DataFrame(
            {
                "t": pd.Series(columns[0], dtype="float64"),
                "zone": pd.Series(columns[1], dtype=str),
                "mode": pd.Series(columns[2], dtype=str),
                "layer": pd.Series(columns[3], dtype="int64"),
                "cause": pd.Series(columns[4], dtype=str),
                "reason": pd.Series(columns[5], dtype=str),
                "windows_open": pd.Series(columns[6], dtype="int64").astype(bool),
                "open_area": pd.Series(columns[7], dtype="float64"),
            }
        )
        targets = pd.DataFrame.from_records([json.loads(text) for text in columns[8]])
        for opening in sorted(targets.columns):
            frame[f"target:{opening}"] = targets[opening].astype("float64").to_numpy()
        return frame

    # ----------------------------------------------------------------- backup

    def backup(self, target_path: str | Path) -> Path:
        """Copy the ledger to ``target_path`` with SQLite's online backup; returns the path.

        Safe while this or another process writes: the copy is one consistent
        snapshot of committed transactions. An existing file at the target is
        replaced; the copy is a single file (not in write-ahead-log mode).
        """
        target = Path(target_path)
        if target.resolve() == self._path.resolve():
            raise LedgerError(f"{self._path}: cannot back up the ledger onto itself")
        try:
            target.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise LedgerError(f"{self._path}: cannot create the backup's folder: {exc}") from exc
        with self._lock, self._errors(f"back up to {target}"):
            source = self._open_connection()
            destination = sqlite3.connect(target, isolation_level=None)
            try:
                source.backup(destination)
                destination.execute("PRAGMA journal_mode = DELETE")
            finally:
                destination.close()
        return target


# --------------------------------------------------------------------------- batches


class BatchWriter:
    """Collects records in memory and writes them to ``ledger`` in one transaction.

    :meth:`add` writes the batch once ``max_size`` records are pending or the
    oldest pending one was added ``max_age`` [s] ago, measured with the times
    passed in (no clock is read here: pass a monotonic clock reading).
    :meth:`flush_if_due` applies the same test without adding, for an idle
    worker; :meth:`flush` writes at once (call it at shutdown). The records
    are numbered (``seq``) in the order they were added.

    If a write fails, the records stay pending and the :class:`LedgerError`
    propagates; the next add or flush tries again, and :meth:`discard` drops
    them. Not thread-safe: one worker thread owns a BatchWriter.
    """

    def __init__(self, ledger: Ledger, *, max_size: int = 500, max_age: float = 2.0) -> None:
        if max_size < 1:
            raise ValueError(f"max_size must be at least 1, got {max_size}")
        if not max_age >= 0:
            raise ValueError(f"max_age must be zero or more seconds, got {max_age!r}")
        self.ledger = ledger
        self.max_size = max_size
        self.max_age = max_age
        # One list in the order of add(): the ledger numbers the records in that order.
        self._pending: list[_Record] = []
        self._oldest: float | None = None

    def __len__(self) -> int:
        return len(self._pending)

    def add(
        self, record: MessageRecord | Decision | EventRecord, now: float, *, trigger: str = "tick"
    ) -> int:
        """Queue ``record`` (at time ``now`` [s]) and write the batch if it is due.

        ``trigger`` applies to a Decision only (see :meth:`Ledger.record_decisions`).
        Returns the number of records written by this call (0 if none).
        """
        if isinstance(record, MessageRecord | EventRecord):
            self._pending.append(record)
        elif isinstance(record, Decision):
            _check_trigger(trigger)
            self._pending.append((record, trigger))
        else:
            raise TypeError(
                f"a BatchWriter takes MessageRecord, Decision or EventRecord, "
                f"got {type(record).__name__}"
            )
        if self._oldest is None:
            self._oldest = now
        return self.flush_if_due(now)

    def due(self, now: float) -> bool:
        """True when the pending records should be written at time ``now`` [s]."""
        if not len(self):
            return False
        age = 0.0 if self._oldest is None else now - self._oldest
        return len(self) >= self.max_size or age >= self.max_age

    def flush_if_due(self, now: float) -> int:
        """Write the pending records if :meth:`due`; returns how many were written."""
        return self.flush() if self.due(now) else 0

    def flush(self) -> int:
        """Write every pending record in one transaction; returns how many."""
        if not len(self):
            return 0
        written = self.ledger._write(self._pending, "write a batch of records")
        self._pending = []
        self._oldest = None
        return written

    def discard(self) -> int:
        """Drop the pending records without writing them; returns how many."""
        dropped = len(self)
        self._pending = []
        self._oldest = None
        return dropped
