"""cohort_retention and revenue_cohorts on every engine against tests/reference_cohorts.py,
their consistency with growth accounting, and external checks (the CDNOW log and a published
worked example)."""

from __future__ import annotations

import datetime as dt
from collections import Counter, defaultdict
from decimal import Decimal

import pytest
import reference as ref
import reference_cohorts as rc
import reference_revenue as rr
import strategies
from cdnow import load_cdnow
from conftest import BULK_ENGINES, HYPOTHESIS_EXAMPLES, engine_target_pairs
from harness import assert_rows_match, run, run_revenue, sorted_rows, storable_rows, view_options
from hypothesis import given, settings
from hypothesis import strategies as st

PAIRS = engine_target_pairs()
D = Decimal
GRAINS = [("day", "monday"), ("week", "monday"), ("week", "sunday"), ("month", "monday"),
          ("quarter", "monday"), ("year", "monday")]
VIEWS = ("cohort_retention", "growth_accounting", "user_states", "user_activity")
KEYS = ("cohort_start", "age")
EXAMPLES = HYPOTHESIS_EXAMPLES


def run_cohorts(engine, target, events, **spec_args) -> dict[str, list[dict]]:
    """Create the views with cohorts enabled and read back cohort_retention and growth views."""
    return run(engine, target, events, views=VIEWS, extra=view_options(cohorts=True),
               **spec_args)


def assert_consistent(results: dict[str, list[dict]]) -> None:
    """cohort_retention agrees with growth accounting and user_states of the same data.

    - age 0 of each cohort is the whole cohort and equals that period's new users;
    - the age-1 diagonal equals the next period's retained users coming from the cohort;
    - summed over cohorts, each period's active users equal growth accounting's.
    """
    cells = results["cohort_retention"]
    growth = {r["period_start"]: r for r in results["growth_accounting"]}
    cohort_of = {}
    for row in results["user_activity"]:
        key = str(row["user_id"])
        cohort_of[key] = min(cohort_of.get(key, row["period_start"]), row["period_start"])
    retained_from = Counter((cohort_of[str(r["user_id"])], r["period_start"])
                            for r in results["user_states"] if r["state"] == "retained")
    active_sum = defaultdict(int)
    for cell in cells:
        active_sum[cell["period_start"]] += cell["active_users"]
        assert 0 <= cell["active_users"] <= cell["cohort_users"], cell
        if cell["age"] == 0:
            assert cell["active_users"] == cell["cohort_users"], cell
            assert cell["cohort_users"] == growth[cell["period_start"]]["new_users"], cell
        if cell["age"] == 1:
            assert cell["active_users"] == retained_from[(cell["cohort_start"],
                                                          cell["period_start"])], cell
    assert dict(active_sum) == {p: r["active_users"] for p, r in growth.items()}


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("fixture", ["lifecycle", "calendar_edges"])
@pytest.mark.parametrize("grain,week_start", GRAINS)
def test_fixture_matches_reference(engines, engine_name, target, fixture, grain, week_start):
    raw = ref.read_fixture_events(ref.FIXTURES_DIR / fixture / "events.csv")
    drop = ref.FIXTURE_RUNS[fixture]["drop_event"]
    where = f"event_name <> '{drop}'" if drop else None
    results = run_cohorts(engines(engine_name), target, raw, grain=grain, week_start=week_start,
                          where=where)
    expected = rc.cohort_retention(ref.fixture_events(fixture), grain, week_start)
    assert_rows_match(results["cohort_retention"], expected, KEYS, rc.COHORT_COLUMNS)
    assert_consistent(results)


