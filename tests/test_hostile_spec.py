"""Hostile specs: broken keys, hostile YAML, injection through every field and the file name.

Every refused case runs ``sqlgen validate`` and asserts the documented exit code (3), one
``file:line:col:`` line per problem, no traceback, and no internals in the message
(``Node(``, ``<class ``). Most cases call the command's ``main`` in this process (the
console script does exactly that) to keep the suite cheap; the ones that could hang or
crash the interpreter (FIFOs, deep nesting) run the installed command.

The injection tests at the end build the views of hostile but valid specs and run
create_all.sql on every engine of the suite the way a user would (a script through the
engine's own client where it has one), then find no object but the views and the test's
own table, and no file written by a psql or mysql shell escape.
"""

from __future__ import annotations

import contextlib
import dataclasses
import datetime as dt
import io
import os
import shutil
import socket
import subprocess
import traceback
import types
from pathlib import Path

import pytest
import sqlglot
import yaml

from conftest import engine_target_pairs
from harness import load_events, names_for
from hostile import EXIT_OK, EXIT_SPEC, LOCATED, assert_refused, run_cli
from sqlgen import cli, compile_spec, parse_spec, render_files
from sqlgen.comments import comment_text, shown, unsafe
from sqlgen.dialects import TARGETS, target_names
from sqlgen.spec import KEYS
from sqlgen.compiler import deciding_lines
from sqlgen.views import VIEWS, planned_views
from test_spec import GOOD  # the smallest valid spec, one key a line

LEAKS = ("Node(", "<class ", "Traceback", "object at 0x")


def run_main(*args: str) -> subprocess.CompletedProcess:
    """``sqlgen ARGS`` in this process; an exception that escapes is shown as a traceback."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = cli.main(list(args))
        except SystemExit as exit_:
            code = exit_.code
        except BaseException:  # noqa: BLE001 - the test reports it as the traceback it is
            traceback.print_exc()
            code = -1
    return subprocess.CompletedProcess(list(args), code, out.getvalue(), err.getvalue())


def assert_clean_message(result: subprocess.CompletedProcess, problems: int | None = None):
    """Every line of stderr is one located problem (or the '... and N more' line), short,
    printable, and free of sqlgen's internals."""
    lines = result.stderr.splitlines()
    for line in lines:
        assert LOCATED.match(line) or line.startswith("... and "), line[:300]
        assert len(line) < 700, line[:300]
        assert not any(unsafe(c) for c in line), repr(line[:300])
    for leak in LEAKS:
        assert leak not in result.stderr, result.stderr[:2000]
    if problems is not None:
        assert len(lines) == problems, result.stderr


def validate(tmp_path: Path, content: str | bytes, name: str = "s.yml"):
    path = tmp_path / name
    if isinstance(content, str):
        content = content.encode("utf-8")
    path.write_bytes(content)
    return run_main("validate", str(path))


def refused(tmp_path, content, *mentions: str, name: str = "s.yml", problems=None):
    result = validate(tmp_path, content, name)
    assert_refused(result, EXIT_SPEC, mentions=mentions)
    assert_clean_message(result, problems)
    return result


BASE = {
    "version": 1,
    "activity": {"table": "raw.app_events", "user": "user_id", "timestamp": "occurred_at"},
    "revenue": {"table": "billing.charges", "customer": "account_id", "amount": "amount",
                "timestamp": "charged_at"},
    "grain": "month",
    "output": {"dialect": "duckdb"},
}


def with_value(path: str, value) -> str:
    """BASE as YAML with ``path`` (``a.b``) set to ``value``."""
    data = yaml.safe_load(yaml.safe_dump(BASE))
    *parents, leaf = path.split(".")
    node = data
    for name in parents:
        node = node.setdefault(name, {})
    node[leaf] = value
    return yaml.safe_dump(data, sort_keys=False, allow_unicode=True)


def test_base_spec_is_valid(tmp_path):
    """The cases below change one thing each in a spec that is accepted as it is."""
    result = validate(tmp_path, with_value("grain", "month"))
    assert result.returncode == EXIT_OK, result.stderr


# ------------------------------------------------ broken specs: every key, wrong shapes

def _wrong_values(kind: str) -> list:
    if kind in ("mapping", "definitions", "segments"):  # mappings of mappings
        return [[1, 2], 42]
    if kind == "windows":
        return [{"a": {"b": 1}}, "seven"]
    return [[1, [2, 3]], {"a": {"b": 1}}]


