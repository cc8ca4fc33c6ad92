"""Every target dialect in one table, and the AST rewrites that make SQL right for each.

Templates are written once in the source dialect (DuckDB). Everything a target spells
differently lives here, as a function from a sqlglot tree to a sqlglot tree. A rewrite
changes the tree it is given in place (``transform(..., copy=False)``) and returns the new
root: pass it a tree of your own (the compiler copies each view's parsed tree per target).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass, field
from typing import Callable

from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from sqlglot import exp
    from sqlglot.dialects.dialect import Dialect


class _Expressions:
    """sqlglot's ``exp`` module, imported at its first use. The table of targets is read
    without sqlglot (the command line's dialect names, a ``--check`` the manifests answer,
    which imports no compiler): importing sqlglot costs ~0.2 s of every command."""

    def __getattr__(self, name: str):
        from sqlglot import exp as module

        globals()["exp"] = module
        return getattr(module, name)


if not TYPE_CHECKING:
    exp = _Expressions()

SOURCE_DIALECT = "duckdb"

Transform = Callable[["exp.Expression"], "exp.Expression"]


@dataclass(frozen=True)
class Target:
    """One target: its sqlglot dialect, the engine that runs it in the tests, its rewrites."""

    name: str
    sqlglot_dialect: str
    engine: str | None
    view_ddl: str  # 'replace' | 'drop_create' | 'create_or_alter'
    transforms: tuple[Transform, ...] = ()
    ddl_note: str = ""
    unsupported: dict[str, str] = field(default_factory=dict)  # feature -> reason
    executed: tuple[str, ...] | None = None  # features its engine runs in the tests; None: all
    # Why create_all.sql cannot run as one transaction here; "" when its DDL is
    # transactional, so create_all.sql is wrapped in one and a failed run changes nothing.
    no_ddl_transaction: str = ""
    transaction_note: str = ""  # what the client must do for the transaction to hold
    # Whether CREATE SCHEMA takes output.schema's catalog part; where not, the schema is
    # created in the database the script runs in (the one the views' catalog must name).
    schema_catalog: bool = True
    # T-SQL: CREATE VIEW must begin a batch, and an error does not end a transaction unless
    # XACT_ABORT is on. create_all.sql then runs each statement through sp_executesql
    # in one batch.
    exec_batch: bool = False
    # Operations of a where filter (filter_feature names) it cannot express -> reason
    filter_gaps: dict[str, str] = field(default_factory=dict)
    column_types: str = ""  # which column types the spec's timestamp_type values mean here
    # `output.materialize: table`: what follows CREATE TABLE <name> in the target's own
    # spelling, before AS <query> ("" when the target's default table is right).
    table_form: str = ""
    # refresh.sql's first statement in its transaction, where the default isolation gives
    # each statement its own snapshot of the source (its steps must see one): "" elsewhere.
    snapshot_statement: str = ""
    # refresh.sql holds only inserts, updates and deletes. None: it is one transaction
    # exactly where create_all.sql is (no_ddl_transaction decides); a text: one
    # transaction here even though the DDL is not, and what must hold for it to be.
    refresh_transaction: str | None = None
    # refresh.sql's state table, which it UPDATEs: its CREATE TABLE form where that differs
    # from table_form ("" where it does not).
    state_table_form: str = ""
    # Where the tables refresh.sql writes have neither DELETE nor UPDATE: their CREATE
    # TABLE form, with dynamic partition overwrite (materialize.overwrite_form); each is
    # partitioned by materialize.partition_column. "" where refresh.sql deletes and updates.
    partition_overwrite: str = ""

    def dialect(self) -> Dialect:
        return _dialect(self.sqlglot_dialect)


@functools.lru_cache(maxsize=None)
def _dialect(name: str) -> Dialect:
    """One sqlglot Dialect instance per name: making one costs ~15 ms (it builds its
    tokenizer and settings), and ``spec_identifiers`` asked for one per target per filter
    check and per compile; dialect instances hold settings only, never state of a run."""
    from sqlglot.dialects.dialect import Dialect

    return Dialect.get_or_raise(name)


def _fn(name: str, *args: exp.Expression) -> exp.Anonymous:
    """A function call the target is known to have, spelled exactly."""
    return exp.Anonymous(this=name, expressions=list(args))


def _is_utc(zone: exp.Expression | None) -> bool:
    return isinstance(zone, exp.Literal) and zone.this.upper() == "UTC"


def lower_time_zones(tree: exp.Expression) -> exp.Expression:
    """Turn the template's ``AT TIME ZONE`` chains into ConvertTimezone nodes.

    ``(ts AT TIME ZONE 'UTC') AT TIME ZONE z`` (a zone-less timestamp read as UTC) becomes
    ConvertTimezone(source_tz='UTC', target_tz=z); ``ts AT TIME ZONE z`` (an instant) becomes
    ConvertTimezone(target_tz=z). Each target then spells the conversion its own way.
    """
    def rewrite(node: exp.Expression) -> exp.Expression:
        if not isinstance(node, exp.AtTimeZone):
            return node
        inner = node.this.unnest() if isinstance(node.this, exp.Paren) else node.this
        if isinstance(inner, exp.AtTimeZone) and _is_utc(inner.args.get("zone")):
            return exp.ConvertTimezone(source_tz=inner.args["zone"], target_tz=node.args["zone"],
                                       timestamp=inner.this)
        if isinstance(inner, exp.ConvertTimezone) and _is_utc(inner.args.get("target_tz")) \
                and inner.args.get("source_tz") is None:
            return exp.ConvertTimezone(source_tz=inner.args["target_tz"],
                                       target_tz=node.args["zone"], timestamp=inner.args["timestamp"])
        return exp.ConvertTimezone(target_tz=node.args["zone"], timestamp=node.this)
    return tree.transform(rewrite, copy=False)


def _zone_rewrite(spell: Callable[[exp.Expression, exp.Expression | None, exp.Expression],
                                  exp.Expression]) -> Transform:
    """A transform spelling every ConvertTimezone(ts, source or None, target) for one target."""
    def rewrite(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.ConvertTimezone):
            return spell(node.args["timestamp"], node.args.get("source_tz"), node.args["target_tz"])
        return node
    return lambda tree: tree.transform(rewrite, copy=False)


def _zones_at_time_zone(ts, source, target):
    """Postgres, DuckDB: ``timestamp AT TIME ZONE 'UTC'`` is an instant; ``AT TIME ZONE z`` of
    an instant is z's wall clock."""
    if source is not None:
        ts = exp.AtTimeZone(this=ts, zone=source)
    return exp.AtTimeZone(this=ts, zone=target)


