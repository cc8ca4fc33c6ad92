"""sqlgen as a library: the operations of the ``sqlgen`` command as typed functions.

The command is a shell over these: it parses options, calls one function and prints what
it returns. Every function raises a subclass of ``SqlgenError`` for a problem a person can
fix (``SpecError`` carries ``problems``, ``UnsupportedError`` carries ``gaps``, each with
``exit_code``), never a traceback of sqlgen's own; docs/api.md shows each in use.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .dialects import TARGETS, target_names
from .errors import EXIT_SPEC, EXIT_USAGE, OutputError, SpecError, SqlgenError, UnsupportedError
from .output import (
    Plan,
    Stale,
    is_up_to_date,
    plan_folder,
    refuse,
    spec_owner,
    stale_files,
    tidy,
    write_folders,
)

if TYPE_CHECKING:  # the spec, compiler and support modules import sqlglot: at first use
    from .spec import Spec

PathLike = str | os.PathLike


class UsageError(SqlgenError):
    """Arguments that cannot be used together, or a folder without specs."""

    exit_code = EXIT_USAGE


class SeveralErrors(SqlgenError):
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

    @classmethod
    def of(cls, value: str | Sequence[str] | Dialects | None, spec: Spec) -> Dialects:
        """``"all"``, one name, a list of names, or None for the spec's ``output.dialect``."""
        if isinstance(value, Dialects):
            return value
        if value is None:
            return cls((spec.output.dialect,))
        if value == "all":
            return cls(tuple(target_names()), every=True)
        return cls((value,) if isinstance(value, str) else tuple(value))


# ---------------------------------------------------------------- one spec

def load_spec(path: PathLike, schema: str | None = None) -> Spec:
    """Read and validate a spec file, every problem at once (SpecError); with ``schema``
    (a DuckDB file, Parquet/CSV, ``postgresql://`` URL or column listing) also check every
    table and column it names against that source. ``Spec.warnings`` lists keys that are
    valid but change nothing."""
    from .source import read_spec_text

    return _load_text(str(path), read_spec_text(str(path)), schema)


def _load_text(path: str, text: str, schema: str | None) -> Spec:
    from .spec import parse_spec

    spec = parse_spec(text, path)
    if schema:
        from .schema import open_source
        from .schemacheck import check_spec

        problems = check_spec(spec, open_source(schema))
        if problems:
            raise SpecError(problems)
    return spec


def compile(spec: Spec, dialect: str | None = None) -> dict[str, str]:  # noqa: A001
    """File name -> SQL text of every file a build writes for one dialect (default the
    spec's ``output.dialect``): one per view and ``create_all.sql``. Deterministic."""
    from .compiler import render_files

    buildable(spec, Dialects.of(dialect, spec))
    return render_files(spec, dialect)


def validate(path: PathLike, schema: str | None = None) -> Spec:
    """``load_spec`` and everything a build of the spec's own dialect would refuse."""
    spec = load_spec(path, schema)
    compile(spec)
    return spec


def buildable(spec: Spec, chosen: Dialects) -> tuple[list[str], str]:
    """The dialects to build, and a note naming those skipped (""). With ``every`` a
    dialect that cannot express the spec is skipped (an error when none is left); a named
    one is an error listing every gap of every named dialect."""
    from .support import spec_gaps

    found = {name: spec_gaps(spec, TARGETS[name]) for name in chosen.names}
    blocked = [gap for name in chosen.names for gap in found[name]]
    ok = [name for name in chosen.names if not found[name]]
    if blocked and (not chosen.every or not ok):
        raise UnsupportedError.of(blocked)
    if not blocked:
        return ok, ""
    skipped = [name for name in chosen.names if found[name]]
    return ok, (f"built {len(ok)} of {len(chosen.names)} dialects; skipped "
                f"{', '.join(skipped)}, which cannot express this spec:\n"
                + "\n".join(str(gap) for gap in blocked))


def runtime_checks(spec: Spec, dialect: str | None = None) -> str:
    """The read-only query returning one row per assumption the data breaks."""
    from .checks import checks_sql

    return checks_sql(spec, dialect)


def init(source: str, path: PathLike = "growth.yml", table: str | None = None) -> str:
    """Write a commented starter spec for a table of ``source`` to ``path`` (never over an
    existing file); return its text."""
    from .init import write_starter

    return write_starter(source, str(path), table)


def apply(spec: Spec, to: str, check_schema: bool = True):
    """Create the spec's schema and views in a DuckDB file or PostgreSQL URL in one
    transaction; returns ``apply.Applied`` (what was created or replaced)."""
    from .apply import apply_spec

    return apply_spec(spec, to, check_schema)


