"""Recurring-revenue views on every engine, compared with the plain-Python reference.

Hand-computed cases (fixtures/revenue_seats, fixtures/revenue_plans and the direct checks
below), an external check on the CDNOW purchase log, and hypothesis property tests on random
charge and subscription tables, every grain. Money must come back as DECIMAL at the amount's
scale (SQLite, which has no DECIMAL, gives the nearest REAL) and both identities must hold
exactly in decimal arithmetic on every row.
"""

from __future__ import annotations

import datetime as dt
import math
from decimal import Decimal

import pytest
import reference_revenue as rr
from cdnow import load_cdnow
from conftest import BULK_ENGINES, HYPOTHESIS_EXAMPLES, engine_target_pairs
from harness import REVENUE_VIEWS, revenue_spec_text, run_revenue, storable_rows
from hypothesis import given, settings
from hypothesis import strategies as st
from reference import GRAIN_LABELS
from strategies import EDGE_DATES, WINDOW_DAYS

from sqlgen import UnsupportedError, compile_spec, parse_spec
from sqlgen.dialects import TARGETS
from sqlgen.support import support

PAIRS = engine_target_pairs()
GRAINS = [("day", "monday"), ("week", "monday"), ("week", "sunday"), ("month", "monday"),
          ("quarter", "monday"), ("year", "monday")]
EUR = "currency = 'EUR'"
D = Decimal


# --------------------------------------------------------------------------- comparisons


def money(value):
    """A view's money value as a Decimal (SQLite's REAL read through its shortest repr)."""
    if isinstance(value, float):
        return Decimal(repr(value))
    return value


def _clean(rows, engine_name, scale):
    """Money columns as Decimals; on engines with DECIMAL, check the type and the scale."""
    out = []
    for row in rows:
        clean = dict(row)
        for column in rr.MONEY_COLUMNS & set(row):
            value = row[column]
            if engine_name != "sqlite" and value is not None:
                assert isinstance(value, Decimal), (column, value, type(value))
                assert value.as_tuple().exponent == -scale, (column, value)
            clean[column] = money(value)
        out.append(clean)
    return out


def _same(a, b) -> bool:
    if isinstance(a, float) or isinstance(b, float):
        return a is not None and b is not None and math.isclose(a, b, rel_tol=1e-12)
    return a == b


def assert_rows(actual, expected, keys, columns):
    got = sorted(actual, key=lambda r: tuple(str(r[k]) for k in keys))
    want = sorted(expected, key=lambda r: tuple(str(r[k]) for k in keys))
    assert [tuple(str(r[k]) for k in keys) for r in got] == \
        [tuple(str(r[k]) for k in keys) for r in want]
    for row, wanted in zip(got, want, strict=True):
        for column in columns:
            assert _same(row[column], wanted[column]), (
                tuple(row[k] for k in keys), column, row[column], wanted[column])


def check_views(results, expected, engine_name, scale=2):
    """Every revenue view equal to the reference; identities exact; periods consecutive."""
    accounting = _clean(results["revenue_accounting"], engine_name, scale)
    customers = _clean(results["customer_revenue"], engine_name, scale)
    assert_rows(accounting, expected["revenue_accounting"], ("period_start",),
                rr.ACCOUNTING_COLUMNS)
    assert_rows(customers, expected["customer_revenue"], ("customer_id", "period_start"),
                rr.CUSTOMER_COLUMNS)
    summary_columns = tuple(expected["revenue_source_summary"][0])
    assert [tuple(r) for r in results["revenue_source_summary"]] == [summary_columns]
    assert_rows(results["revenue_source_summary"], expected["revenue_source_summary"], (),
                summary_columns)
    assert rr.identity_failures(accounting) == []
    assert rr.identity_failures(customers) == []
    keys = sorted(r["period_key"] for r in accounting)
    steps = {b - a for a, b in zip(keys, keys[1:], strict=False)}
    assert len(steps) <= 1  # no gaps: empty periods are rows too
    return accounting, customers


# --------------------------------------------------------------------------- hand cases

SEATS = [("acct", dt.date(2024, m, 3), D(v)) for m, v in ((1, "10"), (2, "12"), (3, "8"),
                                                          (5, "5"))]


