"""The pipeline: spec -> rendered templates -> sqlglot trees -> target rewrites -> SQL files."""

from __future__ import annotations

import gc
import json
import os
import pickle
import sys
import threading
from dataclasses import dataclass

from sqlglot import exp
from sqlglot.errors import ErrorLevel, UnsupportedError as SqlglotUnsupported

from . import __version__, names
from .dialects import TARGETS, Target, rewrites, table_properties
from .comments import HEADER_MARK, comment_text
from .errors import SqlgenError, UnsupportedError
from .freshness import generator_digest, spec_text_line
from .render import bind, parse, render
from .spec import Spec
from .support import spec_gaps, spec_key, support
from .views import View, planned

CAUTION = ("Management metrics, not audited financial statements: check definitions before "
           "quoting a figure.")
PERSONAL = ("Holds one row per user: personal data. Grant access as you would to the "
            "underlying user table.")
HEADER_LINE_LIMIT = 400  # a header line's text, at most (a long `where` is cut)
CREATE_ALL = "create_all.sql"
REFRESH = "refresh.sql"


@dataclass(frozen=True)
class CompiledView:
    """One view generated for one target: its name and its complete SQL statements."""

    view: View
    qualified_name: str
    statements: tuple[str, ...]
    text: str  # the file's content
    part: Spec | None = None  # the part of the spec it belongs to (Spec.parts)


def view_table(spec: Spec, name: str) -> exp.Table:
    """The table node of a generated view: schema and prefix from the spec."""
    ident = exp.to_identifier(f"{spec.output.prefix}{name}")
    schema = spec.output.schema
    if not schema:
        return exp.Table(this=ident)
    parts = [names.identifier(p) for p in schema]
    return exp.Table(this=ident, db=parts[-1], catalog=parts[0] if len(parts) == 2 else None)


class Queries:
    """Each view's SELECT for the targets of one build, parsed and bound once for all.

    A view's rendered SQL and its bound markers depend on the spec only (templates never
    branch on the target), and the first rewrites are the same functions for every target
    (``dialects.rewrites``). So each view is rendered, parsed, bound and passed through
    that shared prefix of rewrites once; each target then gets its own copy (its rewrites
    change the tree in place), the last of them the tree itself.
    """

    def __init__(self, spec: Spec, targets: list[Target]):
        self.spec = spec
        chains = {t.name: rewrites(t) for t in targets}
        first = next(iter(chains.values()), [])
        # The longest prefix that is the same function objects, in the same order, for
        # every target: a rewrite is a function of the tree alone, so running it once
        # before copying gives every target the tree it would have given each of them.
        shared = 0
        while shared < len(first) and all(len(chain) > shared and chain[shared] is first[shared]
                                          for chain in chains.values()):
            shared += 1
        self._shared = first[:shared]
        self._rest = {name: chain[shared:] for name, chain in chains.items()}
        self._uses = len(targets)
        # (definition, view) -> (tree, uses left)
        self._trees: dict[tuple[str, str], tuple[exp.Expression, int]] = {}
        # (target, definition, view) -> statements compiled ahead, in other processes
        # (render_targets)
        self.statements: dict[tuple[str, str, str], tuple[str, ...]] = {}

    def query(self, view: View, target: Target, part: Spec | None = None) -> exp.Expression:
        """The view's SELECT rewritten for ``target`` (one of this build's targets), for
        a part of the spec (``Spec.parts``; by default the spec itself)."""
        part = part or self.spec
        if target.name not in self._rest:
            return Queries(part, [target]).query(view, target)
        key = (part.definition, view.name)
        tree, left = self._trees.get(key) or (self._prepared(view, part), self._uses)
        if left > 1:
            self._trees[key] = (tree, left - 1)
            tree = tree.copy()
        else:  # the last use takes the tree itself; a further call prepares it again
            self._trees.pop(key, None)
        for rewrite in self._rest[target.name]:
            tree = rewrite(tree)
        return tree

    def _prepared(self, view: View, spec: Spec) -> exp.Expression:
        tree = _without_positions(parse(render(view, spec)))
        tree = bind(tree, spec, lambda name: view_table(spec, name))
        for rewrite in self._shared:
            tree = rewrite(tree)
        return tree


