"""Cases, the agreement check, interleaved timing and the memory probes."""

from __future__ import annotations

import json
import os
import statistics
import subprocess
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

import alternatives

HERE = Path(__file__).resolve().parent


@dataclass
class Case:
    """One implementation to time: a DuckDB query, or a pandas/polars function."""

    name: str
    kind: str  # 'duckdb' | 'pandas' | 'polars'
    timed_sql: str = ""  # DuckDB: forces full evaluation, returns one small row
    rows_sql: str = ""  # DuckDB: the rows compared across a group
    group: str = ""  # cases of one group must return identical rows
    note: str = ""
    floor: str = ""  # the name of this case's floor case; empty: the monthly floor
    times: list[float] = field(default_factory=list)
    loads: list[float] = field(default_factory=list)  # 1-minute load average after each run
    memory: dict = field(default_factory=dict)

    def median(self) -> float:
        return statistics.median(self.times)


def summary_case(name: str, query: str, group: str, note: str = "", floor: str = "") -> Case:
    """A DuckDB case whose query returns the growth summary columns."""
    return Case(name, "duckdb", alternatives.timing_sql(query), alternatives.rows_sql(query),
                group, note, floor)


def hashed(query: str) -> str:
    """A query forcing every column of every row of another, returning one small row."""
    return f"SELECT count(*), sum(hash(COLUMNS(*))) FROM ({query}) AS q"


def rows_case(name: str, timed: str, rows: str, group: str, floor: str,
              note: str = "") -> Case:
    """A DuckDB case timed by ``timed``, compared in its group by the ordered ``rows``."""
    return Case(name, "duckdb", timed, f"SELECT * FROM ({rows}) AS q ORDER BY ALL", group,
                note, floor)


def _run(case: Case, con, frames: dict) -> object:
    if case.kind == "duckdb":
        return con.execute(case.timed_sql).fetchall()
    return getattr(alternatives, f"{case.kind}_month")(frames[case.kind])


def _rows(case: Case, con, frames: dict) -> list[tuple]:
    if case.kind == "duckdb":
        return [tuple(r) for r in con.execute(case.rows_sql).fetchall()]
    return _run(case, con, frames)


def check_agreement(cases: list[Case], con, frames: dict, log=print) -> dict[str, int]:
    """Every case of a group must return the same rows as the group's first; else raise."""
    reference: dict[str, tuple[str, list]] = {}
    for case in cases:
        if not case.group:
            continue
        rows = _rows(case, con, frames)
        if case.group not in reference:
            reference[case.group] = (case.name, rows)
            continue
        first, expected = reference[case.group]
        if rows != expected:
            diff = [(a, b) for a, b in zip(expected, rows, strict=False) if a != b][:3]
            raise AssertionError(f"{case.name} disagrees with {first} ({len(rows)} vs "
                                 f"{len(expected)} rows); first differences: {diff}")
        log(f"  agrees: {case.name} = {first} ({len(rows)} rows)")
    return {group: len(rows) for group, (_name, rows) in reference.items()}


def check_identical(con, query: str, view: str, key: str = "period_key") -> None:
    """Every column of every row of a query equals the view's, ordered by ``key``."""
    ours = con.execute(f"SELECT * FROM ({query}) AS q ORDER BY {key}").fetchall()
    theirs = con.execute(f"SELECT * FROM {view} ORDER BY {key}").fetchall()
    if ours != theirs:
        diff = [(a, b) for a, b in zip(theirs, ours, strict=False) if a != b][:2]
        raise AssertionError(f"{query} differs from {view}: {diff}")


def time_cases(cases: list[Case], con, frames: dict, reps: int, warmup: int,
               log=print, after_round=None) -> None:
    """Warm up each case, then run rounds over all cases, rotating the order each round."""
    for _ in range(warmup):
        for case in cases:
            _run(case, con, frames)
    for rep in range(reps):
        shift = rep % len(cases)
        for case in cases[shift:] + cases[:shift]:
            start = time.perf_counter()
            _run(case, con, frames)
            case.times.append(time.perf_counter() - start)
            case.loads.append(os.getloadavg()[0])
        log(f"  round {rep + 1}/{reps} done")
        if after_round is not None:
            after_round()


def probe_memory(case: Case, db: Path) -> None:
    """Peak memory of a case in a fresh process (see probe.py)."""
    args = [sys.executable, str(HERE / "probe.py"), str(db), case.kind]
    if case.kind == "duckdb":
        args.append(case.timed_sql)
    done = subprocess.run(args, capture_output=True, text=True, check=False)
    if done.returncode != 0:
        case.memory = {"error": done.stderr.strip().splitlines()[-1:]}
        return
    case.memory = json.loads(done.stdout)
