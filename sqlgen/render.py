"""Render the Jinja templates into source-dialect SQL and parse it into sqlglot trees.

Templates choose structure (which CTEs and columns exist); names from the spec are never
pasted: templates carry markers (``__user__``, ``__activity_table__``, ``__where__``,
``ref('view')``) that ``bind`` replaces with sqlglot nodes.
"""

from __future__ import annotations

import datetime as dt
import functools
from dataclasses import dataclass, replace

import sqlglot
from sqlglot import exp

from . import names
from .dialects import SOURCE_DIALECT
from .filters import parse_filter
from .freshness import templates_dir
from .spec import WEEKDAYS, Spec, range_periods
from .views import View

VIEW_MARKER = "__view__"


@dataclass(frozen=True)
class Grain:
    """What the templates need to know of a grain."""

    name: str
    family: str  # 'day' or 'month'
    step: int  # key distance between adjacent periods
    week_offset: int  # weekday of the week's first day, 0 = Monday
    calendar_digits: int  # a calendar of up to 10**digits periods: every period of the range
    day_digits: int  # ... of days (trailing_activity)
    month_digits: int  # ... of calendar months, whole first and last periods (subscriptions)


_GRAINS = {
    "day": ("day", 1),
    "week": ("day", 7),
    "month": ("month", 1),
    "quarter": ("month", 3),
    "year": ("month", 12),
}


def grain_of(spec: Spec) -> Grain:
    """The grain, with calendars long enough for every source's whole valid range: a view's
    data lie inside the range, so no real period is ever cut off."""
    family, step = _GRAINS[spec.grain]
    offset = WEEKDAYS.index(spec.week_start) if spec.grain == "week" else 0
    ranges = [(s.valid_from, s.valid_until) for s in (spec.activity, spec.revenue) if s]

    def digits(grain: str, spare: int = 0) -> int:
        longest = max(range_periods(start, end, grain) for start, end in ranges) + spare
        return len(str(longest - 1))

    return Grain(spec.grain, family, step, offset, digits(spec.grain), digits("day"),
                 digits("month", 2 * (step - 1)))


@functools.lru_cache(maxsize=1)
def _environment():
    import jinja2  # only a compile needs it; `sqlgen build --check` of a fresh folder does not

    return jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(templates_dir())),
        undefined=jinja2.StrictUndefined,
        autoescape=False,
        keep_trailing_newline=False,
    )


def render(view: View, spec: Spec) -> str:
    """The view's query as source-dialect SQL text, with markers for spec names."""
    return render_template(view.template, spec, from_days=reads_days(view, spec))


def reads_days(view: View, spec: Spec) -> bool:
    """Whether the view reads the per-(user, day) table rather than the activity table:
    with `output.materialize: incremental`, every activity view but the source summary
    (which counts the source's own rows)."""
    return (spec.output.materialize == "incremental" and view.reads == "activity"
            and view.name != "activity_source_summary")


def render_template(name: str, spec: Spec, from_days: bool = False, refresh: bool = False,
                    **flags) -> str:
    """A template as source-dialect SQL text, with markers for spec names; ``flags`` are
    further template variables (the incremental statements' ``since``). ``refresh``: the
    view's rows from the first period refresh.sql changed on (see _activity.sql)."""
    template = _environment().get_template(name)
    return template.render(
        from_days=from_days,
        refresh=refresh,
        lookback=spec.output.lookback,
        **flags,
        grain=grain_of(spec),
        source=spec.activity,
        revenue=spec.revenue,
        windows=spec.trailing_windows,
        definitions=[d.name for d in spec.definitions],
        segments=spec.segments,
        segment_carry=segment_carry(spec),
        ref=lambda name: f"{VIEW_MARKER}{name}",
    )


def segment_carry(spec: Spec) -> list[tuple[str, str]]:
    """The columns the segmented views carry from the activity rows, as (marker, name): the
    value of each segment that splits the activity and is read from the rows, then, when one
    of those is kind user, the timestamp (its value is the one on the user's first row).
    With `materialize: incremental` the per-(user, day, value) table keeps them (see
    sqlgen/materialize.py); [] when no segment is read from the rows."""
    carry = [(f"__segment_{i}__", f"sqlgen_seg_{i}") for i, s in enumerate(spec.segments)
             if s.splits_activity and s.from_events]
    if any(s.splits_activity and s.from_events and s.kind == "user" for s in spec.segments):
        carry.append(("__timestamp__", "sqlgen_seg_ts"))
    return carry


def parse(sql: str) -> exp.Expression:
    """Parse rendered SQL in the source dialect."""
    return sqlglot.parse_one(sql, read=SOURCE_DIALECT)


@dataclass(frozen=True)
class Markers:
    """What each marker in a template stands for: columns, tables, conditions, literals."""

    columns: dict[str, exp.Expression]
    tables: dict[str, exp.Table]
    literals: dict[str, exp.Expression]


