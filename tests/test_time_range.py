"""The valid time range of each source: the spec keys, the calendar that covers the whole
range, and sentinel timestamps left out of every view and counted in the source summaries.

Sentinel dates (0001-01-01, 1900-01-01, epoch zero 1970-01-01, 9999-12-31) are what
warehouses store for "unknown" or "never" (common practice). The fixtures carry them too
(fixtures/lifecycle, fixtures/revenue_seats, fixtures/revenue_plans; their READMEs list the
rows), so the other engine suites check that the views over real rows are unchanged.
"""

from __future__ import annotations

import datetime as dt
from decimal import Decimal

import pytest
import reference as ref
import reference_revenue as rr
import strategies
from conftest import HYPOTHESIS_EXAMPLES, engine_target_pairs
from harness import create_views, load_events, read_view, run, run_revenue, spec_text, \
    storable_rows
from hostile import EXIT_SPEC, assert_refused, run_cli
from hypothesis import given, settings
from hypothesis import strategies as st
from test_revenue import check_views, money
from test_spec import GOOD
from test_views import assert_activity_matches, assert_growth_matches, assert_states_match

from sqlgen import SpecError, UnsupportedError, compile_spec, parse_spec
from sqlgen.dialects import TARGETS
from sqlgen.render import grain_of
from sqlgen.support import support

PAIRS = engine_target_pairs()
SUMMARY = "activity_source_summary"
D = Decimal



def _spec(extra_activity: str = "", grain: str = "month", tail: str = ""):
    text = GOOD.replace("grain: month", f"grain: {grain}")
    text = text.replace("  timestamp: occurred_at\n", "  timestamp: occurred_at\n" + extra_activity)
    return parse_spec(text + tail, "s.yml")


def _messages(extra_activity: str, grain: str = "month", tail: str = "") -> list[str]:
    with pytest.raises(SpecError) as err:
        _spec(extra_activity, grain, tail)
    return [str(p) for p in err.value.problems]


# --------------------------------------------------------------------------- spec keys


def test_defaults_leave_the_sentinels_out():
    spec = _spec()
    assert (spec.activity.valid_from, spec.activity.valid_until) == (dt.date(1990, 1, 1),
                                                                     dt.date(2100, 1, 1))
    assert ref.VALID_RANGE == (spec.activity.valid_from, spec.activity.valid_until)


def test_a_yaml_date_and_iso_text_are_the_same_range():
    plain = _spec("  valid_from: 2015-01-01\n  valid_until: 2031-01-01\n")
    quoted = _spec("  valid_from: '2015-01-01'\n  valid_until: \"2031-01-01\"\n")
    assert plain == quoted
    assert plain.activity.valid_from == dt.date(2015, 1, 1)
    assert plain.digest() == quoted.digest()


def test_the_digest_changes_only_away_from_the_default():
    assert _spec().digest() == _spec("  valid_from: 1990-01-01\n  valid_until: 2100-01-01\n"
                                     ).digest()
    assert _spec().digest() != _spec("  valid_from: 2015-01-01\n").digest()
    assert _spec().digest() != _spec("  valid_until: 2031-01-01\n").digest()


BAD = [
    ("  valid_from: 2015-13-01\n",
     ["s.yml:6:15: activity.valid_from: '2015-13-01' is not a date; write it as YYYY-MM-DD, "
      "e.g. 2015-01-01"]),
    ("  valid_from: 2015\n",
     ["s.yml:6:15: activity.valid_from: expected a date such as 2015-01-01, got 2015"]),
    ("  valid_until: 2031-01-01 00:00:00\n",
     ["s.yml:6:16: activity.valid_until: expected a date such as 2015-01-01, got the "
      "timestamp 2031-01-01 00:00:00; write the date alone"]),
    ("  valid_from: 0001-01-01\n",
     ["s.yml:6:15: activity.valid_from: 0001-01-01 is outside the dates sqlgen can compare "
      "on every engine, 1000-01-01 to 9999-01-01"]),
    ("  valid_from: 2031-01-01\n  valid_until: 2015-01-01\n",
     ["s.yml:7:16: activity.valid_until: valid_from 2031-01-01 must be before valid_until "
      "2015-01-01 (valid_until is the first date left out)"]),
    ("  valid_from: 2100-01-01\n",
     ["s.yml:6:15: activity.valid_from: valid_from 2100-01-01 must be before valid_until "
      "2100-01-01 (valid_until is the first date left out)"]),
]


@pytest.mark.parametrize("extra,expected", BAD, ids=[str(i) for i in range(len(BAD))])
def test_bad_ranges_are_refused_with_the_key_and_place(extra, expected):
    assert _messages(extra) == expected


