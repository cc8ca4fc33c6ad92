"""The optional ``where`` filter: one boolean expression over the source table's columns.

It is parsed by sqlglot in the spec's dialect and checked node by node, so that nothing but
an expression can reach the generated SQL: no second statement, subquery, DDL, comment,
aggregate or window, and no column of another table.
"""

from __future__ import annotations

import re

import sqlglot
from sqlglot import exp
from sqlglot.errors import ParseError, TokenError

from .comments import cut
from .names import RESERVED_PREFIX

_FORBIDDEN: tuple[tuple[type[exp.Expression], str], ...] = (
    (exp.Query, "a subquery"),
    (exp.Subquery, "a subquery"),
    (exp.DDL, "DDL"),
    (exp.DML, "a data change"),
    (exp.Command, "a command"),
    (exp.Star, "*"),
    (exp.Window, "a window function"),
    (exp.AggFunc, "an aggregate function"),
    (exp.Placeholder, "a placeholder"),
    (exp.Parameter, "a parameter"),
)

_BOOLEAN_TOPS = (exp.Predicate, exp.Connector, exp.Not, exp.Boolean, exp.Column, exp.Func, exp.Xor)


def parse_filter(text: str, dialect: str) -> exp.Expression:
    """Parse and check a filter; raise ValueError with a message a person can act on."""
    try:
        tokens = sqlglot.Dialect.get_or_raise(dialect).tokenize(text)
    except TokenError as err:
        raise ValueError(f"cannot read the expression: {cut(_plain(str(err)), 200)}") from None
    if any(token.comments for token in tokens):
        raise ValueError("comments are not allowed in a filter; remove the -- or /* */ part")
    try:
        trees = sqlglot.parse(text, read=dialect)
    except ParseError as err:
        raise ValueError(f"not a valid {dialect} expression: {_first_error(err)}") from None
    trees = [t for t in trees if t is not None]
    if len(trees) != 1:
        raise ValueError("must be a single expression, not several statements")
    return _check(trees[0])


def _check(tree: exp.Expression) -> exp.Expression:
    for node in tree.walk():
        for kind, what in _FORBIDDEN:
            if isinstance(node, kind):
                raise ValueError(f"{what} is not allowed in a filter; use a plain condition "
                                 "on the table's own columns, e.g. event_name <> 'push_received'")
        if isinstance(node, exp.Column) and (node.table or node.args.get("db")):
            raise ValueError(f"column {cut(node.sql(), 80)} names a table; write the column "
                             "alone")
        if isinstance(node, exp.Column) and node.name.lower().startswith(RESERVED_PREFIX):
            raise ValueError(f"names starting with {RESERVED_PREFIX!r} are reserved for sqlgen")
    top = tree.unnest() if isinstance(tree, exp.Paren) else tree
    if not isinstance(top, _BOOLEAN_TOPS) or isinstance(top, exp.Literal):
        raise ValueError("must be a condition (true or false for each row), e.g. "
                         "event_name <> 'push_received'")
    return tree


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
