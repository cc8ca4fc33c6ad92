"""trailing_activity on every engine against tests/reference_cohorts.py, its identities, its
agreement with daily and weekly growth accounting, and the trailing_windows spec key."""

from __future__ import annotations

import datetime as dt

import pytest
import reference as ref
import reference_cohorts as rc
import strategies
from cdnow import load_cdnow
from conftest import HYPOTHESIS_EXAMPLES, engine_target_pairs
from harness import assert_rows_match, run, sorted_rows, spec_text, view_options
from hypothesis import given, settings
from hypothesis import strategies as st

from sqlgen import SpecError, UnsupportedError, parse_spec
from sqlgen.dialects import TARGETS
from sqlgen.support import support

PAIRS = engine_target_pairs()
VIEWS = ("trailing_activity", "growth_accounting")
KEYS = ("window_days", "day")
WINDOWS = (1, 7, 28)
ACCOUNTING = ("active_users", "previous_active_users", "new_users", "retained_users",
              "resurrected_users", "churned_users", "quick_ratio")
EXAMPLES = HYPOTHESIS_EXAMPLES


def run_trailing(engine, target, events, windows=WINDOWS, **spec_args):
    """Create the views with trailing windows; read trailing_activity and growth_accounting."""
    return run(engine, target, events, views=VIEWS, extra=view_options(windows=windows),
               **spec_args)


def assert_identities(rows: list[dict]) -> None:
    """The growth accounting identities, on every day and window."""
    for r in rows:
        assert r["active_users"] == r["new_users"] + r["retained_users"] + r["resurrected_users"]
        assert r["previous_active_users"] == r["retained_users"] + r["churned_users"]
        assert min(r[c] for c in ACCOUNTING[:-1]) >= 0, r


def assert_matches_growth(trailing: list[dict], growth: list[dict], window: int) -> None:
    """A window read on each period's last day equals growth accounting of that period.

    Holds for window 1 against grain day and window 7 against grain week (any week_start:
    the period's last day is where the window ends).
    """
    rows = {r["day"]: r for r in trailing if r["window_days"] == window}
    compared = 0
    for period in growth:
        last_day = period["period_start"] + dt.timedelta(days=window - 1)
        if last_day in rows:
            for column in ACCOUNTING:
                assert rows[last_day][column] == period[column], (last_day, column)
            compared += 1
    full_periods = [p for p in growth if p["period_status"] == "complete"]
    assert compared == len(full_periods)


def check(results, events, windows=WINDOWS, timezone=None) -> None:
    expected = rc.trailing_activity(events, windows, timezone)
    assert_rows_match(results["trailing_activity"], expected, KEYS, rc.TRAILING_COLUMNS)
    assert_identities(results["trailing_activity"])


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("fixture", ["lifecycle", "calendar_edges"])
@pytest.mark.parametrize("grain,week_start,window", [("day", "monday", 1),
                                                     ("week", "monday", 7),
                                                     ("week", "thursday", 7)])
def test_fixture_matches_reference_and_growth(engines, engine_name, target, fixture, grain,
                                              week_start, window):
    raw = ref.read_fixture_events(ref.FIXTURES_DIR / fixture / "events.csv")
    drop = ref.FIXTURE_RUNS[fixture]["drop_event"]
    where = f"event_name <> '{drop}'" if drop else None
    results = run_trailing(engines(engine_name), target, raw, grain=grain,
                           week_start=week_start, where=where)
    check(results, ref.fixture_events(fixture))
    assert_matches_growth(results["trailing_activity"], results["growth_accounting"], window)


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("kind,events_file", [("timestamp", "events.csv"),
                                              ("timestamptz", "events_tz.csv")])
def test_time_zone_fixture(engines, engine_name, target, kind, events_file):
    """Days are local dates in the spec's zone (the dst_new_york fixture)."""
    raw = ref.read_fixture_events(ref.FIXTURES_DIR / "dst_new_york" / events_file, kind)
    zone = "America/New_York"
    if support(TARGETS[target], "activity.timezone")[0] == "unsupported":
        with pytest.raises(UnsupportedError):
            run_trailing(engines(engine_name), target, raw, kind=kind, timezone=zone)
        return
    results = run_trailing(engines(engine_name), target, raw, kind=kind, grain="day",
                           timezone=zone)
    check(results, [(u, ts) for u, ts, _name in raw], timezone=zone)
    assert_matches_growth(results["trailing_activity"], results["growth_accounting"], 1)


# The worked example of docs/cohorts.md, window 3: ann on days 1 and 2, bob on days 1 and
# 8, cat on day 5 (days of March 2024).
WORKED = [("ann", dt.datetime(2024, 3, 1, 9)), ("ann", dt.datetime(2024, 3, 2, 9)),
          ("bob", dt.datetime(2024, 3, 1, 10)), ("bob", dt.datetime(2024, 3, 8, 10)),
          ("cat", dt.datetime(2024, 3, 5, 10))]