_POSITIONS = ("line", "col", "start", "end")


def _without_positions(tree: exp.Expression) -> exp.Expression:
    """Drop the parser's source positions from every node (in place).

    They point into the rendered template text, which no message shows and no generator
    reads; yet sqlglot deep-copies each node's meta dict on every copy, which made copying
    a view's tree for each target cost more than half a parse. Other meta (sqlgen's own
    ``sqlgen_bare`` marks, set later by ``bind``) is kept.
    """
    for node in tree.walk():
        meta = node._meta  # read without creating an empty dict, as meta_get does
        if meta:
            for key in _POSITIONS:
                meta.pop(key, None)
            if not meta:
                node._meta = None
    return tree


def compile_query(view: View, spec: Spec, target: Target,
                  queries: Queries | None = None) -> exp.Expression:
    """The view's SELECT as a sqlglot tree rewritten for the target (``spec`` may be a
    part of the spec of ``queries``)."""
    return (queries or Queries(spec, [target])).query(view, target, spec)


def _generate(node: exp.Expression, target: Target, key: str) -> str:
    try:
        # copy=False: every tree generated here is the compiler's own and discarded after.
        return node.sql(dialect=target.sqlglot_dialect, copy=False, pretty=True,
                        unsupported_level=ErrorLevel.RAISE)
    except SqlglotUnsupported as err:
        raise UnsupportedError(target.name, key, str(err).strip().splitlines()[0]) from None


def ddl_statements(view: View, spec: Spec, target: Target,
                   queries: Queries | None = None) -> tuple[str, ...]:
    """The statements that (re)create one view on the target (with `output.materialize:
    table`, the table holding its rows)."""
    query = compile_query(view, spec, target, queries)
    table = view_table(spec, view.name)
    key = f"view {view.name}"
    if materialized(view, spec):
        from .materialize import partition_column

        return table_statements(table, query, target, key,
                                partition=partition_column(view.name, spec, target))
    if target.view_ddl == "drop_create":
        drop = exp.Drop(tables=[table.copy()], kind="VIEW", exists=True)
        create = exp.Create(this=table, kind="VIEW", expression=query)
        return (_generate(drop, target, key), _generate(create, target, key))
    create = exp.Create(this=table, kind="VIEW", expression=query,
                        replace=target.view_ddl == "replace")
    text = _generate(create, target, key)
    if target.view_ddl == "create_or_alter":
        text = _create_or_alter(text)
    return (text,)


def materialized(view: View, spec: Spec) -> bool:
    """Whether a view is kept as a table: with `materialize: table` every one; with
    `incremental` every one but activity_source_summary, a view (it counts the source's
    own rows, all of them: as a table each refresh would read the whole source)."""
    mode = spec.output.materialize
    return mode == "table" or (mode == "incremental" and view.name != "activity_source_summary")


def refresh_statements(view: View, spec: Spec, target: Target) -> tuple[str, ...]:
    """refresh.sql's statements for one view's table: its rows computed again (none for
    a view)."""
    from .materialize import per_period, period_statements, recompute_statements

    if spec.output.materialize != "incremental" or not materialized(view, spec):
        return ()
    key = f"view {view.name}"
    if per_period(view.name, spec):
        return tuple(_generate(tree, target, key)
                     for tree in period_statements(view.name, view.template, spec, target))
    query = compile_query(view, spec, target)
    return tuple(recompute_statements(view_table(spec, view.name), query, spec, target,
                                      f"view {view.name}"))


