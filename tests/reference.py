"""Plain-Python reference implementation of user growth accounting.

This module is the independent oracle the generated SQL views are tested
against. It uses only the standard library (datetime, zoneinfo,
collections, csv) and no SQL, so that every step can be read and checked
line by line.

Input events are ``(user, ts)`` pairs: ``user`` is a str, an int or None;
``ts`` is a ``datetime.date``, a naive or aware ``datetime.datetime``, or
None. Rows with a None user or a None ts are left out of every output, and so are rows
whose local date lies outside the valid range (``valid``: the spec's ``valid_from``
inclusive, ``valid_until`` exclusive; by default 1990-01-01 and 2100-01-01).

Regenerate the fixture expectations with ``python tests/reference.py``.
"""

from __future__ import annotations

import csv
import io
from collections import Counter, defaultdict
from datetime import UTC, date, datetime, timedelta
from pathlib import Path
from zoneinfo import ZoneInfo

GRAINS = ("day", "week", "month", "quarter", "year")
# Index in this tuple == datetime.date.weekday() of that day.
WEEKDAYS = ("monday", "tuesday", "wednesday", "thursday", "friday", "saturday", "sunday")
STATES = ("new", "retained", "resurrected", "churned")

GROWTH_COLUMNS = (
    "period_start",
    "active_users",
    "previous_active_users",
    "new_users",
    "retained_users",
    "resurrected_users",
    "churned_users",
    "net_change",
    "quick_ratio",
    "retention_rate",
    "churn_rate",
    "period_status",
)
STATE_COLUMNS = ("user_id", "period_start", "state")

_DATE_COLUMNS = {"period_start"}
_INT_COLUMNS = {
    "active_users",
    "previous_active_users",
    "new_users",
    "retained_users",
    "resurrected_users",
    "churned_users",
    "net_change",
    "null_user",
    "null_timestamp",
}
_FLOAT_COLUMNS = {"quick_ratio", "retention_rate", "churn_rate"}
VALID_RANGE = (date(1990, 1, 1), date(2100, 1, 1))  # the spec's default valid_from, valid_until


# --------------------------------------------------------------------------
# Calendar
# --------------------------------------------------------------------------


def local_date(ts, timezone=None):
    """Return the calendar date on which event timestamp ``ts`` happened.

    Without ``timezone`` the date is taken as stored: ``ts.date()`` for a
    datetime (an aware datetime keeps its own offset), ``ts`` itself for a
    date. With ``timezone`` (an IANA name) an aware datetime is converted
    to that zone, a naive datetime is read as UTC and then converted, and a
    plain date raises ValueError (it has no time of day to convert).
    """
    if isinstance(ts, datetime):
        if timezone is None:
            return ts.date()
        if ts.tzinfo is None:
            ts = ts.replace(tzinfo=UTC)
        return ts.astimezone(ZoneInfo(timezone)).date()
    if isinstance(ts, date):
        if timezone is not None:
            raise ValueError(f"date value {ts} cannot be converted to timezone {timezone!r}")
        return ts
    raise TypeError(f"expected a date or datetime, got {type(ts).__name__}")


def range_side(ts, timezone=None, valid=VALID_RANGE):
    """-1, 0 or 1: the local date of ``ts`` is before, in or after ``valid`` = (first date,
    first date after).

    A local date is less than a day from the stored date, so a value stored more than a day
    outside the range is outside it in every zone; it is never converted (a sentinel such as
    0001-01-01 would leave the years Python can hold).
    """
    first, after = valid
    stored = ts.date() if isinstance(ts, datetime) else ts
    if stored < first - timedelta(days=1):
        return -1
    if stored >= after + timedelta(days=1):
        return 1
    day = local_date(ts, timezone)
    return -1 if day < first else 1 if day >= after else 0


def in_valid_range(ts, timezone=None, valid=VALID_RANGE):
    """True when the local date of ``ts`` lies in the valid range."""
    return range_side(ts, timezone, valid) == 0


