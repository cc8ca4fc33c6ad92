"""Self-checks of the plain-Python growth accounting reference."""

from __future__ import annotations

import sys
from collections import Counter
from datetime import UTC, date, datetime, timedelta, timezone
from decimal import Decimal

import pytest
import strategies
from cdnow import cdnow_path, load_cdnow
from hypothesis import given, settings
from hypothesis import strategies as st
from reference import (
    FIXTURE_RUNS,
    FIXTURES_DIR,
    GRAINS,
    WEEKDAYS,
    assert_identities,
    excluded_counts,
    fixture_events,
    fixture_expectations,
    growth_accounting,
    in_valid_range,
    local_date,
    next_period_start,
    out_of_range_count,
    period_end,
    period_start,
    read_expected,
    read_fixture_events,
    user_activity,
    user_states,
)

FAST = settings(max_examples=25, deadline=None, database=None)


def days(first, last):
    """Every date from first to last inclusive."""
    return [first + timedelta(days=n) for n in range((last - first).days + 1)]


def growth_table(rows):
    """Rows as (period, active, previous, new, retained, resurrected, churned) tuples."""
    keys = (
        "period_start",
        "active_users",
        "previous_active_users",
        "new_users",
        "retained_users",
        "resurrected_users",
        "churned_users",
    )
    return [tuple(row[k] for k in keys) for row in rows]


# ---------------------------------------------------------------- calendar


def test_iso_week_start_matches_isocalendar_2015_to_2030():
    # Source: ISO 8601 weeks start on Monday; Python's datetime docs define
    # date.isocalendar() and date.fromisocalendar() by ISO 8601.
    for d in days(date(2015, 1, 1), date(2030, 12, 31)):
        iso_year, iso_week, _ = d.isocalendar()
        assert period_start(d, "week") == date.fromisocalendar(iso_year, iso_week, 1), d


def test_every_week_start_lands_on_its_weekday_within_six_days():
    for week_start in WEEKDAYS:
        for d in days(date(2020, 12, 20), date(2021, 1, 20)):
            start = period_start(d, "week", week_start)
            assert start.strftime("%A").lower() == week_start
            assert 0 <= (d - start).days <= 6
            assert next_period_start(d, "week", week_start) == start + timedelta(days=7)


def test_iso_week_53_years():
    # Source: Python's datetime docs (isocalendar); 2020 and 2026 have an ISO week 53.
    assert date(2020, 12, 31).isocalendar()[:2] == (2020, 53)
    assert date(2026, 12, 31).isocalendar()[:2] == (2026, 53)
    assert period_start(date(2021, 1, 3), "week") == date(2020, 12, 28)
    assert period_start(date(2027, 1, 3), "week") == date(2026, 12, 28)
    assert next_period_start(date(2020, 12, 28), "week") == date(2021, 1, 4)


def test_sunday_weeks_across_2020_2021_year_end_by_hand():
    # 2020-12-27 and 2021-01-03 are Sundays.
    assert period_start(date(2020, 12, 26), "week", "sunday") == date(2020, 12, 20)
    for d in days(date(2020, 12, 27), date(2021, 1, 2)):
        assert period_start(d, "week", "sunday") == date(2020, 12, 27), d
    assert period_start(date(2021, 1, 3), "week", "sunday") == date(2021, 1, 3)
    assert next_period_start(date(2020, 12, 27), "week", "sunday") == date(2021, 1, 3)
    assert period_end(date(2020, 12, 30), "week", "sunday") == date(2021, 1, 3)


def test_leap_days():
    assert next_period_start(date(2020, 2, 28), "day") == date(2020, 2, 29)
    assert next_period_start(date(2020, 2, 29), "day") == date(2020, 3, 1)
    assert next_period_start(date(2021, 2, 28), "day") == date(2021, 3, 1)
    assert period_start(date(2020, 2, 29), "month") == date(2020, 2, 1)
    assert period_end(date(2024, 2, 1), "month") == date(2024, 3, 1)
    assert period_start(date(2024, 2, 29), "quarter") == date(2024, 1, 1)
    assert period_start(date(2020, 2, 29), "week") == date(2020, 2, 24)  # Saturday
    assert period_start(date(2024, 2, 29), "week", "sunday") == date(2024, 2, 25)  # Thursday
    assert period_start(date(2024, 2, 29), "year") == date(2024, 1, 1)


