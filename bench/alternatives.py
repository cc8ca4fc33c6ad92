"""What a user would write instead of sqlgen's views: hand-written SQL, pandas, polars.

Every monthly implementation returns the same summary, one row per month in order:
(period_start DATE, active, new, retained, resurrected, churned). Churn is counted in the
month after a user's last active month of a run, and never after the last month with data,
as sqlgen defines it. A period with churn but no active user is a row of its own (with
zeros), as in the view.
"""

from __future__ import annotations

import datetime as dt

import numpy as np

SUMMARY_COLUMNS = ("period_start", "active_users", "new_users", "retained_users",
                   "resurrected_users", "churned_users")

# The unavoidable work: one pass reducing events to distinct (user, month) pairs.
FLOOR_MONTH = ("SELECT count(*) FROM "
               "(SELECT DISTINCT user_id, date_trunc('month', ts) FROM events) AS q")
FLOOR_WEEK = ("SELECT count(*) FROM "
              "(SELECT DISTINCT user_id, date_trunc('week', ts) FROM events) AS q")

def _growth_out(column: str) -> str:
    """The summary rows from `tallied` and `churned` (a period with churn only included)."""
    return f"""
SELECT CAST(coalesce(t.{column}, c.churn_{column}) AS DATE) AS period_start,
  coalesce(t.active_users, 0) AS active_users, coalesce(t.new_users, 0) AS new_users,
  coalesce(t.retained_users, 0) AS retained_users,
  coalesce(t.resurrected_users, 0) AS resurrected_users,
  coalesce(c.churned_users, 0) AS churned_users
FROM tallied AS t FULL JOIN churned AS c ON c.churn_{column} = t.{column}
"""


# The typical analyst query: distinct user-months joined to themselves one month back
# (retained or resurrected) and one month forward (churned), plus each user's first month.
SELF_JOIN_MONTH = """
WITH ma AS (
  SELECT DISTINCT user_id, date_trunc('month', ts) AS month FROM events
), firsts AS (
  SELECT user_id, min(month) AS first_month FROM ma GROUP BY user_id
), classified AS (
  SELECT cur.month AS cur_month,
    CASE WHEN cur.month = f.first_month THEN 'new'
         WHEN prev.user_id IS NOT NULL THEN 'retained'
         ELSE 'resurrected' END AS state
  FROM ma AS cur
  JOIN firsts AS f ON f.user_id = cur.user_id
  LEFT JOIN ma AS prev
    ON prev.user_id = cur.user_id AND prev.month = cur.month - INTERVAL 1 MONTH
), churned AS (
  SELECT prev.month + INTERVAL 1 MONTH AS churn_month, count(*) AS churned_users
  FROM ma AS prev
  LEFT JOIN ma AS nxt
    ON nxt.user_id = prev.user_id AND nxt.month = prev.month + INTERVAL 1 MONTH
  WHERE nxt.user_id IS NULL AND prev.month < (SELECT max(month) FROM ma)
  GROUP BY 1
), tallied AS (
  SELECT cur_month AS month, count(*) AS active_users,
    count(CASE WHEN state = 'new' THEN 1 END) AS new_users,
    count(CASE WHEN state = 'retained' THEN 1 END) AS retained_users,
    count(CASE WHEN state = 'resurrected' THEN 1 END) AS resurrected_users
  FROM classified GROUP BY cur_month
)
""" + _growth_out("month")


def lag_lead(unit: str) -> str:
    """Hand-written LAG/LEAD over distinct user-periods, with date_trunc periods."""
    return f"""
WITH pa AS (
  SELECT DISTINCT user_id, date_trunc('{unit}', ts) AS period FROM events
), seq AS (
  SELECT user_id, period,
    lag(period) OVER w AS prev_period, lead(period) OVER w AS next_period
  FROM pa WINDOW w AS (PARTITION BY user_id ORDER BY period)
), tallied AS (
  SELECT period, count(*) AS active_users,
    count(CASE WHEN prev_period IS NULL THEN 1 END) AS new_users,
    count(CASE WHEN prev_period = period - INTERVAL 1 {unit} THEN 1 END) AS retained_users,
    count(CASE WHEN prev_period < period - INTERVAL 1 {unit} THEN 1 END) AS resurrected_users
  FROM seq GROUP BY period
), churned AS (
  SELECT period + INTERVAL 1 {unit} AS churn_period, count(*) AS churned_users
  FROM seq
  WHERE (next_period IS NULL OR next_period > period + INTERVAL 1 {unit})
    AND period < (SELECT max(period) FROM pa)
  GROUP BY 1
)
{_growth_out("period")}"""


