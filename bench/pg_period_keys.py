"""PostgreSQL: the monthly views with integer period keys (the postgres target's
``postgres_whole_extracts`` rewrite) against the same views with the NUMERIC keys of a bare
EXTRACT, in one run, same server, same rows.

    .venv/bin/python bench/pg_period_keys.py --size 1m --reps 5

Loads the events and invoices of the generated DuckDB dataset (bench/data.py) into a
PostgreSQL server started by tests/engines.py, creates the monthly views twice (schema
bench_views: as generated; bench_views_numeric: compiled without that one rewrite), checks
that both return the same rows, then times `growth_accounting` and `cohort_retention` from
each, interleaved (median of --reps after one warm-up round), and prints the ratios and the
sort lines of EXPLAIN ANALYZE. Ratios only: the machine is shared.
"""

from __future__ import annotations

import argparse
import dataclasses
import os
import statistics
import time

import data
import other_engines as oe

from sqlgen import compile_spec, parse_spec
from sqlgen.dialects import TARGETS, postgres_whole_extracts

QUERIES = {
    "growth_accounting": "SELECT count(*), {sums} FROM {schema}.growth_accounting",
    "cohort_retention": ("SELECT count(*), sum(age), sum(active_users) "
                         "FROM {schema}.cohort_retention"),
}


def create(engine, schema: str, numeric: bool) -> None:
    target = TARGETS["postgres"]
    if numeric:
        target = dataclasses.replace(target, transforms=tuple(
            t for t in target.transforms if t is not postgres_whole_extracts))
    spec = parse_spec(oe._spec_text().replace(f"schema: {oe.SCHEMA}", f"schema: {schema}"),
                      "bench_month.yml")
    engine.ensure_schema(schema)
    import sqlgen.compiler as compiler

    saved = compiler.TARGETS.get("postgres")
    compiler.TARGETS["postgres"] = target  # the one target compiled without the rewrite
    try:
        for compiled in compile_spec(spec, "postgres"):
            engine.execute(list(compiled.statements))
    finally:
        compiler.TARGETS["postgres"] = saved


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--size", choices=sorted(data.SIZES), default="1m")
    parser.add_argument("--reps", type=int, default=5)
    args = parser.parse_args()
    db = data.generate(data.SIZES[args.size], oe.HERE / "data", log=oe._log)
    data.add_revenue_tables(db, data.SIZES[args.size], log=oe._log)
    engine = oe.start_engine("postgres")
    try:
        oe.load(engine, db)
        create(engine, "bench_views", numeric=False)
        create(engine, "bench_views_numeric", numeric=True)
        sums = oe.GROWTH_SUMS
        runs = {(view, schema): q.format(sums=sums, schema=schema)
                for view, q in QUERIES.items()
                for schema in ("bench_views", "bench_views_numeric")}
        for view in QUERIES:  # the same rows either way
            a, b = (engine.query(f"SELECT * FROM {s}.{view} ORDER BY 1, 2, 3")
                    for s in ("bench_views", "bench_views_numeric"))
            assert a == b, f"{view}: integer and NUMERIC keys disagree"
        times = {key: [] for key in runs}
        loads = []
        for rep in range(args.reps + 1):
            keys = list(runs)[rep % len(runs):] + list(runs)[:rep % len(runs)]
            for key in keys:
                start = time.perf_counter()
                engine.query(runs[key])
                if rep:  # round 0 warms up
                    times[key].append(time.perf_counter() - start)
                loads.append(os.getloadavg()[0])
        print(f"PostgreSQL, size {args.size}, median of {args.reps} interleaved rounds, "
              f"load average {min(loads):.1f}-{max(loads):.1f}")
        for view in QUERIES:
            whole = statistics.median(times[(view, "bench_views")])
            numeric = statistics.median(times[(view, "bench_views_numeric")])
            print(f"  {view}: integer keys {whole:.3f} s, NUMERIC keys {numeric:.3f} s, "
                  f"integer / NUMERIC {whole / numeric:.2f}")
            for schema in ("bench_views", "bench_views_numeric"):
                plan = engine.query("EXPLAIN (ANALYZE, COSTS OFF, TIMING OFF) "
                                    + runs[(view, schema)])
                sorts = sorted({row[0].strip() for row in plan if "Sort Method" in row[0]})
                print(f"    {schema}: " + ("; ".join(sorts) or "no sort"))
    finally:
        engine.close()


if __name__ == "__main__":
    main()
