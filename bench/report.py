"""The results as a Markdown table (bench/results/<size>.md) and as JSON."""

from __future__ import annotations

import json
import platform
from importlib.metadata import version

FLOOR = "floor: distinct (user, month)"


def versions() -> dict[str, str]:
    """Versions of everything measured."""
    found = {"python": platform.python_version()}
    for name in ("duckdb", "sqlglot", "pandas", "polars", "sqlgen"):
        try:
            found[name] = version(name)
        except Exception:  # not installed: say so in the table
            found[name] = "not installed"
    return found


def _mb(value) -> str:
    return f"{value:,.0f}" if isinstance(value, (int, float)) else "–"


def own_floor(case, cases):
    """The case's own floor (the monthly floor unless it names another)."""
    name = case.floor or FLOOR
    return next((c for c in cases if c.name == name), None) or next(
        c for c in cases if c.name == FLOOR)


def _row(case, cases) -> str:
    floor = own_floor(case, cases)
    month = next(c for c in cases if c.name == FLOOR)
    mem = case.memory
    ratio = case.median() / floor.median()
    rss = mem.get("peak_rss_mb")
    floor_rss = floor.memory.get("peak_rss_mb")
    rss_ratio = rss / floor_rss if rss and floor_rss else None
    note = case.note + (f" (memory probe failed: {mem['error']})" if "error" in mem else "")
    shown = "itself" if floor is case else floor.name.removeprefix("floor: ")
    return (f"| {case.name} | {case.median():.3f} | {shown} | **{ratio:.2f}×** | "
            f"{case.median() / month.median():.2f}× | {_mb(rss)} | "
            f"{f'{rss_ratio:.2f}×' if rss_ratio else '–'} | {_mb(mem.get('duckdb_peak_mb'))} | "
            f"{_load(case)} | {note} |")


def _load(case) -> str:
    """The lowest and highest 1-minute load average seen after the case's timed runs."""
    if not case.loads:
        return "–"
    return f"{min(case.loads):.1f}–{max(case.loads):.1f}"


def tool_lines(result) -> list[str]:
    """The CLI section: median times against the targets, and the profile when missed."""
    if result is None:
        return ["CLI not timed in this run (--no-tool)."]
    lines = [f"Timed with {result['timer']}, median of {result['runs']} whole processes "
             f"after one warm-up; {result['files']} files for every dialect.", ""]
    if result.get("build_error"):
        lines += [f"**The build failed** in this checkout (exit 1; times are of the failing "
                  f"process): `{result['build_error'].splitlines()[-1]}`", ""]
    lines += ["| command | median s | target | met |", "| --- | --- | --- | --- |"]
    for key, label, limit in (("build", "sqlgen build SPEC --dialect all --out DIR", 1.5),
                              ("check", "sqlgen build SPEC --dialect all --out DIR --check",
                               1.0)):
        met = "yes" if result[key] < limit else "**no**"
        if result.get("build_error"):
            met = "**no** (build fails)"
        lines.append(f"| `{label}` | {result[key]:.3f} | < {limit} s | {met} |")
    profile = result.get("profile")
    if profile:
        lines += ["", "Profile of one build (cProfile; the costliest functions by cumulative "
                  "and by own time):", "",
                  "| cumulative s | own s | calls | function |", "| --- | --- | --- | --- |"]
        lines += [f"| {c} | {o} | {n} | `{f}` |" for c, o, n, f in profile["cprofile"]]
        lines += ["", "Slowest imports (`python -X importtime -c 'import sqlgen.cli'`, "
                  "cumulative s):", ""]
        lines += [f"- {s} s `{name.strip()}`" for s, name in profile["imports"]]
    return lines


def _operator_lines(cases) -> list[str]:
    lines = []
    for case in cases:
        ops = case.memory.get("top_operators")
        if not ops or not case.name.startswith(("floor: distinct (user, month)", "sqlgen")):
            continue
        lines += [f"- {case.name}: " + "; ".join(
            f"{name} {secs:.2f} s ({rows:,} rows{', ' + detail if detail else ''})"
            for secs, name, rows, detail in ops[:4])]
    return lines


def markdown(size, stats, cases, agreed, identical, notes, tool_result, args) -> str:
    """The whole results page for one size."""
    floor = next(c for c in cases if c.name == FLOOR)
    v = versions()
    lines = [f"# Benchmark, size {size}", "",
             f"Dataset: {stats['events']:,} events, {stats['users']:,} users, "
             f"{stats['user_months']:,} user-months, {stats['user_weeks']:,} user-weeks, "
             f"{stats['user_days']:,} user-days; {stats['charges']:,} charges; "
             f"{stats['invoices']:,} invoice lines ({stats['refund_lines']:,} refunds or "
             f"credits), {stats['subscriptions']:,} subscriptions of "
             f"{stats['customers']:,} customers.", "",
             "Versions: " + ", ".join(f"{k} {val}" for k, val in v.items()) + ".", "",
             f"Median of {len(floor.times)} interleaved rounds after {args.warmup} warm-up "
             "round(s) (and the agreement pass, which ran every case once); "
             "ratio = median / median of the case's own floor (the unavoidable grouping of "
             "that view) in the same run. Peak RSS: "
             "high-water mark of a fresh process per implementation while it answers, "
             "data already loaded (see bench/README.md). Load avg: the machine's 1-minute load "
             "average after each timed run of the case (lowest–highest; 2 cores, shared).", "",
             "Agreement: " + ", ".join(f"{g} ({n} rows)" for g, n in agreed.items())
             + " — every implementation of a group returned identical rows before timing. "
             "Every column of every row identical: " + "; ".join(identical) + ".", "",
             "| implementation | median s | its floor | ratio to its floor | vs monthly floor | "
             "peak RSS MB | RSS vs its floor | DuckDB peak buffer MB | load avg | note |",
             "| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |"]
    lines += [_row(c, cases) for c in cases]
    if notes:
        lines += ["", "Not measured:", ""] + [f"- {n}" for n in notes]
    ops = _operator_lines(cases)
    if ops:
        lines += ["", "Slowest operators (DuckDB JSON profile of the probe run):", ""] + ops
    lines += ["", "## The sqlgen CLI", ""] + tool_lines(tool_result)
    return "\n".join(lines) + "\n"


def as_json(size, stats, cases, agreed, identical, notes, tool_result) -> str:
    """Everything measured, for comparing runs."""
    return json.dumps({
        "size": size, "dataset": stats, "versions": versions(), "agreement": agreed,
        "identical": identical,
        "notes": notes, "tool": tool_result,
        "cases": [{"name": c.name, "floor": c.floor or FLOOR, "times": c.times,
                   "loads": c.loads,
                   "median": c.median(),
                   "memory": c.memory, "note": c.note} for c in cases],
    }, indent=2, default=str) + "\n"
