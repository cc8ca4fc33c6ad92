"""Errors a person can act on: every one names its file, place and key."""

from __future__ import annotations

from dataclasses import dataclass


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
    """Base class of every error sqlgen reports to a user (exit code 1)."""


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

    def __init__(self, dialect: str, key: str, reason: str):
        self.dialect, self.key, self.reason = dialect, key, reason
        super().__init__(f"dialect {dialect!r} cannot generate {key}: {reason}")


class OutputError(SqlgenError):
    """A problem with the output folder (a file sqlgen did not write, say)."""
