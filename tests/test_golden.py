"""Golden files pin the generated SQL of every view, grain and target, byte for byte.

They prove stability, not correctness (test_views.py does that on real engines). After an
intended change, run `pytest tests/test_golden.py --update-golden` and review the diff
like code: it should touch exactly the files the change predicts.
"""

from __future__ import annotations

import functools
from pathlib import Path

import pytest
import sqlglot

from sqlgen import parse_spec, render_files
from sqlgen.compiler import render_targets
from sqlgen.errors import UnsupportedError
from sqlgen.dialects import TARGETS

GOLDEN = Path(__file__).parent / "golden"
GRAINS = {"day": ("day", "monday"), "week_monday": ("week", "monday"),
          "week_sunday": ("week", "sunday"), "month": ("month", "monday"),
          "quarter": ("quarter", "monday"), "year": ("year", "monday")}

SPEC = """\
version: 1
activity:
  table: raw.app_events
  user: user_id
  timestamp: occurred_at
  where: "event_name <> 'push_received'"
grain: {grain}
cohorts: true
engagement: true
trailing_windows: [7, 28]
week_start: {week_start}
output:
  dialect: duckdb
  schema: growth
"""

# Revenue: the subscriptions shape at every grain, pro rata (revenue_<grain>) and run rate
# (revenue_run_rate_<grain>), and charges at month grain.
REVENUE_SPEC = """\
version: 1
revenue:
  shape: subscriptions
  table: billing.subscriptions
  customer: account_id
  start: started_at
  end: ended_at
  amount: amount
  interval_column: billing_interval
  measure: recognized
  where: "currency = 'EUR'"
grain: {grain}
cohorts: true
week_start: {week_start}
output:
  dialect: duckdb
  schema: finance
"""
CHARGES_SPEC = REVENUE_SPEC.replace("  shape: subscriptions\n", "").replace(
    "billing.subscriptions", "billing.invoice_lines").replace(
    "  start: started_at\n  end: ended_at\n", "  timestamp: invoiced_at\n").replace(
    "  interval_column: billing_interval\n", "").replace("  measure: recognized\n", "")
RUN_RATE_SPEC = REVENUE_SPEC.replace("  measure: recognized\n", "")
# Definitions, first-seen dates and a reporting start, at month grain (the other grains'
# period keys are the base spec's; the engine suites run every grain).
DEFINITIONS_SPEC = SPEC.replace("  where: \"event_name <> 'push_received'\"\n", """\
  where: "event_name <> 'push_received'"
  first_seen:
    table: raw.users
    user: user_id
    timestamp: signed_up_at
    timestamp_type: date
report_from: 2023-01-01
definitions:
  purchasers:
    where: "event_name = 'purchase'"
""")
SPECS = {label: (SPEC, grain) for label, grain in GRAINS.items()}
# With segments too: the segmented views of each definition apply the first-seen rule.
SPECS["definitions_month"] = (DEFINITIONS_SPEC + """\
segments:
  platform:
    kind: event
    column: platform
  channel:
    kind: user
    column: channel
    table: raw.users
    key: user_id
""", GRAINS["month"])
SPECS.update({f"revenue_{label}": (REVENUE_SPEC, grain) for label, grain in GRAINS.items()})
SPECS.update({f"revenue_run_rate_{label}": (RUN_RATE_SPEC, grain)
              for label, grain in GRAINS.items()})
SPECS["revenue_charges_month"] = (CHARGES_SPEC, GRAINS["month"])
# Segments: one of each kind and source, and a customer table splitting revenue.
SEGMENT_SPEC = SPEC.replace("engagement: true\ntrailing_windows: [7, 28]\n", "") + """\
revenue:
  table: billing.invoice_lines
  customer: account_id
  timestamp: invoiced_at
  amount: amount
segments:
  platform:
    kind: event
    column: platform
  plan:
    kind: user
    column: plan
  channel:
    kind: user
    column: channel
    table: raw.users
    key: user_id
    customer_key: account_id
"""
SPECS["segments_month"] = (SEGMENT_SPEC, GRAINS["month"])
# Materialised: every activity view as a table, and incremental with a charges table (its
# tables computed again in full by refresh.sql).
SPECS["table_month"] = (SPEC.replace("  schema: growth\n", "  schema: growth\n  materialize: table\n"),
                        GRAINS["month"])
SPECS["incremental_month"] = (SPEC.replace(
    "  schema: growth\n", "  schema: growth\n  materialize: incremental\n  lookback: 1 week\n")
    + "revenue:\n  table: billing.invoice_lines\n  customer: account_id\n"
    "  timestamp: invoiced_at\n  amount: amount\n", GRAINS["month"])
