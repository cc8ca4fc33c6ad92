"""`output.materialize: incremental`: refresh.sql against the full computation.

For each history length and batch size: the activity table holds the events before a cut,
create_all.sql builds the tables (not timed), the events of the batch (the days after the
cut) are appended, and refresh.sql is timed. Side by side in the same run: the full
computation (every view computed once: create_all.sql of `materialize: table` over the
same rows) and a dashboard read (`SELECT * FROM growth_accounting`) of the view and of the
table. Ratios only, wall and CPU (the process's, every DuckDB thread), with the 1-minute
load average (the highest of before and after the timed statements); the machine is
shared, so absolute times move between runs.

    .venv/bin/python -m bench.incremental --db bench/data/activity_10m.duckdb
    .venv/bin/python -m bench.incremental --size smoke      # generates the data first
    .venv/bin/python -m bench.incremental --size 10m --engine postgres --days 1

With ``--engine`` (postgres, spark, clickhouse, mysql: the test suite's engines, started
as the tests start them) the same case runs there, each script as that engine's client runs
it; wall seconds only (the engine is another process), the tables checked equal to the
views (EXCEPT ALL on every growth_accounting column) before a row is printed.
"""

from __future__ import annotations

import argparse
import datetime as dt
import os
import statistics
import time
from pathlib import Path

import duckdb

from sqlgen import parse_spec, render_files

from . import data

BATCH_DAYS = (1, 7, 30)
SPEC = """\
version: 1
activity:
  table: ev
  user: user_id
  timestamp: ts
cohorts: true
engagement: true
trailing_windows: [7, 28]
output:
  prefix: {prefix}
  materialize: {materialize}
  lookback: 3 days
"""


def files(prefix: str, materialize: str, target: str = "duckdb") -> dict[str, str]:
    return render_files(parse_spec(SPEC.format(prefix=prefix, materialize=materialize)),
                        target)


def timed(con, sql: str, reps: int = 1) -> float:
    """The median wall seconds of ``reps`` runs."""
    return timed_cpu(con, sql, reps)[0]


def timed_cpu(con, sql: str, reps: int = 1) -> tuple[float, float]:
    """The median wall and CPU seconds (this process, every DuckDB thread) of ``reps`` runs."""
    walls, cpus = [], []
    for _ in range(reps):
        start, cpu = time.perf_counter(), time.process_time()
        con.execute(sql)
        walls.append(time.perf_counter() - start)
        cpus.append(time.process_time() - cpu)
    return statistics.median(walls), statistics.median(cpus)


def case(source: str, since: dt.datetime, cut: dt.datetime, days: int, threads: int) -> dict:
    """One history (events from ``since`` to ``cut``) and one batch of ``days`` days."""
    con = duckdb.connect()
    con.execute(f"SET threads = {threads}")
    con.execute(f"ATTACH '{source}' AS src (READ_ONLY)")
    end = cut + dt.timedelta(days=days)
    con.execute("CREATE TABLE ev AS SELECT user_id, ts FROM src.events "
                f"WHERE ts >= TIMESTAMP '{since}' AND ts < TIMESTAMP '{cut}'")
    history = con.execute("SELECT count(*) FROM ev").fetchone()[0]
    incremental, table, view = files("t_", "incremental"), files("f_", "table"), files("v_", "view")
    con.execute(view["v_create_all.sql"])
    con.execute(incremental["t_create_all.sql"])
    con.execute("INSERT INTO ev SELECT user_id, ts FROM src.events "
                f"WHERE ts >= TIMESTAMP '{cut}' AND ts < TIMESTAMP '{end}'")
    batch = con.execute("SELECT count(*) FROM ev").fetchone()[0] - history
    load = os.getloadavg()[0]
    refresh, refresh_cpu = timed_cpu(con, incremental["t_refresh.sql"])
    full, full_cpu = timed_cpu(con, table["f_create_all.sql"])
    load = max(load, os.getloadavg()[0])
    read_view = timed(con, "SELECT * FROM v_growth_accounting", reps=3)
    read_table = timed(con, "SELECT * FROM t_growth_accounting", reps=3)
    same = con.execute("SELECT count(*) FROM (SELECT * FROM t_growth_accounting EXCEPT ALL "
                       "SELECT * FROM v_growth_accounting)").fetchone()[0]
    con.close()
    assert same == 0, "the refreshed table differs from the view"
    return {"history": history, "batch": batch, "days": days, "refresh": refresh,
            "full": full, "read_view": read_view, "read_table": read_table,
            "refresh_cpu": refresh_cpu, "full_cpu": full_cpu, "load": load}


def _tests_on_path() -> None:
    """tests/ importable: the engines and the script runner of the test suite."""
    import sys

    tests = str(Path(__file__).resolve().parent.parent / "tests")
    if tests not in sys.path:
        sys.path.insert(0, tests)


