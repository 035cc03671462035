"""Decoding point payloads and encoding opening commands, without a broker."""

from __future__ import annotations

import json
import math
from typing import Any

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ventsup.config.model import Point, PointKind, SiteConfig
from ventsup.core.inputs import Sample
from ventsup.edges.codec import (
    REASONS,
    CommandFormat,
    RejectCounts,
    Rejected,
    Rejection,
    decode,
    decode_reading,
    encode_command,
)

# Exact conversion definitions the expected values below come from.
MILE = 1609.344  # m, the international mile (1959 agreement)
HOUR = 3600.0  # s


def fahrenheit(value: float) -> float:
    """°F -> °C by definition: t[°C] = (t[°F] - 32) x 5/9."""
    return (value - 32.0) * 5.0 / 9.0


def make_site(points: dict[str, dict[str, Any]]) -> SiteConfig:
    """A minimal valid site holding ``points`` (plus the outdoor points a site needs)."""
    base: dict[str, dict[str, Any]] = {
        "t_out": {"topic": "site/t_out", "kind": "temperature"},
        "wind": {"topic": "site/wind", "kind": "wind_speed"},
        "rain": {"topic": "site/rain", "kind": "binary"},
        "t_in": {"topic": "site/t_in", "kind": "temperature"},
    }
    return SiteConfig.model_validate(
        {
            "site": {"name": "Test site", "time_zone": "UTC"},
            "points": {**base, **points},
            "outdoor": {"temperature": "t_out", "wind_speed": "wind", "rain": "rain"},
            "zones": {
                "hall": {
                    "rules": "default",
                    "temperature": "t_in",
                    "openings": {"w1": {"area": "1 m2", "facing": 180, "level": "low"}},
                }
            },
            "rules": {"default": {}},
        }
    )


def point(kind: str, **fields: Any) -> Point:
    """The point ``p`` of a site built with :func:`make_site`, from its config fields."""
    return make_site({"p": {"topic": "site/p", "kind": kind, **fields}}).points["p"]


def reason_of(p: Point, payload: bytes) -> str:
    with pytest.raises(Rejected) as caught:
        decode(p, payload)
    return caught.value.reason


# --------------------------------------------------------------------------- accepted


