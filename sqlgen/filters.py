"""The optional ``where`` filter: one boolean expression over the source table's columns.

It is parsed by sqlglot in the spec's dialect and checked node by node against ``ALLOWED``,
one table of side-effect-free scalar operations (docs/filters.md is generated from it).
Everything else is refused: a second statement, subquery, DDL, comment, aggregate, window,
table function, a function sqlglot does not know (unless the spec names it in
``allow_functions``), or a column of another table. A view is read by people who could not
run such a function themselves, so nothing but plain row arithmetic reaches it.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import sqlglot
from sqlglot import exp
from sqlglot.errors import ParseError, TokenError
from sqlglot.tokens import TokenType

from .comments import cut
from .names import BARE, RESERVED_PREFIX

MAX_DEPTH = 32  # nested parentheses
MAX_TOKENS = 500


@dataclass(frozen=True)
class Allowed:
    """One operation a filter may use: the sqlglot node, how it is written, what it does."""

    kind: type[exp.Expression]
    spelling: str
    group: str
    note: str = ""


_CLOCK = ("the engine's clock, in the session's time zone: against a timestamp column "
          "without a zone it compares the session's wall clock")
_TRUNC = "YEAR, QUARTER, MONTH, DAY (not WEEK: its first day differs between engines)"

# Targets that lack one of these refuse it at build time (dialects.Target.filter_gaps).
ALLOWED: tuple[Allowed, ...] = (
    Allowed(exp.EQ, "a = b", "comparison"),
    Allowed(exp.NEQ, "a <> b, a != b", "comparison"),
    Allowed(exp.LT, "a < b", "comparison"),
    Allowed(exp.LTE, "a <= b", "comparison"),
    Allowed(exp.GT, "a > b", "comparison"),
    Allowed(exp.GTE, "a >= b", "comparison"),
    Allowed(exp.NullSafeEQ, "a IS NOT DISTINCT FROM b", "comparison"),
    Allowed(exp.NullSafeNEQ, "a IS DISTINCT FROM b", "comparison"),
    Allowed(exp.Is, "a IS NULL, a IS TRUE", "comparison"),
    Allowed(exp.In, "a IN ('x', 'y')", "comparison", "a list of values, never a subquery"),
    Allowed(exp.Between, "a BETWEEN x AND y", "comparison"),
    Allowed(exp.Like, "a LIKE 'x%'", "comparison",
            "case-insensitive on MySQL and on SQLite (ASCII letters), as those engines compare "
            "text"),
    Allowed(exp.ILike, "a ILIKE 'x%'", "comparison"),
    Allowed(exp.And, "p AND q", "logic"),
    Allowed(exp.Or, "p OR q", "logic"),
    Allowed(exp.Not, "NOT p", "logic"),
    Allowed(exp.Add, "a + b", "arithmetic"),
    Allowed(exp.Sub, "a - b", "arithmetic"),
    Allowed(exp.Mul, "a * b", "arithmetic"),
    Allowed(exp.Mod, "a % b, MOD(a, b)", "arithmetic"),
    Allowed(exp.Neg, "-a", "arithmetic"),
    Allowed(exp.Abs, "ABS(x)", "arithmetic"),
    Allowed(exp.Round, "ROUND(x, n)", "arithmetic"),
    Allowed(exp.Floor, "FLOOR(x)", "arithmetic"),
    Allowed(exp.Ceil, "CEIL(x)", "arithmetic"),
    Allowed(exp.Case, "CASE WHEN p THEN x ELSE y END", "conditional"),
    Allowed(exp.If, "WHEN p THEN x (inside CASE)", "conditional"),
    Allowed(exp.Coalesce, "COALESCE(a, b), IFNULL(a, b)", "conditional"),
    Allowed(exp.Nullif, "NULLIF(a, b)", "conditional"),
    Allowed(exp.Cast, "CAST(a AS type), DATE 'yyyy-mm-dd', TIMESTAMP '...'", "conversion"),
    Allowed(exp.TryCast, "TRY_CAST(a AS type)", "conversion", "NULL for an unreadable value"),
    Allowed(exp.Lower, "LOWER(s)", "text"),
    Allowed(exp.Upper, "UPPER(s)", "text"),
    Allowed(exp.Trim, "TRIM(s)", "text"),
    Allowed(exp.Length, "LENGTH(s)", "text", "in characters"),
    Allowed(exp.Substring, "SUBSTRING(s, start, length)", "text"),
    Allowed(exp.Replace, "REPLACE(s, from, to)", "text"),
    Allowed(exp.StrPosition, "STRPOS(s, part)", "text"),
    Allowed(exp.Concat, "CONCAT(a, b)", "text", "NULL counts as ''"),
    Allowed(exp.DPipe, "a || b", "text"),
    Allowed(exp.Left, "LEFT(s, n)", "text"),
    Allowed(exp.Right, "RIGHT(s, n)", "text"),
    Allowed(exp.StartsWith, "STARTS_WITH(s, prefix)", "text"),
    Allowed(exp.CurrentDate, "CURRENT_DATE", "date", _CLOCK),
    Allowed(exp.CurrentTimestamp, "CURRENT_TIMESTAMP, NOW()", "date", _CLOCK),
    Allowed(exp.Interval, "CURRENT_DATE - INTERVAL 7 DAY", "date",
            "added to or subtracted from CURRENT_DATE, CURRENT_TIMESTAMP or a DATE/TIMESTAMP "
            "literal only; a whole number of DAY, WEEK, MONTH, QUARTER, YEAR (and HOUR, "
            "MINUTE, SECOND on a timestamp)"),
    Allowed(exp.Extract, "EXTRACT(YEAR FROM ts)", "date",
            "YEAR, MONTH, DAY, HOUR, MINUTE, SECOND"),
    Allowed(exp.TimestampTrunc, "DATE_TRUNC('month', ts)", "date", _TRUNC),
    Allowed(exp.DateTrunc, "DATE_TRUNC('month', d)", "date", _TRUNC),
)

# Parts of an expression that are not operations: names, literals, types, units.
_STRUCTURE = (exp.Column, exp.Identifier, exp.Literal, exp.Null, exp.Boolean, exp.Paren,
              exp.DataType, exp.DataTypeParam, exp.Var)

# Known nodes refused with a reason of their own (anything else not allowed is refused too).
_REFUSED: tuple[tuple[type[exp.Expression], str], ...] = (
    (exp.Query, "a subquery"),
    (exp.Subquery, "a subquery"),
    (exp.Exists, "a subquery"),
    (exp.DDL, "DDL"),
    (exp.DML, "a data change"),
    (exp.Command, "a command"),
    (exp.Star, "*"),
    (exp.Window, "a window function"),
    (exp.AggFunc, "an aggregate function"),
    (exp.UDTF, "a table function"),
    (exp.Placeholder, "a placeholder"),
    (exp.Parameter, "a parameter"),
    (exp.Alias, "an alias (AS name)"),
    (exp.RawString, "a $$ or raw string; write strings in single quotes"),
    (exp.ByteString, "an escape or byte string; write strings in single quotes"),
    (exp.National, "an N'...' string; write strings in single quotes"),
)

_KINDS = tuple(a.kind for a in ALLOWED)
_CAST_TYPES = tuple(exp.DataType.NUMERIC_TYPES | exp.DataType.TEXT_TYPES
                    | exp.DataType.TEMPORAL_TYPES | {exp.DataType.Type.BOOLEAN})
_UNIT_HOLDERS = (exp.Interval, exp.Extract, exp.TimestampTrunc, exp.DateTrunc)
DATE_UNITS = ("DAY", "WEEK", "MONTH", "QUARTER", "YEAR")
TIME_UNITS = ("HOUR", "MINUTE", "SECOND")
EXTRACT_UNITS = ("YEAR", "MONTH", "DAY", "HOUR", "MINUTE", "SECOND")
TRUNC_UNITS = ("YEAR", "QUARTER", "MONTH", "DAY")
_BOOLEAN_TOPS = (exp.Predicate, exp.Connector, exp.Not, exp.Boolean, exp.Column, exp.Func)
_SUGGEST = "use a plain condition on the table's own columns, e.g. event_name <> 'push_received'"


def parse_filter(text: str, dialect: str, allow_functions: tuple[str, ...] = ()) -> exp.Expression:
    """Parse and check a filter; raise ValueError with a message a person can act on."""
    tokens = _tokens(text, dialect)
    try:
        trees = sqlglot.parse(text, read=dialect)
    except ParseError as err:
        raise ValueError(f"not a valid {dialect} expression: {_first_error(err)}") from None
    except RecursionError:
        raise ValueError("nested too deeply for the parser; write it with fewer levels of "
                         "NOT, CASE or parentheses") from None
    trees = [t for t in trees if t is not None]
    if len(trees) != 1 or any(t.token_type == TokenType.SEMICOLON for t in tokens[:-1]):
        raise ValueError("must be a single expression, not several statements")
    return _check(_normalized(trees[0]), {name.lower() for name in allow_functions})


def _tokens(text: str, dialect: str) -> list:
    """The filter's tokens, after the checks that need no parse: comments, size, depth."""
    try:
        tokens = sqlglot.Dialect.get_or_raise(dialect).tokenize(text)
    except TokenError as err:
        raise ValueError(f"cannot read the expression (is a string left open?): "
                         f"{cut(_plain(str(err).splitlines()[0]), 120)}") from None
    if any(token.comments for token in tokens):
        raise ValueError("comments are not allowed in a filter; remove the -- , # or /* */ part")
    depth = deepest = 0
    for token in tokens:
        depth += {TokenType.L_PAREN: 1, TokenType.R_PAREN: -1}.get(token.token_type, 0)
        deepest = max(deepest, depth)
    if deepest > MAX_DEPTH:
        raise ValueError(f"nested too deeply: {deepest} levels of parentheses, "
                         f"at most {MAX_DEPTH}")
    if len(tokens) > MAX_TOKENS:
        raise ValueError(f"too long: {len(tokens)} tokens, at most {MAX_TOKENS}")
    return tokens


