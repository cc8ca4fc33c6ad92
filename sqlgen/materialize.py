"""`output.materialize: incremental`: the per-(user, day) table, the state table and refresh.sql.

create_all.sql creates, for each part of the spec with activity (``Spec.parts``), the
per-(user, day) table ``<prefix>sqlgen_activity_days`` and the one-row state table
``<prefix>sqlgen_refresh_state`` before the views' tables, which are computed from the
per-day table (templates read it in place of the activity table: ``render.reads_days``).

refresh.sql, in one transaction where the target has one, for each part:
  1. counts the source rows now before from_day (pending_before: with rows_before, the
     late rows older than the lookback, not added but counted in the state table);
  2. deletes the days from from_day on and inserts them again from the source rows with a
     timestamp from from_day on (exact and idempotent: those days are complete); with
     segments read from the activity rows, the same for the per-(user, day, value) table
     ``<prefix>sqlgen_segment_days`` the segmented views read;
  3. finds the new mark, the newest day (pending_mark), and counts the rows between from_day
     and the new from_day, mark - lookback (pending_between);
  4. brings the per-user first active dates (``<prefix>sqlgen_first_days``) up to date:
     those before from_day never change, the others are found again from from_day on;
then deletes each activity table's rows from the period holding from_day on and inserts
them from the view's own template rendered with ``refresh`` (PER_PERIOD; it reads the
per-day rows from a period before, the first dates, and nothing older), and computes the
revenue tables again from their source (subscription rows change after they are written)
and the segmented tables from the per-day tables (a segments table can change any period),
and, with first_seen, every table in full. Last, one UPDATE per part commits the state
(``commit_statements``): late_rows, rows_before, the mark and from_day move, read_from keeps
the from_day read from. Until then no step changes a column another step reads, and every
step is idempotent, so a run that fails anywhere (on a target without transactions too)
leaves the state as it was, and the next run is correct. Statements are templates in the
source dialect, bound and rewritten per target like every view.

Where a target's tables have neither DELETE nor UPDATE (Spark's Parquet tables:
``Target.partition_overwrite``), ``overwrite_form`` turns each DELETE and the INSERT that
follows it, and each UPDATE of the state, into one INSERT OVERWRITE in dynamic partition
mode, which writes its partitions aside and moves them in only when the statement succeeds
(so a statement that fails changes nothing, and it may read the table it writes). Each
table is partitioned so that its deleted rows are whole partitions (``partition_column``):
the per-day tables by day, the tables rebuilt from a period on by their period key; the
per-user first dates and the state, whose rows move between days, by one constant column
(``CONSTANT_PART``): every refresh writes them again whole. The tables computed again in
full are not partitioned (INSERT OVERWRITE of the whole table).
"""

from __future__ import annotations

import sqlglot
from sqlglot import exp

from .dialects import Target
from .render import bind, render_template, segment_carry
from .spec import Spec

DAYS = "sqlgen_activity_days"
SEGMENT_DAYS = "sqlgen_segment_days"
FIRST = "sqlgen_first_days"
STATE = "sqlgen_refresh_state"
REFRESH = "refresh.sql"
# The partition column of the tables an overwrite target writes whole at every refresh.
CONSTANT_PART = "sqlgen_partition"


def parts_with_days(spec: Spec) -> list[Spec]:
    """The parts of an incremental spec that keep a per-day table: those with activity."""
    if spec.output.materialize != "incremental":
        return []
    return [part for part in spec.parts() if part.activity is not None]


def _statements(name: str, part: Spec, target: Target, **flags) -> list[exp.Expression]:
    """A template's statements, bound to the part's names and rewritten for the target."""
    from .compiler import _without_positions, view_table
    from .dialects import rewrites

    text = render_template(name, part, **flags)
    trees = []
    for tree in sqlglot.parse(text, read="duckdb"):
        if tree is None:
            continue
        tree = bind(_without_positions(tree), part, lambda view: view_table(part, view))
        for rewrite in rewrites(target):
            tree = rewrite(tree)
        trees.append(tree)
    return trees


def create_statements(part: Spec, target: Target) -> list[str]:
    """The per-day and state tables of a part, computed in full (create_all.sql)."""
    from .compiler import table_statements, view_table

    out: list[str] = []
    for name, template in day_tables(part) + [(FIRST, "sqlgen_first_days.sql"),
                                              (STATE, "sqlgen_refresh_state.sql")]:
        (query,) = _statements(template, part, target, since=False)
        out += table_statements(view_table(part, name), query, target, f"view {name}",
                                state=name == STATE,
                                partition=partition_column(name, part, target))
    return out