def _check_calendar_args(d, grain, week_start):
    """Raise on an unknown grain or week start, or on a datetime given as a date."""
    if grain not in GRAINS:
        raise ValueError(f"unknown grain {grain!r}; expected one of {GRAINS}")
    if week_start not in WEEKDAYS:
        raise ValueError(f"unknown week_start {week_start!r}; expected one of {WEEKDAYS}")
    if isinstance(d, datetime) or not isinstance(d, date):
        raise TypeError(f"expected a datetime.date, got {type(d).__name__}")


def period_start(d, grain, week_start="monday"):
    """Return the first day of the ``grain`` period that contains date ``d``.

    day: ``d``; week: the latest date <= ``d`` falling on ``week_start``;
    month, quarter (Jan/Apr/Jul/Oct), year: the first day of it.
    """
    _check_calendar_args(d, grain, week_start)
    if grain == "day":
        return d
    if grain == "week":
        days_back = (d.weekday() - WEEKDAYS.index(week_start)) % 7
        return d - timedelta(days=days_back)
    if grain == "month":
        return date(d.year, d.month, 1)
    if grain == "quarter":
        first_month_of_quarter = 3 * ((d.month - 1) // 3) + 1
        return date(d.year, first_month_of_quarter, 1)
    return date(d.year, 1, 1)


def _add_months(first_of_month, months):
    """Return the first day of the month ``months`` after ``first_of_month``."""
    index = first_of_month.year * 12 + (first_of_month.month - 1) + months
    return date(index // 12, index % 12 + 1, 1)


def next_period_start(p, grain, week_start="monday"):
    """Return the start of the period following the one that contains ``p``."""
    p = period_start(p, grain, week_start)
    if grain == "day":
        return p + timedelta(days=1)
    if grain == "week":
        return p + timedelta(days=7)
    months = {"month": 1, "quarter": 3, "year": 12}[grain]
    return _add_months(p, months)


def previous_period_start(p, grain, week_start="monday"):
    """Return the start of the period before the one that contains ``p``."""
    p = period_start(p, grain, week_start)
    return period_start(p - timedelta(days=1), grain, week_start)


def period_end(p, grain, week_start="monday"):
    """Return the exclusive end of the period containing ``p`` (next start)."""
    return next_period_start(p, grain, week_start)


# --------------------------------------------------------------------------
# Growth accounting
# --------------------------------------------------------------------------


def excluded_counts(events):
    """Count the rows that the accounting leaves out.

    ``null_user``: rows whose user is None (whatever their timestamp, so a
    row with both None is counted here only). ``null_timestamp``: rows with
    a user but a None timestamp.
    """
    counts = {"null_user": 0, "null_timestamp": 0}
    for user, ts in events:
        if user is None:
            counts["null_user"] += 1
        elif ts is None:
            counts["null_timestamp"] += 1
    return counts


def out_of_range_count(events, timezone=None, valid=VALID_RANGE):
    """Count the rows with a user and a timestamp whose local date is outside ``valid``."""
    return sum(1 for user, ts in events if user is not None and ts is not None
               and not in_valid_range(ts, timezone, valid))


def _included(events, timezone=None, valid=VALID_RANGE):
    """Return the events that have a user and a timestamp whose local date is in ``valid``."""
    return [(user, ts) for user, ts in events if user is not None and ts is not None
            and in_valid_range(ts, timezone, valid)]


def user_activity(events, grain, week_start="monday", timezone=None, valid=VALID_RANGE):
    """Return ``{(user, period_start): number_of_events}`` for active user-periods.

    Duplicate events are counted separately.
    """
    activity = Counter()
    for user, ts in _included(events, timezone, valid):
        day = local_date(ts, timezone)
        activity[(user, period_start(day, grain, week_start))] += 1
    return dict(activity)


def first_seen_dates(rows, timezone=None, valid=VALID_RANGE):
    """Return ``{user: earliest first-seen local date}`` from ``(user, ts)`` rows of a
    users table. A row with a None user or ts, or a local date outside ``valid`` (a
    sentinel), is ignored; a user listed twice keeps the earliest date."""
    seen = {}
    for user, ts in rows:
        if user is None or ts is None or not in_valid_range(ts, timezone, valid):
            continue
        day = local_date(ts, timezone)
        seen[user] = min(seen.get(user, day), day)
    return seen


def report_cut(rows, report_from, grain, week_start="monday", key="period_start"):
    """The rows whose period is not before the period holding ``report_from`` (all rows
    when it is None): the views leave the earlier periods out."""
    if report_from is None:
        return rows
    first = period_start(report_from, grain, week_start)
    if isinstance(rows, dict):
        return {k: v for k, v in rows.items() if k[1] >= first}
    if isinstance(rows, set):
        return {r for r in rows if r[1] >= first}
    return [r for r in rows if r[key] >= first]


def user_activity_from(events, grain, week_start="monday", timezone=None, valid=VALID_RANGE,
                       report_from=None):
    """``user_activity`` with the periods before ``report_from`` left out."""
    return report_cut(user_activity(events, grain, week_start, timezone, valid), report_from,
                      grain, week_start)


def user_states(events, grain, week_start="monday", timezone=None, valid=VALID_RANGE,
                first_seen=None, report_from=None):
    """Return the set of ``(user, period_start, state)`` rows.

    Each active user-period is 'new' (the user's first active period),
    'retained' (active in the immediately previous period too) or
    'resurrected' (otherwise). A user active in P but not in the next
    period Q gets ``(user, Q, 'churned')`` when Q is not after the last
    period that has any activity.

    ``first_seen`` (``{user: date}``, see first_seen_dates): a user whose first-seen period
    is before their first active period is 'resurrected' there, not 'new' (the sign-up
    came first; the user was dormant). ``report_from``: rows of earlier periods left out.
    """
    states = _user_states(events, grain, week_start, timezone, valid, first_seen or {})
    return report_cut(states, report_from, grain, week_start)


def _user_states(events, grain, week_start, timezone, valid, first_seen):
    activity = user_activity(events, grain, week_start, timezone, valid)
    if not activity:
        return set()
    last_period = max(p for _, p in activity)
    periods_by_user = defaultdict(set)
    for user, p in activity:
        periods_by_user[user].add(p)

    states = set()
    for user, periods in periods_by_user.items():
        first_period = min(periods)
        for p in periods:
            seen = first_seen.get(user)
            if p == first_period and seen is not None and \
                    period_start(seen, grain, week_start) < first_period:
                state = "resurrected"
            elif p == first_period:
                state = "new"
            elif previous_period_start(p, grain, week_start) in periods:
                state = "retained"
            else:
                state = "resurrected"
            states.add((user, p, state))

            q = next_period_start(p, grain, week_start)
            if q not in periods and q <= last_period:
                states.add((user, q, "churned"))
    return states


def _ratio(numerator, denominator):
    """Return numerator / denominator as a float, or None when dividing by 0."""
    if denominator == 0:
        return None
    return numerator / denominator


def _growth_row(p, active, previous, state_counts):
    """Build one growth accounting row for period ``p``."""
    new = state_counts[(p, "new")]
    retained = state_counts[(p, "retained")]
    resurrected = state_counts[(p, "resurrected")]
    churned = state_counts[(p, "churned")]
    return {
        "period_start": p,
        "active_users": active,
        "previous_active_users": previous,
        "new_users": new,
        "retained_users": retained,
        "resurrected_users": resurrected,
        "churned_users": churned,
        "net_change": active - previous,
        "quick_ratio": _ratio(new + resurrected, churned),
        "retention_rate": _ratio(retained, previous),
        "churn_rate": _ratio(churned, previous),
        "period_status": "complete",
    }


def growth_accounting(events, grain, week_start="monday", timezone=None, valid=VALID_RANGE,
                      first_seen=None, report_from=None):
    """Return one dict per period, ascending, from the first to the last active period.

    Periods without activity inside the range are included. Keys are
    GROWTH_COLUMNS. The last period is 'complete' only when the newest
    event's local date is the last day of that period, else 'in_progress'.
    ``first_seen`` and ``report_from`` as for user_states: the periods before
    ``report_from`` are computed, then left out.
    """
    rows = _growth_accounting(events, grain, week_start, timezone, valid, first_seen)
    return report_cut(rows, report_from, grain, week_start)


def _growth_accounting(events, grain, week_start, timezone, valid, first_seen):
    events = _included(events, timezone, valid)
    activity = user_activity(events, grain, week_start, timezone, valid)
    if not activity:
        return []
    state_counts = Counter(
        (p, state) for _, p, state in user_states(events, grain, week_start, timezone, valid,
                                                  first_seen)
    )
    active_users = Counter(p for _, p in activity)
    first_period = min(active_users)
    last_period = max(active_users)

    rows = []
    previous = 0
    p = first_period
    while p <= last_period:
        rows.append(_growth_row(p, active_users[p], previous, state_counts))
        previous = active_users[p]
        p = next_period_start(p, grain, week_start)

    newest_day = max(local_date(ts, timezone) for _, ts in events)
    last_day = period_end(last_period, grain, week_start) - timedelta(days=1)
    if newest_day != last_day:
        rows[-1]["period_status"] = "in_progress"
    return rows


def assert_identities(rows):
    """Raise AssertionError naming the period and identity that fails in ``rows``."""
    for row in rows:
        p = row["period_start"]
        active = row["active_users"]
        previous = row["previous_active_users"]
        new = row["new_users"]
        retained = row["retained_users"]
        resurrected = row["resurrected_users"]
        churned = row["churned_users"]
        checks = [
            (
                "active == previous + new + resurrected - churned",
                active == previous + new + resurrected - churned,
            ),
            ("previous == retained + churned", previous == retained + churned),
            ("active == new + retained + resurrected", active == new + retained + resurrected),
            ("net_change == active - previous", row["net_change"] == active - previous),
            ("churned >= 0", churned >= 0),
        ]
        for name, holds in checks:
            if not holds:
                raise AssertionError(f"period {p}: identity {name} fails in {row}")


# --------------------------------------------------------------------------
# Fixture files
# --------------------------------------------------------------------------


def _parse_timestamp(text, kind):
    """Parse one occurred_at text as a 'timestamp', 'timestamptz' or 'date'."""
    if kind == "date":
        return date.fromisoformat(text[:10])
    value = datetime.fromisoformat(text)
    if kind == "timestamp" and value.tzinfo is not None:
        raise ValueError(f"timestamp {text!r} has an offset; use kind='timestamptz'")
    if kind == "timestamptz" and value.tzinfo is None:
        raise ValueError(f"timestamptz {text!r} has no offset")
    if kind not in ("timestamp", "timestamptz"):
        raise ValueError(f"unknown kind {kind!r}")
    return value


def read_fixture_events(path, kind="timestamp"):
    """Read a fixture events.csv into ``(user_id, ts, event_name)`` tuples.

    Empty fields become None. ``kind`` picks how occurred_at is parsed:
    'timestamp' (naive datetime), 'timestamptz' (datetime with offset) or
    'date' (the date part of the text).
    """
    rows = []
    with Path(path).open(encoding="utf-8", newline="") as f:
        for record in csv.DictReader(f):
            text = record["occurred_at"]
            ts = _parse_timestamp(text, kind) if text else None
            rows.append((record["user_id"] or None, ts, record["event_name"] or None))
    return rows


def _format_value(value):
    """Format one value for an expected-output CSV."""
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, date):
        return value.isoformat()
    return str(value)


def csv_text(rows, columns):
    """Return CSV text (header first) for ``rows``: mappings keyed by ``columns``."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(columns)
    for row in rows:
        writer.writerow([_format_value(row[c]) for c in columns])
    return out.getvalue()


def write_csv(path, rows, columns):
    """Write ``rows`` (mappings keyed by ``columns``) as CSV to ``path``."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(csv_text(rows, columns), encoding="utf-8")


def _parse_value(column, text):
    """Parse one expected-output CSV field according to its column name."""
    if text == "":
        return None
    if column in _DATE_COLUMNS:
        return date.fromisoformat(text)
    if column in _INT_COLUMNS:
        return int(text)
    if column in _FLOAT_COLUMNS:
        return float(text)
    return text


def read_expected(path):
    """Read an expected-output CSV into a list of dicts with typed values."""
    with Path(path).open(encoding="utf-8", newline="") as f:
        return [{c: _parse_value(c, v) for c, v in record.items()} for record in csv.DictReader(f)]


def state_rows(states):
    """Return user_states tuples as dicts sorted by period, user and state."""
    ordered = sorted(states, key=lambda s: (s[1], str(s[0]), STATES.index(s[2])))
    return [{"user_id": u, "period_start": p, "state": s} for u, p, s in ordered]


# --------------------------------------------------------------------------
# Fixture expectations: which expected files each fixture folder holds
# --------------------------------------------------------------------------

FIXTURES_DIR = Path(__file__).resolve().parent.parent / "fixtures"

# grain label used in file names -> (grain, week_start)
GRAIN_LABELS = {
    "day": ("day", "monday"),
    "week_monday": ("week", "monday"),
    "week_sunday": ("week", "sunday"),
    "month": ("month", "monday"),
    "quarter": ("quarter", "monday"),
    "year": ("year", "monday"),
}

# Per fixture: how occurred_at is read, which event_name the spec filters
# out, the grain labels, and file-name suffix -> timezone.
FIXTURE_RUNS = {
    "lifecycle": {
        "kind": "timestamp",
        "drop_event": "push_received",
        "grains": ("week_monday", "week_sunday", "month", "quarter", "year"),
        "timezones": {"": None},
    },
    "calendar_edges": {
        "kind": "timestamp",
        "drop_event": None,
        "grains": ("week_monday", "week_sunday", "month", "quarter", "year"),
        "timezones": {"": None},
    },
    "dst_new_york": {
        "kind": "timestamp",
        "drop_event": None,
        "grains": ("day", "week_monday", "week_sunday"),
        "timezones": {"_tz": "America/New_York", "_utc": None},
    },
}


def fixture_events(name, events_file="events.csv", kind=None):
    """Return the ``(user, ts)`` events of fixture ``name`` after its event filter.

    The filter mirrors SQL ``event_name <> 'x'``: a NULL event_name is
    dropped too.
    """
    run = FIXTURE_RUNS[name]
    rows = read_fixture_events(FIXTURES_DIR / name / events_file, kind or run["kind"])
    drop = run["drop_event"]
    return [
        (user, ts)
        for user, ts, event in rows
        if drop is None or (event is not None and event != drop)
    ]


def fixture_expectations(name):
    """Return ``{relative file name: csv text}`` of fixture ``name``'s expected outputs."""
    run = FIXTURE_RUNS[name]
    events = fixture_events(name)
    files = {
        "expected/excluded_counts.csv": csv_text(
            [excluded_counts(events)], ("null_user", "null_timestamp")
        )
    }
    for label in run["grains"]:
        grain, week_start = GRAIN_LABELS[label]
        for suffix, tz in run["timezones"].items():
            growth = growth_accounting(events, grain, week_start, tz)
            states = state_rows(user_states(events, grain, week_start, tz))
            files[f"expected/growth_accounting_{label}{suffix}.csv"] = csv_text(
                growth, GROWTH_COLUMNS
            )
            files[f"expected/user_states_{label}{suffix}.csv"] = csv_text(states, STATE_COLUMNS)
    return files


def write_fixture_expectations():
    """Rewrite every fixture's expected/ files from the reference."""
    for name in FIXTURE_RUNS:
        for relative, text in fixture_expectations(name).items():
            path = FIXTURES_DIR / name / relative
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_text(text, encoding="utf-8")
            print(path)


if __name__ == "__main__":
    write_fixture_expectations()