def timing_sql(query: str) -> str:
    """A query forcing full evaluation of a summary while returning one small row."""
    sums = ", ".join(f"sum({c})" for c in SUMMARY_COLUMNS[1:])
    return f"SELECT count(*), {sums} FROM ({query}) AS q"


def rows_sql(query: str) -> str:
    """The summary rows of a query, in period order, for the agreement check."""
    return f"SELECT {', '.join(SUMMARY_COLUMNS)} FROM ({query}) AS q ORDER BY period_start"


def _tally(month: np.ndarray, prev: np.ndarray, nxt: np.ndarray) -> list[tuple]:
    """Summary rows from each distinct user-month's own, previous and next month (-1: none)."""
    last = month.max()
    first = month.min()
    size = last - first + 2
    idx = month - first
    active = np.bincount(idx, minlength=size)
    new = np.bincount(idx[prev < 0], minlength=size)
    retained = np.bincount(idx[prev == month - 1], minlength=size)
    resurrected = np.bincount(idx[(prev >= 0) & (prev < month - 1)], minlength=size)
    lapses = (nxt < 0) | (nxt > month + 1)
    churned = np.bincount(idx[lapses & (month < last)] + 1, minlength=size)
    return [(_month_start(first + i), int(active[i]), int(new[i]), int(retained[i]),
             int(resurrected[i]), int(churned[i])) for i in range(size - 1)]