def test_lifecycle_triangle_by_hand():
    """The lifecycle fixture at month grain, derived by hand from its README (see
    docs/cohorts.md): cohorts Jan {ana, ben}, Feb {hal}, Mar {cy}, Jun {dee}, Sep {eli}."""
    rows = rc.cohort_retention(ref.fixture_events("lifecycle"), "month")
    triangle = defaultdict(list)
    for row in rows:
        triangle[row["cohort_start"].month].append(row["active_users"])
    assert triangle == {1: [2, 1, 0, 0, 1, 1, 0, 0, 0, 1], 2: [1, 0, 1, 0, 0, 0, 0, 0, 0],
                        3: [1, 0, 0, 0, 0, 0, 1, 0], 6: [1, 0, 0, 0, 0], 9: [1, 1]}


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_random_data_matches_reference(engines, engine_name, target):
    engine = engines(engine_name)

    @settings(max_examples=EXAMPLES[engine_name])
    @given(events=strategies.events(), grain=strategies.grains(),
           week_start=strategies.week_starts())
    def check(events, grain, week_start):
        results = run_cohorts(engine, target, events, grain=grain, week_start=week_start)
        expected = rc.cohort_retention(events, grain, week_start)
        assert_rows_match(results["cohort_retention"], expected, KEYS, rc.COHORT_COLUMNS)
        assert_consistent(results)

    check()


# External check: the CDNOW purchase log, CDNOW_master.txt as shipped in the lifetimes
# package (Fader, Hardie & Lee 2005, "Counting Your Customers the Easy Way"). Every customer
# made a first purchase in January, February or March 1997, so at month grain there are
# exactly three cohorts. Their sizes (7,846 + 8,476 + 7,248 = 23,570) were counted from the
# file by the reference; the paper is not their source.
CDNOW_COHORTS = {dt.date(1997, 1, 1): 7_846, dt.date(1997, 2, 1): 8_476,
                 dt.date(1997, 3, 1): 7_248}


@pytest.fixture(scope="module")
def purchases():
    return [(str(customer), day) for customer, day, _cds, _dollars in load_cdnow()]


def test_cdnow_reference_cohorts(purchases):
    rows = rc.cohort_retention(purchases, "month")
    sizes = {r["cohort_start"]: r["cohort_users"] for r in rows}
    assert sizes == CDNOW_COHORTS
    assert sum(sizes.values()) == 23_570  # customers in the file
    assert len(rows) == 18 + 17 + 16  # ages up to June 1998, the file's last month


@pytest.mark.parametrize("engine_name,target", engine_target_pairs(only=BULK_ENGINES))
def test_cdnow_monthly_cohorts(engines, engine_name, target, purchases):
    results = run_cohorts(engines(engine_name), target, purchases, kind="date", grain="month")
    cells = results["cohort_retention"]
    assert {r["cohort_start"]: r["cohort_users"] for r in cells} == CDNOW_COHORTS
    assert_rows_match(cells, rc.cohort_retention(purchases, "month"), KEYS, rc.COHORT_COLUMNS)
    assert_consistent(results)


# Published worked example: Fader & Hardie (2014), "A Spreadsheet-Literate Non-Statistician's
# Guide to the Beta-Geometric Model", Table 1: a cohort of 1000 customers on annual
# contracts acquired at the beginning of Year 1, of whom 1000, 631, 468, 382 and 326 are
# still customers in Years 1 to 5 (the note: 631/1000 survive the first renewal). A
# contract that lapses never comes back. Year 1 is placed at 2001 here; the years are ours.
FH_SURVIVORS = (1000, 631, 468, 382, 326)


def fader_hardie_events() -> list[tuple[str, dt.datetime]]:
    """One activity per customer and contract year, realising Table 1 exactly."""
    events = []
    for customer in range(FH_SURVIVORS[0]):
        years = sum(1 for survivors in FH_SURVIVORS if customer < survivors)
        for year in range(years):
            events.append((f"c{customer:04d}", dt.datetime(2001 + year, 3, 1, 12, 0)))
    return events


def test_fader_hardie_reference():
    rows = rc.cohort_retention(fader_hardie_events(), "year")
    assert [r["active_users"] for r in rows] == list(FH_SURVIVORS)
    assert [r["retention_rate"] for r in rows] == [1.0, 0.631, 0.468, 0.382, 0.326]


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_fader_hardie_table(engines, engine_name, target):
    results = run_cohorts(engines(engine_name), target, fader_hardie_events(), grain="year")
    cells = sorted_rows(results["cohort_retention"], KEYS)
    assert [r["cohort_start"] for r in cells] == [dt.date(2001, 1, 1)] * 5
    assert [r["age"] for r in cells] == [0, 1, 2, 3, 4]
    assert [r["cohort_users"] for r in cells] == [1000] * 5
    assert [r["active_users"] for r in cells] == list(FH_SURVIVORS)
    assert [round(r["retention_rate"], 12) for r in cells] == [1.0, 0.631, 0.468, 0.382, 0.326]
    # Contracts never resume, so yearly churn is the drop between the table's columns.
    growth = sorted_rows(results["growth_accounting"], ("period_start",))
    assert [r["churned_users"] for r in growth] == [0, 369, 163, 86, 56]
    assert all(r["resurrected_users"] == 0 for r in growth)
    assert_consistent(results)