def _normalized(tree: exp.Expression) -> exp.Expression:
    """Spellings of the same operation made one node: ``NOW()`` is CURRENT_TIMESTAMP, and
    MySQL's ``DATE_SUB(d, INTERVAL 1 DAY)`` is ``d - INTERVAL 1 DAY`` (checked as such)."""
    def arithmetic(node: exp.Expression) -> exp.Expression:
        if type(node) in (exp.DateAdd, exp.DateSub) and node.args.get("unit") is not None:
            interval = exp.Interval(this=node.expression, unit=node.unit)
            kind = exp.Add if isinstance(node, exp.DateAdd) else exp.Sub
            return exp.paren(kind(this=node.this, expression=interval), copy=False)
        return node

    def clock(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.Anonymous) and node.name.lower() == "now" \
                and not node.expressions:
            return exp.CurrentTimestamp()
        return node
    return tree.transform(arithmetic, copy=False).transform(clock, copy=False)


def _check(tree: exp.Expression, extra: set[str]) -> exp.Expression:
    for node in tree.walk():
        _check_node(node, extra)
    top = tree.unnest() if isinstance(tree, exp.Paren) else tree
    if not isinstance(top, _BOOLEAN_TOPS) or isinstance(top, exp.Literal):
        raise ValueError("must be a condition (true or false for each row), e.g. "
                         "event_name <> 'push_received'")
    return tree