WRONG_SHAPES = [pytest.param(key.path, value, id=f"{key.path}-{type(value).__name__}")
                for key in KEYS for value in _wrong_values(key.kind)]


@pytest.mark.parametrize(("path", "value"), WRONG_SHAPES)
def test_wrong_shape_of_every_key(tmp_path, path, value):
    """A list or mapping where a key wants text (and so on) names the key and the shape,
    never a repr of the reader's nodes."""
    result = refused(tmp_path, with_value(path, value), f": {path}: ")
    assert ("a list" in result.stderr or "a mapping" in result.stderr
            or "must be a mapping" in result.stderr or "'seven'" in result.stderr)


# ------------------------------------------------ hostile YAML

DEEP = 10_000
HOSTILE_YAML = [
    ("python-object-tag", GOOD.replace("grain: month", "grain: !!python/object:os.system x"),
     ("6:8: grain: YAML tag",)),
    ("binary-tag", GOOD.replace("raw.app_events", "!!binary aGVsbG8="), ("activity.table",)),
    ("local-tag", GOOD.replace("version: 1", "version: !custom 1"), ("1:10: version:",)),
    ("set-tag", GOOD + "trailing_windows: !!set {7: null}\n", ("trailing_windows",)),
    ("omap-root", "!!omap\n- version: 1\n", ("1:1:", "YAML tag")),
    ("tag-on-key", GOOD.replace("grain: month", "!!python/str grain: month"),
     ("mapping keys must be plain text",)),
    ("tag-and-other-problem", GOOD.replace("grain: month", "grain: !!python/none x\n"
                                           "week_start: sundy"), ("grain:", "week_start:")),
    ("anchor", GOOD.replace("raw.app_events", "&t raw.app_events"), ("3:10:", "anchors")),
    ("alias", "x: &a 1\n" + GOOD + "y: *a\n", ("anchors",)),
    ("merge-key", GOOD + "output:\n  <<: {dialect: postgres}\n", ("8:3:", "merge")),
    ("billion-laughs", "a: &a [x, x]\nb: &b [*a, *a]\nc: &c [*b, *b]\n" + GOOD, ("1:4:",)),
    ("nested-lists", "version: " + "[" * DEEP + "]" * DEEP + "\n", ("nested more than 64",)),
    ("nested-flow-maps", "version: " + "{a: " * DEEP + "1" + "}" * DEEP + "\n",
     ("nested more than 64",)),
    ("nested-block-maps", "".join(" " * i + "k:\n" for i in range(200)), ("nested more",)),
    ("nested-in-section", GOOD.replace("table: raw.app_events",
                                       "table: " + "[" * 100 + "]" * 100), ("3:",)),
    ("nested-in-windows-within-limit", GOOD + "trailing_windows: " + "[" * 50 + "]" * 50 + "\n",
     ("trailing_windows", "a list")),
    ("multiple-documents", GOOD + "---\nversion: 1\n", ("7:1:", "not valid YAML")),
    ("only-comments", "# nothing here\n# at all\n", ("1:1:", "empty")),
    ("only-document-marker", "---\n", ("1:1:", "empty")),
    ("null-document", "--- ~\n", ("1:1:", "empty")),
    ("scalar-root", "hello\n", ("1:1:", "must be a mapping")),
    ("null-root", "~\n", ("1:1:", "empty")),
    ("list-root", "- version: 1\n", ("1:1:", "must be a mapping")),
    ("unterminated-quote", GOOD.replace("user_id", "'user_id"), ("not valid YAML",)),
    ("unterminated-flow", GOOD + "trailing_windows: [7, 28\n", ("not valid YAML",)),
    ("tab-indentation", GOOD.replace("  user:", "\tuser:"), ("4:1:", "not valid YAML")),
    ("int-key", GOOD + "1: x\n", ("7:1:", "mapping keys must be plain text")),
    ("null-key", GOOD + "~: x\n", ("7:1:", "mapping keys must be plain text")),
    ("bool-key", GOOD + "true: x\n", ("7:1:", "mapping keys must be plain text")),
    ("complex-key", GOOD + "? [a, b]\n: c\n", ("7:3:", "mapping keys must be plain text")),
    ("huge-int", GOOD.replace("version: 1", "version: " + "9" * 5000), ("1:10: version:",)),
    ("date-version", GOOD.replace("version: 1", "version: 2020-01-01"),
     ("version:", "the date 2020-01-01")),
    ("impossible-date", GOOD.replace("version: 1", "version: 2020-13-45"),
     ("1:10: version: expected 1", "'2020-13-45'")),
    ("nan-version", GOOD.replace("version: 1", "version: .nan"), ("version:", "nan")),
    ("string-version", GOOD.replace("version: 1", "version: '1'"), ("version:", "'1'")),
    ("bool-version", GOOD.replace("version: 1", "version: true"), ("version:", "got true")),
    ("list-version", GOOD.replace("version: 1", "version: [1]"), ("version:", "a list")),
    ("empty-section", GOOD.replace("activity:\n", "activity: {}\nx:\n"), ("activity.table",)),
]