def test_a_range_too_long_for_the_calendar_is_refused():
    # 1000-01-01 .. 9999-01-01 holds 3,286,817 days: more than the 10**6 a calendar holds.
    extra = "  valid_from: 1000-01-01\n  valid_until: 9999-01-01\n"
    assert _messages(extra, "day") == [
        "s.yml:7:16: activity.valid_until: 1000-01-01 to 9999-01-01 holds 3,286,817 day "
        "periods (for day), more than the 1,000,000 a view's calendar can hold; narrow the "
        "range or use a longer grain"]
    assert _messages(extra, "month", "trailing_windows: [7]\n") == [
        "s.yml:7:16: activity.valid_until: 1000-01-01 to 9999-01-01 holds 3,286,817 day "
        "periods (for trailing_windows), more than the 1,000,000 a view's calendar can hold; "
        "narrow the range or use a longer grain"]
    assert _spec(extra, "month").activity.valid_until == dt.date(9999, 1, 1)  # 107,977 months


def test_calendar_digits_follow_the_range():
    # Day grain over the default range: 40,177 days -> 5 digits (10**5 periods).
    assert grain_of(_spec(grain="day")).calendar_digits == 5
    assert grain_of(_spec(grain="month")).calendar_digits == 4  # 1,320 months
    assert grain_of(_spec(grain="year")).calendar_digits == 3  # 110 years
    long = _spec("  valid_from: 1000-01-01\n  valid_until: 9999-01-01\n", grain="month")
    assert (grain_of(long).calendar_digits, grain_of(long).day_digits) == (6, 7)
    short = _spec("  valid_from: 2020-01-01\n  valid_until: 2020-01-02\n", grain="day")
    assert grain_of(short).calendar_digits == 1


def test_clickhouse_refuses_a_range_its_date_types_would_wrap():
    spec = _spec("  valid_from: 1960-01-01\n")
    with pytest.raises(UnsupportedError, match="dialect 'clickhouse' cannot generate "
                                               "activity.valid_from"):
        compile_spec(spec, "clickhouse")
    assert compile_spec(spec, "duckdb")


# --------------------------------------------------------------------------- engines


def _with_range(text: str, valid_from, valid_until) -> str:
    """A harness spec with the activity section's valid range set."""
    lines = f"  valid_from: {valid_from}\n  valid_until: {valid_until}\n"
    return text.replace("  timestamp_type:", lines + "  timestamp_type:", 1)


# The case: one event dated 0001-01-01 among real ones, month grain.
REAL = [("a", dt.datetime(2023, 1, 5, 10)), ("b", dt.datetime(2023, 1, 20, 9)),
        ("a", dt.datetime(2023, 2, 2, 8)), ("c", dt.datetime(2023, 3, 9, 12)),
        ("b", dt.datetime(2023, 4, 1))]


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_one_year_one_event_leaves_the_month_report_whole(engines, engine_name, target):
    """Before the valid range, the calendar ran from year 1 and stopped after 10**4 months
    (year 834): every real month was cut and sum(new_users) came out 1."""
    events = REAL + [("z", dt.datetime(1, 1, 1))]
    results = run(engines(engine_name), target, events,
                  views=("growth_accounting", "user_states", "user_activity", SUMMARY))
    growth = results["growth_accounting"]
    assert sum(r["new_users"] for r in growth) == 3  # a, b, c
    assert sorted(r["period_start"] for r in growth) == [dt.date(2023, m, 1) for m in (1, 2, 3, 4)]
    assert_growth_matches(growth, ref.growth_accounting(events, "month"))
    ref.assert_identities(growth)
    assert results[SUMMARY][0]["out_of_range_rows"] == 1
    assert results[SUMMARY][0]["counted_rows"] == len(REAL)


