"""Quantities with units: what a site file may write, and what each becomes in SI.

Conversion factors are exact by definition:
- 1 ft = 0.3048 m and 1 mile = 1609.344 m (international yard and pound agreement, 1959);
- 1 knot = 1 international nautical mile (1852 m) per hour;
- °F to °C: t_C = (t_F - 32) × 5/9 and K to °C: t_C = T - 273.15 (definitions of the scales).
"""

from __future__ import annotations

import pytest

from ventsup.config.units import (
    QUANTITIES,
    UnitError,
    describe_quantity,
    format_quantity,
    parse_quantity,
    unit_names,
)

FT = 0.3048  # m, exact
MILE = 1609.344  # m, exact
NAUTICAL_MILE = 1852.0  # m, exact

# (written, quantity, value in SI, where the factor comes from)
ACCEPTED = [
    ("73 degF", "temperature", (73 - 32) * 5 / 9, "°F definition"),
    ("73 °F", "temperature", (73 - 32) * 5 / 9, "°F definition"),
    ("73F", "temperature", (73 - 32) * 5 / 9, "°F definition"),
    ("23 C", "temperature", 23.0, "°C is the SI display unit"),
    ("23 degC", "temperature", 23.0, "°C"),
    ("296 K", "temperature", 296 - 273.15, "kelvin definition"),
    (23, "temperature", 23.0, "a plain number is SI"),
    ("-5.5 C", "temperature", -5.5, "negative temperatures"),
    ("3.6 degF", "temperature_delta", 2.0, "a difference: 5/9, no offset"),
    ("2 K", "temperature_delta", 2.0, "kelvin"),
    ("5 m/s", "speed", 5.0, "SI"),
    ("11 mph", "speed", 11 * MILE / 3600, "1 mile = 1609.344 m"),
    ("18 km/h", "speed", 5.0, "1 km = 1000 m"),
    ("10 kn", "speed", 10 * NAUTICAL_MILE / 3600, "1 knot = 1852 m/h"),
    ("10 knots", "speed", 10 * NAUTICAL_MILE / 3600, "1 knot = 1852 m/h"),
    ("200 fpm", "speed", 200 * FT / 60, "1 ft = 0.3048 m"),
    ("15 min", "duration", 900.0, "1 min = 60 s"),
    ("2 h", "duration", 7200.0, "1 h = 3600 s"),
    ("30 s", "duration", 30.0, "SI"),
    ("1 d", "duration", 86400.0, "1 d = 86400 s"),
    ("4 m2", "area", 4.0, "SI"),
    ("4 m²", "area", 4.0, "SI"),
    ("40 ft2", "area", 40 * FT * FT, "1 ft = 0.3048 m"),
    ("12 ft", "length", 12 * FT, "1 ft = 0.3048 m"),
    ("800 ppm", "concentration", 800.0, "ppm is the SI display unit"),
    ("30 %", "fraction", 0.3, "1 % = 0.01"),
    (0.3, "fraction", 0.3, "a plain fraction"),
    ("225 deg", "angle", 225.0, "degrees"),
    (" 1e3 ppm ", "concentration", 1000.0, "exponent and spaces"),
]


@pytest.mark.parametrize(
    ("raw", "quantity", "si"),
    [pytest.param(raw, q, si, id=f"{raw}-{q}") for raw, q, si, _source in ACCEPTED],
)
def test_parse_quantity_converts_to_si(raw: object, quantity: str, si: float) -> None:
    # parse_quantity rounds to 1e-9; the exact factors leave nothing else to differ
    assert parse_quantity(raw, quantity) == pytest.approx(si, abs=1e-9)


REJECTED = [
    (
        "23 mph",
        "temperature",
        "expected a temperature such as '23 C', '73 degF' or '296 K'; "
        "'mph' is not one of C, degC, °C, K, F, degF, °F",
    ),
    ("warm", "temperature", "expected a temperature such as '23 C', '73 degF' or '296 K'"),
    (True, "temperature", "expected a temperature such as '23 C', '73 degF' or '296 K'"),
    (None, "duration", "expected a duration such as '30 s', '15 min' or '2 h'"),
    (
        "20 minutes",
        "duration",
        "expected a duration such as '30 s', '15 min' or '2 h'; "
        "'minutes' is not one of s, sec, min, h, hr, d",
    ),
    (
        "5 C",
        "speed",
        "expected a speed such as '5 m/s', '11 mph', '18 km/h' or '10 kn'; "
        "'C' is not one of m/s, km/h, kph, mph, kn, kt, knots, ft/min, fpm",
    ),
    (
        "1e999 C",
        "temperature",
        "expected a temperature such as '23 C', '73 degF' or '296 K' (a finite number)",
    ),
    (
        "4 sqm",
        "area",
        "expected an area such as '4 m2' or '40 ft2'; 'sqm' is not one of m2, "
        "m², cm2, ft2, ft², sqft",
    ),
]


@pytest.mark.parametrize(
    ("raw", "quantity", "message"),
    [pytest.param(raw, q, message, id=f"{raw}-{q}") for raw, q, message in REJECTED],
)
def test_parse_quantity_rejects_with_what_was_expected(
    raw: object, quantity: str, message: str
) -> None:
    with pytest.raises(UnitError) as caught:
        parse_quantity(raw, quantity)
    assert str(caught.value) == message


def test_unknown_quantity_is_a_programming_error() -> None:
    with pytest.raises(ValueError, match="unknown quantity 'heat'"):
        parse_quantity(1, "heat")


@pytest.mark.parametrize("quantity", QUANTITIES)
def test_every_listed_unit_parses(quantity: str) -> None:
    for name in unit_names(quantity).split(", "):
        parse_quantity(f"1 {name}", quantity)


@pytest.mark.parametrize(
    ("value", "quantity", "system", "text"),
    [
        (22.7777777, "temperature", "IP", "73.0 °F"),
        (24.0, "temperature", "SI", "24.0 °C"),
        (2.0, "temperature_delta", "IP", "3.6 °F"),
        (4.91744, "speed", "IP", "11.0 mph"),
        (4.0, "area", "IP", "43.1 ft²"),
        (0.3, "fraction", "IP", "30 %"),
        (1200, "duration", "SI", "20 min"),
        (150, "duration", "SI", "2 min 30 s"),
        (5400, "duration", "SI", "1 h 30 min"),
        (45, "duration", "SI", "45 s"),
        (225, "angle", "SI", "225°"),
        (None, "temperature", "SI", "unknown"),
    ],
)
def test_format_quantity(value: float | None, quantity: str, system: str, text: str) -> None:
    assert format_quantity(value, quantity, system) == text  # type: ignore[arg-type]


def test_describe_quantity() -> None:
    assert describe_quantity("area", adjective="positive") == (
        "a positive area such as '4 m2' or '40 ft2'"
    )
    assert describe_quantity("duration", bounds="of 0 or more") == (
        "a duration of 0 or more, such as '30 s', '15 min' or '2 h'"
    )
    assert describe_quantity("fraction", bounds="from 0 to 1") == (
        "a fraction from 0 to 1 or a percentage such as '30 %'"
    )