BAD_BYTES = [
    ("nul-byte", GOOD.replace("user: user_id", "user: use\x00r_id"), ("4:12:", "U+0000")),
    ("bell", GOOD.replace("grain: month", "grain: mo\x07nth"), ("6:10:", "U+0007")),
    ("escape-sequence", GOOD.replace("raw.app_events", "raw\x1b[2J"), ("3:13:", "U+001B")),
    ("del", GOOD + "x: \x7f\n", ("7:4:",)),
    ("c1-control", GOOD + "x: \x9b\n", ("7:4:", "U+009B")),
    ("nul-last-line", GOOD + "\x00", ("7:1:",)),
    ("bad-utf8-line-6", GOOD.encode().replace(b"month", b"mon\xffth"), ("6:11:", "0xff")),
    ("bad-utf8-after-multibyte", GOOD.encode().replace(b"raw.app_events", "r\u00e4w\u00e9".encode()
                                                         + b"\xc3("), ("3:14:", "UTF-8")),
    ("truncated-utf8", GOOD.encode() + b"x: \xe2\x82\n", ("7:4:",)),
    ("latin1-file", GOOD.replace("raw.app_events", "caf\u00e9").encode("latin-1"),
     ("3:13:", "0xe9")),
    ("utf16-bom", GOOD.encode("utf-16"), ("1:1:", "UTF-8")),
    ("utf8-bom-bad-grain", ("\ufeff" + GOOD.replace("month", "wek")).encode(), ("6:8: grain:",)),
    ("crlf-bad-grain", GOOD.replace("month", "wek").replace("\n", "\r\n"), ("6:8: grain:",)),
    ("cr-only-bad-grain", GOOD.replace("month", "wek").replace("\n", "\r"), ("6:8: grain:",)),
    ("crlf-nul", GOOD.replace("\n", "\r\n").replace("user_id", "u\x00"), ("4:10:",)),
]

HUGE = "x" * 200_000
HUGE_VALUES = [
    ("huge-table", GOOD.replace("raw.app_events", "'t;" + HUGE + "'"), ("activity.table",)),
    ("huge-grain", GOOD.replace("month", HUGE), ("grain", "...")),
    ("huge-key", GOOD + HUGE + ": 1\n", ("7:",)),
    ("long-key", GOOD + "k" * 1000 + ": 1\n", ("7:1:", "unknown key", "...")),
    ("huge-where", GOOD.replace("  user:", f"  where: \"x = '{HUGE}' +\"\n  user:"),
     ("activity.where",)),
    ("huge-timezone", GOOD.replace("  user:", f"  timezone: {HUGE}\n  user:"),
     ("activity.timezone", "...")),
    ("too-large-file", GOOD + "# " + "y" * 300_000 + "\n", ("1:1:", "larger than")),
]

DUPLICATES = [
    ("duplicate-nested", GOOD.replace("  user:", "  table: other\n  user:"),
     ("4:3: activity.table: key appears twice (first on line 3)",), 1),
    ("duplicate-section", GOOD + "activity:\n  table: t\n", ("7:1: activity: key appears twice",),
     1),
    ("duplicate-and-bad-grain", GOOD.replace("grain: month", "grain: wek") + "version: 1\n",
     ("6:8: grain:", "7:1: version: key appears twice"), 2),
    ("duplicate-deep-output", GOOD + "output:\n  dialect: duckdb\n  dialect: postgres\n",
     ("9:3: output.dialect: key appears twice",), 1),
    ("two-problems", GOOD.replace("month", "wek").replace("user_id", "'a;b'"),
     ("4:9: activity.user:", "6:8: grain:"), 2),
    ("many-problems", GOOD + "".join(f"k{i}: 1\n" for i in range(30)), ("... and 10 more",), 21),
]

CASES = ([pytest.param(c, m, None, id=i) for i, c, m in HOSTILE_YAML + BAD_BYTES + HUGE_VALUES]
         + [pytest.param(c, m, n, id=i) for i, c, m, n in DUPLICATES])