def test_quarter_starts():
    expected = {1: 1, 2: 1, 3: 1, 4: 4, 5: 4, 6: 4, 7: 7, 8: 7, 9: 7, 10: 10, 11: 10, 12: 10}
    for month, first_month in expected.items():
        assert period_start(date(2023, month, 15), "quarter") == date(2023, first_month, 1)
    assert next_period_start(date(2023, 10, 1), "quarter") == date(2024, 1, 1)
    assert next_period_start(date(2023, 12, 1), "month") == date(2024, 1, 1)
    assert next_period_start(date(2023, 1, 1), "year") == date(2024, 1, 1)


def test_calendar_argument_errors():
    with pytest.raises(ValueError):
        period_start(date(2023, 1, 1), "fortnight")
    with pytest.raises(ValueError):
        period_start(date(2023, 1, 1), "week", "mon")
    with pytest.raises(TypeError):
        period_start(datetime(2023, 1, 1), "day")


def test_local_date():
    naive = datetime(2021, 3, 14, 3, 30)
    assert local_date(naive) == date(2021, 3, 14)
    assert local_date(naive, "America/New_York") == date(2021, 3, 13)
    aware = datetime(2021, 3, 14, 23, 0, tzinfo=timezone(timedelta(hours=-5)))
    assert local_date(aware) == date(2021, 3, 14)  # its own offset
    assert local_date(aware, "UTC") == date(2021, 3, 15)
    assert local_date(date(2021, 3, 14)) == date(2021, 3, 14)
    with pytest.raises(ValueError):
        local_date(date(2021, 3, 14), "America/New_York")


# ---------------------------------------------------------------- properties


def check_generated(data, grain, week_start="monday", tz=None):
    """Identities and internal consistency of the reference on one dataset."""
    rows = growth_accounting(data, grain, week_start, tz)
    assert_identities(rows)
    present = [(u, ts) for u, ts in data if u is not None and ts is not None]
    included = [(u, ts) for u, ts in present if in_valid_range(ts, tz)]
    assert len(included) + out_of_range_count(data, tz) == len(present)
    activity = user_activity(data, grain, week_start, tz)
    assert sum(activity.values()) == len(included)
    assert sum(r["new_users"] for r in rows) == len({u for u, _ in included})
    periods = [r["period_start"] for r in rows]
    assert all(
        next_period_start(a, grain, week_start) == b
        for a, b in zip(periods, periods[1:], strict=False)
    )
    states = user_states(data, grain, week_start, tz)
    assert {(u, p) for u, p, s in states if s != "churned"} == set(activity)
    for user, p, state in states:
        if state == "churned":
            assert (user, p) not in activity and p <= periods[-1]


@settings(max_examples=40, deadline=None, database=None)
@given(data=strategies.events(), week_start=strategies.week_starts())
def test_identities_hold_on_generated_data_for_every_grain(data, week_start):
    for grain in GRAINS:
        check_generated(data, grain, week_start)


@FAST
@given(
    data=strategies.events(kind="timestamp"),
    grain=strategies.grains(),
    week_start=strategies.week_starts(),
    tz=strategies.timezones(),
)
def test_identities_hold_with_a_timezone(data, grain, week_start, tz):
    check_generated(data, grain, week_start, tz)


@FAST
@given(data=st.data(), kind=st.sampled_from(["timestamptz", "date"]), grain=strategies.grains())
def test_identities_hold_for_other_kinds_and_int_users(data, kind, grain):
    check_generated(data.draw(strategies.events(kind=kind, user_type=int)), grain)


def test_empty_and_all_null_input():
    assert growth_accounting([], "month") == []
    assert user_states([(None, datetime(2023, 1, 1)), ("a", None)], "month") == set()


def test_excluded_counts_put_a_row_with_both_null_under_null_user():
    rows = [(None, None), (None, date(2023, 1, 1)), ("a", None), ("a", date(2023, 1, 1))]
    assert excluded_counts(rows) == {"null_user": 2, "null_timestamp": 1}