def _check_node(node: exp.Expression, extra: set[str]) -> None:
    if isinstance(node, exp.Anonymous):
        if node.name.lower() in extra:
            return
        raise ValueError(f"function {node.name}() is not on the list of functions a filter may "
                         "use (docs/filters.md); if you trust it, name it in allow_functions")
    for kind, what in _REFUSED:
        if isinstance(node, kind):
            raise ValueError(f"{what} is not allowed in a filter{_named(node)}; {_SUGGEST}")
    if isinstance(node, exp.Div):
        raise ValueError("division is not allowed in a filter: engines differ (7 / 2 is 3 on "
                         "Postgres, 3.5 on MySQL); compare a product instead, e.g. "
                         "amount > 2 * 50 rather than amount / 2 > 50")
    if not isinstance(node, _KINDS + _STRUCTURE):
        raise ValueError(f"{_describe(node)} is not on the list of operations a filter may use "
                         "(docs/filters.md)")
    if isinstance(node, exp.Column):
        _check_column(node)
    elif isinstance(node, exp.Interval):
        _check_interval(node)
    elif isinstance(node, exp.Var) and not isinstance(node.parent, _UNIT_HOLDERS):
        raise ValueError(f"{node.name} is not a column, literal or function; quote a name "
                         "with special characters")
    elif isinstance(node, exp.DataType) and not node.is_type(*_CAST_TYPES):
        raise ValueError(f"a cast to {node.sql()} is not allowed in a filter; cast to a number, "
                         "text, a date, a timestamp or a boolean")
    elif isinstance(node, exp.Extract):
        _check_unit(node, node.this, EXTRACT_UNITS)
    elif isinstance(node, (exp.TimestampTrunc, exp.DateTrunc)):
        _check_unit(node, node.args.get("unit"), TRUNC_UNITS)


def _named(node: exp.Expression) -> str:
    return f": {node.sql_name()}()" if isinstance(node, exp.Func) else ""


def _describe(node: exp.Expression) -> str:
    if isinstance(node, exp.Func):
        return f"function {node.sql_name()}()"
    return f"{node.key.upper()} ({node.sql()[:40]})"