@pytest.mark.parametrize(
    ("kind", "fields", "payload", "expected"),
    [
        # plain numbers, SI already
        ("temperature", {}, b"21.5", 21.5),
        ("temperature", {}, b"  21.5\r\n", 21.5),
        ("temperature", {}, b"-3", -3.0),
        ("temperature", {}, b"+4.", 4.0),
        ("temperature", {}, b".5", 0.5),
        ("temperature", {}, b"2.15e1", 21.5),
        ("temperature", {}, b"70", 70.0),  # upper end of the default range is inclusive
        ("temperature", {}, b"-50", -50.0),  # and so is the lower end
        ("co2", {}, b"800", 800.0),
        ("wind_direction", {}, b"270", 270.0),
        ("humidity", {}, b"55.5", 55.5),
        ("position", {}, b"0.35", 0.35),
        # JSON fields, nested paths and list indices
        ("temperature", {"json_path": "temp"}, b'{"temp": 21.5}', 21.5),
        ("temperature", {"json_path": "temp"}, b'{"temp": 21}', 21.0),
        ("temperature", {"json_path": "temp"}, b'{"temp": "21.5"}', 21.5),
        ("temperature", {"json_path": "temp"}, b'{"temp": " 21.5 "}', 21.5),
        ("temperature", {"json_path": "data.air.temp"}, b'{"data": {"air": {"temp": 19}}}', 19.0),
        ("temperature", {"json_path": "data.0.temp"}, b'{"data": [{"temp": 18.5}, {}]}', 18.5),
        ("temperature", {"json_path": "data.1.temp"}, b'{"data": [{}, {"temp": 30}]}', 30.0),
        ("temperature", {"json_path": "2"}, b"[10, 11, 12]", 12.0),
        ("temperature", {"json_path": "data.0"}, b'{"data": {"0": 5}}', 5.0),  # key "0"
        ("temperature", {"json_path": "temp"}, '{"temp": 21.5, "n": "é"}'.encode(), 21.5),
        # unit conversions to SI
        ("temperature", {"unit": "degF"}, b"104", fahrenheit(104.0)),  # 40 °C
        ("temperature", {"unit": "degF"}, b"104", 40.0),
        ("temperature", {"unit": "degF"}, b"32", 0.0),
        ("temperature", {"unit": "degF"}, b"-40", -40.0),
        ("temperature", {"unit": "degF"}, b"50", 10.0),
        # 73 °F is 22.7777... °C; parse_quantity rounds every SI value to 1e-9.
        ("temperature", {"unit": "degF"}, b"73", round(fahrenheit(73.0), 9)),
        ("temperature", {"unit": "K"}, b"293.15", 20.0),
        ("dew_point", {"unit": "degF"}, b"50", 10.0),
        # 1 mph = 1609.344 m / 3600 s = 0.44704 m/s exactly
        ("wind_speed", {"unit": "mph"}, b"10", 10 * MILE / HOUR),
        ("wind_speed", {"unit": "mph"}, b"10", 4.4704),
        ("wind_speed", {"unit": "km/h"}, b"36", 10.0),
        ("wind_speed", {"unit": "kn"}, b"36", 18.52),  # 1 knot = 1852 m/h
        ("position", {"unit": "%"}, b"35", 0.35),
        ("position", {"unit": "%"}, b"100", 1.0),
        ("position", {"unit": "%"}, b"0", 0.0),
        ("position", {"unit": "%", "json_path": "pos"}, b'{"pos": 12.5}', 0.125),
        ("humidity", {"unit": "%"}, b"55.5", 55.5),  # relative humidity stays in %
        ("wind_direction", {"unit": "deg"}, b"359", 359.0),
        ("co2", {"unit": "ppm"}, b"1200", 1200.0),
        # a site range given with units, inclusive at both ends
        ("temperature", {"valid_range": ["50 degF", "86 degF"]}, b"10", 10.0),
        ("temperature", {"valid_range": ["50 degF", "86 degF"]}, b"30", 30.0),
    ],
)
def test_decode_numbers(kind: str, fields: dict[str, Any], payload: bytes, expected: float) -> None:
    value = decode(point(kind, **fields), payload)
    assert type(value) is float
    assert value == expected


def test_payload_exactly_at_max_payload_is_accepted() -> None:
    assert decode(point("temperature", max_payload=4), b"21.5") == 21.5


@pytest.mark.parametrize(
    ("fields", "payload", "expected"),
    [
        ({}, b"true", True),
        ({}, b"false", False),
        ({}, b"TRUE", True),
        ({}, b"  On \n", True),
        ({}, b"Off", False),
        ({}, b"wet", True),
        ({}, b"DRY", False),
        ({}, b"alarm", True),
        ({}, b"normal", False),
        ({}, b"1", True),
        ({}, b"0", False),
        ({}, b" 1 ", True),
        ({"json_path": "rain"}, b'{"rain": true}', True),
        ({"json_path": "rain"}, b'{"rain": false}', False),
        ({"json_path": "rain"}, b'{"rain": 1}', True),
        ({"json_path": "rain"}, b'{"rain": 0}', False),
        ({"json_path": "rain"}, b'{"rain": 1.0}', True),
        ({"json_path": "rain"}, b'{"rain": "1"}', True),
        ({"json_path": "rain"}, b'{"rain": "Yes"}', True),
        ({"json_path": "s.0"}, b'{"s": ["clear", "alarm"]}', False),
        # custom words replace the defaults, still case-insensitive
        ({"true_words": ["RAINING"], "false_words": ["Dry"]}, b"raining", True),
        ({"true_words": ["RAINING"], "false_words": ["Dry"]}, b"Raining", True),
        ({"true_words": ["RAINING"], "false_words": ["Dry"]}, b"DRY", False),
        ({"true_words": ["RAINING"], "false_words": ["Dry"]}, b"1", True),
        (
            {"true_words": ["RAINING"], "false_words": ["Dry"], "json_path": "r"},
            b'{"r": true}',
            True,
        ),
    ],
)
def test_decode_binary(fields: dict[str, Any], payload: bytes, expected: bool) -> None:
    value = decode(point("binary", **fields), payload)
    assert type(value) is bool
    assert value is expected


