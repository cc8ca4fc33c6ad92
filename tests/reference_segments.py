"""Plain-Python reference for the segmented views (docs/segments.md), by sets of users.

Like tests/reference.py (whose calendar helpers it reuses) it uses only the standard library
and no SQL, and follows the definitions directly, without the SQL's tricks:

- a ``kind: event`` segment splits the activity rows by their value; each value's growth
  accounting is computed from its own rows alone;
- a ``kind: user`` segment gives each user one value (from a table of (key, value) rows, the
  smallest non-None value of the key, None when missing; else the value on the user's first
  counted row, the smallest non-None one among rows at that instant) and splits the users;
- every value's rows span the totals' calendar, from the first to the last period with any
  activity; a user lapses only up to that last period;
- with first-seen dates (``{user: date}``, reference.first_seen_dates) the first-seen rule
  applies within each value: a user's first active period in a value is resurrected, not
  new, when the user's first-seen period is earlier; the user's cohort in the value is the
  earlier of the two periods.

Input rows are ``(user, ts, values)``, ``values`` a dict of column -> value; rows with a
None user or ts, or a local date outside the valid range, are left out.
"""

from __future__ import annotations

from collections import defaultdict
from datetime import timedelta

from reference import (VALID_RANGE, _ratio, in_valid_range, local_date, next_period_start,
                       period_end, period_start, previous_period_start)

SEGMENT_GROWTH_COLUMNS = ("segment", "segment_value", "period_start", "active_users",
                          "previous_active_users", "new_users", "retained_users",
                          "resurrected_users", "churned_users", "net_change", "quick_ratio",
                          "retention_rate", "churn_rate", "period_status")
SEGMENT_STATE_COLUMNS = ("segment", "segment_value", "user_id", "period_start", "state")
SEGMENT_COHORT_COLUMNS = ("segment", "segment_value", "cohort_start", "age", "period_start",
                          "cohort_users", "active_users", "retention_rate")


def counted(rows, timezone=None, valid=VALID_RANGE):
    """The rows that count: a user, a timestamp, a local date in the valid range."""
    return [r for r in rows if r[0] is not None and r[1] is not None
            and in_valid_range(r[1], timezone, valid)]


def text(value):
    """A value as the views show it: text, None kept (a group of its own)."""
    return None if value is None else str(value)


def _smallest(values):
    present = [v for v in values if v is not None]
    return min(present) if present else None


def user_values(rows, column, table_rows=None):
    """{user: value} for a kind user segment (rows already counted)."""
    users = {r[0] for r in rows}
    if table_rows is not None:
        by_key = defaultdict(list)
        for key, value in table_rows:
            if key is not None:
                by_key[key].append(value)
        return {u: _smallest(by_key.get(u, [])) for u in users}
    first = {}
    for user, ts, _values in rows:
        if user not in first or ts < first[user]:
            first[user] = ts
    return {u: _smallest([vals.get(column) for user, ts, vals in rows
                          if user == u and ts == first[u]]) for u in users}


def value_periods(rows, segment, grain, week_start, timezone=None, table_rows=None):
    """{value text: {user: set of active period starts in that value}}."""
    kind, column = segment["kind"], segment["column"]
    chosen = user_values(rows, column, table_rows) if kind == "user" else None
    found = defaultdict(lambda: defaultdict(set))
    for user, ts, values in rows:
        value = chosen[user] if kind == "user" else values.get(column)
        found[text(value)][user].add(period_start(local_date(ts, timezone), grain, week_start))
    return found


def _calendar(rows, grain, week_start, timezone):
    periods = {period_start(local_date(ts, timezone), grain, week_start) for _u, ts, _v in rows}
    p, last, out = min(periods), max(periods), []
    while p <= last:
        out.append(p)
        p = next_period_start(p, grain, week_start)
    return out


def _status(rows, last, grain, week_start, timezone):
    newest = max(local_date(ts, timezone) for _u, ts, _v in rows)
    return "complete" if newest == period_end(last, grain, week_start) - timedelta(days=1) \
        else "in_progress"


def _seen_periods(first_seen, grain, week_start):
    return {u: period_start(d, grain, week_start) for u, d in (first_seen or {}).items()}


def _is_new(user, p, periods, seen):
    """p is the user's first active period in the value and no earlier first-seen period."""
    return p == min(periods) and not (user in seen and seen[user] < p)


