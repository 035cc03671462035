"""The package layout keeps its promises: a pure core and honest ``__all__`` lists."""

from __future__ import annotations

import ast
import importlib
from collections.abc import Iterator
from functools import cmp_to_key
from pathlib import Path

import pytest

PACKAGE_DIR = Path(__file__).resolve().parent.parent / "ventsup"
CORE_DIR = PACKAGE_DIR / "core"

# The core decides; the edges and drivers do I/O, threads, logging and clocks.
BANNED_CORE_IMPORTS = frozenset(
    {
        "asyncio",
        "logging",
        "os",
        "paho",
        "random",
        "socket",
        "sqlite3",
        "subprocess",
        "threading",
        "time",
    }
)
# Reading a clock, named by where the callable lives (after resolving import aliases).
BANNED_CORE_CALLS = frozenset(
    {
        "datetime.date.today",
        "datetime.datetime.now",
        "datetime.datetime.today",
        "datetime.datetime.utcnow",
        "pandas.Timestamp.now",
        "pandas.Timestamp.today",
        "pandas.Timestamp.utcnow",
        "time.monotonic",
        "time.monotonic_ns",
        "time.perf_counter",
        "time.perf_counter_ns",
        "time.time",
        "time.time_ns",
    }
)
PURE_CORE_HINT = (
    "the core must be pure (no I/O, clock, threads or randomness): "
    "move this to ventsup/edges or ventsup/drivers and pass the value in"
)


def python_files(directory: Path) -> list[Path]:
    """Every ``.py`` file under ``directory``, sorted, caches excluded."""
    return sorted(p for p in directory.rglob("*.py") if "__pycache__" not in p.parts)


def relative(path: Path) -> str:
    """``path`` relative to the repository root, for messages."""
    return path.relative_to(PACKAGE_DIR.parent).as_posix()


def dotted_name(node: ast.expr) -> str | None:
    """``a.b.c`` for a Name/Attribute chain, None for anything else."""
    parts: list[str] = []
    while isinstance(node, ast.Attribute):
        parts.append(node.attr)
        node = node.value
    if not isinstance(node, ast.Name):
        return None
    parts.append(node.id)
    return ".".join(reversed(parts))


def impurities(source: str, filename: str) -> Iterator[str]:
    """Yield ``file:line: problem`` for each banned import or clock read in ``source``."""
    tree = ast.parse(source, filename=filename)
    # Local name -> what it refers to, e.g. "dt" -> "datetime.datetime".
    aliases: dict[str, str] = {}
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                root = alias.name.partition(".")[0]
                if root in BANNED_CORE_IMPORTS:
                    yield f"{filename}:{node.lineno}: imports {alias.name!r}; {PURE_CORE_HINT}"
                if alias.asname:
                    aliases[alias.asname] = alias.name
                else:
                    aliases[root] = root
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            root = node.module.partition(".")[0]
            if root in BANNED_CORE_IMPORTS:
                yield f"{filename}:{node.lineno}: imports from {node.module!r}; {PURE_CORE_HINT}"
            for alias in node.names:
                aliases[alias.asname or alias.name] = f"{node.module}.{alias.name}"
    for node in ast.walk(tree):
        if not isinstance(node, ast.Name | ast.Attribute):
            continue
        name = dotted_name(node)
        if name is None:
            continue
        head, dot, rest = name.partition(".")
        if head not in aliases:
            continue  # a local name, not something imported
        resolved = aliases[head] + dot + rest
        if resolved in BANNED_CORE_CALLS:
            yield f"{filename}:{node.lineno}: reads the clock with {name} ({resolved}); " + (
                PURE_CORE_HINT
            )


def test_core_is_pure() -> None:
    problems = [
        problem
        for path in python_files(CORE_DIR)
        for problem in impurities(path.read_text(encoding="utf-8"), relative(path))
    ]
    assert not problems, "\n".join(problems)


@pytest.mark.parametrize(
    ("source", "expected"),
    [
        ("import os", "imports 'os'"),
        ("import os.path as p", "imports 'os.path'"),
        ("from time import monotonic", "imports from 'time'"),
        ("import paho.mqtt.client as mqtt", "imports 'paho.mqtt.client'"),
        ("from sqlite3 import connect", "imports from 'sqlite3'"),
        ("import datetime\nt = datetime.datetime.now()", "datetime.datetime.now"),
        ("from datetime import datetime\nt = datetime.utcnow()", "datetime.datetime.utcnow"),
        ("from datetime import date as d\nt = d.today()", "datetime.date.today"),
        ("import datetime as dt\nf = dt.datetime.now", "datetime.datetime.now"),
        ("import pandas as pd\nt = pd.Timestamp.now()", "pandas.Timestamp.now"),
    ],
)
def test_purity_scan_catches(source: str, expected: str) -> None:
    problems = list(impurities(source, "ventsup/core/example.py"))
    assert any(expected in problem for problem in problems), problems
    assert all(problem.startswith("ventsup/core/example.py:") for problem in problems)


@pytest.mark.parametrize(
    "source",
    [
        "from datetime import datetime, timedelta\nt = datetime.fromisoformat('2024-06-01')",
        "import math\nfrom dataclasses import dataclass",
        "from . import physics\nfrom .layers import safety",
        "def now(t): return t\nx = now(1)",
        "def f(time): return time.time",
    ],
)
def test_purity_scan_allows(source: str) -> None:
    assert list(impurities(source, "ventsup/core/example.py")) == []


