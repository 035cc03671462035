"""Read the simulator's YAML files with errors that say file, line, key and what was expected.

A :class:`FileReader` parses the text with the site loader's line-keeping YAML
reader (:func:`ventsup.config.source.parse_yaml`) and offers small typed
getters. A getter that finds a problem records it and returns ``None``, so that
one pass reports every problem; :meth:`FileReader.finish` raises them all at
once as the caller's error class.

Quantities are those of :mod:`ventsup.config.units` plus the few the building
needs (power, U-value, power density, volume, air changes, a vertical
gradient); a plain number means the SI unit.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Iterable
from typing import Any, NoReturn

from ventsup.config.errors import ConfigError, ConfigProblem
from ventsup.config.source import KeyPath, format_path, parse_yaml, show_value
from ventsup.config.units import QUANTITIES, UnitError, describe_quantity, parse_quantity

__all__ = ["EXTRA_QUANTITIES", "FileReader", "read_quantity"]

_NUMBER_UNIT = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(\S.*?)?\s*$")

#: quantity -> (what it looks like, {unit written in lower case without spaces: factor to SI})
EXTRA_QUANTITIES: dict[str, tuple[str, dict[str, float]]] = {
    "power": ("a power such as '12 kW' or '800 W'", {"w": 1.0, "kw": 1000.0}),
    "u_value": (
        "a U-value such as '0.25 W/m2K'",
        {"w/m2k": 1.0, "w/(m2k)": 1.0, "w/m2/k": 1.0, "w/m²k": 1.0, "w/(m²k)": 1.0},
    ),
    "power_density": ("a power per floor area such as '6 W/m2'", {"w/m2": 1.0, "w/m²": 1.0}),
    "volume": ("a volume such as '6300 m3'", {"m3": 1.0, "m³": 1.0}),
    "flow": (
        "an airflow such as '0.25 m3/s' or '250 L/s'",
        {"m3/s": 1.0, "m³/s": 1.0, "l/s": 0.001, "m3/h": 1.0 / 3600.0, "m³/h": 1.0 / 3600.0},
    ),
    "air_changes": (
        "air changes per hour such as '0.3 /h'",
        {"/h": 1.0, "1/h": 1.0, "ach": 1.0, "h-1": 1.0},
    ),
    "gradient": ("a vertical temperature gradient such as '1 K/m'", {"k/m": 1.0}),
    "number": ("a number", {}),
    "relative_humidity": ("a relative humidity such as '1 %'", {"%": 1.0, "%rh": 1.0}),
}


class FileReader:
    """One YAML file being read: the data, where each value is, and the problems so far."""

    def __init__(self, text: str, file: str) -> None:
        data, self.source, problems = parse_yaml(text, file)
        self.data: Any = data
        self.file = file
        self.problems: list[ConfigProblem] = list(problems)

    # ----------------------------------------------------------------- problems

    def report(self, path: KeyPath, message: str) -> None:
        """Record a problem at ``path``."""
        line = self.source.line_of(path)
        self.problems.append(ConfigProblem(self.file, line, format_path(path, self.data), message))

    def got(self, path: KeyPath, value: object, expected: str) -> None:
        """Record "got <value>, expected <expected>" at ``path``."""
        self.report(path, f"got {show_value(value)}, expected {expected}")

    def finish(self, error: Callable[[list[ConfigProblem]], ConfigError]) -> None:
        """Raise ``error(problems)`` if anything was recorded."""
        if self.problems:
            raise error(self.problems)

    def fail(self, error: Callable[[list[ConfigProblem]], ConfigError], message: str) -> NoReturn:
        """Raise at once with one problem about the whole file (plus any found before)."""
        self.problems.append(ConfigProblem(self.file, None, "", message))
        raise error(self.problems)

    # ----------------------------------------------------------------- getters

    def mapping(
        self,
        path: KeyPath,
        value: object,
        *,
        required: Iterable[str] = (),
        optional: Iterable[str] = (),
        any_keys: bool = False,
    ) -> dict[Any, Any] | None:
        """``value`` if it is a mapping whose keys are all known and whose required keys are there."""
        required, optional = tuple(required), tuple(optional)
        known = (*required, *optional)
        if not isinstance(value, dict):
            what = "a mapping" + (f" with the keys {_names(known)}" if known else "")
            self.got(path, value, what)
            return None
        if not any_keys:
            for key in value:
                if key not in known:
                    self.report(
                        (*path, key), f"unknown key {key!r}; expected one of {_names(known)}"
                    )
        for key in required:
            if key not in value:
                self.report(path, f"missing key {key!r}")
        return value

    def sequence(self, path: KeyPath, value: object, what: str) -> list[Any] | None:
        """``value`` if it is a list."""
        if not isinstance(value, list):
            self.got(path, value, f"a list of {what}")
            return None
        return value

    def text(self, path: KeyPath, value: object, what: str = "a text") -> str | None:
        """``value`` if it is a non-empty string."""
        if not isinstance(value, str) or not value.strip():
            self.got(path, value, what)
            return None
        return value

    def choice(self, path: KeyPath, value: object, choices: Iterable[str]) -> str | None:
        """``value`` if it is one of ``choices``."""
        names = tuple(choices)
        if not isinstance(value, str) or value not in names:
            self.got(path, value, f"one of {_names(names)}")
            return None
        return value

    def quantity(
        self,
        path: KeyPath,
        value: object,
        quantity: str,
        *,
        minimum: float | None = None,
        maximum: float | None = None,
        above: float | None = None,
    ) -> float | None:
        """``value`` read as ``quantity`` in SI, within the bounds given.

        ``minimum``/``maximum`` are inclusive, ``above`` exclusive.
        """
        expected = _expected(quantity)
        try:
            number = read_quantity(value, quantity)
        except UnitError as exc:
            self.report(path, f"got {show_value(value)}, {exc}")
            return None
        bounds = []
        if above is not None and not number > above:
            bounds.append(f"above {above:g}")
        if minimum is not None and number < minimum:
            bounds.append(f"at least {minimum:g}")
        if maximum is not None and number > maximum:
            bounds.append(f"at most {maximum:g}")
        if bounds:
            self.got(path, value, f"{expected}, {' and '.join(bounds)} (in SI)")
            return None
        return number


def read_quantity(value: object, quantity: str) -> float:
    """``value`` (a number or ``"<number> <unit>"``) as ``quantity`` in SI.

    Raises
    ------
    UnitError
        With a message starting "expected ...".
    """
    if quantity in QUANTITIES:
        return parse_quantity(value, quantity)
    expected, units = EXTRA_QUANTITIES[quantity]
    if isinstance(value, bool) or not isinstance(value, int | float | str):
        raise UnitError(f"expected {expected}")
    if isinstance(value, int | float):
        number, written = float(value), ""
    else:
        match = _NUMBER_UNIT.match(value)
        if match is None:
            raise UnitError(f"expected {expected}")
        number, written = float(match.group(1)), (match.group(2) or "").strip()
    if not math.isfinite(number):
        raise UnitError(f"expected {expected} (a finite number)")
    if not written:
        return number
    scale = units.get(written.lower().replace(" ", ""))
    if scale is None:
        names = ", ".join(sorted(units)) or "none (a plain number)"
        raise UnitError(f"expected {expected}; {written!r} is not one of {names}")
    return number * scale


def _expected(quantity: str) -> str:
    if quantity in QUANTITIES:
        return describe_quantity(quantity)
    return EXTRA_QUANTITIES[quantity][0]


def _names(names: Iterable[str]) -> str:
    return ", ".join(repr(name) for name in names)
