"""Table-driven checks of the dialect traps, for every target (with or without an engine).

Each table gives, per target, the SQL fragment the generated views must contain, or the
error sqlgen must raise. Executed engines prove results in test_views.py; these pin the
spelling for the targets no engine runs here (bigquery, snowflake, redshift, trino, tsql).
"""

from __future__ import annotations

import re

import pytest
import sqlglot
from sqlglot import exp

from sqlgen import UnsupportedError, compile_spec, parse_spec
from sqlgen.dialects import TARGETS

BASE = """\
version: 1
activity:
  table: {table}
  user: user_id
  timestamp: occurred_at
  timestamp_type: {kind}
{extra}grain: {grain}
week_start: {week_start}
output:
  dialect: duckdb
"""


def sql_for(target: str, *, grain="month", week_start="monday", kind="timestamp",
            table="raw.app_events", extra="") -> dict[str, str]:
    spec = parse_spec(BASE.format(grain=grain, week_start=week_start, kind=kind, table=table,
                                  extra=extra), "t.yml")
    return {c.view.name: ";\n".join(c.statements) for c in compile_spec(spec, target)}


def flat(text: str) -> str:
    """One line, single spaces, no padding inside parentheses (pretty printing undone)."""
    text = re.sub(r"\s+", " ", text)
    return re.sub(r"\( ", "(", re.sub(r" \)", ")", text))


# Week start: the key is day arithmetic on an integer, so no session setting (@@DATEFIRST,
# WEEK_START, BigQuery's Sunday WEEK) can move it. Sunday start => offset 6 => + 699994.
WEEK_KEY = {
    "duckdb": "DATE_DIFF('DAY', CAST('1970-01-05' AS DATE), activity_date) + 699994",
    "postgres": "(CAST(activity_date AS DATE) - CAST('1970-01-05' AS DATE)) + 699994",
    "spark": "DATEDIFF(DAY, CAST('1970-01-05' AS DATE), activity_date) + 699994",
    "databricks": "DATEDIFF(DAY, CAST('1970-01-05' AS DATE), activity_date) + 699994",
    "clickhouse": "DATE_DIFF(DAY, CAST('1970-01-05' AS Nullable(DATE)), activity_date) + 699994",
    "mysql": "DATEDIFF(activity_date, CAST('1970-01-05' AS DATE)) + 699994",
    "sqlite": "CAST((JULIANDAY(activity_date) - JULIANDAY(DATE('1970-01-05'))) AS INTEGER) "
              "+ 699994",
    "bigquery": "MOD(DATE_DIFF(activity_date, CAST('1970-01-05' AS DATE), DAY) + 699994, 7)",
    "snowflake": "DATEDIFF(DAY, CAST('1970-01-05' AS DATE), activity_date) + 699994",
    "redshift": "DATEDIFF(DAY, CAST('1970-01-05' AS DATE), activity_date) + 699994",
    "trino": "DATE_DIFF('DAY', DATE_TRUNC('DAY', CAST('1970-01-05' AS DATE)), "
             "DATE_TRUNC('DAY', activity_date)) + 699994",
    "tsql": "DATEDIFF(DAY, CAST('1970-01-05' AS DATE), activity_date) + 699994",
}

# Ratios: floating point division by NULLIF(0), never integer or decimal division.
RATIO = {
    "duckdb": "CAST(new_count + resurrected_count AS DOUBLE) / NULLIF(churned_count, 0)",
    "postgres": "CAST(new_count + resurrected_count AS DOUBLE PRECISION) / "
                "NULLIF(churned_count, 0)",
    "spark": "CAST(new_count + resurrected_count AS DOUBLE) / NULLIF(churned_count, 0)",
    "databricks": "CAST(new_count + resurrected_count AS DOUBLE) / NULLIF(churned_count, 0)",
    "clickhouse": "CAST(new_count + resurrected_count AS Nullable(Float64)) / "
                  "nullIf(churned_count, 0)",
    "mysql": "CAST(new_count + resurrected_count AS DOUBLE) / NULLIF(churned_count, 0)",
    "sqlite": "CAST(new_count + resurrected_count AS REAL) / NULLIF(churned_count, 0)",
    "bigquery": "CAST(new_count + resurrected_count AS FLOAT64) / NULLIF(churned_count, 0)",
    "snowflake": "CAST(new_count + resurrected_count AS DOUBLE) / NULLIF(churned_count, 0)",
    "redshift": "CAST(new_count + resurrected_count AS DOUBLE PRECISION) / "
                "NULLIF(churned_count, 0)",
    "trino": "CAST(new_count + resurrected_count AS DOUBLE) / NULLIF(churned_count, 0)",
    "tsql": "CAST(new_count + resurrected_count AS FLOAT) / NULLIF(churned_count, 0)",
}