@pytest.mark.parametrize(("content", "mentions", "problems"), CASES)
def test_hostile_yaml(tmp_path, content, mentions, problems):
    refused(tmp_path, content, *mentions, problems=problems)


def test_huge_value_is_cut_in_the_message(tmp_path):
    result = refused(tmp_path, GOOD.replace("month", HUGE), "grain")
    assert len(result.stderr) < 1000, len(result.stderr)


def test_deep_nesting_through_the_installed_command(tmp_path):
    """The real entry point (a RecursionError would kill it with a traceback)."""
    path = tmp_path / "deep.yml"
    path.write_text("version: " + "[" * 100_000 + "]" * 100_000 + "\n")
    assert_refused(run_cli("validate", str(path)), EXIT_SPEC, mentions=("1:", "nested"))


ACCEPTED = [
    ("utf8-bom", "\ufeff" + GOOD),
    ("crlf", GOOD.replace("\n", "\r\n")),
    ("no-final-newline", GOOD.rstrip("\n")),
    ("comments-everywhere", GOOD.replace("\n", "  # note */ \\! x\n")),
    ("document-markers", "---\n" + GOOD + "...\n"),
    ("unicode-quoted-name", GOOD.replace("raw.app_events", "'raw.\"\u00e9v\u00e9nements\"'")),
]


@pytest.mark.parametrize("content", [pytest.param(c, id=i) for i, c in ACCEPTED])
def test_odd_but_valid_yaml_is_accepted(tmp_path, content):
    result = validate(tmp_path, content)
    assert result.returncode == EXIT_OK, result.stderr


# ------------------------------------------------ injection through every spec field

PAYLOADS = {
    "newline": "x\nCREATE TABLE pwned AS SELECT 42 AS v",
    "carriage-return": "x\rCREATE TABLE pwned AS SELECT 42 AS v",
    "semicolon": "x; DROP TABLE raw.app_events",
    "comment-end": "x */ CREATE TABLE pwned AS SELECT 42 AS v",
    "psql-meta": "x\n\\! touch PWNED",
    "line-separator": "x\u2028CREATE TABLE pwned AS SELECT 42 AS v",
    "nul": "x\x00y",
    "quoted-newline": "\"x\nCREATE TABLE pwned AS SELECT 42 AS v\"",
}
NAME_KEYS = ("activity.table", "activity.user", "activity.timestamp", "revenue.table",
             "revenue.customer", "revenue.amount", "revenue.timestamp", "output.schema",
             "output.prefix", "activity.timezone", "revenue.timezone", "output.dialect", "grain")
INJECTIONS = [pytest.param(key, payload, id=f"{key}-{name}")
              for key in NAME_KEYS for name, payload in PAYLOADS.items()
              if not (name in ("nul", "quoted-newline") and key in ("grain", "output.dialect"))]
WHERE_INJECTIONS = [
    "event_name = 'a'; DROP TABLE raw.app_events",
    "event_name = 'a' -- ignore the rest",
    "event_name = 'a' /* */ OR 1 = 1",
    "event_name = 'a'\n;CREATE TABLE pwned AS SELECT 42 AS v",
    "user_id IN (SELECT user_id FROM secrets)",
    "event_name = 'a\x00'",
    "event_name = 'a\u2028b'",
    "event_name = 'a\x1b[2J'",
    "pg_read_file('/etc/passwd') IS NOT NULL AND EXISTS (SELECT 1)",
    "other_table.event_name = 'a'",
]


@pytest.mark.parametrize(("key", "payload"), INJECTIONS)
def test_injection_through_a_name_is_refused(tmp_path, key, payload):
    result = refused(tmp_path, with_value(key, payload), f": {key}: ")
    assert "pwned" not in result.stderr.split(": ", 1)[0]


@pytest.mark.parametrize("where", [pytest.param(w, id=f"where-{i}")
                                   for i, w in enumerate(WHERE_INJECTIONS)])
@pytest.mark.parametrize("section", ["activity", "revenue"])
def test_injection_through_where_is_refused(tmp_path, section, where):
    refused(tmp_path, with_value(f"{section}.where", where), f": {section}.where: ")


def test_folder_with_a_nul_is_refused(tmp_path):
    refused(tmp_path, with_value("output.folder", "sql\x00x"), ": output.folder: ")


# ------------------------------------------------ the file name

