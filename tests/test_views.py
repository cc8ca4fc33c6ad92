"""Every view executed on every engine, compared with the plain-Python reference.

Each case runs the generated SQL for a target on the engine that executes it (see
conftest.ENGINE_TARGETS), reads the views back and compares them row by row with
tests/reference.py; the accounting identities are asserted on every result.
"""

from __future__ import annotations

import math

import pytest
import reference as ref
import strategies
from conftest import ENGINE_TARGETS, HYPOTHESIS_EXAMPLES, engine_target_pairs
from harness import run
from hypothesis import given, settings

from sqlgen import UnsupportedError
from sqlgen.dialects import TARGETS
from sqlgen.support import support

PAIRS = engine_target_pairs(every_target=True)
GRAINS = [("day", "monday"), ("week", "monday"), ("week", "sunday"), ("month", "monday"),
          ("quarter", "monday"), ("year", "monday")]
GROWTH_COLUMNS = ref.GROWTH_COLUMNS
# The second target of a shared engine (databricks on Spark) runs the lifecycle fixture at
# the grains whose period arithmetic differs most (day keys, a Sunday week start, months);
# its spelling at every grain is pinned by golden files and re-parsed (test_golden.py).
SECOND_TARGET_GRAINS = {("day", "monday"), ("week", "sunday"), ("month", "monday")}


def _same(a, b) -> bool:
    if isinstance(a, float) or isinstance(b, float):
        return a is not None and b is not None and math.isclose(a, b, rel_tol=1e-12)
    return a == b


def assert_growth_matches(actual: list[dict], expected: list[dict]) -> None:
    """Row-by-row equality on the contract columns; floats to 12 significant digits."""
    got = sorted(actual, key=lambda r: r["period_start"])
    assert [r["period_start"] for r in got] == [r["period_start"] for r in expected]
    for row, want in zip(got, expected):
        for column in GROWTH_COLUMNS:
            assert _same(row[column], want[column]), (row["period_start"], column,
                                                      row[column], want[column])


def assert_states_match(actual: list[dict], expected: set[tuple]) -> None:
    got = {(str(r["user_id"]), r["period_start"], r["state"]) for r in actual}
    want = {(str(u), p, s) for u, p, s in expected}
    assert got == want, (sorted(got - want)[:5], sorted(want - got)[:5])


def assert_activity_matches(actual: list[dict], expected: dict) -> None:
    got = {(str(r["user_id"]), r["period_start"]): r["events"] for r in actual}
    assert got == {(str(u), p): n for (u, p), n in expected.items()}


def check_all(results: dict, events, grain: str, week_start: str, timezone=None) -> None:
    growth = ref.growth_accounting(events, grain, week_start, timezone)
    assert_growth_matches(results["growth_accounting"], growth)
    ref.assert_identities(results["growth_accounting"])
    assert_states_match(results["user_states"], ref.user_states(events, grain, week_start,
                                                                timezone))
    assert_activity_matches(results["user_activity"], ref.user_activity(events, grain,
                                                                        week_start, timezone))


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("fixture", ["lifecycle", "calendar_edges"])
@pytest.mark.parametrize("grain,week_start", GRAINS)
def test_fixture_matches_reference(engines, engine_name, target, fixture, grain, week_start):
    if target != ENGINE_TARGETS[engine_name][0] and (
            fixture != "lifecycle" or (grain, week_start) not in SECOND_TARGET_GRAINS):
        pytest.skip("second target of a shared engine: lifecycle fixture at three grains")
    engine = engines(engine_name)
    raw = ref.read_fixture_events(ref.FIXTURES_DIR / fixture / "events.csv")
    drop = ref.FIXTURE_RUNS[fixture]["drop_event"]
    where = f"event_name <> '{drop}'" if drop else None
    results = run(engine, target, raw, grain=grain, week_start=week_start, where=where,
                  views=("growth_accounting", "user_states", "user_activity",
                         "activity_source_summary"))
    check_all(results, ref.fixture_events(fixture), grain, week_start)
    assert results["activity_source_summary"] == [expected_summary(raw, drop)]


@pytest.mark.parametrize("engine_name,target", engine_target_pairs(only=("spark",)))
def test_spark_default_settings(engines, engine_name, target):
    """The suite's Spark session turns adaptive execution off (small tables); the same views give the same rows with Spark's defaults (the calendar-edge
    fixture at day grain: the most periods)."""
    engine = engines(engine_name)
    raw = ref.read_fixture_events(ref.FIXTURES_DIR / "calendar_edges" / "events.csv")
    with engine.default_settings():
        results = run(engine, target, raw, grain="day", week_start="monday",
                      views=("growth_accounting", "user_states", "user_activity"))
    check_all(results, ref.fixture_events("calendar_edges"), "day", "monday")