def _zones_spark(ts, source, target):
    """Spark: ``convert_timezone('UTC', z, ts)`` of a zone-less timestamp; an instant is first
    made a UTC wall clock from its epoch microseconds (see ``_utc_wall_clock_spark``)."""
    if source is None:
        ts, source = _utc_wall_clock_spark(ts), exp.Literal.string("UTC")
    if _is_utc(target):
        return ts
    return _fn("CONVERT_TIMEZONE", source, target, ts)


def _utc_wall_clock_spark(ts: exp.Expression) -> exp.Expression:
    """Spark: the UTC wall clock (TIMESTAMP_NTZ) of an instant, whatever the session zone.

    ``convert_timezone(z, ts)`` of a TIMESTAMP is not: it reads ts as a wall clock of the
    session zone, and a permanent view takes that zone from the reading session while its
    ``current_timezone()`` is the one saved with the view (a view made under UTC and read
    under 'Asia/Kolkata' moved 23:30 UTC to the next day). ``unix_micros(ts)`` is the
    instant itself; added to the NTZ epoch it is the UTC wall clock.
    """
    epoch = exp.Cast(this=exp.Literal.string("1970-01-01 00:00:00"),
                     to=exp.DataType.build("TIMESTAMP_NTZ", dialect="spark"))
    return _fn("TIMESTAMPADD", exp.var("MICROSECOND"), _fn("UNIX_MICROS", ts), epoch)


def _zones_snowflake(ts, source, target):
    """Snowflake, Redshift: ``convert_timezone(z, ts)`` of an instant,
    ``convert_timezone('UTC', z, ts)`` of a zone-less timestamp; neither depends on the
    session zone."""
    return _fn("CONVERT_TIMEZONE", *([source] if source is not None else []), target, ts)


def _zones_clickhouse(ts, source, target):
    """ClickHouse: a DateTime is an instant; a zone-less value is re-read as UTC text first."""
    if source is not None:
        ts = _fn("toDateTime64", _fn("toString", ts), exp.Literal.number(6), source)
    return _fn("toTimeZone", ts, target)


def _zones_mysql(ts, source, target):
    """MySQL/MariaDB: an instant is a ``TIMESTAMP`` column, a zone-less value a ``DATETIME``.

    A query reads a TIMESTAMP in the session's ``time_zone``, so an instant is first turned
    into its UTC wall clock from the epoch value the column stores (see ``_utc_wall_clock``);
    a DATETIME read as UTC is that wall clock already. Then ``CONVERT_TZ`` from '+00:00' to
    the reporting zone (named zones need the server's time zone tables loaded).
    """
    if source is None:
        ts = _utc_wall_clock(ts)
    if _is_utc(target):
        return ts
    return _fn("CONVERT_TZ", ts, exp.Literal.string("+00:00"), target)


def _utc_wall_clock(ts: exp.Expression) -> exp.Expression:
    """MySQL/MariaDB: the UTC wall clock of a TIMESTAMP, whatever the session's time_zone.

    ``UNIX_TIMESTAMP(ts)`` of a TIMESTAMP column is the stored epoch value, not a reading
    in the session zone (a DECIMAL with the microseconds of a TIMESTAMP(6)); added to the
    epoch as microseconds it gives the UTC wall clock. ``FROM_UNIXTIME`` would not: it
    answers in the session zone (``SET time_zone = '+05:30'``: ``FROM_UNIXTIME(0)`` is
    '1970-01-01 05:30:00').
    """
    epoch = exp.Cast(this=exp.Literal.string("1970-01-01 00:00:00"),
                     to=exp.DataType.build("DATETIME(6)", dialect="mysql"))
    micros = exp.Mul(this=_fn("UNIX_TIMESTAMP", ts), expression=exp.Literal.number(1000000))
    return exp.DateAdd(this=epoch, expression=micros, unit=exp.var("MICROSECOND"))


def _zones_bigquery(ts, source, target):
    """BigQuery: ``DATETIME(TIMESTAMP(dt), z)``; TIMESTAMP(datetime) reads it as UTC."""
    if source is not None:
        ts = _fn("TIMESTAMP", ts)
    return _fn("DATETIME", ts, target)


def _zones_trino(ts, source, target):
    """Trino: ``with_timezone(ts, 'UTC')`` attaches UTC to a zone-less timestamp."""
    if source is not None:
        ts = _fn("with_timezone", ts, source)
    return exp.AtTimeZone(this=ts, zone=target)


def _zones_utc_only(ts, source, target):
    """SQLite converts only to UTC (see ``unsupported``): DATE() of ISO text with an offset
    already gives the UTC date."""
    if _is_utc(target) and source is None:
        return ts
    return exp.AtTimeZone(this=ts, zone=target)


def _zones_tsql(ts, source, target):
    """T-SQL: ``datetimeoffset AT TIME ZONE 'UTC'`` (only 'UTC': zone names are Windows')."""
    return exp.AtTimeZone(this=ts, zone=target)


