"""Run the SQL prototypes on the test engines and compare them with sqlgen's own views there.

    .venv/bin/python bench/prototypes/check_engines.py duckdb sqlite postgres

Each prototype is parsed as DuckDB SQL and passed through sqlgen's own rewrites for the
engine's target (``sqlgen.dialects.rewrites``), as a template would be; the view it replaces
is created from the same spec on the same engine; both must return identical rows on a
small invented table with gaps around 28 days. Uses tests/engines.py to start the engines.
"""

from __future__ import annotations

import datetime as dt
import random
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path[:0] = [str(HERE.parent), str(HERE.parent.parent / "tests")]

import generated  # noqa: E402
import sqlglot  # noqa: E402
from engines import start_engine  # noqa: E402

from sqlgen import SqlgenError, compile_spec, parse_spec  # noqa: E402
from sqlgen.dialects import TARGETS, rewrites  # noqa: E402

CHECKS = (  # (grain, view, prototype, order)
    ("month", "growth_accounting", "growth_accounting_month", "period_key"),
    ("week", "growth_accounting", "growth_accounting_week", "period_key"),
    ("month", "cohort_retention", "cohort_retention_month", "cohort_key, period_key"),
    ("month", "trailing_activity", "trailing_activity_blocks", "day_key"),
)


def events(seed: int = 7) -> list[tuple]:
    """A few users over ~5 months, gaps of every length around 28 days."""
    rng = random.Random(seed)
    start = dt.datetime(2023, 1, 2)
    rows = []
    for user in range(12):
        day = rng.randrange(20)
        while day < 150:
            rows.append((user, start + dt.timedelta(days=day, seconds=rng.randrange(86400))))
            day += rng.choice((1, 2, 5, 20, 27, 28, 29, 40))
    return rows


def translated(name: str, target: str) -> str:
    """A prototype in a target's SQL, through sqlgen's rewrites."""
    tree = sqlglot.parse_one((HERE / f"{name}.sql").read_text(), read="duckdb")
    for rewrite in rewrites(TARGETS[target]):
        tree = rewrite(tree)
    return tree.sql(dialect=TARGETS[target].sqlglot_dialect)


def check(engine, target: str) -> list[str]:
    """One line per prototype: identical or not."""
    engine.reset()
    engine.create_table("events", [("user_id", "bigint"), ("ts", "timestamp")], events())
    engine.create_table("charges", [("customer_id", "bigint"), ("charged_at", "timestamp"),
                                    ("amount", "decimal(12,2)")], [])
    lines = []
    for grain, view, name, order in CHECKS:
        try:
            lines.append(f"{target}: {name}: {_compare(engine, target, grain, view, name, order)}")
        except SqlgenError as err:
            lines.append(f"{target}: {name}: not compared, sqlgen cannot generate it: {err}")
    return lines


def _compare(engine, target: str, grain: str, view: str, name: str, order: str) -> str:
    text = (f"version: 1\nactivity:\n  table: events\n  user: user_id\n  timestamp: ts\n"
            f"grain: {grain}\ncohorts: true\n"  # only what the comparison needs
            + (f"trailing_windows: [{generated.TRAILING_DAYS}]\n"
               if view == "trailing_activity" else "")
            + f"output:\n  prefix: bench_{grain}_\n")  # no schema: SQLite has none
    spec = parse_spec(text, "bench.yml")
    for compiled in compile_spec(spec, target):
        if compiled.view.name in ("user_activity", "user_states", view):
            engine.execute(list(compiled.statements))
    ours = engine.query(f"SELECT * FROM ({translated(name, target)}) AS q ORDER BY {order}")
    theirs = engine.query(f"SELECT * FROM bench_{grain}_{view} ORDER BY {order}")
    return f"{'identical' if ours == theirs else 'DIFFERENT'} ({len(ours)} rows)"


def main(names: list[str]) -> int:
    failed = 0
    for name in names:
        engine = start_engine(name)
        try:
            for line in check(engine, name):
                print(line, flush=True)
                failed += "DIFFERENT" in line
        except Exception as err:  # report and go on with the next engine
            print(f"{name}: error: {type(err).__name__}: {str(err)[:300]}", flush=True)
            failed += 1
        finally:
            engine.close()
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:] or ["duckdb", "sqlite", "postgres"]))
