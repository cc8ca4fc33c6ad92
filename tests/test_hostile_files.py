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
    """The manifest format of the sqlgen before: one build's inputs, no spec named."""
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
    # (build takes a folder of specs: one without any is a usage error; validate takes a file)
    Case("folder-as-spec", lambda p: None, ("validate", "{out}"), EXIT_SPEC,
         ("is a directory, not a regular file",), located=True, after=unchanged),
    Case("folder-without-specs", lambda p: None, ("build", "{out}"), EXIT_USAGE,
         ("a folder without a spec (*.yml or *.yaml) in it",), located=False,
         after=unchanged),
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


# ------------------------------------------------------------------- two specs, one folder

CURRENCY = """\
version: 1
revenue:
  table: invoice_lines
  customer: account_id
  timestamp: invoiced_at
  amount: amount
  where: "currency = '{code}'"
grain: month
cohorts: {cohorts}
output:
  dialect: duckdb
  prefix: {prefix}
"""
INVOICES = [("a", "2024-01-05", 10, "USD"), ("b", "2024-01-20", 7, "EUR"),
            ("a", "2024-02-03", 12, "USD"), ("c", "2024-02-10", 5, "USD"),
            ("b", "2024-03-01", 9, "EUR"), ("d", "2024-03-15", 4, "EUR")]


def _currency_specs(root: Path, prefix: str = "{code}_", cohorts: str = "false") -> dict:
    specs = {}
    for code in ("usd", "eur"):
        specs[code] = root / f"{code}.yml"
        specs[code].write_text(CURRENCY.format(code=code.upper(), cohorts=cohorts,
                                               prefix=prefix.format(code=code)))
    return specs


def _sql_files(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in folder.iterdir() if p.name.endswith(".sql")}


@pytest.mark.parametrize("order", [("usd", "eur"), ("eur", "usd")], ids="-then-".join)
def test_a_spec_per_currency_shares_one_folder(order, tmp_path):
    """Issue 10: two specs side by side, one per currency with its own prefix, both in the
    default ./sql: both builds succeed in either order and both --check clean, fast and
    full; the views of both run side by side in one database."""
    specs = _currency_specs(tmp_path)
    for code in order:
        done = run_cli("build", str(specs[code]), cwd=tmp_path)
        assert done.returncode == 0, done.stderr
    out = tmp_path / "sql"
    names = _sql_files(out)
    assert {n.split("_", 1)[0] for n in names} == {"usd", "eur"}
    assert "usd_create_all.sql" in names and "eur_revenue_accounting.sql" in names
    for code in order:
        assert run_cli("build", str(specs[code]), "--check").stderr == ""  # fast: vouched for
        full = run_cli("build", str(specs[code]), "--check", "--full")
        assert full.returncode == 0 and "checked by a full compile" in full.stderr
        again = run_cli("build", str(specs[code]))
        assert again.returncode == 0 and " 0 written" in again.stdout
    assert _sql_files(out) == names
    owners = [line for line in (out / MANIFEST).read_text().splitlines()
              if line.startswith("owner ")]
    assert owners == ['owner "../eur.yml"', 'owner "../usd.yml"']
    import duckdb

    con = duckdb.connect()
    con.execute("CREATE TABLE invoice_lines(account_id TEXT, invoiced_at TIMESTAMP, "
                "amount DECIMAL(18, 2), currency TEXT)")
    con.executemany("INSERT INTO invoice_lines VALUES (?, ?, ?, ?)", INVOICES)
    for code in order:
        con.execute((out / f"{code}_create_all.sql").read_text())
    for code in ("usd", "eur"):
        # Reference: a month's revenue is the sum of its positive invoice amounts in that
        # currency (common practice; every customer here pays a positive amount).
        expected = {}
        for _, day, amount, currency in INVOICES:
            if currency == code.upper():
                expected[day[:7]] = expected.get(day[:7], 0) + amount
        rows = con.execute(f"SELECT strftime(period_start, '%Y-%m'), revenue FROM "
                           f"{code}_revenue_accounting WHERE revenue > 0").fetchall()
        assert {month: float(revenue) for month, revenue in rows} == expected


