"""The ``sqlgen`` command: a thin shell over the library.

Exit codes (``errors.EXIT_*``): 0 ok, 1 stale files for --check, 2 usage, 3 a spec problem,
4 an output problem.
"""

from __future__ import annotations

import argparse
import difflib
import os
import sys
from dataclasses import dataclass
from pathlib import Path

from . import __version__
from .comments import printable
from .compiler import build_inputs, file_names, render_files, render_targets
from .dialects import TARGETS, target_names
from .errors import (EXIT_OUTPUT, EXIT_SPEC, EXIT_USAGE, OutputError, SpecError, SqlgenError,
                     UnsupportedError)
from .output import (is_up_to_date, stale_files, plan_folder, refuse, spec_owner, tidy,
                     write_folders)
from .results import emit, gap_fields, paint_diff, problem_fields, result
from .spec import Spec, load_spec
from .support import gaps
from .views import planned_views


class UsageError(SqlgenError):
    exit_code = EXIT_USAGE


class _Several(SqlgenError):
    """The problems of several specs of one build, each rendered as its own error does."""

    exit_code = EXIT_SPEC

    def __init__(self, errors: list[SqlgenError]):
        self.errors = errors
        super().__init__("\n".join(err.render() for err in errors))

    def render(self) -> str:
        return str(self)