def test_seat_example_by_hand():
    # The seat example, common practice: 10 -> 12 (expansion 2) -> 8 (contraction 4)
    # -> 0 (churned 8) -> 5 (resurrected 5).
    rows = rr.revenue_views(SEATS, "charges", "month")["customer_revenue"]
    moves = [(r["state"], r["revenue"], r["expansion_revenue"], r["contraction_revenue"],
              r["churned_revenue"], r["resurrected_revenue"]) for r in rows]
    assert moves == [("new", 10, 0, 0, 0, 0), ("expansion", 12, 2, 0, 0, 0),
                     ("contraction", 8, 0, 4, 0, 0), ("churned", 0, 0, 0, 8, 0),
                     ("resurrected", 5, 0, 0, 0, 5)]


def test_yearly_plan_over_a_year_by_hand():
    plan = [("acct", dt.date(2023, 1, 1), dt.date(2024, 1, 1), D("1200.00"), "yearly")]

    def revenue(grain, measure):
        views = rr.revenue_views(plan, "subscriptions", grain, measure=measure)
        return [r["revenue"] for r in views["revenue_accounting"]]

    months = rr.revenue_views(plan, "subscriptions", "month",
                              measure="recognized")["revenue_accounting"]
    assert [r["revenue"] for r in months] == [D("100.00")] * 12 + [D("0.00")]
    assert months[-1]["churned_revenue"] == D("100.00")
    assert revenue("quarter", "recognized") == [D("300.00")] * 4 + [D("0.00")]
    assert revenue("year", "recognized") == [D("1200.00"), D("0.00")]
    assert revenue("week", "recognized")[1] == D("23.01")  # 1200 * 7 / 365 = 23.014
    # The run rate is the monthly amount in force at each period's end, at every grain:
    # 1200 / 12 = 100.00 (common practice: MRR of a yearly plan is a twelfth of it).
    assert revenue("month", "run_rate") == [D("100.00")] * 12 + [D("0.00")]
    assert revenue("quarter", "run_rate") == [D("100.00")] * 4 + [D("0.00")]
    assert revenue("year", "run_rate") == [D("100.00"), D("0.00")]
    assert set(revenue("week", "run_rate")[:-1]) == {D("100.00")}


def test_subscription_starting_and_ending_mid_month_by_hand():
    plan = [("acct", dt.date(2023, 3, 16), dt.date(2023, 6, 15), D("31.00"), "month")]
    months = rr.revenue_views(plan, "subscriptions", "month",
                              measure="recognized")["revenue_accounting"]
    # March: 16 of 31 days; June: 14 of 30 days of 31.00 = 14.466... -> 14.47
    assert [r["revenue"] for r in months] == [D("16.00"), D("31.00"), D("31.00"),
                                              D("14.47")]
    assert months[1]["expansion_revenue"] == D("15.00")
    assert months[3]["contraction_revenue"] == D("16.53")
    # Run rate: 31.00 in force at the end of March, April and May (new, then flat); not at
    # the end of June (it ended on the 15th): churned 31.00 in June.
    months = rr.revenue_views(plan, "subscriptions", "month")["revenue_accounting"]
    assert [(r["revenue"], r["new_revenue"], r["expansion_revenue"], r["contraction_revenue"],
             r["churned_revenue"]) for r in months] == [
        (D("31.00"), D("31.00"), 0, 0, 0), (D("31.00"), 0, 0, 0, 0),
        (D("31.00"), 0, 0, 0, 0), (0, 0, 0, 0, D("31.00"))]


def _movements(rows):
    return [(r["revenue"], r["new_revenue"], r["expansion_revenue"], r["resurrected_revenue"],
             r["contraction_revenue"], r["churned_revenue"]) for r in rows]


