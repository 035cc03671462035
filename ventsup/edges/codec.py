"""Payloads <-> values: decode a point's incoming payload, encode opening commands.

Pure: no broker, no clock, no I/O. The MQTT edge hands each message's bytes to
:func:`decode` (or :func:`decode_reading`, which stamps the receipt time) and
holds the resulting :class:`~ventsup.core.inputs.Sample`; a payload that cannot
be read raises :class:`Rejected` and leaves the held value alone.

Decoding, in order
------------------
1. ``too_large``: more than ``point.max_payload`` bytes (checked first, before
   any decoding work).
2. ``not_utf8``: not valid UTF-8.
3. With ``point.json_path``: ``not_json`` if the payload is not JSON;
   ``missing_field`` if the dotted path (``data.temp``, list indices as
   integers: ``data.0.temp``) does not lead to a value; ``wrong_type`` if it
   leads to an object, array or null (or a JSON boolean for a numeric point).
   Without ``json_path`` the whole payload, stripped, is the value.
4. Numeric kinds: a JSON number, or a string holding a decimal number
   (``"21.5"``, ``"-3"``, ``"1e2"``); otherwise ``not_a_number``. NaN and
   infinities (also the strings ``"nan"``, ``"inf"``, ``"infinity"``) are
   ``not_finite``. The number is converted from the point's ``unit`` to SI
   with :func:`~ventsup.config.units.parse_quantity` (``degF`` -> °C, ``mph``
   -> m/s, ``%`` -> fraction for a position; humidity stays in %), then checked
   against ``point.plausible_range`` (inclusive): ``out_of_range``.
5. Binary kind: a true/false word (case-insensitive, surrounding white space
   ignored), the number 0 or 1, the string ``"0"`` or ``"1"``, or a JSON
   ``true``/``false``; anything else is ``unknown_word``. True words are
   checked before false words. A bare payload is always read as a word or
   number (``true`` is true only when it is one of the point's true words).

Exceptions: :class:`Rejected` (a ``ValueError``) with a ``reason`` from
:data:`REASONS` and a human ``detail``. :func:`encode_command` raises
``ValueError`` for a fraction it cannot express.
"""

from __future__ import annotations

import json
import math
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Literal, get_args

from ventsup.config.model import Point, PointKind
from ventsup.config.units import parse_quantity
from ventsup.core.inputs import Sample

__all__ = [
    "REASONS",
    "CommandFormat",
    "RejectCounts",
    "RejectReason",
    "Rejected",
    "Rejection",
    "decode",
    "decode_reading",
    "encode_command",
]

RejectReason = Literal[
    "too_large",
    "not_utf8",
    "not_json",
    "missing_field",
    "not_a_number",
    "not_finite",
    "out_of_range",
    "unknown_word",
    "wrong_type",
]
#: Every reason a payload can be rejected for, in the order the checks run.
REASONS: tuple[RejectReason, ...] = get_args(RejectReason)

CommandFormat = Literal["fraction", "percent", "words"]

# ASCII digits only: float() would also take "1_000" and other scripts' digits.
_NUMBER = re.compile(r"[-+]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][-+]?[0-9]+)?")
_INDEX = re.compile(r"[0-9]+")
_NON_FINITE = frozenset(
    sign + word for sign in ("", "+", "-") for word in ("nan", "inf", "infinity")
)
_SHOWN = 60  # characters of a bad payload quoted in a detail


class Rejected(ValueError):
    """A payload that cannot be read as a value of its point.

    ``reason`` is one of :data:`REASONS`; ``detail`` says what was found and
    what was expected, for logs.
    """

    def __init__(self, reason: RejectReason, detail: str) -> None:
        super().__init__(reason, detail)
        self.reason: RejectReason = reason
        self.detail = detail

    def __str__(self) -> str:
        return f"{self.reason}: {self.detail}"


def _show(value: object) -> str:
    text = repr(value)
    return text if len(text) <= _SHOWN else text[: _SHOWN - 3] + "..."