# Date arithmetic from the period key, built as a DateAdd node (never `+ INTERVAL` text,
# which SQLite and T-SQL reject).
MONTH_START = {
    "duckdb": "CAST(CAST('1970-01-01' AS DATE) + INTERVAL (calendar_key - 23640) MONTH AS DATE)",
    "postgres": "CAST(CAST('1970-01-01' AS DATE) + (INTERVAL '1 MONTH' * (calendar_key - "
                "23640)) AS DATE)",
    "spark": "CAST(ADD_MONTHS(CAST('1970-01-01' AS DATE), CAST(calendar_key - 23640 AS INT)) "
             "AS DATE)",
    "databricks": "CAST(DATEADD(MONTH, CAST(calendar_key - 23640 AS INT), CAST('1970-01-01' AS "
                  "DATE)) AS DATE)",
    "clickhouse": "CAST(DATE_ADD(MONTH, calendar_key - 23640, CAST('1970-01-01' AS "
                  "Nullable(DATE))) AS Nullable(DATE))",
    "mysql": "CAST(DATE_ADD(CAST('1970-01-01' AS DATE), INTERVAL (calendar_key - 23640) MONTH) "
             "AS DATE)",
    "sqlite": "DATE(DATE(DATE('1970-01-01'), (calendar_key - 23640) || ' MONTH'))",
    "bigquery": "CAST(DATE_ADD(CAST('1970-01-01' AS DATE), INTERVAL (calendar_key - 23640) "
                "MONTH) AS DATE)",
    "snowflake": "CAST(DATEADD(MONTH, calendar_key - 23640, CAST('1970-01-01' AS DATE)) AS DATE)",
    "redshift": "CAST(DATEADD(MONTH, calendar_key - 23640, CAST('1970-01-01' AS DATE)) AS DATE)",
    "trino": "CAST(DATE_ADD('MONTH', CAST(calendar_key - 23640 AS BIGINT), CAST('1970-01-01' "
             "AS DATE)) AS DATE)",
    "tsql": "CAST(DATEADD(MONTH, calendar_key - 23640, CAST('1970-01-01' AS DATE)) AS DATE)",
}

# Time zone: plain timestamps taken as UTC, converted to the reporting zone, independent of
# the session zone; an error where IANA names cannot be used.
ZONE = {
    "duckdb": "CAST(sqlgen_ts AT TIME ZONE 'UTC' AT TIME ZONE 'Asia/Kolkata' AS DATE)",
    "postgres": "CAST(sqlgen_ts AT TIME ZONE 'UTC' AT TIME ZONE 'Asia/Kolkata' AS DATE)",
    "spark": "CAST(CONVERT_TIMEZONE('UTC', 'Asia/Kolkata', sqlgen_ts) AS DATE)",
    "databricks": "CAST(CONVERT_TIMEZONE('UTC', 'Asia/Kolkata', sqlgen_ts) AS DATE)",
    "clickhouse": "CAST(toTimeZone(toDateTime64(toString(sqlgen_ts), 6, 'UTC'), 'Asia/Kolkata') "
                  "AS Nullable(DATE))",
    "mysql": "CAST(CONVERT_TZ(sqlgen_ts, '+00:00', 'Asia/Kolkata') AS DATE)",
    "sqlite": UnsupportedError,
    "bigquery": "CAST(DATETIME(TIMESTAMP(sqlgen_ts), 'Asia/Kolkata') AS DATE)",
    "snowflake": "CAST(CONVERT_TIMEZONE('UTC', 'Asia/Kolkata', sqlgen_ts) AS DATE)",
    "redshift": "CAST(CONVERT_TIMEZONE('UTC', 'Asia/Kolkata', sqlgen_ts) AS DATE)",
    "trino": "CAST(AT_TIMEZONE(WITH_TIMEZONE(sqlgen_ts, 'UTC'), 'Asia/Kolkata') AS DATE)",
    "tsql": UnsupportedError,
}

