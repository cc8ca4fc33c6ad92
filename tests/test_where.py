"""``where`` filters executed on every engine, each compared with Python filtering the same rows.

One table load per engine; every filter gets its own ``user_activity`` view (prefix ``wN_``),
so a filter costs one CREATE VIEW and one SELECT. Each source row has its own user, so the
users a view returns are exactly the rows the filter kept. Dates are fixed, except one
filter relative to the engine's clock over a window (400 days) that the rows are far from
on both sides (10 and 1000 days). A filter that a target cannot express must be refused at
build time, naming the dialect, the key and the filter's place in the spec.
"""

from __future__ import annotations

import datetime as dt

import pytest

from conftest import engine_target_pairs
from harness import load_events, names_for, read_view, view_statements
from sqlgen import UnsupportedError

NOW = dt.datetime.now(dt.UTC).replace(tzinfo=None, microsecond=0)
INJECTION = "x' OR 1=1 -- "  # one string value; in MySQL written 'x\' OR 1=1 -- '

# (user, occurred_at, event_name): one user per row
ROWS = [
    ("u01", dt.datetime(2024, 1, 5, 8, 0), "app_opened"),
    ("u02", dt.datetime(2024, 1, 31, 23, 59), "push_received"),
    ("u03", dt.datetime(2024, 2, 29, 12, 0), "Page_View"),
    ("u04", dt.datetime(2024, 3, 1, 0, 0), "purchase"),
    ("u05", dt.datetime(2024, 3, 8, 6, 0), None),
    ("u06", dt.datetime(2024, 3, 10, 11, 0), "  padded  "),
    ("u07", dt.datetime(2024, 3, 10, 17, 30), INJECTION),
    ("u08", dt.datetime(2024, 3, 10, 18, 30), "app_closed"),
    ("u09", dt.datetime(2024, 3, 31, 23, 0), "page_view"),
    ("u10", dt.datetime(2024, 4, 1, 0, 0), "purchase"),
    ("u11", NOW - dt.timedelta(days=10), "app_opened"),
    ("u12", NOW - dt.timedelta(days=1000), "app_opened"),
]


def _name(row):
    return row[2]


def _ts(row):
    return row[1]


def _mar(row):
    return dt.datetime(2024, 3, 1) <= _ts(row) < dt.datetime(2024, 4, 1)


# (id, where in the spec's dialect, that dialect, Python predicate, targets refusing it)
# SQL's three-valued logic: a comparison with NULL keeps no row, so predicates on the name
# are False for the NULL name unless the filter handles NULL.
FILTERS = [
    ("date-range", "occurred_at >= DATE '2024-03-01' AND occurred_at < DATE '2024-04-01'",
     "duckdb", _mar, ()),
    ("timestamp-minus-days", "occurred_at >= TIMESTAMP '2024-03-10 00:00:00' - INTERVAL 2 DAY",
     "duckdb", lambda r: _ts(r) >= dt.datetime(2024, 3, 8), ()),
    ("timestamp-plus-hours", "occurred_at BETWEEN TIMESTAMP '2024-03-10 12:00:00' AND "
     "TIMESTAMP '2024-03-10 12:00:00' + INTERVAL 6 HOUR", "duckdb",
     lambda r: dt.datetime(2024, 3, 10, 12) <= _ts(r) <= dt.datetime(2024, 3, 10, 18), ()),
    ("date-minus-week", "occurred_at < DATE '2024-03-15' - INTERVAL '1 week'", "duckdb",
     lambda r: _ts(r) < dt.datetime(2024, 3, 8), ()),
    ("date-plus-month", "occurred_at >= DATE '2024-01-31' + INTERVAL 1 MONTH", "duckdb",
     lambda r: _ts(r) >= dt.datetime(2024, 2, 29), ("sqlite",)),
    ("clock-window", "occurred_at > now() - INTERVAL 400 DAY", "duckdb",
     lambda r: _ts(r) > NOW - dt.timedelta(days=400), ()),
    ("clock-date", "occurred_at < CURRENT_DATE - INTERVAL 30 DAY", "duckdb",
     lambda r: _ts(r) < NOW - dt.timedelta(days=30), ()),
    ("extract", "EXTRACT(MONTH FROM occurred_at) = 3 AND EXTRACT(HOUR FROM occurred_at) >= 11",
     "duckdb", lambda r: _ts(r).month == 3 and _ts(r).hour >= 11, ()),
    ("lower", "lower(event_name) = 'page_view'", "duckdb",
     lambda r: _name(r) is not None and _name(r).lower() == "page_view", ()),
    ("upper-trim", "upper(trim(event_name)) = 'PADDED'", "duckdb",
     lambda r: _name(r) is not None and _name(r).strip().upper() == "PADDED", ()),
    ("length-substring", "length(event_name) = 10 AND substring(event_name, 1, 4) = 'app_'",
     "duckdb", lambda r: _name(r) is not None and len(_name(r)) == 10
     and _name(r)[:4] == "app_", ()),
    ("replace-pipe", "replace(event_name, '_', '-') || '!' = 'app-closed!'", "duckdb",
     lambda r: _name(r) == "app_closed", ()),
    ("in-list", "event_name IN ('purchase', 'app_opened', 'missing')", "duckdb",
     lambda r: _name(r) in ("purchase", "app_opened"), ()),
    ("not-in-list", "event_name NOT IN ('purchase', 'app_opened')", "duckdb",
     lambda r: _name(r) is not None and _name(r) not in ("purchase", "app_opened"), ()),
    ("like-wildcards", "event_name LIKE 'app%' OR event_name LIKE '%_received'", "duckdb",
     lambda r: _name(r) is not None and (_name(r).startswith("app")
                                         or _name(r).endswith("received")), ()),
    ("case", "CASE WHEN event_name = 'purchase' THEN 1 WHEN occurred_at < DATE '2024-02-01' "
     "THEN 1 ELSE 0 END = 1", "duckdb",
     lambda r: _name(r) == "purchase" or _ts(r) < dt.datetime(2024, 2, 1), ()),
    ("coalesce-is-null", "COALESCE(event_name, 'none') <> 'push_received' AND "
     "(event_name IS NULL OR occurred_at < DATE '2024-03-01')", "duckdb",
     lambda r: _name(r) is None or (_name(r) != "push_received"
                                    and _ts(r) < dt.datetime(2024, 3, 1)), ()),
    ("nullif-mod", "NULLIF(event_name, 'purchase') IS NULL OR "
     "MOD(EXTRACT(DAY FROM occurred_at), 5) = 0", "duckdb",
     lambda r: _name(r) in (None, "purchase") or _ts(r).day % 5 == 0, ()),
    ("ilike", "event_name ILIKE 'PAGE%'", "duckdb",
     lambda r: _name(r) is not None and _name(r).lower().startswith("page"), ()),
    ("mysql-escaped-literal", "event_name = 'x\\' OR 1=1 -- '", "mysql",
     lambda r: _name(r) == INJECTION, ()),
    ("mysql-date-sub", "occurred_at >= DATE_SUB(DATE '2024-03-10', INTERVAL 2 DAY) AND "
     "occurred_at < NOW()", "mysql", lambda r: dt.datetime(2024, 3, 8) <= _ts(r) < NOW, ()),
    ("doubled-quote", "event_name <> 'x'' OR 1=1 -- '", "duckdb",
     lambda r: _name(r) is not None and _name(r) != INJECTION, ()),
    ("starts-with", "starts_with(event_name, 'pur')", "duckdb",
     lambda r: _name(r) is not None and _name(r).startswith("pur"), ("sqlite", "mysql")),
    ("concat", "concat(event_name, '!') = 'purchase!'", "duckdb",
     lambda r: _name(r) == "purchase", ("sqlite",)),
    ("date-trunc", "date_trunc('month', occurred_at) = DATE '2024-03-01'", "duckdb",
     _mar, ("sqlite", "mysql")),
]

