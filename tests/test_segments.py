"""The segmented views on every engine, compared with tests/reference_segments.py.

Each engine loads a table once per case and reads every segmented view back: the hand-derived
fixture (fixtures/segments, its README derives the expected rows), then hypothesis data.
On every result the accounting identities hold per segment value, and the values of a
kind user segment add up to the totals in every period.
"""

from __future__ import annotations

import datetime as dt
from collections import defaultdict

import pytest
import reference as ref
import reference_segments as rs
import strategies
from conftest import HYPOTHESIS_EXAMPLES, engine_target_pairs
from harness import (FLAT_TARGETS, assert_rows_match, create_views, names_for, read_view,
                     spec_text, storable_rows)
from hypothesis import given, settings
from hypothesis import strategies as st

PAIRS = engine_target_pairs(every_target=False)
FIXTURE = ref.FIXTURES_DIR / "segments"
# The test segments: one of each kind and source (the names are the spec's, the columns the
# test tables').
SEGMENTS = {"platform": {"kind": "event", "column": "platform"},
            "plan": {"kind": "user", "column": "plan"},
            "channel": {"kind": "user", "column": "channel", "table": "users"}}
COUNTS = ("active_users", "previous_active_users", "new_users", "retained_users",
          "resurrected_users", "churned_users")
SEGMENTED = ("growth_accounting_by_segment", "user_states_by_segment",
             "cohort_retention_by_segment", "growth_accounting")


def users_table(target: str) -> str:
    return "users" if target in FLAT_TARGETS else "raw.users"


def segments_yaml(target: str) -> str:
    return ("cohorts: true\nsegments:\n"
            "  platform: {kind: event, column: platform}\n"
            "  plan: {kind: user, column: plan}\n"
            f"  channel: {{kind: user, column: channel, table: {users_table(target)}, "
            "key: user_id}\n")


def load(engine, target, rows, users, kind="timestamp") -> None:
    """The activity table (user_id, occurred_at, event_name, platform, plan) and the users
    table (user_id, channel)."""
    engine.reset()
    engine.create_table(names_for(target)[0],
                        [("user_id", "text"), ("occurred_at", kind), ("event_name", "text"),
                         ("platform", "text"), ("plan", "text")],
                        [(None if u is None else str(u), ts, "app_opened", v.get("platform"),
                          v.get("plan")) for u, ts, v in rows])
    engine.create_table(users_table(target), [("user_id", "text"), ("channel", "text")],
                        [(None if u is None else str(u), c) for u, c in users])


def run_segments(engine, target, rows, users, grain="month", week_start="monday",
                 kind="timestamp") -> dict[str, list[dict]]:
    load(engine, target, rows, users, kind)
    create_views(engine, spec_text(target, grain=grain, week_start=week_start, kind=kind,
                                   extra=segments_yaml(target)), target)
    return {name: read_view(engine, name, target) for name in SEGMENTED}


def check(results, rows, users, grain, week_start) -> None:
    """Row by row against the reference, then the identities and the kind user sums."""
    tables = {"users": users}
    growth = results["growth_accounting_by_segment"]
    keys = ("segment", "_v", "period_start")
    assert_rows_match(_sortable(growth), _sortable(rs.growth_by_segment(
        rows, SEGMENTS, grain, week_start, tables=tables)), keys, rs.SEGMENT_GROWTH_COLUMNS)
    got = {(r["segment"], r["segment_value"], str(r["user_id"]), r["period_start"], r["state"])
           for r in results["user_states_by_segment"]}
    want = rs.states_by_segment(rows, SEGMENTS, grain, week_start, tables=tables)
    assert got == want, (sorted(got - want, key=str)[:5], sorted(want - got, key=str)[:5])
    assert_rows_match(_sortable(results["cohort_retention_by_segment"]),
                      _sortable(rs.cohorts_by_segment(rows, SEGMENTS, grain, week_start,
                                                      tables=tables)),
                      ("segment", "_v", "cohort_start", "age"),
                      rs.SEGMENT_COHORT_COLUMNS)
    assert_identities_per_value(growth)
    assert_user_kinds_add_up(growth, results["growth_accounting"])