def markers(spec: Spec) -> Markers:
    """Every marker a spec defines. A new source (say, revenue) adds its own entries here."""
    columns: dict[str, exp.Expression] = {}
    tables: dict[str, exp.Table] = {}
    literals: dict[str, exp.Expression] = {}
    source = spec.activity
    if source is not None:
        columns["__user__"] = names.column(source.user)
        columns["__timestamp__"] = names.column(source.timestamp)
        if source.where:
            columns["__where__"] = filter_tree(source.where, spec)
        tables["__activity_table__"] = names.table(source.table)
        literals["__timezone__"] = exp.Literal.string(source.timezone or "UTC")
        literals.update(_range_markers("activity", source))
        _first_seen_markers(source, columns, tables, literals)
        if source.report_from is not None:
            literals["__report_from__"] = exp.Literal.string(source.report_from.isoformat())
    _revenue_markers(spec, columns, tables, literals)
    _segment_markers(spec, columns, tables, literals)
    return Markers(columns, tables, literals)


def _first_seen_markers(source, columns: dict, tables: dict, literals: dict) -> None:
    """Markers of the first-seen table: ``__seen_table__``, ``__seen_user__``,
    ``__seen_timestamp__`` and its near-range bounds (``'__seen_near_from__'``...), in the
    type of its own column and the valid range of the activity."""
    seen = source.first_seen
    if seen is None:
        return
    columns["__seen_user__"] = names.column(seen.user)
    columns["__seen_timestamp__"] = names.column(seen.timestamp)
    tables["__seen_table__"] = names.table(seen.table)
    literals.update(_range_markers("seen", replace(source, timestamp_type=seen.timestamp_type)))


def _revenue_markers(spec: Spec, columns: dict, tables: dict, literals: dict) -> None:
    """Markers of the revenue source: ``__customer__``, ``__amount__``, ``__revenue_table__``..."""
    revenue = spec.revenue
    if revenue is None:
        return
    named = {"__customer__": revenue.customer, "__amount__": revenue.amount,
             "__revenue_timestamp__": revenue.timestamp, "__revenue_start__": revenue.start,
             "__revenue_end__": revenue.end, "__revenue_interval__": revenue.interval_column}
    columns.update({marker: names.column(part) for marker, part in named.items() if part})
    if revenue.where:
        columns["__revenue_where__"] = filter_tree(revenue.where, spec)
    tables["__revenue_table__"] = names.table(revenue.table)
    literals["__revenue_timezone__"] = exp.Literal.string(revenue.timezone or "UTC")
    literals.update(_range_markers("revenue", revenue))


def _segment_markers(spec: Spec, columns: dict, tables: dict, literals: dict) -> None:
    """Markers of segment i: its value column ``__segment_i__``, name literal
    ``'__segment_name_i__'``, and with a table ``__segment_table_i__``, ``__segment_key_i__``
    and ``__segment_customer_i__``."""
    for i, segment in enumerate(spec.segments):
        columns[f"__segment_{i}__"] = names.column(segment.column)
        literals[f"__segment_name_{i}__"] = exp.Literal.string(segment.name)
        if segment.table is not None:
            tables[f"__segment_table_{i}__"] = names.table(segment.table)
        for marker, part in (("key", segment.key), ("customer", segment.customer_key)):
            if part is not None:
                columns[f"__segment_{marker}_{i}__"] = names.column(part)


RANGE_MARGIN = dt.timedelta(days=2)  # > a day of zone offset plus a day of session zone


def _range_markers(prefix: str, source) -> dict[str, exp.Expression]:
    """The valid range's bounds as literals (``'__activity_valid_from__'``...), and the
    pre-check's bounds a margin wider, as text of the raw column's type."""
    time = "" if source.timestamp_type == "date" else " 00:00:00"
    bounds = {"valid_from": source.valid_from.isoformat(),
              "valid_until": source.valid_until.isoformat(),
              "near_from": (source.valid_from - RANGE_MARGIN).isoformat() + time,
              "near_until": (source.valid_until + RANGE_MARGIN).isoformat() + time}
    return {f"__{prefix}_{name}__": exp.Literal.string(text) for name, text in bounds.items()}


def bind(tree: exp.Expression, spec: Spec, view_table) -> exp.Expression:
    """Replace the markers with sqlglot nodes built from the spec, in place (the tree is the
    caller's own fresh parse); returns the root."""
    found = markers(spec)

    def rewrite(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.Column) and not node.table and node.name in found.columns:
            return found.columns[node.name].copy()
        if isinstance(node, exp.Table) and not node.db:
            if node.name in found.tables:
                return _with_alias(found.tables[node.name].copy(), node)
            if node.name.startswith(VIEW_MARKER):
                return _with_alias(view_table(node.name[len(VIEW_MARKER):]), node)
        if isinstance(node, exp.Literal) and node.is_string and node.this in found.literals:
            return found.literals[node.this].copy()
        return node

    return tree.transform(rewrite, copy=False)


def _with_alias(table: exp.Table, marker: exp.Table) -> exp.Table:
    alias = marker.args.get("alias")
    if alias is not None:
        table.set("alias", alias.copy())
    return table


def filter_tree(text: str, spec: Spec) -> exp.Expression:
    """A spec's ``where`` text as a tree, its column names marked like other spec names."""
    from .dialects import TARGETS

    tree = parse_filter(text, TARGETS[spec.output.dialect].sqlglot_dialect, spec.allow_functions)

    def mark(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.Identifier) and isinstance(node.parent, exp.Column):
            ident = exp.Identifier(this=node.this, quoted=True)
            ident.meta["sqlgen_bare"] = not node.quoted
            return ident
        return node

    return tree.transform(mark, copy=False)