def test_same_names_from_two_specs_are_refused_naming_both(tmp_path):
    specs = _currency_specs(tmp_path, prefix="")
    assert run_cli("build", str(specs["usd"]), cwd=tmp_path).returncode == 0
    before = _sql_files(tmp_path / "sql")
    done = run_cli("build", str(specs["eur"]), cwd=tmp_path)
    assert_refused(done, EXIT_OUTPUT, located=False,
                   mentions=(f"generated for spec {specs['usd']} (recorded as ../usd.yml",
                             f"not replaced by a build of {specs['eur']}", "output.prefix",
                             "--out"))
    check = run_cli("build", str(specs["eur"]), "--check", cwd=tmp_path)
    assert (check.returncode, check.stderr) == (done.returncode, done.stderr)  # they agree
    assert _sql_files(tmp_path / "sql") == before


def test_specs_named_alike_in_two_folders_are_told_apart(tmp_path):
    """Both are ``growth.yml``: the manifest names each by its path from the folder."""
    for team in ("a", "b"):
        (tmp_path / team).mkdir()
        (tmp_path / team / "growth.yml").write_text(SPEC)
    out = tmp_path / "shared"
    assert run_cli("build", str(tmp_path / "a" / "growth.yml"), "--out", str(out)).returncode == 0
    done = run_cli("build", str(tmp_path / "b" / "growth.yml"), "--out", str(out))
    assert_refused(done, EXIT_OUTPUT, located=False,
                   mentions=(f"generated for spec {tmp_path / 'a' / 'growth.yml'}",
                             "recorded as ../a/growth.yml", str(tmp_path / "b" / "growth.yml")))


def test_a_build_removes_only_its_own_files(tmp_path):
    specs = _currency_specs(tmp_path, cohorts="true")
    for code in ("usd", "eur"):
        assert run_cli("build", str(specs[code]), cwd=tmp_path).returncode == 0
    out = tmp_path / "sql"
    assert (out / "usd_revenue_cohorts.sql").exists() and (out / "eur_revenue_cohorts.sql").exists()
    usd = {n: b for n, b in _sql_files(out).items() if n.startswith("usd_")}
    specs["eur"].write_text(specs["eur"].read_text().replace("cohorts: true", "cohorts: false"))
    done = run_cli("build", str(specs["eur"]), cwd=tmp_path)
    assert done.returncode == 0 and ", 1 removed" in done.stdout
    assert not (out / "eur_revenue_cohorts.sql").exists()
    assert {n: b for n, b in _sql_files(out).items() if n.startswith("usd_")} == usd
    for code in ("usd", "eur"):
        check = run_cli("build", str(specs[code]), "--check", cwd=tmp_path)
        assert (check.returncode, check.stderr) == (0, ""), check.stderr