def day_tables(part: Spec) -> list[tuple[str, str]]:
    """(table, template) of the per-day tables of a part: sqlgen_activity_days, and with
    segments read from the activity rows, sqlgen_segment_days (the segmented views read
    it: it keeps their columns, so they count the same rows as every other table)."""
    out = [(DAYS, "sqlgen_activity_days.sql")]
    if segment_carry(part):
        out.append((SEGMENT_DAYS, "sqlgen_segment_days.sql"))
    return out


def refresh_statements(part: Spec, target: Target) -> list[str]:
    """Steps 1 to 4 of refresh.sql for a part (see the module's docstring)."""
    from .compiler import _generate, view_table

    key = "output.materialize"
    state = view_table(part, STATE)
    days = []
    for name, template in day_tables(part):
        table = view_table(part, name)
        since = exp.select("from_day").from_(state.copy()).subquery()
        days.append(exp.Delete(this=table.copy(), where=exp.Where(this=exp.GTE(
            this=exp.column("activity_date"), expression=since))))
        (query,) = _statements(template, part, target, since=True)
        days.append(exp.Insert(this=table.copy(), expression=query))
    trees = [*_statements("sqlgen_refresh_steps.sql", part, target, step="late"), *days,
             *_statements("sqlgen_refresh_steps.sql", part, target, step="mark"),
             *_statements("sqlgen_refresh_steps.sql", part, target, step="first")]
    return [_generate(tree, target, key) for tree in overwrite_form(trees, part, target)]


def commit_statements(part: Spec, target: Target) -> list[str]:
    """refresh.sql's last statement for a part: its state moved on (see the module's
    docstring)."""
    from .compiler import _generate

    trees = _statements("sqlgen_refresh_steps.sql", part, target, step="commit")
    return [_generate(tree, target, "output.materialize")
            for tree in overwrite_form(trees, part, target)]


def recompute_statements(table: exp.Table, query: exp.Expression, part: Spec,
                         target: Target, key: str) -> list[str]:
    """A table's rows computed again: DELETE (WHERE TRUE: BigQuery refuses a DELETE
    without a WHERE clause), then INSERT of its query."""
    from .compiler import _generate

    delete = exp.Delete(this=table.copy(), where=exp.Where(this=exp.true()))
    trees = [delete, exp.Insert(this=table.copy(), expression=query)]
    return [_generate(tree, target, key) for tree in overwrite_form(trees, part, target)]


# The tables refresh.sql computes again from the first changed period on, not in full:
# view name -> (the column holding a row's period key, its unit: 'period' of the grain, or
# 'day' for a day number). Their templates take `refresh` (see _activity.sql).
PER_PERIOD = {
    "user_activity": ("period_key", "period"),
    "growth_accounting": ("period_key", "period"),
    "user_states": ("period_key", "period"),
    "engagement_depth": ("period_key", "period"),
    "cohort_retention": ("period_key", "period"),
    "trailing_activity": ("day_key", "day"),
}


def per_period(view_name: str, part: Spec) -> bool:
    """Whether refresh.sql computes a view's table again only from the first changed period
    on. Not with activity.first_seen: a users table that changes can change any period."""
    return (view_name in PER_PERIOD and part.activity is not None
            and part.activity.first_seen is None)


def period_statements(view_name: str, template: str, part: Spec,
                      target: Target) -> list[exp.Expression]:
    """A table's rows from the first changed period on: DELETE, then INSERT of the view's
    own template rendered with `refresh` (it reads only the days it needs)."""
    column, unit = PER_PERIOD[view_name]
    (delete,) = _statements("sqlgen_refresh_steps.sql", part, target, step="delete",
                            table=view_name, column=column, unit=unit)
    (query,) = _statements(template, part, target, from_days=True, refresh=True)
    from .compiler import view_table

    trees = [delete, exp.Insert(this=view_table(part, view_name), expression=query)]
    return overwrite_form(trees, part, target)


def partition_column(name: str, part: Spec, target: Target) -> str | None:
    """The column an overwrite target (``Target.partition_overwrite``) partitions an
    incremental table by (see the module's docstring); None: not partitioned, or not such
    a target."""
    if not target.partition_overwrite or part.output.materialize != "incremental":
        return None
    if name in (DAYS, SEGMENT_DAYS):
        return "activity_date"
    if name in (FIRST, STATE):
        return CONSTANT_PART
    if per_period(name, part):
        return PER_PERIOD[name][0]
    return None