def _month_start(key: int) -> dt.date:
    return dt.date(1970 + int(key) // 12, int(key) % 12 + 1, 1)


def pandas_month(events) -> list[tuple]:
    """Monthly summary with pandas: distinct user-months, groupby shift, counts."""
    import pandas as pd

    month = events["ts"].values.astype("datetime64[M]").astype(np.int64)
    pairs = pd.DataFrame({"user_id": events["user_id"].values, "month": month})
    pairs = pairs.drop_duplicates().sort_values(["user_id", "month"], ignore_index=True)
    by_user = pairs.groupby("user_id", sort=False)["month"]
    prev = by_user.shift(1).fillna(-1).to_numpy(np.int64)
    nxt = by_user.shift(-1).fillna(-1).to_numpy(np.int64)
    return _tally(pairs["month"].to_numpy(), prev, nxt)


def polars_month(events) -> list[tuple]:
    """Monthly summary with polars: distinct user-months, shift over user, counts."""
    import polars as pl

    month = (pl.col("ts").dt.year().cast(pl.Int64) - 1970) * 12 + pl.col("ts").dt.month() - 1
    pairs = (events.lazy().select(pl.col("user_id"), month.alias("month")).unique()
             .sort("user_id", "month")
             .with_columns(prev=pl.col("month").shift(1).over("user_id"),
                           nxt=pl.col("month").shift(-1).over("user_id"))
             .collect())
    return _tally(pairs["month"].to_numpy(), pairs["prev"].fill_null(-1).to_numpy(),
                  pairs["nxt"].fill_null(-1).to_numpy())


# Trailing 28-day active users for every day from the first to the last day with activity,
# the naive way: every day joined to each user-day of its window, then a distinct count per
# day. Work grows with user-days x 28.
NAIVE_TRAILING_28 = """
WITH ud AS (
  SELECT DISTINCT user_id, CAST(ts AS DATE) AS day FROM events
), bounds AS (
  SELECT CAST(min(day) AS TIMESTAMP) AS lo, CAST(max(day) AS TIMESTAMP) AS hi FROM ud
), days AS (
  SELECT CAST(unnest(generate_series(lo, hi, INTERVAL 1 DAY)) AS DATE) AS day FROM bounds
)
SELECT d.day, count(DISTINCT ud.user_id) AS trailing_users
FROM days AS d
LEFT JOIN ud ON ud.day BETWEEN d.day - 27 AND d.day
GROUP BY d.day
"""


# ------------------------------------------------------------------ every other view
# Each floor is the one grouping a view cannot avoid, timed as a count over it.
def floor_sql(unit: str) -> str:
    """Distinct (user, period) pairs of the events, for a date_trunc unit or 'day'."""
    period = "CAST(ts AS DATE)" if unit == "day" else f"date_trunc('{unit}', ts)"
    return f"SELECT count(*) FROM (SELECT DISTINCT user_id, {period} FROM events) AS q"


FLOOR_DAY = floor_sql("day")


def month_key(ts: str) -> str:
    """The integer month key (year * 12 + month - 1) of a timestamp or date."""
    return f"(year({ts}) * 12 + month({ts}) - 1)"


def key_start(key: str) -> str:
    """The first day of the month of an integer month key."""
    return f"CAST(DATE '1970-01-01' + INTERVAL ({key} - 23640) MONTH AS DATE)"


def self_join(unit: str) -> str:
    """The analyst's self-join (SELF_JOIN_MONTH) for any date_trunc unit."""
    return SELF_JOIN_MONTH.replace("'month'", f"'{unit}'").replace(
        "INTERVAL 1 MONTH", f"INTERVAL 1 {unit.upper()}")


# Revenue: a customer's total per month, before the rule that a zero or negative total
# counts as no revenue. `tot(customer_id, k, total)` and `rng(lo, hi)`: the first and last
# month of the data (for subscriptions the last end date counts too).
INVOICE_TOTALS = f"""
tot AS (
  SELECT customer_id, {month_key('invoiced_at')} AS k, sum(amount) AS total
  FROM invoices GROUP BY 1, 2
), rng AS (SELECT min(k) AS lo, max(k) AS hi FROM tot)"""

# Subscriptions, run rate: the monthly amount (amount / months of the billing interval,
# to the cent, half away from zero) of every subscription in force on a month's last day:
# from the month of its start to the month before the one holding its end.
SUBSCRIPTION_TOTALS = f"""
rng AS (
  SELECT {month_key('min(started_at)')} AS lo,
    {month_key('max(coalesce(ended_at, started_at))')} AS hi FROM subscriptions
), spans AS (
  SELECT s.customer_id, {month_key('s.started_at')} AS first_k,
    CASE WHEN s.ended_at IS NULL THEN r.hi ELSE {month_key('s.ended_at')} - 1 END AS last_k,
    CAST((CAST(s.amount * 100 AS BIGINT) * 2 + b.n) // (2 * b.n) AS DECIMAL(18, 0))
      * CAST(0.01 AS DECIMAL(3, 2)) AS monthly
  FROM subscriptions AS s CROSS JOIN rng AS r
  CROSS JOIN (SELECT CASE WHEN s.billing = 'year' THEN 12 ELSE 1 END) AS b(n)
), months AS (
  SELECT unnest(range(lo, hi + 1)) AS k FROM rng
), tot AS (
  SELECT s.customer_id, m.k, sum(s.monthly) AS total
  FROM spans AS s JOIN months AS m ON m.k BETWEEN s.first_k AND s.last_k
  GROUP BY 1, 2
)"""


def revenue_floor(totals: str) -> str:
    """The (customer, month) totals, counted: the floor of every revenue view."""
    return f"WITH {totals} SELECT count(*), sum(total) FROM tot"


REVENUE_COLUMNS = ("period_start", "revenue", "new_revenue", "expansion_revenue",
                   "resurrected_revenue", "contraction_revenue", "churned_revenue",
                   "customers", "churned_customers")

_REVENUE_TALLY = """
tallied AS (
  SELECT k, sum(rev) AS revenue,
    sum(CASE WHEN rev > 0 AND prev = 0 AND k = first_paid THEN rev ELSE 0 END) AS new_revenue,
    sum(CASE WHEN rev > prev AND prev > 0 THEN rev - prev ELSE 0 END) AS expansion_revenue,
    sum(CASE WHEN rev > 0 AND prev = 0 AND k > first_paid THEN rev ELSE 0 END)
      AS resurrected_revenue,
    sum(CASE WHEN rev > 0 AND prev > rev THEN prev - rev ELSE 0 END) AS contraction_revenue,
    sum(CASE WHEN rev = 0 AND prev > 0 THEN prev ELSE 0 END) AS churned_revenue,
    count(CASE WHEN rev > 0 THEN 1 END) AS customers,
    count(CASE WHEN rev = 0 AND prev > 0 THEN 1 END) AS churned_customers
  FROM classified GROUP BY k
)"""


def _revenue_out(extra_churn: bool) -> str:
    """The summary rows per month with a total or the month after one (every month here;
    written without a series function, so that it transpiles to every engine)."""
    churn = ("coalesce(t.churned_revenue, 0) + coalesce(g.gone_revenue, 0)"
             if extra_churn else "coalesce(t.churned_revenue, 0)")
    churned = ("coalesce(t.churned_customers, 0) + coalesce(g.gone_customers, 0)"
               if extra_churn else "coalesce(t.churned_customers, 0)")
    join = "LEFT JOIN gone AS g ON g.gone_k = p.k" if extra_churn else ""
    return f"""
SELECT {key_start('p.k')} AS period_start, coalesce(t.revenue, 0) AS revenue,
  coalesce(t.new_revenue, 0) AS new_revenue, coalesce(t.expansion_revenue, 0) AS expansion_revenue,
  coalesce(t.resurrected_revenue, 0) AS resurrected_revenue,
  coalesce(t.contraction_revenue, 0) AS contraction_revenue,
  {churn} AS churned_revenue, coalesce(t.customers, 0) AS customers, {churned} AS churned_customers
FROM (SELECT k FROM tot UNION SELECT k + 1 FROM tot) AS p
CROSS JOIN rng AS r
LEFT JOIN tallied AS t ON t.k = p.k {join}
WHERE p.k <= r.hi
"""


def revenue_lag_lead(totals: str) -> str:
    """Hand-written revenue accounting with LAG/LEAD over the (customer, month) totals."""
    return f"""
WITH {totals}, seq AS (
  SELECT customer_id, k, greatest(total, 0) AS rev,
    lag(k) OVER w AS pk, lag(greatest(total, 0)) OVER w AS prev_raw, lead(k) OVER w AS nk,
    min(CASE WHEN total > 0 THEN k END) OVER (PARTITION BY customer_id) AS first_paid
  FROM tot WINDOW w AS (PARTITION BY customer_id ORDER BY k)
), classified AS (
  SELECT k, rev, CASE WHEN pk = k - 1 THEN prev_raw ELSE 0 END AS prev, first_paid FROM seq
), {_REVENUE_TALLY.strip()}, gone AS (
  SELECT s.k + 1 AS gone_k, sum(s.rev) AS gone_revenue, count(*) AS gone_customers
  FROM seq AS s CROSS JOIN rng AS r
  WHERE s.rev > 0 AND (s.nk IS NULL OR s.nk > s.k + 1) AND s.k + 1 <= r.hi
  GROUP BY 1
){_revenue_out(True)}"""


def revenue_self_join(totals: str) -> str:
    """Hand-written revenue accounting: the totals fully joined to themselves a month back."""
    return f"""
WITH {totals}, firsts AS (
  SELECT customer_id, min(k) AS first_paid FROM tot WHERE total > 0 GROUP BY 1
), pairs AS (
  SELECT coalesce(c.customer_id, p.customer_id) AS customer_id, coalesce(c.k, p.k + 1) AS k,
    coalesce(greatest(c.total, 0), 0) AS rev, coalesce(greatest(p.total, 0), 0) AS prev
  FROM tot AS c FULL JOIN tot AS p ON p.customer_id = c.customer_id AND p.k = c.k - 1
), classified AS (
  SELECT x.k, x.rev, x.prev, f.first_paid
  FROM pairs AS x CROSS JOIN rng AS r LEFT JOIN firsts AS f ON f.customer_id = x.customer_id
  WHERE x.k <= r.hi
), {_REVENUE_TALLY.strip()}{_revenue_out(False)}"""


# cohort_retention: users by first active month, counted per later month (rows with users).
COHORTS_BY_HAND = f"""
WITH ma AS (SELECT DISTINCT user_id, {month_key('ts')} AS k FROM events),
f AS (SELECT user_id, min(k) AS c FROM ma GROUP BY 1)
SELECT {key_start('f.c')} AS cohort_start, ma.k - f.c AS age, count(*) AS active_users
FROM ma JOIN f USING (user_id) GROUP BY f.c, ma.k
"""

# engagement_depth: users per month and number of distinct active days (rows with users).
ENGAGEMENT_BY_HAND = """
WITH ud AS (SELECT DISTINCT user_id, CAST(ts AS DATE) AS d FROM events),
up AS (SELECT user_id, date_trunc('month', d) AS m, count(*) AS n FROM ud GROUP BY 1, 2)
SELECT CAST(m AS DATE) AS period_start, n AS active_days, count(*) AS users
FROM up GROUP BY 1, 2
"""

# user_states: each user's state per month with LAG/LEAD, as counts per (month, state).
USER_STATES_LAG_LEAD = f"""
WITH ma AS (SELECT DISTINCT user_id, {month_key('ts')} AS k FROM events),
seq AS (
  SELECT k, lag(k) OVER w AS pk, lead(k) OVER w AS nk
  FROM ma WINDOW w AS (PARTITION BY user_id ORDER BY k)
), states AS (
  SELECT k, CASE WHEN pk IS NULL THEN 'new' WHEN pk = k - 1 THEN 'retained'
                 ELSE 'resurrected' END AS state FROM seq
  UNION ALL
  SELECT k + 1, 'churned' FROM seq
  WHERE (nk IS NULL OR nk > k + 1) AND k < (SELECT max(k) FROM ma)
)
SELECT {key_start('k')} AS period_start, state, count(*) AS users FROM states GROUP BY k, state
"""