def test_run_rate_fixture_by_hand():
    """fixtures/revenue_run_rate/README.md, worked out by hand: month and week grain."""
    months = rr.fixture_views("revenue_run_rate", "month")
    assert _movements(months["revenue_accounting"]) == [
        (D("275.00"), D("275.00"), 0, 0, 0, 0),
        (D("343.33"), D("83.33"), D("10.00"), 0, 0, D("25.00")),
        (D("343.33"), 0, D("30.00"), 0, 0, D("30.00")),
        (D("358.33"), 0, 0, D("25.00"), D("10.00"), 0),
        (D("348.33"), 0, 0, 0, D("10.00"), 0)]
    assert months["revenue_source_summary"][0]["no_run_rate_rows"] == 1  # short_trial
    weeks = rr.fixture_views("revenue_run_rate", "week_monday")
    by_week = {r["period_start"]: r for r in weeks["revenue_accounting"]}
    assert _movements([by_week[dt.date(2024, 12, 30)], by_week[dt.date(2025, 1, 13)],
                       by_week[dt.date(2025, 3, 3)], by_week[dt.date(2025, 3, 17)]]) == [
        (D("235.00"), D("235.00"), 0, 0, 0, 0), (D("275.00"), D("40.00"), 0, 0, 0, 0),
        (D("358.33"), D("15.00"), 0, 0, 0, 0), (D("343.33"), 0, 0, 0, 0, D("15.00"))]
    assert weeks["revenue_source_summary"][0]["no_run_rate_rows"] == 0


# The symptom: one flat plan per customer, started on any day of a month and never
# changed (one ends mid-month). Only a change of amount for a continuing customer is
# expansion or contraction (common practice), so the run rate must show none.
FLAT_PLANS = [(f"flat-{day}", dt.date(2024, 1, day), None, D("49.00"), "month")
              for day in (2, 9, 16, 23, 31)] + [
    ("flat-end", dt.date(2024, 1, 1), dt.date(2024, 4, 17), D("49.00"), "month"),
    ("flat-year", dt.date(2024, 2, 29), None, D("588.00"), "year")]


def test_flat_plans_recognized_show_the_symptom():
    """What `measure: recognized` (the only behaviour before run_rate) gives for FLAT_PLANS:
    part months, then expansion and contraction although no customer changed plan."""
    months = rr.revenue_views(FLAT_PLANS, "subscriptions", "month",
                              measure="recognized")["revenue_accounting"]
    assert [r["expansion_customers"] for r in months] == [0, 5, 1, 0]
    assert [r["contraction_customers"] for r in months] == [0, 0, 0, 1]


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_flat_plans_run_rate_have_no_expansion(engines, engine_name, target):
    results = run_revenue(engines(engine_name), target, FLAT_PLANS, shape="subscriptions",
                          kind="date")
    accounting, _ = check_views(results, rr.revenue_views(FLAT_PLANS, "subscriptions",
                                                          "month"), engine_name)
    months = sorted(accounting, key=lambda r: r["period_start"])
    # 49.00 a month each; the yearly plan 588.00 / 12 = 49.00 from February; flat-end churns
    # in April (it ended on the 17th).
    assert [r["revenue"] for r in months] == [D("294.00"), D("343.00"), D("343.00"),
                                              D("294.00")]
    assert [r["new_customers"] for r in months] == [6, 1, 0, 0]
    assert [r["churned_customers"] for r in months] == [0, 0, 0, 1]
    assert all(r["expansion_customers"] == r["contraction_customers"] == 0 for r in months)
    retention = [r["net_revenue_retention"] for r in months]
    assert retention[:3] == [None, 1.0, 1.0] and math.isclose(retention[3], 294 / 343)


def test_refunds_by_hand():
    rows = [("a", dt.date(2024, 1, 5), D("20.00")), ("a", dt.date(2024, 2, 5), D("20.00")),
            ("a", dt.date(2024, 2, 9), D("-20.00")), ("a", dt.date(2024, 3, 5), D("-4.00"))]
    views = rr.revenue_views(rows, "charges", "month")
    states = [(r["state"], r["period_amount"], r["counted_as_zero"])
              for r in views["customer_revenue"]]
    assert states == [("new", D("20.00"), 0), ("churned", D("0.00"), 1),
                      ("no_revenue", D("-4.00"), 1)]
    march = views["revenue_accounting"][2]
    assert (march["revenue"], march["zeroed_customers"], march["zeroed_amount"],
            march["amount_total"]) == (D("0.00"), 1, D("-4.00"), D("-4.00"))


