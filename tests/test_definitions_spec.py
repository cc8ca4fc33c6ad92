"""Definitions, first_seen and report_from in the spec: the model, the view names, the spec
hash of specs without them, and every refusal with its exact message at file:line:col."""

from __future__ import annotations

import datetime as dt

import pytest

from sqlgen import SpecError, parse_spec
from sqlgen.compiler import file_names, render_files

GOOD = """\
version: 1
activity:
  table: raw.app_events
  user: user_id
  timestamp: occurred_at
grain: month
"""
SEEN = GOOD.replace("  timestamp: occurred_at", """\
  timestamp: occurred_at
  first_seen:
    table: app.users
    user: user_id
    timestamp: signed_up_at""")


def problems(text: str) -> list[str]:
    with pytest.raises(SpecError) as info:
        parse_spec(text, "s.yml")
    return [str(p) for p in info.value.problems]


CASES = [
    ("same name but for case",
     GOOD + "definitions:\n  Buyers:\n    where: \"x = 1\"\n  buyers:\n    where: \"x = 2\"\n",
     ["s.yml:10:3: definitions.buyers: definition 'buyers' has the same name as definition "
      "'Buyers' (view names are compared without regard to case); rename one"]),
    ("same name",
     GOOD + "definitions:\n  b:\n    where: \"x = 1\"\n  b:\n    where: \"x = 2\"\n",
     ["s.yml:10:3: definitions.b: key appears twice (first on line 8); keep one"]),
    ("name not an identifier", GOOD + "definitions:\n  'my-def':\n    where: \"x = 1\"\n",
     ["s.yml:8:3: definitions: definition name 'my-def' must be letters, digits and _ "
      "(starting with a letter or _): it becomes part of view names"]),
    ("view names cut short", GOOD + "definitions:\n  " + "d" * 45 + ":\n    where: \"x = 1\"\n",
     [f"s.yml:8:3: definitions.{'d' * 45}: gives the view name {'d' * 45}_activity_source_"
      "summary (69 characters), longer than the 63 PostgreSQL keeps, so names could collide; "
      "use a shorter name"]),
    ("reserved name", GOOD + "definitions:\n  sqlgen_x:\n    where: \"x = 1\"\n",
     ["s.yml:8:3: definitions.sqlgen_x: names starting with 'sqlgen_' are reserved"]),
    ("not a mapping", GOOD + "definitions: [a, b]\n",
     ["s.yml:7:14: definitions: expected a mapping of definition names to activity keys, "
      "e.g. purchasers: {where: \"event_name = 'purchase'\"}"]),
    ("unknown key in a definition", GOOD + "definitions:\n  b:\n    wher: \"x = 1\"\n",
     ["s.yml:9:5: definitions.b.wher: unknown key. Did you mean 'where'? Allowed here: table, "
      "user, timestamp, timestamp_type, where, timezone, valid_from, valid_until, first_seen, "
      "report_from"]),
    ("bad where in a definition", GOOD + "definitions:\n  b:\n    where: \"count(*) > 1\"\n",
     ["s.yml:9:12: definitions.b.where: an aggregate function is not allowed in a filter: "
      "COUNT(); use a plain condition on the table's own columns, e.g. event_name <> "
      "'push_received'"]),
    ("nothing to take keys from", "version: 1\ndefinitions:\n  buyers:\n    table: t\n",
     ["s.yml:3:3: definitions.buyers.user: required key is missing from definitions.buyers "
      "(the spec has no activity section to take it from); e.g. user: user_id",
      "s.yml:3:3: definitions.buyers.timestamp: required key is missing from "
      "definitions.buyers (the spec has no activity section to take it from); e.g. "
      "timestamp: occurred_at"]),
    ("report_from not a date", GOOD + "report_from: soon\n",
     ["s.yml:7:14: report_from: 'soon' is not a date; write it as YYYY-MM-DD, e.g. 2015-01-01"]),
    ("report_from impossible date",
     GOOD.replace("  timestamp: occurred_at", "  timestamp: occurred_at\n  report_from: 2024-13-01"),
     ["s.yml:6:16: activity.report_from: '2024-13-01' is not a date; write it as YYYY-MM-DD, "
      "e.g. 2015-01-01"]),
    ("report_from a timestamp", GOOD + "report_from: 2024-01-01 10:00:00\n",
     ["s.yml:7:14: report_from: expected a date such as 2015-01-01, got the timestamp "
      "2024-01-01 10:00:00; write the date alone"]),
    ("report_from after the range", GOOD + "report_from: 2100-01-01\n",
     ["s.yml:7:14: report_from: 2100-01-01 is on or after valid_until 2100-01-01: every period "
      "would be left out; give an earlier date"]),
    ("report_from after a definition's range",
     GOOD + "definitions:\n  b:\n    valid_until: 2030-01-01\n    report_from: 2030-01-01\n",
     ["s.yml:10:18: definitions.b.report_from: 2030-01-01 is on or after valid_until "
      "2030-01-01 of definitions.b: every period would be left out; give an earlier date"]),
    ("first_seen without the user key", SEEN.replace("    user: user_id\n", ""),
     ["s.yml:7:5: activity.first_seen.user: required key is missing from activity.first_seen; "
      "e.g. user: user_id"]),
    ("first_seen without a table", SEEN.replace("    table: app.users\n", ""),
     ["s.yml:7:5: activity.first_seen.table: required key is missing from "
      "activity.first_seen; e.g. table: app.users"]),
]