def test_assert_identities_names_period_and_identity():
    row = growth_accounting([("a", date(2023, 1, 1))], "month")[0]
    row["churned_users"] = 1
    with pytest.raises(
        AssertionError,
        match=r"period 2023-01-01: identity active == previous \+ new \+ resurrected - churned",
    ):
        assert_identities([row])


# ---------------------------------------------------------------- hand-computed lifecycle


# Derived by hand in fixtures/lifecycle/README.md (push_received rows filtered out).
LIFECYCLE_MONTHS = [
    # period, active, previous, new, retained, resurrected, churned
    (date(2023, 1, 1), 2, 0, 2, 0, 0, 0),  # ana, ben new
    (date(2023, 2, 1), 2, 2, 1, 1, 0, 1),  # hal new, ana retained, ben churned
    (date(2023, 3, 1), 1, 2, 1, 0, 0, 2),  # cy new, ana and hal churned
    (date(2023, 4, 1), 1, 1, 0, 0, 1, 1),  # hal resurrected, cy churned
    (date(2023, 5, 1), 1, 1, 0, 0, 1, 1),  # ana resurrected after 2 months, hal churned
    (date(2023, 6, 1), 2, 1, 1, 1, 0, 0),  # dee new (3 duplicate events), ana retained
    (date(2023, 7, 1), 0, 2, 0, 0, 0, 2),  # empty month: ana and dee churned
    (date(2023, 8, 1), 0, 0, 0, 0, 0, 0),  # empty month
    (date(2023, 9, 1), 2, 0, 1, 0, 1, 0),  # eli new, cy resurrected after 5 months
    (date(2023, 10, 1), 2, 2, 0, 1, 1, 1),  # eli retained, ana resurrected, cy churned
]
# quick_ratio, retention_rate, churn_rate per month, Jan..Oct
LIFECYCLE_RATIOS = [
    (None, None, None),
    (1.0, 0.5, 0.5),
    (0.5, 0.0, 1.0),
    (1.0, 0.0, 1.0),
    (1.0, 0.0, 1.0),
    (None, 1.0, 0.0),
    (0.0, 0.0, 1.0),
    (None, None, None),
    (None, None, None),
    (1.0, 0.5, 0.5),
]


def test_lifecycle_month_by_hand():
    events = fixture_events("lifecycle")
    rows = growth_accounting(events, "month")
    assert growth_table(rows) == LIFECYCLE_MONTHS
    assert_identities(rows)
    ratios = [(r["quick_ratio"], r["retention_rate"], r["churn_rate"]) for r in rows]
    assert ratios == LIFECYCLE_RATIOS
    # Newest event 2023-10-31T23:59:59.999999 is on the last day of October.
    assert [r["period_status"] for r in rows] == ["complete"] * 10
    assert growth_accounting(events, "quarter")[-1]["period_status"] == "in_progress"


def test_lifecycle_states_of_ana_by_hand():
    states = user_states(fixture_events("lifecycle"), "month")
    ana = sorted((p.month, s) for u, p, s in states if u == "ana")
    assert ana == [
        (1, "new"),
        (2, "retained"),
        (3, "churned"),
        (5, "resurrected"),
        (6, "retained"),
        (7, "churned"),
        (10, "resurrected"),
    ]
    assert sorted((p.month, s) for u, p, s in states if u == "ben") == [(1, "new"), (2, "churned")]
    assert not any(u in ("fay", "gus") for u, _, _ in states)


def test_lifecycle_excluded_rows_and_duplicates():
    rows = read_fixture_events(FIXTURES_DIR / "lifecycle" / "events.csv")
    assert excluded_counts([(u, ts) for u, ts, _ in rows]) == {"null_user": 2, "null_timestamp": 2}
    assert user_activity(fixture_events("lifecycle"), "month")[("dee", date(2023, 6, 1))] == 3


# ---------------------------------------------------------------- DST


