"""The tool itself as whole processes: `sqlgen build --dialect all` and `--check`.

Timed with hyperfine when it is installed (``apt-get install -y hyperfine``), else with
subprocess timing here; both start a new process per run, so interpreter start-up and
imports are included. When a target is missed, the CLI is profiled with cProfile and
``python -X importtime``.

Before/after comparison of two versions of sqlgen, interleaved in one run:

    .venv/bin/python bench/tool.py --before REV [--after REV] [--templates REV] [--runs 5]

Each version is exported from git (``git archive``; without ``--after``, the working tree
as installed is the "after") and run by the same ``.venv/bin/sqlgen`` with ``PYTHONPATH``
pointing at the export; ``--templates REV`` gives both exports the templates of REV, so
that only the code differs (and the files must come out byte-identical). Every round
times a build into an empty folder and a ``--check`` of that folder for each version, the
order rotated by one each round; one warm-up round.
"""

from __future__ import annotations

import argparse
import io
import json
import os
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


REPO = Path(__file__).resolve().parent.parent


def _export(rev: str, into: Path, templates: str | None = None) -> Path:
    """sqlgen at ``rev`` with the templates of ``templates`` (default: ``rev``), laid out
    as an importable package."""
    into.mkdir(parents=True)
    for what, at in (("sqlgen", rev), ("templates", templates or rev)):
        archive = subprocess.run(["git", "archive", at, what], cwd=REPO, check=True,
                                 capture_output=True).stdout
        subprocess.run(["tar", "-x", "-C", str(into)], input=archive, check=True)
    (into / "templates").rename(into / "sqlgen" / "templates")
    return into


def _sql_files(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*.sql"))}


def _templates(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in folder.glob("*.sql")}


def compare(before: str, after: str | None, runs: int, templates: str | None = None) -> dict:
    """Median whole-process seconds of build and --check for each version, interleaved."""
    with tempfile.TemporaryDirectory(prefix="sqlgen-compare-") as tmp:
        work = Path(tmp)
        (work / "spec.yml").write_text(generated.spec_text("month"))
        if templates and not after:
            raise ValueError("--templates needs --after (the working tree has its own)")
        paths = {"before": _export(before, work / "before", templates)}
        if after:
            paths["after"] = _export(after, work / "after", templates)
        variants = [("before", before, [], paths["before"]),
                    ("after", after or "working tree", [], paths.get("after"))]
        help_text = _run(["--help"], variants[1][3], work, ["build"]).stdout
        if "--jobs" in help_text:
            variants.append(("after, --jobs 1", after or "working tree", ["--jobs", "1"],
                             paths.get("after")))
        times = {name: {"build": [], "check": []} for name, *_ in variants}
        load = [os.getloadavg()[0]]
        for index in range(runs + 1):
            shift = index % len(variants)
            for name, _rev, extra, path in variants[shift:] + variants[:shift]:
                out = work / f"out-{name.replace(' ', '').replace(',', '')}"
                shutil.rmtree(out, ignore_errors=True)
                args = ["build", "spec.yml", "--dialect", "all", "--out", str(out), *extra]
                for kind, more in (("build", []), ("check", ["--check"])):
                    start = time.perf_counter()
                    done = _run(args + more, path, work)
                    elapsed = time.perf_counter() - start
                    if done.returncode != 0:
                        raise RuntimeError(f"{name}: sqlgen {' '.join(args + more)} failed:\n"
                                           f"{done.stderr}")
                    if index:  # round 0 is the warm-up
                        times[name][kind].append(elapsed)
            load.append(os.getloadavg()[0])
        outputs = {name: _sql_files(work / f"out-{name.replace(' ', '').replace(',', '')}")
                   for name, *_ in variants}
        after_templates = (paths["after"] / "sqlgen" if after else REPO) / "templates"
        templates_same = (_templates(paths["before"] / "sqlgen" / "templates")
                          == _templates(after_templates))
    return {
        "runs": runs, "revisions": {name: rev for name, rev, *_ in variants},
        "templates": templates,
        "files": len(outputs["before"]),
        "identical": all(o == outputs["before"] for o in outputs.values()),
        "templates_same": templates_same,
        "load_average": [round(x, 1) for x in load],
        "median": {name: {k: statistics.median(v) for k, v in t.items()}
                   for name, t in times.items()},
        "times": times,
    }


def _run(args: list[str], path: Path | None, cwd: Path,
         first: list[str] | None = None) -> subprocess.CompletedProcess:
    env = dict(os.environ)
    env.pop("PYTHONPATH", None)
    if path is not None:
        env["PYTHONPATH"] = str(path)
    return subprocess.run([_sqlgen(), *(first or []), *args], cwd=cwd, env=env,
                          capture_output=True, text=True, check=False)


def compare_lines(result: dict) -> list[str]:
    """The comparison as a Markdown table with its conditions."""
    med = result["median"]
    base = med["before"]
    lines = [f"Median of {result['runs']} interleaved rounds after one warm-up, whole "
             f"processes (`.venv/bin/sqlgen`), {result['files']} SQL files; load average "
             f"during the run {min(result['load_average'])}–{max(result['load_average'])}. "
             f"Files byte-identical between the versions: "
             f"{'yes' if result['identical'] else 'no'}"
             + ("" if result["templates_same"] else " (the templates differ between them)")
             + "." + (f" Templates of `{result['templates']}` for both." if result["templates"]
                      else ""), "",
             "| version | build s | vs before | `--check` s | vs before |",
             "| --- | --- | --- | --- | --- |"]
    for name, m in med.items():
        rev = result["revisions"][name]
        lines.append(f"| {name} (`{rev}`) | {m['build']:.3f} | "
                     f"{base['build'] / m['build']:.1f}× | {m['check']:.3f} | "
                     f"{base['check'] / m['check']:.1f}× |")
    return lines


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Compare the CLI of two sqlgen versions.")
    parser.add_argument("--before", required=True, metavar="REV", help="git revision")
    parser.add_argument("--after", metavar="REV",
                        help="git revision (default: the working tree as installed)")
    parser.add_argument("--templates", metavar="REV",
                        help="give both versions the templates of this revision")
    parser.add_argument("--runs", type=int, default=5)
    args = parser.parse_args(argv)
    result = compare(args.before, args.after, args.runs, args.templates)
    print("\n".join(compare_lines(result)))
    return 0


if __name__ == "__main__":
    sys.exit(main())
