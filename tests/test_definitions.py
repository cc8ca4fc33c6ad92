"""Several activity definitions, first-seen dates and report_from, on every engine.

Each case creates the views of one spec on the engine of a target and compares them row by
row with the plain-Python references (tests/reference.py, tests/reference_cohorts.py), on
the hand-derived fixtures (fixtures/definitions, first_seen, report_from: their READMEs
hold the derivations, asserted here as tables) and on hypothesis data; the accounting
identities are asserted on every growth_accounting result.
"""

from __future__ import annotations

import datetime as dt
import textwrap

import pytest
import reference as ref
import reference_cohorts as rc
import strategies
from conftest import HYPOTHESIS_EXAMPLES, engine_target_pairs
from harness import (FLAT_TARGETS, assert_rows_match, create_views, load_events, names_for,
                     read_view, storable_rows)
from hypothesis import given, settings
from hypothesis import strategies as st

PAIRS = engine_target_pairs()
D = dt.date
GROWTH = ref.GROWTH_COLUMNS
COHORT_KEYS = ("cohort_start", "age")


def users_table(target: str) -> str:
    return "users" if target in FLAT_TARGETS else "raw.users"


def load_users(engine, rows, target: str, kind: str = "timestamp") -> None:
    """The first-seen table users(user_id, signed_up_at) from (user, ts) tuples."""
    rows = [(None if u is None else str(u), ts) for u, ts in rows]
    engine.create_table(users_table(target), [("user_id", "text"), ("signed_up_at", kind)],
                        rows)


def storable_users(engine_name: str, rows):
    """The users rows an engine can load: harness.storable_rows, and on MySQL no instant
    outside what its TIMESTAMP holds (strategies.MYSQL_INSTANTS)."""
    rows = storable_rows(engine_name, rows)
    if engine_name != "mysql":
        return rows
    low, high = strategies.MYSQL_INSTANTS
    return [(u, ts) for u, ts in rows
            if not (isinstance(ts, dt.datetime) and ts.tzinfo is not None)
            or low <= ts.replace(tzinfo=None) <= high]


def spec(target: str, grain: str = "month", week_start: str = "monday", *,
         first_seen: str | None = None, report_from=None, definitions: str = "",
         cohorts: bool = False) -> str:
    """A spec over raw.app_events; ``first_seen`` is the users column's type (None: no
    first_seen); ``definitions`` is YAML text for the definitions section."""
    table, schema = names_for(target)
    lines = ["version: 1", "activity:", f"  table: {table}", "  user: user_id",
             "  timestamp: occurred_at"]
    if first_seen:
        lines += ["  first_seen:", f"    table: {users_table(target)}", "    user: user_id",
                  "    timestamp: signed_up_at", f"    timestamp_type: {first_seen}"]
    if report_from:
        lines.append(f"report_from: {report_from}")
    if definitions:
        lines.append("definitions:")
        lines += ["  " + line for line in textwrap.dedent(definitions).strip().splitlines()]
    lines += [f"grain: {grain}", f"week_start: {week_start}", f"cohorts: {str(cohorts).lower()}",
              "output:", f"  dialect: {target}"]
    if schema:
        lines.append(f"  schema: {schema}")
    return "\n".join(lines) + "\n"


def views(engine, target: str, names) -> dict[str, list[dict]]:
    return {name: read_view(engine, name, target) for name in names}


def growth_rows(rows):
    return [tuple(r[c] for c in ("period_start", "active_users", "previous_active_users",
                                 "new_users", "retained_users", "resurrected_users",
                                 "churned_users", "period_status"))
            for r in sorted(rows, key=lambda r: r["period_start"])]


def states(rows) -> set[tuple]:
    return {(str(r["user_id"]), r["period_start"], r["state"]) for r in rows}


def assert_growth(actual, expected) -> None:
    assert_rows_match(actual, expected, ("period_start",), GROWTH)
    ref.assert_identities(actual)


# ------------------------------------------------------------------ hand-derived fixtures

