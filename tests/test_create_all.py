"""create_all.sql run as one script, the way a user runs it, on every engine of the suite.

A first run creates the missing schema and every view; a run that fails part-way leaves a
target with transactional DDL as it was (no view, no schema), and leaves the documented
state elsewhere (what ran before the failure stays: each statement applies on its own).
Which targets are transactional is ``Target.no_ddl_transaction`` in sqlgen/dialects.py.
"""

from __future__ import annotations

import datetime as dt
import re
import shutil
import subprocess

import pytest

from conftest import engine_target_pairs
from harness import load_events, names_for, spec_text
from sqlglot import exp

from sqlgen import compile_spec, parse_spec, render_files
from sqlgen.dialects import TARGETS
from sqlgen.views import planned_views

PAIRS = engine_target_pairs()
EVENTS = [("a", dt.datetime(2024, 1, 5, 10)), ("a", dt.datetime(2024, 2, 7, 9)),
          ("b", dt.datetime(2024, 2, 1, 8))]
# Statements in create_all.sql end at a line ending in ';' (no view has such a line inside).
STATEMENT_END = re.compile(r";\n", re.MULTILINE)


def _spec(target: str):
    # engagement adds a fifth view: one after the failing fourth, that must not be created
    return parse_spec(spec_text(target, extra="engagement: true\n"), "create_all.yml")


def _script(target: str) -> str:
    return render_files(_spec(target), target)["create_all.sql"]


def _run_script(engine, target: str, script: str) -> None:
    """Run the whole file as its engine's usual client does; raise on failure. What a
    client does on disconnect (roll back an open transaction) is done after a failure."""
    name = engine.name
    if name == "mysql":  # the mariadb client stops at the first error (no --force)
        client = shutil.which("mariadb") or shutil.which("mysql")
        done = subprocess.run([client, "--no-defaults", f"--socket={engine._socket}", "-uroot",
                               engine.database], input=script, capture_output=True, text=True)
        if done.returncode:
            raise RuntimeError(done.stderr)
        return
    try:
        if name == "sqlite":
            engine._conn.executescript(script)
        elif name in ("duckdb", "postgres"):
            engine._conn.execute(script)  # one multi-statement string
        else:  # spark, clickhouse: no multi-statement call; in order, up to the first error
            for statement in STATEMENT_END.split(script):
                if statement.strip() and not _only_comments(statement):
                    engine._exec(statement)
    except Exception:
        _disconnect_rollback(engine)
        raise


def _only_comments(text: str) -> bool:
    return all(not line.strip() or line.lstrip().startswith("--") for line in text.splitlines())


def _disconnect_rollback(engine) -> None:
    if engine.name in ("duckdb", "postgres", "sqlite"):
        try:
            engine._conn.execute("ROLLBACK")
        except Exception:
            pass  # no transaction was open


CATALOG = {
    "duckdb": ("SELECT table_name FROM information_schema.tables WHERE table_schema = '{s}'",
               "SELECT schema_name FROM information_schema.schemata WHERE schema_name = '{s}'"),
    "postgres": ("SELECT table_name FROM information_schema.tables WHERE table_schema = '{s}'",
                 "SELECT schema_name FROM information_schema.schemata "
                 "WHERE schema_name = '{s}'"),
    "mysql": ("SELECT table_name FROM information_schema.tables WHERE table_schema = '{s}'",
              "SELECT schema_name FROM information_schema.schemata WHERE schema_name = '{s}'"),
    "clickhouse": ("SELECT name FROM system.tables WHERE database = '{s}'",
                   "SELECT name FROM system.databases WHERE name = '{s}'"),
    "spark": ("SHOW TABLES IN {s}", "SHOW DATABASES LIKE '{s}'"),
    "sqlite": ("SELECT name FROM sqlite_master WHERE type IN ('table', 'view') "
               "AND name <> 'app_events'", None),
}


def _objects(engine, schema: str | None) -> set[str]:
    """Tables and views in the views' schema (SQLite: in main, besides the source table)."""
    if schema is not None and not _schema_exists(engine, schema):
        return set()
    rows = engine.query(CATALOG[engine.name][0].format(s=schema))
    # Spark's SHOW TABLES gives (namespace, name, is temporary)
    return {str(row[1] if engine.name == "spark" else row[0]) for row in rows}


def _schema_exists(engine, schema: str) -> bool:
    return bool(engine.query(CATALOG[engine.name][1].format(s=schema)))


def _view_names(target: str) -> list[str]:
    return [view.name for view in planned_views(_spec(target))]


def _loaded(engines, engine_name: str, target: str):
    """The engine, emptied and holding only the activity table; and the views' schema."""
    engine = engines(engine_name)
    engine.reset()
    load_events(engine, EVENTS, target=target)
    return engine, names_for(target)[1]


