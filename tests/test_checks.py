"""The run-time checks query (`sqlgen checks`), executed on every engine of the suite over
data that breaks each assumption once, and over data that breaks none."""

from __future__ import annotations

import datetime as dt
from decimal import Decimal

import pytest

from conftest import engine_target_pairs
from harness import create_views, load_events, load_revenue, names_for, revenue_table, spec_text

from sqlgen.checks import checks_sql
from sqlgen.cli import main
from sqlgen.spec import parse_spec

PAIRS = engine_target_pairs()
DAY = dt.datetime(2024, 1, 5, 10)
EPOCH = dt.datetime(1970, 1, 1)  # epoch zero: outside the default valid range
# Each activity assumption broken once: a NULL user, a NULL timestamp, a row out of range.
EVENTS = [("a", DAY), (None, DAY), ("b", None), ("c", EPOCH)]
# Each charges assumption broken once: NULL customer, NULL date, NULL amount, out of range.
CHARGES = [("x", DAY, Decimal("10.00")), (None, DAY, Decimal("5.00")),
           ("y", None, Decimal("5.00")), ("z", DAY, None), ("w", EPOCH, Decimal("5.00"))]
BROKEN = {("activity", "null_user", 1), ("activity", "null_timestamp", 1),
          ("activity", "out_of_range", 1), ("revenue", "null_customer", 1),
          ("revenue", "null_date", 1), ("revenue", "null_amount", 1),
          ("revenue", "out_of_range", 1)}


def _spec_text(target: str) -> str:
    revenue = ["revenue:", f"  table: {revenue_table(target, 'charges')}",
               "  customer: account_id", "  timestamp: charged_at", "  amount: amount"]
    text = spec_text(target)
    return text.replace("grain:", "\n".join(revenue) + "\ngrain:", 1)


def _statements(text: str) -> list[str]:
    """The file's statements as a client sends them: the header comments dropped, no final
    semicolon (a statement ends with ';' at the end of a line)."""
    body = "\n".join(line for line in text.splitlines() if not line.startswith("-- "))
    return [part.strip() for part in body.split(";\n") if part.strip()]


def _query(text: str) -> str:
    """The data statement (the file's last)."""
    return _statements(text)[-1]


def _catalog(text: str) -> str | None:
    """The catalog statement (the first of two), None where the target reads no catalog."""
    found = _statements(text)
    return found[0] if len(found) == 2 else None


@pytest.mark.engines
@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_every_broken_assumption_is_one_row(engines, engine_name, target):
    engine = engines(engine_name)
    engine.reset()
    load_events(engine, EVENTS, target=target)
    load_revenue(engine, CHARGES, target=target)
    text = _spec_text(target)
    create_views(engine, text, target)
    file_text = checks_sql(parse_spec(text, "checks.yml"), target)
    query = _query(file_text)
    rows = {(section, name, int(count)) for section, name, count in engine.query(query)}
    assert rows == BROKEN
    catalog = _catalog(file_text)
    assert (catalog is None) == (target in ("spark", "sqlite"))
    if catalog is not None:  # every column is of its declared type
        assert engine.query(catalog) == []
    # the same data with the broken rows removed: no row
    load_events(engine, EVENTS[:1], target=target)
    load_revenue(engine, CHARGES[:1], target=target)
    create_views(engine, text, target)  # reloading a table drops its views on some engines
    assert engine.query(query) == []


def test_checks_command_writes_only_its_own_file(tmp_path, capsys):
    spec = tmp_path / "growth.yml"
    spec.write_text(_spec_text("duckdb"))
    assert main(["checks", str(spec), "--dialect", "postgres"]) == 0
    printed = capsys.readouterr().out
    assert printed.startswith("-- sqlgen ") and "target postgres." in printed.splitlines()[0]
    assert ";" not in "\n".join(printed.splitlines()[:3])  # a client splitting on ; is safe
    out = tmp_path / "sqlgen_checks.sql"
    assert main(["checks", str(spec), "--out", str(out)]) == 0
    assert main(["checks", str(spec), "--out", str(out)]) == 0  # its own file: rewritten
    (tmp_path / "mine.sql").write_text("SELECT 1;\n")
    assert main(["checks", str(spec), "--out", str(tmp_path / "mine.sql")]) == 4
    assert (tmp_path / "mine.sql").read_text() == "SELECT 1;\n"
    assert names_for("duckdb")[0] in spec.read_text()


