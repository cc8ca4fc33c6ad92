"""Hostile ``where`` filters: nothing but a plain condition gets into a view.

Every refused case exits 3 (sqlgen/errors.py) with a one-line message located at the
filter's ``file:line:col``, naming the function or the problem, and no traceback; a build
that fails writes nothing. The cases run in this process through ``sqlgen.cli.main`` (a
few through the installed command, to cover the real entry point). The injection attempts
that *are* accepted, because they are one plain string literal, are executed on every
engine: the view keeps exactly the rows Python keeps and the source table is intact.
"""

from __future__ import annotations

import contextlib
import io
import subprocess
from pathlib import Path

import pytest

from conftest import engine_target_pairs
from harness import load_events, names_for, read_view, view_statements
from hostile import EXIT_SPEC, assert_refused, run_cli
from sqlgen import cli, compile_spec, parse_spec
from sqlgen.dialects import TARGETS
from sqlgen.filters import parse_filter
from sqlgen.support import require_support

SPEC = """\
version: 1
activity:
  table: app_events
  user: user_id
  timestamp: occurred_at
  where: {where}
{extra}output:
  dialect: {dialect}
"""
WHERE_AT = "s.yml:6:10: activity.where: "


def write_spec(folder: Path, where: str, dialect: str = "duckdb", extra: str = "") -> Path:
    """A spec whose filter is a YAML single-quoted scalar (only ' is doubled)."""
    path = folder / "s.yml"
    quoted = "'" + where.replace("'", "''") + "'"
    path.write_text(SPEC.format(where=quoted, dialect=dialect, extra=extra), encoding="utf-8")
    return path