DST_EVENTS = [
    ("kim", datetime(2021, 3, 14, 3, 30)),  # UTC Sunday 3/14; New York Saturday 3/13 22:30 EST
    ("kim", datetime(2021, 3, 15, 3, 59, 59)),  # New York 3/14 23:59:59 EDT (after spring-forward)
    ("lou", datetime(2021, 11, 7, 5, 30)),  # New York 11/7 01:30 EDT
    ("lou", datetime(2021, 11, 7, 6, 30)),  # New York 11/7 01:30 EST (repeated hour)
    ("max", datetime(2021, 11, 8, 4, 30)),  # UTC Monday 11/8; New York Sunday 11/7 23:30 EST
]


def test_dst_local_dates_differ_from_utc_dates():
    ny = [local_date(ts, "America/New_York") for _, ts in DST_EVENTS]
    utc = [local_date(ts) for _, ts in DST_EVENTS]
    assert ny == [
        date(2021, 3, 13),
        date(2021, 3, 14),
        date(2021, 11, 7),
        date(2021, 11, 7),
        date(2021, 11, 7),
    ]
    assert utc == [
        date(2021, 3, 14),
        date(2021, 3, 15),
        date(2021, 11, 7),
        date(2021, 11, 7),
        date(2021, 11, 8),
    ]


def test_dst_states_at_day_grain():
    tz_states = user_states(DST_EVENTS, "day", timezone="America/New_York")
    assert ("kim", date(2021, 3, 13), "new") in tz_states
    assert ("kim", date(2021, 3, 14), "retained") in tz_states
    assert ("max", date(2021, 11, 7), "new") in tz_states
    assert user_states(DST_EVENTS, "day") >= {
        ("kim", date(2021, 3, 14), "new"),
        ("max", date(2021, 11, 8), "new"),
    }
    sunday_weeks = user_activity(DST_EVENTS, "week", "sunday", "America/New_York")
    assert sunday_weeks[("kim", date(2021, 3, 7))] == 1  # Saturday 3/13 belongs to the week of 3/7
    assert sunday_weeks[("max", date(2021, 11, 7))] == 1


def test_dst_fixture_timestamptz_variant_matches_naive_utc():
    naive = fixture_events("dst_new_york")
    aware = fixture_events("dst_new_york", "events_tz.csv", kind="timestamptz")
    assert all(ts.utcoffset() == timedelta(0) for _, ts in aware)
    for tz in (None, "America/New_York"):
        for grain, week_start in (("day", "monday"), ("week", "monday"), ("week", "sunday")):
            assert growth_accounting(aware, grain, week_start, tz) == growth_accounting(
                naive, grain, week_start, tz
            )
            assert user_states(aware, grain, week_start, tz) == user_states(
                naive, grain, week_start, tz
            )


# ---------------------------------------------------------------- quick ratio


def monthly_events(month, users):
    """One event on the 10th of 2023-``month`` for each user."""
    return [(u, date(2023, month, 10)) for u in users]


def test_quick_ratio_4_5_strong_subscription_business():
    # Common practice: a quick ratio well above 1 (e.g. 4) marks a strong
    # subscription business. Here new 9 + resurrected 0 over churned 2 = 4.5.
    old = [f"o{i}" for i in range(10)]
    events = monthly_events(1, old) + monthly_events(2, old[:8] + [f"n{i}" for i in range(9)])
    last = growth_accounting(events, "month")[-1]
    assert (last["new_users"], last["resurrected_users"], last["churned_users"]) == (9, 0, 2)
    assert last["quick_ratio"] == 4.5


def test_quick_ratio_1_6_consumer_app_near_one():
    # Common practice: consumer apps often sit near a quick ratio of 1.
    # Here new 5 + resurrected 3 = 8 over churned 5 = 1.6.
    early = ["r1", "r2", "r3"]
    users = [f"u{i}" for i in range(10)]
    events = (
        monthly_events(1, early)
        + monthly_events(2, users)
        + monthly_events(3, users[:5] + early + [f"n{i}" for i in range(5)])
    )
    last = growth_accounting(events, "month")[-1]
    assert (last["new_users"], last["resurrected_users"], last["churned_users"]) == (5, 3, 5)
    assert last["quick_ratio"] == 1.6


# ---------------------------------------------------------------- CDNOW