WORKED_TABLE = {  # day: (active, previous, new, retained, resurrected, churned)
    1: (2, 0, 2, 0, 0, 0), 2: (2, 0, 2, 0, 0, 0), 3: (2, 0, 2, 0, 0, 0),
    4: (1, 2, 0, 1, 0, 1), 5: (1, 2, 1, 0, 0, 2), 6: (1, 2, 1, 0, 0, 2),
    7: (1, 1, 1, 0, 0, 1), 8: (1, 1, 0, 0, 1, 1),
}
WORKED_QUICK = [None, None, None, 0.0, 0.5, 0.5, 1.0, 1.0]


def test_worked_example_by_hand():
    rows = rc.trailing_activity(WORKED, [3])
    got = {r["day"].day: tuple(r[c] for c in ACCOUNTING[:-1]) for r in rows}
    assert got == WORKED_TABLE
    assert [r["quick_ratio"] for r in rows] == WORKED_QUICK


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_worked_example(engines, engine_name, target):
    results = run_trailing(engines(engine_name), target, WORKED, windows=(3,), grain="day")
    rows = sorted_rows(results["trailing_activity"], KEYS)
    assert {r["day"].day: tuple(r[c] for c in ACCOUNTING[:-1]) for r in rows} == WORKED_TABLE
    assert [r["quick_ratio"] for r in rows] == WORKED_QUICK


def window_lists():
    """One to three distinct window lengths, favouring short ones and the spec's bound."""
    lengths = st.one_of(st.integers(1, 10), st.sampled_from((28, 30, 31, 366)))
    return st.lists(lengths, min_size=1, max_size=3, unique=True)


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_random_data_matches_reference(engines, engine_name, target):
    engine = engines(engine_name)

    @settings(max_examples=EXAMPLES[engine_name])
    @given(events=strategies.events(), windows=window_lists())
    def run_check(events, windows):
        results = run_trailing(engine, target, events, windows=tuple(windows), grain="week")
        check(results, events, tuple(windows))
        if 7 in windows:
            assert_matches_growth(results["trailing_activity"], results["growth_accounting"], 7)

    run_check()


@pytest.mark.parametrize("engine_name,target", engine_target_pairs(only=("duckdb",)))
def test_cdnow_windows(engines, engine_name, target):
    """The CDNOW purchase log (CDNOW_master.txt in the lifetimes package; Fader, Hardie &
    Lee 2005): 546 days, 7- and 28-day windows against the reference and weekly accounting."""
    purchases = [(str(c), day) for c, day, _cds, _dollars in load_cdnow()]
    results = run_trailing(engines(engine_name), target, purchases, windows=(7, 28),
                           kind="date", grain="week", week_start="wednesday")
    check(results, purchases, (7, 28))
    assert_matches_growth(results["trailing_activity"], results["growth_accounting"], 7)
    assert len(results["trailing_activity"]) == 2 * 546  # 1997-01-01 to 1998-06-30


def spec_problems(extra: str) -> list[str]:
    with pytest.raises(SpecError) as info:
        parse_spec(spec_text("duckdb", extra=extra), "s.yml")
    return [str(p) for p in info.value.problems]


@pytest.mark.parametrize("extra,message", [
    ("trailing_windows: 7\n", "expected a list of window lengths in days, e.g. [7, 28]; got 7"),
    ("trailing_windows: [7, 0]\n", "window length 0 must be from 1 to 366 days"),
    ("trailing_windows: [400]\n", "window length 400 must be from 1 to 366 days"),
    ("trailing_windows: [7, 7.5]\n", "window length 7.5 is not a whole number of days"),
    ("trailing_windows: ['7']\n", "window length '7' is not a whole number of days"),
    ("trailing_windows: [true]\n", "window length true is not a whole number of days"),
    ("trailing_windows: [28, 7, 28]\n", "window length 28 appears more than once"),
    ("cohorts: yes please\n", "expected true or false, got 'yes please'"),
    ("engagement: 1\n", "expected true or false, got 1"),
])
def test_spec_keys_are_checked(extra, message):
    [problem] = spec_problems(extra)
    assert problem.endswith(message), problem


def test_spec_keys_default_off():
    spec = parse_spec(spec_text("duckdb"), "s.yml")
    assert (spec.cohorts, spec.engagement, spec.trailing_windows) == (False, False, ())
    spec = parse_spec(spec_text("duckdb", extra=view_options(True, True, (28, 7))), "s.yml")
    assert (spec.cohorts, spec.engagement, spec.trailing_windows) == (True, True, (28, 7))
