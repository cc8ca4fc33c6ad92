"""The ``sqlgen`` command: a thin shell over the library.

Exit codes (``errors.EXIT_*``): 0 ok, 1 stale files for --check, 2 usage, 3 a spec problem,
4 an output problem,
5 a statement of apply refused by the database.
"""

from __future__ import annotations

import argparse
import difflib
import json
import os
import sys
from pathlib import Path
from typing import TYPE_CHECKING

from . import __version__, api
from .api import Dialects, UsageError
from .comments import printable
from .dialects import TARGETS, target_names
from .errors import EXIT_OUTPUT, SpecError, SqlgenError, UnsupportedError
from .results import emit, gap_fields, paint_diff, problem_fields, result

if TYPE_CHECKING:
    from .spec import Spec


def _dialects(value: str) -> Dialects:
    if value.strip() == "all":
        return Dialects(tuple(target_names()), every=True)
    names = [v.strip() for v in value.split(",")]
    if not any(names):
        raise argparse.ArgumentTypeError("name at least one dialect, or all")
    for name in names:
        if not name:
            raise argparse.ArgumentTypeError(f"{value!r} has an empty name; separate dialects "
                                             "with single commas, e.g. duckdb,postgres")
        if name == "all":
            raise argparse.ArgumentTypeError("all stands alone: give all, or a list of dialects")
        if name not in TARGETS:
            close = difflib.get_close_matches(name, target_names(), n=1)
            hint = f" Did you mean {close[0]!r}?" if close else ""
            raise argparse.ArgumentTypeError(
                f"{name!r} is not one of {', '.join(target_names())}, all.{hint}")
    repeated = sorted({name for name in names if names.count(name) > 1})
    if repeated:
        raise argparse.ArgumentTypeError(f"{repeated[0]!r} is named more than once")
    return Dialects(tuple(names))


def _jobs(value: str) -> int:
    if not value.isdigit() or int(value) < 1:
        raise argparse.ArgumentTypeError(f"{value!r} is not a whole number of at least 1")
    return int(value)


def _spare_cpus() -> int:
    """CPUs this process may use that other work does not keep busy, at least 1: on a
    loaded machine, more processes only queue behind the others."""
    if hasattr(os, "sched_getaffinity"):  # Linux: the CPUs this process may run on
        usable = len(os.sched_getaffinity(0))
    else:
        usable = os.cpu_count() or 1
    return max(1, usable - _busy_cpus())