# (grain, valid_from, valid_until, events just inside the range, just outside it)
BOUNDS = {
    # The default range at month grain: 1,320 months from January 1990 to December 2099.
    "default-month": ("month", None, None,
                      [("a", dt.datetime(1990, 1, 1)),
                       ("b", dt.datetime(2099, 12, 31, 23, 59, 59, 999999))],
                      [("c", dt.datetime(1989, 12, 31, 23, 59, 59, 999999)),
                       ("c", dt.datetime(2100, 1, 1))]),
    # A user-set range of 1,100 years at year grain: before the range sized the calendar,
    # it held 10**3 years and cut the last hundred off.
    "long-year": ("year", "1000-01-01", "2100-01-01",
                  [("a", dt.datetime(1000, 1, 1)), ("b", dt.datetime(2099, 12, 31, 23, 59, 59))],
                  [("c", dt.datetime(999, 12, 31, 23, 59, 59)), ("c", dt.datetime(2100, 1, 1))]),
}


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("case", sorted(BOUNDS))
def test_the_calendar_covers_the_whole_range(engines, engine_name, target, case):
    grain, valid_from, valid_until, inside, outside = BOUNDS[case]
    events = REAL + inside + outside
    engine = engines(engine_name)
    extra = {} if valid_from is None else {"valid_from": valid_from, "valid_until": valid_until}
    if extra and support(TARGETS[target], "valid range before 1970 or after 2105")[0] \
            == "unsupported":
        with pytest.raises(UnsupportedError, match="valid_from"):
            _run_with_range(engine, target, events, grain, **extra)
        return
    results = _run_with_range(engine, target, events, grain, **extra)
    valid = ref.VALID_RANGE if not extra else (dt.date.fromisoformat(valid_from),
                                               dt.date.fromisoformat(valid_until))
    growth = results["growth_accounting"]
    starts = sorted(r["period_start"] for r in growth)
    assert (starts[0], starts[-1]) == (ref.period_start(inside[0][1].date(), grain),
                                       ref.period_start(inside[-1][1].date(), grain))
    assert_growth_matches(growth, ref.growth_accounting(events, grain, valid=valid))
    ref.assert_identities(growth)
    assert results[SUMMARY][0]["out_of_range_rows"] == len(outside)


def _run_with_range(engine, target, events, grain, valid_from=None, valid_until=None):
    engine.reset()
    load_events(engine, events, "timestamp", target)
    text = spec_text(target, grain=grain)
    if valid_from is not None:
        text = _with_range(text, valid_from, valid_until)
    create_views(engine, text, target)
    return {name: read_view(engine, name, target) for name in ("growth_accounting", SUMMARY)}


# --------------------------------------------------------------------------- generated data

ZONES = ("America/New_York", "Pacific/Auckland", "Asia/Kolkata")
VIEWS = ("growth_accounting", "user_states", "user_activity", SUMMARY)


def _summary(events, timezone) -> dict:
    """activity_source_summary of generated events (no `where`): every category by hand."""
    present = [(u, ts) for u, ts in events if u is not None and ts is not None]
    outside = ref.out_of_range_count(events, timezone)
    nulls = ref.excluded_counts(events)
    return {"source_rows": len(events), "null_user_rows": nulls["null_user"],
            "null_timestamp_rows": nulls["null_timestamp"], "filtered_out_rows": 0,
            "out_of_range_rows": outside, "unconverted_rows": 0,
            "counted_rows": len(present) - outside}


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_sentinels_in_generated_events(engines, engine_name, target):
    """Generated events with sentinels mixed in, every timestamp type, with and without a
    time zone: the views equal the reference over the rows inside the range, the summary
    counts the rest, the identities hold."""
    engine = engines(engine_name)
    zoned = support(TARGETS[target], "activity.timezone")[0] != "unsupported"

    @settings(max_examples=HYPOTHESIS_EXAMPLES[engine_name])
    @given(data=st.data(), kind=st.sampled_from(strategies.EVENT_KINDS),
           grain=strategies.grains())
    def check(data, kind, grain):
        events = data.draw(strategies.events(
            kind, max_size=30, sentinels=strategies.sentinel_values(kind, engine_name)))
        zone = None
        if kind != "date" and zoned:
            zone = data.draw(st.sampled_from((None,) + ZONES))
        rule_zone = "UTC" if kind == "timestamptz" and zone is None else zone
        results = run(engine, target, events, kind=kind, grain=grain, timezone=zone,
                      views=VIEWS)
        assert_growth_matches(results["growth_accounting"],
                              ref.growth_accounting(events, grain, timezone=rule_zone))
        ref.assert_identities(results["growth_accounting"])
        assert_states_match(results["user_states"],
                            ref.user_states(events, grain, timezone=rule_zone))
        assert_activity_matches(results["user_activity"],
                                ref.user_activity(events, grain, timezone=rule_zone))
        assert results[SUMMARY] == [_summary(events, rule_zone)]

    check()


def _sentinel_moments(kind, engine_name):
    return st.sampled_from(strategies.sentinel_values(kind, engine_name))


@st.composite
def _charges(draw, kind, engine_name):
    day = st.dates(dt.date(2023, 11, 1), dt.date(2024, 3, 31))
    moment = day if kind == "date" else st.builds(dt.datetime.combine, day,
                                                   st.just(dt.time(12, 0)))
    when = st.one_of(moment, _sentinel_moments(kind, engine_name))
    row = st.tuples(st.sampled_from(("a", "b", "c")), when,
                    st.sampled_from((D("10.00"), D("4.50"), D("-2.00"))))
    return draw(st.lists(row, max_size=15))