def table_statements(table: exp.Table, query: exp.Expression, target: Target,
                     key: str, state: bool = False,
                     partition: str | None = None) -> tuple[str, ...]:
    """DROP TABLE IF EXISTS, then CREATE TABLE ... AS the query in the target's form
    (``Target.table_form``; T-SQL: SELECT ... INTO, which sqlglot writes for it).
    ``partition``: the column it is partitioned by, for ``Target.partition_overwrite``
    (``materialize.partition_column``; the constant one is added to the query's)."""
    from .materialize import CONSTANT_PART

    if partition == CONSTANT_PART:
        query = exp.select(exp.Star(), exp.Literal.number(0).as_(CONSTANT_PART)).from_(
            query.subquery("sqlgen_rows", copy=False))
    drop = exp.Drop(tables=[table.copy()], kind="TABLE", exists=True)
    create = exp.Create(this=table, kind="TABLE", expression=query,
                        properties=table_properties(target, state, partition))
    return (_generate(drop, target, key), _generate(create, target, key))


def _create_or_alter(text: str) -> str:
    if not text.startswith("CREATE VIEW "):
        raise UnsupportedError("tsql", "view DDL", "unexpected CREATE statement")
    return "CREATE OR ALTER VIEW " + text[len("CREATE VIEW "):]


def header(spec: Spec, target: Target, view: View | None) -> list[str]:
    """The comment lines on top of a generated file. No timestamps: output is deterministic.

    Every text in them passes through ``comments.comment_text``: a spec's file name, names
    and ``where`` text cannot end the comment line they are shown on.
    """
    lines = [
        f"{__version__} from {spec.file} (spec {(spec.parent or spec).digest()}); "
        f"target {target.name}.",
        "Do not edit: change the spec and run `sqlgen build` again.",
    ]
    if view is not None:
        lines.append(f"{view.name}: {view.summary}")
        if view.personal_data:
            lines.append(PERSONAL)
    lines += materialize_lines(spec, view)
    lines.append("What decides the numbers:")
    lines += [f"  {line}" for line in deciding_lines(spec, view)]
    lines.append(CAUTION)
    if target.ddl_note:
        lines.append(target.ddl_note)
    return [f"{HEADER_MARK} {comment_text(lines[0], HEADER_LINE_LIMIT)}"] + [
        f"-- {comment_text(line, HEADER_LINE_LIMIT)}" for line in lines[1:]]


def materialize_lines(spec: Spec, view: View | None) -> list[str]:
    """What a table (not a view) holds, for the header; [] for views (their output is
    unchanged)."""
    if spec.output.materialize == "incremental":
        if view is not None and not materialized(view, spec):
            return ["A view (output.materialize: incremental keeps this one a view: it "
                    "counts every source row)."]
        what = "A table" if view is not None else "Tables"
        return [f"{what}, not views (output.materialize: incremental): computed by "
                "create_all.sql, brought up to date by refresh.sql (which reads the source "
                f"rows from {spec.output.lookback} days before the newest day on); "
                "create_all.sql rebuilds in full."]
    if spec.output.materialize == "table":
        what = "A table" if view is not None else "Tables"
        return [f"{what}, not views (output.materialize: table): the rows as of the last run "
                "of create_all.sql, which rebuilds every table in full; run it again after "
                "new data arrives."]
    return []


def deciding_lines(spec: Spec, view: View | None) -> list[str]:
    """What decides a view's numbers (all the spec's sources for create_all.sql): source
    tables, grain and week start, timestamp type and time zone, ``where``, valid range."""
    sections = [("activity", spec.activity), ("revenue", spec.revenue)]
    lines = [f"activity definition: {spec.definition}"] if spec.definition else []
    for name, source in sections:
        if source is not None and (view is None or view.reads == name):
            lines += _source_lines(name, source)
            lines += _activity_lines(source) if name == "activity" else []
    lines.append(f"grain: {spec.grain}"
                 + (f", weeks start on {spec.week_start}" if spec.grain == "week" else ""))
    if view is None or view.option == "segments":
        lines += [_segment_line(segment) for segment in spec.segments]
    return lines


