"""The errors ventsup raises on purpose, and the problems a site file can have.

Hierarchy::

    Exception
    └── VentsupError          base of every error ventsup raises on purpose
        ├── ConfigError       a site file cannot be used; ``problems`` lists each one
        └── UnitError         a value is not the expected quantity (also a ValueError;
                              defined in :mod:`ventsup.config.units`)

A :class:`ConfigProblem` says where (file, line, key path), what was given and
what was expected, one problem per line, for example::

    site.yaml:42 zones.atrium.openings.roof_north.area: got '-2 m2', expected a positive
    area such as '4 m2' or '40 ft2'

(shown here on two lines to fit the page).
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

__all__ = ["ConfigError", "ConfigProblem", "VentsupError"]


class VentsupError(Exception):
    """Base class of every error that ventsup raises on purpose."""


@dataclass(frozen=True, slots=True)
class ConfigProblem:
    """One thing wrong with a site file.

    ``line`` (1-based) is None when it is not known (a file that cannot be
    read, or a configuration built in code); ``path`` is the dotted key path
    (``zones.atrium.openings.roof_north.area``; list items as ``[0]``), empty
    when the problem concerns the whole file; ``column`` is only set for YAML
    syntax errors.
    """

    file: str
    line: int | None
    path: str
    message: str
    column: int | None = None

    def __str__(self) -> str:
        where = self.file
        if self.line is not None:
            where += f":{self.line}"
            if self.column is not None:
                where += f":{self.column}"
        return f"{where} {self.path}: {self.message}" if self.path else f"{where}: {self.message}"

    def sort_key(self) -> tuple[str, int, int, str]:
        """Order by file, then line (unknown lines first), column and path."""
        return (self.file, self.line or 0, self.column or 0, self.path)


class ConfigError(VentsupError):
    """A site file cannot be used. ``problems`` holds every problem found, sorted by line.

    ``str()`` gives one problem per line, ready to print.
    """

    def __init__(self, problems: Iterable[ConfigProblem]) -> None:
        self.problems: list[ConfigProblem] = sorted(problems, key=ConfigProblem.sort_key)
        if not self.problems:
            raise ValueError("a ConfigError needs at least one problem")
        super().__init__("\n".join(str(p) for p in self.problems))

    def __reduce__(self) -> tuple[type[ConfigError], tuple[list[ConfigProblem]]]:
        return (type(self), (self.problems,))
