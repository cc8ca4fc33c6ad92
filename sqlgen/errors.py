"""Errors a person can act on: every one names its file, place and key.

Exit codes of the ``sqlgen`` command (documented in the README):

  0  success
  1  ``build --check``: generated files are out of date
  2  usage error (unknown option, missing argument)
  3  the spec cannot be used (a problem in it, or a dialect that cannot express it)
  4  the output folder or a file cannot be written or read as needed
"""

from __future__ import annotations

from dataclasses import dataclass

EXIT_OK = 0
EXIT_STALE = 1
EXIT_USAGE = 2
EXIT_SPEC = 3
EXIT_OUTPUT = 4


@dataclass(frozen=True)
class Problem:
    """One problem found in a spec, with where it is."""

    file: str
    line: int
    col: int
    key: str
    message: str

    def __str__(self) -> str:
        where = f"{self.file}:{self.line}:{self.col}"
        return f"{where}: {self.key}: {self.message}" if self.key else f"{where}: {self.message}"


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


class UnsupportedError(SqlgenError):
    """A spec option that a target dialect cannot express correctly."""

    def __init__(self, dialect: str, key: str, reason: str, at: str = ""):
        self.dialect, self.key, self.reason = dialect, key, reason
        if at:  # a spec value's file:line:col (a where filter's)
            super().__init__(f"{at}: {key}: dialect {dialect!r} cannot express {reason}")
        else:
            super().__init__(f"dialect {dialect!r} cannot generate {key}: {reason}")


class OutputError(SqlgenError):
    """A problem with the output folder (a file sqlgen did not write, say)."""

    exit_code = EXIT_OUTPUT