def _segment_line(segment) -> str:
    """Where a segment's value comes from, in words (a header line)."""
    column = names.display((segment.column,))
    if segment.kind == "event":
        return (f"segment {segment.name}: kind event, {column} of each activity row; values "
                "need not add up to the totals")
    if segment.table is None:
        return (f"segment {segment.name}: kind user, {column} on the user's first counted "
                "activity row (ties: the smallest non-NULL value)")
    keys = [f"{what} {names.display((part,))}" for what, part in
            (("user key", segment.key), ("customer key", segment.customer_key)) if part]
    return (f"segment {segment.name}: kind user, {column} of {names.display(segment.table)} "
            f"by {' and '.join(keys)}; users missing from it are NULL")


def _source_lines(name: str, source) -> list[str]:
    """One source section: table and columns, time handling, where, valid range."""
    what = "revenue" if name == "revenue" else "activity"
    lines = [f"{what} table: {names.display(source.table)}"
             + (f" ({source.shape})" if name == "revenue" else "")]
    lines.append(f"{what} time: {_time_text(source)}")
    lines.append(f"{what} where: "
                 + (source.where or "none (every row counts)"))
    low, high = getattr(source, "valid_from", None), getattr(source, "valid_until", None)
    if low is not None or high is not None:
        lines.append(f"{what} valid range: {low or 'open'} to {high or 'open'}; rows "
                     "outside it are left out")
    return lines


def _activity_lines(source) -> list[str]:
    """First-seen dates and the reporting start, when the spec sets them."""
    lines = []
    seen = source.first_seen
    if seen is not None:
        lines.append(f"first seen: {names.display(seen.table)}, the earliest row per user; "
                     "a user first seen before their first active period is resurrected "
                     "in it, not new")
    if source.report_from is not None:
        lines.append(f"report from: {source.report_from}; earlier periods are computed "
                     "but not shown")
    return lines


def _time_text(source) -> str:
    """The timestamp type and what is done with the time zone, in words."""
    kind, zone = source.timestamp_type, source.timezone
    if kind == "date":
        return "date columns, used as stored"
    if zone:
        taken = "instants" if kind == "timestamptz" else "timestamps without zone, taken as UTC"
        return f"{taken}, converted to local time in {zone}"
    if kind == "timestamptz":
        return "instants, read in UTC"
    return "timestamps without zone, used as stored (no time zone conversion)"


def compile_spec(spec: Spec, target_name: str | None = None,
                 queries: Queries | None = None) -> list[CompiledView]:
    """Every enabled view of a spec, compiled for a target, in dependency order.

    Pass the same ``Queries`` when compiling one spec for several targets: each view is
    then parsed once, not once per target.
    """
    target = TARGETS[target_name or spec.output.dialect]
    try:
        return _compile(spec, target, queries)
    except UnsupportedError as err:
        raise err.located(lambda key: (spec.where(spec_key(key)), spec_key(key))) from None


def _compile(spec: Spec, target: Target, queries: Queries | None) -> list[CompiledView]:
    found = spec_gaps(spec, target)
    if found:
        raise UnsupportedError.of(found)
    queries = queries or Queries(spec, [target])
    out = []
    for part, view in planned(spec):
        statements = (queries.statements.get((target.name, part.definition, view.name))
                      or ddl_statements(view, part, target, queries))
        body = "\n\n".join(s + ";" for s in statements)
        text = "\n".join(header(part, target, view)) + "\n\n" + body + "\n"
        out.append(CompiledView(view, view_table(part, view.name).sql(target.sqlglot_dialect,
                                                                      copy=False),
                                statements, text, part))
    return out