def engine_case(engine, source: str, since: dt.datetime, cut: dt.datetime,
                days: int) -> dict:
    """``case`` on an engine of the test suite (``--engine``)."""
    _tests_on_path()
    from test_create_all import _run_script  # noqa: E402  (the tests' script runner)

    target = engine.name
    engine.reset()
    end = cut + dt.timedelta(days=days)
    with duckdb.connect(source, read_only=True) as con:
        def rows(lo, hi):
            return con.execute("SELECT user_id, ts FROM events WHERE ts >= ? AND ts < ?",
                               [lo, hi]).fetchall()
        history_rows, batch_rows = rows(since, cut), rows(cut, end)
    columns = [("user_id", "bigint"), ("ts", "timestamp")]
    engine.create_table("ev", columns, history_rows)
    incremental, table, view = (files("t_", "incremental", target), files("f_", "table", target),
                                files("v_", "view", target))
    _run_script(engine, target, view["v_create_all.sql"])
    _run_script(engine, target, incremental["t_create_all.sql"])
    engine._load(engine.qualified("ev"), columns, batch_rows)

    def timed_script(script: str) -> float:
        start = time.perf_counter()
        _run_script(engine, target, script)
        return time.perf_counter() - start

    def timed_read(name: str) -> float:
        times = []
        for _ in range(3):
            start = time.perf_counter()
            engine.query(f"SELECT * FROM {name}")
            times.append(time.perf_counter() - start)
        return statistics.median(times)

    load = os.getloadavg()[0]
    refresh = timed_script(incremental["t_refresh.sql"])
    full = timed_script(table["f_create_all.sql"])
    load = max(load, os.getloadavg()[0])
    read_view, read_table = timed_read("v_growth_accounting"), timed_read("t_growth_accounting")
    names = ", ".join(engine.column_names("SELECT * FROM v_growth_accounting"))
    ((differ,),) = engine.query(
        f"SELECT count(*) FROM (SELECT {names} FROM t_growth_accounting EXCEPT ALL "
        f"SELECT {names} FROM v_growth_accounting) AS d")
    assert differ == 0, "the refreshed table differs from the view"
    return {"history": len(history_rows), "batch": len(batch_rows), "days": days,
            "refresh": refresh, "full": full, "read_view": read_view,
            "read_table": read_table, "refresh_cpu": None, "full_cpu": None, "load": load}


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", default="10m", choices=sorted(data.SIZES))
    parser.add_argument("--db", type=Path, help="a database made by bench/data.py")
    parser.add_argument("--data-dir", type=Path, default=Path(__file__).parent / "data")
    parser.add_argument("--threads", type=int, default=2)
    parser.add_argument("--days", type=int, nargs="+", default=list(BATCH_DAYS),
                        help="batch sizes in days (at most 30)")
    parser.add_argument("--history", default="both",
                        choices=["both", "full history", "last 6 months"])
    parser.add_argument("--engine", choices=["duckdb", "postgres", "spark", "clickhouse",
                                             "mysql"], default="duckdb")
    args = parser.parse_args(argv)
    source = args.db or data.generate(data.SIZES[args.size], args.data_dir)
    with duckdb.connect(str(source), read_only=True) as con:
        last = con.execute("SELECT max(ts) FROM events").fetchone()[0]
        first = con.execute("SELECT min(ts) FROM events").fetchone()[0]
    cut = dt.datetime.combine(last.date(), dt.time()) - dt.timedelta(days=max(BATCH_DAYS) - 1)
    histories = {"full history": first, "last 6 months": cut - dt.timedelta(days=182)}
    if args.history != "both":
        histories = {args.history: histories[args.history]}
    print("| history | history rows | batch | batch rows | refresh / full, wall | "
          "refresh / full, CPU | table read / view read | refresh s (CPU s) | "
          "full s (CPU s) | load average |")
    print("| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |")
    engine = None
    if args.engine != "duckdb":
        _tests_on_path()
        from engines import start_engine  # noqa: E402  (tests/engines.py)

        engine = start_engine(args.engine)
    try:
        for label, since in histories.items():
            for days in args.days:
                r = (engine_case(engine, str(source), since, cut, days) if engine else
                     case(str(source), since, cut, days, args.threads))
                cpu = ("n/a" if r["refresh_cpu"] is None
                       else f"{r['refresh_cpu'] / r['full_cpu']:.1%}")
                print(f"| {label} | {r['history']:,} | {days} day{'s' if days > 1 else ''} | "
                      f"{r['batch']:,} | {r['refresh'] / r['full']:.1%} | {cpu} | "
                      f"{r['read_table'] / r['read_view']:.2%} | {r['refresh']:.2f} "
                      f"({r['refresh_cpu'] or 0:.2f}) | {r['full']:.2f} "
                      f"({r['full_cpu'] or 0:.2f}) | {r['load']:.1f} |", flush=True)
    finally:
        if engine is not None:
            engine.close()


if __name__ == "__main__":
    main()