def json_schema() -> dict[str, Any]:
    """The JSON Schema of a spec, generated from the validator's key table."""
    from .specschema import spec_schema

    return spec_schema()


# ---------------------------------------------------------------- builds of several specs

@dataclass
class SpecBuild:
    """One spec of a build: its folders (folder, target, build inputs, manifest name),
    which of them the manifest vouches for, and the files compiled for the others.
    ``spec`` is None when the manifests vouched for every folder from the spec's text
    alone (``freshness.vouched``: the spec was not even loaded)."""

    path: str
    spec: Spec | None
    names: list[str]
    plans: list[tuple[Path, str, list[str], str]]
    fresh: list[bool]
    rendered: dict[str, dict[str, str]]


@dataclass
class BuildPlan:
    """Every spec of a build, loaded and compiled, nothing written; ``notes`` for a person
    (dialects skipped), ``warnings`` the specs' own."""

    specs: list[SpecBuild]
    notes: list[str] = field(default_factory=list)
    warnings: list = field(default_factory=list)


@dataclass(frozen=True)
class FolderResult:
    """What a build did in one folder."""

    folder: Path
    written: int
    unchanged: int
    removed: int
    leftovers: int
    notes: tuple[str, ...]


@dataclass(frozen=True)
class CheckResult:
    """``ok`` when every file is what a build would write; ``stale`` the others;
    ``compiled`` the manifests that could not vouch for their folders."""

    stale: list[Stale]
    notes: list[str]
    compiled: list[Path]

    @property
    def ok(self) -> bool:
        return not self.stale


def spec_paths(given: Sequence[PathLike]) -> list[str]:
    """The spec files named: each file as given, and for a folder every ``*.yml`` and
    ``*.yaml`` file directly in it, by name (names starting with ``.`` skipped)."""
    found: list[str] = []
    for item in given:
        path = Path(item)
        if path.is_dir():
            specs = sorted(p for p in path.iterdir() if p.suffix in (".yml", ".yaml")
                           and not p.name.startswith(".") and p.is_file())
            if not specs:
                from .comments import printable

                raise UsageError(f"{printable(str(item), False)}: a folder without a spec "
                                 "(*.yml or *.yaml) in it")
            found += [str(p) for p in specs]
        else:
            found.append(str(item))
    return list(dict.fromkeys(found))


def _folders(spec: Spec, spec_path: str, chosen: Dialects, dialects: list[str],
             out: str | None) -> list[tuple[str, Path]]:
    """One folder, or one subfolder per dialect when several were asked for (even if only
    one of them can be built, so that each dialect's files stay in the same place)."""
    base = Path(out) if out else Path(spec_path).parent / spec.output.folder
    if len(chosen.names) == 1:
        return [(dialects[0], base)]
    return [(name, base / name) for name in dialects]


def _vouched_build(path: str, plan: BuildPlan, dialects, out: str | None) -> SpecBuild | None:
    """The spec's build when the manifests vouch for every folder it writes, from the spec
    text alone (no spec loaded, nothing compiled); None otherwise."""
    from .freshness import vouched

    if dialects is None:
        found = vouched(path, None, False, out)
    else:
        chosen = Dialects.of(dialects, None)  # type: ignore[arg-type]  # not None: no spec read
        found = vouched(path, chosen.names, chosen.every, out)
    if found is None:
        return None
    if found.note:
        plan.notes.append(found.note)
    return SpecBuild(path, None, found.names, found.plans, [True] * len(found.plans), {})


def _spec_build(path: str, plan: BuildPlan, dialects, out: str | None, full: bool,
                jobs: int, schema: str | None) -> SpecBuild:
    from .compiler import build_inputs, file_names, render_targets
    from .source import read_spec_text

    text = read_spec_text(path)
    spec = _load_text(path, text, schema)
    plan.warnings += spec.warnings
    chosen = Dialects.of(dialects, spec)
    ok, note = buildable(spec, chosen)
    if note:
        plan.notes.append(note)
    names = file_names(spec)
    every = (ok, note) if chosen.every else None
    plans = [(folder, target, build_inputs(spec, target, text, every), spec_owner(path, folder))
             for target, folder in _folders(spec, path, chosen, ok, out)]
    # A folder whose manifest matches these inputs and whose files match their recorded
    # hashes holds what a build would write: no need to compile its target.
    fresh = [not full and is_up_to_date(folder, owner, inputs, names)
             for folder, _, inputs, owner in plans]
    todo = [target for (_, target, _, _), up in zip(plans, fresh) if not up]
    rendered = render_targets(spec, todo, jobs) if todo else {}
    return SpecBuild(path, spec, names, plans, fresh, rendered)