def _busy_cpus(loadavg: str | None = None) -> int:
    """Other work running: the smaller of the 1-minute load average (which also remembers
    this command's own earlier runs) and the tasks runnable right now besides this one
    (which misses work that just paused); 0 where neither is known."""
    try:
        fields = (loadavg if loadavg is not None else Path("/proc/loadavg").read_text()).split()
        return max(0, min(int(float(fields[0])), int(fields[3].split("/")[0]) - 1))
    except (OSError, ValueError, IndexError):
        pass
    try:
        return int(os.getloadavg()[0])
    except (AttributeError, OSError):
        return 0


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="sqlgen", description="Generate growth-accounting SQL views from a YAML spec.")
    parser.add_argument("--version", action="version", version=f"sqlgen {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    build = sub.add_parser("build", help="write the SQL files for a spec")
    build.add_argument("spec", nargs="+",
                       help="the YAML spec file(s), or folders of them (every *.yml and "
                            "*.yaml file directly in a folder); each spec gets its own "
                            "output folder")
    build.add_argument("--dialect", type=_dialects, metavar="D",
                       help="target dialect(s): one name, a comma-separated list, or all "
                            "(default: output.dialect of the spec)")
    build.add_argument("--out", metavar="DIR", help="output folder (default: output.folder, "
                       "relative to the spec; with several dialects one subfolder each)")
    build.add_argument("--check", action="store_true",
                       help="write nothing; exit 1 with a diff if the files are not up to date")
    build.add_argument("--full", action="store_true",
                       help="compile and compare every file even when the manifest vouches "
                            "for them (recommended with --check in CI)")
    build.add_argument("--jobs", type=_jobs, default=None, metavar="N",
                       help="with several dialects, compile in up to N processes "
                            "(default: the CPUs not already busy, by the load average)")

    validate = sub.add_parser("validate", help="check a spec and report every problem")
    validate.add_argument("spec", help="the YAML spec file")
    for command in (build, validate):
        command.add_argument("--format", choices=("text", "json"), default="text",
                             help="json: one JSON object on stdout with stable field names "
                                  "(validate and build --check; docs/json-output.md)")
        command.add_argument("--schema", metavar="SOURCE",
                             help="also check every table and column the spec names against "
                                  "a schema source: a DuckDB file, a Parquet or CSV file, a "
                                  "postgresql:// URL or a column listing CSV (docs/schema.md)")

    checks = sub.add_parser("checks", help="print (or write) the read-only run-time checks "
                                           "query for a spec")
    checks.add_argument("spec", help="the YAML spec file")
    checks.add_argument("--dialect", choices=target_names(), metavar="D",
                        help="target dialect (default: output.dialect of the spec)")
    checks.add_argument("--out", metavar="FILE", help="write it here instead of stdout "
                        "(a file sqlgen checks wrote before, or a new one)")

    init = sub.add_parser("init", help="write a commented starter spec for a table")
    init.add_argument("source", help="schema source: a DuckDB file, a Parquet or CSV file, a "
                                     "postgresql:// URL or a column listing CSV")
    init.add_argument("--table", metavar="T", help="the table (schema.table), when the "
                                                   "source holds several")
    init.add_argument("--out", metavar="FILE", default="growth.yml",
                      help="the spec file to write (default: growth.yml); never overwritten")

    report = sub.add_parser("report", help="run a spec's views on a source and write a "
                                           "self-contained page of charts (report extra)")
    report.add_argument("spec", help="the YAML spec file")
    report.add_argument("--from", dest="source", required=True, metavar="SOURCE",
                        help="where the spec's tables are: a DuckDB file, a Parquet or CSV "
                             "file, or a postgresql:// URL (docs/report.md)")
    report.add_argument("--out", default="report.html", metavar="FILE",
                        help="the page to write (default: report.html); the PNGs go to "
                             "FILE's name with -charts/ beside it")
    report.add_argument("--no-png", action="store_true", help="write the page only")

    apply = sub.add_parser("apply", help="create the spec's schema and views in a database, "
                                         "in one transaction")
    apply.add_argument("spec", help="the YAML spec file")
    apply.add_argument("--to", required=True, metavar="DATABASE",
                       help="a DuckDB database file or a postgresql:// URL; the spec is "
                            "checked against its tables first")

    sub.add_parser("schema", help="print a JSON Schema of the spec, for editors with YAML "
                                  "support")

    demo = sub.add_parser("demo", help="build and run the views on an invented demo dataset")
    demo.add_argument("--folder", default="sqlgen-demo", metavar="DIR",
                      help="where the demo database, spec and SQL go (default: sqlgen-demo)")
    demo.add_argument("--grain", default="month", choices=["day", "week", "month", "quarter",
                                                           "year"])
    return parser


def _buildable(spec: Spec, chosen: Dialects) -> list[str]:
    """``api.buildable``, its note about skipped dialects on stderr."""
    ok, note = api.buildable(spec, chosen)
    if note:
        print(f"sqlgen: {note}", file=sys.stderr)
    return ok


_WARNINGS: list = []  # warnings of this run's specs, for --format json


def _warn(warnings) -> None:
    for warning in warnings:
        print(warning, file=sys.stderr)


def _load(args: argparse.Namespace) -> Spec:
    """The spec, checked against ``--schema`` when given (every problem at once)."""
    spec = api.load_spec(args.spec, args.schema)
    if args.format == "json":
        _WARNINGS.extend(spec.warnings)
    else:
        _warn(spec.warnings)
    return spec


def _build(args: argparse.Namespace) -> int:
    if args.format == "json" and not args.check:
        raise UsageError("--format json is for build --check (and validate); a build "
                         "reports in text")
    plan = api.plan_build(args.spec, args.dialect, args.out, args.full,
                          args.jobs or _spare_cpus(), args.schema)
    if args.format == "json":
        _WARNINGS.extend(plan.warnings)
    else:
        _warn(plan.warnings)
    for note in plan.notes:
        print(f"sqlgen: {note}", file=sys.stderr)
    if args.check:
        return _check(plan, args.format == "json")
    for done in api.write(plan):
        _report(done.folder, done.written, done.unchanged, done.removed, done.leftovers,
                done.notes)
    return 0


def _report(folder: Path, written: int, unchanged: int, removed: int, leftovers: int,
            notes) -> None:
    print(f"{folder}: {written} written, {unchanged} unchanged"
          + (f", {removed} removed" if removed else ""))
    if leftovers:
        print(f"{folder}: removed {leftovers} temporary file(s) left by an interrupted build")
    for note in notes:
        print(f"sqlgen: note: {note}", file=sys.stderr)


def _check(plan: api.BuildPlan, as_json: bool) -> int:
    """Diffs for the folders the manifests could not vouch for (compiled in full); the
    folders a build would refuse are refused here too, with the same reasons."""
    checked = api.check(plan)
    code = 0 if checked.ok else 1
    full = ([f"checked by a full compile: {', '.join(str(p) for p in checked.compiled)} did "
             "not vouch for the files (missing, or written for another spec or by another "
             "sqlgen, or --full); `sqlgen build` rewrites it, and the next --check is fast "
             "again"] if checked.compiled and checked.ok else [])
    if as_json:
        emit(result("check", code, [job.path for job in plan.specs], notes=checked.notes + full,
                    warnings=[problem_fields(w) for w in _WARNINGS],
                    stale=[{"path": str(e.path), "state": e.state, "diff": e.diff}
                           for e in checked.stale]))
        return code
    for note in checked.notes:
        print(f"sqlgen: note: {note}", file=sys.stderr)
    if checked.stale:
        sys.stdout.write("".join(paint_diff(e.diff, sys.stdout) for e in checked.stale))
        print(f"sqlgen: {len(checked.stale)} file(s) out of date; run `sqlgen build` to "
              "update them", file=sys.stderr)
        return 1
    print("sqlgen: generated files are up to date")
    for note in full:
        print(f"sqlgen: {note}", file=sys.stderr)
    return 0


def _validate(args: argparse.Namespace) -> int:
    spec = _load(args)
    api.compile(spec)  # what sqlglot cannot spell for the target is a spec problem too
    if args.format == "json":
        emit(result("validate", 0, [args.spec], grain=spec.grain, target=spec.output.dialect,
                    warnings=[problem_fields(w) for w in _WARNINGS]))
        return 0
    checked = f", columns checked against {_label(args.schema)}" if args.schema else ""
    print(f"{printable(args.spec, False)}: ok ({spec.grain} grain, target "
          f"{spec.output.dialect}{checked})")
    return 0


def _label(source: str) -> str:
    from .schema import redact

    return redact(source)


def _checks(args: argparse.Namespace) -> int:
    from .checks import write_checks

    spec = api.load_spec(args.spec)
    _warn(spec.warnings)
    if args.out:
        write_checks(spec, args.out, args.dialect)
        print(f"{printable(args.out, False)}: run-time checks written")
    else:
        sys.stdout.write(api.runtime_checks(spec, args.dialect))
    return 0


def _init(args: argparse.Namespace) -> int:
    api.init(args.source, args.out, args.table)
    print(f"{printable(args.out, False)}: starter spec written from {_label(args.source)}; "
          f"read its comments, then run `sqlgen validate --schema SOURCE {args.out}`")
    return 0


def _report_page(args: argparse.Namespace) -> int:
    from .report import make_report

    spec = api.load_spec(args.spec)
    _warn(spec.warnings)
    done = make_report(spec, args.source, Path(args.out), pngs=not args.no_png)
    charts = printable(str(done.html.with_name(done.html.stem + "-charts")), False)
    print(f"{printable(str(done.html), False)}: report written from {_label(args.source)}"
          + (f"; {len(done.pngs)} PNG(s) in {charts}/" if done.pngs else ""))
    return 0


def _apply(args: argparse.Namespace) -> int:
    spec = api.load_spec(args.spec)
    _warn(spec.warnings)
    print("\n".join(api.apply(spec, args.to).lines()))
    return 0


def _schema(_args: argparse.Namespace) -> int:
    sys.stdout.write(json.dumps(api.json_schema(), indent=2, sort_keys=True) + "\n")
    return 0


def _demo(args: argparse.Namespace) -> int:
    from .demo import run_demo

    print(run_demo(Path(args.folder), args.grain))
    return 0


COMMANDS = {"build": _build, "validate": _validate, "demo": _demo, "init": _init,
            "checks": _checks, "apply": _apply, "schema": _schema, "report": _report_page}


def main(argv: list[str] | None = None) -> int:
    args = _parser().parse_args(argv)
    _WARNINGS.clear()
    if getattr(args, "format", "text") == "json":
        return _main_json(args)
    try:
        return COMMANDS[args.command](args)
    except (SpecError, UnsupportedError, api.SeveralErrors) as err:
        print(err.render(), file=sys.stderr)
        return err.exit_code
    except SqlgenError as err:
        print(f"Error: {err}", file=sys.stderr)
        return err.exit_code
    except KeyboardInterrupt:
        return 130
    except OSError as err:  # a read or write no stage above turned into a message
        print(f"Error: {_os_text(err)}", file=sys.stderr)
        return EXIT_OUTPUT


def _os_text(err: OSError) -> str:
    return (f"{err.filename or 'sqlgen'}: {err.strerror or err}; check the path and its "
            "permissions")


def _main_json(args: argparse.Namespace) -> int:
    """A command with --format json: one JSON object on stdout whatever happens."""
    command = "check" if args.command == "build" else args.command
    specs = args.spec if isinstance(args.spec, list) else [args.spec]
    try:
        return COMMANDS[args.command](args)
    except SqlgenError as err:
        errors = err.errors if isinstance(err, api.SeveralErrors) else [err]
        fields = {"problems": [problem_fields(p) for e in errors
                               for p in getattr(e, "problems", ())],
                  "gaps": [gap_fields(g) for e in errors for g in getattr(e, "gaps", ())]}
        if not fields["problems"] and not fields["gaps"]:
            fields["error"] = str(err)
        code = err.exit_code
    except OSError as err:
        fields, code = {"error": _os_text(err)}, EXIT_OUTPUT
    emit(result(command, code, specs, warnings=[problem_fields(w) for w in _WARNINGS],
                **fields))
    return code


if __name__ == "__main__":
    sys.exit(main())
