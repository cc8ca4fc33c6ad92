"""Misuse of the command line: each case gets its documented exit code, a message that says
what is wrong (and where, for a spec), and no traceback (tests/hostile.py)."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from hostile import (EXIT_OK, EXIT_OUTPUT, EXIT_SPEC, EXIT_STALE, EXIT_USAGE, assert_refused,
                     run_cli)

README = Path(__file__).resolve().parent.parent / "README.md"

GOOD = """\
version: 1
activity:
  table: app_events
  user: user_id
  timestamp: occurred_at
"""
# SQLite and T-SQL cannot convert to a named zone; SQLite cannot read another schema.
ZONED = GOOD.replace("  table: app_events\n", "  table: raw.app_events\n") + \
    "  timezone: Europe/Paris\noutput:\n  schema: growth\n"

FILES = {
    "good.yml": GOOD,
    "zoned.yml": ZONED,
    "empty.yml": "",
    "comments.yml": "# nothing but a comment\n",
    "list.yml": "- version: 1\n",
    "windows.yml": GOOD + "trailing_windows: [7, 7, 400]\n",
    "unknown.yml": GOOD + "granularity: month\n",
    "tabs.yml": "version: 1\nactivity:\n\ttable: t\n",
    "sqlite_zone.yml": GOOD + "  timezone: Europe/Paris\noutput:\n  dialect: sqlite\n",
}

# (id, arguments with {tmp} for the folder, exit code, located, texts the message holds)
CASES = [
    ("no-command", [], EXIT_USAGE, False, ("required: COMMAND",)),
    ("unknown-command", ["frobnicate"], EXIT_USAGE, False, ("invalid choice: 'frobnicate'",)),
    ("unknown-flag", ["build", "{tmp}/good.yml", "--frob"], EXIT_USAGE, False,
     ("unrecognized arguments: --frob",)),
    ("build-without-spec", ["build"], EXIT_USAGE, False, ("required: spec",)),
    ("validate-without-spec", ["validate"], EXIT_USAGE, False, ("required: spec",)),
    ("out-without-folder", ["build", "{tmp}/good.yml", "--out"], EXIT_USAGE, False,
     ("--out: expected one argument",)),
    ("dialect-comma", ["build", "{tmp}/good.yml", "--dialect", ","], EXIT_USAGE, False,
     ("name at least one dialect",)),
    ("dialect-empty", ["build", "{tmp}/good.yml", "--dialect", ""], EXIT_USAGE, False,
     ("name at least one dialect",)),
    ("dialect-trailing-commas", ["build", "{tmp}/good.yml", "--dialect", "duckdb,,"],
     EXIT_USAGE, False, ("has an empty name",)),
    ("dialect-all-and-more", ["build", "{tmp}/good.yml", "--dialect", "all,duckdb"],
     EXIT_USAGE, False, ("all stands alone",)),
    ("dialect-unknown", ["build", "{tmp}/good.yml", "--dialect", "duckdbb"], EXIT_USAGE, False,
     ("'duckdbb' is not one of", "Did you mean 'duckdb'?")),
    ("dialect-twice", ["build", "{tmp}/good.yml", "--dialect", "duckdb,postgres,duckdb"],
     EXIT_USAGE, False, ("'duckdb' is named more than once",)),
    ("dialect-case", ["build", "{tmp}/good.yml", "--dialect", "DuckDB"], EXIT_USAGE, False,
     ("'DuckDB' is not one of",)),
    ("jobs-zero", ["build", "{tmp}/good.yml", "--jobs", "0"], EXIT_USAGE, False,
     ("'0' is not a whole number of at least 1",)),
    ("jobs-word", ["build", "{tmp}/good.yml", "--jobs", "x"], EXIT_USAGE, False,
     ("'x' is not a whole number",)),
    ("jobs-negative", ["build", "{tmp}/good.yml", "--jobs=-2"], EXIT_USAGE, False,
     ("'-2' is not a whole number",)),
    ("demo-bad-grain", ["demo", "--grain", "hour"], EXIT_USAGE, False,
     ("invalid choice: 'hour'",)),
    ("validate-missing-file", ["validate", "{tmp}/nowhere.yml"], EXIT_SPEC, True,
     ("cannot read the spec: No such file or directory",)),
    ("build-missing-file", ["build", "{tmp}/nowhere.yml"], EXIT_SPEC, True,
     ("cannot read the spec",)),
    ("check-missing-file", ["build", "{tmp}/nowhere.yml", "--check"], EXIT_SPEC, True,
     ("cannot read the spec",)),
    ("validate-directory", ["validate", "{tmp}"], EXIT_SPEC, True,
     ("the spec is a directory, not a regular file",)),
    # (build takes a folder of specs; validate takes one spec file)
    ("validate-directory", ["validate", "{tmp}"], EXIT_SPEC, True, ("the spec is a directory, not a regular file",)),
    ("empty-spec", ["validate", "{tmp}/empty.yml"], EXIT_SPEC, True, ("the spec is empty",)),
    ("comments-only-spec", ["build", "{tmp}/comments.yml"], EXIT_SPEC, True,
     ("the spec is empty",)),
    ("spec-is-a-list", ["validate", "{tmp}/list.yml"], EXIT_SPEC, True,
     ("must be a mapping of keys",)),
    ("spec-with-tabs", ["validate", "{tmp}/tabs.yml"], EXIT_SPEC, True, ("not valid YAML",)),
    ("unknown-key", ["validate", "{tmp}/unknown.yml"], EXIT_SPEC, True,
     ("granularity: unknown key.",)),
    ("check-broken-spec-is-not-stale", ["build", "{tmp}/unknown.yml", "--check"], EXIT_SPEC,
     True, ("granularity: unknown key.",)),
    ("every-window-problem", ["validate", "{tmp}/windows.yml"], EXIT_SPEC, True,
     (":6:23: trailing_windows: window length 7 appears more than once",
      ":6:26: trailing_windows: window length 400 must be from 1 to 366 days")),
    ("out-is-the-spec", ["build", "{tmp}/good.yml", "--out", "{tmp}/good.yml"], EXIT_OUTPUT,
     False, ("good.yml: exists and is not a folder",)),
    ("out-under-a-file", ["build", "{tmp}/good.yml", "--out", "{tmp}/good.yml/sql"],
     EXIT_OUTPUT, False, ("good.yml: exists and is not a folder",)),
    ("named-dialect-cannot", ["build", "{tmp}/zoned.yml", "--dialect", "sqlite"], EXIT_SPEC,
     True, (":6:13: activity.timezone: dialect 'sqlite' cannot generate",
            ":8:11: output.schema: dialect 'sqlite' cannot generate",
            ":3:10: activity.table: dialect 'sqlite' cannot generate")),
    ("named-list-every-gap", ["build", "{tmp}/zoned.yml", "--dialect", "duckdb,sqlite,tsql"],
     EXIT_SPEC, True, ("dialect 'sqlite' cannot generate activity.timezone",
                       "dialect 'tsql' cannot generate activity.timezone")),
    ("check-named-dialect-cannot", ["build", "{tmp}/zoned.yml", "--dialect", "tsql", "--check"],
     EXIT_SPEC, True, ("dialect 'tsql' cannot generate activity.timezone",)),
    ("validate-default-dialect-cannot", ["validate", "{tmp}/sqlite_zone.yml"], EXIT_SPEC, True,
     (":6:13: activity.timezone: dialect 'sqlite' cannot generate",)),
]


@pytest.fixture
def folder(tmp_path: Path) -> Path:
    for name, text in FILES.items():
        (tmp_path / name).write_text(text, encoding="utf-8")
    return tmp_path


@pytest.mark.parametrize("args,code,located,mentions",
                         [pytest.param(*case[1:], id=case[0]) for case in CASES])
def test_misuse_is_refused_as_documented(folder, args, code, located, mentions):
    before = sorted(p.name for p in folder.iterdir())
    result = run_cli(*[a.format(tmp=folder) for a in args], cwd=folder)
    assert_refused(result, code, located=located, mentions=mentions)
    assert sorted(p.name for p in folder.iterdir()) == before, "a refusal writes nothing"


def test_a_spec_with_a_byte_order_mark_is_read(folder):
    (folder / "bom.yml").write_bytes(b"\xef\xbb\xbf" + GOOD.encode())
    result = run_cli("validate", str(folder / "bom.yml"))
    assert result.returncode == EXIT_OK and "ok (month grain" in result.stdout, result.stderr


def test_stale_files_are_exit_1_and_a_broken_spec_is_not(folder):
    assert run_cli("build", str(folder / "good.yml")).returncode == EXIT_OK
    (folder / "good.yml").write_text(GOOD + "grain: week\n")
    stale = run_cli("build", str(folder / "good.yml"), "--check")
    assert_refused(stale, EXIT_STALE, located=False, mentions=("out of date",))
    (folder / "good.yml").write_text(GOOD + "grain: weekly\n")
    broken = run_cli("build", str(folder / "good.yml"), "--check")
    assert_refused(broken, EXIT_SPEC, mentions=(":6:8: grain: 'weekly' is not one of",))


def test_the_exit_code_table_is_the_documented_one():
    """sqlgen/errors.py, the README and the CLI's docstring give the same codes."""
    import sqlgen.cli
    import sqlgen.errors

    assert (EXIT_OK, EXIT_STALE, EXIT_USAGE, EXIT_SPEC, EXIT_OUTPUT) == (0, 1, 2, 3, 4)
    readme = " ".join(README.read_text(encoding="utf-8").split())
    assert ("Exit codes: 0 ok, 1 stale files (`--check` only), 2 a usage error, 3 a problem "
            "with the spec (or a dialect that cannot express it), 4 a problem with the output "
            "folder or a file, 5 a statement `apply` ran was refused by the database "
            "(everything rolled back).") in readme
    for code, word in ((0, "success"), (1, "out of date"), (2, "usage error"),
                       (3, "the spec cannot be used"), (4, "cannot be written"),
                       (5, "the database refused")):
        assert re.search(rf"^\s+{code}\s+.*{word}", sqlgen.errors.__doc__, re.MULTILINE), word
    assert "0 ok, 1 stale files for --check, 2 usage, 3 a spec problem" in sqlgen.cli.__doc__
