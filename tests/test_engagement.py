"""engagement_depth on every engine against tests/reference_cohorts.py, and its consistency
with growth accounting."""

from __future__ import annotations

import datetime as dt
import math
from collections import defaultdict

import pytest
import reference as ref
import reference_cohorts as rc
import strategies
from cdnow import load_cdnow
from conftest import HYPOTHESIS_EXAMPLES, engine_target_pairs
from harness import assert_rows_match, run, sorted_rows, view_options
from hypothesis import given, settings

PAIRS = engine_target_pairs()
GRAINS = [("day", "monday"), ("week", "monday"), ("week", "sunday"), ("month", "monday"),
          ("quarter", "monday"), ("year", "monday")]
VIEWS = ("engagement_depth", "growth_accounting")
KEYS = ("period_start", "active_days")
EXAMPLES = HYPOTHESIS_EXAMPLES


def run_engagement(engine, target, events, **spec_args) -> dict[str, list[dict]]:
    """Create the views with engagement enabled; read engagement_depth and growth_accounting."""
    return run(engine, target, events, views=VIEWS, extra=view_options(engagement=True),
               **spec_args)


def assert_consistent(results: dict[str, list[dict]], grain: str, week_start: str) -> None:
    """Per period: one row per day the period holds, users summing to growth accounting's
    active users, shares summing to 1, and a daily-to-period ratio in (0, 1]."""
    growth = {r["period_start"]: r for r in results["growth_accounting"]}
    by_period = defaultdict(list)
    for row in results["engagement_depth"]:
        by_period[row["period_start"]].append(row)
    assert set(by_period) == set(growth)
    for start, rows in by_period.items():
        length = (ref.next_period_start(start, grain, week_start) - start).days
        assert sorted(r["active_days"] for r in rows) == list(range(1, length + 1)), start
        active = growth[start]["active_users"]
        assert sum(r["users"] for r in rows) == active, start
        assert {r["period_active_users"] for r in rows} == {active}, start
        assert {r["period_status"] for r in rows} == {growth[start]["period_status"]}, start
        if active:
            assert math.isclose(sum(r["share_of_active_users"] for r in rows), 1.0)
            ratio = rows[0]["daily_to_period_ratio"]
            assert 0 < ratio <= 1 + 1e-12, start
            if grain == "day":
                assert ratio == 1.0


def check(results, events, grain, week_start, timezone=None) -> None:
    expected = rc.engagement_depth(events, grain, week_start, timezone)
    assert_rows_match(results["engagement_depth"], expected, KEYS, rc.ENGAGEMENT_COLUMNS)
    assert_consistent(results, grain, week_start)


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("fixture", ["lifecycle", "calendar_edges"])
@pytest.mark.parametrize("grain,week_start", GRAINS)
def test_fixture_matches_reference(engines, engine_name, target, fixture, grain, week_start):
    raw = ref.read_fixture_events(ref.FIXTURES_DIR / fixture / "events.csv")
    drop = ref.FIXTURE_RUNS[fixture]["drop_event"]
    where = f"event_name <> '{drop}'" if drop else None
    results = run_engagement(engines(engine_name), target, raw, grain=grain,
                             week_start=week_start, where=where)
    check(results, ref.fixture_events(fixture), grain, week_start)


# The worked example of docs/cohorts.md: a week (Monday 2024-03-04 to Sunday 2024-03-10)
# with ann active Mon, Tue, Wed, bob on Tue and cat on Tue and Sun, then bob once on
# Monday 2024-03-11, so the second week is in progress with one observed day.
WORKED = [("ann", dt.datetime(2024, 3, 4, 9)), ("ann", dt.datetime(2024, 3, 5, 9)),
          ("ann", dt.datetime(2024, 3, 5, 18)), ("ann", dt.datetime(2024, 3, 6, 9)),
          ("bob", dt.datetime(2024, 3, 5, 12)), ("cat", dt.datetime(2024, 3, 5, 8)),
          ("cat", dt.datetime(2024, 3, 10, 20)), ("bob", dt.datetime(2024, 3, 11, 7))]


def test_worked_example_by_hand():
    rows = rc.engagement_depth(WORKED, "week")
    first = [r for r in rows if r["period_start"] == dt.date(2024, 3, 4)]
    assert [r["users"] for r in first] == [1, 1, 1, 0, 0, 0, 0]  # bob 1 day, cat 2, ann 3
    assert [r["share_of_active_users"] for r in first][:3] == [1 / 3] * 3
    # daily actives Mon..Sun: 1, 3, 1, 0, 0, 0, 1 -> average 6/7; 3 weekly actives
    assert first[0]["daily_to_period_ratio"] == 6 / (7 * 3)
    second = [r for r in rows if r["period_start"] == dt.date(2024, 3, 11)]
    assert second[0]["users"] == 1 and second[0]["observed_days"] == 1
    assert second[0]["daily_to_period_ratio"] == 1.0
    assert second[0]["period_status"] == "in_progress"


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_worked_example(engines, engine_name, target):
    results = run_engagement(engines(engine_name), target, WORKED, grain="week")
    check(results, WORKED, "week", "monday")


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_random_data_matches_reference(engines, engine_name, target):
    engine = engines(engine_name)

    @settings(max_examples=EXAMPLES[engine_name])
    @given(events=strategies.events(), grain=strategies.grains(),
           week_start=strategies.week_starts())
    def run_check(events, grain, week_start):
        results = run_engagement(engine, target, events, grain=grain, week_start=week_start)
        check(results, events, grain, week_start)

    run_check()


# External data: the CDNOW purchase log (CDNOW_master.txt in the lifetimes package; Fader,
# Hardie & Lee 2005). Only consistency is checked here: the reference gives the numbers.
@pytest.mark.parametrize("engine_name,target", engine_target_pairs(only=("duckdb",)))
def test_cdnow_monthly_depth(engines, engine_name, target):
    purchases = [(str(c), day) for c, day, _cds, _dollars in load_cdnow()]
    results = run_engagement(engines(engine_name), target, purchases, kind="date",
                             grain="month")
    check(results, purchases, "month", "monday")
    january = sorted_rows([r for r in results["engagement_depth"]
                           if r["period_start"] == dt.date(1997, 1, 1)], KEYS)
    assert len(january) == 31
