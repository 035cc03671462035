"""Quantities with units: parse ``"73 degF"`` into SI, format SI for display.

Every threshold in a site file may carry a unit. Internally ventsup keeps one
unit per quantity (the nomenclature below); a plain number means that unit.

Nomenclature
------------
=====================  =========  ==============================================
quantity               SI unit    also accepted
=====================  =========  ==============================================
temperature            °C         C, degC, °C, K, F, degF, °F
temperature_delta      K          K, C, degC, F, degF (a difference, no offset)
speed                  m/s        km/h, kph, mph, kn, kt, knots, ft/min, fpm
duration               s          s, sec, min, h, hr, d
area                   m²         m2, m², cm2, ft2, ft², sqft
length                 m          m, cm, mm, ft, in
concentration          ppm        ppm
fraction               0-1        %, (0..1 plain)
angle                  deg        deg, °
=====================  =========  ==============================================

Conversions use exact factors (1 ft = 0.3048 m, 1 mile = 1609.344 m, 1 knot =
1852 m/h) and results are rounded to 1e-9 so that a rule set written in IP
units and its SI twin compare equal.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable
from typing import Literal

from ventsup.config.errors import VentsupError

__all__ = [
    "QUANTITIES",
    "UnitError",
    "UnitSystem",
    "describe_quantity",
    "format_quantity",
    "parse_quantity",
    "to_display",
    "unit_names",
]

UnitSystem = Literal["SI", "IP"]


class UnitError(VentsupError, ValueError):
    """A value could not be read as the expected quantity; the message says what was expected."""


_FT = 0.3048
_Affine = tuple[float, float]  # SI = value * scale + offset


def _temp_f(value: float) -> float:
    return (value - 32.0) * 5.0 / 9.0


_TEMPERATURE: dict[str, Callable[[float], float]] = {
    "c": lambda v: v,
    "degc": lambda v: v,
    "°c": lambda v: v,
    "k": lambda v: v - 273.15,
    "f": _temp_f,
    "degf": _temp_f,
    "°f": _temp_f,
}
_SCALES: dict[str, dict[str, float]] = {
    "temperature_delta": {
        "k": 1.0,
        "c": 1.0,
        "degc": 1.0,
        "°c": 1.0,
        "f": 5.0 / 9.0,
        "degf": 5.0 / 9.0,
        "°f": 5.0 / 9.0,
    },
    "speed": {
        "m/s": 1.0,
        "km/h": 1000.0 / 3600.0,
        "kph": 1000.0 / 3600.0,
        "mph": 1609.344 / 3600.0,
        "kn": 1852.0 / 3600.0,
        "kt": 1852.0 / 3600.0,
        "knots": 1852.0 / 3600.0,
        "ft/min": _FT / 60.0,
        "fpm": _FT / 60.0,
    },
    "duration": {
        "s": 1.0,
        "sec": 1.0,
        "min": 60.0,
        "h": 3600.0,
        "hr": 3600.0,
        "d": 86400.0,
    },
    "area": {
        "m2": 1.0,
        "m²": 1.0,
        "cm2": 1e-4,
        "ft2": _FT * _FT,
        "ft²": _FT * _FT,
        "sqft": _FT * _FT,
    },
    "length": {"m": 1.0, "cm": 0.01, "mm": 0.001, "ft": _FT, "in": _FT / 12.0},
    "concentration": {"ppm": 1.0},
    "fraction": {"%": 0.01},
    "angle": {"deg": 1.0, "°": 1.0},
}

QUANTITIES: tuple[str, ...] = tuple(sorted(["temperature", *_SCALES]))

# noun and examples per quantity, for "expected ..." messages
_NOUNS: dict[str, tuple[str, str]] = {
    "temperature": ("temperature", "'23 C', '73 degF' or '296 K'"),
    "temperature_delta": ("temperature difference", "'2 K' or '3.6 degF'"),
    "speed": ("speed", "'5 m/s', '11 mph', '18 km/h' or '10 kn'"),
    "duration": ("duration", "'30 s', '15 min' or '2 h'"),
    "area": ("area", "'4 m2' or '40 ft2'"),
    "length": ("length", "'3.5 m' or '12 ft'"),
    "concentration": ("concentration", "'800 ppm'"),
    "angle": ("angle in degrees", "'225 deg'"),
}
# unit names as people write them (matching is case-insensitive)
_UNIT_NAMES: dict[str, str] = {
    "temperature": "C, degC, °C, K, F, degF, °F",
    "temperature_delta": "K, C, degC, F, degF",
    "speed": "m/s, km/h, kph, mph, kn, kt, knots, ft/min, fpm",
    "duration": "s, sec, min, h, hr, d",
    "area": "m2, m², cm2, ft2, ft², sqft",
    "length": "m, cm, mm, ft, in",
    "concentration": "ppm",
    "fraction": "%",
    "angle": "deg, °",
}


def unit_names(quantity: str) -> str:
    """The units accepted for ``quantity``, as people write them: ``"m/s, km/h, ..."``."""
    return _UNIT_NAMES[quantity]


_FRACTION = "a fraction from 0 to 1 or a percentage such as '30 %'"


def describe_quantity(quantity: str, adjective: str = "", bounds: str = "") -> str:
    """Say in words what a value of ``quantity`` looks like, for "expected ..." messages.

    ``adjective`` goes before the noun, ``bounds`` after it. A fraction always
    reads "a fraction from 0 to 1 or a percentage such as '30 %'" (its bounds
    are part of the phrase).

    Examples
    --------
    >>> describe_quantity("area", adjective="positive")
    "a positive area such as '4 m2' or '40 ft2'"
    >>> describe_quantity("angle", bounds="from 0 to 360")
    "an angle in degrees from 0 to 360, such as '225 deg'"
    """
    if quantity == "fraction":
        return _FRACTION
    noun, examples = _NOUNS[quantity]
    words = f"{adjective} {noun}" if adjective else noun
    article = "an" if words[0] in "aeiou" else "a"
    if bounds:
        return f"{article} {words} {bounds}, such as {examples}"
    return f"{article} {words} such as {examples}"


_EXAMPLES = {quantity: describe_quantity(quantity) for quantity in QUANTITIES}

_NUMBER_UNIT = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(\S.*?)?\s*$")


def _clean(value: float) -> float:
    return round(value, 9) + 0.0  # + 0.0 turns -0.0 into 0.0


def parse_quantity(raw: object, quantity: str) -> float:
    """Read ``raw`` (a number or ``"<number> <unit>"``) as ``quantity`` in SI.

    Parameters
    ----------
    raw : int, float or str
        ``23``, ``"23 C"``, ``"73 degF"``. A plain number is taken in the SI
        unit of the quantity (see the module nomenclature).
    quantity : str
        One of :data:`QUANTITIES`.

    Returns
    -------
    float
        The value in the quantity's SI unit, rounded to 1e-9.

    Raises
    ------
    UnitError
        With a message starting "expected ..." that names accepted forms.

    Examples
    --------
    >>> parse_quantity("73 degF", "temperature")
    22.777777778
    >>> parse_quantity("11 mph", "speed")
    4.91744
    """
    if quantity not in QUANTITIES:
        raise ValueError(f"unknown quantity {quantity!r}; expected one of {', '.join(QUANTITIES)}")
    expected = _EXAMPLES[quantity]
    if isinstance(raw, bool) or not isinstance(raw, int | float | str):
        raise UnitError(f"expected {expected}")
    if isinstance(raw, int | float):
        number, written = float(raw), ""
    else:
        match = _NUMBER_UNIT.match(raw)
        if match is None:
            raise UnitError(f"expected {expected}")
        number, written = float(match.group(1)), (match.group(2) or "").strip()
    unit = written.lower().replace(" ", "")
    if not math.isfinite(number):
        raise UnitError(f"expected {expected} (a finite number)")
    if not unit:
        return _clean(number)
    wrong_unit = f"expected {expected}; {written!r} is not one of {unit_names(quantity)}"
    if quantity == "temperature":
        convert = _TEMPERATURE.get(unit)
        if convert is None:
            raise UnitError(wrong_unit)
        return _clean(convert(number))
    scale = _SCALES[quantity].get(unit)
    if scale is None:
        raise UnitError(wrong_unit)
    return _clean(number * scale)


# Display units per system: (unit label, SI -> display)
_DISPLAY: dict[str, dict[str, tuple[str, Callable[[float], float]]]] = {
    "SI": {
        "temperature": ("°C", lambda v: v),
        "temperature_delta": ("K", lambda v: v),
        "speed": ("m/s", lambda v: v),
        "area": ("m²", lambda v: v),
        "length": ("m", lambda v: v),
    },
    "IP": {
        "temperature": ("°F", lambda v: v * 9.0 / 5.0 + 32.0),
        "temperature_delta": ("°F", lambda v: v * 9.0 / 5.0),
        "speed": ("mph", lambda v: v * 3600.0 / 1609.344),
        "area": ("ft²", lambda v: v / (_FT * _FT)),
        "length": ("ft", lambda v: v / _FT),
    },
}


def to_display(value: float, quantity: str, system: UnitSystem) -> tuple[float, str]:
    """Convert an SI value to the site's display system; return (value, unit label)."""
    label, convert = _DISPLAY[system].get(quantity, ("", lambda v: v))
    if not label:
        label = {"concentration": "ppm", "fraction": "", "angle": "°", "duration": "s"}.get(
            quantity, ""
        )
    return convert(value), label


def format_quantity(value: float | None, quantity: str, system: UnitSystem = "SI") -> str:
    """Format an SI value for people, in the site's display units.

    Durations read as ``"20 min"`` or ``"1 h 30 min"``, fractions as percent.

    Examples
    --------
    >>> format_quantity(22.7777777, "temperature", "IP")
    '73.0 °F'
    >>> format_quantity(1200, "duration")
    '20 min'
    """
    if value is None:
        return "unknown"
    if quantity == "duration":
        return _format_duration(value)
    if quantity == "fraction":
        return f"{value * 100:.0f} %"
    shown, label = to_display(value, quantity, system)
    digits = 0 if quantity in ("concentration", "angle") else 1
    text = f"{shown:.{digits}f}"
    return f"{text} {label}" if label and label != "°" else f"{text}{label}"


def _format_duration(seconds: float) -> str:
    seconds = round(seconds)
    if seconds < 120 and seconds % 60:
        return f"{seconds} s"
    minutes, leftover = divmod(seconds, 60)
    if minutes < 60:
        text = f"{minutes} min"
    else:
        hours, rest = divmod(minutes, 60)
        text = f"{hours} h {rest} min" if rest else f"{hours} h"
    return f"{text} {leftover} s" if leftover else text