# Time zone of an instant (timestamptz): never read through the session zone. MySQL and
# Spark read a TIMESTAMP in the session zone, so they go through the epoch value
# (tests/test_session_zones.py runs both under several session zones).
_MYSQL_UTC = ("DATE_ADD(CAST('1970-01-01 00:00:00' AS DATETIME(6)), "
              "INTERVAL (UNIX_TIMESTAMP(sqlgen_ts) * 1000000) MICROSECOND)")
_SPARK_UTC = ("TIMESTAMPADD(MICROSECOND, UNIX_MICROS(sqlgen_ts), "
              "CAST('1970-01-01 00:00:00' AS TIMESTAMP_NTZ))")
INSTANT_ZONE = {
    "duckdb": "CAST(sqlgen_ts AT TIME ZONE 'Asia/Kolkata' AS DATE)",
    "postgres": "CAST(sqlgen_ts AT TIME ZONE 'Asia/Kolkata' AS DATE)",
    "spark": f"CAST(CONVERT_TIMEZONE('UTC', 'Asia/Kolkata', {_SPARK_UTC}) AS DATE)",
    "databricks": f"CAST(CONVERT_TIMEZONE('UTC', 'Asia/Kolkata', {_SPARK_UTC}) AS DATE)",
    "clickhouse": "CAST(toTimeZone(sqlgen_ts, 'Asia/Kolkata') AS Nullable(DATE))",
    "mysql": f"CAST(CONVERT_TZ({_MYSQL_UTC}, '+00:00', 'Asia/Kolkata') AS DATE)",
    "sqlite": UnsupportedError,
    "bigquery": "CAST(DATETIME(sqlgen_ts, 'Asia/Kolkata') AS DATE)",
    "snowflake": "CAST(CONVERT_TIMEZONE('Asia/Kolkata', sqlgen_ts) AS DATE)",
    "redshift": "CAST(CONVERT_TIMEZONE('Asia/Kolkata', sqlgen_ts) AS DATE)",
    "trino": "CAST(AT_TIMEZONE(sqlgen_ts, 'Asia/Kolkata') AS DATE)",
    "tsql": UnsupportedError,
}
# Without a zone an instant is read in UTC: the UTC wall clock, as above, where needed.
INSTANT_UTC = {"mysql": f"CAST({_MYSQL_UTC} AS DATE)", "spark": f"CAST({_SPARK_UTC} AS DATE)",
               "databricks": f"CAST({_SPARK_UTC} AS DATE)"}

# View DDL: SQLite has no CREATE OR REPLACE VIEW; T-SQL has CREATE OR ALTER VIEW;
# ClickHouse's CREATE OR REPLACE VIEW would replace a table of that name, DROP VIEW refuses.
DDL = {name: "CREATE OR REPLACE VIEW" for name in TARGETS}
DDL.update(sqlite="DROP VIEW IF EXISTS user_activity;\nCREATE VIEW user_activity AS",
           clickhouse="DROP VIEW IF EXISTS user_activity;\nCREATE VIEW user_activity AS",
           tsql="CREATE OR ALTER VIEW user_activity AS")

# A qualified table from the spec, quoted and case-folded as the target does.
QUALIFIED = {
    "duckdb": 'FROM "raw"."app_events"', "postgres": 'FROM "raw"."app_events"',
    "spark": "FROM `raw`.`app_events`", "databricks": "FROM `raw`.`app_events`",
    "clickhouse": 'FROM "raw"."app_events"', "mysql": "FROM `raw`.`app_events`",
    "sqlite": UnsupportedError, "bigquery": "FROM `raw`.`app_events`",
    "snowflake": 'FROM "RAW"."APP_EVENTS"', "redshift": 'FROM "raw"."app_events"',
    "trino": 'FROM "raw"."app_events"', "tsql": "FROM [raw].[app_events]",
}


@pytest.mark.parametrize("target", TARGETS)
def test_week_key_ignores_session_week_settings(target):
    text = flat(sql_for(target, grain="week", week_start="sunday",
                        table="app_events")["user_activity"])
    assert WEEK_KEY[target] in text
    for forbidden in ("DATE_TRUNC('WEEK", "WEEK(", "DATEFIRST", "DAYOFWEEK", "WEEKDAY",
                      "ISOWEEK", "DATEPART(WEEK", "DATE_TRUNC(WEEK"):
        assert forbidden not in text.upper()


@pytest.mark.parametrize("target", TARGETS)
def test_ratios_are_floating_and_null_safe(target):
    assert RATIO[target] in flat(sql_for(target, table="app_events")["growth_accounting"])