# A messy source: the timestamp and amount columns are text, one value of each unreadable.
MESSY_EVENTS = [("a", "2024-01-05 10:00:00"), ("b", "not a time")]
MESSY_CHARGES = [("x", "2024-01-05 10:00:00", "10.00"), ("y", "2024-01-05 10:00:00", "ten")]
# Where an engine stops text declared as a timestamp and an amount with its own error
# instead: when the views are created (the comparison or the SUM is refused), or when they
# are read (Spark in ANSI mode: 'not a time' cannot be cast to TIMESTAMP_NTZ).
REFUSED_WHEN = {"duckdb": "created", "postgres": "created", "clickhouse": "created",
                "spark": "read"}
WRONG_TYPE = {("activity", "wrong_type_timestamp", 1), ("revenue", "wrong_type_amount", 1)}


@pytest.mark.engines
@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_a_value_of_another_type_is_one_row_or_an_engine_error(engines, engine_name, target):
    """Text columns where the spec declares a timestamp and an amount, one value of each
    unreadable: an engine that reads such views (comparing text with a timestamp, summing
    text) gets one row per column holding a value that does not read as the declared type;
    the others stop with their own error (a clear error, never a number)."""
    engine = engines(engine_name)
    engine.reset()
    load_events(engine, MESSY_EVENTS, kind="text", target=target)
    load_revenue(engine, MESSY_CHARGES, target=target, kind="text", amount_type="text")
    text = _spec_text(target)
    file_text = checks_sql(parse_spec(text, "checks.yml"), target)
    catalog = _catalog(file_text)
    if catalog is not None:  # the catalog says so first, whatever the views do
        found = {(section, name) for section, name, _type in engine.query(catalog)}
        assert found == {("activity", "column_type_timestamp"),
                         ("revenue", "column_type_timestamp"), ("revenue", "column_type_amount")}
    query = _query(file_text)
    stage = "created"
    try:
        create_views(engine, text, target)
        stage = "read"
        rows = {(section, name, int(count)) for section, name, count in engine.query(query)}
    except Exception as err:  # the engine's own error type
        assert REFUSED_WHEN.get(target) == stage, f"{target}: {stage}: {err}"
        return
    assert target not in REFUSED_WHEN
    # SQLite keeps each value's own type: '10.00' in a TEXT column is text, not a number
    # (SUM reads it, but reads 'ten' as 0), so both amounts are of another type there.
    expected = WRONG_TYPE if target != "sqlite" else (
        WRONG_TYPE - {("revenue", "wrong_type_amount", 1)} | {("revenue", "wrong_type_amount", 2)})
    assert {row for row in rows if row[1].startswith("wrong_type_")} == expected


@pytest.mark.engines
@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_a_renamed_column_and_a_missing_table_are_catalog_rows(engines, engine_name, target):
    """The spec names occurred_at and a charges table; the warehouse has neither (the
    column was renamed after the build, the table dropped): the catalog statement names
    both columns of each, where the target has a catalog."""
    engine = engines(engine_name)
    engine.reset()
    load_events(engine, EVENTS[:1], target=target)
    text = _spec_text(target).replace("timestamp: occurred_at", "timestamp: occured_at")
    charges = revenue_table(target, "charges")
    text = text.replace(f"table: {charges}", f"table: {charges}_gone")
    catalog = _catalog(checks_sql(parse_spec(text, "checks.yml"), target))
    if catalog is None:
        assert target in ("spark", "sqlite")
        return
    rows = {tuple(row) for row in engine.query(catalog)}
    assert rows == {("activity", "missing_column_timestamp", None),
                    ("revenue", "missing_column_timestamp", None),
                    ("revenue", "missing_column_amount", None)}