def isort_style_key(name: str) -> tuple[int, str]:
    """Category of ``name`` as ruff's RUF022 orders ``__all__``.

    SCREAMING_SNAKE_CASE first, then CamelCase, then everything else; within a
    category the names are compared with :func:`natural_compare`.
    """
    if len(name) > 1 and name.isupper():
        return (0, name)
    if name[:1].isupper():
        return (1, name)
    return (2, name)


def natural_compare(a: str, b: str) -> int:
    """Natural order (``a9`` < ``a10``) as ruff computes it (Martin Pool's strnatcmp).

    Runs of digits compare as numbers; a run with a leading zero compares digit
    by digit, like a fraction (``a01`` < ``a1``).
    """
    i = j = 0
    while True:
        if i == len(a) or j == len(b):
            return (i < len(a)) - (j < len(b))
        if a[i].isdigit() and b[j].isdigit():
            i_end = i
            while i_end < len(a) and a[i_end].isdigit():
                i_end += 1
            j_end = j
            while j_end < len(b) and b[j_end].isdigit():
                j_end += 1
            run_a, run_b = a[i:i_end], b[j:j_end]
            if run_a[0] == "0" or run_b[0] == "0":
                # Fractional: the first differing digit decides, then the shorter run.
                for x, y in zip(run_a, run_b, strict=False):
                    if x != y:
                        return -1 if x < y else 1
                result = (len(run_a) > len(run_b)) - (len(run_a) < len(run_b))
            else:
                # Whole numbers: the longer run is larger, then the first differing digit.
                result = (len(run_a) > len(run_b)) - (len(run_a) < len(run_b))
                if result == 0 and run_a != run_b:
                    result = -1 if run_a < run_b else 1
            if result:
                return result
            i, j = i_end, j_end
        elif a[i] != b[j]:
            return -1 if a[i] < b[j] else 1
        else:
            i += 1
            j += 1


def all_sort_compare(a: str, b: str) -> int:
    """Order of ``__all__`` entries that agrees with ``ruff check`` (RUF022)."""
    category_a, category_b = isort_style_key(a)[0], isort_style_key(b)[0]
    if category_a != category_b:
        return -1 if category_a < category_b else 1
    return natural_compare(a, b)


def sorted_for_all(names: list[str]) -> list[str]:
    """``names`` in the order ruff's RUF022 expects in ``__all__``."""
    return sorted(names, key=cmp_to_key(all_sort_compare))


def test_all_sort_order_agrees_with_ruff() -> None:
    names = ["decide", "Decision", "MAX_X", "a10", "a9", "_private", "Zone2", "Zone10", "X"]
    names += ["a1", "a01"]
    # What `ruff check --select RUF022 --fix` (ruff 0.17) makes of this list.
    assert sorted_for_all(names) == [
        "MAX_X",
        "Decision",
        "X",
        "Zone2",
        "Zone10",
        "_private",
        "a01",
        "a1",
        "a9",
        "a10",
        "decide",
    ]


def defines_all(path: Path) -> bool:
    """True when the module at ``path`` assigns ``__all__`` at module level."""
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    for node in tree.body:
        targets: list[ast.expr] = []
        if isinstance(node, ast.Assign):
            targets = node.targets
        elif isinstance(node, ast.AnnAssign | ast.AugAssign):
            targets = [node.target]
        if any(isinstance(t, ast.Name) and t.id == "__all__" for t in targets):
            return True
    return False


def module_name(path: Path) -> str:
    """The dotted module name of a file under ``ventsup/``."""
    parts = list(path.relative_to(PACKAGE_DIR.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def all_problems(name: str, exported: object) -> list[str]:
    """What is wrong with a module's ``__all__``: unsorted, duplicated or dangling names."""
    if not isinstance(exported, list | tuple) or not all(isinstance(n, str) for n in exported):
        return [f"{name}.__all__ must be a list or tuple of str, got {exported!r}"]
    names = list(exported)
    module = importlib.import_module(name)
    problems = []
    if names != sorted_for_all(names):
        problems.append(
            f"{name}.__all__ is not sorted (as ruff's RUF022 sorts it): "
            f"expected {sorted_for_all(names)!r}"
        )
    duplicates = sorted({n for n in names if names.count(n) > 1})
    if duplicates:
        problems.append(f"{name}.__all__ lists {duplicates!r} more than once")
    missing = [n for n in names if not hasattr(module, n)]
    if missing:
        problems.append(f"{name}.__all__ names {missing!r}, which {name} does not define")
    return problems


def test_every_all_is_sorted_and_exists() -> None:
    problems: list[str] = []
    for path in python_files(PACKAGE_DIR):
        if path.name == "__main__.py" or not defines_all(path):
            continue
        name = module_name(path)
        try:
            module = importlib.import_module(name)
        except Exception as exc:
            problems.append(f"{relative(path)}: cannot import {name}: {exc!r}")
            continue
        problems += all_problems(name, module.__all__)
    assert not problems, "\n".join(problems)


def test_package_all_is_sorted_and_exists() -> None:
    ventsup = importlib.import_module("ventsup")
    assert hasattr(ventsup, "__all__"), (
        "ventsup/__init__.py must define __all__ (the public surface, sorted)"
    )
    assert all_problems("ventsup", ventsup.__all__) == []