# Spark plans each view read as a job of several seconds: there, one filter per kind of
# operation (its spellings of the rest are pinned by tests/test_dialects.py and goldens).
SLOW_ENGINES = ("spark",)
ON_SLOW_ENGINES = ("timestamp-plus-hours", "date-minus-week", "clock-window", "clock-date",
                   "length-substring", "not-in-list", "like-wildcards", "case",
                   "coalesce-is-null", "ilike", "mysql-escaped-literal", "date-trunc")


def filter_spec(target: str, where: str, dialect: str, prefix: str) -> str:
    """A spec over the test table, the filter written in ``dialect`` (YAML single quotes:
    only ' is doubled, backslashes are kept)."""
    table, schema = names_for(target)
    quoted = "'" + where.replace("'", "''") + "'"
    lines = ["version: 1", "activity:", f"  table: {table}", "  user: user_id",
             "  timestamp: occurred_at", f"  where: {quoted}", "grain: day", "output:",
             f"  dialect: {dialect}", f"  prefix: {prefix}"]
    if schema:
        lines.append(f"  schema: {schema}")
    return "\n".join(lines) + "\n"


def _user_activity(target: str, where: str, dialect: str, prefix: str) -> list[str]:
    text = filter_spec(target, where, dialect, prefix)
    return list(view_statements(text, target, "user_activity", "where.yml"))


@pytest.mark.parametrize("engine_name,target", engine_target_pairs())
def test_filters_keep_the_rows_python_keeps(engines, engine_name, target):
    engine = engines(engine_name)
    engine.reset()
    load_events(engine, ROWS, "timestamp", target)
    schema = names_for(target)[1]
    if schema:
        engine._ensure_schema(schema)
    checked = []
    for number, (name, where, dialect, keep, refusing) in enumerate(FILTERS):
        prefix = f"w{number}_"
        if engine_name in SLOW_ENGINES and name not in ON_SLOW_ENGINES:
            continue
        if target in refusing:
            with pytest.raises(UnsupportedError, match=rf"^where.yml:6:10: activity.where: "
                                                       rf"dialect '{target}' cannot express "):
                _user_activity(target, where, dialect, prefix)
            continue
        engine.execute(_user_activity(target, where, dialect, prefix))
        users = sorted(row["user_id"] for row in read_view(engine, f"{prefix}user_activity",
                                                           target))
        assert users == sorted(row[0] for row in ROWS if keep(row)), (name, where)
        checked.append(name)
    assert len(checked) >= (len(ON_SLOW_ENGINES) if engine_name in SLOW_ENGINES
                            else len(FILTERS)) - 5


def test_every_filter_keeps_some_rows_and_drops_some():
    """A filter that keeps every row (or none) would prove nothing on the engines."""
    assert set(ON_SLOW_ENGINES) <= {f[0] for f in FILTERS}
    for name, _where, _dialect, keep, _refusing in FILTERS:
        kept = [row for row in ROWS if keep(row)]
        assert 0 < len(kept) < len(ROWS), name
