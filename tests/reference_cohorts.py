"""Plain-Python reference for cohort retention, engagement depth and trailing windows.

Like tests/reference.py (whose calendar helpers it reuses) it uses only the standard
library and no SQL, and each function follows the definition in docs/cohorts.md directly,
by sets of users, without the tricks the SQL views use to stay fast. Input events are
``(user, ts)`` pairs; rows with a None user or ts are left out.
"""

from __future__ import annotations

from collections import defaultdict
from datetime import timedelta
from decimal import Decimal

from reference import _included, _ratio, local_date, next_period_start, period_start

COHORT_COLUMNS = ("cohort_start", "age", "period_start", "cohort_users", "active_users",
                  "retention_rate")
ENGAGEMENT_COLUMNS = ("period_start", "active_days", "users", "share_of_active_users",
                      "daily_to_period_ratio", "period_active_users", "observed_days",
                      "period_status")
REVENUE_COHORT_COLUMNS = ("cohort_start", "age", "period_start", "cohort_customers",
                          "paying_customers", "revenue", "cumulative_revenue",
                          "net_revenue_retention")
TRAILING_COLUMNS = ("day", "window_days", "active_users", "previous_active_users", "new_users",
                    "retained_users", "resurrected_users", "churned_users", "quick_ratio")


def active_dates(events, timezone=None):
    """Return ``{user: set of local dates with activity}``."""
    dates = defaultdict(set)
    for user, ts in _included(events, timezone):
        dates[user].add(local_date(ts, timezone))
    return dict(dates)


def _periods_by_user(events, grain, week_start, timezone):
    """Return ``{user: set of period starts with activity}``."""
    return {user: {period_start(d, grain, week_start) for d in days}
            for user, days in active_dates(events, timezone).items()}


def _period_range(first, last, grain, week_start):
    """Every period start from ``first`` to ``last``, ascending."""
    periods = []
    p = first
    while p <= last:
        periods.append(p)
        p = next_period_start(p, grain, week_start)
    return periods


def cohort_retention(events, grain, week_start="monday", timezone=None, first_seen=None,
                     report_from=None):
    """One dict per cohort and age, sorted by cohort then age (keys COHORT_COLUMNS).

    A user's cohort is their first active period. Every age from 0 up to the last period
    with any activity appears, with active_users 0 when nobody of the cohort was active.
    ``first_seen`` (``{user: date}``, reference.first_seen_dates): the cohort is the
    earlier of the first-seen and first active periods (a user without activity is in no
    cohort). ``report_from``: cohorts of earlier periods are left out at every age.
    """
    periods = _periods_by_user(events, grain, week_start, timezone)
    if not periods:
        return []
    last = max(max(ps) for ps in periods.values())
    members = defaultdict(list)
    for user, ps in periods.items():
        cohort = min(ps)
        seen = (first_seen or {}).get(user)
        if seen is not None:
            cohort = min(cohort, period_start(seen, grain, week_start))
        members[cohort].append(user)
    first_shown = period_start(report_from, grain, week_start) if report_from else None
    rows = []
    for cohort in sorted(c for c in members if first_shown is None or c >= first_shown):
        users = members[cohort]
        for age, p in enumerate(_period_range(cohort, last, grain, week_start)):
            active = sum(1 for u in users if p in periods[u])
            rows.append({"cohort_start": cohort, "age": age, "period_start": p,
                         "cohort_users": len(users), "active_users": active,
                         "retention_rate": _ratio(active, len(users))})
    return rows


def engagement_depth(events, grain, week_start="monday", timezone=None):
    """One dict per period and possible day count (keys ENGAGEMENT_COLUMNS), sorted.

    For each period from the first to the last with activity, and each n from 1 to the
    number of days in the period: the users active on exactly n distinct days of it. The
    daily-to-period ratio is the average daily active users over the observed days (the
    whole period, except that the last stops at the newest activity date) divided by the
    period's active users.
    """
    dates = active_dates(events, timezone)
    if not dates:
        return []
    newest = max(max(ds) for ds in dates.values())
    days_in = defaultdict(lambda: defaultdict(int))  # period -> user -> active days
    for user, ds in dates.items():
        for d in ds:
            days_in[period_start(d, grain, week_start)][user] += 1
    first, last = min(days_in), max(days_in)
    rows = []
    for p in _period_range(first, last, grain, week_start):
        length = (next_period_start(p, grain, week_start) - p).days
        observed = (newest - p).days + 1 if p == last else length
        counts = days_in.get(p, {})
        users = len(counts)
        user_days = sum(counts.values())
        ratio = None if users == 0 else user_days / (observed * users)
        for n in range(1, length + 1):
            exactly = sum(1 for k in counts.values() if k == n)
            rows.append({"period_start": p, "active_days": n, "users": exactly,
                         "share_of_active_users": _ratio(exactly, users),
                         "daily_to_period_ratio": ratio, "period_active_users": users,
                         "observed_days": observed,
                         "period_status": "in_progress" if observed < length else "complete"})
    return rows


