"""Benchmark sqlgen's generated DuckDB views against the floor and the usual alternatives.

    .venv/bin/python bench/run.py --size 10m      # or 100m, or smoke

Generates the seeded dataset once per size (bench/data/), checks that every implementation
returns the same numbers, times them interleaved (median of --reps after --warmup), probes
peak memory in a fresh process per implementation, times the sqlgen CLI, and writes
bench/results/<size>.md. See bench/README.md.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

import alternatives
import data
import duckdb
import generated
import measure
import report
import tool

HERE = Path(__file__).resolve().parent
PROTOTYPES = HERE / "prototypes"
NAIVE_LIMIT = 600_000_000  # day x window pairs above which the naive join is not run


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--size", choices=sorted(data.SIZES), default="10m")
    parser.add_argument("--reps", type=int, default=5, help="timed rounds (default 5)")
    parser.add_argument("--warmup", type=int, default=1, help="untimed rounds first")
    parser.add_argument("--data-dir", type=Path, default=HERE / "data")
    parser.add_argument("--results", type=Path, default=HERE / "results")
    parser.add_argument("--no-tool", action="store_true", help="skip timing the sqlgen CLI")
    parser.add_argument("--no-memory", action="store_true", help="skip the memory probes")
    parser.add_argument("--skip", action="append", default=[], metavar="TEXT",
                        help="leave out the cases whose name contains TEXT (repeatable)")
    parser.add_argument("--only-tool", action="store_true",
                        help="time only the sqlgen CLI; write results/tool.md")
    return parser


def _log(message: str) -> None:
    print(f"[{time.strftime('%H:%M:%S')}] {message}", flush=True)


def prototype(name: str) -> str:
    """The SQL of a prototype in bench/prototypes/, without its trailing semicolon."""
    return (PROTOTYPES / f"{name}.sql").read_text().strip().rstrip(";")


def prepare_views(db: Path) -> tuple[dict[str, list[str]], list[str]]:
    """Create sqlgen's views for month and week in the database; notes on what failed."""
    con = duckdb.connect(str(db))
    created, notes = {}, []
    for grain in ("month", "week"):
        try:
            created[grain] = generated.create_views(con, grain, f"bench_{grain}")
        except Exception as err:  # report, never hide: the run goes on without them
            created[grain] = []
            notes.append(f"sqlgen {grain} views not created: {type(err).__name__}: {err}")
    con.close()
    return created, notes


def build_cases(created: dict[str, list[str]], stats: dict) -> tuple[list, list[str]]:
    """Every case of this run, and notes on the cases skipped."""
    notes: list[str] = []
    cases = [measure.Case("floor: distinct (user, month)", "duckdb",
                          alternatives.FLOOR_MONTH, note="the unavoidable work")]
    if "growth_accounting" in created.get("month", []):
        cases.append(measure.summary_case("sqlgen growth_accounting, month",
                                          generated.growth_summary("bench_month"), "month"))
    cases.append(measure.summary_case("prototype: growth_accounting, month, one pass",
                                      prototype("growth_accounting_month"), "month",
                                      "bench/prototypes/growth_accounting_month.sql"))
    cases += [
        measure.summary_case("hand-written self-join SQL, month", alternatives.SELF_JOIN_MONTH,
                             "month"),
        measure.summary_case("hand-written LAG/LEAD SQL, month", alternatives.lag_lead("month"),
                             "month"),
        measure.Case("pandas, month", "pandas", group="month", note="events in memory"),
        measure.Case("polars, month", "polars", group="month", note="events in memory"),
        measure.Case("floor: distinct (user, week)", "duckdb", alternatives.FLOOR_WEEK,
                     note="weekly floor, for reference"),
    ]
    if "growth_accounting" in created.get("week", []):
        cases.append(measure.summary_case("sqlgen growth_accounting, week",
                                          generated.growth_summary("bench_week"), "week"))
        cases.append(measure.summary_case("prototype: growth_accounting, week, one pass",
                                          prototype("growth_accounting_week"), "week",
                                          "bench/prototypes/growth_accounting_week.sql"))
        cases.append(measure.summary_case("hand-written LAG/LEAD SQL, week",
                                          alternatives.lag_lead("week"), "week",
                                          note="agreement check for the weekly view"))
    cases += _trailing_cases(created, stats, notes)
    cases += _optional_cases(created, notes)
    return cases, notes


def _trailing_case(name: str, query: str, note: str = "", timed: str = "") -> measure.Case:
    return measure.Case(name, "duckdb",
                        timed or f"SELECT count(*), sum(trailing_users) FROM ({query}) AS q",
                        f"SELECT day, trailing_users FROM ({query}) AS q ORDER BY day",
                        "trailing28", note)


def _trailing_cases(created: dict, stats: dict, notes: list[str]) -> list:
    cases = []
    if "trailing_activity" in created.get("month", []):
        cases.append(_trailing_case(
            "sqlgen trailing_activity, 28 days", generated.trailing_query("bench_month"),
            "every column timed (new, retained, resurrected, churned too)",
            generated.full_scan("bench_month.trailing_activity")))
    blocks = f"({prototype('trailing_activity_blocks')})"
    cases.append(_trailing_case(
        "prototype: trailing_activity by 28-day blocks",
        generated.trailing_query(blocks, qualified=False),
        "every column timed; bench/prototypes/trailing_activity_blocks.sql",
        generated.full_scan(f"{blocks} AS p")))
    cases.append(_trailing_case(
        "trailing 28 days by user-day spans (LEAD)", prototype("trailing_28_spans"),
        "active users only, in proportion to user-days; bench/prototypes/trailing_28_spans.sql"))
    pairs = stats["user_days"] * 28
    if pairs <= NAIVE_LIMIT:
        cases.append(_trailing_case("naive per-day window join, 28 days",
                                    alternatives.NAIVE_TRAILING_28))
    else:
        notes.append(f"naive per-day window join skipped: it would join {pairs:,} "
                     f"(user-day, day) pairs, over the {NAIVE_LIMIT:,} limit (memory and "
                     "~10 min); see the 10m table for its ratio")
    return cases