def _sortable(rows):
    """Each row with a sort key ``_v`` for its value: NULL first, then the text."""
    return [{**r, "_v": (r["segment_value"] is not None, r["segment_value"] or "")}
            for r in rows]


def assert_identities_per_value(growth) -> None:
    """tests/reference.py's identities on each segment value's rows."""
    by_value = defaultdict(list)
    for row in growth:
        by_value[(row["segment"], row["segment_value"])].append(row)
    for rows in by_value.values():
        ref.assert_identities(rows)


def assert_user_kinds_add_up(growth, totals, segments=SEGMENTS) -> None:
    """A kind user segment partitions the users: its values' counts sum to the totals in
    every period of the totals' calendar."""
    total = {r["period_start"]: r for r in totals}
    for name, segment in segments.items():
        if segment["kind"] != "user":
            continue
        sums = defaultdict(lambda: defaultdict(int))
        for row in growth:
            if row["segment"] == name:
                for column in COUNTS:
                    sums[row["period_start"]][column] += row[column]
        assert set(sums) == set(total), name
        for period, row in total.items():
            assert all(sums[period][c] == row[c] for c in COUNTS), (name, period)


# ---------------------------------------------------------------- the fixture

def fixture_rows():
    """fixtures/segments: (user, ts, {platform, plan}) rows and (user, channel) rows."""
    import csv

    with (FIXTURE / "events.csv").open(encoding="utf-8", newline="") as f:
        rows = [(r["user_id"] or None, dt.datetime.fromisoformat(r["occurred_at"]),
                 {"platform": r["platform"] or None, "plan": r["plan"] or None})
                for r in csv.DictReader(f)]
    with (FIXTURE / "users.csv").open(encoding="utf-8", newline="") as f:
        users = [(r["user_id"], r["channel"] or None) for r in csv.DictReader(f)]
    return rows, users


def fixture_expected() -> list[dict]:
    """The hand-derived rows of the fixture's README, typed."""
    import csv

    path = FIXTURE / "expected" / "growth_accounting_by_segment_month.csv"
    with path.open(encoding="utf-8", newline="") as f:
        return [{k: (dt.date.fromisoformat(v) if k == "period_start" else
                     int(v) if k in COUNTS else (v or None)) for k, v in r.items()}
                for r in csv.DictReader(f)]


HAND_COLUMNS = ("segment", "segment_value", "period_start") + COUNTS


def test_reference_agrees_with_the_hand_derivation():
    """The reference reproduces fixtures/segments/expected (derived by hand in its README)."""
    rows, users = fixture_rows()
    got = rs.growth_by_segment(rows, SEGMENTS, "month", tables={"users": users})
    assert_rows_match(_sortable(got), _sortable(fixture_expected()),
                      ("segment", "_v", "period_start"), HAND_COLUMNS)


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("grain,week_start", [("month", "monday"), ("week", "sunday"),
                                              ("day", "monday")])
def test_fixture_on_every_engine(engines, engine_name, target, grain, week_start):
    """One load per engine and grain: every segmented view against the reference, and at
    month grain the hand-derived rows as committed."""
    rows, users = fixture_rows()
    results = run_segments(engines(engine_name), target, rows, users, grain, week_start)
    check(results, rows, users, grain, week_start)
    if grain == "month":
        assert_rows_match(_sortable(results["growth_accounting_by_segment"]),
                          _sortable(fixture_expected()), ("segment", "_v", "period_start"),
                          HAND_COLUMNS)


# ---------------------------------------------------------------- hypothesis data

VALUES = ("web", "ios", "android", None)
PLANS = ("free", "pro", "team", None)
CHANNELS = ("organic", "referral", "paid", None)


@st.composite
def segmented_rows(draw):
    """strategies.events() rows, each with a platform and a plan (NULL about one in four),
    and a users table holding some of the users (some twice)."""
    events = draw(strategies.events(max_size=30))
    rows = [(u, ts, {"platform": draw(st.sampled_from(VALUES)),
                     "plan": draw(st.sampled_from(PLANS))}) for u, ts in events]
    pool = sorted({str(u) for u, _ts in events if u is not None})
    users = draw(st.lists(st.tuples(st.sampled_from(pool), st.sampled_from(CHANNELS)),
                          max_size=8)) if pool else []
    return rows, users