def sqlite_date_parts(tree: exp.Expression) -> exp.Expression:
    """SQLite has no EXTRACT: ``EXTRACT(YEAR FROM d)`` becomes ``CAST(STRFTIME('%Y', d) AS
    INTEGER)`` (sqlglot passes EXTRACT through unchanged, which SQLite rejects)."""
    formats = {"YEAR": "%Y", "MONTH": "%m", "DAY": "%d", "HOUR": "%H", "MINUTE": "%M",
               "SECOND": "%S"}

    def rewrite(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.Extract) and node.this.name.upper() in formats:
            text = _fn("STRFTIME", exp.Literal.string(formats[node.this.name.upper()]),
                       node.expression)
            return exp.Cast(this=text, to=exp.DataType.build("INTEGER"))
        return node
    return tree.transform(rewrite, copy=False)


def int_date_offsets(tree: exp.Expression) -> exp.Expression:
    """Spark: ``date_add(d, n)`` and ``add_months(d, n)`` take INT, and period keys are BIGINT
    (``date_add(DATE '1970-01-05', period_key)`` fails with DATATYPE_MISMATCH)."""
    def rewrite(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.DateAdd) and not node.expression.is_int:
            node.set("expression", exp.Cast(this=node.expression,
                                            to=exp.DataType.build("INT")))
        return node
    return tree.transform(rewrite, copy=False)


def constant_unions_as_values(tree: exp.Expression) -> exp.Expression:
    """Spark: a UNION ALL of one-literal SELECTs (the digits of the period calendar) becomes
    one VALUES list; Spark plans each branch as its own scan, ten per digit, which made the
    calendar the slowest part of growth_accounting on small data."""
    def leaves(node: exp.Expression) -> list[exp.Expression] | None:
        if isinstance(node, exp.Union) and not node.args.get("distinct"):
            left, right = leaves(node.this), leaves(node.expression)
            return None if left is None or right is None else left + right
        if isinstance(node, exp.Select) and not node.args.get("from_") \
                and len(node.expressions) == 1:
            value = node.expressions[0].unalias()
            return [value] if isinstance(value, exp.Literal) else None
        return None

    def rewrite(node: exp.Expression) -> exp.Expression:
        if not isinstance(node, exp.Union):
            return node
        found = leaves(node)
        if not found or len(found) < 3 or not node.this.find(exp.Alias):
            return node
        name = node.find(exp.Alias).alias
        rows = exp.values([(v.copy(),) for v in found], alias="sqlgen_values", columns=[name])
        select = exp.select(name).from_(rows)
        first = node
        while isinstance(first, exp.Union):
            first = first.this
        select.add_comments(first.comments)  # the step comment on the first branch
        return select
    return tree.transform(rewrite, copy=False)


_WHOLE_PARTS = frozenset({"YEAR", "QUARTER", "MONTH", "DAY", "DOW", "ISODOW", "DOY", "WEEK",
                          "ISOYEAR"})


def postgres_whole_extracts(tree: exp.Expression) -> exp.Expression:
    """PostgreSQL (14 on): EXTRACT returns NUMERIC, so the period keys built from it
    (year * 12 + month) were grouped, sorted and windowed as NUMERIC, slower than integers
    and spilling to disk sooner (bench/README.md, issue 15 findings). A part that is always
    a whole number is cast to INT; EPOCH and SECOND keep their fractions."""
    def rewrite(node: exp.Expression) -> exp.Expression:
        if (isinstance(node, exp.Extract) and node.this.name.upper() in _WHOLE_PARTS
                and not isinstance(node.parent, exp.Cast)):
            return exp.Cast(this=node, to=exp.DataType.build("INT"))
        return node
    return tree.transform(rewrite, copy=False)


def window_keys_nulls_default(tree: exp.Expression) -> exp.Expression:
    """MySQL, T-SQL, BigQuery: a window's ascending ORDER BY written in DuckDB carries DuckDB's
    NULLS LAST, which sqlglot cannot spell there ('NULLS LAST' translation not supported in
    window function SUM). Window keys in sqlgen's views are never NULL, so the target's own
    NULL order (NULLS FIRST for ascending) gives the same rows."""
    for window in tree.find_all(exp.Window):
        for ordered in window.find_all(exp.Ordered):
            if not ordered.args.get("desc"):
                ordered.set("nulls_first", True)
    return tree


_NO_IANA_SQLITE = "SQLite has no time zone database; convert to local time before loading"
_NO_QUALIFIED_SQLITE = ("a SQLite view cannot read a table of another attached database; keep "
                        "the source table and the views in the main database (no schema)")
# The Spark engine runs databricks SQL for the growth views and every option; the other
# views run there as spark SQL and are checked for databricks by golden files.
_DATABRICKS_EXECUTED = ("activity_source_summary", "user_activity", "user_states",
                        "growth_accounting", "grain: week", "activity.timezone",
                        "timestamp_type: timestamptz", "activity.where")
_NO_IANA_TSQL = ("T-SQL's AT TIME ZONE takes Windows zone names, not IANA names; store local "
                 "time or a datetimeoffset already in the reporting zone")


_NO_TX_MYSQL = ("every CREATE VIEW, DROP VIEW and CREATE DATABASE commits the open transaction "
               "implicitly (MySQL and MariaDB have no transactional DDL)")
_MYSQL_REFRESH_TX = ("its tables must use a transactional storage engine (InnoDB, the "
                     "default; MyISAM keeps each statement's changes)")
_NO_TX_CLICKHOUSE = "ClickHouse has no transactions for DDL: each statement applies on its own"
_NO_TX_SPARK = ("Spark SQL and Databricks SQL have no multi-statement transactions for CREATE "
                "VIEW: each statement applies on its own")
_NO_TX_BIGQUERY = ("BigQuery multi-statement transactions cannot hold CREATE VIEW or CREATE "
                   "SCHEMA: each DDL statement applies on its own")
_NO_TX_SNOWFLAKE = ("each DDL statement commits the open transaction and runs in its own "
                    "(Snowflake autocommits DDL)")