def file_names(spec: Spec) -> list[str]:
    """The files ``render_files`` returns for a spec, whatever the target, without compiling:
    each created view's own name (prefix included) and ``<prefix>create_all.sql``. The one
    place that names files, so that specs with other prefixes share a folder."""
    prefix = spec.output.prefix
    refresh = [prefix + REFRESH] if spec.output.materialize == "incremental" else []
    return ([f"{part.output.prefix}{view.name}.sql" for part, view in planned(spec)]
            + [prefix + CREATE_ALL] + refresh)


def render_files(spec: Spec, target_name: str | None = None,
                 queries: Queries | None = None) -> dict[str, str]:
    """File name -> content for a spec and target, including create_all.sql."""
    target = TARGETS[target_name or spec.output.dialect]
    compiled = compile_spec(spec, target.name, queries)
    texts = [c.text for c in compiled] + [_create_all(spec, target, compiled)]
    if spec.output.materialize == "incremental":
        texts.append(_refresh(spec, target, compiled))
    return dict(zip(file_names(spec), texts))


def render_targets(spec: Spec, target_names: list[str],
                   jobs: int = 1) -> dict[str, dict[str, str]]:
    """``render_files`` for several targets, each view parsed once for all of them.

    With ``jobs`` > 1 (on Linux, where forking is the usual way to start a process, and
    while no other thread runs) the views are split over up to that many processes, each
    parsing and compiling its views for every target. The files are the same bytes either
    way, and so is the error: the first one met compiling target by target, view by view.
    """
    queries = Queries(spec, [TARGETS[name] for name in target_names])
    views = planned(spec)
    jobs = min(jobs, len(views))
    if jobs > 1 and sys.platform.startswith("linux") and threading.active_count() == 1:
        names = list(dict.fromkeys(target_names))
        groups = [views[i::jobs] for i in range(jobs)]
        # What exists now is shared with the workers; keeping the collector off it spares
        # every process a pass over (and copies of) the whole inherited heap.
        gc.freeze()
        workers = []
        for group in groups[1:]:
            try:
                workers.append(_Worker(lambda group=group: _statements(spec, group, names,
                                                                       queries)))
            except OSError:  # no more processes: the groups left are compiled below
                break
        try:
            queries.statements.update(_statements(spec, groups[0], names, queries))
        finally:  # even when this process failed: wait for every worker
            for worker in workers:
                queries.statements.update(worker.result())
            gc.unfreeze()
    # Whatever no process compiled (an error, or a worker that died) is compiled here, in
    # order: the first part that cannot be compiled raises its own error.
    return {name: render_files(spec, name, queries) for name in target_names}


def _statements(spec: Spec, views: list[tuple[Spec, View]], names: list[str],
                queries: Queries) -> dict[tuple[str, str, str], tuple[str, ...]]:
    """(target, definition, view) -> DDL statements for these (part, view) pairs and
    targets; what fails is left out."""
    targets = []
    for name in names:
        try:
            if spec_gaps(spec, TARGETS[name]):
                continue
            targets.append(TARGETS[name])
        except SqlgenError:
            pass
    done = {}
    for part, view in views:
        for target in targets:
            try:
                done[(target.name, part.definition, view.name)] = ddl_statements(
                    view, part, target, queries)
            except SqlgenError:
                pass
    return done


class _Worker:
    """A forked process that runs ``work()`` and sends its result back through a pipe."""

    def __init__(self, work):
        read, write = os.pipe()
        pid = os.fork()
        if pid == 0:  # the child: never returns, never runs the parent's exit handlers
            code = 1
            try:
                os.close(read)
                data = pickle.dumps(work(), protocol=pickle.HIGHEST_PROTOCOL)
                with os.fdopen(write, "wb") as pipe:
                    pipe.write(data)
                code = 0
            finally:
                os._exit(code)
        os.close(write)
        self.pid, self.read = pid, read

    def result(self) -> dict:
        """What the worker sent, or {} if it failed (its part is then compiled again)."""
        with os.fdopen(self.read, "rb") as pipe:
            data = pipe.read()
        _, status = os.waitpid(self.pid, 0)
        return pickle.loads(data) if status == 0 and data else {}