def test_a_spec_that_is_gone_still_protects_its_files_until_they_are_deleted(tmp_path):
    specs = _currency_specs(tmp_path, prefix="")
    assert run_cli("build", str(specs["usd"]), cwd=tmp_path).returncode == 0
    specs["usd"].unlink()
    done = run_cli("build", str(specs["eur"]), cwd=tmp_path)
    assert_refused(done, EXIT_OUTPUT, located=False,
                   mentions=(f"no spec is at {specs['usd']} any more",))
    for path in (tmp_path / "sql").glob("*.sql"):
        path.unlink()
    done = run_cli("build", str(specs["eur"]), cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    assert "usd.yml" not in (tmp_path / "sql" / MANIFEST).read_text()


# ------------------------------------------------------------------ modes and kill -9


@pytest.mark.parametrize("mask, mode", [(0o022, 0o644), (0o077, 0o600), (0o002, 0o664)])
def test_new_files_get_the_mode_the_umask_gives(mask, mode, tmp_path):
    """Issue 10: files were 0600 whatever the umask; a plain write gives 0o666 & ~umask
    (POSIX open(2) with mode 0666, as Python's open does)."""
    (tmp_path / "growth.yml").write_text(SPEC)
    done = run_cli("build", str(tmp_path / "growth.yml"), preexec_fn=umask(mask))
    assert done.returncode == 0, done.stderr
    modes = {p.name: stat.S_IMODE(p.stat().st_mode) for p in (tmp_path / "sql").iterdir()}
    assert modes == {name: mode for name in [*FILES, MANIFEST]}


def test_a_replaced_file_keeps_its_mode(tmp_path):
    """As a plain write into an existing file would: the owner's chmod stays."""
    (tmp_path / "growth.yml").write_text(SPEC)
    assert run_cli("build", str(tmp_path / "growth.yml")).returncode == 0
    path = tmp_path / "sql" / "growth_accounting.sql"
    path.chmod(0o640)
    (tmp_path / "growth.yml").write_text(SPEC.replace("grain: month", "grain: week"))
    done = run_cli("build", str(tmp_path / "growth.yml"), preexec_fn=umask(0o022))
    assert done.returncode == 0 and "5 written" in done.stdout
    assert stat.S_IMODE(path.stat().st_mode) == 0o640


SLOW_WRITES = """\
import os, sys, time
from sqlgen import cli
replace = os.replace
def slow(*args, **kwargs):  # a slower disk: widens the window in which a kill lands
    time.sleep(float(os.environ.get("SLOW_WRITE_SECONDS", "0.02")))
    return replace(*args, **kwargs)
os.replace = slow
sys.exit(cli.main(sys.argv[1:]))
"""


def test_kill_9_mid_build_loses_nothing_and_the_next_build_cleans_up(tmp_path):
    """Issue 16: builds killed with SIGKILL while writing, 20 rounds, each a random short
    time after its first temporary file appears. After every kill each file is whole (the
    old or the new version, never a mix); the next build removes the leftovers, says so,
    and leaves every file complete."""
    dialects = ["duckdb", "postgres", "tsql"]
    texts = {grain: SPEC.replace("grain: month", f"grain: {grain}") for grain in ("month", "week")}
    whole = {(d, name): set() for d in dialects for name in FILES}
    for text in texts.values():
        spec = parse_spec(text, "growth.yml")
        for d in dialects:
            for name, body in render_files(spec, d).items():
                whole[(d, name)].add(body.encode())
    (tmp_path / "slow.py").write_text(SLOW_WRITES)
    spec_path, out = tmp_path / "growth.yml", tmp_path / "out"
    argv = [sys.executable, str(tmp_path / "slow.py"), "build", str(spec_path), "--dialect",
            ",".join(dialects), "--out", str(out), "--jobs", "1"]
    rng = random.Random(16)
    left = 0
    for round_ in range(20):
        spec_path.write_text(texts["week" if round_ % 2 else "month"])
        child = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        deadline = time.monotonic() + 60
        while child.poll() is None and not list(out.rglob(".sqlgen-tmp-*")):
            assert time.monotonic() < deadline, "the build never wrote"
            time.sleep(0.002)
        time.sleep(rng.uniform(0, 0.15))
        child.send_signal(signal.SIGKILL)
        child.wait()  # reaped: its pid no longer runs
        left += bool(list(out.rglob(".sqlgen-tmp-*")))
        for d in dialects:
            for path in (out / d).glob("*.sql") if (out / d).exists() else ():
                assert path.read_bytes() in whole[(d, path.name)], (round_, path)
    assert left > 0  # the kills did land mid-write (19 of 20 in one run)
    done = run_cli("build", str(spec_path), "--dialect", ",".join(dialects), "--out", str(out))
    assert done.returncode == 0, done.stderr
    assert "temporary file(s) left by an interrupted build" in done.stdout
    assert not list(out.rglob(".sqlgen-tmp-*"))
    full = run_cli("build", str(spec_path), "--dialect", ",".join(dialects), "--out", str(out),
                   "--check", "--full")
    assert full.returncode == 0, full.stdout[-2000:]


def test_two_builds_at_once_into_one_folder_keep_both_entries(tmp_path):
    """Each build reads, changes and writes the folder's manifest while it holds a lock on
    the folder; with slow writes, two unlocked builds would each write a manifest without
    the other's entry."""
    specs = _currency_specs(tmp_path)
    (tmp_path / "sql").mkdir()
    (tmp_path / "slow.py").write_text(SLOW_WRITES)
    env = {**os.environ, "SLOW_WRITE_SECONDS": "0.3"}  # ~2 s of writing: the builds overlap
    children = [subprocess.Popen([sys.executable, str(tmp_path / "slow.py"), "build",
                                  str(specs[code])], stdout=subprocess.DEVNULL,
                                 stderr=subprocess.PIPE, text=True, env=env)
                for code in ("usd", "eur")]
    for child in children:
        assert child.wait(timeout=120) == 0, child.stderr.read()
        child.stderr.close()
    for code in ("usd", "eur"):
        check = run_cli("build", str(specs[code]), "--check")
        assert (check.returncode, check.stderr) == (0, ""), check.stderr