@pytest.mark.parametrize("name,text,expected", CASES, ids=[c[0] for c in CASES])
def test_refusals(name, text, expected):
    assert problems(text) == expected


def test_definitions_take_keys_from_activity_but_where():
    text = (GOOD.replace("  timestamp: occurred_at",
                         "  timestamp: occurred_at\n  where: \"a = 1\"\n  timezone: UTC")
            + "report_from: 2024-01-01\ndefinitions:\n  everyone:\n  buyers:\n"
            "    table: shop.orders\n    where: \"b = 2\"\n    report_from: 2024-06-01\n")
    spec = parse_spec(text, "s.yml")
    everyone, buyers = (d.source for d in spec.definitions)
    assert everyone.where is None and everyone.timezone == "UTC"
    assert everyone.table == spec.activity.table
    assert everyone.report_from == spec.activity.report_from == dt.date(2024, 1, 1)
    assert buyers.table == (("shop", False), ("orders", False)) and buyers.where == "b = 2"
    assert buyers.report_from == dt.date(2024, 6, 1) and buyers.user == ("user_id", False)


def test_view_and_file_names_follow_the_rule():
    text = GOOD + "output:\n  prefix: ga_\ndefinitions:\n  buyers:\n    where: \"b = 2\"\n"
    spec = parse_spec(text, "s.yml")
    assert file_names(spec) == [
        "ga_activity_source_summary.sql", "ga_user_activity.sql", "ga_user_states.sql",
        "ga_growth_accounting.sql", "ga_buyers_activity_source_summary.sql",
        "ga_buyers_user_activity.sql", "ga_buyers_user_states.sql",
        "ga_buyers_growth_accounting.sql", "ga_create_all.sql"]
    files = render_files(spec)
    assert list(files) == file_names(spec)
    assert "CREATE OR REPLACE VIEW ga_buyers_growth_accounting AS" in files[
        "ga_buyers_growth_accounting.sql"]
    assert files["ga_create_all.sql"].count("CREATE OR REPLACE VIEW") == 8
    digest = spec.digest()
    assert all(f"(spec {digest})" in text for text in files.values())


def test_hash_of_specs_without_the_new_keys_is_unchanged():
    """The new keys enter the hash only when set: an older spec keeps its hash (the golden
    files pin the hash of every spec they were generated from)."""
    before = parse_spec(GOOD, "s.yml").digest()
    assert before == parse_spec(GOOD + "definitions: {}\n", "s.yml").digest()
    assert before != parse_spec(GOOD + "report_from: 2024-01-01\n", "s.yml").digest()
    assert before != parse_spec(SEEN, "s.yml").digest()
    assert before != parse_spec(GOOD + "definitions:\n  b:\n", "s.yml").digest()


def schema_problems(tmp_path, ddl: str, text: str) -> list[str]:
    """check_spec's problems for a spec against a DuckDB file made by ``ddl``."""
    import duckdb

    from sqlgen.schema import open_source
    from sqlgen.schemacheck import check_spec

    path = tmp_path / "w.duckdb"
    con = duckdb.connect(str(path))
    con.execute("CREATE SCHEMA IF NOT EXISTS raw; CREATE SCHEMA IF NOT EXISTS app; " + ddl)
    con.close()
    return [str(p) for p in check_spec(parse_spec(text, "s.yml"), open_source(str(path)))]


def test_schema_check_reads_first_seen_and_definitions(tmp_path):
    """validate --schema checks the users table and each definition's own keys, once each."""
    path = tmp_path / "w.duckdb"
    text = SEEN + ("definitions:\n  buyers:\n    table: raw.orders\n    timestamp: ordered_at\n"
                   "  openers:\n    where: \"event_nam = 'x'\"\n")
    found = schema_problems(
        tmp_path, "CREATE TABLE raw.app_events(user_id TEXT, occurred_at TIMESTAMP, "
        "event_name TEXT); CREATE TABLE app.users(uid TEXT, signed_up_at TIMESTAMPTZ); "
        "CREATE TABLE raw.orders(user_id TEXT, ordered_at DATE)", text)
    label = f"({path})"
    assert found == [
        f"s.yml:8:11: activity.first_seen.user: column 'user_id' is not in app.users {label}. "
        "Did you mean 'uid'?",
        "s.yml:9:16: activity.first_seen.timestamp: 'signed_up_at' is TIMESTAMP WITH TIME "
        "ZONE, but activity.first_seen.timestamp_type is timestamp (an instant read as a local "
        "time: the periods would move with the session's time zone); set timestamp_type: "
        "timestamptz",
        "s.yml:14:16: definitions.buyers.timestamp: 'ordered_at' is DATE, but "
        "activity.timestamp_type is timestamp (the declared type must match the column's); "
        "set timestamp_type: date",
        f"s.yml:16:12: definitions.openers.where: column 'event_nam' is not in raw.app_events "
        f"{label}. Did you mean 'event_name'?"]