@pytest.mark.slow
@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_random_data_on_every_engine(engines, engine_name, target):
    engine = engines(engine_name)

    @settings(max_examples=max(2, HYPOTHESIS_EXAMPLES[engine_name] // 3))
    @given(data=segmented_rows(), grain=strategies.grains(), week_start=strategies.week_starts())
    def run(data, grain, week_start):
        rows, users = data
        rows = [(None if u is None else str(u), ts, v) for u, ts, v in rows]
        results = run_segments(engine, target, rows, users, grain, week_start)
        check(results, rows, users, grain, week_start)

    run()


# ---------------------------------------------------------------- revenue by segment

# fixtures/revenue_seats' customers with a tier each: `late` listed twice (the smallest
# non-NULL value counts), `refund` with a NULL tier, `credit` missing from the table.
ACCOUNTS = [("seats", "pro"), ("flat", "basic"), ("late", "pro"), ("late", "basic"),
            ("refund", None), ("usd", "basic"), ("nobody", "pro")]
REVENUE_KEYS = ("segment", "_v", "period_start")


def accounts_table(target: str) -> str:
    return "accounts" if target in FLAT_TARGETS else "raw.accounts"


def revenue_segment_spec(target: str, grain: str, week_start: str) -> str:
    from harness import revenue_table

    extra = (f"revenue:\n  table: {revenue_table(target, 'charges')}\n  customer: account_id\n"
             "  amount: amount\n  timestamp: charged_at\n  where: \"currency = 'EUR'\"\n"
             "segments:\n"
             f"  tier: {{kind: user, column: tier, table: {accounts_table(target)}, "
             "customer_key: account_id}\n")
    return spec_text(target, grain=grain, week_start=week_start, extra=extra)


def expected_revenue_by_segment(charges, grain, week_start) -> list[dict]:
    """reference_revenue's customer rows, split by the customer's tier, each value's rows
    accounted by reference_revenue.revenue_accounting over the totals' calendar."""
    import reference_revenue as rr

    views = rr.revenue_views(charges, "charges", grain, week_start, keep_currency="EUR")
    summary = views["revenue_source_summary"][0]
    customers = {r["customer_id"] for r in views["customer_revenue"]}
    tier = rs.user_values([(c, None, {}) for c in customers], "tier", ACCOUNTS)
    out = []
    for value in sorted({tier[c] for c in customers}, key=lambda v: (v is not None, v or "")):
        part = [r for r in views["customer_revenue"] if tier[r["customer_id"]] == value]
        for row in rr.revenue_accounting(part, summary["first_date"], summary["last_date"],
                                         grain, week_start):
            out.append({"segment": "tier", "segment_value": value, **row})
    return rr._at_scale(out, 2)


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("grain,week_start", [("month", "monday"), ("week", "monday")])
def test_revenue_by_segment_on_every_engine(engines, engine_name, target, grain, week_start):
    """fixtures/revenue_seats split by a tier table keyed by the customer: row by row
    against the reference, and the tiers add up to revenue_accounting in every period."""
    import reference_revenue as rr
    from harness import load_revenue, read_revenue
    from test_revenue import _clean

    engine = engines(engine_name)
    charges = storable_rows(engine_name, rr.read_fixture_rows("revenue_seats"))
    engine.reset()
    load(engine, target, [("seats", dt.datetime(2024, 1, 5), {})], [])
    load_revenue(engine, charges, "charges", target=target)
    engine.create_table(accounts_table(target), [("account_id", "text"), ("tier", "text")],
                        ACCOUNTS)
    create_views(engine, revenue_segment_spec(target, grain, week_start), target)
    got = read_revenue(engine, target, ("revenue_accounting_by_segment", "revenue_accounting"))
    rows = _clean(got["revenue_accounting_by_segment"], engine_name, 2)
    want = expected_revenue_by_segment(charges, grain, week_start)
    columns = ("segment", "segment_value") + rr.ACCOUNTING_COLUMNS
    assert_rows_match(_sortable(rows), _sortable(want), REVENUE_KEYS, columns)
    totals = {r["period_start"]: r for r in _clean(got["revenue_accounting"], engine_name, 2)}
    for period, total in totals.items():
        for column in rr.MONEY + ("customers", "new_customers", "churned_customers"):
            assert sum(r[column] for r in rows if r["period_start"] == period) == total[column]


# ---------------------------------------------------------------- with first_seen

SEEN_FIXTURE = ref.FIXTURES_DIR / "segments_first_seen"
SEEN_SEGMENTS = {"platform": {"kind": "event", "column": "platform"},
                 "channel": {"kind": "user", "column": "channel", "table": "members"}}


def members_table(target: str) -> str:
    return "members" if target in FLAT_TARGETS else "raw.members"


def seen_spec(target: str, grain: str, week_start: str) -> str:
    """Segments and activity.first_seen over one users table (members: user_id, channel,
    signed_up_at), read as the first-seen table and as the kind user segment's table."""
    text = spec_text(target, grain=grain, week_start=week_start, extra=(
        "cohorts: true\nsegments:\n  platform: {kind: event, column: platform}\n"
        f"  channel: {{kind: user, column: channel, table: {members_table(target)}, "
        "key: user_id}\n"))
    return text.replace("  timestamp_type: timestamp\n", (
        "  timestamp_type: timestamp\n  first_seen:\n"
        f"    table: {members_table(target)}\n    user: user_id\n"
        "    timestamp: signed_up_at\n    timestamp_type: timestamp\n"), 1)


def run_seen(engine, target, rows, members, grain, week_start) -> dict[str, list[dict]]:
    """``members``: (user, channel, signed_up_at) rows."""
    load(engine, target, rows, [])
    engine.create_table(members_table(target), [("user_id", "text"), ("channel", "text"),
                                                ("signed_up_at", "timestamp")],
                        [(None if u is None else str(u), c, ts) for u, c, ts in members])
    create_views(engine, seen_spec(target, grain, week_start), target)
    return {name: read_view(engine, name, target) for name in SEGMENTED}


def check_seen(results, rows, members, grain, week_start) -> None:
    """Every segmented view against the reference with the first-seen dates, the identities
    per value, and the kind user values adding up to the totals (which apply the same rule)."""
    tables = {"members": [(u, c) for u, c, _ts in members]}
    seen = ref.first_seen_dates([(u, ts) for u, _c, ts in members])
    args = dict(tables=tables, first_seen=seen)
    growth = results["growth_accounting_by_segment"]
    assert_rows_match(_sortable(growth), _sortable(rs.growth_by_segment(
        rows, SEEN_SEGMENTS, grain, week_start, **args)), ("segment", "_v", "period_start"),
        rs.SEGMENT_GROWTH_COLUMNS)
    got = {(r["segment"], r["segment_value"], str(r["user_id"]), r["period_start"], r["state"])
           for r in results["user_states_by_segment"]}
    want = rs.states_by_segment(rows, SEEN_SEGMENTS, grain, week_start, **args)
    assert got == want, (sorted(got - want, key=str)[:5], sorted(want - got, key=str)[:5])
    assert_rows_match(_sortable(results["cohort_retention_by_segment"]),
                      _sortable(rs.cohorts_by_segment(rows, SEEN_SEGMENTS, grain, week_start,
                                                      **args)),
                      ("segment", "_v", "cohort_start", "age"), rs.SEGMENT_COHORT_COLUMNS)
    assert_identities_per_value(growth)
    assert_user_kinds_add_up(growth, results["growth_accounting"], SEEN_SEGMENTS)
    totals = {r["period_start"]: r for r in ref.growth_accounting(
        [(u, ts) for u, ts, _v in rows], grain, week_start, first_seen=seen)}
    assert {r["period_start"]: {c: r[c] for c in COUNTS} for r in results["growth_accounting"]} \
        == {p: {c: r[c] for c in COUNTS} for p, r in totals.items()}


def seen_fixture():
    import csv

    with (SEEN_FIXTURE / "events.csv").open(encoding="utf-8", newline="") as f:
        rows = [(r["user_id"], dt.datetime.fromisoformat(r["occurred_at"]),
                 {"platform": r["platform"]}) for r in csv.DictReader(f)]
    with (SEEN_FIXTURE / "members.csv").open(encoding="utf-8", newline="") as f:
        members = [(r["user_id"], r["channel"] or None,
                    dt.datetime.fromisoformat(r["signed_up_at"]) if r["signed_up_at"] else None)
                   for r in csv.DictReader(f)]
    return rows, members


def seen_expected() -> list[dict]:
    import csv

    path = SEEN_FIXTURE / "expected" / "growth_accounting_by_segment_month.csv"
    with path.open(encoding="utf-8", newline="") as f:
        return [{k: (dt.date.fromisoformat(v) if k == "period_start" else
                     int(v) if k in COUNTS else (v or None)) for k, v in r.items()}
                for r in csv.DictReader(f)]


def test_reference_with_first_seen_agrees_with_the_hand_derivation():
    """fixtures/segments_first_seen/expected, derived by hand in its README, and the hand
    cohorts: the reference applies the first-seen rule within each value."""
    rows, members = seen_fixture()
    seen = ref.first_seen_dates([(u, ts) for u, _c, ts in members])
    tables = {"members": [(u, c) for u, c, _ts in members]}
    got = rs.growth_by_segment(rows, SEEN_SEGMENTS, "month", tables=tables, first_seen=seen)
    assert_rows_match(_sortable(got), _sortable(seen_expected()),
                      ("segment", "_v", "period_start"), HAND_COLUMNS)
    cohorts = rs.cohorts_by_segment(rows, SEEN_SEGMENTS, "month", tables=tables,
                                    first_seen=seen)
    ios_nov = [(r["age"], r["cohort_users"], r["active_users"]) for r in cohorts
               if r["segment_value"] == "ios" and r["cohort_start"] == dt.date(2023, 11, 1)]
    assert ios_nov == [(0, 1, 0), (1, 1, 0), (2, 1, 0), (3, 1, 0), (4, 1, 1)]
    starts = {(r["segment_value"], r["cohort_start"]) for r in cohorts}
    assert ("android", dt.date(2023, 12, 1)) in starts and ("organic", dt.date(2023, 12, 1)) \
        in starts and (None, dt.date(2024, 1, 1)) in starts


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("grain,week_start", [("month", "monday"), ("week", "sunday")])
def test_first_seen_fixture_on_every_engine(engines, engine_name, target, grain, week_start):
    """fixtures/segments_first_seen: every segmented view against the reference, and at month
    grain the hand-derived rows as committed."""
    rows, members = seen_fixture()
    results = run_seen(engines(engine_name), target, rows, members, grain, week_start)
    check_seen(results, rows, members, grain, week_start)
    if grain == "month":
        assert_rows_match(_sortable(results["growth_accounting_by_segment"]),
                          _sortable(seen_expected()), ("segment", "_v", "period_start"),
                          HAND_COLUMNS)


@st.composite
def seen_rows(draw, engine_name):
    """segmented_rows' events and a members table: some users (some twice, some absent),
    each with a channel and a first-seen instant (NULLs and sentinels among them)."""
    rows, _users = draw(segmented_rows())
    pool = sorted({u for u, _ts, _v in rows if u is not None}) or ["nobody"]
    stamps = draw(strategies.events(max_size=8, sentinels=strategies.sentinel_values(
        "timestamp", engine_name)))
    members = [(draw(st.sampled_from(pool)), draw(st.sampled_from(CHANNELS)), ts)
               for _u, ts in stamps]
    return rows, members


@pytest.mark.slow
@pytest.mark.parametrize("engine_name,target", PAIRS)
def test_first_seen_random_data_on_every_engine(engines, engine_name, target):
    engine = engines(engine_name)

    @settings(max_examples=max(2, HYPOTHESIS_EXAMPLES[engine_name] // 3))
    @given(data=seen_rows(engine_name), grain=strategies.grains(),
           week_start=strategies.week_starts())
    def run(data, grain, week_start):
        rows, members = data
        rows = [(None if u is None else str(u), ts, v) for u, ts, v in rows]
        members = storable_rows(engine_name, members)
        results = run_seen(engine, target, rows, members, grain, week_start)
        check_seen(results, rows, members, grain, week_start)

    run()