HOSTILE_FILE_NAMES = {
    "every-line-break": ("x\nCREATE TABLE pwned1 AS SELECT 1;\rCREATE TABLE pwned2 AS SELECT 2;"
                         "\u2028CREATE TABLE pwned3 AS SELECT 3;\x85\f\v\\! touch PWNED\n.yml"),
    "psql-meta": "x\n\\! touch PWNED\n.yml",
    "carriage-return": "x\rCREATE TABLE pwned AS SELECT 42 AS v;\r--.yml",
    "newline": "x\nCREATE TABLE pwned AS SELECT 42 AS v;\n--.yml",
    "comment-star": "x * -- CREATE TABLE pwned AS SELECT 42 AS v; *.yml",
    "quotes": "x'; DROP TABLE t; --\".yml",
    "line-separator": "x\u2028CREATE TABLE pwned AS SELECT 42 AS v;\u2029.yml",
    "tab-escape": "x\t\x1b[31mred.yml",
    "backslashes": "x\\\\n\\u000a.yml",
}


@pytest.mark.parametrize("name", [pytest.param(n, id=i) for i, n in HOSTILE_FILE_NAMES.items()])
def test_hostile_file_name_in_a_message_stays_on_one_line(tmp_path, name):
    result = refused(tmp_path, GOOD.replace("month", "wek"), "6:8: grain:", name=name,
                     problems=1)
    assert result.stderr.startswith(str(tmp_path))


# ------------------------------------------------ what is not a regular file

def _fifo(tmp_path):
    path = tmp_path / "spec.yml"
    os.mkfifo(path)
    return path


def _socket(tmp_path):
    path = tmp_path / "s.sock"
    server = socket.socket(socket.AF_UNIX)
    server.bind(str(path))
    server.close()  # the socket file stays
    return path


def _link_to(target_maker):
    def make(tmp_path):
        target = target_maker(tmp_path)
        link = tmp_path / "link.yml"
        link.symlink_to(target)
        return link
    return make


SPECIAL_FILES = {
    "fifo": (_fifo, "FIFO"),
    "symlink-to-fifo": (_link_to(_fifo), "FIFO"),
    "directory": (lambda p: p, "a directory"),
    "symlink-to-directory": (_link_to(lambda p: p / "."), "a directory"),
    "char-device": (lambda p: Path("/dev/null"), "character device"),
    "socket": (_socket, "socket"),
    "missing": (lambda p: p / "nope.yml", "cannot read the spec"),
    "broken-symlink": (_link_to(lambda p: p / "nope.yml"), "cannot read the spec"),
}


@pytest.mark.parametrize(("make", "mention"), [pytest.param(*v, id=k)
                                               for k, v in SPECIAL_FILES.items()])
def test_not_a_regular_file_is_refused_without_blocking(tmp_path, make, mention):
    """Through the installed command with a timeout: a blocking open() would hang it."""
    path = make(tmp_path)
    result = run_cli("validate", str(path), timeout=30)
    assert_refused(result, EXIT_SPEC, mentions=(f"{path}:1:1:", mention))
    assert_clean_message(result, 1)


# ------------------------------------------------ a dialect that cannot express the spec

def test_unsupported_dialect_is_located_at_the_key(tmp_path):
    text = GOOD.replace("  user:", "  timezone: Europe/Berlin\n  user:").replace(
        "raw.app_events", "app_events")
    path = tmp_path / "s.yml"
    path.write_text(text)
    result = run_main("build", str(path), "--dialect", "sqlite", "--out", str(tmp_path / "o"))
    assert_refused(result, EXIT_SPEC, mentions=(f"{path}:4:13: activity.timezone: dialect "
                                                "'sqlite' cannot generate activity.timezone: ",))
    assert not (tmp_path / "o").exists()


def test_unsupported_qualified_name_is_located(tmp_path):
    path = tmp_path / "s.yml"
    path.write_text(GOOD + "output:\n  dialect: sqlite\n")
    result = run_main("validate", str(path))
    assert_refused(result, EXIT_SPEC, mentions=(f"{path}:3:10: activity.table: dialect",))


# ------------------------------------------------ the one escaping function

ESCAPE_INPUTS = ["a\nb", "a\r\nb", "a\rb", "*/", "/*", "*/*", "/*/", "a\u2028b\u2029c\x85d",
                 "\\! ls", "\\", "\x00\x1f\x7f\x9f", "\u202e", "\ufeff", "x" * 1000, "\udcff"]