@pytest.mark.parametrize("target", TARGETS)
def test_period_start_is_date_arithmetic_as_nodes(target):
    text = flat(sql_for(target, table="app_events")["growth_accounting"])
    assert MONTH_START[target] in text
    if target in ("sqlite", "tsql"):
        assert "INTERVAL" not in text


@pytest.mark.parametrize("target", TARGETS)
def test_time_zone_conversion_or_error(target):
    extra = "  timezone: Asia/Kolkata\n"
    if ZONE[target] is UnsupportedError:
        with pytest.raises(UnsupportedError, match=rf"dialect '{target}' cannot generate "
                                                   r"activity.timezone: "):
            sql_for(target, extra=extra)
        return
    assert ZONE[target] in flat(sql_for(target, extra=extra,
                                        table="app_events")["user_activity"])


@pytest.mark.parametrize("target", TARGETS)
def test_instant_conversion_or_error(target):
    extra = "  timezone: Asia/Kolkata\n"
    if INSTANT_ZONE[target] is UnsupportedError:
        with pytest.raises(UnsupportedError, match=rf"dialect '{target}' cannot generate "):
            sql_for(target, kind="timestamptz", extra=extra)
        return
    assert INSTANT_ZONE[target] in flat(sql_for(target, kind="timestamptz", extra=extra,
                                                table="app_events")["user_activity"])
    if target in INSTANT_UTC:
        assert INSTANT_UTC[target] in flat(sql_for(target, kind="timestamptz",
                                                   table="app_events")["user_activity"])


@pytest.mark.parametrize("target", TARGETS)
def test_view_ddl(target):
    text = sql_for(target, table="app_events")["user_activity"]
    assert DDL[target] in text


@pytest.mark.parametrize("target", TARGETS)
def test_qualified_names(target):
    if QUALIFIED[target] is UnsupportedError:
        with pytest.raises(UnsupportedError, match=rf"dialect '{target}' cannot generate "
                                                   r"activity.table: "):
            sql_for(target)
        return
    assert QUALIFIED[target] in flat(sql_for(target)["user_activity"])


@pytest.mark.parametrize("target", TARGETS)
def test_keyword_and_exact_names_are_quoted(target):
    table = "'\"Raw Data\"'" if target == "sqlite" else "'\"Raw Data\".events'"
    spec = BASE.format(grain="month", week_start="monday", kind="timestamp", table=table,
                       extra="")
    spec = spec.replace("user: user_id", "user: user").replace("timestamp: occurred_at",
                                                               "timestamp: '\"When\"'")
    text = "\n".join(c.statements[-1] for c in compile_spec(parse_spec(spec), target))
    quote = {"spark": "`", "databricks": "`", "mysql": "`", "bigquery": "`"}.get(target, '"')
    if target == "tsql":
        assert "[user]" in text and "[When]" in text and "[Raw Data]" in text
    else:
        assert f"{quote}When{quote}" in text and f"{quote}Raw Data{quote}" in text
        user = "USER" if target == "snowflake" else "user"
        assert f"{quote}{user}{quote}" in text


@pytest.mark.parametrize("target", TARGETS)
def test_no_series_functions_or_recursion(target):
    """The calendar of periods is a cross join of digits: no GENERATE_SERIES (broken on
    several targets, leader-node only on Redshift) and no recursive CTE."""
    for grain in ("day", "week", "month"):
        text = sql_for(target, grain=grain, table="app_events")["growth_accounting"].upper()
        for forbidden in ("GENERATE_SERIES", "RECURSIVE", "UNNEST", "SEQUENCE(", "RANGE("):
            assert forbidden not in text


def _aliases_shadowing_inputs(select: exp.Select) -> set[str]:
    names = set()
    for projection in select.expressions:
        if isinstance(projection, exp.Alias) and not isinstance(projection.this, exp.Column):
            names.add(projection.alias.lower())
    used = {c.name.lower() for p in select.expressions for c in p.find_all(exp.Column)}
    for part in ("where", "group", "having"):
        node = select.args.get(part)
        if node is not None:
            used |= {c.name.lower() for c in node.find_all(exp.Column)}
    return names & used


