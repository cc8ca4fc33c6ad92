"""Errors a person can act on: every one names its file, place and key.

Exit codes of the ``sqlgen`` command (documented in the README):

  0  success
  1  ``build --check``: generated files are out of date
  2  usage error (unknown option, missing argument)
  3  the spec cannot be used (a problem in it, or a dialect that cannot express it)
  4  the output folder or a file cannot be written or read as needed
  5  ``apply``: the database refused a statement (everything was rolled back)
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Callable

from .comments import cut, printable

EXIT_OK = 0
EXIT_STALE = 1
EXIT_USAGE = 2
EXIT_SPEC = 3
EXIT_OUTPUT = 4
EXIT_DATABASE = 5


@dataclass(frozen=True)
class Problem:
    """One problem found in a spec, with where it is."""

    file: str
    line: int
    col: int
    key: str
    message: str

    def __str__(self) -> str:
        """One line whatever the file name, key or message hold (``comments.printable``)."""
        where = f"{printable(self.file, False)}:{self.line}:{self.col}"
        message = printable(self.message, False)  # values in it are already ``shown``
        key = cut(printable(self.key, False), 120)
        return f"{where}: {key}: {message}" if key else f"{where}: {message}"


class SqlgenError(Exception):
    """Base class of every error sqlgen reports to a user; ``exit_code`` is the command's."""

    exit_code = EXIT_SPEC


class SpecError(SqlgenError):
    """A spec that cannot be used; carries every problem found, not just the first."""

    def __init__(self, problems: list[Problem]):
        self.problems = sorted(problems, key=lambda p: (p.file, p.line, p.col))
        super().__init__(self.render())

    def render(self, limit: int = 20) -> str:
        lines = [str(p) for p in self.problems[:limit]]
        if len(self.problems) > limit:
            lines.append(f"... and {len(self.problems) - limit} more")
        return "\n".join(lines)


@dataclass(frozen=True)
class Gap:
    """One spec option a target dialect cannot express; ``where`` is ``file:line:col`` of
    the spec key that asks for it, or "" when no key does (a construct sqlglot refused)."""

    dialect: str
    key: str
    reason: str
    where: str = ""
    spec_key: str = ""  # the spec key that asks for it (``cohorts`` for a view), when known
    verb: str = "generate"  # "express" for a part of a where filter (``key`` names the part)

    def __str__(self) -> str:
        text = f"dialect {self.dialect!r} cannot {self.verb} {self.key}"
        text += f": {self.reason}" if self.reason else ""
        return f"{self.where}: {self.spec_key or self.key}: {text}" if self.where else text


class UnsupportedError(SqlgenError):
    """Spec options that target dialects cannot express correctly: every gap, one a line.

    ``dialect``, ``key`` and ``reason`` are the first gap's.
    """

    def __init__(self, dialect: str, key: str, reason: str, where: str = "",
                 more: tuple[Gap, ...] = ()):
        self.gaps = (Gap(dialect, key, reason, where), *more)
        self.dialect, self.key, self.reason = dialect, key, reason
        super().__init__("\n".join(str(gap) for gap in self.gaps))

    @classmethod
    def of(cls, gaps: list[Gap]) -> UnsupportedError:
        """One error listing every gap (at least one)."""
        first, *rest = gaps
        error = cls(first.dialect, first.key, first.reason, first.where, tuple(rest))
        error.gaps = tuple(gaps)
        error.args = ("\n".join(str(gap) for gap in gaps),)
        return error

    def located(self, place: Callable[[str], tuple[str, str]]) -> UnsupportedError:
        """The same gaps, each without a place given one: ``place(key)`` returns the
        ``file:line:col`` and spec key of a refused feature."""
        gaps = [gap if gap.where else replace(gap, where=place(gap.key)[0],
                                              spec_key=place(gap.key)[1])
                for gap in self.gaps]
        return UnsupportedError.of(gaps)

    def render(self) -> str:
        """The message for a person: located lines as they are, others as an Error."""
        return "\n".join(str(gap) if gap.where else f"Error: {gap}" for gap in self.gaps)


class OutputError(SqlgenError):
    """A problem with the output folder (a file sqlgen did not write, say)."""

    exit_code = EXIT_OUTPUT
