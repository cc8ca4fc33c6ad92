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

from .comments import cut, printable

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


class UnsupportedError(SqlgenError):
    """A spec option that a target dialect cannot express correctly.

    ``where`` is the ``file:line:col`` of the spec key that asks for it, once known
    (``compiler.compile_spec`` adds it); the message then starts with it.
    """

    def __init__(self, dialect: str, key: str, reason: str, where: str = "",
                 spec_key: str = ""):
        self.dialect, self.key, self.reason, self.where = dialect, key, reason, where
        if not where:
            super().__init__(f"dialect {dialect!r} cannot generate {key}: {reason}")
            return
        super().__init__(f"{where}: {spec_key}: dialect {dialect!r} cannot generate {key}: "
                         f"{reason}")

    def located(self, where: str, spec_key: str) -> UnsupportedError:
        """The same error, its message starting with ``where`` (``file:line:col``) and the
        spec key that asks for the feature (``cohorts`` for ``view cohort_retention``)."""
        return UnsupportedError(self.dialect, self.key, self.reason, where, spec_key)


class OutputError(SqlgenError):
    """A problem with the output folder (a file sqlgen did not write, say)."""

    exit_code = EXIT_OUTPUT