# Incremental with segments of every kind: the per-(user, day, value) table they read.
SPECS["incremental_segments_month"] = (SEGMENT_SPEC.replace(
    "  schema: growth\n", "  schema: growth\n  materialize: incremental\n"), GRAINS["month"])


def refused(target: str, label: str) -> bool:
    """Whether the target refuses the spec (sqlgen build fails with the reason)."""
    return label.startswith("incremental") and "materialize: incremental" in TARGETS[
        target].unsupported


def flatten(text: str) -> str:
    """SQLite views cannot read other attached databases: one database, no schema."""
    for qualified in ("raw.", "billing."):
        text = text.replace(f"  table: {qualified}", "  table: ")
    return "\n".join(line for line in text.splitlines() if not line.startswith("  schema:"))


def generated(target: str, label: str) -> dict[str, str]:
    """The files of one golden spec for one target. Each spec is compiled once for every
    target that takes it (``render_targets`` parses each view once for all of them, as
    `sqlgen build --dialect all` does); SQLite gets its flattened copy of the spec."""
    return _compiled(label, target == "sqlite")[target]


@functools.lru_cache(maxsize=None)
def _compiled(label: str, flat: bool) -> dict[str, dict[str, str]]:
    text, (grain, week_start) = SPECS[label]
    if flat:
        text = flatten(text)
    spec = parse_spec(text.format(grain=grain, week_start=week_start), "golden.yml")
    names = ["sqlite"] if flat else [t for t in TARGETS if t != "sqlite"]
    return render_targets(spec, [t for t in names if not refused(t, label)])


def refused_by(target: str, label: str) -> None:
    """Compile the spec for a target that refuses it (raises its UnsupportedError)."""
    text, (grain, week_start) = SPECS[label]
    spec = parse_spec(text.format(grain=grain, week_start=week_start), "golden.yml")
    render_files(spec, target)


def _one_worker_per_spec(label: str):
    """Keep every target of one spec on one xdist worker, so it is compiled once."""
    return pytest.mark.xdist_group(f"golden-{label}")


@pytest.mark.parametrize("label", [pytest.param(label, marks=_one_worker_per_spec(label))
                                   for label in SPECS])
@pytest.mark.parametrize("target", TARGETS)
def test_golden(target, label, request):
    folder = GOLDEN / target / label
    if refused(target, label):
        with pytest.raises(UnsupportedError, match="output.materialize"):
            refused_by(target, label)
        assert not folder.exists()
        return
    files = generated(target, label)
    if request.config.getoption("--update-golden"):
        folder.mkdir(parents=True, exist_ok=True)
        for old in folder.glob("*.sql"):
            if old.name not in files:
                old.unlink()
        for name, text in files.items():
            (folder / name).write_text(text, encoding="utf-8")
    on_disk = sorted(p.name for p in folder.glob("*.sql"))
    assert on_disk == sorted(files), "run pytest --update-golden and review the diff"
    for name, text in files.items():
        assert (folder / name).read_text(encoding="utf-8") == text, (
            f"{folder / name} differs; run pytest --update-golden and review the diff")
    # Every statement reads back in its own dialect (sqlglot's parser for that dialect).
    dialect = TARGETS[target].sqlglot_dialect
    for name, text in files.items():
        for statement in sqlglot.parse(text, read=dialect):
            assert statement is not None, f"{folder / name}: an empty statement"


# The run-time checks file (sqlgen checks): both statements, first-seen and revenue columns.
CHECKS_SPEC = DEFINITIONS_SPEC.replace("definitions:\n  purchasers:\n    where: \"event_name = "
                                       "'purchase'\"\n", "") + (
    "revenue:\n  table: billing.invoice_lines\n  customer: account_id\n"
    "  timestamp: invoiced_at\n  amount: amount\n")


@pytest.mark.parametrize("target", TARGETS)
def test_golden_checks(target, request):
    from sqlgen.checks import FILE_NAME, checks_sql

    text = CHECKS_SPEC if target != "sqlite" else flatten(CHECKS_SPEC)
    spec = parse_spec(text.format(grain="month", week_start="monday"), "golden.yml")
    made = checks_sql(spec, target)
    path = GOLDEN / target / "checks" / FILE_NAME
    if request.config.getoption("--update-golden"):
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(made, encoding="utf-8")
    assert path.read_text(encoding="utf-8") == made, (
        f"{path} differs; run pytest --update-golden and review the diff")
    for statement in sqlglot.parse(made, read=TARGETS[target].sqlglot_dialect):
        assert statement is not None