@pytest.mark.parametrize("target", TARGETS)
@pytest.mark.parametrize("grain", ["day", "week", "month", "quarter", "year"])
def test_no_alias_shadows_an_input_column(target, grain):
    """ClickHouse resolves a SELECT alias before a same-named input column, so no
    expression may be aliased with a column name used in the same SELECT."""
    for name, text in sql_for(target, grain=grain, table="app_events").items():
        for tree in sqlglot.parse(text, read=TARGETS[target].sqlglot_dialect):
            for select in tree.find_all(exp.Select):
                assert not _aliases_shadowing_inputs(select), (name, select.sql()[:200])


# A where filter goes through the same rewrites as the templates: interval arithmetic on the
# clock and on literals (subtraction, WEEK as days, a unit inside the string) becomes a
# DateAdd spelled per target; NOW() is CURRENT_TIMESTAMP; T-SQL's CURRENT_DATE is a date,
# not GETDATE()'s datetime. Never `NOW() - INTERVAL '400' DAY` text (a syntax error on
# SQLite and T-SQL).
FILTER = ("occurred_at > now() - INTERVAL 400 DAY AND occurred_at >= CURRENT_DATE - "
          "INTERVAL '2 weeks' AND occurred_at < TIMESTAMP '2030-01-01 00:00:00' + "
          "INTERVAL 90 MINUTE")
FILTER_SQL = {
    "duckdb": (
        '"occurred_at" > (CURRENT_TIMESTAMP + INTERVAL (-400) DAY) AND '
        '"occurred_at" >= (CURRENT_DATE + INTERVAL (-14) DAY) AND '
        '"occurred_at" < (CAST(\'2030-01-01 00:00:00\' AS TIMESTAMP) + INTERVAL 90 MINUTE)'),
    "postgres": (
        '"occurred_at" > (CURRENT_TIMESTAMP + INTERVAL \'-400 DAY\') AND '
        '"occurred_at" >= (CURRENT_DATE + INTERVAL \'-14 DAY\') AND '
        '"occurred_at" < (CAST(\'2030-01-01 00:00:00\' AS TIMESTAMP) + INTERVAL \'90 MINUTE\')'),
    "spark": (
        "`occurred_at` > TIMESTAMPADD(DAY, -400, CURRENT_TIMESTAMP()) AND "
        "`occurred_at` >= DATE_ADD(CURRENT_DATE, -14) AND "
        "`occurred_at` < TIMESTAMPADD(MINUTE, 90, CAST('2030-01-01 00:00:00' AS TIMESTAMP_NTZ))"),
    "databricks": (
        "`occurred_at` > TIMESTAMPADD(DAY, -400, CURRENT_TIMESTAMP()) AND "
        "`occurred_at` >= DATEADD(DAY, -14, CURRENT_DATE) AND "
        "`occurred_at` < TIMESTAMPADD(MINUTE, 90, CAST('2030-01-01 00:00:00' AS TIMESTAMP_NTZ))"),
    "clickhouse": (
        '"occurred_at" > DATE_ADD(DAY, -400, CURRENT_TIMESTAMP()) AND '
        '"occurred_at" >= DATE_ADD(DAY, -14, CURRENT_DATE()) AND '
        '"occurred_at" < DATE_ADD(MINUTE, 90, '
        "CAST('2030-01-01 00:00:00' AS Nullable(DateTime)))"),
    "mysql": (
        "`occurred_at` > DATE_ADD(CURRENT_TIMESTAMP(), INTERVAL -400 DAY) AND "
        "`occurred_at` >= DATE_ADD(CURRENT_DATE, INTERVAL -14 DAY) AND "
        "`occurred_at` < DATE_ADD(CAST('2030-01-01 00:00:00' AS DATETIME), INTERVAL 90 MINUTE)"),
    "sqlite": (
        '"occurred_at" > DATETIME(CURRENT_TIMESTAMP, \'-400 DAY\') AND '
        '"occurred_at" >= DATE(CURRENT_DATE, \'-14 DAY\') AND '
        '"occurred_at" < DATETIME(DATETIME(\'2030-01-01 00:00:00\'), \'90 MINUTE\')'),
    "bigquery": (
        "`occurred_at` > TIMESTAMP_ADD(CURRENT_TIMESTAMP(), INTERVAL -400 DAY) AND "
        "`occurred_at` >= DATE_ADD(CURRENT_DATE, INTERVAL -14 DAY) AND "
        "`occurred_at` < DATETIME_ADD(CAST('2030-01-01 00:00:00' AS DATETIME), "
        "INTERVAL 90 MINUTE)"),
    "snowflake": (
        '"OCCURRED_AT" > DATEADD(DAY, -400, CURRENT_TIMESTAMP()) AND '
        '"OCCURRED_AT" >= DATEADD(DAY, -14, CURRENT_DATE) AND '
        '"OCCURRED_AT" < DATEADD(MINUTE, 90, CAST(\'2030-01-01 00:00:00\' AS TIMESTAMPNTZ))'),
    "redshift": (
        '"occurred_at" > DATEADD(DAY, -400, GETDATE()) AND '
        '"occurred_at" >= DATEADD(DAY, -14, CURRENT_DATE) AND '
        '"occurred_at" < DATEADD(MINUTE, 90, CAST(\'2030-01-01 00:00:00\' AS TIMESTAMP))'),
    "trino": (
        '"occurred_at" > DATE_ADD(\'DAY\', -400, CURRENT_TIMESTAMP) AND '
        '"occurred_at" >= DATE_ADD(\'DAY\', -14, CURRENT_DATE) AND '
        '"occurred_at" < DATE_ADD(\'MINUTE\', 90, CAST(\'2030-01-01 00:00:00\' AS TIMESTAMP))'),
    "tsql": (
        "[occurred_at] > DATEADD(DAY, -400, GETDATE()) AND "
        "[occurred_at] >= DATEADD(DAY, -14, CAST(GETDATE() AS DATE)) AND "
        "[occurred_at] < DATEADD(MINUTE, 90, CAST('2030-01-01 00:00:00' AS DATETIME2))"),
}