# --------------------------------------------------------------------------- revenue cohorts

REVENUE_KEYS = ("cohort_start", "age")


def expected_revenue_cohorts(rows, shape, grain, week_start="monday", keep_currency=None,
                             measure="run_rate"):
    """The reference: tests/reference_revenue.py's customer revenue, then cohorts of it."""
    views = rr.revenue_views(rows, shape, grain, week_start, keep_currency=keep_currency,
                             measure=measure)
    last_date = views["revenue_source_summary"][0]["last_date"]
    return rc.revenue_cohorts(views["customer_revenue"], last_date, grain, week_start)


def run_revenue_cohorts(engine, target, rows, **spec_args) -> list[dict]:
    """Create the revenue views with cohorts enabled; revenue_cohorts, money as Decimal."""
    results = run_revenue(engine, target, rows, views=("revenue_cohorts",),
                          extra="cohorts: true\n", **spec_args)
    money = ("revenue", "cumulative_revenue")
    return [{c: Decimal(repr(v)) if c in money and isinstance(v, float) else v
             for c, v in row.items()} for row in results["revenue_cohorts"]]


def assert_revenue_cohorts_consistent(cells: list[dict]) -> None:
    """Age 0: every customer pays, retention 1; cumulative revenue adds up age by age."""
    by_cohort = defaultdict(list)
    for cell in sorted_rows(cells, REVENUE_KEYS):
        by_cohort[cell["cohort_start"]].append(cell)
    for ages in by_cohort.values():
        assert ages[0]["paying_customers"] == ages[0]["cohort_customers"] > 0
        assert ages[0]["net_revenue_retention"] == 1.0
        total = Decimal(0)
        for cell in ages:
            total += cell["revenue"]
            assert cell["cumulative_revenue"] == total
            assert 0 <= cell["paying_customers"] <= cell["cohort_customers"]


# Hand example (docs/cohorts.md): acme pays 10, 12, 8 in January to March 2024; bolt pays
# 5 in February and April; cato is refunded 3 in January (no revenue) and pays 7 in March.
SEAT_CHARGES = [
    ("acme", dt.date(2024, 1, 3), D("10.00")), ("acme", dt.date(2024, 2, 3), D("12.00")),
    ("acme", dt.date(2024, 3, 3), D("8.00")), ("bolt", dt.date(2024, 2, 9), D("5.00")),
    ("bolt", dt.date(2024, 4, 9), D("5.00")), ("cato", dt.date(2024, 1, 20), D("-3.00")),
    ("cato", dt.date(2024, 3, 20), D("7.00")),
]
SEAT_TABLE = {  # (cohort month, age): (customers, paying, revenue, cumulative, retention)
    (1, 0): (1, 1, "10.00", "10.00", 1.0), (1, 1): (1, 1, "12.00", "22.00", 1.2),
    (1, 2): (1, 1, "8.00", "30.00", 0.8), (1, 3): (1, 0, "0.00", "30.00", 0.0),
    (2, 0): (1, 1, "5.00", "5.00", 1.0), (2, 1): (1, 0, "0.00", "5.00", 0.0),
    (2, 2): (1, 1, "5.00", "10.00", 1.0),
    (3, 0): (1, 1, "7.00", "7.00", 1.0), (3, 1): (1, 0, "0.00", "7.00", 0.0),
}


