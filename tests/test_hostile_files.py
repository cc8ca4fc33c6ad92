"""Hostile file systems and command-line misuse: nothing gets in, nothing is lost.

Every case runs the installed ``sqlgen`` command as a user would (tests/hostile.py) and
asserts the documented exit code (sqlgen/errors.py), a message naming the file (with
``file:line:col`` where the problem is in the spec), no traceback, and what must hold on
disk afterwards: no file sqlgen did not generate is overwritten or removed, nothing is
half-written, and ``--check`` and ``build`` agree. Cases that need another user run the
command as ``nobody`` and are skipped unless the suite runs as root (as CI does).
"""

from __future__ import annotations

import os
import pwd
import random
import shutil
import signal
import stat
import subprocess
import sys
import sysconfig
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import pytest

from hostile import (EXIT_OK, EXIT_OUTPUT, EXIT_SPEC, EXIT_STALE, EXIT_USAGE, assert_refused,
                     run_cli)
from sqlgen import parse_spec, render_files
from sqlgen.output import MANIFEST

SPEC = """\
version: 1
activity:
  table: app_events
  user: user_id
  timestamp: occurred_at
grain: month
output:
  dialect: duckdb
"""
FILES = ["activity_source_summary.sql", "user_activity.sql", "user_states.sql",
         "growth_accounting.sql", "create_all.sql"]
IS_ROOT = hasattr(os, "geteuid") and os.geteuid() == 0
as_root_only = pytest.mark.skipif(not IS_ROOT, reason="running as another user needs root")


def nobody() -> None:
    """In the child before exec: become the unprivileged user ``nobody``."""
    user = pwd.getpwnam("nobody")
    os.setgroups([])
    os.setgid(user.pw_gid)
    os.setuid(user.pw_uid)


def _nobody_runs(command: list[str], env: dict | None = None) -> bool:
    try:
        return subprocess.run(command + ["--version"], preexec_fn=nobody, capture_output=True,
                              env=env, timeout=60).returncode == 0
    except OSError:
        return False