# --------------------------------------------------------------------------- rejected


REJECT_CASES: list[tuple[str, dict[str, Any], bytes, str]] = [
    # too_large: checked first, even before UTF-8
    ("temperature", {}, b"1" * 1025, "too_large"),
    ("temperature", {"max_payload": 4}, b"21.55", "too_large"),
    ("temperature", {"max_payload": 4}, b"\xff\xff\xff\xff\xff", "too_large"),
    ("binary", {"max_payload": 2}, b"true", "too_large"),
    # not_utf8
    ("temperature", {}, b"\xff21", "not_utf8"),
    ("temperature", {"json_path": "t"}, b'{"t": "\xe9"}', "not_utf8"),
    ("binary", {}, b"\xc3\x28", "not_utf8"),
    # not_json
    ("temperature", {"json_path": "t"}, b"{t: 21}", "not_json"),
    ("temperature", {"json_path": "t"}, b"", "not_json"),
    ("temperature", {"json_path": "t"}, b'{"t": 21', "not_json"),
    ("temperature", {"json_path": "t", "max_payload": 100_000}, b"[" * 50_000, "not_json"),
    ("binary", {"json_path": "r"}, b"true false", "not_json"),
    # missing_field
    ("temperature", {"json_path": "tmp"}, b'{"temp": 21}', "missing_field"),
    ("temperature", {"json_path": "data.temp"}, b'{"data": 21}', "missing_field"),
    ("temperature", {"json_path": "data.5.temp"}, b'{"data": [{"temp": 1}]}', "missing_field"),
    ("temperature", {"json_path": "data.x"}, b'{"data": [1, 2]}', "missing_field"),
    ("temperature", {"json_path": "data.-1"}, b'{"data": [1, 2]}', "missing_field"),
    ("temperature", {"json_path": "t"}, b"21.5", "missing_field"),
    ("temperature", {"json_path": "t"}, b'"21.5"', "missing_field"),
    ("binary", {"json_path": "a.b"}, b'{"a": null}', "missing_field"),
    # not_a_number
    ("temperature", {}, b"warm", "not_a_number"),
    ("temperature", {}, b"", "not_a_number"),
    ("temperature", {}, b"21,5", "not_a_number"),
    ("temperature", {}, b"21.5 C", "not_a_number"),
    ("temperature", {}, b"1_000", "not_a_number"),
    ("temperature", {}, "٢١".encode(), "not_a_number"),  # digits of another script
    ("temperature", {}, b'{"temp": 21}', "not_a_number"),  # JSON without a json_path
    ("temperature", {"json_path": "t"}, b'{"t": "warm"}', "not_a_number"),
    ("position", {"unit": "%"}, b"35%", "not_a_number"),
    # not_finite
    ("temperature", {}, b"nan", "not_finite"),
    ("temperature", {}, b"NaN", "not_finite"),
    ("temperature", {}, b"inf", "not_finite"),
    ("temperature", {}, b"-Infinity", "not_finite"),
    ("temperature", {}, b"1e999", "not_finite"),
    ("temperature", {"json_path": "t"}, b'{"t": NaN}', "not_finite"),
    ("temperature", {"json_path": "t"}, b'{"t": -Infinity}', "not_finite"),
    ("temperature", {"json_path": "t"}, b'{"t": 1e400}', "not_finite"),
    ("temperature", {"json_path": "t"}, b'{"t": "inf"}', "not_finite"),
    ("temperature", {"json_path": "t"}, b'{"t": 1' + b"0" * 400 + b"}", "not_finite"),
    ("binary", {"json_path": "r"}, b'{"r": NaN}', "not_finite"),
    # out_of_range (SI, after conversion)
    ("temperature", {}, b"70.001", "out_of_range"),
    ("temperature", {}, b"-50.5", "out_of_range"),
    ("temperature", {"unit": "degF"}, b"160", "out_of_range"),  # 71.1 °C
    ("humidity", {}, b"100.5", "out_of_range"),
    ("position", {"unit": "%"}, b"101", "out_of_range"),
    ("position", {}, b"35", "out_of_range"),  # a percentage sent to a fraction point
    ("wind_speed", {}, b"-1", "out_of_range"),
    ("wind_direction", {}, b"361", "out_of_range"),
    ("co2", {}, b"100", "out_of_range"),
    ("temperature", {"valid_range": ["50 degF", "86 degF"]}, b"9.9", "out_of_range"),
    ("temperature", {"valid_range": [10, 30]}, b"30.1", "out_of_range"),
    # unknown_word
    ("binary", {}, b"maybe", "unknown_word"),
    ("binary", {}, b"", "unknown_word"),
    ("binary", {}, b"2", "unknown_word"),
    ("binary", {}, b"1.0", "unknown_word"),
    ("binary", {"json_path": "r"}, b'{"r": 2}', "unknown_word"),
    ("binary", {"json_path": "r"}, b'{"r": 0.5}', "unknown_word"),
    ("binary", {"json_path": "r"}, b'{"r": "maybe"}', "unknown_word"),
    ("binary", {"true_words": ["raining"], "false_words": ["dry"]}, b"true", "unknown_word"),
    # wrong_type
    ("temperature", {"json_path": "t"}, b'{"t": {"v": 21}}', "wrong_type"),
    ("temperature", {"json_path": "t"}, b'{"t": [21]}', "wrong_type"),
    ("temperature", {"json_path": "t"}, b'{"t": null}', "wrong_type"),
    ("temperature", {"json_path": "t"}, b'{"t": true}', "wrong_type"),
    ("binary", {"json_path": "r"}, b'{"r": null}', "wrong_type"),
    ("binary", {"json_path": "r"}, b'{"r": {"on": true}}', "wrong_type"),
]