_NO_TX_TRINO = ("Trino runs DDL in a transaction only on some connectors; create_all.sql does "
                "not rely on it, so each statement applies on its own")

_SQLITE_BAIL = ("run it with `sqlite3 -bail` (or Python's executescript): without -bail the "
                "sqlite3 shell goes on after a failed statement and COMMIT keeps the rest")

_TSQL_BATCH = ("the file is one batch (no GO): each view runs through sp_executesql, and "
               "XACT_ABORT ON rolls the whole transaction back on an error")


def timestamp_offsets(spell: Callable[[exp.DateAdd, str], exp.Expression]) -> Transform:
    """A transform spelling every DateAdd of a timestamp (a filter's ``CURRENT_TIMESTAMP -
    INTERVAL 2 HOUR``) for one target; DateAdds of dates keep sqlglot's spelling."""
    def rewrite(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.DateAdd) and node.meta.get("sqlgen_operand") == "timestamp":
            return spell(node, node.unit.name.upper())
        return node
    return lambda tree: tree.transform(rewrite, copy=False)


def _offset_sqlite(node: exp.DateAdd, unit: str) -> exp.Expression:
    """SQLite: sqlglot spells every DateAdd ``DATE(x, '-2 HOUR')``, which drops the time of
    day; a timestamp needs ``DATETIME(x, '-2 HOUR')``."""
    amount = node.expression
    modifier = (exp.Literal.string(f"{amount.to_py()} {unit}") if amount.is_int
                else exp.DPipe(this=exp.paren(amount, copy=False),
                               expression=exp.Literal.string(f" {unit}")))
    return _fn("DATETIME", node.this, modifier)


def _offset_spark(node: exp.DateAdd, unit: str) -> exp.Expression:
    """Spark: sqlglot spells a DateAdd ``DATE_ADD(ts, n)``, which counts days whatever the
    unit and returns a DATE; ``TIMESTAMPADD(HOUR, n, ts)`` keeps both."""
    return _fn("TIMESTAMPADD", exp.var(unit), node.expression, node.this)


def _offset_bigquery(node: exp.DateAdd, unit: str) -> exp.Expression:
    """BigQuery: DATE_ADD takes a DATE only; CURRENT_TIMESTAMP() (a TIMESTAMP) needs
    TIMESTAMP_ADD, a TIMESTAMP '...' literal (a DATETIME there) DATETIME_ADD."""
    kind = exp.TimestampAdd if isinstance(node.this, exp.CurrentTimestamp) else exp.DatetimeAdd
    return kind(this=node.this, expression=node.expression, unit=exp.var(unit))


def tsql_current_date(tree: exp.Expression) -> exp.Expression:
    """T-SQL: sqlglot spells CURRENT_DATE as ``GETDATE()``, a datetime with the time of day
    (``ts >= CURRENT_DATE`` would drop today's morning); ``CAST(GETDATE() AS DATE)`` is the
    date."""
    def rewrite(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.CurrentDate):
            return exp.Cast(this=exp.CurrentTimestamp(), to=exp.DataType.build("DATE"))
        return node
    return tree.transform(rewrite, copy=False)


def _number_type(node: exp.Expression) -> bool:
    return isinstance(node, exp.TryCast) and node.to.is_type(*exp.DataType.REAL_TYPES)


def sqlite_readable_values(tree: exp.Expression) -> exp.Expression:
    """SQLite: sqlglot spells ``TRY_CAST(x AS DECIMAL(38, 2))`` (the run-time checks' test
    that a value reads as the declared type) ``CAST(x AS REAL(38, 2))``, which reads 'abc'
    as 0; in SQLite a number is a value stored as one: ``CASE WHEN TYPEOF(x) IN ('integer',
    'real') THEN x END``. A TIMESTAMPTZ reads as ``DATETIME(x)``, as a TIMESTAMP does."""
    def rewrite(node: exp.Expression) -> exp.Expression:
        if _number_type(node):
            kinds = [exp.Literal.string("integer"), exp.Literal.string("real")]
            stored = exp.In(this=_fn("TYPEOF", node.this.copy()), expressions=kinds)
            return exp.Case(ifs=[exp.If(this=stored, true=node.this)])
        if isinstance(node, exp.TryCast) and node.to.is_type("timestamptz"):
            return _fn("DATETIME", node.this)
        return node
    return tree.transform(rewrite, copy=False)


# A number as MySQL's CAST reads one in full (no REGEXP_LIKE: MariaDB has only REGEXP_INSTR).
_MYSQL_NUMBER = r"^[-+]?([0-9]+[.]?[0-9]*|[.][0-9]+)([eE][-+]?[0-9]+)?$"


def mysql_readable_numbers(tree: exp.Expression) -> exp.Expression:
    """MySQL and MariaDB: ``CAST('abc' AS DECIMAL(38, 2))`` is 0 with a warning, not NULL, so
    the run-time checks' ``TRY_CAST`` to a number becomes ``CASE WHEN REGEXP_INSTR(CAST(x AS
    CHAR), '<number>') > 0 THEN CAST(x AS DECIMAL(38, 2)) END``. (A date or timestamp
    CAST of unreadable text is already NULL.)"""
    def rewrite(node: exp.Expression) -> exp.Expression:
        if _number_type(node):
            text = exp.Cast(this=node.this.copy(), to=exp.DataType.build("CHAR"))
            found = exp.GT(this=_fn("REGEXP_INSTR", text, exp.Literal.string(_MYSQL_NUMBER)),
                           expression=exp.Literal.number(0))
            return exp.Case(ifs=[exp.If(this=found, true=exp.Cast(this=node.this,
                                                                   to=node.to))])
        return node
    return tree.transform(rewrite, copy=False)


