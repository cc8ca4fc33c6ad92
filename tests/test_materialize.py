"""`output.materialize: table` gives, on every executed engine, the rows of `view`.

One load per engine: activity rows with the traps of real data (NULL user and timestamp,
sentinel dates, duplicates, a mid-period start), a users table and a charges table; one
spec with every optional view (cohorts, engagement, a trailing window, an event and two
user segments, revenue) compiled twice into one schema, as views (prefix v_) and as
tables (prefix t_). Every table must hold exactly its view's rows. The views themselves
are proven against the plain-Python references in the other suites; this suite proves
that materialising them changes nothing.
"""

from __future__ import annotations

import datetime as dt
import math
from decimal import Decimal

import pytest
from conftest import engine_target_pairs
from harness import FLAT_TARGETS, names_for, read_view, revenue_table, spec_text

from sqlgen import compile_spec, parse_spec
from sqlgen.views import planned

PAIRS = engine_target_pairs()
T = dt.datetime
EVENTS = [  # (user, timestamp, platform, plan)
    ("a", T(2024, 1, 5, 10), "ios", "free"), ("a", T(2024, 1, 5, 10), "ios", "free"),
    ("a", T(2024, 3, 2, 9), "web", "free"), ("b", T(2024, 1, 31, 23, 59), "web", "pro"),
    ("b", T(2024, 2, 1, 0, 1), "web", "pro"), ("c", T(2024, 2, 14, 12), None, None),
    ("c", T(2024, 4, 1, 8), "ios", None), ("d", T(2024, 4, 3, 7), "android", "pro"),
    (None, T(2024, 2, 2, 2), "ios", "free"), ("e", None, "ios", "free"),
    ("e", T(1, 1, 1), "ios", "free"), ("e", T(9999, 12, 31), "ios", "free"),
    ("e", T(2024, 3, 30, 16), "web", "free"),
]
USERS = [("a", "ads"), ("b", None), ("c", "search"), ("c", "ads")]
CHARGES = [  # (account, charged_at, amount)
    ("a", T(2024, 1, 3), Decimal("10.00")), ("a", T(2024, 2, 3), Decimal("12.50")),
    ("b", T(2024, 1, 20), Decimal("5.00")), ("b", T(2024, 3, 20), Decimal("5.00")),
    ("c", T(2024, 2, 29), Decimal("0.00")), ("d", T(2024, 4, 1), Decimal("-3.00")),
    (None, T(2024, 2, 1), Decimal("9.99")), ("e", T(9999, 12, 31), Decimal("1.00")),
]


# Spark builds the tables of the core and revenue views only: every optional view as a
# table cost its worker about 45 s of CI (each CREATE TABLE AS runs the view's whole plan),
# and the CREATE TABLE form is the same for every view; the other engines build them all.
CORE_AND_REVENUE = ("spark",)


def spec(target: str, prefix: str, materialize: str):
    users = "users" if target in FLAT_TARGETS else "raw.users"
    optional = ("cohorts: true\nengagement: true\ntrailing_windows: [7]\n"
                "segments:\n  platform: {kind: event, column: platform}\n"
                "  plan: {kind: user, column: plan}\n"
                f"  channel: {{kind: user, column: channel, table: {users}, key: user_id}}\n")
    extra = ("" if target in CORE_AND_REVENUE else optional) + (
             f"revenue:\n  table: {revenue_table(target, 'charges')}\n"
             "  customer: account_id\n  timestamp: charged_at\n  amount: amount\n")
    text = spec_text(target, extra=extra).replace(
        "output:\n", f"output:\n  prefix: {prefix}\n  materialize: {materialize}\n")
    return parse_spec(text, f"{materialize}.yml")


def load(engine, target: str) -> None:
    engine.reset()
    users = "users" if target in FLAT_TARGETS else "raw.users"
    engine.create_table(names_for(target)[0],
                        [("user_id", "text"), ("occurred_at", "timestamp"),
                         ("event_name", "text"), ("platform", "text"), ("plan", "text")],
                        [(u, ts, "app_opened", p, plan) for u, ts, p, plan in EVENTS])
    engine.create_table(users, [("user_id", "text"), ("channel", "text")], USERS)
    engine.create_table(revenue_table(target, "charges"),
                        [("account_id", "text"), ("charged_at", "timestamp"),
                         ("amount", "decimal(12,2)")], CHARGES)


def create(engine, target: str, compiled) -> None:
    schema = names_for(target)[1]
    if schema:
        engine._ensure_schema(schema)
    for view in compiled:
        engine.execute(list(view.statements))