def seat_table(cells) -> dict:
    """Cells keyed like SEAT_TABLE, money as text of a Decimal rounded to cents."""
    return {(c["cohort_start"].month, c["age"]): (
        c["cohort_customers"], c["paying_customers"], str(D(c["revenue"]).quantize(D("0.01"))),
        str(D(c["cumulative_revenue"]).quantize(D("0.01"))),
        round(c["net_revenue_retention"], 12)) for c in cells}


def test_revenue_cohorts_by_hand():
    assert seat_table(expected_revenue_cohorts(SEAT_CHARGES, "charges", "month")) == SEAT_TABLE


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_revenue_cohorts_hand_example(engines, engine_name, target):
    cells = run_revenue_cohorts(engines(engine_name), target, SEAT_CHARGES, kind="date",
                                grain="month")
    assert seat_table(cells) == SEAT_TABLE
    assert_revenue_cohorts_consistent(cells)


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("fixture,grain,week_start", rr.fixture_cases(GRAINS))
def test_revenue_fixture_matches_reference(engines, engine_name, target, fixture, grain,
                                           week_start):
    shape, measure = rr.REVENUE_FIXTURES[fixture][0], rr.REVENUE_FIXTURES[fixture][3]
    # ClickHouse's Date cannot hold the plans' 0001-01-01 and 9999-12-31 sentinels: there
    # the test runs with the sentinels it can store.
    rows = storable_rows(engine_name, rr.read_fixture_rows(fixture))
    kind = "timestamp" if shape == "charges" else "date"
    cells = run_revenue_cohorts(engines(engine_name), target, rows, shape=shape, kind=kind,
                                grain=grain, week_start=week_start, where="currency = 'EUR'",
                                measure=measure)
    expected = expected_revenue_cohorts(rows, shape, grain, week_start, rr.KEEP_CURRENCY,
                                        measure)
    assert_rows_match(cells, expected, REVENUE_KEYS, rc.REVENUE_COHORT_COLUMNS)
    assert_revenue_cohorts_consistent(cells)


def charges():
    """Small random charges: a few customers, dates near calendar edges, refunds and zeros."""
    amount = st.one_of(st.sampled_from((D("0.00"), D("-3.50"))),
                       st.integers(1, 50_000).map(lambda cents: D(cents).scaleb(-2)))
    day = st.one_of(st.sampled_from(strategies.EDGE_DATES), st.dates(dt.date(2020, 1, 1),
                                                                     dt.date(2021, 6, 30)))
    row = st.tuples(st.sampled_from(("acme", "bolt", "cato", "dune")), day, amount)
    return st.lists(row, max_size=25)


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_revenue_random_charges(engines, engine_name, target):
    engine = engines(engine_name)

    @settings(max_examples=EXAMPLES[engine_name])
    @given(rows=charges(), grain=strategies.grains(), week_start=strategies.week_starts())
    def check(rows, grain, week_start):
        cells = run_revenue_cohorts(engine, target, rows, kind="date", grain=grain,
                                    week_start=week_start)
        expected = expected_revenue_cohorts(rows, "charges", grain, week_start)
        assert_rows_match(cells, expected, REVENUE_KEYS, rc.REVENUE_COHORT_COLUMNS)
        assert_revenue_cohorts_consistent(cells)

    check()


@pytest.mark.parametrize("engine_name,target", engine_target_pairs(only=BULK_ENGINES))
def test_cdnow_revenue_cohorts(engines, engine_name, target):
    """External data: CDNOW_master.txt from the lifetimes package (Fader, Hardie & Lee 2005)
    read as charges at month grain. Cohorts are by first purchase over $0.00, so besides
    January to March 1997 a few later cohorts hold customers whose 1997-Q1 purchases were
    all $0.00; the reference gives the numbers."""
    rows = [(str(c), day, dollars) for c, day, _cds, dollars in load_cdnow()]
    cells = run_revenue_cohorts(engines(engine_name), target, rows, kind="date", grain="month")
    expected = expected_revenue_cohorts(rows, "charges", "month")
    assert_rows_match(cells, expected, REVENUE_KEYS, rc.REVENUE_COHORT_COLUMNS)
    assert_revenue_cohorts_consistent(cells)
    total = sum(a for _c, _d, a in rows if a > 0)
    assert sum(c["revenue"] for c in cells) == total  # every positive month total, once