def expected_summary(raw, drop) -> dict:
    """The source row counts, straight from the rows (a NULL event_name fails `<>`); the
    valid range is tried on the rows `where` keeps."""
    excluded = ref.excluded_counts([(u, ts) for u, ts, _name in raw])
    present = [(u, ts, name) for u, ts, name in raw if u is not None and ts is not None]
    kept = [(u, ts) for u, ts, name in present
            if drop is None or (name is not None and name != drop)]
    outside = ref.out_of_range_count(kept)
    return {"source_rows": len(raw), "null_user_rows": excluded["null_user"],
            "null_timestamp_rows": excluded["null_timestamp"],
            "filtered_out_rows": len(present) - len(kept), "out_of_range_rows": outside,
            "unconverted_rows": 0, "counted_rows": len(kept) - outside}


@pytest.mark.parametrize("engine_name,target", engine_target_pairs(only=("duckdb",)))
@pytest.mark.parametrize("grain,week_start", GRAINS)
def test_fixture_expected_files(engines, engine_name, target, grain, week_start):
    """The lifecycle fixture's hand-checked expected CSV files, read as committed (the other
    engines are compared with the reference, which tests/test_reference.py ties to them)."""
    label = grain if grain != "week" else f"week_{week_start}"
    path = ref.FIXTURES_DIR / "lifecycle" / "expected" / f"growth_accounting_{label}.csv"
    if not path.exists():
        pytest.skip(f"no expected file for {label}")
    raw = ref.read_fixture_events(ref.FIXTURES_DIR / "lifecycle" / "events.csv")
    results = run(engines(engine_name), target, raw, grain=grain, week_start=week_start,
                  where="event_name <> 'push_received'", views=("growth_accounting",))
    assert_growth_matches(results["growth_accounting"], ref.read_expected(path))


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("kind,events_file", [("timestamp", "events.csv"),
                                              ("timestamptz", "events_tz.csv")])
@pytest.mark.parametrize("grain,week_start", [("day", "monday"), ("week", "sunday")])
@pytest.mark.parametrize("timezone", ["America/New_York", None])
def test_time_zone_fixture(engines, engine_name, target, kind, events_file, grain, week_start,
                           timezone):
    raw = ref.read_fixture_events(ref.FIXTURES_DIR / "dst_new_york" / events_file, kind)
    if timezone and support(TARGETS[target], "activity.timezone")[0] == "unsupported":
        with pytest.raises(UnsupportedError, match=f"dialect '{target}' cannot generate "
                                                    "activity.timezone"):
            run(engines(engine_name), target, raw, kind=kind, timezone=timezone)
        return
    results = run(engines(engine_name), target, raw, kind=kind, grain=grain,
                  week_start=week_start, timezone=timezone)
    events = [(u, ts) for u, ts, _name in raw]
    if kind == "timestamptz" and timezone is None:
        timezone = "UTC"  # the rule: without a zone, an instant is read in UTC
    check_all(results, events, grain, week_start, timezone)


EXAMPLES = HYPOTHESIS_EXAMPLES


@pytest.mark.parametrize("engine_name,target", engine_target_pairs(every_target=False))
def test_random_data_matches_reference(engines, engine_name, target):
    engine = engines(engine_name)

    @settings(max_examples=EXAMPLES[engine_name])
    @given(events=strategies.events(), grain=strategies.grains(),
           week_start=strategies.week_starts())
    def check(events, grain, week_start):
        results = run(engine, target, events, grain=grain, week_start=week_start)
        check_all(results, events, grain, week_start)

    check()


# Quick-ratio check values for contrasting businesses (common practice): a strong
# subscription business well above 1 (4.5), a consumer app just above 1 (1.6). The datasets
# are the ones of tests/test_reference.py, here run through the generated SQL.
def _monthly(month, users):
    import datetime as dt

    return [(u, dt.datetime(2023, month, 10, 12)) for u in users]


QUICK_RATIO_CASES = {
    4.5: _monthly(1, [f"o{i}" for i in range(10)])
    + _monthly(2, [f"o{i}" for i in range(8)] + [f"n{i}" for i in range(9)]),
    1.6: _monthly(1, ["r1", "r2", "r3"]) + _monthly(2, [f"u{i}" for i in range(10)])
    + _monthly(3, [f"u{i}" for i in range(5)] + ["r1", "r2", "r3"] + [f"n{i}" for i in range(5)]),
}


@pytest.mark.parametrize("engine_name,target", engine_target_pairs(every_target=False))
@pytest.mark.parametrize("ratio", sorted(QUICK_RATIO_CASES))
def test_quick_ratio_check_values(engines, engine_name, target, ratio):
    results = run(engines(engine_name), target, QUICK_RATIO_CASES[ratio],
                  views=("growth_accounting",))
    last = max(results["growth_accounting"], key=lambda r: r["period_start"])
    assert last["quick_ratio"] == pytest.approx(ratio, rel=1e-12)
    assert isinstance(last["quick_ratio"], float)
