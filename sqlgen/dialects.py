"""Every target dialect in one table, and the AST rewrites that make SQL right for each.

Templates are written once in the source dialect (DuckDB). Everything a target spells
differently lives here, as a function from a sqlglot tree to a sqlglot tree.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

from sqlglot import exp
from sqlglot.dialects.dialect import Dialect, NormalizationStrategy

SOURCE_DIALECT = "duckdb"

Transform = Callable[[exp.Expression], exp.Expression]


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

    def dialect(self) -> Dialect:
        return Dialect.get_or_raise(self.sqlglot_dialect)


_PG_NOTE = ("CREATE OR REPLACE VIEW cannot change an existing view's columns on this engine: "
            "after a change of columns, DROP VIEW ... CASCADE first (or run create_all.sql, "
            "which does so).")

TARGETS: dict[str, Target] = {
    t.name: t
    for t in (
        Target("duckdb", "duckdb", "duckdb", "replace"),
        Target("postgres", "postgres", "postgres", "replace", ddl_note=_PG_NOTE),
        Target("spark", "spark", "spark", "replace"),
        Target("databricks", "databricks", "spark", "replace"),
        Target("clickhouse", "clickhouse", "clickhouse", "replace"),
        Target("mysql", "mysql", "mysql", "replace"),
        Target("sqlite", "sqlite", "sqlite", "drop_create"),
        Target("bigquery", "bigquery", None, "replace"),
        Target("snowflake", "snowflake", None, "replace"),
        Target("redshift", "redshift", None, "replace", ddl_note=_PG_NOTE),
        Target("trino", "trino", None, "replace"),
        Target("tsql", "tsql", None, "create_or_alter"),
    )
}


def target_names() -> list[str]:
    return list(TARGETS)


def interval_add_to_date_add(tree: exp.Expression) -> exp.Expression:
    """``d + INTERVAL (n) DAY`` in a template becomes a DateAdd node, spelled per target.

    Written as text the sum survives only in DuckDB; as a node it becomes ``DATEADD`` on
    T-SQL, ``DATE(d, n || ' DAY')`` on SQLite, ``ADD_MONTHS`` on Spark, and so on.
    """
    def rewrite(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.Add) and isinstance(node.expression, exp.Interval):
            interval = node.expression
            amount = interval.this.unnest() if isinstance(interval.this, exp.Paren) else interval.this
            if isinstance(amount, exp.Literal) and amount.is_string:
                amount = exp.Literal.number(amount.this)
            unit = exp.var(interval.unit.name.upper())
            return exp.DateAdd(this=node.this, expression=amount, unit=unit)
        return node
    return tree.transform(rewrite)


def spec_identifiers(target: Target) -> Transform:
    """Quote every name that came from the spec, folding bare names as the target does.

    A bare name behaves as unquoted SQL would (``user_id`` is ``USER_ID`` on Snowflake,
    ``userid`` for ``UserId`` on Postgres) while a keyword such as ``user`` stays a column.
    """
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
    return lambda tree: tree.transform(rewrite)


def rewrites(target: Target) -> list[Transform]:
    """Every rewrite for a target, in order: shared lowering first, then its own."""
    return [interval_add_to_date_add, spec_identifiers(target), *target.transforms]
