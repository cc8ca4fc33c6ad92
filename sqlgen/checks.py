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
from .compiler import _generate, compile_query
from .dialects import TARGETS
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


def checks_sql(spec: Spec, target_name: str | None = None) -> str:
    """The text of the read-only checks query for ``target_name`` (default: the spec's)."""
    target = TARGETS[target_name or spec.output.dialect]
    query = _generate(compile_query(CHECKS, spec, target), target, "sqlgen_checks")
    lines = [f"-- sqlgen {__version__}: run-time checks for {comment_text(spec.file)} "
             f"(spec {spec.digest()}), target {target.name}.",
             "-- Read-only. Run it after create_all.sql, e.g. from a scheduled job: each row "
             "is an assumption of the spec the data breaks now (alert on any row).",
             "-- Management metrics, not audited figures: a row here means some views "
             "leave rows out."]
    return "\n".join(lines) + "\n" + query.rstrip() + ";\n"


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
