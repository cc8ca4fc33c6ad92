"""sqlgen's own DuckDB views in the benchmark database, obtained through the library.

Each grain gets its own schema (``bench_month``, ``bench_week``) so both can exist at once.
Views that other work may not have added yet (cohorts, trailing windows, revenue) are looked
up in ``sqlgen.views.VIEWS``; a missing one is reported, not guessed.
"""

from __future__ import annotations

import textwrap

from sqlgen import compile_spec, parse_spec
from sqlgen.spec import KEYS_BY_PATH
from sqlgen.views import VIEWS_BY_NAME

OPTIONAL_VIEWS = ("cohort_retention", "trailing_activity", "revenue_accounting")
# Schemas of the further specs: growth_accounting at the other grains, trailing_activity with
# one window each, and revenue from the subscriptions table (run rate).
GRAIN_SCHEMAS = {"day": "bench_day", "quarter": "bench_quarter", "year": "bench_year"}
TRAILING_SCHEMAS = {7: "bench_t7", 28: "bench_month", 90: "bench_t90"}
SUBSCRIPTION_SCHEMA = "bench_subs"
# The floor of the segmented views: the one grouping of the events they need, by user,
# segment value (the kind event one; the kind user one comes from its own table) and month.
FLOOR_SEGMENTS = ("SELECT count(*) FROM "
                  "(SELECT DISTINCT user_id, platform, date_trunc('month', ts) FROM segment_events)")
TRAILING_DAYS = 28
# Revenue from the invoices table (charges shape: refunds are negative lines).
INVOICE_REVENUE = textwrap.dedent("""\
    revenue:
      shape: charges
      table: invoices
      customer: customer_id
      timestamp: invoiced_at
      amount: amount
      scale: 2
    """)


def available(name: str) -> bool:
    """Whether sqlgen currently has a view of that name."""
    return name in VIEWS_BY_NAME


def spec_text(grain: str, schema: str | None = None, trailing: int = TRAILING_DAYS) -> str:
    """A spec over bench's ``events`` table, enabling every view this sqlgen knows, with
    revenue from the ``invoices`` table (charges shape)."""
    text = textwrap.dedent(f"""\
        version: 1
        activity:
          table: events
          user: user_id
          timestamp: ts
        grain: {grain}
        """)
    text += _optional_sections(trailing)
    text += "output:\n  dialect: duckdb\n"
    if schema:
        text += f"  schema: {schema}\n"
    return text


def _optional_sections(trailing: int = TRAILING_DAYS) -> str:
    """Spec sections for optional views, written only when sqlgen knows their keys."""
    parts = []
    if "revenue.table" in KEYS_BY_PATH:
        parts.append(INVOICE_REVENUE)
    if "cohorts" in KEYS_BY_PATH:
        parts.append("cohorts: true\n")
    if "engagement" in KEYS_BY_PATH:
        parts.append("engagement: true\n")
    if "trailing_windows" in KEYS_BY_PATH:
        parts.append(f"trailing_windows: [{trailing}]\n")
    return "".join(parts)


SEGMENT_SCHEMA = "bench_segments"


def subscription_spec_text(schema: str = SUBSCRIPTION_SCHEMA) -> str:
    """A monthly revenue-only spec over the subscriptions table (run rate, billing interval
    per row), with revenue_cohorts."""
    return textwrap.dedent(f"""\
        version: 1
        revenue:
          shape: subscriptions
          table: subscriptions
          customer: customer_id
          start: started_at
          end: ended_at
          interval_column: billing
          amount: amount
          scale: 2
          measure: run_rate
          timestamp_type: date
        grain: month
        cohorts: true
        output:
          dialect: duckdb
          schema: {schema}
        """)


def segment_spec_text(schema: str = SEGMENT_SCHEMA) -> str:
    """A monthly spec over segment_events with one kind event segment (platform, ten values)
    and one kind user segment from a table (channel, ten values and NULL) that also splits
    revenue (customer_key: the customer is the user), with cohorts, for every segmented view."""
    return textwrap.dedent(f"""\
        version: 1
        activity:
          table: segment_events
          user: user_id
          timestamp: ts
        grain: month
        segments:
          platform: {{kind: event, column: platform}}
          channel: {{kind: user, column: channel, table: segment_users, key: user_id,
                    customer_key: user_id}}
        {textwrap.indent(INVOICE_REVENUE, "        ").strip()}
        cohorts: true
        output:
          dialect: duckdb
          schema: {schema}
        """)


def create_views(con, grain: str, schema: str, text: str | None = None) -> list[str]:
    """Compile the spec for DuckDB and (re)create its views in ``schema``; return their names."""
    spec = parse_spec(text or spec_text(grain, schema), f"bench_{grain}.yml")
    con.execute(f"CREATE SCHEMA IF NOT EXISTS {schema}")
    created = []
    for compiled in compile_spec(spec, "duckdb"):
        for statement in compiled.statements:
            con.execute(statement)
        created.append(compiled.view.name)
    return created


def growth_summary(schema: str) -> str:
    """The summary columns of sqlgen's growth_accounting, as a query."""
    return (f"SELECT period_start, active_users, new_users, retained_users, resurrected_users, "
            f"churned_users FROM {schema}.growth_accounting")


def revenue_summary(schema: str, view: str = "revenue_accounting") -> str:
    """The summary columns of revenue_accounting (alternatives.REVENUE_COLUMNS), as a query."""
    return ("SELECT period_start, revenue, new_revenue, expansion_revenue, resurrected_revenue, "
            "contraction_revenue, churned_revenue, customers, churned_customers "
            f"FROM {schema}.{view}")


def full_scan(view: str) -> str:
    """A query forcing every column of every row of a view, returning one small row."""
    return f"SELECT count(*), sum(hash(COLUMNS(*))) FROM {view}"


def trailing_query(schema: str) -> str:
    """Trailing 28-day active users of a schema's trailing_activity as (day, trailing_users)
    rows."""
    return (f"SELECT day, active_users AS trailing_users FROM {schema}.trailing_activity "
            f"WHERE window_days = {TRAILING_DAYS}")
