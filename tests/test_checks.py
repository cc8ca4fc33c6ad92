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


def _query(text: str) -> str:
    """The file as a client sends it: the header comments dropped, no final semicolon."""
    body = "\n".join(line for line in text.splitlines() if not line.startswith("-- "))
    return body.strip().rstrip(";")


@pytest.mark.engines
@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_every_broken_assumption_is_one_row(engines, engine_name, target):
    engine = engines(engine_name)
    engine.reset()
    load_events(engine, EVENTS, target=target)
    load_revenue(engine, CHARGES, target=target)
    text = _spec_text(target)
    create_views(engine, text, target)
    query = _query(checks_sql(parse_spec(text, "checks.yml"), target))
    rows = {(section, name, int(count)) for section, name, count in engine.query(query)}
    assert rows == BROKEN
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
    query = _query(checks_sql(parse_spec(text, "checks.yml"), target))
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