def growth_by_segment(rows, segments, grain, week_start="monday", timezone=None, tables=None,
                      first_seen=None):
    """One dict per segment, value and period of the totals' calendar (SEGMENT_GROWTH_COLUMNS).

    ``segments``: {name: {"kind", "column"[, "table"]}}; ``tables``: {table: [(key, value)]};
    ``first_seen``: {user: first-seen date}.
    """
    rows = counted(rows, timezone)
    if not rows:
        return []
    calendar = _calendar(rows, grain, week_start, timezone)
    last_status = _status(rows, calendar[-1], grain, week_start, timezone)
    seen = _seen_periods(first_seen, grain, week_start)
    out = []
    for name, segment in segments.items():
        table = (tables or {}).get(segment.get("table")) if segment.get("table") else None
        for value, users in value_periods(rows, segment, grain, week_start, timezone,
                                          table).items():
            for p in calendar:
                out.append(_row(name, value, users, p, grain, week_start, seen))
            out[-1]["period_status"] = last_status
    return out


def _row(name, value, users, p, grain, week_start, seen):
    prev = previous_period_start(p, grain, week_start)
    active = {u for u, ps in users.items() if p in ps}
    previous = {u for u, ps in users.items() if prev in ps}
    new = {u for u in active if _is_new(u, p, users[u], seen)}
    retained = active & previous
    resurrected = active - new - retained
    churned = previous - active
    return {"segment": name, "segment_value": value, "period_start": p,
            "active_users": len(active), "previous_active_users": len(previous),
            "new_users": len(new), "retained_users": len(retained),
            "resurrected_users": len(resurrected), "churned_users": len(churned),
            "net_change": len(active) - len(previous),
            "quick_ratio": _ratio(len(new) + len(resurrected), len(churned)),
            "retention_rate": _ratio(len(retained), len(previous)),
            "churn_rate": _ratio(len(churned), len(previous)), "period_status": "complete"}


def states_by_segment(rows, segments, grain, week_start="monday", timezone=None, tables=None,
                      first_seen=None):
    """The set of (segment, value, user, period_start, state) rows."""
    rows = counted(rows, timezone)
    if not rows:
        return set()
    last = _calendar(rows, grain, week_start, timezone)[-1]
    seen = _seen_periods(first_seen, grain, week_start)
    out = set()
    for name, segment in segments.items():
        table = (tables or {}).get(segment.get("table")) if segment.get("table") else None
        for value, users in value_periods(rows, segment, grain, week_start, timezone,
                                          table).items():
            for user, periods in users.items():
                for p in periods:
                    prev = previous_period_start(p, grain, week_start)
                    state = ("new" if _is_new(user, p, periods, seen) else
                             "retained" if prev in periods else "resurrected")
                    out.add((name, value, str(user), p, state))
                    q = next_period_start(p, grain, week_start)
                    if q not in periods and q <= last:
                        out.add((name, value, str(user), q, "churned"))
    return out


def cohorts_by_segment(rows, segments, grain, week_start="monday", timezone=None, tables=None,
                       first_seen=None):
    """One dict per segment, value, cohort and age (SEGMENT_COHORT_COLUMNS): a user's cohort
    is the first active period in the value (with first_seen, the earlier of that and the
    first-seen period); ages run to the totals' last period."""
    rows = counted(rows, timezone)
    if not rows:
        return []
    last = _calendar(rows, grain, week_start, timezone)[-1]
    seen = _seen_periods(first_seen, grain, week_start)
    out = []
    for name, segment in segments.items():
        table = (tables or {}).get(segment.get("table")) if segment.get("table") else None
        for value, users in value_periods(rows, segment, grain, week_start, timezone,
                                          table).items():
            cohorts = defaultdict(set)
            for user, periods in users.items():
                start = min(periods)
                cohorts[min(start, seen[user]) if user in seen else start].add(user)
            for start, members in cohorts.items():
                p, age = start, 0
                while p <= last:
                    active = sum(1 for u in members if p in users[u])
                    out.append({"segment": name, "segment_value": value, "cohort_start": start,
                                "age": age, "period_start": p, "cohort_users": len(members),
                                "active_users": active,
                                "retention_rate": active / len(members)})
                    p, age = next_period_start(p, grain, week_start), age + 1
    return out
