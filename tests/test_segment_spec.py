"""Broken segments: every problem at its file:line:col with its exact message, and the
typed model of a good spec."""

from __future__ import annotations

import pytest

from sqlgen import SpecError, parse_spec
from sqlgen.views import planned_views

GOOD = """\
version: 1
activity:
  table: raw.app_events
  user: user_id
  timestamp: occurred_at
segments:
  platform:
    kind: event
    column: platform
"""
USER = GOOD.replace("kind: event", "kind: user")

CASES = [
    ("unknown kind", GOOD.replace("kind: event", "kind: evnt"),
     ["s.yml:8:11: segments.platform.kind: 'evnt' is not one of event, user. "
      "Did you mean 'event'?"]),
    ("same name twice", GOOD + "  platform:\n    kind: user\n    column: plan\n",
     ["s.yml:10:3: segments.platform: key appears twice (first on line 7); keep one"]),
    ("name is a view column", GOOD.replace("  platform:\n", "  active_users:\n"),
     ["s.yml:7:3: segments.active_users: segment name 'active_users' is also a column of "
      "growth_accounting_by_segment; rename the segment"]),
    ("name is a view column, any case", GOOD.replace("  platform:\n", "  Segment_Value:\n"),
     ["s.yml:7:3: segments.Segment_Value: segment name 'Segment_Value' is also a column of "
      "growth_accounting_by_segment; rename the segment"]),
    ("key without table", GOOD + "    key: user_id\n",
     ["s.yml:10:5: segments.platform.key: key names the user key column of table; add table "
      "(e.g. table: app.users) or remove key"]),
    ("table without key", USER + "    table: app.users\n",
     ["s.yml:10:5: segments.platform.table: a segment table needs key, its user key column "
      "(e.g. key: user_id), or customer_key, its revenue customer column"]),
    ("event with a table", GOOD + "    table: app.users\n    key: user_id\n",
     ["s.yml:10:5: segments.platform.table: a kind: event segment reads the activity table; "
      "remove table or set kind: user"]),
    ("unknown key", GOOD + "    colum: x\n",
     ["s.yml:10:5: segments.platform.colum: unknown key. Did you mean 'column'? Allowed "
      "here: kind, column, table, key, customer_key"]),
    ("missing column", GOOD.replace("    column: platform\n", ""),
     ["s.yml:8:5: segments.platform.column: required key is missing from segments.platform; "
      "e.g. column: platform"]),
    ("name with a space", GOOD.replace("  platform:\n", "  'plat form':\n"),
     ["s.yml:7:3: segments.plat form: segment name 'plat form' must be letters, digits and _ "
      "(starting with a letter or _)"]),
    ("reserved name", GOOD.replace("  platform:\n", "  sqlgen_x:\n"),
     ["s.yml:7:3: segments.sqlgen_x: names starting with 'sqlgen_' are reserved"]),
    ("segment not a mapping", GOOD.replace("    kind: event\n    column: platform\n",
                                           "    event\n"),
     ["s.yml:8:5: segments.platform: expected a mapping with kind and column, e.g. {kind: "
      "event, column: platform}; got 'event'"]),
    ("segments a list", "version: 1\nactivity: {table: t, user: u, timestamp: ts}\n"
                        "segments: [a, b]\n",
     ["s.yml:3:11: segments: expected a mapping of segment names to their definitions, e.g. "
      "{platform: {kind: event, column: platform}}; got a list"]),
    ("customer_key without revenue",
     USER + "    table: app.users\n    key: user_id\n    customer_key: account_id\n",
     ["s.yml:12:19: segments.platform.customer_key: splits revenue_accounting_by_segment, and "
      "the spec has no revenue section; add one or remove customer_key"]),
    ("customer_key without table", USER + "    customer_key: account_id\n",
     ["s.yml:10:5: segments.platform.customer_key: customer_key names a column of table; add "
      "table or remove customer_key"]),
    ("injected column", GOOD.replace("column: platform", "column: 'x; DROP TABLE t'"),
     ["s.yml:9:13: segments.platform.column: 'x; DROP TABLE t' unexpected ';' at position 2; "
      "quote a name with special characters: '\"my name\"'"]),
    ("no activity", "version: 1\nrevenue: {table: c, customer: a, amount: m, timestamp: t}\n"
                    "segments:\n  p: {kind: event, column: p}\n",
     ["s.yml:4:3: segments: needs an activity section: these views count active users"]),
]


@pytest.mark.parametrize("text,expected", [pytest.param(t, e, id=n) for n, t, e in CASES])
def test_segment_mistakes(text, expected):
    with pytest.raises(SpecError) as caught:
        parse_spec(text, "s.yml")
    assert [str(p) for p in caught.value.problems] == expected


def test_good_segments_build_the_model_and_the_views():
    text = (GOOD + "  plan: {kind: user, column: plan}\n"
            "  channel: {kind: user, column: channel, table: app.users, key: id}\n"
            "cohorts: true\n")
    spec = parse_spec(text, "s.yml")
    assert [(s.name, s.kind, s.from_events) for s in spec.segments] == [
        ("platform", "event", True), ("plan", "user", True), ("channel", "user", False)]
    views = {v.name: v for v in planned_views(spec)}
    assert {"growth_accounting_by_segment", "user_states_by_segment",
            "cohort_retention_by_segment"} <= set(views)
    assert views["user_states_by_segment"].personal_data
    assert not views["growth_accounting_by_segment"].personal_data
    base = views["growth_accounting"].column_names
    assert views["growth_accounting_by_segment"].column_names == ("segment", "segment_value") + base


def test_specs_without_segments_keep_their_hash():
    """Adding the segments key changes no existing spec's hash (headers stay as they are)."""
    plain = GOOD.split("segments:")[0]
    assert parse_spec(plain, "s.yml").digest() == parse_spec(plain + "segments: {}\n",
                                                             "s.yml").digest()
    assert parse_spec(plain, "s.yml").digest() != parse_spec(GOOD, "s.yml").digest()


def test_a_customer_table_alone_splits_revenue_only():
    """A table with customer_key and no key splits revenue_accounting only, and so needs no
    activity section."""
    text = ("version: 1\nrevenue: {table: c, customer: a, amount: m, timestamp: t}\n"
            "segments:\n  tier: {kind: user, column: tier, table: accounts, "
            "customer_key: account_id}\n")
    names = [v.name for v in planned_views(parse_spec(text, "s.yml"))]
    assert "revenue_accounting_by_segment" in names
    assert "growth_accounting_by_segment" not in names


def test_a_qualified_segment_table_is_refused_on_sqlite_at_its_key():
    """Like any qualified table: a SQLite view cannot read another attached database
    (sqlgen.dialects' refusal), reported at the segment's table."""
    from sqlgen import UnsupportedError, compile_spec

    text = USER.replace("raw.app_events", "app_events") + "    table: app.users\n    key: id\n"
    with pytest.raises(UnsupportedError) as caught:
        compile_spec(parse_spec(text, "s.yml"), "sqlite")
    assert str(caught.value).startswith(
        "s.yml:10:12: segments.platform.table: dialect 'sqlite' cannot generate "
        "segments.platform.table: a SQLite view cannot read a table of another attached "
        "database")