# --------------------------------------------------------------------------- decode


def decode(point: Point, payload: bytes) -> float | bool:
    """Decode one payload of ``point`` into its SI value (a bool for binary points).

    Raises
    ------
    Rejected
        With the first failed check's reason (see the module docstring).
    """
    if len(payload) > point.max_payload:
        raise Rejected(
            "too_large", f"{len(payload)} bytes, expected at most {point.max_payload} bytes"
        )
    try:
        text = payload.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise Rejected("not_utf8", f"invalid UTF-8 at byte {exc.start}") from None
    raw: object = _follow(text, point.json_path) if point.json_path else text.strip()
    if point.kind is PointKind.BINARY:
        return _binary(point, raw)
    return _number(point, raw)


def _follow(text: str, path: str) -> object:
    try:
        value: object = json.loads(text)
    except (ValueError, RecursionError) as exc:
        raise Rejected("not_json", f"not a JSON document ({type(exc).__name__})") from None
    walked: list[str] = []
    for step in path.split("."):
        if isinstance(value, dict):
            if step not in value:
                raise Rejected("missing_field", _missing(path, walked, step, "no such key"))
            value = value[step]
        elif isinstance(value, list):
            if _INDEX.fullmatch(step) is None or int(step) >= len(value):
                why = f"not an index of a list of {len(value)}"
                raise Rejected("missing_field", _missing(path, walked, step, why))
            value = value[int(step)]
        else:
            why = f"{_json_type(value)} has no fields"
            raise Rejected("missing_field", _missing(path, walked, step, why))
        walked.append(step)
    return value


def _missing(path: str, walked: list[str], step: str, why: str) -> str:
    where = ".".join(walked) or "the document"
    return f"json_path {path!r}: {step!r} in {where}: {why}"


def _json_type(value: object) -> str:
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "a boolean"
    if isinstance(value, dict):
        return "an object"
    if isinstance(value, list):
        return "an array"
    if isinstance(value, str):
        return "a string"
    return "a number"


def _number(point: Point, raw: object) -> float:
    if isinstance(raw, bool) or not isinstance(raw, int | float | str):
        raise Rejected("wrong_type", f"got {_json_type(raw)}, expected a number")
    if isinstance(raw, str):
        number = _parse_number(raw)
    else:
        try:
            number = float(raw)
        except OverflowError:  # a JSON integer beyond the float range
            raise Rejected("not_finite", "got an integer too large for a float") from None
    if not math.isfinite(number):
        raise Rejected("not_finite", f"got {number!r}, expected a finite number")
    value = _to_si(point, number)
    low, high = point.plausible_range
    if not low <= value <= high:
        raise Rejected("out_of_range", f"got {value!r} (SI), expected {low!r} to {high!r}")
    return value


def _parse_number(text: str) -> float:
    stripped = text.strip()
    if stripped.lower() in _NON_FINITE:
        raise Rejected("not_finite", f"got {_show(text)}, expected a finite number")
    if _NUMBER.fullmatch(stripped) is None:
        raise Rejected("not_a_number", f"got {_show(text)}, expected a number")
    return float(stripped)


def _to_si(point: Point, number: float) -> float:
    quantity = point.kind.quantity
    # Humidity stays in % (the only unit its points accept); no unit means SI already.
    if point.unit is None or quantity is None:
        return number
    return parse_quantity(f"{number!r} {point.unit}", quantity)


def _binary(point: Point, raw: object) -> bool:
    if isinstance(raw, bool):
        return raw
    if isinstance(raw, int | float):
        try:
            number = float(raw)
        except OverflowError:
            raise Rejected("unknown_word", "got a huge integer, expected 0 or 1") from None
        if not math.isfinite(number):
            raise Rejected("not_finite", f"got {number!r}, expected 0 or 1")
        if number in (0.0, 1.0):
            return number == 1.0
        raise Rejected("unknown_word", f"got {raw!r}, expected 0 or 1")
    if not isinstance(raw, str):
        raise Rejected("wrong_type", f"got {_json_type(raw)}, expected a word, 0 or 1")
    word = raw.strip().casefold()
    if word in (w.strip().casefold() for w in point.true_words):
        return True
    if word in (w.strip().casefold() for w in point.false_words):
        return False
    if word in ("0", "1"):
        return word == "1"
    expected = ", ".join((*point.true_words, *point.false_words, "0", "1"))
    raise Rejected("unknown_word", f"got {_show(raw)}, expected one of {expected}")


