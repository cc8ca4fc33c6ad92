"""Run sqlgen's generated views on a test engine and read the results back as dicts."""

from __future__ import annotations

import datetime as dt
import textwrap

from sqlgen import compile_spec, parse_spec

ACTIVITY_TABLE = "raw.app_events"
VIEW_SCHEMA = "growth"
DATE_COLUMNS = {"period_start", "first_active_date", "last_active_date", "cohort_start", "day"}


def spec_text(target: str, grain: str = "month", week_start: str = "monday",
              kind: str = "timestamp", timezone: str | None = None,
              where: str | None = None, extra: str = "") -> str:
    """A spec over the test activity table raw.app_events(user_id, occurred_at, event_name)."""
    lines = [
        "version: 1",
        "activity:",
        f"  table: {ACTIVITY_TABLE}",
        "  user: user_id",
        "  timestamp: occurred_at",
        f"  timestamp_type: {kind}",
    ]
    if where:
        lines.append(f"  where: \"{where}\"")
    if timezone:
        lines.append(f"  timezone: {timezone}")
    lines += [f"grain: {grain}", f"week_start: {week_start}", "output:",
              f"  dialect: {target}", f"  schema: {VIEW_SCHEMA}"]
    return "\n".join(lines) + "\n" + textwrap.dedent(extra)


def load_events(engine, events, kind: str = "timestamp") -> None:
    """Create raw.app_events from (user, ts[, event_name]) tuples."""
    rows = [(e[0], e[1], e[2] if len(e) > 2 else "app_opened") for e in events]
    rows = [(None if u is None else str(u), ts, name) for u, ts, name in rows]
    engine.create_table(ACTIVITY_TABLE, [("user_id", "text"), ("occurred_at", kind),
                                         ("event_name", "text")], rows)


def create_views(engine, text: str, target: str) -> list:
    """Compile a spec for a target and create its views on the engine."""
    spec = parse_spec(text, "test.yml")
    compiled = compile_spec(spec, target)
    engine._ensure_schema(VIEW_SCHEMA)
    for view in compiled:
        engine.execute(list(view.statements))
    return compiled


def read_view(engine, name: str) -> list[dict]:
    """Every row of a generated view as a dict, dates as datetime.date."""
    sql = f"SELECT * FROM {VIEW_SCHEMA}.{name}"
    columns = engine.column_names(sql)
    rows = engine.query(sql)
    return [{c: _date(c, v) for c, v in zip(columns, row)} for row in rows]


def _date(column: str, value):
    if column in DATE_COLUMNS and isinstance(value, str):
        return dt.date.fromisoformat(value[:10])
    if column in DATE_COLUMNS and isinstance(value, dt.datetime):
        return value.date()
    return value


def run(engine, target: str, events, *, kind: str = "timestamp", views=("growth_accounting",
        "user_states", "user_activity"), **spec_args) -> dict[str, list[dict]]:
    """Load events, create every view, and read back the named ones."""
    engine.reset()
    load_events(engine, events, kind)
    create_views(engine, spec_text(target, kind=kind, **spec_args), target)
    return {name: read_view(engine, name) for name in views}
