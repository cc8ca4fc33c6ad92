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
from sqlgen import parse_spec, render_files
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


@pytest.mark.engines
@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_first_run_creates_the_missing_schema_and_every_view(engines, engine_name, target):
    engine = engines(engine_name)
    engine.reset()
    load_events(engine, EVENTS, target=target)
    schema = names_for(target)[1]
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
    engine = engines(engine_name)
    engine.reset()
    load_events(engine, EVENTS, target=target)
    schema = names_for(target)[1]
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