def _partitions(part: Spec, target: Target) -> list[tuple[exp.Table, str | None]]:
    """(table, partition column) of every table refresh.sql writes for a part."""
    from .compiler import view_table

    names = [DAYS, SEGMENT_DAYS, FIRST, STATE, *PER_PERIOD]
    return [(view_table(part, name), partition_column(name, part, target)) for name in names]


def _same_table(a: exp.Table, b: exp.Table) -> bool:
    return [a.name, a.db, a.catalog] == [b.name, b.db, b.catalog]


def _named(query: exp.Expression) -> list[str]:
    names = query.named_selects
    if not names or "*" in names:
        raise AssertionError("an incremental table's query names each of its columns")
    return names


def _projected(names: list[str], source: exp.Expression, alias: str) -> exp.Select:
    return exp.select(*(exp.column(n, table=alias, quoted=True) for n in names)).from_(
        source.subquery(alias, copy=False) if not isinstance(source, exp.Table)
        else source.as_(alias))


def overwrite_form(trees: list[exp.Expression], part: Spec,
                   target: Target) -> list[exp.Expression]:
    """refresh.sql's statements as INSERT OVERWRITE where the target has neither DELETE
    nor UPDATE (see the module's docstring); unchanged elsewhere.

    A DELETE of the rows where c, then INSERT of q: q reading the table as it is after
    the delete (its rows where c is not true); the table's partitions, where c holds
    exactly for whole partitions, are overwritten by q's rows; with the constant partition
    by its rows where c is not true and q's; without a partition, whole by q. An UPDATE
    of the one-row state: its row again, each column set or kept."""
    if not target.partition_overwrite:
        return trees
    layout = _partitions(part, target)

    def partition_of(table: exp.Table) -> str | None:
        return next((column for t, column in layout if _same_table(t, table)), None)

    out: list[exp.Expression] = []
    pending: exp.Delete | None = None
    for tree in trees:
        if isinstance(tree, exp.Delete):
            pending = tree
            continue
        if isinstance(tree, exp.Update):
            out.append(_overwrite_update(tree, part, target))
            continue
        if not isinstance(tree, exp.Insert) or pending is None or not _same_table(
                pending.this, tree.this):
            raise AssertionError(f"refresh step without an overwrite form: {tree.sql()}")
        table, column = tree.this, partition_of(tree.this)
        condition = pending.args["where"].this
        pending = None
        query = tree.expression
        if condition == exp.true():
            if any(_same_table(t, table) for t in query.find_all(exp.Table)):
                raise AssertionError("a table computed again in full reads itself")
            kept = None
        else:
            kept = exp.select("*").from_(table.copy()).where(
                exp.not_(exp.func("COALESCE", condition.copy(), exp.false())))
            for read in list(query.find_all(exp.Table)):
                if _same_table(read, table):
                    read.replace(kept.copy().subquery(read.alias_or_name, copy=False))
        names = _named(query)
        if column is None:
            rows = query
        elif column == CONSTANT_PART:
            rows = _projected(names, query, "sqlgen_rows")
            if kept is not None:
                rows = exp.union(_projected(names, kept, "sqlgen_kept"), rows, distinct=False)
            rows = exp.select(*(exp.column(n, quoted=True) for n in names),
                              exp.Literal.number(0).as_(CONSTANT_PART)).from_(
                rows.subquery("sqlgen_rows", copy=False))
        else:
            rows = _projected([n for n in names if n != column] + [column], query,
                              "sqlgen_rows")
        out.append(_insert_overwrite(table, column, rows))
    if pending is not None:
        raise AssertionError("a DELETE without its INSERT")
    return out


def _insert_overwrite(table: exp.Table, column: str | None,
                      rows: exp.Expression) -> exp.Insert:
    target_table = table.copy()
    if column is not None:
        target_table.set("partition", exp.Partition(
            expressions=[exp.column(column, quoted=True)]))
    return exp.Insert(this=target_table, expression=rows, overwrite=True)


def _overwrite_update(update: exp.Update, part: Spec, target: Target) -> exp.Insert:
    """UPDATE state SET c = e, ... as the state row written again (it has one row)."""
    from .compiler import view_table

    table = view_table(part, STATE)
    if not _same_table(update.this, table):
        raise AssertionError("only the state table is updated")
    assigned = {eq.this.name: eq.expression for eq in update.expressions}
    (query,) = _statements("sqlgen_refresh_state.sql", part, target, since=False)
    columns = [assigned.get(n, exp.column(n, quoted=True)).copy().as_(n, quoted=True)
               for n in _named(query)]
    rows = exp.select(*columns, exp.column(CONSTANT_PART, quoted=True)).from_(table.copy())
    return _insert_overwrite(table, CONSTANT_PART, rows)
