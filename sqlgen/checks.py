"""The run-time guard: a read-only query per target that returns one row per assumption of
the spec the data breaks (NULL keys, NULL timestamps, rows outside the valid range, values
of another type than the declared one, ...).

``checks_sql(spec, target)`` returns the query file's text: a header, then one SELECT over
the source summary views that ``create_all.sql`` creates (``activity_source_summary``,
``revenue_source_summary``) and, for the type checks, the source tables themselves. A
scheduled job runs it and alerts when it returns a row.
Its structure is ``templates/sqlgen_checks.sql``; its spelling per target is the same
pipeline as every view's (``compiler.compile_query``, the rewrites of ``dialects.py``).
"""

from __future__ import annotations

from . import __version__
from .comments import comment_text
from sqlglot import exp

from . import names
from .compiler import _generate, compile_query
from .dialects import NO_CATALOG, TARGETS, Target, catalog_rows, rewrites
from .render import parse, render_template
from .spec import Spec
from .views import View

CHECKS = View(
    "sqlgen_checks",
    "One row per assumption of the spec that the data breaks; no row when all hold.",
    (("checked_section", "activity or revenue"),
     ("broken_assumption", "null_user, null_timestamp, out_of_range, unconverted, "
                           "wrong_type_timestamp (activity); null_customer, null_date, "
                           "null_amount, out_of_range, invalid, wrong_type_<timestamp, start, "
                           "end or amount> (revenue)"),
     ("failing_rows", "how many source rows break it")),
    depends=("activity_source_summary", "revenue_source_summary"),
)
FILE_NAME = "sqlgen_checks.sql"


CATALOG_CHECKS = View(
    "sqlgen_catalog_checks",
    "One row per column whose type the spec declares that the catalog does not list, or "
    "lists with another type; no row when all are as declared.",
    (("checked_section", "activity, activity.first_seen or revenue"),
     ("broken_assumption", "missing_column_<key> (no such column or table) or "
                           "column_type_<key> (listed with another type)"),
     ("found_type", "the type as the catalog spells it (NULL when not listed)")),
)


def declared_columns(spec: Spec) -> list[tuple[str, str, exp.Table, str, str, int | None]]:
    """(section, key, table, column, kind, scale) of every column whose type the spec
    declares: timestamps by their section's timestamp_type, the amount as a DECIMAL."""
    out = []
    source = spec.activity
    if source is not None:
        out.append(("activity", "timestamp", source.table, source.timestamp,
                    source.timestamp_type, None))
        seen = source.first_seen
        if seen is not None:
            out.append(("activity.first_seen", "timestamp", seen.table, seen.timestamp,
                        seen.timestamp_type, None))
    revenue = spec.revenue
    if revenue is not None:
        for key in ("timestamp", "start", "end"):
            if getattr(revenue, key):
                out.append(("revenue", key, revenue.table, getattr(revenue, key),
                            revenue.timestamp_type, None))
        out.append(("revenue", "amount", revenue.table, revenue.amount, "decimal",
                    revenue.scale))
    return [(section, key, names.table(table), names.column(column).name, kind, scale)
            for section, key, table, column, kind, scale in out]


def catalog_query(spec: Spec, target: Target) -> tuple[str | None, list[str]]:
    """The catalog statement for the target (None when it reads no catalog) and the
    declared columns it cannot check there, with the reason."""
    declared = declared_columns(spec)
    if target.name in NO_CATALOG or not declared:
        return None, ([f"no catalog check on {target.name}: {NO_CATALOG[target.name]}"]
                      if declared else [])
    rows, checked, skipped = {}, [], []
    for section, key, table, column, kind, scale in declared:
        found = catalog_rows(target, table, column, kind, scale)
        if found is None:
            skipped.append(f"{section}.{key}: no catalog check (BigQuery's catalog is per "
                           "dataset: qualify the table)")
            continue
        marker = f"__catalog_{section.replace('.', '_')}_{key}__"
        rows[marker] = found
        checked.append((section, key, kind, marker))
    if not rows:
        return None, skipped
    tree = parse(render_template(CATALOG_CHECKS.template, spec, columns=checked))

    def catalog(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.Table) and node.name in rows:
            return rows[node.name].copy()
        return node

    tree = tree.transform(catalog, copy=False)
    for rewrite in rewrites(target):
        tree = rewrite(tree)
    return _generate(tree, target, "sqlgen_checks"), skipped


def checks_sql(spec: Spec, target_name: str | None = None) -> str:
    """The text of the read-only checks file for ``target_name`` (default: the spec's):
    the catalog statement first (where the target has a catalog), then the data
    statement."""
    target = TARGETS[target_name or spec.output.dialect]
    catalog, skipped = catalog_query(spec, target)
    query = _generate(compile_query(CHECKS, spec, target), target, "sqlgen_checks")
    lines = [f"-- sqlgen {__version__}: run-time checks for {comment_text(spec.file)} "
             f"(spec {spec.digest()}), target {target.name}.",
             "-- Read-only. Run it after create_all.sql, e.g. from a scheduled job: each row "
             "is an assumption of the spec the data breaks now (alert on any row).",
             "-- Management metrics, not audited figures: a row here means some views "
             "leave rows out."]
    if catalog is not None:
        lines.append("-- Two statements. The first reads only the catalog: a column missing "
                     "or of another type than declared. When it returns a row, the second "
                     "(the data) may stop with the engine's own error.")
    lines += [f"-- {comment_text(line)}" for line in skipped]
    body = ([catalog.rstrip() + ";"] if catalog is not None else []) + [query.rstrip() + ";"]
    return "\n".join(lines) + "\n" + "\n\n".join(body) + "\n"


def write_checks(spec: Spec, path: str, target_name: str | None = None) -> str:
    """Write the checks query to ``path``: a new file, or one this function wrote before
    (its first line says so); never another file. Returns the text."""
    import os

    from .errors import OutputError

    text = checks_sql(spec, target_name)
    if os.path.exists(path):
        with open(path, encoding="utf-8", errors="replace") as handle:
            first = handle.readline()
        if " run-time checks for " not in first or not first.startswith("-- sqlgen "):
            raise OutputError(f"{path} exists and was not written by sqlgen checks; "
                              "it is left alone. Give another --out")
    tmp = f"{path}.sqlgen-tmp-{os.getpid()}"
    with open(tmp, "w", encoding="utf-8") as handle:
        handle.write(text)
    os.replace(tmp, path)
    return text
