"""What first_seen, report_from and a second definition cost in the DuckDB views.

    .venv/bin/python bench/definitions.py --size 10m [--reps 5]

Uses the dataset of bench/run.py (generated once into bench/data/), adds a `signups` table
(one row per user for four users in five: a date up to 90 days before the user's first
event, a seeded hash), and prints the median time of monthly `growth_accounting` plain,
with `first_seen`, with `report_from`, and of a definition with a `where`, each next to the
floor (the distinct user-months of the events). Printed, never asserted.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

import duckdb

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from data import SIZES, generate  # noqa: E402

from sqlgen import compile_spec, parse_spec  # noqa: E402

FLOOR = "SELECT count(*) FROM (SELECT DISTINCT user_id, date_trunc('month', ts) FROM events)"
SIGNUPS = """
CREATE OR REPLACE TABLE signups AS
SELECT user_id, CAST(MIN(ts) AS DATE) - CAST(hash(user_id, 'back') % 90 AS INTEGER) AS signed_up
FROM events GROUP BY user_id HAVING hash(user_id, 'listed') % 5 <> 0
"""
BASE = """\
version: 1
activity:
  table: events
  user: user_id
  timestamp: ts
{extra}grain: month
output:
  dialect: duckdb
  schema: {schema}
"""
CASES = {
    "plain": "",
    "first_seen": "  first_seen: {table: signups, user: user_id, timestamp: signed_up, "
                  "timestamp_type: date}\n",
    "report_from": "  report_from: 2024-01-01\n",
    "where (a definition's view)": "  where: \"user_id % 3 = 0\"\n",
}


def timed(con, sql: str, reps: int) -> float:
    con.execute(sql).fetchall()  # warm-up
    times = []
    for _ in range(reps):
        start = time.perf_counter()
        con.execute(sql).fetchall()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def main() -> int:
    parser = argparse.ArgumentParser()
    parser.add_argument("--size", default="10m", choices=sorted(SIZES))
    parser.add_argument("--reps", type=int, default=5)
    args = parser.parse_args()
    path = generate(SIZES[args.size], Path(__file__).resolve().parent / "data")
    con = duckdb.connect(str(path))
    con.execute(SIGNUPS)
    floor = timed(con, FLOOR, args.reps)
    print(f"| case ({args.size}) | median s | x floor |\n| --- | --- | --- |")
    print(f"| floor | {floor:.3f} | 1.00 |")
    for number, (name, extra) in enumerate(CASES.items()):
        schema = f"bench_defs_{number}"
        con.execute(f"CREATE SCHEMA IF NOT EXISTS {schema}")
        spec = parse_spec(BASE.format(extra=extra, schema=schema), "bench.yml")
        for view in compile_spec(spec):
            if view.view.name == "growth_accounting":
                for statement in view.statements:
                    con.execute(statement)
        sql = (f"SELECT count(*), sum(active_users), sum(new_users), sum(resurrected_users) "
               f"FROM {schema}.growth_accounting")
        seconds = timed(con, sql, args.reps)
        print(f"| growth_accounting, {name} | {seconds:.3f} | {seconds / floor:.2f} |")
    con.execute("DROP TABLE signups")
    return 0


if __name__ == "__main__":
    sys.exit(main())