@dataclass(frozen=True)
class Rejection:
    """A rejected payload as a value: which point, why, and when it arrived [s]."""

    point: str
    reason: RejectReason
    detail: str
    t: float


def decode_reading(name: str, point: Point, payload: bytes, t: float) -> Sample | Rejection:
    """Decode a payload of point ``name`` received at ``t`` [s]: a Sample, or why not."""
    try:
        return Sample(name, decode(point, payload), t)
    except Rejected as exc:
        return Rejection(name, exc.reason, exc.detail, t)


@dataclass(frozen=True, eq=False)
class RejectCounts:
    """How many payloads were rejected, per (point, reason); immutable, compares by value.

    >>> counts = RejectCounts().add(Rejection("t1", "not_json", "", 0.0))
    >>> counts.count(point="t1"), counts.total
    (1, 1)
    """

    counts: Mapping[tuple[str, RejectReason], int] = field(default_factory=dict)

    def __post_init__(self) -> None:
        object.__setattr__(self, "counts", MappingProxyType(dict(self.counts)))

    def add(self, rejection: Rejection) -> RejectCounts:
        """A new RejectCounts with ``rejection`` counted."""
        key = (rejection.point, rejection.reason)
        return RejectCounts({**self.counts, key: self.counts.get(key, 0) + 1})

    def count(self, point: str | None = None, reason: RejectReason | None = None) -> int:
        """Rejections of ``point`` (any if None) for ``reason`` (any if None)."""
        return sum(
            n
            for (p, r), n in self.counts.items()
            if (point is None or p == point) and (reason is None or r == reason)
        )

    @property
    def total(self) -> int:
        """All rejections counted."""
        return sum(self.counts.values())

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, RejectCounts):
            return NotImplemented
        return dict(self.counts) == dict(other.counts)

    def __hash__(self) -> int:
        return hash(frozenset(self.counts.items()))

    def __repr__(self) -> str:
        return f"RejectCounts({dict(self.counts)!r})"


# --------------------------------------------------------------------------- encode


def encode_command(fraction: float, format: CommandFormat) -> bytes:
    """Encode an opening command [fraction 0-1] as the payload ``format`` asks for.

    - ``"fraction"``: up to three decimals, trailing zeros dropped
      (``0.35`` -> ``b"0.35"``, ``1.0`` -> ``b"1"``).
    - ``"percent"``: whole percent, halves rounded up (``0.35`` -> ``b"35"``).
    - ``"words"``: ``b"open"`` for 1, ``b"closed"`` for 0.

    Raises
    ------
    ValueError
        For a fraction outside 0-1 or not finite, a part-open fraction in
        ``"words"`` format, or an unknown format.
    """
    if isinstance(fraction, bool) or not math.isfinite(fraction) or not 0.0 <= fraction <= 1.0:
        raise ValueError(f"got opening fraction {fraction!r}, expected a number from 0 to 1")
    if format == "fraction":
        text = f"{fraction:.3f}".rstrip("0").rstrip(".")
        return text.encode("ascii")
    if format == "percent":
        return str(math.floor(fraction * 100.0 + 0.5)).encode("ascii")
    if format == "words":
        if fraction == 1.0:
            return b"open"
        if fraction == 0.0:
            return b"closed"
        raise ValueError(
            f"got opening fraction {fraction!r} for a 'words' command, expected 0 (closed) "
            "or 1 (open); use command_format 'fraction' or 'percent' for part-open positions"
        )
    raise ValueError(f"got command format {format!r}, expected 'fraction', 'percent' or 'words'")