@dataclass(frozen=True)
class Dialects:
    """The dialects asked for: ``every`` for ``all`` (build those that can express the spec)."""

    names: tuple[str, ...]
    every: bool = False


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
    build.add_argument("spec", nargs="+", metavar="SPEC",
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


def _folders(spec: Spec, spec_path: str, chosen: Dialects, dialects: list[str],
             out: str | None) -> list[tuple[str, Path]]:
    """One folder, or one subfolder per dialect when several were asked for (even if only
    one of them can be built, so that each dialect's files stay in the same place)."""
    base = Path(out) if out else Path(spec_path).parent / spec.output.folder
    if len(chosen.names) == 1:
        return [(dialects[0], base)]
    return [(name, base / name) for name in dialects]


def _buildable(spec: Spec, chosen: Dialects) -> list[str]:
    """The dialects to build. Any that cannot express the spec: with ``all``, skipped and
    listed on stderr with every reason (an error when none is left); when named, an error
    listing every gap of every named dialect."""
    views = [view.name for view in planned_views(spec)]
    found = {name: gaps(spec, TARGETS[name], views) for name in chosen.names}
    blocked = [gap for name in chosen.names for gap in found[name]]
    ok = [name for name in chosen.names if not found[name]]
    if blocked and (not chosen.every or not ok):
        raise UnsupportedError.of(blocked)
    if blocked:
        skipped = [name for name in chosen.names if found[name]]
        print(f"sqlgen: built {len(ok)} of {len(chosen.names)} dialects; skipped "
              f"{', '.join(skipped)}, which cannot express this spec:\n"
              + "\n".join(str(gap) for gap in blocked), file=sys.stderr)
    return ok


_WARNINGS: list = []  # warnings of this run's specs, for --format json


def _warn(spec: Spec) -> None:
    for warning in spec.warnings:
        print(warning, file=sys.stderr)


def _load(args: argparse.Namespace) -> Spec:
    """The spec, checked against ``--schema`` when given (every problem at once)."""
    spec = load_spec(args.spec)
    if getattr(args, "format", "text") == "json":
        _WARNINGS.extend(spec.warnings)
    else:
        _warn(spec)
    if args.schema:
        from .schema import open_source
        from .schemacheck import check_spec

        problems = check_spec(spec, open_source(args.schema))
        if problems:
            raise SpecError(problems)
    return spec


@dataclass
class _Job:
    """One spec of a build: its folders (folder, target, build inputs, manifest name),
    which of them the manifest vouches for, and the files compiled for the others."""

    path: str
    spec: Spec
    names: list[str]
    plans: list[tuple[Path, str, list[str], str]]
    fresh: list[bool]
    rendered: dict[str, dict[str, str]]


def spec_paths(given: list[str]) -> list[str]:
    """The spec files named: each file as given, and for a folder every ``*.yml`` and
    ``*.yaml`` file directly in it, by name (names starting with ``.`` skipped)."""
    found: list[str] = []
    for item in given:
        path = Path(item)
        if path.is_dir():
            specs = sorted(p for p in path.iterdir() if p.suffix in (".yml", ".yaml")
                           and not p.name.startswith(".") and p.is_file())
            if not specs:
                raise UsageError(f"{printable(item, False)}: a folder without a spec "
                                 "(*.yml or *.yaml) in it")
            found += [str(p) for p in specs]
        else:
            found.append(item)
    return list(dict.fromkeys(found))


def _job(path: str, args: argparse.Namespace, several: bool) -> _Job:
    """One spec's part of a build; with several specs, ``--out DIR`` means DIR/<spec stem>."""
    out = str(Path(args.out) / Path(path).stem) if several and args.out else args.out
    args = argparse.Namespace(**{**vars(args), "spec": path, "out": out})
    spec = _load(args)
    chosen = args.dialect or Dialects((spec.output.dialect,))
    dialects = _buildable(spec, chosen)
    names = file_names(spec)
    plans = [(folder, target, build_inputs(spec, target), spec_owner(path, folder))
             for target, folder in _folders(spec, path, chosen, dialects, args.out)]
    # A folder whose manifest matches these inputs and whose files match their recorded
    # hashes holds what a build would write: no need to compile its target.
    fresh = [not args.full and is_up_to_date(folder, owner, inputs, names)
             for folder, _, inputs, owner in plans]
    todo = [target for (_, target, _, _), ok in zip(plans, fresh) if not ok]
    rendered = render_targets(spec, todo, args.jobs or _spare_cpus()) if todo else {}
    return _Job(path, spec, names, plans, fresh, rendered)


def _jobs_of(args: argparse.Namespace) -> list[_Job]:
    """Every spec loaded and compiled before anything is written; the problems of every
    spec reported together."""
    jobs, failed = [], []
    paths = spec_paths(args.spec)
    for path in paths:
        try:
            jobs.append(_job(path, args, len(paths) > 1))
        except (SpecError, UnsupportedError) as err:
            failed.append(err)
    if len(failed) == 1:
        raise failed[0]
    if failed:
        raise _Several(failed)
    _claimed_twice(jobs)
    return jobs


def _claimed_twice(jobs: list[_Job]) -> None:
    """Two specs of one build that would write the same file: refused before any write."""
    claims: dict[Path, str] = {}
    problems = []
    for job in jobs:
        for folder, *_ in job.plans:
            for name in job.names:
                path = (folder / name).resolve()
                other = claims.setdefault(path, job.path)
                if other != job.path:
                    problems.append(f"{folder / name}: written by both {other} and {job.path} "
                                    "in this build; give each spec its own output.prefix or "
                                    "output.folder")
    if problems:
        raise OutputError("\n".join(problems))


def _build(args: argparse.Namespace) -> int:
    jobs = _jobs_of(args)
    if args.check:
        return _check(jobs, args.format == "json")
    if args.format == "json":
        raise UsageError("--format json is for build --check (and validate); a build "
                         "reports in text")
    # Every folder of every spec is checked before the first is written.
    plans = [[plan_folder(folder, owner, inputs, job.names, job.path)
              for folder, _, inputs, owner in job.plans] for job in jobs]
    refuse([plan for job_plans in plans for plan in job_plans])
    for job, job_plans in zip(jobs, plans):
        todo = [(folder, job.rendered[target], inputs, owner, job.path)
                for (folder, target, inputs, owner), ok in zip(job.plans, job.fresh) if not ok]
        results = iter(write_folders(todo))
        for plan, ok in zip(job_plans, job.fresh):
            if ok:
                _report(plan.folder, 0, len(job.names), 0, tidy(plan), plan.notes())
                continue
            result = next(results)
            _report(plan.folder, len(result.written), len(result.unchanged),
                    len(result.removed), result.leftovers, result.notes)
    return 0


def _report(folder: Path, written: int, unchanged: int, removed: int, leftovers: int,
            notes) -> None:
    print(f"{folder}: {written} written, {unchanged} unchanged"
          + (f", {removed} removed" if removed else ""))
    if leftovers:
        print(f"{folder}: removed {leftovers} temporary file(s) left by an interrupted build")
    for note in notes:
        print(f"sqlgen: note: {note}", file=sys.stderr)


def _check(jobs: list[_Job], as_json: bool = False) -> int:
    """Diffs for the folders the manifests could not vouch for (compiled in full); the
    folders a build would refuse are refused here too, with the same reasons."""
    checked = [(plan_folder(folder, owner, inputs, job.names, job.path),
                job.rendered.get(target) if not ok else None)
               for job in jobs
               for (folder, target, inputs, owner), ok in zip(job.plans, job.fresh)]
    refuse([plan for plan, _ in checked])
    notes = [note for plan, _ in checked for note in plan.notes()]
    notes += [f"{plan.folder}: {len(plan.leftovers)} temporary file(s) left by an interrupted "
              "build; `sqlgen build` removes them" for plan, _ in checked if plan.leftovers]
    stale = [entry for plan, files in checked if files is not None
             for entry in stale_files(plan, files)]
    compiled = [plan.manifest.path for plan, files in checked if files is not None]
    if compiled and not stale:
        notes.append(f"checked by a full compile: {', '.join(str(p) for p in compiled)} did "
                     "not vouch for the files (missing, or written for another spec or by "
                     "another sqlgen, or --full); `sqlgen build` rewrites it, and the next "
                     "--check is fast again")
    code = 1 if stale else 0
    if as_json:
        emit(result("check", code, [job.path for job in jobs], notes=notes,
                    warnings=[problem_fields(w) for w in _WARNINGS],
                    stale=[{"path": str(e.path), "state": e.state, "diff": e.diff}
                           for e in stale]))
        return code
    for note in notes[:len(notes) - bool(compiled and not stale)]:
        print(f"sqlgen: note: {note}", file=sys.stderr)
    if stale:
        sys.stdout.write("".join(paint_diff(e.diff, sys.stdout) for e in stale))
        print(f"sqlgen: {len(stale)} file(s) out of date; run `sqlgen build` to update them",
              file=sys.stderr)
        return 1
    print("sqlgen: generated files are up to date")
    if compiled:
        print(f"sqlgen: {notes[-1]}", file=sys.stderr)
    return 0


def _validate(args: argparse.Namespace) -> int:
    spec = _load(args)
    _buildable(spec, Dialects((spec.output.dialect,)))
    render_files(spec)  # what sqlglot cannot spell for the target is a spec problem too
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
    from .checks import checks_sql, write_checks

    spec = load_spec(args.spec)
    _warn(spec)
    if args.out:
        write_checks(spec, args.out, args.dialect)
        print(f"{printable(args.out, False)}: run-time checks written")
    else:
        sys.stdout.write(checks_sql(spec, args.dialect))
    return 0


def _init(args: argparse.Namespace) -> int:
    from .init import write_starter

    write_starter(args.source, args.out, args.table)
    print(f"{printable(args.out, False)}: starter spec written from {_label(args.source)}; "
          f"read its comments, then run `sqlgen validate --schema SOURCE {args.out}`")
    return 0


def _apply(args: argparse.Namespace) -> int:
    from .apply import apply_spec

    spec = load_spec(args.spec)
    _warn(spec)
    print("\n".join(apply_spec(spec, args.to).lines()))
    return 0


def _schema(_args: argparse.Namespace) -> int:
    from .specschema import schema_text

    sys.stdout.write(schema_text())
    return 0


def _demo(args: argparse.Namespace) -> int:
    from .demo import run_demo

    print(run_demo(Path(args.folder), args.grain))
    return 0


COMMANDS = {"build": _build, "validate": _validate, "demo": _demo, "init": _init,
            "checks": _checks, "apply": _apply, "schema": _schema}


def main(argv: list[str] | None = None) -> int:
    args = _parser().parse_args(argv)
    _WARNINGS.clear()
    if getattr(args, "format", "text") == "json":
        return _main_json(args)
    try:
        return COMMANDS[args.command](args)
    except (SpecError, UnsupportedError, _Several) as err:
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
        errors = err.errors if isinstance(err, _Several) else [err]
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