# --------------------------------------------------------------------------- fixtures


def _fixture_spec_args(name):
    shape = rr.REVENUE_FIXTURES[name][0]
    kind = "timestamp" if shape == "charges" else "date"
    return shape, kind


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("fixture,grain,week_start", rr.fixture_cases(GRAINS))
def test_fixture_matches_reference(engines, engine_name, target, fixture, grain, week_start):
    shape, kind = _fixture_spec_args(fixture)
    measure = rr.REVENUE_FIXTURES[fixture][3]
    # The fixtures' sentinel dates (0001-01-01, 9999-12-31) do not fit ClickHouse's Date:
    # there the test runs with the sentinels it can store (1970-01-01, 1989-12-31, 2100-01-01).
    rows = storable_rows(engine_name, rr.read_fixture_rows(fixture))
    results = run_revenue(engines(engine_name), target, rows, shape=shape, kind=kind,
                          grain=grain, week_start=week_start, where=EUR, measure=measure)
    expected = rr.revenue_views(rows, shape, grain, week_start, keep_currency="EUR",
                                measure=measure)
    accounting, customers = check_views(results, expected, engine_name)
    label = next((k for k, v in GRAIN_LABELS.items() if v == (grain, week_start)), None)
    if label in rr.REVENUE_FIXTURES[fixture][2]:  # the hand-checked files, as committed
        assert_rows(accounting, rr.read_expected(rr.expected_path(
            fixture, "revenue_accounting", label)), ("period_start",), rr.ACCOUNTING_COLUMNS)
        assert_rows(customers, rr.read_expected(rr.expected_path(
            fixture, "customer_revenue", label)), ("customer_id", "period_start"),
            rr.CUSTOMER_COLUMNS)


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("scale,measure", [(0, "recognized"), (3, "recognized"),
                                           (0, "run_rate")])
def test_other_scales(engines, engine_name, target, scale, measure):
    """Yen-like (0) and three-decimal amounts keep their scale; shares and monthly amounts
    round to it (7001 a year is 583.42 a month: 583 yen)."""
    unit = D(1).scaleb(-scale)
    plans = [("a", dt.date(2024, 1, 10), None, D("1000") * unit * 7 + unit, "year"),
             ("b", dt.date(2024, 2, 1), dt.date(2024, 3, 20), D("333") * unit, "quarter"),
             ("b", dt.date(2024, 1, 5), None, D("-5") * unit, "quarter")]
    results = run_revenue(engines(engine_name), target, plans, shape="subscriptions",
                          kind="date", scale=scale, amount_type=f"decimal(14,{scale})",
                          measure=measure)
    check_views(results, rr.revenue_views(plans, "subscriptions", "month", scale=scale,
                                          measure=measure), engine_name, scale)


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_time_zone_and_fixed_interval(engines, engine_name, target):
    """Charges near midnight UTC move month in New York; a fixed interval for every row."""
    charges = [("a", dt.datetime(2024, 2, 1, 3, 0, tzinfo=dt.UTC), D("10.00")),
               ("a", dt.datetime(2024, 3, 1, 12, 0, tzinfo=dt.UTC), D("11.00"))]
    zone = "America/New_York"
    if support(TARGETS[target], "revenue.timezone")[0] == "unsupported":
        with pytest.raises(UnsupportedError, match="revenue.timezone"):
            run_revenue(engines(engine_name), target, charges, kind="timestamptz",
                        timezone=zone)
        return
    results = run_revenue(engines(engine_name), target, charges, kind="timestamptz",
                          timezone=zone)
    expected = rr.revenue_views(charges, "charges", "month", timezone=zone)
    accounting, _ = check_views(results, expected, engine_name)
    # A view has no row order: sort before comparing.
    assert sorted(r["period_start"] for r in accounting) == [dt.date(2024, 1, 1),
                                                       dt.date(2024, 2, 1),
                                                       dt.date(2024, 3, 1)]
    plans = [("a", dt.date(2024, 1, 1), None, D("120.00"), "ignored")]
    results = run_revenue(engines(engine_name), target, plans, shape="subscriptions",
                          kind="date", interval="year")
    assert [money(r["revenue"]) for r in results["revenue_accounting"]] == [D("10.00")]


