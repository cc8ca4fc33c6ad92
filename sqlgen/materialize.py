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
                                state=name == STATE)
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
    return [_generate(tree, target, key) for tree in trees]


def commit_statements(part: Spec, target: Target) -> list[str]:
    """refresh.sql's last statement for a part: its state moved on (see the module's
    docstring)."""
    from .compiler import _generate

    return [_generate(tree, target, "output.materialize")
            for tree in _statements("sqlgen_refresh_steps.sql", part, target, step="commit")]


def recompute_statements(table: exp.Table, query: exp.Expression, target: Target,
                         key: str) -> list[str]:
    """A table's rows computed again: DELETE (WHERE TRUE: BigQuery refuses a DELETE
    without a WHERE clause), then INSERT of its query."""
    from .compiler import _generate

    delete = exp.Delete(this=table.copy(), where=exp.Where(this=exp.true()))
    return [_generate(delete, target, key),
            _generate(exp.Insert(this=table.copy(), expression=query), target, key)]


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

    return [delete, exp.Insert(this=view_table(part, view_name), expression=query)]
