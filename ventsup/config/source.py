"""Read YAML text, remembering the line of every key and value.

:func:`parse_yaml` returns the plain data (dicts, lists, scalars), a
:class:`SourceMap` from key paths to lines, and the problems found on the way
(duplicate keys, syntax errors). Key paths are tuples of mapping keys and list
indices: ``("zones", "atrium", "openings", "roof_north", "area")``,
``("rules", "standard", "schedule", "occupied", 0)``.

The line of a value is where the value starts, except for a block mapping or
block list (one entry per line below its key), whose line is its key's: that
is the line a person looks at for "the value of ``openings``".
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import yaml

from ventsup.config.errors import ConfigProblem

__all__ = ["KeyPath", "LineLoader", "SourceMap", "format_path", "parse_yaml", "show_value", "step"]

KeyPath = tuple[Any, ...]

_MERGE_TAG = "tag:yaml.org,2002:merge"
# Aliases can make a small file expand enormously; no site needs this many values.
MAX_VALUES = 200_000


class _TooLarge(Exception):
    pass


_KEY_WORDS: dict[object, str] = {None: "null", True: "true", False: "false"}


def format_path(path: KeyPath, data: object = None) -> str:
    """Dotted key path for people: ``zones.atrium.openings.roof_north.area``, lists as ``[0]``.

    Mapping keys are shown as they are. With ``data`` (the parsed document),
    an integer is shown as a mapping key or a list index depending on what the
    document holds at that place; without it, integers are list indices.
    """
    text = ""
    node: object = data
    for key in path:
        in_list = isinstance(node, list) if data is not None else isinstance(key, int)
        if in_list and isinstance(key, int) and not isinstance(key, bool):
            text += f"[{key}]"
        else:
            name = _KEY_WORDS.get(key, str(key)) if key is None or isinstance(key, bool) else key
            text += f".{name}" if text else str(name)
        node = step(node, key)[1]
    return text


def step(node: object, key: object) -> tuple[bool, Any]:
    """(True, node[key]) if ``node`` is a mapping with ``key`` or a list with that index."""
    if isinstance(node, dict) and key in node:
        return True, node[key]
    if isinstance(node, list) and isinstance(key, int) and 0 <= key < len(node):
        return True, node[key]
    return False, None


@dataclass(frozen=True)
class SourceMap:
    """Where each key path of a site file is: its file name and a line per path.

    ``lines[path]`` is ``(line of the key, line of the value)``, both 1-based;
    for a list item both are the item's line.
    """

    file: str
    lines: Mapping[KeyPath, tuple[int, int]] = field(default_factory=dict)
    data: Any = field(default=None, compare=False, repr=False)

    def written(self, path: KeyPath) -> tuple[bool, Any]:
        """(True, value as written) if the file gives ``path``, else (False, None)."""
        node = self.data
        for key in path:
            found, node = step(node, key)
            if not found:
                return False, None
        return True, node

    def __contains__(self, path: object) -> bool:
        return path in self.lines

    def line_of(self, path: KeyPath) -> int | None:
        """The line of the value at ``path``, else of the nearest parent that is in the file."""
        for end in range(len(path), -1, -1):
            found = self.lines.get(path[:end])
            if found is not None:
                return found[1]
        return None

    def key_line(self, path: KeyPath) -> int | None:
        """The line of the key at ``path``, else of the nearest parent's value."""
        found = self.lines.get(path)
        return found[0] if found is not None else self.line_of(path[:-1])