def build_inputs(spec: Spec, target_name: str, text: str | None = None,
                 every: tuple[list[str], str] | None = None) -> list[str]:
    """What one target's files are a function of, one ``key value`` line each.

    Two builds with the same lines write the same bytes (output is deterministic), so a
    folder whose files match what a build with these lines wrote is up to date. With the
    spec's ``text`` (and for ``--dialect all`` the targets built and the note, ``every``)
    the ``spec-text`` line too, by which ``--check`` can vouch for the folder without
    loading the spec (``freshness``); not for a spec with warnings, printed each time.
    """
    # The spec hash is the header's; the file name (shown in the header too) is a line of
    # its own, written as JSON so that no character of it can break the line.
    lines = [f"sqlgen {__version__}", f"target {target_name}", f"spec {spec.digest()}",
             f"spec-file {json.dumps(spec.file)}", f"generator {generator_digest()}"]
    if text is not None and not spec.warnings:
        lines.append(spec_text_line(text, spec.output.folder, spec.output.dialect, every))
    return lines


def _create_all(spec: Spec, target: Target, compiled: list[CompiledView]) -> str:
    """Every view in dependency order, after the schema they go in; in one transaction
    where the target's DDL is transactional, so a run that fails changes nothing."""
    lines = header(spec, target, None)
    if spec.output.materialize == "view":
        lines.append("-- Every view, each after the views it reads.")
    else:
        lines.append("-- Every table, each after the tables it reads: each dropped and computed "
                     "again in full.")
    lines.append(_transaction_line(target, "some views created", "every object"))
    statements = [s for s in (create_schema(spec, target),) if s]
    statements += view_drops(spec, target, compiled)
    from .materialize import create_statements, parts_with_days

    for part in parts_with_days(spec):  # the per-day and state tables, before the views'
        statements += create_statements(part, target)
    run = _through_exec if target.exec_batch else (lambda statement: statement + ";")
    body = [s + ";" for s in statements]  # the schema and the drops
    body += [f"-- {comment_text(c.view.name)}\n" + "\n\n".join(run(s) for s in c.statements)
             for c in compiled]
    return _script(lines, body, target)


def _transaction_line(target: Target, partial: str, kept: str, refresh: bool = False) -> str:
    """Whether a script is one transaction, and what a failed run leaves (``refresh``:
    refresh.sql, which holds no DDL and moves its state on last)."""
    if not _one_transaction(target, refresh):
        if refresh:
            return (f"-- Not one transaction: {target.no_ddl_transaction}. Only the last "
                    f"statements move the state on, so a failed run can leave {partial} but "
                    "never the state; run it again after fixing the cause, and it computes "
                    "the same days and periods again.")
        return (f"-- Not one transaction: {target.no_ddl_transaction}. A failed run can "
                f"leave {partial}; run it again after fixing the cause.")
    note = (target.refresh_transaction if refresh and target.no_ddl_transaction
            else target.transaction_note)
    return (f"-- One transaction: a run that fails leaves {kept} as it was"
            + (f"; {note}." if note else "."))


def _one_transaction(target: Target, refresh: bool) -> bool:
    """Whether create_all.sql (or with ``refresh``, refresh.sql) runs as one transaction."""
    return not target.no_ddl_transaction or (refresh and target.refresh_transaction is not None)


def _script(lines: list[str], body: list[str], target: Target, refresh: bool = False) -> str:
    """A script's header and statements, in one transaction where the target has one."""
    if _one_transaction(target, refresh):
        body = [_generate(exp.Transaction(), target, "transaction") + ";", *body,
                _generate(exp.Commit(), target, "transaction") + ";"]
    if target.exec_batch:  # an error rolls the whole transaction back, not one statement
        body.insert(0, "SET XACT_ABORT ON;")
    return "\n\n".join(["\n".join(lines), *body]) + "\n"