def _check_column(node: exp.Column) -> None:
    if node.table or node.args.get("db"):
        raise ValueError(f"column {cut(node.sql(), 80)} names a table; write the column "
                         "alone")
    if node.name.lower().startswith(RESERVED_PREFIX):
        raise ValueError(f"names starting with {RESERVED_PREFIX!r} are reserved for sqlgen")
    ident = node.this
    if isinstance(ident, exp.Identifier) and not ident.quoted and not BARE.fullmatch(ident.name):
        raise ValueError(f"{ident.name} is not a plain name (letters, digits and _) nor a "
                         "quoted one; write strings in single quotes ('...')")


def _check_unit(node: exp.Expression, unit: exp.Expression | None, units: tuple[str, ...]):
    name = unit.name.upper() if unit is not None else ""
    if name not in units:
        raise ValueError(f"{node.sql_name()}() takes one of {', '.join(units)}, not "
                         f"{name or 'nothing'}")


def interval_parts(node: exp.Interval) -> tuple[int, str] | None:
    """(amount, unit) of ``INTERVAL 7 DAY``, ``INTERVAL '7' DAYS`` or ``INTERVAL '7 days'``."""
    amount = node.this.unnest() if isinstance(node.this, exp.Paren) else node.this
    unit = node.unit.name.upper() if node.args.get("unit") is not None else ""
    if not isinstance(amount, exp.Literal):
        return None
    text = amount.this.strip()
    if not unit and amount.is_string and len(text.split()) == 2:
        text, unit = text.split()[0], text.split()[1].upper()
    unit = unit[:-1] if unit.endswith("S") else unit
    sign = -1 if text.startswith("-") else 1
    digits = text.lstrip("+-")
    if not digits.isdigit() or not BARE.fullmatch(unit or "0"):
        return None
    return sign * int(digits), unit


_TIMESTAMP_TYPES = tuple(exp.DataType.TEMPORAL_TYPES - {
    exp.DataType.Type.DATE, exp.DataType.Type.DATE32, exp.DataType.Type.TIME,
    exp.DataType.Type.TIMETZ})


def date_operand(node: exp.Expression) -> str | None:
    """'date' or 'timestamp' for CURRENT_DATE, CURRENT_TIMESTAMP and DATE/TIMESTAMP literals
    (or such a value plus or minus intervals); None for anything else."""
    node = node.unnest() if isinstance(node, exp.Paren) else node
    if isinstance(node, exp.CurrentDate):
        return "date"
    if isinstance(node, exp.CurrentTimestamp):
        return "timestamp"
    if isinstance(node, exp.Cast) and isinstance(node.this, exp.Literal) and node.this.is_string:
        if node.to.is_type(exp.DataType.Type.DATE, exp.DataType.Type.DATE32):
            return "date"
        if node.to.is_type(*_TIMESTAMP_TYPES):
            return "timestamp"
    if isinstance(node, (exp.Add, exp.Sub)) and isinstance(node.expression, exp.Interval):
        return date_operand(node.this)
    return None


def _check_interval(node: exp.Interval) -> None:
    parent = node.parent
    parts = interval_parts(node)
    if parts is None or parts[1] not in DATE_UNITS + TIME_UNITS:
        raise ValueError(f"{node.sql()} must be a whole number of "
                         f"{', '.join(DATE_UNITS + TIME_UNITS)}, e.g. INTERVAL 7 DAY")
    kind = date_operand(parent.this) if isinstance(parent, (exp.Add, exp.Sub)) \
        and parent.expression is node else None
    if kind is None:
        raise ValueError(f"{node.sql()} may only be added to or subtracted from CURRENT_DATE, "
                         "CURRENT_TIMESTAMP or a DATE/TIMESTAMP literal; move it to that side, "
                         "e.g. occurred_at >= CURRENT_DATE - INTERVAL 7 DAY")
    if kind == "date" and parts[1] in TIME_UNITS:
        raise ValueError(f"{node.sql()} on a date: use CURRENT_TIMESTAMP or a TIMESTAMP "
                         "literal for hours, minutes and seconds")


def known_function(name: str, dialect: str) -> bool:
    """True when sqlglot reads ``name(x)`` as a function it knows (not an Anonymous one)."""
    try:
        tree = sqlglot.parse_one(f"{name}(x)", read=dialect)
    except (ParseError, TokenError):
        return True
    return not isinstance(tree, exp.Anonymous)


def _first_error(err: ParseError) -> str:
    """sqlglot's first error in words: its class names shown short, the text cut."""
    if err.errors:
        first = err.errors[0]
        text = f"{_plain(str(first.get('description')))} (column {first.get('col')})"
    else:
        text = _plain(str(err))
    return cut(text, 200)


def _plain(text: str) -> str:
    """``<class 'sqlglot.expressions.core.Add'>`` -> ``Add``."""
    return re.sub(r"<class '(?:[\w]+\.)*(\w+)'>", r"\1", text)