def trailing_activity(events, windows, timezone=None, first_seen=None):
    """One dict per day (first to last active day) and window length, sorted by window, day.

    With W(d) the N days ending on d: active = users active in W(d); previous = users
    active in W(d - N); new = active users whose first active day is in W(d); retained =
    active in both; resurrected = active, not in the previous window, not new; churned =
    in the previous window but not in W(d).
    ``first_seen`` (``{user: date}``, reference.first_seen_dates): a user first seen before
    W(d) is not new in it (first active in W(d), so resurrected), as a user first seen in an
    earlier period is not new in growth accounting.
    """
    dates = active_dates(events, timezone)
    if not dates:
        return []
    by_day = defaultdict(set)
    for user, ds in dates.items():
        for d in ds:
            by_day[d].add(user)
    first_day = {user: min(ds) for user, ds in dates.items()}
    seen = first_seen or {}
    start, end = min(by_day), max(by_day)

    def window(last_day, n):
        return set().union(*(by_day.get(last_day - timedelta(days=k), set()) for k in range(n)))

    rows = []
    for n in windows:
        d = start
        while d <= end:
            rows.append(_trailing_row(d, n, window(d, n), window(d - timedelta(days=n), n),
                                      first_day, seen))
            d += timedelta(days=1)
    return rows


def _trailing_row(d, n, current, previous, first_day, seen):
    """One trailing_activity row from the sets of users in this and the previous window."""
    window_start = d - timedelta(days=n - 1)
    new = {u for u in current if first_day[u] >= window_start
           and (u not in seen or seen[u] >= window_start)}
    retained = current & previous
    resurrected = current - previous - new
    churned = previous - current
    return {"day": d, "window_days": n, "active_users": len(current),
            "previous_active_users": len(previous), "new_users": len(new),
            "retained_users": len(retained), "resurrected_users": len(resurrected),
            "churned_users": len(churned),
            "quick_ratio": _ratio(len(new) + len(resurrected), len(churned))}


def revenue_cohorts(customer_rows, last_date, grain, week_start="monday"):
    """One dict per revenue cohort and age (keys REVENUE_COHORT_COLUMNS), sorted.

    ``customer_rows`` are customer_revenue rows (customer_id, period_start, revenue), e.g.
    from tests/reference_revenue.py; ``last_date`` is the newest counted date. A customer's
    cohort is the first period with revenue > 0; customers who never had any are in none.
    Ages run to the period holding ``last_date``; net revenue retention is the revenue at
    an age over the cohort's revenue at age 0.
    """
    paying = {(r["customer_id"], r["period_start"]): r["revenue"]
              for r in customer_rows if r["revenue"] > 0}
    first = {}
    for customer, p in paying:
        first[customer] = min(first.get(customer, p), p)
    members = defaultdict(list)
    for customer, p in first.items():
        members[p].append(customer)
    last = period_start(last_date, grain, week_start) if last_date else None
    rows = []
    for cohort in sorted(members):
        users = members[cohort]
        cumulative = base = Decimal(0)
        for age, p in enumerate(_period_range(cohort, last, grain, week_start)):
            amounts = [paying[(c, p)] for c in users if (c, p) in paying]
            revenue = sum(amounts, Decimal(0))
            cumulative += revenue
            base = revenue if age == 0 else base
            rows.append({"cohort_start": cohort, "age": age, "period_start": p,
                         "cohort_customers": len(users), "paying_customers": len(amounts),
                         "revenue": revenue, "cumulative_revenue": cumulative,
                         "net_revenue_retention": _ratio(float(revenue), float(base))})
    return rows