def _refresh(spec: Spec, target: Target, compiled: list[CompiledView]) -> str:
    """refresh.sql: the per-day, first-date and state tables of each part brought up to
    date, then each table's rows from its first changed period on (or in full, see
    ``materialize.per_period``), in one transaction where the target has one."""
    from .materialize import commit_statements, parts_with_days
    from .materialize import refresh_statements as day_statements

    lines = header(spec, target, None)
    lines.append("-- Brings every table up to date: the source rows from each state table's "
                 "from_day on are read again,")
    lines.append("-- those days computed again, then each activity table's rows from the "
                 "period holding the first day read on")
    lines.append("-- (in full with activity.first_seen, and the revenue tables). Running it "
                 "twice changes no table.")
    lines.append(_transaction_line(target, "some tables updated", "every table", refresh=True))
    run = _through_exec if target.exec_batch else (lambda statement: statement + ";")
    body = []
    for part in parts_with_days(spec):
        body.append(f"-- {comment_text(part.output.prefix + 'sqlgen_activity_days')}\n"
                    + "\n\n".join(run(s) for s in day_statements(part, target)))
    for c in compiled:
        statements = refresh_statements(c.view, c.part or spec, target)
        if statements:
            body.append(f"-- {comment_text(c.view.name)}\n"
                        + "\n\n".join(run(s) for s in statements))
    for part in parts_with_days(spec):  # last: the state moves on only once all is done
        body.append(f"-- {comment_text(part.output.prefix + 'sqlgen_refresh_state')}\n"
                    + "\n\n".join(run(s) for s in commit_statements(part, target)))
    if target.snapshot_statement and _one_transaction(target, refresh=True):
        body.insert(0, "-- Every step reads one snapshot of the source.\n"
                    f"{target.snapshot_statement};")
    return _script(lines, body, target, refresh=True)


def view_drops(spec: Spec, target: Target, compiled: list[CompiledView],
               cascade: bool = True) -> list[str]:
    """DROP VIEW IF EXISTS for each view, each after the views that read it, on a target
    where CREATE OR REPLACE cannot change a view's columns (``ddl_note``); [] elsewhere."""
    if target.view_ddl != "replace" or not target.ddl_note:
        return []
    return [_generate(exp.Drop(tables=[view_table(c.part or spec, c.view.name)], kind="VIEW",
                               exists=True, cascade=cascade), target, "view DDL")
            for c in reversed(compiled)]


def create_schema(spec: Spec, target: Target) -> str:
    """CREATE SCHEMA IF NOT EXISTS for output.schema in the target's spelling (ClickHouse:
    DATABASE; T-SQL: an existence test, having no IF NOT EXISTS); "" without a schema or
    on a target without schemas (SQLite)."""
    if not spec.output.schema or support(target, "qualified names")[0] == "unsupported":
        return ""
    parts = [names.identifier(p) for p in spec.output.schema]
    if not target.schema_catalog:
        parts = parts[-1:]
    schema = exp.Table(this=parts[-1], db=parts[0] if len(parts) == 2 else None)
    return _generate(exp.Create(this=schema, kind="SCHEMA", exists=True), target, "output.schema")


def _through_exec(statement: str) -> str:
    """T-SQL: CREATE VIEW must begin a batch, so create_all.sql (one batch, so that one
    transaction holds it) runs each statement as ``EXECUTE sp_executesql N'...'``."""
    run = exp.ExecuteSql(this=exp.table_("sp_executesql"),
                         expressions=[exp.National(this=statement)])
    # Not pretty: the statement inside is already laid out, and stays as it is.
    return run.sql(dialect="tsql", copy=False, unsupported_level=ErrorLevel.RAISE) + ";"
