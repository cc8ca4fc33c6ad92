"""Shared checks for the hostile-input suites (tests/test_hostile_*.py).

Every hostile case runs the installed ``sqlgen`` command as a user would and asserts the
same three things: the documented exit code (sqlgen/errors.py), a message that names where
the problem is, and no traceback. Suites add their own checks (no object created, no file
lost) on top.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
from pathlib import Path

from sqlgen.errors import EXIT_OK, EXIT_OUTPUT, EXIT_SPEC, EXIT_STALE, EXIT_USAGE

__all__ = ["EXIT_OK", "EXIT_OUTPUT", "EXIT_SPEC", "EXIT_STALE", "EXIT_USAGE", "LOCATED",
           "assert_refused", "run_cli"]

# file:line:col: at the start of a line of the message
LOCATED = re.compile(r"^\S[^\n]*?:\d+:\d+: ", re.MULTILINE)


def run_cli(*args: str, cwd: Path | None = None, timeout: float = 60,
            stdin: str | None = None, preexec_fn=None) -> subprocess.CompletedProcess:
    """Run the installed ``sqlgen`` entry point; text output, never waits on a terminal.
    ``preexec_fn`` runs in the child first (set a umask, become another user)."""
    exe = Path(sys.executable).with_name("sqlgen")
    command = [str(exe)] if exe.exists() else [shutil.which("sqlgen") or "sqlgen"]
    return subprocess.run(command + list(args), cwd=cwd, capture_output=True, text=True,
                          timeout=timeout, input=stdin if stdin is not None else "",
                          errors="replace", preexec_fn=preexec_fn)


def assert_refused(result: subprocess.CompletedProcess, code: int, *, located: bool = True,
                   mentions: tuple[str, ...] = ()) -> None:
    """The command failed as documented: exit ``code``, a located message, no traceback."""
    output = result.stdout + result.stderr
    assert result.returncode == code, (result.returncode, output[-2000:])
    assert "Traceback" not in output, output[-2000:]
    assert result.stderr.strip(), "a refusal must say why on stderr"
    if located:
        assert LOCATED.search(result.stderr), result.stderr[-2000:]
    for text in mentions:
        assert text in result.stderr, (text, result.stderr[-2000:])
