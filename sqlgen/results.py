"""Results for machines and for terminals: ``--format json`` and colour.

``--format json`` (on ``validate`` and ``build --check``) prints exactly one JSON object on
stdout, whatever the outcome; the exit code is the same as without it. Its fields (format
version 1; documented in docs/json-output.md, and only ever added to):

  format      1
  command     "validate" or "check"
  ok          true when the exit code is 0
  exit_code   the command's exit code
  specs       the spec files read, as named
  problems    [{file, line, column, key, message}] for a spec that cannot be used
  gaps        [{dialect, key, reason, where, spec_key}] for what a dialect cannot express
  warnings    [{file, line, column, key, message}]: valid keys that change nothing
  error       one line for any other failure (a folder in the way, say), else null
  stale       check only: [{path, state, diff}], state "changed", "missing" or "removed"
  notes       check only: lines sqlgen would print as notes

Colour: only on a terminal, and never when the ``NO_COLOR`` environment variable is set
(to anything but ""), nor when ``TERM=dumb``.
"""

from __future__ import annotations

import json
import os
import sys
from typing import IO, Any

from .errors import Gap, Problem

FORMAT_VERSION = 1


def problem_fields(problem: Problem) -> dict[str, Any]:
    return {"file": problem.file, "line": problem.line, "column": problem.col,
            "key": problem.key, "message": problem.message}


def gap_fields(gap: Gap) -> dict[str, Any]:
    return {"dialect": gap.dialect, "key": gap.key, "reason": gap.reason,
            "where": gap.where, "spec_key": gap.spec_key}


def result(command: str, exit_code: int, specs: list[str], **fields: Any) -> dict[str, Any]:
    """The JSON object of one run, every documented field present."""
    out: dict[str, Any] = {"format": FORMAT_VERSION, "command": command, "ok": exit_code == 0,
                           "exit_code": exit_code, "specs": specs, "problems": [], "gaps": [],
                           "warnings": [], "error": None}
    if command == "check":
        out.update(stale=[], notes=[])
    out.update(fields)
    return out


def emit(payload: dict[str, Any]) -> None:
    sys.stdout.write(json.dumps(payload, indent=2, ensure_ascii=False) + "\n")


def colour_on(stream: IO[str]) -> bool:
    """Whether to colour what goes to ``stream``: a terminal, no NO_COLOR, no TERM=dumb."""
    if os.environ.get("NO_COLOR", "") != "" or os.environ.get("TERM") == "dumb":
        return False
    try:
        return stream.isatty()
    except (AttributeError, ValueError):
        return False


_CODES = {"red": "31", "green": "32", "cyan": "36", "bold": "1"}


def paint(text: str, colour: str, stream: IO[str]) -> str:
    """``text`` in ``colour`` when ``stream`` takes colour, else as it is."""
    return f"\033[{_CODES[colour]}m{text}\033[0m" if colour_on(stream) else text


def paint_diff(diff: str, stream: IO[str]) -> str:
    """A unified diff with removed lines red, added green, hunk heads cyan, on a terminal."""
    if not colour_on(stream):
        return diff
    lines = []
    for line in diff.splitlines(keepends=True):
        colour = ("bold" if line.startswith(("---", "+++")) else "red" if line.startswith("-")
                  else "green" if line.startswith("+") else "cyan" if line.startswith("@@")
                  else None)
        lines.append(paint(line.rstrip("\n"), colour, stream) + "\n"[:line.endswith("\n")]
                     if colour else line)
    return "".join(lines)