@pytest.mark.engines
@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_first_run_creates_the_missing_schema_and_every_view(engines, engine_name, target):
    engine, schema = _loaded(engines, engine_name, target)
    assert schema is None or not _schema_exists(engine, schema)
    _run_script(engine, target, _script(target))
    _run_script(engine, target, _script(target))  # and again: nothing is in the way
    assert _objects(engine, schema) == set(_view_names(target))
    where = f"{schema}." if schema else ""
    rows = engine.query(f"SELECT active_users FROM {where}growth_accounting "
                        "ORDER BY period_start")
    assert [row[0] for row in rows] == [1, 2]  # January: a; February: a and b


@pytest.mark.engines
@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_a_failing_fourth_view_leaves_the_documented_state(engines, engine_name, target):
    """A table where the fourth view goes: CREATE (OR REPLACE) VIEW fails on it."""
    engine, schema = _loaded(engines, engine_name, target)
    views = _view_names(target)
    assert len(views) >= 5  # views after the failing one exist, and must not be created
    blocker = f"{schema}.{views[3]}" if schema else views[3]
    engine.create_table(blocker, [("kept", "integer")], [(7,)])
    with pytest.raises(Exception):
        _run_script(engine, target, _script(target))
    left = _objects(engine, schema)
    if TARGETS[target].no_ddl_transaction:  # statements before the failure stay
        assert left == {*views[:3], views[3]}
    else:
        assert left == {views[3]}, "a failed run must leave no view behind"
    assert engine.query(f"SELECT kept FROM {engine.qualified(blocker)}") == [(7,)]


SCHEMA_PAIRS = [p for p in PAIRS if names_for(p.values[1])[1] is not None]


@pytest.mark.engines
@pytest.mark.parametrize("engine_name,target", SCHEMA_PAIRS)
def test_a_failing_run_creates_no_schema_where_ddl_is_transactional(engines, engine_name,
                                                                    target):
    """The activity table is missing: the first view fails, right after CREATE SCHEMA."""
    engine = engines(engine_name)
    engine.reset()
    schema = names_for(target)[1]
    with pytest.raises(Exception):
        _run_script(engine, target, _script(target))
    created = _schema_exists(engine, schema)
    assert created == bool(TARGETS[target].no_ddl_transaction)
    assert _objects(engine, schema) == set()


def _schema_spec(target: str):
    return parse_spec(spec_text(target, extra="engagement: true\n"), "create_all.yml")


@pytest.mark.parametrize("target", TARGETS)
def test_one_transaction_exactly_where_the_targets_table_says(target):
    """BEGIN first and COMMIT last (in the target's spelling) on transactional DDL; neither
    elsewhere. The schema is created before the first view."""
    spec = _schema_spec(target)
    text = render_files(spec, target)["create_all.sql"]
    dialect = TARGETS[target].sqlglot_dialect
    begin = exp.Transaction().sql(dialect) + ";"
    commit = exp.Commit().sql(dialect) + ";"
    body = [block for block in text.rstrip("\n").split("\n\n") if not _only_comments(block)]
    lines = text.splitlines()
    if TARGETS[target].no_ddl_transaction:
        assert begin not in lines and commit not in lines
        assert "-- Not one transaction: " in text
    else:
        first = 1 if TARGETS[target].exec_batch else 0
        assert body[first] == begin and body[-1] == commit
        assert lines.count(begin) == 1 and lines.count(commit) == 1
    schema = [i for i, block in enumerate(body) if "SCHEMA" in block or "DATABASE" in block]
    views = [i for i, block in enumerate(body) if "CREATE " in block and " VIEW " in block]
    if target == "sqlite":
        assert schema == []
    else:
        assert len(schema) == 1 and schema[0] < views[0]


def test_tsql_runs_each_view_through_sp_executesql_in_one_batch():
    """CREATE VIEW must begin a T-SQL batch: inside one transaction (one batch) each view
    runs as EXECUTE sp_executesql N'...', exactly the statement of its own file."""
    import sqlglot

    spec = _schema_spec("tsql")
    text = render_files(spec, "tsql")["create_all.sql"]
    assert "\nGO\n" not in text
    assert text.split("\n\n")[1:3] == ["SET XACT_ABORT ON;", "BEGIN TRANSACTION;"]
    inner = [s.replace("''", "'") for s in
             re.findall(r"^EXECUTE sp_executesql N'((?:[^']|'')*)';$", text, re.MULTILINE)]
    expected = [s for view in compile_spec(spec, "tsql") for s in view.statements]
    assert inner == expected and len(inner) == len(_view_names("tsql"))
    for statement in inner:
        assert sqlglot.parse_one(statement, read="tsql").sql("tsql") is not None
    assert "IF NOT EXISTS (SELECT * FROM INFORMATION_SCHEMA.SCHEMATA WHERE SCHEMA_NAME = " \
           "'growth') EXEC('CREATE SCHEMA [growth]');" in text