def plan_build(specs: Sequence[PathLike], dialects: str | Sequence[str] | Dialects | None = None,
               out: PathLike | None = None, full: bool = False, jobs: int = 1,
               schema: str | None = None) -> BuildPlan:
    """Load and compile every spec (files, or folders of them) before anything is written;
    the problems of every spec raised together. With several specs, ``out`` means
    ``out/<spec file stem>`` for each."""
    paths = spec_paths(specs)
    plan, failed = BuildPlan([]), []
    for path in paths:
        spec_out = Path(out) / Path(path).stem if out and len(paths) > 1 else out
        spec_out = str(spec_out) if spec_out else None
        try:
            job = None if full or schema else _vouched_build(path, plan, dialects, spec_out)
            plan.specs.append(job or _spec_build(path, plan, dialects, spec_out, full, jobs,
                                                 schema))
        except (SpecError, UnsupportedError) as err:
            failed.append(err)
    if len(failed) == 1:
        raise failed[0]
    if failed:
        raise SeveralErrors(failed)
    _claimed_twice(plan.specs)
    return plan


def _claimed_twice(specs: list[SpecBuild]) -> None:
    """Two specs of one build that would write the same file: refused before any write."""
    claims: dict[Path, str] = {}
    problems = []
    for job in specs:
        for folder, *_ in job.plans:
            for name in job.names:
                other = claims.setdefault((folder / name).resolve(), job.path)
                if other != job.path:
                    problems.append(f"{folder / name}: written by both {other} and {job.path} "
                                    "in this build; give each spec its own output.prefix or "
                                    "output.folder")
    if problems:
        raise OutputError("\n".join(problems))


def write(plan: BuildPlan) -> list[FolderResult]:
    """Write a planned build: every folder of every spec is checked before the first file
    is written (OutputError names every refusal)."""
    folder_plans = [[plan_folder(folder, owner, inputs, job.names, job.path)
                     for folder, _, inputs, owner in job.plans] for job in plan.specs]
    refuse([p for plans in folder_plans for p in plans])
    done = []
    for job, plans in zip(plan.specs, folder_plans):
        todo = [(folder, job.rendered[target], inputs, owner, job.path)
                for (folder, target, inputs, owner), up in zip(job.plans, job.fresh) if not up]
        results = iter(write_folders(todo))
        for folder_plan, up in zip(plans, job.fresh):
            done.append(_kept(folder_plan, len(job.names)) if up else _written(
                folder_plan.folder, next(results)))
    return done


def _kept(plan: Plan, count: int) -> FolderResult:
    return FolderResult(plan.folder, 0, count, 0, tidy(plan), tuple(plan.notes()))


def _written(folder: Path, result) -> FolderResult:
    return FolderResult(folder, len(result.written), len(result.unchanged),
                        len(result.removed), result.leftovers, result.notes)


def build(specs: Sequence[PathLike], dialects: str | Sequence[str] | None = None,
          out: PathLike | None = None, full: bool = False, jobs: int = 1) -> list[FolderResult]:
    """Build specs (files or folders of them) into their output folders."""
    return write(plan_build(specs, dialects, out, full, jobs))


def check(specs: Sequence[PathLike] | BuildPlan, dialects: str | Sequence[str] | None = None,
          out: PathLike | None = None, full: bool = False, jobs: int = 1) -> CheckResult:
    """Compare the files on disk with what a build would write, writing nothing; refused
    (OutputError) wherever a build would be."""
    plan = specs if isinstance(specs, BuildPlan) else plan_build(specs, dialects, out, full, jobs)
    checked = [(plan_folder(folder, owner, inputs, job.names, job.path),
                job.rendered.get(target) if not up else None)
               for job in plan.specs
               for (folder, target, inputs, owner), up in zip(job.plans, job.fresh)]
    refuse([p for p, _ in checked])
    notes = [note for p, _ in checked for note in p.notes()]
    notes += [f"{p.folder}: {len(p.leftovers)} temporary file(s) left by an interrupted "
              "build; `sqlgen build` removes them" for p, _ in checked if p.leftovers]
    stale = [entry for p, files in checked if files is not None
             for entry in stale_files(p, files)]
    compiled = [p.manifest.path for p, files in checked if files is not None]
    return CheckResult(stale, notes, compiled)
