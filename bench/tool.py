"""The tool itself as whole processes: `sqlgen build --dialect all` and `--check`.

Timed with hyperfine when it is installed (``apt-get install -y hyperfine``), else with
subprocess timing here; both start a new process per run, so interpreter start-up and
imports are included. When a target is missed, the CLI is profiled with cProfile and
``python -X importtime``.
"""

from __future__ import annotations

import io
import json
import pstats
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import generated

TARGETS = {"build": 1.5, "check": 1.0}  # seconds, from the benchmark's issue


def _sqlgen() -> str:
    found = Path(sys.executable).with_name("sqlgen")
    return str(found) if found.exists() else "sqlgen"


def _hyperfine(command: str, runs: int, prepare: str | None, work: Path) -> list[float]:
    out = work / "hyperfine.json"
    args = ["hyperfine", "--style", "none", "--ignore-failure", "--warmup", "1",
            "--runs", str(runs), "--export-json", str(out), command]
    if prepare:
        args[1:1] = ["--prepare", prepare]
    subprocess.run(args, cwd=work, check=True, capture_output=True)
    return json.loads(out.read_text())["results"][0]["times"]


def _subprocess_times(command: str, runs: int, prepare: str | None, work: Path) -> list[float]:
    times = []
    for index in range(runs + 1):
        if prepare:
            subprocess.run(prepare, shell=True, cwd=work, check=True)
        start = time.perf_counter()
        subprocess.run(command, shell=True, cwd=work, check=False, capture_output=True)
        if index:  # the first run is a warm-up
            times.append(time.perf_counter() - start)
    return times


def measure_tool(runs: int) -> dict:
    """Median seconds of a full build for every dialect and of --check on fresh output."""
    timer = _hyperfine if shutil.which("hyperfine") else _subprocess_times
    with tempfile.TemporaryDirectory(prefix="sqlgen-bench-") as tmp:
        work = Path(tmp)
        (work / "spec.yml").write_text(generated.spec_text("month"))
        build = f"{_sqlgen()} build spec.yml --dialect all --out out"
        result = {"timer": "hyperfine" if timer is _hyperfine else "subprocess",
                  "files": 0, "runs": runs}
        first = subprocess.run(build, shell=True, cwd=work, capture_output=True, text=True)
        result["build_error"] = first.stderr.strip() if first.returncode else ""
        result["build"] = statistics.median(timer(build, runs, "rm -rf out", work))
        subprocess.run(build, shell=True, cwd=work, capture_output=True)
        result["files"] = len(list((work / "out").rglob("*.sql")))
        result["check"] = statistics.median(timer(build + " --check", runs, None, work))
        if any(result[k] >= limit for k, limit in TARGETS.items()):
            result["profile"] = profile_cli(work)
    return result


def profile_cli(work: Path, top: int = 12) -> dict:
    """cProfile of one build (cumulative seconds of the costliest calls) and import times."""
    stats_file = work / "build.prof"
    subprocess.run([sys.executable, "-m", "cProfile", "-o", str(stats_file), "-m", "sqlgen",
                    "build", "spec.yml", "--dialect", "all", "--out", "out-profile"],
                   cwd=work, check=False, capture_output=True)
    stats = pstats.Stats(str(stats_file), stream=io.StringIO())
    imports = subprocess.run([sys.executable, "-X", "importtime", "-c", "import sqlgen.cli"],
                             capture_output=True, text=True, check=True).stderr
    return {"cprofile": _cprofile_rows(stats, top), "imports": _import_rows(imports)}


def _cprofile_rows(stats: pstats.Stats, top: int) -> list[tuple[float, float, int, str]]:
    """The costliest functions of sqlgen and sqlglot: (cumulative s, own s, calls, where)."""
    rows = []
    for (path, line, func), (_cc, calls, own, cumulative, _callers) in stats.stats.items():
        if "/sqlgen/" not in path and "/sqlglot/" not in path:
            continue
        package = "sqlgen" if "/sqlgen/" in path else "sqlglot"
        rows.append((round(cumulative, 3), round(own, 3), calls,
                     f"{package}/{Path(path).name}:{line}({func})"))
    total = max((r[0] for r in rows), default=0)
    inner = [r for r in rows if r[0] < 0.9 * total]  # below the entry point's call chain
    by_cumulative = sorted(inner, reverse=True)[:top // 2]
    by_own = sorted(rows, key=lambda r: r[1], reverse=True)[:top // 2]
    return by_cumulative + [r for r in by_own if r not in by_cumulative]


def _import_rows(text: str, top: int = 8) -> list[tuple[float, str]]:
    rows = []
    for line in text.splitlines():
        parts = line.split("|")
        if len(parts) == 3 and parts[1].strip().isdigit():
            rows.append((int(parts[1]) / 1e6, parts[2].rstrip()))
    rows.sort(reverse=True)
    return [(round(s, 3), name) for s, name in rows[:top]]