@pytest.mark.parametrize(("kind", "fields", "payload", "reason"), REJECT_CASES)
def test_decode_rejects(kind: str, fields: dict[str, Any], payload: bytes, reason: str) -> None:
    assert reason_of(point(kind, **fields), payload) == reason


def test_every_reason_is_covered_by_the_table() -> None:
    assert {reason for *_, reason in REJECT_CASES} == set(REASONS)


def test_rejected_carries_reason_and_detail() -> None:
    with pytest.raises(Rejected) as caught:
        decode(point("temperature", json_path="data.temp"), b'{"data": {"tmp": 1}}')
    error = caught.value
    assert error.reason == "missing_field"
    assert "data.temp" in error.detail and "'temp'" in error.detail
    assert str(error).startswith("missing_field: ")
    assert isinstance(error, ValueError)


def test_rejected_detail_quotes_a_long_payload_shortened() -> None:
    with pytest.raises(Rejected) as caught:
        decode(point("temperature", max_payload=10_000), b"x" * 5000)
    assert len(caught.value.detail) < 200


# --------------------------------------------------------------------------- helpers


def test_decode_reading_returns_a_sample_or_a_rejection() -> None:
    p = point("temperature", unit="degF")
    assert decode_reading("t1", p, b"50", 1000.0) == Sample("t1", 10.0, 1000.0)
    rejection = decode_reading("t1", p, b"hot", 1001.0)
    assert isinstance(rejection, Rejection)
    assert (rejection.point, rejection.reason, rejection.t) == ("t1", "not_a_number", 1001.0)


def test_reject_counts_add_and_compare_by_value() -> None:
    a = Rejection("t1", "not_json", "", 1.0)
    b = Rejection("t1", "out_of_range", "", 2.0)
    c = Rejection("rain", "unknown_word", "", 3.0)
    empty = RejectCounts()
    counts = empty.add(a).add(b).add(a).add(c)
    assert empty.total == 0  # unchanged: add returns a new value
    assert counts.total == 4
    assert counts.count(point="t1") == 3
    assert counts.count(reason="not_json") == 2
    assert counts.count(point="t1", reason="out_of_range") == 1
    assert counts.count(point="wind") == 0
    assert counts == empty.add(c).add(a).add(a).add(b)  # order of arrival does not matter
    assert hash(counts) == hash(empty.add(c).add(a).add(a).add(b))
    assert counts != empty