DEFINITIONS = """\
purchasers:
  where: "event_name = 'purchase'"
from_feb:
  report_from: 2024-02-15
"""


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_definitions_and_report_from_fixture(engines, engine_name, target):
    """fixtures/definitions/README.md and fixtures/report_from/README.md, as tables."""
    engine = engines(engine_name)
    raw = ref.read_fixture_events(ref.FIXTURES_DIR / "definitions" / "events.csv")
    engine.reset()
    load_events(engine, raw, target=target)
    compiled = create_views(engine, spec(target, definitions=DEFINITIONS), target)
    assert [c.view.name for c in compiled if c.part.definition == "purchasers"] == [
        "activity_source_summary", "user_activity", "user_states", "growth_accounting"]
    got = views(engine, target, ["growth_accounting", "purchasers_growth_accounting",
                                 "from_feb_growth_accounting", "from_feb_user_states",
                                 "from_feb_user_activity", "purchasers_activity_source_summary"])
    assert growth_rows(got["growth_accounting"]) == [
        (D(2024, 1, 1), 2, 0, 2, 0, 0, 0, "complete"),
        (D(2024, 2, 1), 2, 2, 1, 1, 0, 1, "complete"),
        (D(2024, 3, 1), 3, 2, 0, 2, 1, 0, "complete")]
    assert growth_rows(got["purchasers_growth_accounting"]) == [
        (D(2024, 1, 1), 1, 0, 1, 0, 0, 0, "complete"),
        (D(2024, 2, 1), 1, 1, 1, 0, 0, 1, "complete"),
        (D(2024, 3, 1), 1, 1, 0, 0, 1, 1, "in_progress")]
    assert growth_rows(got["from_feb_growth_accounting"]) == growth_rows(
        got["growth_accounting"])[1:]
    assert states(got["from_feb_user_states"]) == {
        ("a", D(2024, 2, 1), "retained"), ("c", D(2024, 2, 1), "new"),
        ("b", D(2024, 2, 1), "churned"), ("a", D(2024, 3, 1), "retained"),
        ("c", D(2024, 3, 1), "retained"), ("b", D(2024, 3, 1), "resurrected")}
    assert len(got["from_feb_user_activity"]) == 5
    assert got["purchasers_activity_source_summary"][0]["filtered_out_rows"] == 5
    events = [(u, ts) for u, ts, _name in raw]
    purchases = [(u, ts) for u, ts, name in raw if name == "purchase"]
    assert_growth(got["growth_accounting"], ref.growth_accounting(events, "month"))
    assert_growth(got["purchasers_growth_accounting"], ref.growth_accounting(purchases, "month"))
    assert_growth(got["from_feb_growth_accounting"],
                  ref.growth_accounting(events, "month", report_from=D(2024, 2, 15)))