@pytest.fixture(scope="module")
def cdnow():
    return load_cdnow()


def test_cdnow_is_read_without_importing_lifetimes():
    assert cdnow_path().name == "CDNOW_master.txt"
    assert "lifetimes" not in sys.modules


def test_cdnow_counts(cdnow):
    # Row count: the file's own (69,660 lines including the header).
    assert len(cdnow) == 69_659
    # Source: Fader, Hardie & Lee (2005), "Counting your customers the easy
    # way", Marketing Science: 23,570 customers (count recalled from memory).
    assert len({customer for customer, _, _, _ in cdnow}) == 23_570
    assert cdnow[0] == (1, date(1997, 1, 1), 1, Decimal("11.77"))
    assert str(cdnow[1][3]) == "12.00"  # kept exactly as written in the file


def test_cdnow_month_growth(cdnow):
    # Source: Fader, Hardie & Lee (2005): the cohort made its first purchase
    # in the first quarter of 1997 and was followed to the end of June 1998
    # (recalled from memory; the file agrees).
    first_purchase = {}
    for customer, day, _, _ in cdnow:
        first_purchase[customer] = min(day, first_purchase.get(customer, day))
    assert min(first_purchase.values()) >= date(1997, 1, 1)
    assert max(first_purchase.values()) <= date(1997, 3, 31)

    rows = growth_accounting([(c, d) for c, d, _, _ in cdnow], "month")
    assert_identities(rows)
    assert rows[0]["period_start"] == date(1997, 1, 1)
    assert rows[-1]["period_start"] == date(1998, 6, 1)
    assert len(rows) == 18
    assert all(r["new_users"] == 0 for r in rows if r["period_start"] >= date(1997, 4, 1))
    assert sum(r["new_users"] for r in rows) == 23_570
    assert rows[-1]["period_status"] == "complete"  # last purchase date 1998-06-30


# ---------------------------------------------------------------- fixture files


@pytest.mark.parametrize("name", sorted(FIXTURE_RUNS))
def test_fixture_expected_files_match_the_reference(name):
    folder = FIXTURES_DIR / name
    expected = fixture_expectations(name)
    on_disk = {str(p.relative_to(folder)) for p in (folder / "expected").glob("*.csv")}
    assert on_disk == set(expected), "stale or missing files: run python tests/reference.py"
    for relative, text in expected.items():
        assert (folder / relative).read_text(encoding="utf-8") == text, relative
    assert (folder / "README.md").is_file()


@pytest.mark.parametrize("name", sorted(FIXTURE_RUNS))
def test_fixture_sizes_and_identities(name):
    rows = read_fixture_events(FIXTURES_DIR / name / "events.csv")
    assert 5 <= len(rows) <= 40
    for path in (FIXTURES_DIR / name / "expected").glob("growth_accounting_*.csv"):
        assert_identities(read_expected(path))


def test_read_expected_types():
    rows = read_expected(FIXTURES_DIR / "lifecycle" / "expected" / "growth_accounting_month.csv")
    assert rows[0]["period_start"] == date(2023, 1, 1)
    assert rows[0]["quick_ratio"] is None and rows[1]["quick_ratio"] == 1.0
    assert rows[1]["active_users"] == 2 and rows[1]["period_status"] == "complete"


def test_read_fixture_events_kinds(tmp_path):
    path = tmp_path / "events.csv"
    path.write_text("user_id,occurred_at,event_name\na,2021-03-14T03:30:00+00:00,x\n,,\n")
    assert read_fixture_events(path, "timestamptz") == [
        ("a", datetime(2021, 3, 14, 3, 30, tzinfo=UTC), "x"),
        (None, None, None),
    ]
    assert read_fixture_events(path, "date")[0][1] == date(2021, 3, 14)
    with pytest.raises(ValueError):
        read_fixture_events(path, "timestamp")


def test_activity_counts_duplicates():
    ts = datetime(2023, 1, 1)
    assert user_activity([("a", ts), ("a", ts), ("b", ts)], "day") == Counter(
        {("a", date(2023, 1, 1)): 2, ("b", date(2023, 1, 1)): 1}
    )