@pytest.mark.parametrize("text", ESCAPE_INPUTS)
def test_comment_text_is_one_safe_line(text):
    safe = comment_text(text)
    assert len(safe) <= 200
    assert "*/" not in safe and "/*" not in safe
    assert safe.splitlines() == [safe] and not any(unsafe(c) for c in safe)
    assert not safe.startswith("\\!")
    assert "\n" not in shown(text) and len(shown(text)) <= 82


def test_comment_text_keeps_plain_text():
    assert comment_text("raw.app_events, event_name <> 'x'") == \
        "raw.app_events, event_name <> 'x'"
    assert comment_text("a\nb") == "a\\x0ab" and comment_text("a\\x0ab") == "a\\\\x0ab"


# ------------------------------------------------ hostile but valid specs, built and run

HOSTILE_LITERAL = "x\n\\! touch PWNED\nCREATE TABLE pwned AS SELECT 42 AS v; */ -- /*"


def hostile_specs(target: str) -> list[tuple[str, str]]:
    """(file name, spec text) pairs that are valid yet carry hostile text into the files."""
    table, schema = names_for(target)
    where = HOSTILE_LITERAL.replace("\\", "\\\\").replace("\n", "\\n")
    lines = ["version: 1", "activity:", f"  table: {table}", "  user: user_id",
             "  timestamp: occurred_at", f"  where: \"event_name <> '{where}'\"",
             "grain: week", "week_start: sunday", "output:", f"  dialect: {target}"]
    if schema:
        lines.append(f"  schema: {schema}")
    text = "\n".join(lines) + "\n"
    return [(name, text) for name in HOSTILE_FILE_NAMES.values()]


@pytest.mark.parametrize("target", target_names())
def test_every_file_parses_back_to_exactly_its_statements(target):
    """No line of a generated file is anything but a `-- ` comment, blank, or part of a
    statement sqlglot generated: read back in its dialect, a view's file is exactly its
    compiled statements, and create_all.sql exactly every view's (after DROP VIEWs of the
    views). A header line that broke out of its comment would be one more statement."""
    dialect = TARGETS[target].sqlglot_dialect
    for name, text in hostile_specs(target)[:1]:
        spec = parse_spec(text, name)
        files = render_files(spec, target)
        compiled = {f"{c.view.name}.sql": c for c in compile_spec(spec, target)}
        for file_name, content in files.items():
            header = content.split("\n\n", 1)[0].splitlines()
            assert all(line.startswith("-- ") for line in header), header
            assert not any(unsafe(c) for line in header for c in line)
            parsed = _statements(content, dialect)
            if file_name in compiled:
                expected = [s for st in compiled[file_name].statements
                            for s in _statements(st, dialect)]
            else:
                expected = [s for c in compiled.values() for st in c.statements
                            for s in _statements(st, dialect)]
                # create_all.sql wraps the views: a transaction, the schema, DROP VIEWs
                wrappers = [s for s in parsed if _wrapper(s)]
                parsed = [s for s in parsed if not _wrapper(s)]
                drops = [s for s in parsed[:len(parsed) - len(expected)]
                         if s.startswith("DROP VIEW IF EXISTS ")]
                parsed = parsed[len(drops):]
                assert len(drops) in (0, len(compiled)), drops
                assert len(wrappers) <= 4, wrappers
                if TARGETS[target].exec_batch:
                    # T-SQL runs each view through sp_executesql inside an IF ... batch that
                    # sqlglot cannot parse back: each statement is there once, quoted
                    statements = [st for c in compiled.values() for st in c.statements]
                    assert all(content.count("N'" + st.replace("'", "''") + "'") == 1
                               for st in statements)
                    continue
            assert parsed == expected, file_name


_WRAPPERS = ("BEGIN", "COMMIT", "SET XACT_ABORT ON", "BEGIN TRANSACTION", "COMMIT TRANSACTION", "CREATE SCHEMA IF NOT EXISTS ",
             "CREATE DATABASE IF NOT EXISTS ", "IF NOT EXISTS")


def _wrapper(statement: str) -> bool:
    """A statement create_all.sql adds around the views (transaction, schema)."""
    return statement in _WRAPPERS[:5] or statement.startswith(_WRAPPERS[5:])


def _statements(sql: str, dialect: str) -> list[str]:
    return [e.sql(dialect, comments=False) for e in sqlglot.parse(sql, read=dialect)
            if e is not None]