# How each warehouse's information_schema.columns spells types (data_type, numeric_scale),
# from each vendor's documentation of its catalog, written here from memory; the
# executed engines' spellings are read from the engines themselves in the tests above.
SPELLINGS = {
    "snowflake": [("TIMESTAMP_NTZ", None, "timestamp"), ("TIMESTAMP_TZ", None, "timestamptz"),
                  ("TIMESTAMP_LTZ", None, "timestamptz"), ("DATE", None, "date"),
                  ("NUMBER", 2, "decimal"), ("TEXT", None, None), ("FLOAT", None, None)],
    "bigquery": [("DATETIME", None, "timestamp"), ("TIMESTAMP", None, "timestamptz"),
                 ("DATE", None, "date"), ("NUMERIC(12, 2)", None, "decimal"),
                 ("STRING", None, None), ("FLOAT64", None, None)],
    "trino": [("timestamp(3)", None, "timestamp"), ("timestamp(6) with time zone", None,
                                                    "timestamptz"),
              ("date", None, "date"), ("decimal(12,2)", None, "decimal"),
              ("varchar", None, None), ("double", None, None)],
    "tsql": [("datetime2", None, "timestamp"), ("datetime", None, "timestamp"),
             ("datetimeoffset", None, "timestamptz"), ("date", None, "date"),
             ("decimal", 2, "decimal"), ("nvarchar", None, None), ("float", None, None)],
    "redshift": [("timestamp without time zone", None, "timestamp"),
                 ("timestamp with time zone", None, "timestamptz"), ("date", None, "date"),
                 ("numeric", 2, "decimal"), ("character varying", None, None)],
    "databricks": [("TIMESTAMP_NTZ", None, "timestamp"), ("TIMESTAMP", None, "timestamptz"),
                   ("DATE", None, "date"), ("DECIMAL", 2, "decimal"), ("STRING", None, None)],
}


@pytest.mark.parametrize("target", sorted(SPELLINGS))
def test_catalog_spellings_of_the_targets_not_executed_here(target):
    """Each documented spelling is accepted for its own kind only (a DECIMAL only at
    scale 2, the declared one), and sqlgen's schema reader (sqlglot's type parser, not
    these patterns) puts it in the same kind. The conditions are evaluated by DuckDB."""
    import duckdb
    import sqlglot

    from sqlgen.dialects import CATALOG_TYPES
    from sqlgen.schema import kind_of

    rows = SPELLINGS[target]
    connection = duckdb.connect()
    connection.execute("CREATE TABLE spelt (data_type VARCHAR, numeric_scale INTEGER)")
    for kind in ("timestamp", "timestamptz", "date", "decimal"):
        for scale in (2, 3):
            condition = CATALOG_TYPES[target][kind].format(
                t="LOWER(data_type)", s="numeric_scale", scale=scale)
            sql = sqlglot.transpile(f"SELECT {condition} FROM spelt", read="duckdb",
                                    write="duckdb")[0]
            for data_type, numeric_scale, expected in rows:
                connection.execute("DELETE FROM spelt")
                connection.execute("INSERT INTO spelt VALUES (?, ?)", [data_type, numeric_scale])
                (accepted,) = connection.execute(sql).fetchone()
                wanted = expected == kind and (kind != "decimal" or scale == 2)
                assert bool(accepted) is wanted, (target, kind, scale, data_type)
    for data_type, numeric_scale, expected in rows:
        text = data_type if numeric_scale is None else f"{data_type}(12, {numeric_scale})"
        found, _scale = kind_of(text, target)
        assert (found if found in ("timestamp", "timestamptz", "date", "decimal") else None) \
            == expected, (target, data_type, found)


def test_an_unqualified_table_is_looked_up_in_the_current_schema():
    """DuckDB: app_events in main (the current schema) and a same-named table in another
    schema with the right type: only main's, where the views read it, is checked."""
    import duckdb

    text = ("version: 1\nactivity:\n  table: app_events\n  user: user_id\n"
            "  timestamp: occurred_at\ngrain: month\noutput:\n  dialect: duckdb\n")
    connection = duckdb.connect()
    connection.execute("CREATE TABLE app_events (user_id VARCHAR, occurred_at VARCHAR)")
    connection.execute("CREATE SCHEMA other; CREATE TABLE other.app_events "
                       "(user_id VARCHAR, occurred_at TIMESTAMP)")
    catalog = _catalog(checks_sql(parse_spec(text, "c.yml"), "duckdb"))
    assert connection.execute(catalog).fetchall() == [
        ("activity", "column_type_timestamp", "VARCHAR")]
    connection.execute("DROP TABLE app_events")
    assert connection.execute(catalog).fetchall() == [
        ("activity", "missing_column_timestamp", None)]