def mysql_update_self_reads(tree: exp.Expression) -> exp.Expression:
    """MySQL: an UPDATE may not read the table it changes in a subquery (error 1093,
    ER_UPDATE_TABLE_USED) unless through a derived table that is materialised, not merged
    (MySQL reference manual, Restrictions on Subqueries, from memory). So in an UPDATE each
    subquery ``FROM t`` of that table becomes ``FROM (SELECT * FROM t) AS t`` with the
    ``NO_MERGE`` hint the manual names. MariaDB (10.3.2 on) accepts either form, and reads
    such a hint as a comment. refresh.sql's state updates are the statements concerned."""
    if not isinstance(tree, exp.Update) or not isinstance(tree.this, exp.Table):
        return tree
    changed = tree.this
    for select in list(tree.find_all(exp.Select)):
        source = select.args.get("from_")
        table = source.this if source else None
        if not isinstance(table, exp.Table) or table.sql() != changed.sql() or table.alias:
            continue
        name = changed.name
        inner = exp.select("*").from_(table.copy())
        table.replace(exp.Subquery(this=inner, alias=exp.TableAlias(
            this=exp.to_identifier(name))))
        hint = exp.Anonymous(this="NO_MERGE", expressions=[exp.column(name)])
        select.set("hint", exp.Hint(expressions=[hint]))
    return tree


_NO_TRY_CAST = ("sqlglot writes TRY_CAST as a plain CAST here, which fails on an unreadable "
                "value instead of giving NULL (SQLite and MySQL: silently 0)")
_NO_STARTS_WITH = "no STARTS_WITH function; write s LIKE 'prefix%'"
_NO_TRUNC = "no DATE_TRUNC function; compare with a date range instead"
_SQLITE_MONTHS = ("SQLite's date(d, '+1 MONTH') rolls 31 March over to 1 May; write the "
                  "interval in days")
_SQLITE_GAPS = {"STARTS_WITH": _NO_STARTS_WITH, "TRY_CAST": _NO_TRY_CAST,
                "CONCAT": "CONCAT needs SQLite 3.44; write a || b (NULL if either is NULL)",
                "LEFT": "no LEFT function; write SUBSTRING(s, 1, n)",
                "RIGHT": "no RIGHT function; write SUBSTRING(s, -n)",
                "TIMESTAMP_TRUNC": _NO_TRUNC, "DATE_TRUNC": _NO_TRUNC,
                "INTERVAL MONTH": _SQLITE_MONTHS, "INTERVAL QUARTER": _SQLITE_MONTHS,
                "INTERVAL YEAR": _SQLITE_MONTHS}
_MYSQL_GAPS = {"STARTS_WITH": _NO_STARTS_WITH, "TRY_CAST": _NO_TRY_CAST,
               "TIMESTAMP_TRUNC": _NO_TRUNC, "DATE_TRUNC": _NO_TRUNC}
_TSQL_GAPS = {"ILIKE": "no ILIKE; write LOWER(s) LIKE 'x%'",
              "STARTS_WITH": _NO_STARTS_WITH,
              "LENGTH": "LEN ignores trailing blanks, so lengths would differ from other "
                        "targets"}
_TRY_CAST_GAP = {"TRY_CAST": _NO_TRY_CAST}



_NARROW_DATES_CLICKHOUSE = (
    "ClickHouse's Date holds 1970-01-01 to 2149-06-06 and its DateTime 1970-01-01 to "
    "2106-02-07, and a value outside them wraps or clamps without an error; keep valid_from "
    "on or after 1970-01-03 and valid_until on or before 2106-01-01")

_MYSQL_COLUMN_TYPES = (
    "`timestamp_type: timestamptz` is a `TIMESTAMP` column, MySQL's instant type; its local "
    "dates are the same whatever the session's `time_zone` (including `SYSTEM`). Example: "
    "`occurred_at TIMESTAMP(6)` with `timestamp_type: timestamptz`. A `DATETIME` column "
    "holding UTC by convention is `timestamp_type: timestamp`, taken as UTC when `timezone` "
    "is set, as on every other target. Example: `occurred_at DATETIME(6)` holding "
    "'2021-03-14 04:30:00' for 04:30 UTC, with `timestamp_type: timestamp` and `timezone: "
    "America/New_York`, is 2021-03-13 in New York. (A `DATETIME` declared `timestamptz` would "
    "be read in the session's zone.)")

_PG_NOTE = ("CREATE OR REPLACE VIEW cannot change an existing view's columns on this engine: "
            "after a change of columns, DROP VIEW ... CASCADE first (or run create_all.sql, "
            "which does so).")

# ClickHouse needs a table engine; MergeTree keeps rows on disk, ORDER BY tuple() keeps them
# unsorted (the views' columns are Nullable, which a sorting key refuses by default).
_CLICKHOUSE_TABLE = "ENGINE = MergeTree ORDER BY tuple()"
# A lightweight UPDATE (ClickHouse 25.7 on) needs these two hidden columns on its table.
_CLICKHOUSE_STATE_TABLE = (_CLICKHOUSE_TABLE + " SETTINGS enable_block_number_column = 1, "
                           "enable_block_offset_column = 1")
# Spark: Parquet, the file format it ships with (a plain CREATE TABLE is a Hive table where
# Hive support is on). Databricks' default, Delta, is kept there.
_SPARK_TABLE = "USING PARQUET"

_NO_REFRESH_YET = ("refresh.sql is not written for this target yet (it needs {}); use "
                   "materialize: table")
_NO_REFRESH = {
    "databricks": _NO_REFRESH_YET.format("Delta's DELETE and UPDATE, which no engine in "
                                         "the tests runs; Spark's Parquet form would need "
                                         "external tables there"),
}
# Spark: Parquet tables have no DELETE or UPDATE; refresh.sql overwrites their partitions
# (materialize.overwrite_form), each written aside and moved in when its statement succeeds.
_SPARK_OVERWRITE = "USING PARQUET OPTIONS ('partitionOverwriteMode' = 'dynamic')"