# --------------------------------------------------------------------------- encode


@pytest.mark.parametrize(
    ("fraction", "fmt", "payload"),
    [
        (0.35, "fraction", b"0.35"),
        (0.0, "fraction", b"0"),
        (1.0, "fraction", b"1"),
        (0.125, "fraction", b"0.125"),
        (0.5, "fraction", b"0.5"),
        (0.0004, "fraction", b"0"),
        (0.35, "percent", b"35"),
        (0.0, "percent", b"0"),
        (1.0, "percent", b"100"),
        (0.125, "percent", b"13"),  # halves round up
        (0.999, "percent", b"100"),
        (1, "percent", b"100"),
        (0.0, "words", b"closed"),
        (1.0, "words", b"open"),
    ],
)
def test_encode_command(fraction: float, fmt: CommandFormat, payload: bytes) -> None:
    assert encode_command(fraction, fmt) == payload


@pytest.mark.parametrize(
    ("fraction", "fmt"),
    [
        (0.35, "words"),  # words can only say open or closed
        (0.999, "words"),
        (-0.1, "fraction"),
        (1.01, "percent"),
        (math.nan, "fraction"),
        (math.inf, "percent"),
        (True, "fraction"),
        (0.5, "hex"),
    ],
)
def test_encode_command_refuses(fraction: float, fmt: CommandFormat) -> None:
    with pytest.raises(ValueError, match="expected"):
        encode_command(fraction, fmt)


# --------------------------------------------------------------------------- properties

KINDS = list(PointKind)
json_values = st.recursive(
    st.none() | st.booleans() | st.integers() | st.floats() | st.text(max_size=20),
    lambda children: (
        st.lists(children, max_size=4) | st.dictionaries(st.text(max_size=5), children, max_size=4)
    ),
    max_leaves=12,
)


def _check_value(p: Point, value: float | bool) -> None:
    if p.kind is PointKind.BINARY:
        assert type(value) is bool
    else:
        assert type(value) is float
        low, high = p.plausible_range
        assert math.isfinite(value) and low <= value <= high


@given(
    kind=st.sampled_from(KINDS),
    path=st.sampled_from([None, "t", "data.0.t", "0"]),
    payload=st.binary(max_size=200)
    | st.text(max_size=40).map(str.encode)
    | st.sampled_from([b"1", b"0", b"true", b"NaN", b"1e999", b"-0", b"  7 "]),
)
def test_decode_raises_only_rejected_for_any_bytes(
    kind: PointKind, path: str | None, payload: bytes
) -> None:
    p = point(kind.value, json_path=path, max_payload=100)
    try:
        value = decode(p, payload)
    except Rejected as exc:
        assert exc.reason in REASONS
    else:
        _check_value(p, value)


@given(
    kind=st.sampled_from(KINDS),
    path=st.sampled_from(["t", "data.0.t", "0", "data.x"]),
    document=json_values,
    wrap=st.booleans(),
)
def test_decode_raises_only_rejected_for_any_json(
    kind: PointKind, path: str, document: object, wrap: bool
) -> None:
    p = point(kind.value, json_path=path, max_payload=10_000)
    if wrap:
        document = {"t": document, "data": [{"t": document}]}
    payload = json.dumps(document).encode()
    try:
        value = decode(p, payload)
    except Rejected as exc:
        assert exc.reason in REASONS
    else:
        _check_value(p, value)


@given(fraction=st.floats(min_value=0.0, max_value=1.0))
def test_encoded_commands_read_back_as_the_fraction(fraction: float) -> None:
    as_fraction = decode(point("position"), encode_command(fraction, "fraction"))
    as_percent = decode(point("position", unit="%"), encode_command(fraction, "percent"))
    assert abs(as_fraction - fraction) <= 0.0005 + 1e-12
    assert abs(as_percent - fraction) <= 0.005 + 1e-12