def _as_nobody(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    """The command as ``nobody``: the installed entry point when nobody may run it; else (a
    virtualenv whose interpreter lives in root's home) the system's Python of the same
    version with this sqlgen and its libraries on the path."""
    if _nobody_runs([str(Path(sys.executable).with_name("sqlgen"))]):
        return run_cli(*args, cwd=cwd, preexec_fn=nobody)
    python = f"/usr/bin/python{sys.version_info.major}.{sys.version_info.minor}"
    env = {"PATH": "/usr/bin:/bin", "PYTHONPATH": os.pathsep.join(
        [str(Path(__file__).resolve().parent.parent), sysconfig.get_paths()["purelib"]])}
    if not Path(python).exists() or not _nobody_runs([python, "-m", "sqlgen"], env):
        pytest.skip("nobody can run neither the installed sqlgen nor a system Python")
    return subprocess.run([python, "-m", "sqlgen", *args], cwd=cwd, env=env,
                          capture_output=True, text=True, timeout=60, errors="replace",
                          preexec_fn=nobody)


def umask(mask: int) -> Callable[[], None]:
    return lambda: os.umask(mask)


@dataclass
class Place:
    """A world-readable folder holding ``growth.yml`` and its up-to-date ``sql`` folder."""

    root: Path

    @property
    def spec(self) -> Path:
        return self.root / "growth.yml"

    @property
    def out(self) -> Path:
        return self.root / "sql"

    def sqlgen(self, *args: str, preexec_fn=None):
        args = [a.format(spec=self.spec, out=self.out, root=self.root) for a in args]
        if preexec_fn is nobody:
            return _as_nobody(*args, cwd=self.root)
        return run_cli(*args, cwd=self.root, preexec_fn=preexec_fn)

    def snapshot(self) -> dict[str, bytes]:
        return {str(p.relative_to(self.root)): p.read_bytes() for p in self.root.rglob("*")
                if p.is_file() and not p.is_symlink()}


@pytest.fixture(scope="module")
def template(tmp_path_factory) -> Path:
    """One build, copied for every case (a build per case would only cost time)."""
    root = tmp_path_factory.mktemp("template")
    (root / "growth.yml").write_text(SPEC)
    done = run_cli("build", str(root / "growth.yml"), preexec_fn=umask(0o022))
    assert done.returncode == 0, done.stderr
    return root


@pytest.fixture
def place(template) -> Place:
    root = Path(tempfile.mkdtemp(prefix="sqlgen-hostile-"))
    try:
        shutil.copytree(template, root, dirs_exist_ok=True)
        os.chmod(root, 0o755)  # nobody may enter (pytest's own temp folders are 0700)
        yield Place(root)
    finally:
        for path in [root, *root.rglob("*")]:  # undo chmods so that everything goes
            if path.is_dir() and not path.is_symlink():
                os.chmod(path, 0o755)
        shutil.rmtree(root)


def _garble_body(path: Path) -> None:
    path.write_bytes(path.read_bytes() + b"\xff\xfe broken\n")


def _garble_header(path: Path) -> None:
    data = path.read_bytes()
    path.write_bytes(b"-- Gen\xe9rated" + data[len("-- Generated"):])


def _manifest(p: Place) -> Path:
    return p.out / MANIFEST


def _legacy_manifest(p: Place, spec_hash: str | None = None, named: str | None = None) -> None:
    """The manifest format of sqlgen 0.1: one build's inputs, no spec named."""
    lines = _manifest(p).read_text().splitlines()
    body = [line for line in lines if not line.startswith(("#", "owner "))]
    if spec_hash:
        body = [f"spec {spec_hash}" if line.startswith("spec ") else line for line in body]
    head = ["# Written by sqlgen build: the inputs of the build that wrote this folder and a "
            "SHA-256", "# of each file it wrote, so that `sqlgen build --check` can tell an "
            "up-to-date folder", "# without compiling. Do not edit; any mismatch only makes the "
            "check compile in full."]
    _manifest(p).write_text("\n".join(head + body) + "\n")
    if named:
        for name in FILES:
            path = p.out / name
            path.write_text(path.read_text().replace(" from growth.yml ", f" from {named} ", 1))


def _fifo(path: Path) -> None:
    path.unlink(missing_ok=True)
    os.mkfifo(path)


@dataclass(frozen=True)
class Case:
    """One hostile input: ``arrange`` changes the place, ``argv`` is the command (with
    {spec}, {out} and {root}), ``code`` and ``mentions`` what the command must answer,
    ``located`` whether the message carries file:line:col, ``after`` what must hold on
    disk, ``user`` who runs it (None: this user; nobody; or a umask)."""

    id: str
    arrange: Callable[[Place], None]
    argv: tuple[str, ...]
    code: int
    mentions: tuple[str, ...] = ()
    located: bool = False
    after: Callable[[Place, dict], None] | None = None
    user: Callable[[], None] | None = None


BUILD = ("build", "{spec}")
CHECK = ("build", "{spec}", "--check")
FULL = ("build", "{spec}", "--check", "--full")


def unchanged(p: Place, before: dict) -> None:
    assert p.snapshot() == before


def still(*names: str) -> Callable[[Place, dict], None]:
    def holds(p: Place, before: dict) -> None:
        for name in names:
            assert p.snapshot()[name] == before[name], name
    return holds


def fresh_after(p: Place, before: dict) -> None:
    """The folder is complete again: the fast --check vouches for it without a compile."""
    done = p.sqlgen(*CHECK)
    assert (done.returncode, done.stderr) == (0, ""), done.stderr


def nothing_left(p: Place, before: dict) -> None:
    assert not [q for q in p.out.iterdir() if q.name.startswith(".sqlgen-tmp-")]
    fresh_after(p, before)


def _edit_and_rehash(p: Place) -> None:
    import hashlib

    path = p.out / "growth_accounting.sql"
    old = path.read_bytes()
    new = old.replace(b"new_users", b"fresh_users", 1)
    path.write_bytes(new)
    text = _manifest(p).read_text()
    _manifest(p).write_text(text.replace(hashlib.sha256(old).hexdigest(),
                                         hashlib.sha256(new).hexdigest()))


def _outside_listed(p: Place) -> None:
    (p.root / "precious.sql").write_text("-- Generated by sqlgen (a look-alike outside)\n")
    text = _manifest(p).read_text()
    _manifest(p).write_text(text + "file ../precious.sql " + "0" * 64 + "\n")


def _user_file_listed(p: Place) -> None:
    """The manifest lists as this spec's a file the spec does not generate and that no
    longer carries the header (the user took the name over)."""
    (p.out / "notes.sql").write_text("-- my notes\n")
    _manifest(p).write_text(_manifest(p).read_text() + "file notes.sql " + "0" * 64 + "\n")


DEAD = f".sqlgen-tmp-{2**22 + 1}-abcd1234"  # Linux pids are at most 2**22: nobody runs it
PREVIOUS = ".user_states.sql.k2j4h5g6.tmp"  # how the sqlgen before named its temporary files


def _previous_temp_gone(p: Place, before: dict) -> None:
    assert not (p.out / PREVIOUS).exists()


CASES = [
    # ---- the spec argument
    Case("missing-spec", lambda p: p.spec.unlink(), BUILD, EXIT_SPEC,
         ("growth.yml", "cannot read the spec"), located=True),
    Case("folder-as-spec", lambda p: None, ("build", "{out}"), EXIT_SPEC,
         ("cannot read the spec",), located=True, after=unchanged),
    Case("spec-not-utf8", lambda p: p.spec.write_bytes(b"version: 1\n\xff\n"), BUILD,
         EXIT_SPEC, ("not UTF-8",), located=True, after=unchanged),
    Case("spec-empty", lambda p: p.spec.write_text(""), CHECK, EXIT_SPEC, ("empty",),
         located=True, after=unchanged),
    Case("spec-unreadable-by-user", lambda p: p.spec.chmod(0o600), BUILD, EXIT_SPEC,
         ("cannot read the spec: Permission denied",), located=True, after=unchanged,
         user=nobody),
    # ---- misuse of the command line
    Case("no-command", lambda p: None, (), EXIT_USAGE),
    Case("build-without-spec", lambda p: None, ("build",), EXIT_USAGE, ("spec",)),
    Case("unknown-option", lambda p: None, (*BUILD, "--fast"), EXIT_USAGE, ("--fast",)),
    Case("unknown-dialect", lambda p: None, (*BUILD, "--dialect", "duckbd"), EXIT_USAGE,
         ("Did you mean 'duckdb'?",), after=unchanged),
    Case("no-dialect", lambda p: None, (*BUILD, "--dialect", ","), EXIT_USAGE,
         ("name at least one dialect",)),
    Case("jobs-zero", lambda p: None, (*BUILD, "--jobs", "0"), EXIT_USAGE, ("--jobs",)),
    Case("out-without-folder", lambda p: None, (*BUILD, "--out"), EXIT_USAGE, ("--out",)),
    # ---- the output folder
    Case("out-is-a-file", lambda p: (p.root / "f").write_text("mine\n"),
         (*BUILD, "--out", "{root}/f"), EXIT_OUTPUT, ("/f: exists and is not a folder",),
         after=unchanged),
    Case("out-below-a-file", lambda p: (p.root / "f").write_text("mine\n"),
         (*BUILD, "--out", "{root}/f/sub"), EXIT_OUTPUT, ("/f: exists and is not a folder",),
         after=unchanged),
    Case("out-in-a-folder-the-user-cannot-enter", lambda p: (p.root / "locked").mkdir(0o700),
         (*BUILD, "--out", "{root}/locked/sql"), EXIT_OUTPUT,
         ("locked/sql", "Permission denied"), after=unchanged, user=nobody),
    Case("check-out-in-a-folder-the-user-cannot-enter",
         lambda p: (p.root / "locked").mkdir(0o700),
         (*CHECK, "--out", "{root}/locked/sql"), EXIT_OUTPUT,
         ("locked/sql", "Permission denied"), after=unchanged, user=nobody),
    Case("read-only-folder", lambda p: p.spec.write_text(SPEC.replace("month", "week")),
         BUILD, EXIT_OUTPUT, ("sql", "cannot write (Permission denied)"), after=still(
             "sql/growth_accounting.sql", f"sql/{MANIFEST}"), user=nobody),
    Case("check-of-0600-files-by-another-user",
         lambda p: [(p.out / n).chmod(0o600) for n in FILES], CHECK, EXIT_OUTPUT,
         ("sql/", "cannot read (Permission denied)"), after=unchanged, user=nobody),
    Case("check-of-0644-files-by-another-user", lambda p: None, CHECK, EXIT_OK,
         after=unchanged, user=nobody),
    # ---- files in the way
    Case("user-file-with-a-view-name",
         lambda p: (p.out / "user_states.sql").write_text("-- my view\n"), BUILD, EXIT_OUTPUT,
         ("sql/user_states.sql: not generated by sqlgen, so not overwritten",),
         after=unchanged),
    Case("check-agrees-about-a-user-file",
         lambda p: (p.out / "user_states.sql").write_text("-- my view\n"), CHECK, EXIT_OUTPUT,
         ("sql/user_states.sql: not generated by sqlgen, so not overwritten",),
         after=unchanged),
    Case("folder-with-a-view-name",
         lambda p: ((p.out / "user_states.sql").unlink(), (p.out / "user_states.sql").mkdir()),
         BUILD, EXIT_OUTPUT, ("sql/user_states.sql: is not a file",), after=unchanged),
    Case("pipe-with-a-view-name", lambda p: _fifo(p.out / "user_states.sql"), BUILD,
         EXIT_OUTPUT, ("sql/user_states.sql: is not a file",)),
    Case("link-to-a-file-outside",
         lambda p: ((p.root / "outside.txt").write_text("mine\n"),
                    (p.out / "user_states.sql").unlink(),
                    (p.out / "user_states.sql").symlink_to(p.root / "outside.txt")),
         BUILD, EXIT_OUTPUT, ("sql/user_states.sql: is a symbolic link",), after=unchanged),
    Case("link-to-a-generated-file-outside",
         lambda p: (shutil.copy(p.out / "user_states.sql", p.root / "elsewhere.sql"),
                    (p.out / "user_states.sql").unlink(),
                    (p.out / "user_states.sql").symlink_to(p.root / "elsewhere.sql"),
                    p.spec.write_text(SPEC.replace("month", "week"))),
         BUILD, EXIT_OUTPUT, ("is a symbolic link, so not replaced",), after=unchanged),
    Case("dangling-link", lambda p: ((p.out / "user_states.sql").unlink(),
                                     (p.out / "user_states.sql").symlink_to("/nonexistent")),
         BUILD, EXIT_OUTPUT, ("sql/user_states.sql: is a symbolic link",)),
    Case("manifest-is-a-folder", lambda p: (_manifest(p).unlink(), _manifest(p).mkdir()),
         BUILD, EXIT_OUTPUT, (f"sql/{MANIFEST}: not generated by sqlgen",), after=unchanged),
    Case("manifest-is-a-link",
         lambda p: ((p.root / "m").write_text(_manifest(p).read_text()), _manifest(p).unlink(),
                    _manifest(p).symlink_to(p.root / "m")),
         BUILD, EXIT_OUTPUT, (f"sql/{MANIFEST}: not generated by sqlgen",), after=unchanged),
    Case("manifest-replaced-by-notes", lambda p: _manifest(p).write_text("my notes\n"), CHECK,
         EXIT_OUTPUT, (f"sql/{MANIFEST}: not generated by sqlgen",), after=unchanged),
    # ---- garbled generated files: --check and build agree
    Case("broken-utf8-body-check", lambda p: _garble_body(p.out / "user_states.sql"), CHECK,
         EXIT_STALE, ("out of date; run `sqlgen build`",)),
    Case("broken-utf8-body-build", lambda p: _garble_body(p.out / "user_states.sql"), BUILD,
         EXIT_OK, after=fresh_after),
    Case("broken-header-check", lambda p: _garble_header(p.out / "user_states.sql"), CHECK,
         EXIT_OUTPUT, ("sql/user_states.sql: not generated by sqlgen",), after=unchanged),
    Case("broken-header-build", lambda p: _garble_header(p.out / "user_states.sql"), BUILD,
         EXIT_OUTPUT, ("sql/user_states.sql: not generated by sqlgen",), after=unchanged),
    Case("truncated-to-nothing", lambda p: (p.out / "create_all.sql").write_text(""), CHECK,
         EXIT_OUTPUT, ("sql/create_all.sql: not generated by sqlgen",), after=unchanged),
    Case("hand-edit-with-rehashed-manifest-fast", _edit_and_rehash, CHECK, EXIT_OK,
         after=unchanged),  # the fast path trusts the manifest: what --full is for
    Case("hand-edit-with-rehashed-manifest-full", _edit_and_rehash, FULL, EXIT_STALE,
         ("1 file(s) out of date",), after=unchanged),
    # ---- manifests edited or truncated
    Case("manifest-truncated",
         lambda p: _manifest(p).write_bytes(_manifest(p).read_bytes()[:-40]), BUILD, EXIT_OK,
         (f"sql/{MANIFEST}: line ",), after=fresh_after),
    Case("manifest-not-utf8",
         lambda p: _manifest(p).write_bytes(_manifest(p).read_bytes() + b"\xff\n"), CHECK,
         EXIT_OK, ("is not UTF-8", "checked by a full compile")),
    Case("manifest-lists-a-path-outside", _outside_listed, BUILD, EXIT_OK,
         ("is not a file of one spec",), after=still("precious.sql")),
    Case("manifest-lists-a-user-file", _user_file_listed,
         BUILD, EXIT_OK, after=still("sql/notes.sql")),
    Case("manifest-deleted", lambda p: _manifest(p).unlink(), BUILD, EXIT_OK,
         after=fresh_after),
    Case("legacy-manifest-same-spec", lambda p: _legacy_manifest(p), BUILD, EXIT_OK,
         after=fresh_after),
    Case("legacy-manifest-edited-spec", lambda p: _legacy_manifest(p, spec_hash="0" * 64),
         BUILD, EXIT_OK, after=fresh_after),
    Case("legacy-manifest-of-another-spec",
         lambda p: _legacy_manifest(p, spec_hash="0" * 64, named="other.yml"), BUILD,
         EXIT_OUTPUT, ("written by an earlier sqlgen for other.yml, not for",),
         after=unchanged),
    # ---- temporary files of a killed build
    Case("leftover-temp-file",
         lambda p: (p.out / DEAD).write_text("-- Gen"), BUILD, EXIT_OK,
         ("removed 1 temporary file(s) left by an interrupted build",), after=nothing_left),
    Case("leftover-temp-file-of-the-previous-sqlgen",
         lambda p: (p.out / PREVIOUS).write_text("-- Gen"), BUILD, EXIT_OK,
         ("removed 1 temporary file(s)",), after=_previous_temp_gone),
    Case("check-notes-leftover-temp-file",
         lambda p: (p.out / DEAD).write_text("-- Gen"),
         CHECK, EXIT_OK, ("1 temporary file(s) left by an interrupted build",),
         after=unchanged),
    Case("temp-file-of-a-running-build-kept",
         lambda p: (p.out / f".sqlgen-tmp-{os.getpid()}-abcd1234").write_text("-- Gen"),
         BUILD, EXIT_OK, after=still(f"sql/.sqlgen-tmp-{os.getpid()}-abcd1234")),
    Case("user-file-like-a-temp-name-kept",
         lambda p: (p.out / ".sqlgen-tmp-notes").write_text("mine\n"),
         BUILD, EXIT_OK, after=still("sql/.sqlgen-tmp-notes")),
]


@pytest.mark.parametrize("case", [pytest.param(c, id=c.id, marks=as_root_only if c.user is
                                                 nobody else ()) for c in CASES])
def test_hostile_file_case(case: Case, place: Place):
    case.arrange(place)
    before = place.snapshot()
    done = place.sqlgen(*case.argv, preexec_fn=case.user)
    if case.code == EXIT_OK:
        output = done.stdout + done.stderr
        assert done.returncode == 0 and "Traceback" not in output, output[-2000:]
        for text in case.mentions:
            assert text in output, (text, output[-2000:])
    else:
        assert_refused(done, case.code, located=case.located, mentions=case.mentions)
    if case.code in (EXIT_OUTPUT,) and "{root}" not in " ".join(case.argv):
        assert str(place.out) in done.stderr  # the message names the path
    if case.after:
        case.after(place, before)


def test_the_suite_is_big_enough():
    assert len(CASES) >= 40 and len({c.id for c in CASES}) == len(CASES)
