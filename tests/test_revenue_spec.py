"""The revenue section of a spec: exact messages for broken ones, the model for good ones."""

from __future__ import annotations

import pytest

from sqlgen import SpecError, parse_spec

CHARGES = """\
version: 1
revenue:
  table: billing.invoice_lines
  customer: account_id
  timestamp: invoiced_at
  amount: amount
grain: month
"""

SUBSCRIPTIONS = """\
version: 1
revenue:
  shape: subscriptions
  table: billing.subscriptions
  customer: account_id
  start: started_at
  end: ended_at
  amount: amount
  interval_column: billing_interval
grain: month
"""

CASES = [
    ("no source", "version: 1\ngrain: month\n",
     ["s.yml:1:1: activity: required key is missing from the spec; a spec needs activity, "
      "revenue or both"]),
    ("typo", CHARGES.replace("  amount: amount", "  amonut: amount"),
     ["s.yml:3:3: revenue.amount: required key is missing from revenue; e.g. amount: amount",
      "s.yml:6:3: revenue.amonut: unknown key. Did you mean 'amount'? Allowed here: shape, "
      "table, customer, timestamp, amount, scale, start, end, interval, interval_column, "
      "measure, timestamp_type, where, timezone, valid_from, valid_until"]),
    ("shape", CHARGES.replace("revenue:\n", "revenue:\n  shape: subscription\n"),
     ["s.yml:3:10: revenue.shape: 'subscription' is not one of charges, subscriptions. "
      "Did you mean 'subscriptions'?"]),
    ("timestamp on subscriptions", SUBSCRIPTIONS.replace("  start:", "  timestamp:"),
     ["s.yml:3:3: revenue.start: required key is missing from revenue for shape: "
      "subscriptions; e.g. start: started_at",
      "s.yml:6:3: revenue.timestamp: only used with shape: charges; remove it or set "
      "shape: charges"]),
    ("start on charges", CHARGES.replace("  amount: amount", "  amount: amount\n  start: s"),
     ["s.yml:7:3: revenue.start: only used with shape: subscriptions; remove it or set "
      "shape: subscriptions"]),
    ("two intervals", SUBSCRIPTIONS.replace("  interval_column", "  interval: year\n"
                                            "  interval_column"),
     ["s.yml:10:3: revenue.interval_column: give interval (one value for every row) or "
      "interval_column, not both"]),
    ("fixed interval", SUBSCRIPTIONS.replace("  interval_column: billing_interval",
                                             "  interval: yearly"),
     ["s.yml:9:13: revenue.interval: 'yearly' is not one of month, quarter, year. "
      "Did you mean 'year'?"]),
    ("measure on charges", CHARGES.replace("  amount: amount",
                                           "  amount: amount\n  measure: recognized"),
     ["s.yml:7:3: revenue.measure: only used with shape: subscriptions; remove it or set "
      "shape: subscriptions"]),
    ("measure spelling", SUBSCRIPTIONS.replace("grain:", "  measure: recognised\ngrain:"),
     ["s.yml:10:12: revenue.measure: 'recognised' is not one of run_rate, recognized. "
      "Did you mean 'recognized'?"]),
    ("scale", CHARGES.replace("  amount: amount", "  amount: amount\n  scale: 2.5"),
     ["s.yml:7:10: revenue.scale: expected a whole number of decimal places from 0 to 6, "
      "got 2.5"]),
    ("date with zone", CHARGES.replace("  amount: amount", "  amount: amount\n"
                                       "  timestamp_type: date\n  timezone: UTC"),
     ["s.yml:8:13: revenue.timezone: a date column has no time of day to convert; remove "
      "timezone or set timestamp_type: timestamp"]),
    ("subquery in where", CHARGES.replace("  amount: amount", "  amount: amount\n"
                                          "  where: \"currency IN (SELECT c FROM t)\""),
     ["s.yml:7:10: revenue.where: a subquery is not allowed in a filter; use a plain "
      "condition on the table's own columns, e.g. event_name <> 'push_received'"]),
    ("reserved customer", CHARGES.replace("customer: account_id", "customer: sqlgen_x"),
     ["s.yml:4:13: revenue.customer: names starting with 'sqlgen_' are reserved"]),
]


def problems(text: str) -> list[str]:
    with pytest.raises(SpecError) as info:
        parse_spec(text, "s.yml")
    return [str(p) for p in info.value.problems]


@pytest.mark.parametrize("name,text,expected", CASES, ids=[c[0] for c in CASES])
def test_broken_revenue_spec_messages(name, text, expected):
    assert problems(text) == expected


def test_charges_spec_model():
    spec = parse_spec(CHARGES.replace("  amount: amount", "  amount: amount\n"
                                      "  where: \"currency = 'EUR'\""), "s.yml")
    assert spec.activity is None
    revenue = spec.revenue
    assert (revenue.shape, revenue.table, revenue.customer, revenue.timestamp, revenue.amount,
            revenue.scale, revenue.where) == (
        "charges", (("billing", False), ("invoice_lines", False)), ("account_id", False),
        ("invoiced_at", False), ("amount", False), 2, "currency = 'EUR'")
    assert revenue.start is None and revenue.interval_column is None


def test_subscriptions_spec_model():
    revenue = parse_spec(SUBSCRIPTIONS, "s.yml").revenue
    assert (revenue.shape, revenue.start, revenue.end, revenue.interval_column,
            revenue.timestamp) == ("subscriptions", ("started_at", False), ("ended_at", False),
                                   ("billing_interval", False), None)


def test_subscriptions_measure():
    """Run rate by default; recognized on request; charges have no measure."""
    assert parse_spec(SUBSCRIPTIONS, "s.yml").revenue.measure == "run_rate"
    text = SUBSCRIPTIONS.replace("grain:", "  measure: recognized\ngrain:")
    assert parse_spec(text, "s.yml").revenue.measure == "recognized"
    assert parse_spec(CHARGES, "s.yml").revenue.measure is None


def test_charges_spec_hash_unchanged_by_measure():
    """The measure key came after specs were hashed. Charges specs and `measure: recognized`
    (what subscriptions meant before) keep the digest they had (the values below are
    CHARGES' and SUBSCRIPTIONS' digests before the key existed); the run-rate default
    changes a subscriptions spec's digest, since it changes its output."""
    assert parse_spec(CHARGES, "s.yml").digest() == "ac5e607ca8c1bbbd"
    text = SUBSCRIPTIONS.replace("grain:", "  measure: recognized\ngrain:")
    assert parse_spec(text, "s.yml").digest() == "b0386c1d420564c7"
    assert parse_spec(SUBSCRIPTIONS, "s.yml").digest() != "b0386c1d420564c7"


def test_activity_only_spec_hash_ignores_revenue(monkeypatch):
    """A spec without revenue hashes as if the revenue field did not exist (same headers)."""
    import sqlgen.spec as module

    text = ("version: 1\nactivity:\n  table: raw.app_events\n  user: user_id\n"
            "  timestamp: occurred_at\n")
    spec = parse_spec(text, "s.yml")
    assert spec.revenue is None
    before = spec.digest()
    real = module.asdict
    monkeypatch.setattr(module, "asdict",
                        lambda obj: {k: v for k, v in real(obj).items() if k != "revenue"})
    assert spec.digest() == before