TARGETS: dict[str, Target] = {
    t.name: t
    for t in (
        Target("duckdb", "duckdb", "duckdb", "replace",
               (_zone_rewrite(_zones_at_time_zone),)),
        Target("postgres", "postgres", "postgres", "replace",
               (_zone_rewrite(_zones_at_time_zone), postgres_whole_extracts), ddl_note=_PG_NOTE,
               schema_catalog=False,
               filter_gaps=_TRY_CAST_GAP,
               snapshot_statement="SET TRANSACTION ISOLATION LEVEL REPEATABLE READ"),
        Target("spark", "spark", "spark", "replace",
               (_zone_rewrite(_zones_spark), timestamp_offsets(_offset_spark), int_date_offsets,
                constant_unions_as_values),
               no_ddl_transaction=_NO_TX_SPARK, table_form=_SPARK_TABLE,
               partition_overwrite=_SPARK_OVERWRITE),
        Target("databricks", "databricks", "spark", "replace",
               (_zone_rewrite(_zones_spark), timestamp_offsets(_offset_spark), int_date_offsets,
                constant_unions_as_values),
               executed=_DATABRICKS_EXECUTED, no_ddl_transaction=_NO_TX_SPARK,
               unsupported={"materialize: incremental": _NO_REFRESH["databricks"]}),
        # drop_create: ClickHouse's CREATE OR REPLACE VIEW silently replaces a *table* of
        # that name (its data gone), while DROP VIEW refuses one ("is not a View").
        Target("clickhouse", "clickhouse", "clickhouse", "drop_create",
               (_zone_rewrite(_zones_clickhouse),), no_ddl_transaction=_NO_TX_CLICKHOUSE,
               schema_catalog=False, filter_gaps=_TRY_CAST_GAP, table_form=_CLICKHOUSE_TABLE,
               state_table_form=_CLICKHOUSE_STATE_TABLE,
               unsupported={"valid range before 1970 or after 2105": _NARROW_DATES_CLICKHOUSE}),
        Target("mysql", "mysql", "mysql", "replace",
               (_zone_rewrite(_zones_mysql), window_keys_nulls_default, mysql_readable_numbers,
                mysql_update_self_reads),
               no_ddl_transaction=_NO_TX_MYSQL, schema_catalog=False, filter_gaps=_MYSQL_GAPS,
               column_types=_MYSQL_COLUMN_TYPES, refresh_transaction=_MYSQL_REFRESH_TX),
        Target("sqlite", "sqlite", "sqlite", "drop_create",
               (_zone_rewrite(_zones_utc_only), timestamp_offsets(_offset_sqlite),
                sqlite_date_parts, sqlite_readable_values),
               unsupported={"activity.timezone": _NO_IANA_SQLITE,
                            "qualified names": _NO_QUALIFIED_SQLITE},
               transaction_note=_SQLITE_BAIL, filter_gaps=_SQLITE_GAPS),
        Target("bigquery", "bigquery", None, "replace",
               (_zone_rewrite(_zones_bigquery), timestamp_offsets(_offset_bigquery),
                window_keys_nulls_default),
               no_ddl_transaction=_NO_TX_BIGQUERY),
        Target("snowflake", "snowflake", None, "replace", (_zone_rewrite(_zones_snowflake),),
               no_ddl_transaction=_NO_TX_SNOWFLAKE, filter_gaps=_TRY_CAST_GAP),
        Target("redshift", "redshift", None, "replace", (_zone_rewrite(_zones_snowflake),),
               ddl_note=_PG_NOTE, schema_catalog=False,
               filter_gaps={"STARTS_WITH": "sqlglot writes it as LIKE prefix || '%', wrong "
                                           "for a prefix holding % or _"}),
        Target("trino", "trino", None, "replace", (_zone_rewrite(_zones_trino),),
               no_ddl_transaction=_NO_TX_TRINO),
        Target("tsql", "tsql", None, "create_or_alter",
               (_zone_rewrite(_zones_tsql), tsql_current_date, window_keys_nulls_default),
               unsupported={"activity.timezone": _NO_IANA_TSQL}, schema_catalog=False,
               exec_batch=True, transaction_note=_TSQL_BATCH, filter_gaps=_TSQL_GAPS),
    )
}


# ---------------------------------------------------------------- catalog checks

