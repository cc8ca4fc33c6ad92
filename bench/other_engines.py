"""sqlgen's views on the other engines the test suite starts, beside the same floors and the
hand-written self-join and LAG/LEAD alternatives, each written once for DuckDB
(bench/alternatives.py) and transpiled by sqlglot to the engine's dialect.

    .venv/bin/python bench/other_engines.py --size 1m --engine postgres --engine clickhouse

Loads the events and invoices of the generated DuckDB dataset (bench/data.py) into each engine
through tests/engines.py (which starts PostgreSQL and MariaDB servers in temporary folders,
Spark in local mode and ClickHouse through chdb), creates the views compiled for the
engine's target, checks that every implementation of a group returns the same rows, then
times them interleaved (median of --reps after --warmup) and writes
bench/results/engines_<size>.md. No memory probe: the servers' memory is not one
process's high-water mark; see bench/README.md.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
import time
from pathlib import Path

import alternatives
import data
import duckdb
import generated
import sqlglot

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent / "tests"))

from engines import start_engine  # noqa: E402  (tests/engines.py)

from sqlgen import compile_spec, parse_spec  # noqa: E402
from sqlgen.dialects import TARGETS, rewrites  # noqa: E402

# engine -> sqlgen target (its sqlglot dialect spells the alternatives)
ENGINE_TARGET = {"postgres": "postgres", "clickhouse": "clickhouse", "spark": "spark",
                 "mysql": "mysql", "duckdb": "duckdb"}
SCHEMA = "bench_views"
GROWTH_SUMS = ", ".join(f"sum({c})" for c in alternatives.SUMMARY_COLUMNS[1:])
REVENUE_SUMS = ", ".join(f"sum({c})" for c in alternatives.REVENUE_COLUMNS[1:])


def _spec_text() -> str:
    """The monthly spec of bench_month (invoices as revenue, cohorts), for another schema."""
    text = generated.spec_text("month", SCHEMA)
    return "\n".join(line for line in text.splitlines()
                     if not line.startswith(("engagement", "trailing_windows"))) + "\n"


def cases() -> list[dict]:
    """(name, group, floor, DuckDB query, the sums that time it) for every case."""
    growth = f"SELECT {', '.join(alternatives.SUMMARY_COLUMNS)} FROM {SCHEMA}.growth_accounting"
    week = growth.replace(f"{SCHEMA}.", "bench_week_views.")
    revenue = generated.revenue_summary(SCHEMA)
    cohorts = (f"SELECT cohort_start, age, active_users FROM {SCHEMA}.cohort_retention "
               "WHERE active_users > 0")
    month_floor, week_floor = "floor: distinct (user, month)", "floor: distinct (user, week)"
    invoice_floor = "floor: (customer, month) totals of invoices"
    rows = [
        (month_floor, "", month_floor, alternatives.FLOOR_MONTH, ""),
        ("sqlgen growth_accounting, month", "month", month_floor, growth, GROWTH_SUMS),
        ("hand-written self-join SQL, month", "month", month_floor,
         alternatives.SELF_JOIN_MONTH, GROWTH_SUMS),
        ("hand-written LAG/LEAD SQL, month", "month", month_floor, alternatives.lag_lead("month"),
         GROWTH_SUMS),
        (week_floor, "", week_floor, alternatives.FLOOR_WEEK, ""),
        ("sqlgen growth_accounting, week", "week", week_floor, week, GROWTH_SUMS),
        ("hand-written self-join SQL, week", "week", week_floor, alternatives.self_join("week"),
         GROWTH_SUMS),
        ("hand-written LAG/LEAD SQL, week", "week", week_floor, alternatives.lag_lead("week"),
         GROWTH_SUMS),
        ("sqlgen cohort_retention, month", "cohorts", month_floor, cohorts,
         "sum(age), sum(active_users)"),
        ("hand-written GROUP BY SQL, cohort_retention", "cohorts", month_floor,
         alternatives.COHORTS_BY_HAND, "sum(age), sum(active_users)"),
        (invoice_floor, "", invoice_floor, alternatives.revenue_floor(alternatives.INVOICE_TOTALS),
         ""),
        ("sqlgen revenue_accounting (invoices), month", "revenue", invoice_floor, revenue,
         REVENUE_SUMS),
        ("hand-written LAG/LEAD SQL, revenue (invoices)", "revenue", invoice_floor,
         alternatives.revenue_lag_lead(alternatives.INVOICE_TOTALS), REVENUE_SUMS),
        ("hand-written self-join SQL, revenue (invoices)", "revenue", invoice_floor,
         alternatives.revenue_self_join(alternatives.INVOICE_TOTALS), REVENUE_SUMS),
    ]
    return [dict(name=n, group=g, floor=f, query=q, sums=s, times=[], loads=[])
            for n, g, f, q, s in rows]


def spell(query: str, target: str) -> str:
    """A DuckDB query for another target: parsed by sqlglot, through sqlgen's rewrites for
    that target (date arithmetic, NULL ordering of windows, ...), written in its dialect."""
    tree = sqlglot.parse_one(query, read="duckdb")
    for rewrite in rewrites(TARGETS[target]):
        tree = rewrite(tree)
    return tree.sql(TARGETS[target].sqlglot_dialect)


def timed_sql(case: dict, dialect: str) -> str:
    if not case["sums"]:
        return spell(case["query"], dialect)  # a floor: already a count
    return spell(f"SELECT count(*), {case['sums']} FROM ({case['query']}) AS q", dialect)


def rows_sql(case: dict, dialect: str) -> str:
    return spell(f"SELECT * FROM ({case['query']}) AS q ORDER BY 1, 2", dialect)


def _log(message: str) -> None:
    print(f"[{time.strftime('%H:%M:%S')}] {message}", flush=True)


TABLES = {
    "events": [("user_id", "bigint"), ("ts", "timestamp")],
    "invoices": [("customer_id", "bigint"), ("invoiced_at", "timestamp"),
                 ("amount", "decimal(12,2)")],
}


def load(engine, db: Path, users: int | None = None) -> None:
    """The benchmark tables, read from the DuckDB dataset, into the engine; with ``users``,
    only the rows of the users (customers) whose key is below it."""
    con = duckdb.connect(str(db), read_only=True)
    for table, columns in TABLES.items():
        names = ", ".join(c for c, _t in columns)
        where = f" WHERE {columns[0][0]} < {int(users)}" if users else ""
        rows = con.execute(f"SELECT {names} FROM {table}{where}").fetchall()
        start = time.perf_counter()
        engine.create_table(table, columns, rows)
        _log(f"  loaded {table}: {len(rows):,} rows in {time.perf_counter() - start:.1f} s")
        del rows
    con.close()


def create_views(engine, target: str) -> None:
    for schema, grain in ((SCHEMA, "month"), ("bench_week_views", "week")):
        text = _spec_text().replace(f"schema: {SCHEMA}", f"schema: {schema}")
        text = text.replace("grain: month", f"grain: {grain}")
        spec = parse_spec(text, f"bench_{grain}.yml")
        engine.ensure_schema(schema)
        for compiled in compile_spec(spec, target):
            engine.execute(list(compiled.statements))


def run_engine(name: str, db: Path, reps: int, warmup: int, engine=None,
               users: int | None = None, plan_only: bool = False) -> dict:
    """Load, create, check agreement, time; an ``engine`` passed in is left running (its
    tables and views are dropped), one started here is stopped. With ``plan_only``, time
    nothing: each timed statement is planned (EXPLAIN) instead, which proves it is valid
    on the engine for a fraction of a run (the test suite's smoke on Spark)."""
    target = ENGINE_TARGET[name]
    dialect = target  # spell() takes the target and writes its dialect
    _log(f"{name}: starting")
    owned = engine is None
    engine = engine or start_engine(name)
    try:
        load(engine, db, users)
        create_views(engine, target)
        found = cases()
        _log(f"{name}: checking that implementations agree")
        reference: dict[str, tuple[str, list]] = {}
        agreed = {}
        for case in found:
            if not case["group"]:
                continue
            rows = engine.query(rows_sql(case, dialect))
            first = reference.setdefault(case["group"], (case["name"], rows))
            if rows != first[1]:
                diff = [(a, b) for a, b in zip(first[1], rows, strict=False) if a != b][:3]
                raise AssertionError(f"{name}: {case['name']} disagrees with {first[0]}: {diff}")
            agreed[case["group"]] = len(rows)
        sqls = [timed_sql(case, dialect) for case in found]
        if plan_only:
            reps = warmup = 0
            for sql in sqls:
                engine.query("EXPLAIN " + sql)
        for _ in range(warmup):
            for sql in sqls:
                engine.query(sql)
        for rep in range(reps):
            shift = rep % len(found)
            order = list(range(len(found)))[shift:] + list(range(len(found)))[:shift]
            for i in order:
                start = time.perf_counter()
                engine.query(sqls[i])
                found[i]["times"].append(time.perf_counter() - start)
                found[i]["loads"].append(os.getloadavg()[0])
            _log(f"{name}: round {rep + 1}/{reps} done")
        explain = {}
        if name == "postgres":
            for case in found:
                if case["name"].startswith("sqlgen"):
                    plan = engine.query("EXPLAIN (ANALYZE, COSTS OFF, TIMING OFF) "
                                        + timed_sql(case, dialect))
                    explain[case["name"]] = [row[0] for row in plan]
        return {"engine": name, "target": target, "agreement": agreed, "cases": found,
                "explain": explain}
    finally:
        if owned:
            engine.close()
        else:
            engine.reset()


def markdown(size: str, results: list[dict], reps: int, warmup: int) -> str:
    lines = [f"# sqlgen's views on other engines, size {size}", "",
             f"Median of {reps} interleaved rounds after {warmup} warm-up round(s); ratio = "
             "median / median of the case's floor on the same engine in the same run. Load "
             "avg: the 1-minute load average after each timed run (lowest–highest; 2 cores, "
             "shared). Memory not probed on these engines.", ""]
    for result in results:
        by_name = {c["name"]: c for c in result["cases"]}
        lines += [f"## {result['engine']} (target `{result['target']}`)", "",
                  "Agreement: " + ", ".join(f"{g} ({n} rows)"
                                            for g, n in result["agreement"].items())
                  + " — every implementation of a group returned identical rows before timing.",
                  "", "| implementation | median s | its floor | ratio to its floor | load avg |",
                  "| --- | --- | --- | --- | --- |"]
        for case in result["cases"]:
            if not case["times"]:  # planned only (plan_only)
                lines.append(f"| {case['name']} | not timed (planned only) | | | |")
                continue
            median = statistics.median(case["times"])
            floor = by_name[case["floor"]]
            ratio = median / statistics.median(floor["times"])
            shown = "itself" if floor is case else floor["name"].removeprefix("floor: ")
            lines.append(f"| {case['name']} | {median:.3f} | {shown} | **{ratio:.2f}×** | "
                         f"{min(case['loads']):.1f}–{max(case['loads']):.1f} |")
        lines.append("")
        for view, plan in result["explain"].items():
            lines += [f"EXPLAIN ANALYZE of {view} (timed query):", "", "```"] + plan + ["```", ""]
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--size", choices=sorted(data.SIZES), default="1m")
    parser.add_argument("--engine", action="append", choices=sorted(ENGINE_TARGET),
                        help="repeatable; default postgres, clickhouse, spark")
    parser.add_argument("--users", type=int, default=None,
                        help="load only the users (customers) whose key is below N")
    parser.add_argument("--reps", type=int, default=3)
    parser.add_argument("--warmup", type=int, default=1)
    parser.add_argument("--plan-only", action="store_true",
                        help="check agreement and plan every timed query (EXPLAIN); time none")
    parser.add_argument("--data-dir", type=Path, default=HERE / "data")
    parser.add_argument("--results", type=Path, default=HERE / "results")
    args = parser.parse_args(argv)
    size = data.SIZES[args.size]
    db = data.generate(size, args.data_dir, log=_log)
    data.add_revenue_tables(db, size, log=_log)
    results = []
    for name in args.engine or ["postgres", "clickhouse", "spark"]:
        results.append(run_engine(name, db, args.reps, args.warmup, users=args.users,
                                  plan_only=args.plan_only))
        args.results.mkdir(parents=True, exist_ok=True)
        page = markdown(size.name, results, args.reps, args.warmup)
        (args.results / f"engines_{size.name}.md").write_text(page)
        (args.results / f"engines_{size.name}.json").write_text(
            json.dumps(results, indent=2, default=str) + "\n")
    print(page)
    return 0


if __name__ == "__main__":
    sys.exit(main())
