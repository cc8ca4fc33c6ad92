"""Formulations of growth_accounting_by_segment side by side, in CPU seconds and wall time.

Usage: ``.venv/bin/python bench/segment_variants.py [--size 10m] [--reps 3]`` (the dataset of
bench/run.py, generated there first). The view is compiled from bench/generated.py's
segment spec (a kind event segment, ``platform``, and a kind user segment from a table,
``channel``); each variant replaces its CTEs from the per-segment sequencing to the tallies
(between ``, seg_user_periods AS`` and ``, data_range AS`` of the compiled DuckDB view)
and must return every column of every row the view returns before it is timed.

CPU seconds (user + system of this process, DuckDB's threads included) are read beside
wall time because this machine is shared: on a loaded machine wall time follows the other
work, CPU time much less. Ratios are to the segment floor of the same run.

- ``view``: the compiled view. One LAG per (user, value) over the grouping for the kind
  event segment; the user-months regrouped from it and one LAG per user for the kind user
  segment; every segment's rows cast to text and grouped by (segment, value, period).
- ``tally_first``: the same windows, but each segment tallied on its own values before the
  text conversion, and the last active date taken once, not through the windows.
- ``self_join``: no window for the kind event segment: retained by joining the grouping to
  itself on (user, value, period - 1), new by each (user, value)'s first period.
- ``one_sort_user``: no regrouping for the kind user segment: the user's previous period
  read from one LAG per user over the (user, value, period) rows ordered by period.
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import sys
import time
from pathlib import Path

import duckdb

sys.path.insert(0, str(Path(__file__).resolve().parent))
import data  # noqa: E402
import generated  # noqa: E402

HERE = Path(__file__).resolve().parent
START, END = ", seg_user_periods AS", ", data_range AS"

_USER_TALLY = """
, seg_table_1 AS (
  SELECT user_id AS sqlgen_key, min(channel) AS sqlgen_choice, 1 AS sqlgen_found
  FROM segment_users WHERE user_id IS NOT NULL GROUP BY user_id
), seg_tally_1 AS (
  SELECT CASE WHEN t.sqlgen_found = 1 THEN t.sqlgen_choice END AS seg_value, u.period_key,
    count(*) AS a, count(CASE WHEN prior_key IS NULL THEN 1 END) AS n,
    count(CASE WHEN prior_key = period_key - 1 THEN 1 END) AS r,
    count(CASE WHEN prior_key < period_key - 1 THEN 1 END) AS z
  FROM seg_user_sequenced AS u LEFT JOIN seg_table_1 AS t ON t.sqlgen_key = u.user_id
  GROUP BY 1, 2
), seg_through AS (SELECT max(last_date) AS d FROM seg_grouped
), tallies AS (
  SELECT 'platform' AS tally_segment,
    CASE WHEN seg_value IS NULL THEN 1 ELSE 0 END AS tally_missing,
    COALESCE(CAST(seg_value AS TEXT), '') AS tally_text, period_key AS tally_key,
    h.d AS through_tally,
    a AS active_tally, n AS new_tally, r AS retained_tally, z AS resurrected_tally
  FROM seg_tally_0 CROSS JOIN seg_through AS h
  UNION ALL
  SELECT 'channel', CASE WHEN seg_value IS NULL THEN 1 ELSE 0 END,
    COALESCE(CAST(seg_value AS TEXT), ''), period_key, h.d, a, n, r, z
  FROM seg_tally_1 CROSS JOIN seg_through AS h
)"""

_USER_REGROUPED = """
, seg_user_periods AS (
  SELECT user_id, period_key FROM seg_grouped GROUP BY user_id, period_key
), seg_user_sequenced AS (
  SELECT user_id, period_key,
    lag(period_key) OVER (PARTITION BY user_id ORDER BY period_key) AS prior_key
  FROM seg_user_periods
)"""

_EVENT_LAG = """
, seg_sequenced_0 AS (
  SELECT period_key, sqlgen_seg_0 AS seg_value,
    lag(period_key) OVER (PARTITION BY user_id, sqlgen_seg_0 ORDER BY period_key) AS prior_key
  FROM seg_grouped
), seg_tally_0 AS (
  SELECT seg_value, period_key, count(*) AS a, count(CASE WHEN prior_key IS NULL THEN 1 END) AS n,
    count(CASE WHEN prior_key = period_key - 1 THEN 1 END) AS r,
    count(CASE WHEN prior_key < period_key - 1 THEN 1 END) AS z
  FROM seg_sequenced_0 GROUP BY seg_value, period_key
)"""

_EVENT_JOIN = """
, seg_active_0 AS (
  SELECT sqlgen_seg_0 AS seg_value, period_key, count(*) AS a FROM seg_grouped GROUP BY 1, 2
), seg_firsts_0 AS (
  SELECT sqlgen_seg_0 AS seg_value, min(period_key) AS f
  FROM seg_grouped GROUP BY user_id, sqlgen_seg_0
), seg_new_0 AS (
  SELECT seg_value, f AS period_key, count(*) AS n FROM seg_firsts_0 GROUP BY 1, 2
), seg_kept_0 AS (
  SELECT a.sqlgen_seg_0 AS seg_value, a.period_key, count(*) AS r
  FROM seg_grouped AS a JOIN seg_grouped AS b
    ON b.user_id = a.user_id AND b.sqlgen_seg_0 = a.sqlgen_seg_0
    AND b.period_key = a.period_key - 1
  GROUP BY 1, 2
), seg_tally_0 AS (
  SELECT x.seg_value, x.period_key, x.a, coalesce(n.n, 0) AS n, coalesce(k.r, 0) AS r,
    x.a - coalesce(n.n, 0) - coalesce(k.r, 0) AS z
  FROM seg_active_0 AS x
  LEFT JOIN seg_new_0 AS n ON n.seg_value = x.seg_value AND n.period_key = x.period_key
  LEFT JOIN seg_kept_0 AS k ON k.seg_value = x.seg_value AND k.period_key = x.period_key
)"""

_USER_ONE_SORT = """
, seg_both AS (
  SELECT user_id, period_key,
    lag(period_key) OVER (PARTITION BY user_id ORDER BY period_key, sqlgen_seg_0) AS row_prior
  FROM seg_grouped
), seg_user_sequenced AS (
  SELECT user_id, period_key, row_prior AS prior_key FROM seg_both
  WHERE row_prior IS NULL OR row_prior <> period_key
)"""

# The join variant (NULL platform values would need a NULL-safe join; the bench data has
# none, and the agreement check below would catch a difference).
VARIANTS = {
    "tally_first": _USER_REGROUPED + _EVENT_LAG + _USER_TALLY,
    "self_join": _USER_REGROUPED + _EVENT_JOIN + _USER_TALLY,
    "one_sort_user": _USER_ONE_SORT + _EVENT_LAG + _USER_TALLY,
}


def _cpu() -> float:
    usage = resource.getrusage(resource.RUSAGE_SELF)
    return usage.ru_utime + usage.ru_stime


def queries(con) -> dict[str, str]:
    """The floor, the view and each variant as one full-scan query."""
    view = con.execute("SELECT sql FROM duckdb_views() WHERE schema_name = ? AND view_name = ?",
                       [generated.SEGMENT_SCHEMA, "growth_accounting_by_segment"]).fetchone()[0]
    body = view[view.index(" AS WITH") + 4:].rstrip().rstrip(";")
    head, tail = body[:body.index(START)], body[body.index(END):]
    out = {"floor": generated.FLOOR_SEGMENTS,
           "view": f"SELECT count(*), sum(hash(COLUMNS(*))) FROM ({body})"}
    for name, middle in VARIANTS.items():
        out[name] = f"SELECT count(*), sum(hash(COLUMNS(*))) FROM ({head}{middle}{tail})"
    return out


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", default="10m", choices=sorted(data.SIZES))
    parser.add_argument("--reps", type=int, default=3)
    parser.add_argument("--data-dir", type=Path, default=HERE / "data")
    args = parser.parse_args(argv)
    db = data.generate(data.SIZES[args.size], args.data_dir)
    data.add_segment_tables(db)
    data.add_revenue_tables(db, data.SIZES[args.size])  # the segment spec has revenue too
    con = duckdb.connect(str(db))
    con.execute("SET enable_progress_bar = false")
    generated.create_views(con, "month", generated.SEGMENT_SCHEMA, generated.segment_spec_text())
    cases = queries(con)
    expected = con.execute(cases["view"]).fetchall()
    for name in VARIANTS:
        if con.execute(cases[name]).fetchall() != expected:
            raise SystemExit(f"{name}: rows differ from the view's")
    cpu = {name: [] for name in cases}
    wall = {name: [] for name in cases}
    for _ in range(args.reps):
        for name, sql in cases.items():
            c, t = _cpu(), time.perf_counter()
            con.execute(sql).fetchall()
            cpu[name].append(_cpu() - c)
            wall[name].append(time.perf_counter() - t)
    floor_cpu, floor_wall = statistics.median(cpu["floor"]), statistics.median(wall["floor"])
    print(f"{args.size}, median of {args.reps} interleaved rounds, load average "
          f"{os.getloadavg()[0]:.1f} at the end; every variant returned the view's rows")
    print("| case | CPU s | CPU vs floor | wall s | wall vs floor |")
    print("| --- | --- | --- | --- | --- |")
    for name in cases:
        c, w = statistics.median(cpu[name]), statistics.median(wall[name])
        print(f"| {name} | {c:.2f} | {c / floor_cpu:.2f}× | {w:.2f} | {w / floor_wall:.2f}× |")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
