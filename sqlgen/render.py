"""Render the Jinja templates into source-dialect SQL and parse it into sqlglot trees.

Templates choose structure (which CTEs and columns exist); names from the spec are never
pasted: templates carry markers (``__user__``, ``__activity_table__``, ``__where__``,
``ref('view')``) that ``bind`` replaces with sqlglot nodes.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass
from importlib import resources
from pathlib import Path

import jinja2
import sqlglot
from sqlglot import exp

from . import names
from .dialects import SOURCE_DIALECT
from .filters import parse_filter
from .spec import WEEKDAYS, Spec
from .views import View

VIEW_MARKER = "__view__"


@dataclass(frozen=True)
class Grain:
    """What the templates need to know of a grain."""

    name: str
    family: str  # 'day' or 'month'
    step: int  # key distance between adjacent periods
    week_offset: int  # weekday of the week's first day, 0 = Monday
    calendar_digits: int  # a calendar of up to 10**digits periods


_GRAINS = {
    "day": ("day", 1, 5),
    "week": ("day", 7, 4),
    "month": ("month", 1, 4),
    "quarter": ("month", 3, 3),
    "year": ("month", 12, 3),
}


def grain_of(spec: Spec) -> Grain:
    family, step, digits = _GRAINS[spec.grain]
    offset = WEEKDAYS.index(spec.week_start) if spec.grain == "week" else 0
    return Grain(spec.grain, family, step, offset, digits)


def templates_dir() -> Path:
    """The templates folder: installed beside the package, or templates/ in a checkout."""
    try:
        installed = resources.files("sqlgen.templates")
        path = Path(str(installed))
        if (path / "user_activity.sql").is_file():
            return path
    except ModuleNotFoundError:
        pass
    return Path(__file__).resolve().parent.parent / "templates"


@functools.lru_cache(maxsize=1)
def _environment() -> jinja2.Environment:
    return jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(templates_dir())),
        undefined=jinja2.StrictUndefined,
        autoescape=False,
        keep_trailing_newline=False,
    )


def render(view: View, spec: Spec) -> str:
    """The view's query as source-dialect SQL text, with markers for spec names."""
    template = _environment().get_template(view.template)
    return template.render(
        grain=grain_of(spec),
        source=spec.activity,
        ref=lambda name: f"{VIEW_MARKER}{name}",
    )


def parse(sql: str) -> exp.Expression:
    """Parse rendered SQL in the source dialect."""
    return sqlglot.parse_one(sql, read=SOURCE_DIALECT)


def bind(tree: exp.Expression, spec: Spec, view_table) -> exp.Expression:
    """Replace the markers with sqlglot nodes built from the spec."""
    source = spec.activity
    columns = {"__user__": source.user, "__timestamp__": source.timestamp}
    where = _where_tree(spec) if source.where else None

    def rewrite(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.Column) and not node.table:
            if node.name in columns:
                return names.column(columns[node.name])
            if node.name == "__where__" and where is not None:
                return where.copy()
        if isinstance(node, exp.Table) and not node.db:
            if node.name == "__activity_table__":
                return _with_alias(names.table(source.table), node)
            if node.name.startswith(VIEW_MARKER):
                return _with_alias(view_table(node.name[len(VIEW_MARKER):]), node)
        if isinstance(node, exp.Literal) and node.is_string and node.this == "__timezone__":
            return exp.Literal.string(source.timezone or "UTC")
        return node

    return tree.transform(rewrite)


def _with_alias(table: exp.Table, marker: exp.Table) -> exp.Table:
    alias = marker.args.get("alias")
    if alias is not None:
        table.set("alias", alias.copy())
    return table


def _where_tree(spec: Spec) -> exp.Expression:
    from .dialects import TARGETS

    tree = parse_filter(spec.activity.where or "", TARGETS[spec.output.dialect].sqlglot_dialect)

    def mark(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.Identifier) and isinstance(node.parent, exp.Column):
            ident = exp.Identifier(this=node.this, quoted=True)
            ident.meta["sqlgen_bare"] = not node.quoted
            return ident
        return node

    return tree.transform(mark)