# How each target's catalog (information_schema.columns, or its own) spells the types a
# spec declares, for sqlgen_catalog_checks.sql: per kind, a condition in the source dialect
# over {t} (the catalog's data_type, lower case) and {s} (its numeric_scale), {scale} being
# the declared scale. A kind a target does not list is never accepted there. From each
# engine's documentation of its catalog, and executed on DuckDB, PostgreSQL, MariaDB and
# ClickHouse in tests/test_checks.py.
_DECIMAL = "{t} = 'numeric' AND {s} = {scale}"
CATALOG_TYPES: dict[str, dict[str, str]] = {
    "duckdb": {"timestamp": "{t} IN ('timestamp', 'timestamp_s', 'timestamp_ms', 'timestamp_ns')",
               "timestamptz": "{t} = 'timestamp with time zone'", "date": "{t} = 'date'",
               "decimal": "{t} LIKE 'decimal(%' AND {s} = {scale}"},
    "postgres": {"timestamp": "{t} = 'timestamp without time zone'",
                 "timestamptz": "{t} = 'timestamp with time zone'", "date": "{t} = 'date'",
                 "decimal": _DECIMAL},
    # ClickHouse: DateTime or DateTime64, Nullable or not; a time zone parameter (quoted)
    # makes it an instant.
    "clickhouse": {
        "timestamp": "({t} LIKE 'datetime%' OR {t} LIKE 'nullable(datetime%') AND {t} NOT LIKE '%''%'",
        "timestamptz": "({t} LIKE 'datetime%' OR {t} LIKE 'nullable(datetime%') AND {t} LIKE '%''%'",
        "date": "{t} IN ('date', 'date32', 'nullable(date)', 'nullable(date32)')",
        "decimal": "{t} LIKE '%decimal(%' AND {s} = {scale}"},
    # MySQL's TIMESTAMP is an instant, its DATETIME a wall-clock time (see column_types).
    "mysql": {"timestamp": "{t} = 'datetime'", "timestamptz": "{t} = 'timestamp'",
              "date": "{t} = 'date'", "decimal": "{t} = 'decimal' AND {s} = {scale}"},
    "bigquery": {"timestamp": "{t} = 'datetime'", "timestamptz": "{t} = 'timestamp'",
                 "date": "{t} = 'date'",
                 # no numeric_scale: NUMERIC(P, S) or the bare types' scales (9 and 38)
                 "decimal": "{t} LIKE '%numeric(%, {scale})' OR ({t} = 'numeric' AND {scale} = 9)"
                            " OR ({t} = 'bignumeric' AND {scale} = 38)"},
    "snowflake": {"timestamp": "{t} = 'timestamp_ntz'",
                  "timestamptz": "{t} IN ('timestamp_tz', 'timestamp_ltz')",
                  "date": "{t} = 'date'", "decimal": "{t} = 'number' AND {s} = {scale}"},
    "redshift": {"timestamp": "{t} = 'timestamp without time zone'",
                 "timestamptz": "{t} = 'timestamp with time zone'", "date": "{t} = 'date'",
                 "decimal": _DECIMAL},
    # Trino lists no numeric_scale: decimal(P,S) carries it.
    "trino": {"timestamp": "{t} LIKE 'timestamp%' AND {t} NOT LIKE '%with time zone'",
              "timestamptz": "{t} LIKE 'timestamp%with time zone'", "date": "{t} = 'date'",
              "decimal": "{t} LIKE 'decimal(%,{scale})'"},
    "tsql": {"timestamp": "{t} IN ('datetime2', 'datetime', 'smalldatetime')",
             "timestamptz": "{t} = 'datetimeoffset'", "date": "{t} = 'date'",
             "decimal": "{t} IN ('decimal', 'numeric') AND {s} = {scale}"},
    "databricks": {"timestamp": "{t} = 'timestamp_ntz'", "timestamptz": "{t} = 'timestamp'",
                   "date": "{t} = 'date'", "decimal": "{t} = 'decimal' AND {s} = {scale}"},
}
# Why a target has no catalog check (the other checks still run there).
NO_CATALOG = {
    "spark": "Spark has no information_schema; DESCRIBE TABLE lists the types (in ANSI mode "
             "a value of another type stops the views with Spark's own error)",
    "sqlite": "SQLite keeps each value's own type whatever the column's: the wrong_type_ "
              "rows count the values instead",
}
# The current schema's name where sqlglot does not spell it for the target.
_CURRENT_SCHEMA = {"clickhouse": "currentDatabase()", "trino": "current_schema"}
# Where the catalog is per database: information_schema under the table's own catalog part
# (BigQuery's is per dataset, so it needs a qualified table).
_CATALOG_PER_DATABASE = ("snowflake", "trino", "tsql")


def catalog_rows(target: Target, table: exp.Table, column: str, kind: str,
                 scale: int | None) -> exp.Subquery | None:
    """The catalog's rows for one column of a table, as (sqlgen_found_type,
    sqlgen_accepted): its type as the catalog spells it, and 1 when that is of ``kind``
    (a DECIMAL of ``scale`` for kind decimal), else 0. None where the target has no catalog
    to read (NO_CATALOG), or BigQuery's for a table without a dataset."""
    import sqlglot

    spelling = CATALOG_TYPES.get(target.name)
    if spelling is None or (target.name == "bigquery" and not table.db):
        return None
    condition = spelling[kind].format(t="LOWER(data_type)", s="numeric_scale",
                                      scale=int(scale or 0))
    accepted = sqlglot.parse_one(f"CASE WHEN {condition} THEN 1 ELSE 0 END",
                                 read=SOURCE_DIALECT)
    if target.name == "bigquery":  # [project.]dataset.`INFORMATION_SCHEMA.COLUMNS`
        relation = exp.Table(this=exp.Identifier(this="INFORMATION_SCHEMA.COLUMNS", quoted=True),
                             db=table.args["db"].copy(),
                             catalog=table.args["catalog"].copy() if table.catalog else None)
    else:
        outer = table.catalog if target.name in _CATALOG_PER_DATABASE else ""
        relation = exp.Table(this=exp.to_identifier("columns"),
                             db=exp.to_identifier("information_schema"),
                             catalog=table.args["catalog"].copy() if outer else None)

    def same(name: str, value: exp.Expression) -> exp.Expression:
        return exp.EQ(this=exp.Lower(this=exp.column(name)), expression=value)

    def text(value: str) -> exp.Expression:
        return exp.Literal.string(value.lower())

    matches = [same("table_name", text(table.name)), same("column_name", text(column))]
    if target.name != "bigquery":
        schema = (text(table.db) if table.db else exp.Lower(this=(
            sqlglot.parse_one(_CURRENT_SCHEMA[target.name], read=SOURCE_DIALECT)
            if target.name in _CURRENT_SCHEMA else exp.CurrentSchema())))
        matches.insert(0, same("table_schema", schema))
    if target.name == "duckdb" and table.catalog:
        matches.insert(0, same("table_catalog", text(table.catalog)))
    select = (exp.select(exp.alias_(exp.column("data_type"), "sqlgen_found_type"),
                         exp.alias_(accepted, "sqlgen_accepted"))
              .from_(relation).where(exp.and_(*matches)))
    return select.subquery("sqlgen_catalog")


def target_names() -> list[str]:
    return list(TARGETS)