def test_activity_and_revenue_in_one_spec():
    text = revenue_spec_text("duckdb").replace("version: 1\n", (
        "version: 1\nactivity:\n  table: raw.app_events\n  user: user_id\n"
        "  timestamp: occurred_at\n"))
    names = [c.view.name for c in compile_spec(parse_spec(text, "both.yml"), "duckdb")]
    assert {"growth_accounting", "revenue_accounting", "customer_revenue"} <= set(names)
    only = [c.view.name for c in compile_spec(parse_spec(revenue_spec_text("duckdb"),
                                                         "r.yml"), "duckdb")]
    assert only == list(("revenue_source_summary", "customer_revenue", "revenue_accounting"))


# --------------------------------------------------------------------------- external check


@pytest.fixture(scope="module")
def cdnow_charges():
    return [(str(customer), day, dollars) for customer, day, _cds, dollars in load_cdnow()]


@pytest.fixture(scope="module")
def cdnow_expected(cdnow_charges):
    return rr.revenue_views(cdnow_charges, "charges", "month")


@pytest.mark.parametrize("engine_name,target", engine_target_pairs(only=BULK_ENGINES))
def test_cdnow_monthly_revenue(engines, engine_name, target, cdnow_charges, cdnow_expected):
    # External check. Source: CDNOW_master.txt, the CDNOW purchase log shipped in the
    # lifetimes package (69,659 purchases by 23,570 customers, 1997-01 to 1998-06), as
    # analysed in Fader, Hardie & Lee (2005), "Counting Your Customers the Easy Way". Read
    # as a charges source (customer, date, dollar value) over the whole log at month grain.
    results = run_revenue(engines(engine_name), target, cdnow_charges, kind="date",
                          grain="month", views=REVENUE_VIEWS)
    accounting, _ = check_views(results, cdnow_expected, engine_name)
    assert len(accounting) == 18  # January 1997 to June 1998
    assert sum(r["amount_total"] for r in accounting) == sum(a for _, _, a in cdnow_charges)
    # Every customer's first purchase is in 1997-Q1 (the paper's cohort), so new revenue
    # after March 1997 comes only from customers whose earlier purchases were all $0.00.
    april = dt.date(1997, 4, 1)
    paid_early = {c for c, d, a in cdnow_charges if a > 0 and d < april}
    bought_early = {c for c, d, _a in cdnow_charges if d < april}
    late = {c for c, d, a in cdnow_charges if a > 0 and d >= april} - paid_early
    assert late <= bought_early  # they did buy in 1997-Q1, for $0.00
    later_new = sum(r["new_customers"] for r in accounting if r["period_start"] >=
                    dt.date(1997, 4, 1))
    assert later_new == len(late)


# --------------------------------------------------------------------------- properties

EXAMPLES = HYPOTHESIS_EXAMPLES
CUSTOMERS = ("acct-1", "acct-2", "acct-3", "acct-4", "acct-5", "acct-6")
PRICES = tuple(D(v) for v in ("10.00", "12.00", "8.00", "5.00", "7.50", "0.01", "99.99",
                              "0.00", "-5.00", "-20.00"))
INTERVALS = ("month", "quarter", "year", "Monthly", "YEARLY", "quarterly", "weekly", None)
ZONES = (None, "America/New_York", "Asia/Kolkata")


def _amounts():
    return st.one_of(st.sampled_from(PRICES),
                     st.decimals(min_value=-50, max_value=500, places=2, allow_nan=False,
                                 allow_infinity=False))


def _maybe(values, none_in=10):
    return st.one_of(st.just(None), values) if none_in == 0 else \
        st.tuples(st.integers(0, none_in - 1), values).map(lambda p: None if p[0] == 0 else p[1])


@st.composite
def _window(draw):
    start = draw(st.one_of(st.sampled_from(EDGE_DATES),
                           st.dates(dt.date(2019, 1, 1), dt.date(2027, 6, 30))))
    return start, start + dt.timedelta(days=draw(st.sampled_from(WINDOW_DAYS)))