class LineLoader(yaml.SafeLoader):
    """A SafeLoader that records the line of every key and value and rejects duplicate keys.

    Use :meth:`load_with_lines` instead of ``get_single_data``.
    """

    def load_with_lines(self, file: str) -> tuple[Any, SourceMap, list[ConfigProblem]]:
        """Compose the document, record lines and duplicates, then construct the data.

        Raises ``yaml.YAMLError`` for text that is not YAML.
        """
        lines: dict[KeyPath, tuple[int, int]] = {}
        problems: list[ConfigProblem] = []
        node = self.get_single_node()
        if node is None:
            return None, SourceMap(file, lines), problems
        start = node.start_mark.line + 1
        lines[()] = (start, start)
        self._budget = MAX_VALUES
        try:
            self._record(node, (), lines, problems, file, set())
        except _TooLarge:
            problem = ConfigProblem(
                file,
                None,
                "",
                f"the file expands to more than {MAX_VALUES} values (through aliases); "
                "expected a site configuration",
            )
            return None, SourceMap(file, {}), [problem]
        data = self.construct_document(node)
        return data, SourceMap(file, lines, data), problems

    def _key(self, node: yaml.Node) -> object:
        if isinstance(node, yaml.ScalarNode):
            key = self.construct_object(node)
            try:
                hash(key)
            except TypeError:
                return node.value
            return key
        return f"<{type(node).__name__} on line {node.start_mark.line + 1}>"

    def _record(
        self,
        node: yaml.Node,
        path: KeyPath,
        lines: dict[KeyPath, tuple[int, int]],
        problems: list[ConfigProblem],
        file: str,
        active: set[int],
    ) -> None:
        if id(node) in active:  # a recursive alias: its keys are already recorded
            return
        self._budget -= 1
        if self._budget < 0:
            raise _TooLarge
        active.add(id(node))
        if isinstance(node, yaml.MappingNode):
            seen: dict[object, int] = {}
            merged: list[yaml.Node] = []
            for key_node, value_node in node.value:
                if key_node.tag == _MERGE_TAG:
                    if isinstance(value_node, yaml.SequenceNode):
                        merged.extend(value_node.value)
                    else:
                        merged.append(value_node)
                    continue
                key = self._key(key_node)
                key_line = key_node.start_mark.line + 1
                if key in seen:
                    problems.append(
                        ConfigProblem(
                            file,
                            key_line,
                            format_path((*path, key)),
                            f"duplicate key {key!r}, first given on line {seen[key]}; "
                            "keep one of them",
                        )
                    )
                    continue
                seen[key] = key_line
                lines[(*path, key)] = (key_line, _value_line(value_node, key_line))
                self._record(value_node, (*path, key), lines, problems, file, active)
            for source in merged:
                if isinstance(source, yaml.MappingNode):
                    for key_node, value_node in source.value:
                        key = self._key(key_node)
                        if key in seen or key == "<<":
                            continue
                        seen[key] = key_node.start_mark.line + 1
                        line = seen[key]
                        lines[(*path, key)] = (line, _value_line(value_node, line))
                        self._record(value_node, (*path, key), lines, [], file, active)
        elif isinstance(node, yaml.SequenceNode):
            for index, item in enumerate(node.value):
                line = item.start_mark.line + 1
                lines[(*path, index)] = (line, line)
                self._record(item, (*path, index), lines, problems, file, active)
        active.discard(id(node))


def _value_line(node: yaml.Node, key_line: int) -> int:
    if isinstance(node, yaml.CollectionNode) and not node.flow_style:
        return key_line
    return int(node.start_mark.line) + 1


def parse_yaml(text: str, file: str) -> tuple[Any, SourceMap, list[ConfigProblem]]:
    """Parse ``text``; return (data, source map, problems).

    A syntax error gives ``data = None`` and one problem with line and column.
    """
    try:
        loader = LineLoader(text)  # checks the characters at once
    except yaml.YAMLError as exc:
        return None, SourceMap(file), [_reader_problem(exc, text, file)]
    try:
        return loader.load_with_lines(file)
    except yaml.MarkedYAMLError as exc:
        return None, SourceMap(file), [_syntax_problem(exc, file)]
    except yaml.YAMLError as exc:
        return None, SourceMap(file), [_reader_problem(exc, text, file)]
    finally:
        loader.dispose()


def _reader_problem(exc: yaml.YAMLError, text: str, file: str) -> ConfigProblem:
    """A character YAML does not allow (a control character), with its line and column."""
    position = getattr(exc, "position", None)
    character = getattr(exc, "character", None)
    what = f"character {character:#06x}" if isinstance(character, int) else "a character"
    message = f"YAML syntax error: {what} is not allowed in YAML text; remove it"
    if not isinstance(position, int):
        return ConfigProblem(file, None, "", message)
    before = text[:position]
    line = before.count("\n") + 1
    column = position - (before.rfind("\n") + 1) + 1
    return ConfigProblem(file, line, "", message, column=column)


def _syntax_problem(exc: yaml.MarkedYAMLError, file: str) -> ConfigProblem:
    mark = exc.problem_mark or exc.context_mark
    what = (
        "YAML error" if isinstance(exc, yaml.constructor.ConstructorError) else "YAML syntax error"
    )
    problem = exc.problem or "not valid YAML"
    message = f"{what}: {problem}"
    if exc.context and exc.context_mark is not None:
        message += f" ({exc.context} on line {exc.context_mark.line + 1})"
    elif exc.context:
        message += f" ({exc.context})"
    if "'\\t'" in problem:
        message += "; indent with spaces, not tabs"
    line = mark.line + 1 if mark is not None else None
    column = mark.column + 1 if mark is not None else None
    return ConfigProblem(file, line, "", message, column=column)


def show_value(value: object, limit: int = 80) -> str:
    """A value as it reads in YAML, for "got ...": strings quoted, ``null``, ``true``."""
    text = _show(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _show(value: object) -> str:
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return repr(value)
    if isinstance(value, list | tuple):
        return "[" + ", ".join(_show(item) for item in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{key}: {_show(item)}" for key, item in value.items()) + "}"
    return str(value)
