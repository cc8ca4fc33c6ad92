"""Broken specs: every problem reported at once, as file:line:col: key: message."""

from __future__ import annotations

import pytest

from sqlgen import SpecError, parse_spec

GOOD = """\
version: 1
activity:
  table: raw.app_events
  user: user_id
  timestamp: occurred_at
grain: month
"""

CASES = [
    ("grain: wek", GOOD.replace("grain: month", "grain: wek"),
     ["s.yml:6:8: grain: 'wek' is not one of day, week, month, quarter, year. "
      "Did you mean 'week'?"]),
    ("unknown keys", GOOD.replace("  user:", "  usr:") + "outptu:\n  dialect: duckdb\n",
     ["s.yml:3:3: activity.user: required key is missing from activity; e.g. user: user_id",
      "s.yml:4:3: activity.usr: unknown key. Did you mean 'user'? Allowed here: table, user, "
      "timestamp, timestamp_type, where, timezone, valid_from, valid_until, first_seen, "
      "report_from",
      "s.yml:7:1: outptu: unknown key. Did you mean 'output'? Allowed here: version, "
      "activity, definitions, report_from, revenue, grain, week_start, output, cohorts, "
      "engagement, trailing_windows, segments, allow_functions"]),
    ("dialect", GOOD + "output:\n  dialect: snowflak\n",
     ["s.yml:8:12: output.dialect: 'snowflak' is not one of duckdb, postgres, spark, "
      "databricks, clickhouse, mysql, sqlite, bigquery, snowflake, redshift, trino, tsql. "
      "Did you mean 'snowflake'?"]),
    ("time zone", GOOD.replace("grain: month", "grain: month").replace(
        "  timestamp: occurred_at", "  timestamp: occurred_at\n  timezone: America/New_Yrok"),
     ["s.yml:6:13: activity.timezone: 'America/New_Yrok' is not an IANA time zone name. "
      "Did you mean 'America/New_York'?"]),
    ("injected table", GOOD.replace("raw.app_events", "'t; DROP TABLE x'"),
     ["s.yml:3:10: activity.table: 't; DROP TABLE x' unexpected ';' at position 2; quote a "
      "name with special characters: '\"my name\"'"]),
    ("version", GOOD.replace("version: 1", "version: 2"),
     ["s.yml:1:10: version: expected 1 (the only spec version), got 2"]),
    ("alias bomb", "a: &x [1, 2]\nb: [*x, *x]\n" + GOOD,
     ["s.yml:1:4: YAML anchors and aliases are not allowed in a spec"]),
    ("python tag", GOOD.replace("grain: month", "grain: !!python/object:os.system month"),
     ["s.yml:6:8: grain: YAML tag 'tag:yaml.org,2002:python/object:os.system' is not allowed; "
      "write plain values"]),
    ("bad yaml", "version: 1\nactivity:\n  table: t\n   user: u\n",
     ["s.yml:4:8: not valid YAML: mapping values are not allowed here"]),
    ("empty", "", ["s.yml:1:1: the spec is empty"]),
    ("not a mapping", "- 1\n- 2\n", ["s.yml:1:1: the spec must be a mapping of keys"]),
    ("date with zone", GOOD.replace("  timestamp: occurred_at", "  timestamp: occurred_at\n"
                                    "  timestamp_type: date\n  timezone: UTC"),
     ["s.yml:7:13: activity.timezone: a date column has no time of day to convert; remove "
      "timezone or set timestamp_type: timestamp"]),
    ("reserved name", GOOD.replace("user: user_id", "user: sqlgen_user"),
     ["s.yml:4:9: activity.user: names starting with 'sqlgen_' are reserved"]),
    ("prefix", GOOD + "output:\n  prefix: 'ga-'\n",
     ["s.yml:8:11: output.prefix: 'ga-' must be letters, digits and _ (starting with a letter "
      "or _)"]),
    ("week start", GOOD + "week_start: sundy\n",
     ["s.yml:7:13: week_start: 'sundy' is not one of monday, tuesday, wednesday, thursday, "
      "friday, saturday, sunday. Did you mean 'sunday'?"]),
    ("duplicate key", GOOD + "grain: week\n",
     ["s.yml:7:1: grain: key appears twice (first on line 6); keep one"]),
]

FILTER_CASES = [
    ("a = 1; DROP TABLE t", "must be a single expression, not several statements"),
    ("x IN (SELECT id FROM admins)", "a subquery is not allowed in a filter; use a plain "
     "condition on the table's own columns, e.g. event_name <> 'push_received'"),
    ("a = 1 -- AND b = 2", "comments are not allowed in a filter; remove the -- , # or /* */ "
     "part"),
    ("a /* ; DROP */ = 1", "comments are not allowed in a filter; remove the -- , # or /* */ "
     "part"),
    ("count(*) > 1", "an aggregate function is not allowed in a filter: COUNT(); use a plain "
     "condition on the table's own columns, e.g. event_name <> 'push_received'"),
    ("other.a = 1", "column other.a names a table; write the column alone"),
    ("42", "must be a condition (true or false for each row), e.g. event_name <> "
     "'push_received'"),
]


def problems(text: str) -> list[str]:
    with pytest.raises(SpecError) as info:
        parse_spec(text, "s.yml")
    return [str(p) for p in info.value.problems]


@pytest.mark.parametrize("name,text,expected", CASES, ids=[c[0] for c in CASES])
def test_broken_spec_messages(name, text, expected):
    assert problems(text) == expected


@pytest.mark.parametrize("condition,message", FILTER_CASES)
def test_where_is_one_condition(condition, message):
    text = GOOD.replace("  timestamp: occurred_at",
                        f"  timestamp: occurred_at\n  where: \"{condition}\"")
    (found,) = problems(text)
    assert found == f"s.yml:6:10: activity.where: {message}"


def test_every_problem_at_once():
    text = GOOD.replace("grain: month", "grain: wek") + "week_start: sundy\noutput:\n  x: 1\n"
    assert len(problems(text)) == 3


def test_keyword_and_quoted_names_are_accepted():
    text = GOOD.replace("user: user_id", "user: user").replace(
        "timestamp: occurred_at", "timestamp: '\"Occurred At\"'")
    spec = parse_spec(text, "s.yml")
    assert spec.activity.user == ("user", False)
    assert spec.activity.timestamp == ("Occurred At", True)


def test_oversized_spec_is_refused(tmp_path):
    from sqlgen import load_spec

    path = tmp_path / "big.yml"
    path.write_text(GOOD + "#" * 300_000 + "\n")
    with pytest.raises(SpecError, match="larger than"):
        load_spec(str(path))
