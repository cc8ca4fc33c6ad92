"""Run sqlgen's generated views on a test engine and read the results back as dicts."""

from __future__ import annotations

import datetime as dt
import math
import textwrap

from sqlgen import compile_spec, parse_spec

ACTIVITY_TABLE = "raw.app_events"
VIEW_SCHEMA = "growth"
# A SQLite view cannot read another attached database, so there everything lives in main.
FLAT_TARGETS = {"sqlite"}


def names_for(target: str) -> tuple[str, str | None]:
    """(activity table, view schema) used for a target in the tests."""
    if target in FLAT_TARGETS:
        return "app_events", None
    return ACTIVITY_TABLE, VIEW_SCHEMA
DATE_COLUMNS = {"period_start", "first_active_date", "last_active_date", "cohort_start", "day"}


def spec_text(target: str, grain: str = "month", week_start: str = "monday",
              kind: str = "timestamp", timezone: str | None = None,
              where: str | None = None, extra: str = "") -> str:
    """A spec over the test activity table raw.app_events(user_id, occurred_at, event_name)."""
    table, schema = names_for(target)
    lines = [
        "version: 1",
        "activity:",
        f"  table: {table}",
        "  user: user_id",
        "  timestamp: occurred_at",
        f"  timestamp_type: {kind}",
    ]
    if where:
        lines.append(f"  where: \"{where}\"")
    if timezone:
        lines.append(f"  timezone: {timezone}")
    lines += [f"grain: {grain}", f"week_start: {week_start}", "output:",
              f"  dialect: {target}"]
    if schema:
        lines.append(f"  schema: {schema}")
    return "\n".join(lines) + "\n" + textwrap.dedent(extra)


def load_events(engine, events, kind: str = "timestamp", target: str = "duckdb") -> None:
    """Create the activity table from (user, ts[, event_name]) tuples."""
    rows = [(e[0], e[1], e[2] if len(e) > 2 else "app_opened") for e in events]
    rows = [(None if u is None else str(u), ts, name) for u, ts, name in rows]
    engine.create_table(names_for(target)[0], [("user_id", "text"), ("occurred_at", kind),
                                         ("event_name", "text")], rows)


def create_views(engine, text: str, target: str) -> list:
    """Compile a spec for a target and create its views on the engine."""
    spec = parse_spec(text, "test.yml")
    compiled = compile_spec(spec, target)
    schema = names_for(target)[1]
    if schema:
        engine._ensure_schema(schema)
    for view in compiled:
        engine.execute(list(view.statements))
    return compiled


def view_statements(text: str, target: str, view_name: str,
                    filename: str = "test.yml") -> tuple[str, ...]:
    """The statements creating one view of a spec, after the checks a build makes (a
    dialect that cannot express the spec raises UnsupportedError); other views are not
    compiled, so a suite can create one view per spec cheaply."""
    from sqlgen.compiler import ddl_statements
    from sqlgen.dialects import TARGETS
    from sqlgen.support import require_support
    from sqlgen.views import planned_views

    spec = parse_spec(text, filename)
    views = planned_views(spec)
    require_support(spec, TARGETS[target], [v.name for v in views])
    view = next(v for v in views if v.name == view_name)
    return ddl_statements(view, spec, TARGETS[target])


def read_view(engine, name: str, target: str = "duckdb") -> list[dict]:
    """Every row of a generated view as a dict, dates as datetime.date."""
    schema = names_for(target)[1]
    sql = f"SELECT * FROM {schema}.{name}" if schema else f"SELECT * FROM {name}"
    columns, rows = engine.read(sql)
    return [{c: _date(c, v) for c, v in zip(columns, row)} for row in rows]


def _date(column: str, value):
    if column in DATE_COLUMNS and isinstance(value, str):
        return dt.date.fromisoformat(value[:10])
    if column in DATE_COLUMNS and isinstance(value, dt.datetime):
        return value.date()
    return value


GROWTH_VIEWS = ("growth_accounting", "user_states", "user_activity")


def run(engine, target: str, events, *, kind: str = "timestamp", views=GROWTH_VIEWS,
        **spec_args) -> dict[str, list[dict]]:
    """Load events, create every view, and read back the named ones."""
    prepare(engine, target, events, kind=kind, **spec_args)
    return read_views(engine, target, views)


def prepare(engine, target: str, events, *, kind: str = "timestamp", **spec_args) -> None:
    """Load events and create every view (read them with read_views)."""
    engine.reset()
    load_events(engine, events, kind, target)
    create_views(engine, spec_text(target, kind=kind, **spec_args), target)


def read_views(engine, target: str, views=GROWTH_VIEWS) -> dict[str, list[dict]]:
    return {name: read_view(engine, name, target) for name in views}


def view_options(cohorts: bool = False, engagement: bool = False, windows=()) -> str:
    """Spec lines (for spec_text's ``extra``) enabling the cohort, engagement and trailing views."""
    lines = [f"cohorts: {str(cohorts).lower()}", f"engagement: {str(engagement).lower()}"]
    if windows:
        lines.append(f"trailing_windows: [{', '.join(str(n) for n in windows)}]")
    return "\n".join(lines) + "\n"


def sorted_rows(rows: list[dict], keys: tuple[str, ...], columns=None) -> list[dict]:
    """Rows sorted by ``keys``, each cut down to ``columns`` when given."""
    ordered = sorted(rows, key=lambda r: tuple(r[k] for k in keys))
    if columns is None:
        return ordered
    return [{c: r[c] for c in columns} for r in ordered]