def first_seen_rows():
    path = ref.FIXTURES_DIR / "first_seen" / "users.csv"
    rows = []
    for line in path.read_text().splitlines()[1:]:
        user, text = line.split(",")
        rows.append((user, dt.datetime.fromisoformat(text) if text else None))
    return rows


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_first_seen_fixture(engines, engine_name, target):
    """fixtures/first_seen/README.md, as tables."""
    engine = engines(engine_name)
    raw = ref.read_fixture_events(ref.FIXTURES_DIR / "first_seen" / "events.csv")
    users = first_seen_rows()
    engine.reset()
    load_events(engine, raw, target=target)
    load_users(engine, storable_rows(engine_name, users), target)
    create_views(engine, spec(target, first_seen="timestamp", cohorts=True)
                 + "trailing_windows: [1, 7, 28]\n", target)
    got = views(engine, target, ["growth_accounting", "user_states", "cohort_retention",
                                 "trailing_activity"])
    assert growth_rows(got["growth_accounting"]) == [
        (D(2024, 1, 1), 2, 0, 1, 0, 1, 0, "complete"),
        (D(2024, 2, 1), 3, 2, 1, 1, 1, 1, "complete"),
        (D(2024, 3, 1), 4, 3, 2, 1, 1, 2, "complete")]
    firsts = {s[0]: s[2] for s in states(got["user_states"])
              if (s[0], s[1]) in {("a", D(2024, 1, 1)), ("b", D(2024, 2, 1)),
                                  ("c", D(2024, 3, 1)), ("d", D(2024, 1, 1)),
                                  ("e", D(2024, 2, 1)), ("f", D(2024, 3, 1))}}
    assert firsts == {"a": "resurrected", "b": "new", "c": "new", "d": "new",
                      "e": "resurrected", "f": "new"}
    cells = {(r["cohort_start"], r["period_start"]): (r["cohort_users"], r["active_users"])
             for r in got["cohort_retention"]}
    assert cells == {
        (D(2023, 11, 1), D(2023, 11, 1)): (1, 0), (D(2023, 11, 1), D(2023, 12, 1)): (1, 0),
        (D(2023, 11, 1), D(2024, 1, 1)): (1, 1), (D(2023, 11, 1), D(2024, 2, 1)): (1, 1),
        (D(2023, 11, 1), D(2024, 3, 1)): (1, 1),
        (D(2023, 12, 1), D(2023, 12, 1)): (1, 0), (D(2023, 12, 1), D(2024, 1, 1)): (1, 0),
        (D(2023, 12, 1), D(2024, 2, 1)): (1, 1), (D(2023, 12, 1), D(2024, 3, 1)): (1, 0),
        (D(2024, 1, 1), D(2024, 1, 1)): (1, 1), (D(2024, 1, 1), D(2024, 2, 1)): (1, 0),
        (D(2024, 1, 1), D(2024, 3, 1)): (1, 1),
        (D(2024, 2, 1), D(2024, 2, 1)): (1, 1), (D(2024, 2, 1), D(2024, 3, 1)): (1, 0),
        (D(2024, 3, 1), D(2024, 3, 1)): (2, 2)}
    events = [(u, ts) for u, ts, _name in raw]
    seen = ref.first_seen_dates(users)
    assert seen["e"] == D(2023, 12, 20) and "f" not in seen  # earliest valid row; NULL
    assert_growth(got["growth_accounting"], ref.growth_accounting(events, "month",
                                                                  first_seen=seen))
    assert states(got["user_states"]) == {(str(u), p, s) for u, p, s in ref.user_states(
        events, "month", first_seen=seen)}
    assert_rows_match(got["cohort_retention"],
                      rc.cohort_retention(events, "month", first_seen=seen),
                      COHORT_KEYS, rc.COHORT_COLUMNS)
    assert_trailing(got["trailing_activity"],
                    rc.trailing_activity(events, (1, 7, 28), first_seen=seen))
    # Before d's first day (2024-01-12) only a is active, first seen before every window.
    assert not [r for r in got["trailing_activity"] if r["window_days"] == 28
                and r["day"] < D(2024, 1, 12) and r["new_users"]]


def assert_trailing(actual, expected) -> None:
    """trailing_activity rows against the reference, and the identities on every row."""
    assert_rows_match(actual, expected, TRAILING_KEYS, rc.TRAILING_COLUMNS)
    for r in actual:
        assert r["active_users"] == r["new_users"] + r["retained_users"] + r["resurrected_users"]
        assert r["previous_active_users"] == r["retained_users"] + r["churned_users"]
        assert min(r[c] for c in rc.TRAILING_COLUMNS[2:-1]) >= 0, r


# Window 3 over the days of March 2024 (the worked example of docs/cohorts.md): ann active
# on days 1 and 2, first seen 2024-02-20; bob on days 1 and 8, not in the users table; cat
# on day 5, first seen on day 4. Derived by hand: ann is resurrected, not new, in every
# window she is active in (seen before each); cat is new in the windows ending on days 5
# and 6 (days 3-5 and 4-6 hold her sign-up) and resurrected in the one ending on day 7
# (days 5-7: seen before it). Without first_seen, days 1-3 would have 2 new and 0
# resurrected, and day 7 1 new and 0 resurrected.
SEEN_WORKED_EVENTS = [("ann", dt.datetime(2024, 3, 1, 9)), ("ann", dt.datetime(2024, 3, 2, 9)),
                      ("bob", dt.datetime(2024, 3, 1, 10)), ("bob", dt.datetime(2024, 3, 8, 10)),
                      ("cat", dt.datetime(2024, 3, 5, 10))]
SEEN_WORKED_USERS = [("ann", dt.datetime(2024, 2, 20, 12)), ("cat", dt.datetime(2024, 3, 4, 18))]
SEEN_WORKED_TABLE = {  # day: (active, previous, new, retained, resurrected, churned)
    1: (2, 0, 1, 0, 1, 0), 2: (2, 0, 1, 0, 1, 0), 3: (2, 0, 1, 0, 1, 0),
    4: (1, 2, 0, 1, 0, 1), 5: (1, 2, 1, 0, 0, 2), 6: (1, 2, 1, 0, 0, 2),
    7: (1, 1, 0, 0, 1, 1), 8: (1, 1, 0, 0, 1, 1)}
