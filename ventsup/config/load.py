"""Load a site file: YAML text -> a validated, frozen :class:`SiteConfig`, or every problem.

Three passes, and every problem they find is reported at once, sorted by line:

1. YAML (:mod:`ventsup.config.source`): syntax, duplicate keys, and the line of
   every key and value.
2. The model (:class:`SiteConfig`): types, units, bounds, unknown keys. Each
   pydantic error becomes a :class:`ConfigProblem` with the key path, the value
   as it was written and what was expected, in words.
3. Cross-checks (:func:`ventsup.config.checks.cross_check`): what needs the
   whole site (referenced points exist and have the right kind, thresholds in
   order), run when the model accepted the file.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

from pydantic import ValidationError
from pydantic_core import ErrorDetails

from ventsup.config import _schema
from ventsup.config.checks import cross_check
from ventsup.config.errors import ConfigError, ConfigProblem
from ventsup.config.model import SiteConfig
from ventsup.config.source import KeyPath, SourceMap, format_path, parse_yaml, show_value, step

__all__ = ["load_config", "load_config_text"]

_TOP_KEYS = "a mapping with the keys 'site', 'points', 'outdoor', 'zones' and 'rules'"


def load_config(path: str | os.PathLike[str]) -> SiteConfig:
    """Read and validate the site file at ``path``.

    Problems name the file as ``path`` was given.

    Raises
    ------
    ConfigError
        With every problem found (a missing or unreadable file is one too).
    """
    file = os.fspath(path)
    try:
        text = Path(file).read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ConfigError([ConfigProblem(file, None, "", "no such file; check the path")]) from None
    except IsADirectoryError:
        problem = ConfigProblem(file, None, "", "is a directory, expected a YAML site file")
        raise ConfigError([problem]) from None
    except UnicodeDecodeError as exc:
        message = (
            f"not UTF-8 text (byte {exc.object[exc.start]:#04x} at offset {exc.start}); "
            "save the file as UTF-8"
        )
        raise ConfigError([ConfigProblem(file, None, "", message)]) from None
    except OSError as exc:
        message = f"cannot read the file: {(exc.strerror or str(exc)).lower()}"
        raise ConfigError([ConfigProblem(file, None, "", message)]) from None
    return load_config_text(text, file)


def load_config_text(text: str, filename: str = "<string>") -> SiteConfig:
    """Validate a site configuration given as YAML text; ``filename`` is used in messages.

    Raises
    ------
    ConfigError
        With every problem found, sorted by line.
    """
    data, source, problems = parse_yaml(text, filename)
    if data is None and problems:  # not YAML at all
        raise ConfigError(problems)
    if data is None:
        raise ConfigError(
            [ConfigProblem(filename, None, "", f"the file is empty, expected {_TOP_KEYS}")]
        )
    if not isinstance(data, dict):
        message = f"got {_kind_of(data)} at the top level, expected {_TOP_KEYS}"
        raise ConfigError([ConfigProblem(filename, source.line_of(()), "", message)])
    try:
        config = SiteConfig.model_validate(data)
    except ValidationError as exc:
        problems.extend(translate(exc, data, source))
        raise ConfigError(_unique(problems)) from None
    problems.extend(cross_check(config, source))
    if problems:
        raise ConfigError(_unique(problems))
    return config


def _unique(problems: list[ConfigProblem]) -> list[ConfigProblem]:
    return list(dict.fromkeys(problems))


def _kind_of(value: object) -> str:
    if isinstance(value, list):
        return "a list"
    if isinstance(value, str):
        return f"the text {show_value(value)}"
    return f"the value {show_value(value)}"


def translate(exc: ValidationError, data: dict[str, Any], source: SourceMap) -> list[ConfigProblem]:
    """Turn each pydantic error into a :class:`ConfigProblem` with line, path, value and fix."""
    return [_problem(error, data, source) for error in exc.errors(include_url=False)]


def _lookup(data: object, path: KeyPath) -> tuple[int, object]:
    """How many leading keys of ``path`` exist in ``data``, and the value at the deepest."""
    node = data
    for depth, key in enumerate(path):
        found, child = step(node, key)
        if not found:
            return depth, node
        node = child
    return len(path), node


def _problem(error: ErrorDetails, data: dict[str, Any], source: SourceMap) -> ConfigProblem:
    kind = error["type"]
    resolved = _schema.resolve(error["loc"])
    path = resolved.path
    file = source.file

    if kind == "missing":
        message = f"missing, expected {_schema.expected(resolved)}"
        return ConfigProblem(file, source.line_of(path[:-1]), format_path(path, data), message)

    if kind in ("extra_forbidden", "invalid_key"):
        if kind == "invalid_key":  # a key that is not text (a number, null, ...)
            path = resolved.path = (*path[:-1], error["input"])
        message = _unknown_key(resolved)
        return ConfigProblem(file, source.key_line(path), format_path(path, data), message)

    # A value the model reshaped (a point name for a list of sensors, a period for a
    # list of periods) is reported where it was written, as it was written.
    depth, written = _lookup(data, path)
    shown = path[:depth]
    if resolved.key:
        got = f"got the name {show_value(error['input'])}"
        line = source.key_line(path)
    else:
        got = f"got {show_value(written if depth else error['input'])}"
        line = source.line_of(shown)

    if resolved.union:
        message = f"{got}, expected {_schema.expected(resolved)}"
    elif kind in ("value_error", "assertion_error"):
        context = error.get("ctx") or {}
        text = str(context.get("error", error["msg"]))
        message = f"{got}, {text}" if text.startswith("expected") else f"{got}: {text}"
    elif kind in ("too_short",):
        message = f"{got}, expected {_schema.at_least_one(resolved)}"
    else:
        message = f"{got}, expected {_schema.expected(resolved)}"
        if kind in ("literal_error", "enum") and isinstance(error["input"], str):
            choices = _schema.literal_choices(resolved)
            close = _schema.did_you_mean(error["input"], choices)
            if close is not None:
                message += f"; did you mean {close!r}?"
    return ConfigProblem(file, line, format_path(shown, data), message)


def _unknown_key(resolved: _schema.Resolved) -> str:
    key = resolved.path[-1]
    message = f"unknown key {show_value(key)}"
    if resolved.parent is not None and (resolved.parent, key) in _schema.SECRET_KEYS:
        return f"{message}: {_schema.SECRET_KEYS[(resolved.parent, key)]}"
    if isinstance(key, bool):
        message += " (YAML reads an unquoted yes, no, on or off as true or false)"
    parent = resolved.parent
    if parent is None:
        return message
    fields = list(parent.model_fields)
    close = _schema.did_you_mean(str(key), fields)
    if close is not None:
        return f"{message}; did you mean {close!r}?"
    homes = _schema.sections_with(parent, str(key))
    if homes:
        where = " or ".join(repr(home) for home in homes)
        return f"{message} here; it belongs under {where}"
    return f"{message}; expected one of {', '.join(fields)}"