def interval_add_to_date_add(tree: exp.Expression) -> exp.Expression:
    """``d + INTERVAL (n) DAY`` (a template's) and ``CURRENT_DATE - INTERVAL '7 days'`` (a
    filter's) become DateAdd nodes, spelled per target.

    Written as text the sum survives only in DuckDB (``NOW() - INTERVAL '400' DAY`` is a
    syntax error on SQLite and T-SQL); as a node it becomes ``DATEADD`` on T-SQL,
    ``DATE(d, n || ' DAY')`` on SQLite, ``ADD_MONTHS`` on Spark, and so on. A subtraction
    adds the negated amount; WEEK and QUARTER become 7 days and 3 months (SQLite has
    neither). The node remembers whether it offsets a date or a timestamp, for the targets
    that spell the two differently (``timestamp_offsets``).
    """
    from .filters import date_operand

    def rewrite(node: exp.Expression) -> exp.Expression:
        if isinstance(node, (exp.Add, exp.Sub)) and isinstance(node.expression, exp.Interval):
            amount, unit = _amount_and_unit(node.expression)
            if isinstance(node, exp.Sub):
                amount = _negated(amount)
            added = exp.DateAdd(this=node.this, expression=amount, unit=exp.var(unit))
            added.meta["sqlgen_operand"] = date_operand(node.this)
            return added
        return node
    return tree.transform(rewrite, copy=False)


_UNIT_STEPS = {"WEEK": (7, "DAY"), "QUARTER": (3, "MONTH")}


def _amount_and_unit(interval: exp.Interval) -> tuple[exp.Expression, str]:
    from .filters import interval_parts

    parts = interval_parts(interval)
    if parts is not None:
        count, unit = parts
        factor, unit = _UNIT_STEPS.get(unit, (1, unit))
        return exp.Literal.number(count * factor), unit
    amount = interval.this.unnest() if isinstance(interval.this, exp.Paren) else interval.this
    unit = interval.unit.name.upper()
    if unit in _UNIT_STEPS:
        factor, unit = _UNIT_STEPS[unit]
        amount = exp.Mul(this=exp.paren(amount, copy=False),
                         expression=exp.Literal.number(factor))
    return amount, unit


def _negated(amount: exp.Expression) -> exp.Expression:
    if isinstance(amount, exp.Literal) and not amount.is_string:
        text = amount.this
        return exp.Literal.number(text[1:] if text.startswith("-") else f"-{text}")
    return exp.Neg(this=exp.paren(amount, copy=False))


def filter_feature(node: exp.Expression) -> str:
    """The name of a filter's operation that ``Target.filter_gaps`` lists: ``STARTS_WITH``,
    ``ILIKE``, ``INTERVAL MONTH`` (WEEK and QUARTER count as DAY and MONTH)..."""
    if isinstance(node, exp.Interval):
        from .filters import interval_parts

        parts = interval_parts(node)
        return f"INTERVAL {parts[1] if parts else node.unit.name.upper()}"
    if isinstance(node, exp.Func):
        return node.sql_name()
    return node.key.upper()


def spec_identifiers(target: Target) -> Transform:
    """Quote every name that came from the spec, folding bare names as the target does.

    A bare name behaves as unquoted SQL would (``user_id`` is ``USER_ID`` on Snowflake,
    ``userid`` for ``UserId`` on Postgres) while a keyword such as ``user`` stays a column.
    """
    from sqlglot.dialects.dialect import NormalizationStrategy

    strategy = target.dialect().normalization_strategy

    def rewrite(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.Identifier) and node.meta.get("sqlgen_bare"):
            text = node.this
            if strategy is NormalizationStrategy.LOWERCASE:
                text = text.lower()
            elif strategy is NormalizationStrategy.UPPERCASE:
                text = text.upper()
            return exp.Identifier(this=text, quoted=True)
        return node
    return lambda tree: tree.transform(rewrite, copy=False)


def is_not_null(tree: exp.Expression) -> exp.Expression:
    """``NOT x IS NULL`` becomes ``x IS NOT NULL``, the form a reviewer expects.

    sqlglot parses ``x IS NOT NULL`` as Not(Is(x, NULL)) and prints it back as
    ``NOT x IS NULL``; an Is node with ``negate`` prints ``x IS NOT NULL`` in every
    target. Comments on the NOT stay on the new node.
    """
    def rewrite(node: exp.Expression) -> exp.Expression:
        inner = node.this if isinstance(node, exp.Not) else None
        if isinstance(inner, exp.Paren):
            inner = inner.unnest()
        if not (isinstance(inner, exp.Is) and isinstance(inner.expression, exp.Null)
                and not inner.args.get("negate")):
            return node
        negated = exp.Is(this=inner.this, expression=inner.expression, negate=True)
        negated.add_comments((node.comments or []) + (inner.comments or []))
        return negated
    return tree.transform(rewrite, copy=False)


def rewrites(target: Target) -> list[Transform]:
    """Every rewrite for a target, in order: shared lowering first, then its own."""
    return [interval_add_to_date_add, lower_time_zones, is_not_null, spec_identifiers(target),
            *target.transforms]


def table_properties(target: Target, state: bool = False,
                     partition: str | None = None) -> exp.Properties | None:
    """The properties of ``Target.table_form`` (with ``state``: of the state table's form,
    ``Target.state_table_form`` where there is one; with ``partition``: of
    ``Target.partition_overwrite``, partitioned by that column), parsed in the target's
    dialect (None: none)."""
    if partition is not None:
        properties = _table_properties(target.sqlglot_dialect,
                                       target.partition_overwrite).copy()
        properties.append("expressions", exp.PartitionedByProperty(this=exp.Schema(
            expressions=[exp.to_identifier(partition, quoted=True)])))
        return properties
    form = (state and target.state_table_form) or target.table_form
    if not form:
        return None
    return _table_properties(target.sqlglot_dialect, form).copy()


@functools.lru_cache(maxsize=None)
def _table_properties(dialect: str, form: str) -> exp.Properties:
    import sqlglot

    parsed = sqlglot.parse_one(f"CREATE TABLE sqlgen_t {form} AS SELECT 1", read=dialect)
    return parsed.args["properties"]