@st.composite
def _subscriptions(draw, kind, engine_name):
    day = st.dates(dt.date(2023, 11, 1), dt.date(2024, 3, 31))
    moment = day if kind == "date" else st.builds(dt.datetime.combine, day,
                                                   st.just(dt.time(0, 0)))
    sentinel = _sentinel_moments(kind, engine_name)
    row = st.tuples(st.sampled_from(("a", "b", "c")), st.one_of(moment, moment, sentinel),
                    st.one_of(st.none(), moment, sentinel), st.just(D("30.00")),
                    st.sampled_from(("month", "year")))
    return draw(st.lists(row, max_size=8))


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("shape", ["charges", "subscriptions"])
def test_sentinels_in_generated_revenue(engines, engine_name, target, shape):
    """Charges and subscriptions with sentinel dates (a subscription may start or end on
    one: 9999-12-31 as an end means no end): views equal the reference, the summary counts
    the rows out of range, the identities hold."""
    engine = engines(engine_name)
    tables = _charges if shape == "charges" else _subscriptions

    # A third of the engine's examples (one on Spark): the fixtures' sentinel rows already
    # run through every revenue view on every engine.
    @settings(max_examples=max(1, HYPOTHESIS_EXAMPLES[engine_name] // 3))
    @given(data=st.data(), kind=st.sampled_from(("timestamp", "date")),
           grain=st.sampled_from(("month", "week", "quarter")))
    def check(data, kind, grain):
        rows = data.draw(tables(kind, engine_name))
        results = run_revenue(engine, target, rows, shape=shape, kind=kind, grain=grain)
        expected = rr.revenue_views(rows, shape, grain)
        check_views(results, expected, engine_name)

    check()


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_a_far_end_means_no_end(engines, engine_name, target):
    """The plans fixture with every NULL end replaced by 9999-12-31 (a common "no end"
    sentinel; 2149-06-06 on ClickHouse, whose Date ends there) gives the views of the
    fixture as committed."""
    far = dt.date(2149, 6, 6) if engine_name == "clickhouse" else dt.date(9999, 12, 31)
    rows = storable_rows(engine_name, rr.read_fixture_rows("revenue_plans"))
    ended = [(c, s, far if s is not None and e is None else e, *rest)
             for c, s, e, *rest in rows]
    results = run_revenue(engines(engine_name), target, ended, shape="subscriptions",
                          kind="date", where="currency = 'EUR'", measure="recognized")
    expected = rr.revenue_views(rows, "subscriptions", "month", keep_currency="EUR",
                                measure="recognized")
    check_views(results, expected, engine_name)
    committed = rr.read_expected(rr.expected_path("revenue_plans", "revenue_accounting",
                                                  "month"))
    got = sorted(results["revenue_accounting"], key=lambda r: r["period_start"])
    assert [money(r["revenue"]) for r in got] == [r["revenue"] for r in committed]


REVENUE = """\
version: 1
revenue:
  shape: subscriptions
  table: billing.plans
  customer: account_id
  amount: amount
  start: started_at
  valid_until: 2200-01-01
grain: week
"""


def test_revenue_range_keys_are_checked_alike():
    assert parse_spec(REVENUE, "r.yml").revenue.valid_until == dt.date(2200, 1, 1)
    with pytest.raises(SpecError) as err:
        parse_spec(REVENUE.replace("2200-01-01", "'31.12.2099'"), "r.yml")
    assert [str(p) for p in err.value.problems] == [
        "r.yml:8:16: revenue.valid_until: '31.12.2099' is not a date; write it as "
        "YYYY-MM-DD, e.g. 2015-01-01"]


def test_the_command_refuses_a_bad_range_with_exit_3(tmp_path):
    spec = tmp_path / "growth.yml"
    spec.write_text(GOOD.replace("  timestamp: occurred_at\n", "  timestamp: occurred_at\n"
                                 "  valid_from: 2030-01-01\n  valid_until: 2020-01-01\n"))
    for command in (("validate", str(spec)), ("build", str(spec), "--out", str(tmp_path / "o"))):
        assert_refused(run_cli(*command), EXIT_SPEC, mentions=(
            "growth.yml:7:16: activity.valid_until: valid_from 2030-01-01 must be before "
            "valid_until 2020-01-01",))
    assert not (tmp_path / "o").exists()