def test_header_states_what_decides_the_numbers():
    text = """\
version: 1
activity:
  table: raw.app_events
  user: user_id
  timestamp: occurred_at
  timestamp_type: timestamptz
  where: "event_name <> 'push_received'"
  timezone: America/New_York
revenue:
  table: billing.charges
  customer: account_id
  amount: amount
  timestamp: charged_at
  timestamp_type: date
grain: week
week_start: sunday
"""
    spec = parse_spec(text, "g.yml")
    files = render_files(spec, "postgres")
    activity = files["growth_accounting.sql"].split("\n\n", 1)[0]
    assert "--   activity table: raw.app_events\n" in activity
    assert ("--   activity time: instants, converted to local time in America/New_York\n"
            in activity)
    assert "--   activity where: event_name <> 'push_received'\n" in activity
    assert "--   grain: week, weeks start on sunday\n" in activity
    assert "revenue" not in activity.split("What decides", 1)[1].split("Management")[0]
    revenue = files["revenue_accounting.sql"].split("\n\n", 1)[0]
    assert "--   revenue table: billing.charges (charges)\n" in revenue
    assert "--   revenue time: date columns, used as stored\n" in revenue
    assert "--   revenue where: none (every row counts)\n" in revenue
    both = files["create_all.sql"].split("\n\n", 1)[0]
    assert "activity table" in both and "revenue table" in both


def test_header_shows_the_valid_range():
    """The valid range decides which rows count: the header states it, default or not."""
    spec = parse_spec(GOOD, "g.yml")
    assert ("activity valid range: 1990-01-01 to 2100-01-01; rows outside it are left out"
            in deciding_lines(spec, None))
    ranged = parse_spec(GOOD.replace("  timestamp: occurred_at\n",
                                     "  timestamp: occurred_at\n  valid_from: 2015-03-01\n"),
                        "g.yml")
    assert ("activity valid range: 2015-03-01 to 2100-01-01; rows outside it are left out"
            in deciding_lines(ranged, None))


def test_every_view_names_the_spec_key_that_asks_for_it():
    """A dialect that cannot generate a view is reported at this key's line."""
    paths = {key.path for key in KEYS}
    assert all(view.spec_key in paths and view.reads in ("activity", "revenue")
               for view in VIEWS)


def test_header_and_manifest_carry_the_same_spec_hash(tmp_path):
    path = tmp_path / "g.yml"
    path.write_text(GOOD)
    result = run_main("build", str(path))
    assert result.returncode == EXIT_OK, result.stderr
    digest = parse_spec(GOOD, str(path)).digest()
    manifest = (tmp_path / "sql" / ".sqlgen-manifest").read_text().splitlines()
    assert f"spec {digest}" in manifest
    for sql in (tmp_path / "sql").glob("*.sql"):
        assert f"(spec {digest})" in sql.read_text().splitlines()[0]


def test_renamed_spec_is_not_up_to_date(tmp_path):
    """The file name is in every header, so the manifest records it too."""
    (tmp_path / "a.yml").write_text(GOOD)
    assert run_main("build", str(tmp_path / "a.yml")).returncode == EXIT_OK
    (tmp_path / "a.yml").rename(tmp_path / "b.yml")
    result = run_main("build", str(tmp_path / "b.yml"), "--check")
    assert result.returncode == 1, result.stdout + result.stderr
    # the renamed spec takes its files over (same spec hash, the old spec file gone) ...
    assert run_main("build", str(tmp_path / "b.yml")).returncode == EXIT_OK
    manifest = (tmp_path / "sql" / ".sqlgen-manifest").read_text()
    assert '"../b.yml"' in manifest and "a.yml" not in manifest
    assert run_main("build", str(tmp_path / "b.yml"), "--check").returncode == EXIT_OK
    # ... but a spec that is gone and was edited keeps its files, refused
    (tmp_path / "b.yml").rename(tmp_path / "c.yml")
    (tmp_path / "c.yml").write_text(GOOD.replace("grain: month", "grain: quarter"))
    result = run_main("build", str(tmp_path / "c.yml"))
    assert result.returncode == 4 and "no spec is at" in result.stderr


# ------------------------------------------------ executed on every engine

SPECS_PER_ENGINE = {"duckdb": len(HOSTILE_FILE_NAMES), "sqlite": len(HOSTILE_FILE_NAMES),
                    "spark": 1}
EVENTS = [("u1", dt.datetime(2024, 1, 7, 10), "app_opened"),
          ("u2", dt.datetime(2024, 1, 15, 9), "x")]