SEEN_WORKED_QUICK = [None, None, None, 0.0, 0.5, 0.5, 1.0, 1.0]
TRAILING_KEYS = ("window_days", "day")


def worked_table(rows) -> dict[int, tuple]:
    return {r["day"].day: tuple(r[c] for c in rc.TRAILING_COLUMNS[2:-1])
            for r in sorted(rows, key=lambda r: r["day"])}


def test_first_seen_trailing_worked_example_by_hand():
    rows = rc.trailing_activity(SEEN_WORKED_EVENTS, [3],
                                first_seen=ref.first_seen_dates(SEEN_WORKED_USERS))
    assert worked_table(rows) == SEEN_WORKED_TABLE
    assert [r["quick_ratio"] for r in rows] == SEEN_WORKED_QUICK


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_first_seen_trailing_worked_example(engines, engine_name, target):
    """The hand-derived table above, from trailing_activity on each engine."""
    engine = engines(engine_name)
    engine.reset()
    load_events(engine, [(u, ts, "app_opened") for u, ts in SEEN_WORKED_EVENTS], target=target)
    load_users(engine, SEEN_WORKED_USERS, target)
    create_views(engine, spec(target, "day", first_seen="timestamp")
                 + "trailing_windows: [3]\n", target)
    rows = sorted(read_view(engine, "trailing_activity", target), key=lambda r: r["day"])
    assert worked_table(rows) == SEEN_WORKED_TABLE
    assert [r["quick_ratio"] for r in rows] == SEEN_WORKED_QUICK


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_first_seen_types_and_zone(engines, engine_name, target):
    """The first-seen column as a date and as an instant, with a reporting zone (where the
    target has zones): the users table's dates follow the activity's zone rule (an instant
    is converted, a date used as stored); compared with the reference."""
    from sqlgen.dialects import TARGETS
    from sqlgen.support import support

    engine = engines(engine_name)
    raw = ref.read_fixture_events(ref.FIXTURES_DIR / "first_seen" / "events.csv")
    events = [(u, ts) for u, ts, _name in raw]
    zone = (None if support(TARGETS[target], "activity.timezone")[0] == "unsupported"
            else "America/New_York")
    # b's sign-up, 2024-02-01 00:00 UTC, is January 31 in New York: b is then resurrected.
    as_kind = {"date": lambda ts: ts.date(),
               "timestamptz": lambda ts: ts.replace(tzinfo=dt.UTC)}
    if engine_name == "spark":  # the slowest engine: the instant case only (CI budget)
        as_kind.pop("date")
    for kind, convert in as_kind.items():
        users = storable_users(engine_name, [(u, None if ts is None else convert(ts))
                                             for u, ts in first_seen_rows()])
        engine.reset()
        load_events(engine, raw, target=target)
        load_users(engine, users, target, kind)
        text = spec(target, first_seen=kind, cohorts=True)
        if zone:
            text = text.replace("  first_seen:", f"  timezone: {zone}\n  first_seen:")
        create_views(engine, text, target)
        got = views(engine, target, ["growth_accounting", "user_states", "cohort_retention"])
        seen = ref.first_seen_dates(users, zone if kind != "date" else None)
        assert_growth(got["growth_accounting"], ref.growth_accounting(
            events, "month", timezone=zone, first_seen=seen))
        assert states(got["user_states"]) == {(str(u), p, s) for u, p, s in ref.user_states(
            events, "month", timezone=zone, first_seen=seen)}
        assert_rows_match(got["cohort_retention"],
                          rc.cohort_retention(events, "month", timezone=zone, first_seen=seen),
                          COHORT_KEYS, rc.COHORT_COLUMNS)
        if zone and kind == "timestamptz":
            assert ("b", D(2024, 2, 1), "resurrected") in states(got["user_states"])


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_report_from_in_engagement_and_trailing(engines, engine_name, target):
    """report_from leaves out the engagement periods and trailing days before it; the rest
    equal the reference's rows (tests/reference_cohorts.py), computed over all the data."""
    engine = engines(engine_name)
    events = ref.fixture_events("lifecycle")
    engine.reset()
    load_events(engine, events, target=target)
    report = D(2023, 5, 15)
    text = spec(target, report_from=report) + "engagement: true\ntrailing_windows: [7, 28]\n"
    create_views(engine, text, target)
    got = views(engine, target, ["engagement_depth", "trailing_activity"])
    depth = [r for r in rc.engagement_depth(events, "month") if r["period_start"] >= D(2023, 5, 1)]
    assert_rows_match(got["engagement_depth"], depth, ("period_start", "active_days"),
                      rc.ENGAGEMENT_COLUMNS)
    trailing = [r for r in rc.trailing_activity(events, (7, 28)) if r["day"] >= report]
    assert_rows_match(got["trailing_activity"], trailing, ("window_days", "day"),
                      rc.TRAILING_COLUMNS)