def assert_rows_match(actual: list[dict], expected: list[dict], keys: tuple[str, ...],
                      columns: tuple[str, ...]) -> None:
    """Same rows once sorted by ``keys``, compared on ``columns``; floats to 12 digits."""
    got = sorted_rows(actual, keys)
    want = sorted_rows(expected, keys)
    assert [tuple(r[k] for k in keys) for r in got] == [tuple(r[k] for k in keys) for r in want]
    for row, wanted in zip(got, want):
        for column in columns:
            a, b = row[column], wanted[column]
            same = (a is not None and b is not None and math.isclose(a, b, rel_tol=1e-12)
                    if isinstance(a, float) or isinstance(b, float) else a == b)
            assert same, (tuple(row[k] for k in keys), column, a, b)


# ---------------------------------------------------------------- revenue sources

REVENUE_TABLES = {"charges": "raw.charges", "subscriptions": "raw.subscriptions"}
REVENUE_VIEWS = ("revenue_accounting", "customer_revenue", "revenue_source_summary")
REVENUE_DATE_COLUMNS = {"first_date", "last_date"}


def revenue_table(target: str, shape: str) -> str:
    """The test charges or subscriptions table for a target (no schema on SQLite)."""
    name = REVENUE_TABLES[shape]
    return name.split(".")[-1] if target in FLAT_TARGETS else name


def revenue_spec_text(target: str, shape: str = "charges", grain: str = "month",
                      week_start: str = "monday", kind: str = "timestamp",
                      timezone: str | None = None, where: str | None = None,
                      interval: str | None = None, scale: int = 2, extra: str = "",
                      measure: str | None = None) -> str:
    """A revenue-only spec over the test table of ``shape`` (see load_revenue); ``measure``
    (subscriptions) is left to its default when None."""
    lines = ["version: 1", "revenue:", f"  shape: {shape}",
             f"  table: {revenue_table(target, shape)}", "  customer: account_id",
             "  amount: amount", f"  scale: {scale}", f"  timestamp_type: {kind}"]
    if shape == "charges":
        lines.append("  timestamp: charged_at")
    else:
        lines += ["  start: started_at", "  end: ended_at",
                  f"  interval: {interval}" if interval else "  interval_column: billing_interval"]
        if measure:
            lines.append(f"  measure: {measure}")
    if where:
        lines.append(f"  where: \"{where}\"")
    if timezone:
        lines.append(f"  timezone: {timezone}")
    lines += [f"grain: {grain}", f"week_start: {week_start}", "output:", f"  dialect: {target}"]
    schema = names_for(target)[1]
    if schema:
        lines.append(f"  schema: {schema}")
    return "\n".join(lines) + "\n" + textwrap.dedent(extra)


def load_revenue(engine, rows, shape: str = "charges", kind: str = "timestamp",
                 target: str = "duckdb", amount_type: str = "decimal(12,2)") -> None:
    """Create the test revenue table from tuples; currency defaults to 'EUR'.

    charges: (account_id, charged_at, amount[, currency]);
    subscriptions: (account_id, started_at, ended_at, amount, billing_interval[, currency]).
    """
    width = 3 if shape == "charges" else 5
    rows = [tuple(r[:width]) + ((r[width] if len(r) > width else "EUR"),) for r in rows]
    rows = [(None if r[0] is None else str(r[0]),) + r[1:] for r in rows]
    if shape == "charges":
        columns = [("account_id", "text"), ("charged_at", kind), ("amount", amount_type),
                   ("currency", "text")]
    else:
        columns = [("account_id", "text"), ("started_at", kind), ("ended_at", kind),
                   ("amount", amount_type), ("billing_interval", "text"), ("currency", "text")]
    engine.create_table(revenue_table(target, shape), columns, rows)


def run_revenue(engine, target: str, rows, *, shape: str = "charges", kind: str = "timestamp",
                views=REVENUE_VIEWS, amount_type: str = "decimal(12,2)",
                **spec_args) -> dict[str, list[dict]]:
    """Load a charges or subscriptions table, create the revenue views, read back ``views``."""
    engine.reset()
    load_revenue(engine, rows, shape, kind, target, amount_type)
    create_views(engine, revenue_spec_text(target, shape, kind=kind, **spec_args), target)
    return read_revenue(engine, target, views)


def read_revenue(engine, target: str, views=REVENUE_VIEWS) -> dict[str, list[dict]]:
    """The revenue views' rows, their date columns as datetime.date."""
    results = {}
    for name in views:
        results[name] = [{c: _date(c, v) if c not in REVENUE_DATE_COLUMNS else
                          _date("period_start", v) for c, v in row.items()}
                         for row in read_view(engine, name, target)]
    return results


def storable_rows(engine_name: str, rows):
    """The rows an engine can load: ClickHouse's Date holds 1970-01-01 .. 2149-06-06 only
    (see strategies.CLICKHOUSE_DATES), so date-typed sentinels outside it are dropped there;
    every other engine, and ClickHouse's DateTime64, loads them all (year 1 to 9999)."""
    from strategies import CLICKHOUSE_DATES

    if engine_name != "clickhouse":
        return list(rows)

    def fits(value) -> bool:
        return (not isinstance(value, dt.date) or isinstance(value, dt.datetime)
                or CLICKHOUSE_DATES[0] <= value <= CLICKHOUSE_DATES[1])
    return [row for row in rows if all(fits(v) for v in row)]