def test_schema_check_compares_the_user_key_types(tmp_path):
    """A first-seen or segment table whose user key is a number while activity.user is text
    (or the reverse) is refused at its key; integer against BIGINT is fine."""
    tables = ("CREATE TABLE app.users(user_id BIGINT, signed_up_at TIMESTAMP); "
              "CREATE TABLE app.plans(uid INTEGER, plan TEXT); ")
    segmented = GOOD + ("segments:\n  plan:\n    kind: user\n    table: app.plans\n"
                        "    key: uid\n    column: plan\n")
    events = "CREATE TABLE raw.app_events(user_id TEXT, occurred_at TIMESTAMP)"
    found = schema_problems(tmp_path, tables + events, SEEN)
    (tmp_path / "w.duckdb").unlink()
    found += schema_problems(tmp_path, tables + events, segmented)
    tail = ("the join on the user key would compare text with numbers (no user matches, or an "
            "error, by engine); give both the same type, e.g. cast one of them in a view "
            "upstream")
    assert found == [
        f"s.yml:8:11: activity.first_seen.user: 'user_id' is BIGINT but activity.user "
        f"'user_id' is VARCHAR: {tail}",
        f"s.yml:11:10: segments.plan.key: 'uid' is INTEGER but activity.user 'user_id' is "
        f"VARCHAR: {tail}"]
    for text in (SEEN, segmented):
        (tmp_path / "w.duckdb").unlink()
        assert schema_problems(tmp_path, tables + events.replace("TEXT", "BIGINT"), text) == []


def test_create_all_and_checks_cover_every_definition():
    """create_all.sql creates every definition's views on DuckDB; the checks query reads
    each definition's source summary (rows with a NULL user, here)."""
    import duckdb

    from sqlgen.checks import checks_sql

    text = GOOD + "definitions:\n  buyers:\n    where: \"event_name = 'purchase'\"\n"
    spec = parse_spec(text, "s.yml")
    con = duckdb.connect()
    con.execute("CREATE SCHEMA raw; CREATE TABLE raw.app_events AS SELECT * FROM (VALUES "
                "('a', TIMESTAMP '2024-01-05 10:00', 'purchase'), "
                "(NULL, TIMESTAMP '2024-01-06 10:00', 'purchase'), "
                "('b', TIMESTAMP '2024-02-01 10:00', 'app_opened')) "
                "AS t(user_id, occurred_at, event_name)")
    con.execute(render_files(spec)["create_all.sql"])
    assert con.execute("SELECT COUNT(*) FROM buyers_growth_accounting").fetchone() == (1,)
    assert sorted(con.execute(checks_sql(spec)).fetchall()) == [
        ("activity", "null_user", 1), ("definitions.buyers", "null_user", 1)]


def test_a_definition_gap_names_the_definition_key():
    """A target that cannot express a definition's key refuses it at the definition's
    place and key, once per gap (not once per definition)."""
    from sqlgen import UnsupportedError, compile_spec

    text = ("version: 1\nactivity:\n  table: app_events\n  user: user_id\n  timestamp: ts\n"
            "definitions:\n  ny:\n    timezone: America/New_York\n  other:\n"
            "output:\n  dialect: sqlite\n")
    with pytest.raises(UnsupportedError) as info:
        compile_spec(parse_spec(text, "s.yml"))
    assert [str(gap) for gap in info.value.gaps] == [
        "s.yml:8:15: definitions.ny.timezone: dialect 'sqlite' cannot generate "
        "activity.timezone: SQLite has no time zone database; convert to local time before "
        "loading"]


def test_revenue_with_definitions_and_no_activity():
    """A spec may hold revenue and definitions only: the activity views are the
    definitions' (engagement is then allowed), revenue's keep their names."""
    text = ("version: 1\nrevenue:\n  table: billing.charges\n  customer: account_id\n"
            "  timestamp: charged_at\n  amount: amount\ndefinitions:\n  buyers:\n"
            "    table: shop.orders\n    user: customer_id\n    timestamp: ordered_at\n"
            "engagement: true\ncohorts: true\n")
    assert file_names(parse_spec(text, "s.yml")) == [
        "revenue_source_summary.sql", "customer_revenue.sql", "revenue_accounting.sql",
        "revenue_cohorts.sql", "buyers_activity_source_summary.sql", "buyers_user_activity.sql",
        "buyers_user_states.sql", "buyers_growth_accounting.sql", "buyers_cohort_retention.sql",
        "buyers_engagement_depth.sql", "create_all.sql"]
