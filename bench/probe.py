"""Peak memory of one implementation, measured in a fresh process of its own.

Usage (run by bench/run.py): ``probe.py DB duckdb SQL`` or ``probe.py DB pandas|polars``.
Prints one JSON object: peak_rss_mb, the resident set's high-water mark while the query ran,
data in memory included (DuckDB: the table blocks its buffer pool reads during the run;
pandas and polars: the frame read from DuckDB beforehand). The high-water mark is reset just
before the measured run by writing 5 to /proc/self/clear_refs (Linux), so the one-off cost
of converting DuckDB's result into a frame is not counted. For DuckDB it also prints
duckdb_peak_mb, the buffer manager's peak from DuckDB's JSON profile, and the slowest
operators of the plan.
"""

from __future__ import annotations

import gc
import json
import os
import re
import sys
import tempfile

import duckdb


def _kib(field: str) -> int:
    with open("/proc/self/status", encoding="ascii") as handle:
        return int(re.search(rf"{field}:\s+(\d+)", handle.read()).group(1))


def _reset_peak() -> None:
    with open("/proc/self/clear_refs", "w", encoding="ascii") as handle:
        handle.write("5")


def _operators(node: dict, found: list) -> list:
    if node.get("name"):
        info = node.get("extra_info") or {}
        detail = "; ".join(f"{k}: {v}" for k, v in info.items()
                           if k in ("Groups", "Aggregates", "Join Type", "Conditions",
                                    "Table", "Function", "Partition By"))
        found.append((round(node.get("timing", 0.0), 3), node["name"],
                      node.get("intermediate_rows", 0), detail[:160]))
    for child in node.get("children", []):
        _operators(child, found)
    return found


def probe_duckdb(db: str, sql: str) -> dict:
    """Peak RSS and DuckDB's peak buffer memory for one run of ``sql``.

    The blocks of the events table are read into DuckDB's buffer pool during the run and
    stay resident, so the peak includes the data in memory as the frames' peak does.
    """
    con = duckdb.connect(db, read_only=True)
    con.execute("SET enable_progress_bar = false")
    gc.collect()
    baseline = _kib("VmRSS")
    profile = os.path.join(tempfile.mkdtemp(prefix="bench-probe-"), "profile.json")
    con.execute("PRAGMA enable_profiling = 'json'")
    con.execute(f"SET profiling_output = '{profile}'")
    _reset_peak()
    con.execute(sql).fetchall()
    peak = _kib("VmHWM")
    con.execute("PRAGMA disable_profiling")
    tree = {}
    if os.path.exists(profile):  # a query answered from metadata writes no profile
        with open(profile, encoding="utf-8") as handle:
            tree = json.load(handle)
    operators = sorted(_operators({"children": tree.get("operator", [])}, []), reverse=True)[:6]
    return {"peak_rss_mb": peak / 1024, "baseline_rss_mb": baseline / 1024,
            "duckdb_peak_mb": tree.get("system", {}).get("peak_buffer_memory", 0) / 2**20,
            "top_operators": operators}


def probe_frame(db: str, library: str) -> dict:
    """Peak RSS of the pandas or polars monthly summary, the events already in a frame."""
    import alternatives

    con = duckdb.connect(db, read_only=True)
    con.execute("SET enable_progress_bar = false")
    relation = con.sql("SELECT user_id, ts FROM events")
    frame = relation.df() if library == "pandas" else relation.pl()
    con.close()
    gc.collect()
    baseline = _kib("VmRSS")
    _reset_peak()
    getattr(alternatives, f"{library}_month")(frame)
    return {"peak_rss_mb": _kib("VmHWM") / 1024, "baseline_rss_mb": baseline / 1024}


def main(argv: list[str]) -> int:
    db, kind = argv[0], argv[1]
    result = probe_duckdb(db, argv[2]) if kind == "duckdb" else probe_frame(db, kind)
    print(json.dumps(result))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