def comparable(rows: list[dict]) -> list[tuple]:
    """Rows as sortable tuples: floats to 12 significant digits, NULL first."""
    def value(v):
        if isinstance(v, float):
            return (1, float(f"{v:.12g}") if math.isfinite(v) else str(v))
        return (0, "") if v is None else (1, v)
    return sorted((tuple(value(v) for v in row.values()) for row in rows), key=repr)


@pytest.mark.engines
@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_every_table_holds_its_views_rows(engines, engine_name, target):
    engine = engines(engine_name)
    load(engine, target)
    views = compile_spec(spec(target, "v_", "view"), target)
    tables = compile_spec(spec(target, "t_", "table"), target)
    assert all(s.startswith("CREATE TABLE") or "INTO" in s for c in tables
               for s in c.statements[1:])
    create(engine, target, views)
    create(engine, target, tables)
    names = [view.name for _part, view in planned(spec(target, "v_", "view"))]
    # every optional view is in the comparison (the core and revenue ones on Spark)
    assert len(names) >= (7 if target in CORE_AND_REVENUE else 14), names
    for name in names:
        from_view = read_view(engine, f"v_{name}", target)
        from_table = read_view(engine, f"t_{name}", target)
        assert from_view, name  # a comparison of two empty results proves nothing
        assert list(from_table[0]) == list(from_view[0]), name  # same columns, same order
        assert comparable(from_table) == comparable(from_view), name


# ---------------------------------------------------------------- the spec keys

BASE = ("version: 1\nactivity:\n  table: raw.app_events\n  user: user_id\n"
        "  timestamp: occurred_at\noutput:\n")


def problems(lines: str) -> list[str]:
    from sqlgen import SpecError

    with pytest.raises(SpecError) as info:
        parse_spec(BASE + lines, "s.yml")
    return [str(p) for p in info.value.problems]


@pytest.mark.parametrize("lines,expected", [
    ("  materialize: tabel\n", "s.yml:7:16: output.materialize: 'tabel' is not one of view, "
     "table, incremental. Did you mean 'table'?"),
    ("  lookback: 3\n", "s.yml:7:13: output.lookback: expected a length such as 3 days or "
     "1 week, got 3"),
    ("  lookback: 3 hours\n", "s.yml:7:13: output.lookback: expected a length such as 3 days "
     "or 1 week, got '3 hours'"),
    ("  lookback: 53 weeks\n", "s.yml:7:13: output.lookback: 371 days is longer than 366 "
     "days; a lookback that long is a full rebuild (create_all.sql)"),
])
def test_bad_materialize_keys_are_located(lines, expected):
    assert problems(lines) == [expected]


@pytest.mark.parametrize("text,days", [("", 3), ("  lookback: 0 days\n", 0),
                                       ("  lookback: 1 day\n", 1), ("  lookback: 2 weeks\n", 14)])
def test_lookback_is_days(text, days):
    assert parse_spec(BASE + "  materialize: incremental\n" + text).output.lookback == days


def test_views_keep_their_spec_hash_and_bytes():
    """The default is `view`, written or not: same hash, same files (goldens pin the rest)."""
    from sqlgen import render_files

    plain = parse_spec(BASE + "  dialect: duckdb\n")
    written = parse_spec(BASE + "  dialect: duckdb\n  materialize: view\n  lookback: 3 days\n")
    table = parse_spec(BASE + "  dialect: duckdb\n  materialize: table\n")
    assert plain.digest() == written.digest() != table.digest()
    assert render_files(plain) == render_files(written)
    assert "CREATE TABLE" not in "".join(render_files(plain).values())


def test_table_form_per_target():
    """Each target's CREATE TABLE ... AS form (the engines run the executed ones above)."""
    from sqlgen import render_files

    found = {}
    for target in ("duckdb", "clickhouse", "spark", "databricks", "tsql", "bigquery"):
        text = BASE + f"  dialect: {target}\n  materialize: table\n"
        found[target] = render_files(parse_spec(text))["growth_accounting.sql"]
    assert "CREATE TABLE growth_accounting AS" in found["duckdb"]
    assert "ENGINE=MergeTree\nORDER BY tuple() AS" in found["clickhouse"]
    assert "USING PARQUET AS" in found["spark"]
    assert "USING PARQUET" not in found["databricks"]  # Delta, its default
    assert "INTO growth_accounting" in found["tsql"]
    assert all("DROP TABLE IF EXISTS" in text for text in found.values())
    assert all("output.materialize: table" in text for text in found.values())


def test_lookback_without_incremental_is_a_located_warning():
    spec = parse_spec(BASE + "  materialize: table\n  lookback: 2 days\n", "s.yml")
    assert [str(w) for w in spec.warnings] == [
        "s.yml:8:13: output.lookback: warning: has no effect with materialize: table; it sets "
        "how far refresh.sql reads back for materialize: incremental only. Remove it or set "
        "materialize: incremental"]