def run_main(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    """``sqlgen.cli.main`` in this process, its result shaped like run_cli's."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err), \
            contextlib.chdir(cwd):
        code = cli.main(list(args))
    return subprocess.CompletedProcess(list(args), code, out.getvalue(), err.getvalue())


# (id, where, spec dialect, words the message must hold)
FUNCTIONS = [
    ("pg_read_file", "pg_read_file('/etc/passwd') <> ''", "postgres", ("pg_read_file()",)),
    ("pg_read_file-duckdb", "pg_read_file('/etc/passwd') <> ''", "duckdb", ("pg_read_file()",)),
    ("pg_read_binary_file", "pg_read_binary_file('/etc/passwd') IS NULL", "postgres",
     ("pg_read_binary_file()",)),
    ("pg_sleep", "pg_sleep(10) IS NULL", "postgres", ("pg_sleep()",)),
    ("pg_sleep-redshift", "pg_sleep(10) IS NULL", "redshift", ("pg_sleep()",)),
    ("current_setting", "current_setting('data_directory') <> ''", "postgres",
     ("current_setting()",)),
    ("dblink", "dblink('host=x', 'select 1') IS NULL", "postgres", ("dblink()",)),
    ("load_file", "LOAD_FILE('/etc/passwd') <> ''", "mysql", ("LOAD_FILE()",)),
    ("sleep-mysql", "sleep(5) = 0", "mysql", ("sleep()",)),
    ("benchmark-mysql", "benchmark(100000000, 1) = 0", "mysql", ("benchmark()",)),
    ("read_csv", "read_csv('/etc/passwd') IS NULL", "duckdb", ("READ_CSV()",)),
    ("read_text", "read_text('/etc/passwd') IS NULL", "duckdb", ("read_text()",)),
    ("read_parquet", "read_parquet('x.parquet') IS NULL", "duckdb", ("READ_PARQUET()",)),
    ("query", "query('SELECT 1') IS NULL", "duckdb", ("query()",)),
    ("sleep_ms", "sleep_ms(10000) IS NULL", "duckdb", ("sleep_ms()",)),
    ("getenv", "getenv('HOME') <> ''", "duckdb", ("getenv()",)),
    ("load_extension", "load_extension('evil.so') IS NULL", "sqlite", ("load_extension()",)),
    ("reflect", "reflect('java.lang.Thread', 'sleep', 1000) IS NULL", "spark", ("reflect()",)),
    ("java_method", "java_method('java.lang.Thread', 'sleep', 1000) IS NULL", "databricks",
     ("java_method()",)),
    ("clickhouse-file", "file('/etc/passwd') <> ''", "clickhouse", ("file()",)),
    ("clickhouse-url", "url('http://example.invalid/x') <> ''", "clickhouse", ("url()",)),
    ("xp_cmdshell", "xp_cmdshell('dir') = 0", "tsql", ("xp_cmdshell()",)),
    ("product", "product(amount) > 1", "duckdb", ("product()",)),
    ("histogram", "histogram(event_name) IS NULL", "duckdb", ("histogram()",)),
    ("random", "random() < 0.5", "duckdb", ("RAND()",)),
    ("uuid", "uuid() IS NULL", "duckdb", ("UUID()",)),
    ("md5", "md5(event_name) = 'x'", "postgres", ("MD5()",)),
    ("count", "count(*) > 1", "duckdb", ("aggregate", "COUNT()")),
    ("sum", "sum(amount) > 1", "duckdb", ("aggregate", "SUM()")),
    ("max-mysql", "max(amount) > 1", "mysql", ("aggregate", "MAX()")),
    ("row_number", "row_number() OVER (ORDER BY occurred_at) = 1", "duckdb", ("window",)),
    ("lag", "lag(event_name) OVER (ORDER BY occurred_at) IS NULL", "postgres", ("window",)),
    ("generate_series", "generate_series(1, 2) IS NULL", "postgres", ("GENERATE_SERIES",)),
    ("unnest", "unnest([1, 2]) = 1", "duckdb", ("table function",)),
    ("explode", "explode(array(1, 2)) = 1", "spark", ("table function", "EXPLODE()")),
    ("greatest", "greatest(amount, 1) > 1", "duckdb", ("GREATEST()",)),
    ("session-variable-mysql", "@@version = '1'", "mysql", ("SESSIONPARAMETER",)),
    ("server-variable-tsql", "user_id = @@SPID", "tsql", ("parameter",)),
    ("current_user", "user_id = current_user", "duckdb", ("CURRENT_USER()",)),
    ("user-mysql", "user_id = user()", "mysql", ("user()",)),
    ("version-mysql", "version() = '1'", "mysql", ("VERSION()",)),
    ("current_schema", "current_schema() = 'x'", "duckdb", ("CURRENT_SCHEMA()",)),
    ("qualified-function", "pg_catalog.pg_sleep(1) IS NULL", "postgres", ("DOT",)),
    ("regclass-cast", "'pg_authid'::regclass IS NULL", "postgres", ("a cast to REGCLASS",)),
    ("array-cast", "CAST(amount AS INT[]) IS NULL", "duckdb", ("a cast to ARRAY",)),
    ("json-arrow", "payload -> 'a' = 1", "duckdb", ("JSON",)),
    ("collate", "event_name = 'a' COLLATE NOCASE", "duckdb", ("COLLATE",)),
    ("struct", "payload = {'a': 1}", "duckdb", ("STRUCT()",)),
    ("regexp-postgres", "event_name ~ 'a.*'", "postgres", ("REGEXP_LIKE()",)),
]

INJECTIONS = [
    ("second-statement", "1=1; DROP TABLE app_events", "duckdb", ("single expression",)),
    ("second-statement-mysql", "1=1; DROP TABLE app_events", "mysql", ("single expression",)),
    ("unbalanced-quote-paren", "'') OR (1=1", "duckdb", ("not a valid duckdb expression",)),
    ("line-comment", "event_name = 'a' -- AND 1=0", "duckdb", ("comments are not allowed",)),
    ("block-comment", "event_name /* x */ = 'a'", "duckdb", ("comments are not allowed",)),
    ("nested-comment", "event_name = 'a' /* /* */ OR 1=1 */", "postgres",
     ("comments are not allowed",)),
    ("hash-comment-mysql", "event_name = 'a' # OR 1=1", "mysql", ("comments are not allowed",)),
    ("mysql-escaped-quote-in-postgres", "event_name = 'x\\' OR 1=1 -- '", "postgres",
     ("comments are not allowed",)),
    ("mysql-unterminated", "event_name = 'a\\'", "mysql", ("string left open",)),
    ("clickhouse-unterminated", "event_name = 'a\\'", "clickhouse", ("string left open",)),
    ("dollar-string", "event_name = $$a$$", "postgres", ("$$",)),
    ("escape-string", "event_name = E'a\\nb'", "postgres", ("escape",)),
    ("national-string", "event_name = N'a'", "tsql", ("N'...'",)),
    ("alias", "event_name = 'a' AS x", "duckdb", ("alias",)),
    ("subquery", "event_name IN (SELECT name FROM secrets)", "duckdb", ("subquery",)),
    ("exists", "EXISTS (SELECT 1 FROM secrets)", "duckdb", ("subquery",)),
    ("scalar-subquery", "(SELECT max(x) FROM secrets) > 1", "duckdb", ("subquery",)),
    ("other-table", "secrets.x = 1", "duckdb", ("names a table",)),
    ("reserved-name", "sqlgen_ts > 1", "duckdb", ("reserved",)),
    ("star", "* = 1", "duckdb", ("",)),
    ("placeholder", "event_name = ?", "duckdb", ("placeholder",)),
    ("parameter", "event_name = @x", "tsql", ("parameter",)),
    ("bracket-injection-tsql", "[a]; DROP TABLE x; --] = 1", "tsql", ("",)),
    ("unicode-quotes", "event_name = \u2019x\u2019", "duckdb", ("not a plain name",)),
    ("not-a-condition", "'a'", "duckdb", ("must be a condition",)),
    ("interval-on-column", "occurred_at + INTERVAL 1 DAY > CURRENT_DATE", "duckdb",
     ("may only be added",)),
    ("interval-fraction", "occurred_at > CURRENT_DATE - INTERVAL '1.5' DAY", "duckdb",
     ("whole number",)),
    ("hours-on-date", "occurred_at > CURRENT_DATE - INTERVAL 2 HOUR", "duckdb",
     ("hours, minutes and seconds",)),
    ("extract-dow", "EXTRACT(DOW FROM occurred_at) = 1", "duckdb", ("takes one of",)),
    ("trunc-week", "date_trunc('week', occurred_at) = DATE '2024-01-01'", "duckdb",
     ("takes one of",)),
    ("division", "amount / 2 > 1", "duckdb", ("division is not allowed",)),
    ("division-mysql", "amount / 2 > 1", "mysql", ("division is not allowed",)),
    ("date_sub-on-column-mysql", "DATE_SUB(occurred_at, INTERVAL 1 DAY) > NOW()", "mysql",
     ("may only be added",)),
]

NESTING = [
    ("nested-60", "(" * 60 + "a = 1" + ")" * 60, "duckdb", ("nested too deeply",)),
    ("nested-1000", "(" * 1000 + "a = 1" + ")" * 1000, "duckdb", ("nested too deeply",)),
    ("nested-60-mysql", "(" * 60 + "a = 1" + ")" * 60, "mysql", ("nested too deeply",)),
    ("not-1000", "NOT " * 1000 + "a = 1", "duckdb", ("",)),
    ("minus-1000", "-" * 600 + "a = 1", "duckdb", ("",)),
    ("long-or-chain", " OR ".join(["a = 1"] * 200), "duckdb", ("too long",)),
]

REFUSED = FUNCTIONS + INJECTIONS + NESTING


@pytest.mark.parametrize("name,where,dialect,mentions", REFUSED, ids=[c[0] for c in REFUSED])
def test_refused_filter(tmp_path, name, where, dialect, mentions):
    write_spec(tmp_path, where, dialect)
    result = run_main("validate", "s.yml", cwd=tmp_path)
    assert_refused(result, EXIT_SPEC, mentions=tuple(m for m in mentions if m))
    assert result.stderr.startswith(WHERE_AT), result.stderr
    assert len(result.stderr.strip().splitlines()) == 1, result.stderr


# (id, where written in duckdb, target that lacks it, words the message must hold)
TARGET_GAPS = [
    ("starts_with-sqlite", "starts_with(event_name, 'a')", "sqlite", "STARTS_WITH"),
    ("starts_with-mysql", "starts_with(event_name, 'a')", "mysql", "STARTS_WITH"),
    ("starts_with-tsql", "starts_with(event_name, 'a')", "tsql", "STARTS_WITH"),
    ("starts_with-redshift", "starts_with(event_name, 'a')", "redshift", "STARTS_WITH"),
    ("ilike-tsql", "event_name ILIKE 'a%'", "tsql", "ILIKE"),
    ("length-tsql", "length(event_name) > 2", "tsql", "LENGTH"),
    ("concat-sqlite", "concat(event_name, 'x') = 'ax'", "sqlite", "CONCAT"),
    ("left-sqlite", "left(event_name, 2) = 'ap'", "sqlite", "LEFT"),
    ("try_cast-postgres", "TRY_CAST(event_name AS INTEGER) > 1", "postgres", "TRY_CAST"),
    ("try_cast-mysql", "TRY_CAST(event_name AS INTEGER) > 1", "mysql", "TRY_CAST"),
    ("date_trunc-sqlite", "date_trunc('month', occurred_at) = DATE '2024-01-01'", "sqlite",
     "TIMESTAMP_TRUNC"),
    ("months-sqlite", "occurred_at > CURRENT_DATE - INTERVAL 3 MONTH", "sqlite",
     "INTERVAL MONTH"),
    ("years-sqlite", "occurred_at > CURRENT_DATE - INTERVAL '1 year'", "sqlite",
     "INTERVAL YEAR"),
]


@pytest.mark.parametrize("name,where,target,feature", TARGET_GAPS,
                         ids=[c[0] for c in TARGET_GAPS])
def test_refused_for_the_target_that_lacks_it(tmp_path, name, where, target, feature):
    write_spec(tmp_path, where)
    result = run_main("build", "s.yml", "--dialect", target, "--out", "out", "--jobs", "1",
                      cwd=tmp_path)
    assert_refused(result, EXIT_SPEC, mentions=(f"dialect '{target}' cannot express",
                                                 feature, "activity.where"))
    assert WHERE_AT in result.stderr
    assert not (tmp_path / "out").exists(), "a failed build must write nothing"
    spec = parse_spec((tmp_path / "s.yml").read_text(), "s.yml")
    require_support(spec, TARGETS["duckdb"], [])  # the spec's own dialect has it


# allow_functions: a named function passes through verbatim; others are still refused
ALLOW = "allow_functions: [is_internal_account]\n"


def test_allow_functions_admits_the_named_function_only(tmp_path):
    write_spec(tmp_path, "NOT is_internal_account(user_id)", extra=ALLOW)
    spec = parse_spec((tmp_path / "s.yml").read_text(), "s.yml")
    text = " ".join("\n".join(c.text for c in compile_spec(spec, "postgres")).split())
    assert 'NOT IS_INTERNAL_ACCOUNT("user_id")' in text
    write_spec(tmp_path, "NOT is_internal_account(user_id) AND pg_sleep(1) IS NULL",
               "postgres", extra=ALLOW)
    result = run_main("validate", "s.yml", cwd=tmp_path)
    assert_refused(result, EXIT_SPEC, mentions=("pg_sleep()",))


@pytest.mark.parametrize("listed,message", [
    ("[md5]", "'md5' is a function sqlgen's parser knows"),
    ("[count]", "'count' is a function sqlgen's parser knows"),
    ("['pg_sleep(1)']", "is not a function name"),
    ("[f, F]", "'F' appears more than once"),
    ("is_internal", "expected a list of function names"),
])
def test_allow_functions_names_are_checked(tmp_path, listed, message):
    write_spec(tmp_path, "event_name = 'a'", extra=f"allow_functions: {listed}\n")
    result = run_main("validate", "s.yml", cwd=tmp_path)
    assert_refused(result, EXIT_SPEC, mentions=("allow_functions: ", message))


@pytest.mark.parametrize("where,dialect", [
    ("(" * 1000 + "a = 1" + ")" * 1000, "duckdb"),
    ("NOT " * 1000 + "a = 1", "postgres"),
    ("event_name = 'a\\'", "mysql"),
    ("event_name = 'a' # OR 1=1", "mysql"),
    ("pg_read_file('/etc/passwd') <> ''", "postgres"),
])
def test_refused_by_the_installed_command(tmp_path, where, dialect):
    write_spec(tmp_path, where, dialect)
    assert_refused(run_cli("build", "s.yml", "--out", "out", cwd=tmp_path), EXIT_SPEC)
    assert not (tmp_path / "out").exists()


# Accepted: each is one string literal. (id, literal in the spec's dialect, that dialect,
# the literal's value)
LITERALS = [
    ("mysql-backslash-quote", "'x\\' OR 1=1 -- '", "mysql", "x' OR 1=1 -- "),
    ("mysql-backslash-backslash", "'a\\\\b'", "mysql", "a\\b"),
    ("doubled-quote", "'x'' OR 1=1 -- '", "duckdb", "x' OR 1=1 -- "),
    ("statement-in-string", "'; DROP TABLE app_events; --'", "duckdb",
     "; DROP TABLE app_events; --"),
    ("unicode-quote-in-string", "'\u2019) OR (1=1'", "duckdb", "\u2019) OR (1=1"),
    ("comment-in-string", "'*/ DROP TABLE app_events /*'", "postgres",
     "*/ DROP TABLE app_events /*"),
    ("backslash-in-standard-string", "'a\\b'", "postgres", "a\\b"),
]
HOSTILE_ROWS = [(f"u{i}", f"2024-01-0{i + 1} 10:00:00", value)
                for i, value in enumerate(sorted({v for *_, v in LITERALS}))]
HOSTILE_ROWS.append(("u9", "2024-01-09 10:00:00", "x"))


def _literal_filters() -> list[tuple[str, str, set[str]]]:
    """One filter per spec dialect, ``event_name IN (...)`` of its literals: (where,
    dialect, the values it must keep). A literal read as anything but its one value loses
    its row (or, read as code, keeps others)."""
    dialects = sorted({dialect for _, _, dialect, _ in LITERALS})
    return [(f"event_name IN ({', '.join(lit for _, lit, d, _ in LITERALS if d == dialect)})",
             dialect, {v for _, _, d, v in LITERALS if d == dialect}) for dialect in dialects]


def test_each_literal_is_one_string_value():
    for name, literal, dialect, value in LITERALS:
        tree = parse_filter(f"event_name = {literal}", dialect)
        assert tree.expression.this == value, name


@pytest.mark.parametrize("engine_name,target", engine_target_pairs())
def test_accepted_literals_execute_as_one_string(engines, engine_name, target):
    import datetime as dt

    engine = engines(engine_name)
    engine.reset()
    rows = [(u, dt.datetime.fromisoformat(ts), v) for u, ts, v in HOSTILE_ROWS]
    load_events(engine, rows, "timestamp", target)
    table, schema = names_for(target)
    if schema:
        engine._ensure_schema(schema)
    for number, (where, dialect, values) in enumerate(_literal_filters()):
        text = SPEC.format(where="'" + where.replace("'", "''") + "'", dialect=dialect,
                           extra="grain: day\n").replace("table: app_events", f"table: {table}")
        text += f"  prefix: h{number}_\n" + (f"  schema: {schema}\n" if schema else "")
        engine.execute(list(view_statements(text, target, "user_activity", "s.yml")))
        users = [r["user_id"] for r in read_view(engine, f"h{number}_user_activity", target)]
        assert sorted(users) == [u for u, _ts, v in rows if v in values], where
    assert len(engine.query(f"SELECT user_id FROM {engine.qualified(table)}")) == len(rows)


REVENUE_SPEC = """\
version: 1
revenue:
  table: charges
  customer: account_id
  timestamp: charged_at
  amount: amount
  where: {where}
output:
  dialect: duckdb
"""


@pytest.mark.parametrize("where,args,mentions", [
    ("pg_sleep(1) IS NULL", (), ("s.yml:7:10: revenue.where: ", "pg_sleep()")),
    ("starts_with(currency, 'E')", ("--dialect", "sqlite"),
     ("s.yml:7:10: revenue.where: dialect 'sqlite' cannot express STARTS_WITH",)),
])
def test_revenue_filter_is_checked_the_same_way(tmp_path, where, args, mentions):
    quoted = "'" + where.replace("'", "''") + "'"
    (tmp_path / "s.yml").write_text(REVENUE_SPEC.format(where=quoted))
    result = run_main("build", "s.yml", "--out", "out", "--jobs", "1", *args, cwd=tmp_path)
    assert_refused(result, EXIT_SPEC, mentions=mentions)
    assert not (tmp_path / "out").exists()
