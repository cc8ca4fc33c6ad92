"""A spec checked against a schema source (``validate --schema``, ``build --schema``).

``check_spec(spec, catalog)`` returns every problem, each located at the spec key that
names the table or column: a table or column that does not exist (with "did you mean"),
a column of a type the view cannot use, a declared ``timestamp_type`` that disagrees with
the column's real type, money that is not a DECIMAL of the declared scale.

Which columns a spec names is one table, ``COLUMN_USES``: a new spec key naming a column
(a segment, say) adds a row there and is checked like the others.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Any

from sqlglot import exp

from . import names
from .comments import shown
from .errors import Problem
from .filters import parse_filter
from .schema import Catalog, Column, Table, suggest
from .spec import Spec

# What each use of a column needs. ``time`` is checked against the section's
# timestamp_type; ``money`` against revenue.scale.
USES = {
    "key": "a user or customer key: text or a whole number (a floating-point key does not "
           "compare exactly, common practice)",
    "time": "a DATE, TIMESTAMP or TIMESTAMPTZ column",
    "money": "a DECIMAL/NUMERIC column",
    "text": "a text column",
    "any": "any column",
}
_KEY_KINDS = ("text", "integer", "decimal")
_TIME_KINDS = ("date", "timestamp", "timestamptz")


@dataclass(frozen=True)
class ColumnUse:
    """A spec key that names a column of a section's table, and what the column is for.
    ``get`` reads the name from the section (None when not set); ``many`` reads several
    (key path suffix, name) pairs, for list-valued keys."""

    section: str
    key: str
    use: str
    get: Callable[[Any], names.Part | None] | None = None
    many: Callable[[Any], list[tuple[str, names.Part]]] | None = None


def _attr(name: str) -> Callable[[Any], names.Part | None]:
    return lambda section: getattr(section, name, None)


COLUMN_USES: tuple[ColumnUse, ...] = (
    ColumnUse("activity", "user", "key", _attr("user")),
    ColumnUse("activity", "timestamp", "time", _attr("timestamp")),
    ColumnUse("activity.first_seen", "user", "key", _attr("user")),
    ColumnUse("activity.first_seen", "timestamp", "time", _attr("timestamp")),
    ColumnUse("revenue", "customer", "key", _attr("customer")),
    ColumnUse("revenue", "timestamp", "time", _attr("timestamp")),
    ColumnUse("revenue", "start", "time", _attr("start")),
    ColumnUse("revenue", "end", "time", _attr("end")),
    ColumnUse("revenue", "amount", "money", _attr("amount")),
    ColumnUse("revenue", "interval_column", "text", _attr("interval_column")),
)
SECTIONS = ("activity", "activity.first_seen", "revenue")


def _section(spec: Spec, name: str) -> Any:
    """The section a spec path names (``activity.first_seen``: the activity's users table)."""
    found: Any = spec
    for step in name.split("."):
        found = getattr(found, step, None) if found is not None else None
    return found


def check_spec(spec: Spec, catalog: Catalog) -> list[Problem]:
    """Every problem of ``spec`` against the tables of ``catalog`` (empty when none): its
    own sections, then each definition's (a key it takes from `activity` is reported once,
    under `activity`)."""
    problems: list[Problem] = []
    for part in spec.parts():
        for problem in _check_part(part, catalog):
            problem = _relabel(spec, part, problem)
            if problem not in problems:
                problems.append(problem)
    return problems


def _check_part(spec: Spec, catalog: Catalog) -> list[Problem]:
    problems: list[Problem] = []
    for name in SECTIONS:
        section = _section(spec, name)
        if section is None:
            continue
        table = catalog.find(section.table)
        if table is None:
            problems.append(_problem(spec, f"{name}.table", _missing_table(section.table,
                                                                           catalog)))
            continue
        problems += _check_section(spec, name, section, table, catalog)
    return problems + _check_segments(spec, catalog) + _check_user_keys(spec, catalog)


def _check_user_keys(spec: Spec, catalog: Catalog) -> list[Problem]:
    """The user keys that the views join to ``activity.user`` (the first-seen table's, a
    kind user segment table's ``key``) hold the same kind of value: text against text,
    numbers against numbers. A text key joined to a numeric one matches nothing, or fails,
    depending on the engine. Columns that are missing are reported elsewhere."""
    activity = spec.activity
    base = _column(catalog, activity.table, activity.user) if activity else None
    if base is None or base.kind not in _KEY_KINDS:
        return []
    seen = activity.first_seen
    joined = [("activity.first_seen.user", seen.table, seen.user)] if seen else []
    joined += [(f"segments.{s.name}.key", s.table, s.key) for s in spec.segments
               if s.table is not None and s.key is not None and s.splits_activity]
    problems = []
    for key, table, part in joined:
        column = _column(catalog, table, part)
        if column is None or column.kind not in _KEY_KINDS:
            continue
        if (column.kind == "text") != (base.kind == "text"):
            problems.append(_problem(spec, key, (
                f"{shown(column.name)} is {column.type} but activity.user "
                f"{shown(base.name)} is {base.type}: the join on the user key would compare "
                "text with numbers (no user matches, or an error, by engine); give both the "
                "same type, e.g. cast one of them in a view upstream")))
    return problems


def _column(catalog: Catalog, table: tuple[names.Part, ...], part: names.Part
            ) -> Column | None:
    found = catalog.find(table)
    return found.column(*part) if found is not None else None


def _check_segments(spec: Spec, catalog: Catalog) -> list[Problem]:
    """Each segment's columns exist: in the activity table, or in the segment's own table."""
    problems = []
    for segment in spec.segments:
        path = f"segments.{segment.name}"
        if segment.table is None:
            table = catalog.find(spec.activity.table) if spec.activity else None
        else:
            table = catalog.find(segment.table)
            if table is None:
                problems.append(_problem(spec, f"{path}.table",
                                         _missing_table(segment.table, catalog)))
        if table is None:
            continue  # a missing activity table is reported once, at activity.table
        for key in ("column", "key", "customer_key"):
            part = getattr(segment, key)
            if part is not None and table.column(*part) is None:
                problems.append(_problem(spec, f"{path}.{key}",
                                         _missing_column(part, table, catalog)))
    return problems


def _relabel(spec: Spec, part: Spec, problem: Problem) -> Problem:
    """A definition's problem under its own key when the definition wrote it."""
    if not part.definition or not problem.key.startswith("activity"):
        return problem
    own = f"definitions.{part.definition}" + problem.key[len("activity"):]
    written = own
    while written and written not in spec.positions:
        written = written.rpartition(".")[0]
    if written.count(".") <= 1:  # taken from activity: reported there
        return _problem(spec, problem.key, problem.message)
    return _problem(spec, own, problem.message)


def _check_section(spec: Spec, name: str, section: Any, table: Table,
                   catalog: Catalog) -> list[Problem]:
    problems = []
    for key, part, use in _named_columns(spec, name, section):
        column = table.column(*part)
        if column is None:
            problems.append(_problem(spec, key, _missing_column(part, table, catalog)))
            continue
        message = _type_problem(spec, name, section, key, column, use)
        if message:
            problems.append(_problem(spec, key, message))
    return problems


def _named_columns(spec: Spec, name: str, section: Any
                   ) -> Iterator[tuple[str, names.Part, str]]:
    for use in COLUMN_USES:
        if use.section != name:
            continue
        if use.get is not None:
            part = use.get(section)
            if part is not None:
                yield f"{name}.{use.key}", part, use.use
        for suffix, part in (use.many(section) if use.many else []):
            yield f"{name}.{use.key}{suffix}", part, use.use
    if getattr(section, "where", None):
        for part in where_columns(section.where, spec):
            yield f"{name}.where", part, "any"


def where_columns(text: str, spec: Spec) -> list[names.Part]:
    """The columns a ``where`` filter reads, in order, each once."""
    from .dialects import TARGETS

    tree = parse_filter(text, TARGETS[spec.output.dialect].sqlglot_dialect,
                        spec.allow_functions)
    found: list[names.Part] = []
    for column in tree.find_all(exp.Column):
        ident = column.this
        if isinstance(ident, exp.Identifier):
            part = (ident.name, bool(ident.quoted))
            if part not in found:
                found.append(part)
    return found


def _type_problem(spec: Spec, name: str, section: Any, key: str, column: Column,
                  use: str) -> str:
    kind = column.kind
    real = f"{shown(column.name)} is {column.type}"
    if use == "key" and kind not in _KEY_KINDS:
        return f"{real}; expected {USES['key']}"
    if use == "text" and kind != "text":
        return f"{real}; expected {USES['text']}"
    if use == "money":
        return _money_problem(section, real, column)
    if use == "time":
        return _time_problem(name, section, real, kind)
    return ""


def _money_problem(section: Any, real: str, column: Column) -> str:
    scale = section.scale
    if column.kind == "integer" and scale == 0:
        return ""
    if column.kind != "decimal":
        return (f"{real}; money must be a DECIMAL/NUMERIC column of scale {scale} "
                f"(revenue.scale), e.g. DECIMAL(18,{scale}): a floating-point amount does "
                "not add up exactly (common practice)")
    if column.scale is not None and column.scale != scale:
        return (f"{real}, of scale {column.scale}, but revenue.scale is {scale}; set "
                f"scale: {column.scale} or cast the column to DECIMAL(18,{scale}) upstream")
    return ""


_TIME_ADVICE = {
    ("timestamp", "timestamptz"): "an instant read as a local time: the periods would move "
                                  "with the session's time zone",
    ("timestamptz", "timestamp"): "a local time without zone read as an instant: the engine "
                                  "would place it by the session's time zone",
}


def _time_problem(name: str, section: Any, real: str, kind: str) -> str:
    declared = section.timestamp_type
    if kind not in _TIME_KINDS:
        return f"{real}; expected {USES['time']}"
    if kind == declared:
        return ""
    why = _TIME_ADVICE.get((declared, kind), "the declared type must match the column's")
    return (f"{real}, but {name}.timestamp_type is {declared} ({why}); set "
            f"timestamp_type: {kind}")


def _missing_table(parts: tuple[names.Part, ...], catalog: Catalog) -> str:
    written = names.display(parts)
    several = catalog.matches(parts)
    if len(several) > 1:
        return (f"table {shown(written)} is ambiguous in {catalog.label}: "
                f"{', '.join(t.display for t in several[:8])}; qualify it with its schema")
    options = catalog.names() + [t.name for t in catalog.tables]
    hint = suggest(written, options) or suggest(parts[-1][0], options)
    if catalog.kind in ("parquet", "csv"):
        return (f"table {shown(written)} is not in {catalog.label}: a {catalog.kind} file "
                f"holds one table, named by the file: {catalog.tables[0].name}")
    listed = ", ".join(catalog.names()[:8]) or "no tables"
    return f"table {shown(written)} is not in {catalog.label} (it holds {listed}).{hint}"


def _missing_column(part: names.Part, table: Table, catalog: Catalog) -> str:
    text, quoted = part
    options = [c.name for c in table.columns]
    near = table.column(text)  # the same name in another case, for a quoted name
    hint = f" Did you mean {near.name!r}?" if quoted and near else suggest(text, options)
    return f"column {shown(text)} is not in {table.display} ({catalog.label}).{hint}"


def _problem(spec: Spec, key: str, message: str) -> Problem:
    found = key
    while found and found not in spec.positions:
        found = found.rpartition(".")[0]
    line, col = spec.positions.get(found, (1, 1))
    return Problem(spec.path or spec.file, line, col, key, message)
