"""A generated view explains its own steps, on every target.

Each CTE of every view and the view's final SELECT carry a step comment (fixed text from
the templates, never spec text), the comments survive every target's rewrites and parse
back with the target's dialect, and a NULL test reads ``x IS NOT NULL``.
"""

from __future__ import annotations

import functools
import re

import pytest
import sqlglot
from sqlglot import exp

from sqlgen import compile_spec, parse_spec
from sqlgen.compiler import Queries
from sqlgen.dialects import TARGETS

# Every view: activity with cohorts, engagement and trailing windows, and revenue; charges
# at a month grain and subscriptions at a day grain take the two branches of _revenue.sql.
SPEC = """\
version: 1
activity:
  table: app_events
  user: user_id
  timestamp: occurred_at
  where: "event_name IS NOT NULL"
revenue:
  table: {revenue_table}
  shape: {shape}
  customer: account_id
  amount: amount
{revenue_columns}
grain: {grain}
cohorts: true
engagement: true
trailing_windows: [7, 28]
output:
  dialect: duckdb
"""
SHAPES = {
    "charges": dict(revenue_table="charges", shape="charges", grain="month",
                    revenue_columns="  timestamp: charged_at"),
    "subscriptions": dict(revenue_table="subscriptions", shape="subscriptions", grain="day",
                          revenue_columns="  start: started_at\n  end: ended_at\n"
                                          "  interval: month"),
}
# Fewest step comments a view's file may hold (one per CTE and one on the final SELECT).
MIN_COMMENTS = 3
NOT_IS_NULL = re.compile(r"\bNOT\s+\(?\s*[\w`\"\[\].]+\s+IS\s+NULL", re.IGNORECASE)


@functools.cache
def compiled(target: str, shape: str):
    spec = parse_spec(SPEC.format(**SHAPES[shape]), "t.yml")
    return compile_spec(spec, target, queries(shape))


@functools.cache
def queries(shape: str) -> Queries:
    """One parse of each view for every target."""
    return Queries(parse_spec(SPEC.format(**SHAPES[shape]), "t.yml"), list(TARGETS.values()))


def query_of(statement: str, target: str) -> exp.Query:
    tree = sqlglot.parse_one(statement, read=TARGETS[target].sqlglot_dialect)
    assert isinstance(tree, exp.Create), statement[:200]
    return tree.expression


def first_select(query: exp.Expression) -> exp.Expression:
    while isinstance(query, exp.SetOperation):
        query = query.this
    return query


@pytest.mark.parametrize("shape", SHAPES)
@pytest.mark.parametrize("target", TARGETS)
def test_every_step_of_every_view_is_commented(target, shape):
    views = compiled(target, shape)
    assert len(views) == 11
    for view in views:
        body = view.statements[-1]
        assert len(re.findall(r"/\*", body)) >= MIN_COMMENTS, view.view.name
        query = query_of(body, target)
        ctes = list(query.find_all(exp.CTE))
        assert ctes, view.view.name
        for cte in ctes:
            assert first_select(cte.this).comments, (view.view.name, cte.alias)
        assert first_select(query).comments, (view.view.name, "final SELECT")


@pytest.mark.parametrize("target", TARGETS)
def test_null_tests_read_is_not_null_and_parse_back(target):
    for view in compiled(target, "subscriptions"):
        body = view.statements[-1]
        assert not NOT_IS_NULL.search(body), (view.view.name, NOT_IS_NULL.search(body))
        # Parsed back with the target's dialect, every NULL test is still one.
        tests = [node for node in query_of(body, target).find_all(exp.Is)
                 if isinstance(node.expression, exp.Null)]
        assert len(tests) == len(re.findall(r"\bIS (?:NOT )?NULL\b", body)), view.view.name


def test_comments_are_fixed_text_not_spec_text():
    spec = SPEC.format(**SHAPES["charges"]).replace("event_name IS NOT NULL",
                                                     "event_name <> 'secret_word'")
    for view in compile_spec(parse_spec(spec, "t.yml"), "duckdb"):
        for comment in re.findall(r"/\*(.*?)\*/", view.statements[-1], re.DOTALL):
            assert "secret_word" not in comment and "app_events" not in comment
            # no quote and no semicolon: a client that splits a file on semicolons (outside
            # quotes) must never cut a statement inside a comment (seen on ClickHouse, Spark)
            assert not set("'\"`;") & set(comment), comment