def _optional_cases(created: dict, notes: list[str]) -> list:
    cases = []
    month = created.get("month", [])
    for name in generated.OPTIONAL_VIEWS:
        if name == "trailing_activity" and name in month:
            continue
        if name not in month:
            notes.append(f"{name}: not in sqlgen.views.VIEWS in this checkout; not measured")
            continue
        query = generated.full_scan(f"bench_month.{name}")
        cases.append(measure.Case(f"sqlgen {name}, month", "duckdb", query,
                                  note="every column timed"))
        if name == "cohort_retention":
            cases.append(measure.Case(
                "prototype: cohort_retention, month, one grouping", "duckdb",
                generated.full_scan(f"({prototype('cohort_retention_month')}) AS p"),
                note="every column timed; bench/prototypes/cohort_retention_month.sql"))
    return cases


def load_frames(db: Path, cases: list) -> dict:
    """The events as pandas and polars frames, for the in-memory cases."""
    kinds = {c.kind for c in cases} - {"duckdb"}
    con = duckdb.connect(str(db), read_only=True)
    relation = con.sql("SELECT user_id, ts FROM events")
    frames = {"pandas": relation.df() if "pandas" in kinds else None,
              "polars": relation.pl() if "polars" in kinds else None}
    con.close()
    return frames


def _only_tool(args: argparse.Namespace) -> int:
    result = tool.measure_tool(max(args.reps, 5))
    page = "# The sqlgen CLI\n\n" + "\n".join(report.tool_lines(result)) + "\n"
    args.results.mkdir(parents=True, exist_ok=True)
    (args.results / "tool.md").write_text(page)
    print(page)
    return 0


def _check_prototypes(con, created: dict) -> list[str]:
    """Each prototype must equal its view in every column of every row; return the pairs."""
    identical = []
    checks = [("month", "growth_accounting", "growth_accounting_month", "period_key"),
              ("week", "growth_accounting", "growth_accounting_week", "period_key"),
              ("month", "trailing_activity", "trailing_activity_blocks", "day_key"),
              ("month", "cohort_retention", "cohort_retention_month", "cohort_key, period_key")]
    for grain, view, name, key in checks:
        if view in created.get(grain, []):
            measure.check_identical(con, prototype(name), f"bench_{grain}.{view}", key)
            identical.append(f"bench_{grain}.{view} = prototypes/{name}.sql")
            _log(f"  identical: every column of bench_{grain}.{view} and {name}.sql")
    return identical


def _skip(cases: list, created: dict, patterns: list[str], notes: list[str]) -> list:
    kept = [c for c in cases if not any(p in c.name for p in patterns)]
    for case in cases:
        if case not in kept:
            notes.append(f"{case.name}: left out of this run (--skip)")
    if not any("week" in c.name for c in kept):
        created.pop("week", None)  # no weekly case left: no weekly identity check either
    return kept


def main(argv: list[str] | None = None) -> int:
    args = _parser().parse_args(argv)
    if args.only_tool:
        return _only_tool(args)
    size = data.SIZES[args.size]
    _log(f"dataset {size.name}: generating if missing")
    db = data.generate(size, args.data_dir, log=_log)
    created, notes = prepare_views(db)
    con = duckdb.connect(str(db), read_only=True)
    con.execute("SET enable_progress_bar = false")
    stats = data.describe(con)
    _log(f"dataset: {json.dumps(stats)}")
    cases, skipped = build_cases(created, stats)
    cases = _skip(cases, created, args.skip, skipped)
    notes += skipped
    frames = load_frames(db, cases)
    _log("checking that implementations agree")
    agreed = measure.check_agreement(cases, con, frames, log=_log)
    identical = _check_prototypes(con, created)

    def write(tool_result=None, final=False) -> Path:
        return _write(args, size.name, stats, cases, agreed, identical, notes, tool_result,
                      final)

    _log(f"timing {len(cases)} cases, {args.warmup} warm-up + {args.reps} rounds")
    measure.time_cases(cases, con, frames, args.reps, args.warmup, log=_log,
                       after_round=write)
    con.close()
    del frames
    if not args.no_memory:
        for case in cases:
            _log(f"memory: {case.name}")
            measure.probe_memory(case, db)
    out = write(None if args.no_tool else tool.measure_tool(max(args.reps, 5)), final=True)
    _log(f"wrote {out}")
    print(out.read_text())
    return 0


def _write(args, size, stats, cases, agreed, identical, notes, tool_result, final) -> Path:
    """Write the page and the JSON; before the end, marked as partial (after each round)."""
    args.results.mkdir(parents=True, exist_ok=True)
    out = args.results / f"{size}.md"
    page = report.markdown(size, stats, cases, agreed, identical, notes, tool_result, args)
    if not final:
        page = ("**Partial: the run is still going (or was stopped); memory and CLI not yet "
                "measured.**\n\n" + page)
    out.write_text(page)
    (args.results / f"{size}.json").write_text(
        report.as_json(size, stats, cases, agreed, identical, notes, tool_result))
    return out


if __name__ == "__main__":
    sys.exit(main())