# ------------------------------------------------------------------ hypothesis data

REPORT_DATES = (None, D(2020, 1, 1), D(2020, 12, 29), D(2021, 3, 14), D(2024, 2, 29))


@st.composite
def cases(draw, kind="timestamp", engine=None):
    """Events (with an event name, half of them 'purchase'), users rows (NULLs, sentinels,
    duplicates, users without activity), a grain, a report_from and trailing windows."""
    events = draw(strategies.events(kind=kind))
    names = draw(st.lists(st.sampled_from(("app_opened", "purchase")),
                          min_size=len(events), max_size=len(events)))
    seen = draw(strategies.events(kind=kind, max_size=12,
                                  sentinels=strategies.sentinel_values(kind, engine)))
    return ([(u, ts, n) for (u, ts), n in zip(events, names)], seen,
            draw(strategies.grains()), draw(strategies.week_starts()),
            draw(st.sampled_from(REPORT_DATES)),
            draw(st.lists(st.sampled_from((1, 3, 7, 28)), min_size=1, max_size=2, unique=True)))


HYPOTHESIS_DEFINITIONS = """\
purchasers:
  where: "event_name = 'purchase'"
"""


@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_random_data_matches_reference(engines, engine_name, target):
    engine = engines(engine_name)

    @settings(max_examples=max(1, HYPOTHESIS_EXAMPLES[engine_name] // 2))
    @given(case=cases(engine=engine_name))
    def check(case):
        raw, users, grain, week_start, report_from, windows = case
        engine.reset()
        load_events(engine, storable_rows(engine_name, raw), target=target)
        load_users(engine, storable_rows(engine_name, users), target)
        text = spec(target, grain, week_start, first_seen="timestamp", report_from=report_from,
                    definitions=HYPOTHESIS_DEFINITIONS, cohorts=True)
        create_views(engine, text + f"trailing_windows: [{', '.join(map(str, windows))}]\n",
                     target)
        seen = ref.first_seen_dates(users)
        events = [(u, ts) for u, ts, _n in raw]
        purchases = [(u, ts) for u, ts, n in raw if n == "purchase"]
        for prefix, rows in (("", events), ("purchasers_", purchases)):
            got = views(engine, target, [prefix + v for v in (
                "growth_accounting", "user_states", "user_activity", "cohort_retention",
                "trailing_activity")])
            args = dict(first_seen=seen, report_from=report_from)
            assert_growth(got[prefix + "growth_accounting"],
                          ref.growth_accounting(rows, grain, week_start, **args))
            assert states(got[prefix + "user_states"]) == {
                (str(u), p, s) for u, p, s in ref.user_states(rows, grain, week_start, **args)}
            activity = {(str(r["user_id"]), r["period_start"]): r["events"]
                        for r in got[prefix + "user_activity"]}
            assert activity == {(str(u), p): n for (u, p), n in ref.user_activity_from(
                rows, grain, week_start, report_from=report_from).items()}
            assert_rows_match(got[prefix + "cohort_retention"],
                              rc.cohort_retention(rows, grain, week_start, **args),
                              COHORT_KEYS, rc.COHORT_COLUMNS)
            assert_trailing(got[prefix + "trailing_activity"], [
                r for r in rc.trailing_activity(rows, windows, first_seen=seen)
                if report_from is None or r["day"] >= report_from])

    check()