LIST_OBJECTS = {
    "duckdb": "SELECT schema_name || '.' || table_name FROM duckdb_tables() UNION ALL "
              "SELECT schema_name || '.' || view_name FROM duckdb_views() WHERE NOT internal",
    "sqlite": "SELECT name FROM sqlite_master WHERE type IN ('table', 'view')",
    "postgres": "SELECT table_schema || '.' || table_name FROM information_schema.tables "
                "WHERE table_schema NOT IN ('pg_catalog', 'information_schema')",
    "mysql": "SELECT CONCAT(table_schema, '.', table_name) FROM information_schema.tables "
             "WHERE table_schema NOT IN ('mysql', 'information_schema', "
             "'performance_schema', 'sys')",
    "clickhouse": "SELECT database || '.' || name FROM system.tables WHERE database NOT IN "
                  "('system', 'INFORMATION_SCHEMA', 'information_schema')",
}


def list_objects(engine, name: str) -> set[str]:
    """Every table and view outside the engine's own catalogs, lower-cased, unqualified."""
    if name == "spark":
        found = set()
        for (db,) in engine.query("SHOW DATABASES"):
            found |= {row[1] for row in engine.query(f"SHOW TABLES IN `{db}`")}
        return {n.lower() for n in found}
    return {row[0].rsplit(".", 1)[-1].lower() for row in engine.query(LIST_OBJECTS[name])}


def run_script(engine, name: str, script: str, folder: Path) -> None:
    """create_all.sql run as a user runs it: the engine's client where the suite has one
    (psql, mariadb: these obey `\\!` shell escapes), else the engine's multi-statement API,
    else the statements split by sqlglot (Spark)."""
    if name == "duckdb":
        engine._conn.execute(script)
    elif name == "sqlite":
        engine._conn.executescript(script)
    elif name == "postgres":
        _client(["psql", "-v", "ON_ERROR_STOP=1", "-X", "-q", "-h", "127.0.0.1", "-p",
                 str(engine._conn.info.port), "-U", "postgres", "-d", "postgres",
                 "-f", "create_all.sql"], folder, engine, lambda: engine._conn.execute(script))
    elif name == "mysql":
        _client(["mariadb", "--no-defaults", "-S", engine._socket, "-u", "root",
                 engine.database, "-e", "source create_all.sql"], folder, engine,
                lambda: engine.execute(_split(script, "mysql")))
    elif name == "clickhouse":
        engine.execute(_split(script, "clickhouse"))
    else:
        engine.execute(_split(script, "spark"))


def _client(command: list[str], folder: Path, engine, fallback) -> None:
    """Run the client in ``folder`` (a shell escape would write PWNED there); without the
    client installed, the engine's own multi-statement call."""
    exe = shutil.which(command[0])
    if exe is None:
        fallback()
        return
    done = subprocess.run([exe] + command[1:], cwd=folder, capture_output=True, text=True,
                          timeout=120)
    assert done.returncode == 0, done.stderr[-2000:]


def _split(script: str, dialect: str) -> list[str]:
    return _statements(script, dialect)


@pytest.mark.parametrize(("engine_name", "target"), engine_target_pairs())
def test_hostile_text_creates_nothing_but_the_views(engines, engine_name, target, tmp_path):
    """Hostile file names and a hostile `where` literal, built by the command and run as a
    user would: afterwards the engine holds the test's table and the views, nothing else,
    and no shell escape wrote a file."""
    engine = engines(engine_name)
    engine.reset()
    load_events(engine, EVENTS, "timestamp", target)
    schema = names_for(target)[1]
    if schema:
        engine._ensure_schema(schema)
    before = list_objects(engine, engine_name)
    specs = hostile_specs(target)
    # every file name on the embedded engines; on the others the first three (every line
    # break, a psql/mysql shell escape, a lone CR), which cover what the rest do; on Spark,
    # which runs no client, the first
    for index, (name, text) in enumerate(specs[:SPECS_PER_ENGINE.get(engine_name, 3)]):
        folder = tmp_path / f"spec{index}"
        folder.mkdir()
        (folder / name).write_text(text)
        result = run_main("build", str(folder / name), "--out", str(folder))
        assert result.returncode == EXIT_OK, result.stderr
        spec = parse_spec(text, name)
        views = {f"{spec.output.prefix}{v.name}" for v in planned_views(spec)}
        run_script(engine, engine_name, (folder / "create_all.sql").read_text(), folder)
        assert list_objects(engine, engine_name) == before | views, name
        assert not list((folder).glob("PWNED")), name
        assert not Path("PWNED").exists()