@pytest.mark.parametrize("target", TARGETS)
def test_where_filter_date_arithmetic(target):
    text = flat(sql_for(target, table="app_events", extra=f'  where: "{FILTER}"\n')
                ["user_activity"])
    assert FILTER_SQL[target] in text
    assert "NOW()" not in text.upper() and "INTERVAL '400'" not in text


# The run-time checks' test that an amount reads as a number: TRY_CAST where the target has
# it; SQLite's CAST reads 'ten' as 0 and MySQL's CAST too, so those test the stored type or
# the text; a target whose columns hold only their own type keeps a plain CAST.
CHECKS_SPEC = BASE.format(table="app_events", kind="timestamp", grain="month",
                          week_start="monday", extra="") + (
    "revenue:\n  table: charges\n  customer: account_id\n  timestamp: charged_at\n"
    "  amount: amount\n")
_NUMBER = "'^[-+]?([0-9]+[.]?[0-9]*|[.][0-9]+)([eE][-+]?[0-9]+)?$'"
AMOUNT_READS = {
    "duckdb": 'TRY_CAST("amount" AS DECIMAL(29, 2)) IS NULL',
    "postgres": 'CAST("amount" AS DECIMAL(29, 2)) IS NULL',
    "spark": "TRY_CAST(`amount` AS DECIMAL(29, 2)) IS NULL",
    "databricks": "TRY_CAST(`amount` AS DECIMAL(29, 2)) IS NULL",
    "clickhouse": 'CAST("amount" AS Nullable(Decimal(29, 2))) IS NULL',
    "mysql": f"CASE WHEN REGEXP_INSTR(CAST(`amount` AS CHAR), {_NUMBER}) > 0 "
             "THEN CAST(`amount` AS DECIMAL(29, 2)) END IS NULL",
    "sqlite": "CASE WHEN TYPEOF(\"amount\") IN ('integer', 'real') THEN \"amount\" END IS NULL",
    "bigquery": "SAFE_CAST(`amount` AS NUMERIC(29, 2)) IS NULL",
    "snowflake": 'CAST("AMOUNT" AS DECIMAL(29, 2)) IS NULL',
    "redshift": 'TRY_CAST("amount" AS DECIMAL(29, 2)) IS NULL',
    "trino": 'TRY_CAST("amount" AS DECIMAL(29, 2)) IS NULL',
    "tsql": "TRY_CAST([amount] AS NUMERIC(29, 2)) IS NULL",
}


@pytest.mark.parametrize("target", TARGETS)
def test_checks_read_an_amount_as_a_number(target):
    from sqlgen.checks import checks_sql

    text = flat(checks_sql(parse_spec(CHECKS_SPEC, "t.yml"), target))
    assert AMOUNT_READS[target] in text
    if target == "sqlite":  # SQLite has no timestamp type: text DATETIME() reads
        assert 'DATETIME("occurred_at") IS NULL' in text