def _moments(kind, start, end):
    days = st.dates(start, end)
    if kind == "date":
        return days
    naive = st.builds(dt.datetime.combine, days, st.sampled_from(
        (dt.time(0, 0), dt.time(12, 0), dt.time(23, 59, 59), dt.time(4, 30))))
    return naive if kind == "timestamp" else naive.map(lambda t: t.replace(tzinfo=dt.UTC))


@st.composite
def charge_tables(draw, kind):
    start, end = draw(_window())
    row = st.tuples(_maybe(st.sampled_from(CUSTOMERS[:draw(st.integers(1, 6))])),
                    _maybe(_moments(kind, start, end)), _maybe(_amounts()),
                    st.sampled_from(("EUR",) * 9 + ("USD",)))
    return draw(st.lists(row, max_size=40))


@st.composite
def subscription_tables(draw, kind):
    start, end = draw(_window())
    rows = []
    for _ in range(draw(st.integers(0, 12))):
        first = draw(_maybe(_moments(kind, start, end), 15))
        length = draw(st.one_of(st.none(), st.integers(-20, 400)))
        last = None if first is None or length is None else first + dt.timedelta(days=length)
        rows.append((draw(_maybe(st.sampled_from(CUSTOMERS[:4]), 15)), first, last,
                     draw(_maybe(_amounts(), 15)), draw(st.sampled_from(INTERVALS)),
                     draw(st.sampled_from(("EUR",) * 9 + ("USD",)))))
    return rows


@st.composite
def subscription_histories(draw, kind):
    """Per customer, a chain of subscriptions: each ends on any day and is followed by a
    change of amount (the next starts the day it ends), a pause (it starts later) or an
    overlapping add-on; the last may run. Then a few rows of subscription_tables (NULLs,
    unknown intervals, ends before starts, other currencies)."""
    start, _end = draw(_window())
    rows = []
    for customer in CUSTOMERS[:draw(st.integers(1, 4))]:
        day = start + dt.timedelta(days=draw(st.integers(0, 60)))
        for _ in range(draw(st.integers(1, 4))):
            length = draw(st.one_of(st.none(), st.integers(1, 200)))
            end = None if length is None else day + dt.timedelta(days=length)
            moment = _moment_on(kind, draw)
            rows.append((customer, moment(day), None if end is None else moment(end),
                         draw(_amounts()), draw(st.sampled_from(INTERVALS[:6])), "EUR"))
            if end is None:
                break
            day = end + dt.timedelta(days=draw(st.sampled_from((0, 0, 1, 17, 45, -10))))
    return rows + draw(subscription_tables(kind))[:3]


def _moment_on(kind, draw):
    """A function turning a date into a value of ``kind`` at one drawn time of day."""
    if kind == "date":
        return lambda day: day
    time = draw(st.sampled_from((dt.time(0, 0), dt.time(12, 0), dt.time(23, 59, 59))))
    zone = dt.UTC if kind == "timestamptz" else None
    return lambda day: dt.datetime.combine(day, time, tzinfo=zone)


def _zone(draw, target, kind):
    if kind == "date" or support(TARGETS[target], "revenue.timezone")[0] == "unsupported":
        return None
    return draw(st.sampled_from(ZONES))


TABLES = {"charges": charge_tables, "recognized": subscription_tables,
          "run_rate": subscription_histories}


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("shape,measure", [("charges", None), ("subscriptions", "recognized"),
                                           ("subscriptions", "run_rate")])
def test_random_tables_match_reference(engines, engine_name, target, shape, measure):
    engine = engines(engine_name)
    tables = TABLES[measure or shape]

    @settings(max_examples=EXAMPLES[engine_name])
    @given(data=st.data(), grain=st.sampled_from(GRAINS),
           kind=st.sampled_from(("timestamp", "timestamptz", "date")))
    def check(data, grain, kind):
        rows = data.draw(tables(kind))
        zone = _zone(data.draw, target, kind)
        results = run_revenue(engine, target, rows, shape=shape, kind=kind, grain=grain[0],
                              week_start=grain[1], timezone=zone, where=EUR, measure=measure)
        expected = rr.revenue_views(rows, shape, grain[0], grain[1], zone,
                                    keep_currency="EUR", measure=measure)
        check_views(results, expected, engine_name)

    check()
