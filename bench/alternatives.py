"""What a user would write instead of sqlgen's views: hand-written SQL, pandas, polars.

Every monthly implementation returns the same summary, one row per month in order:
(period_start DATE, active, new, retained, resurrected, churned). Churn is counted in the
month after a user's last active month of a run, and never after the last month with data,
as sqlgen defines it.
"""

from __future__ import annotations

import datetime as dt

import numpy as np

SUMMARY_COLUMNS = ("period_start", "active_users", "new_users", "retained_users",
                   "resurrected_users", "churned_users")

# The unavoidable work: one pass reducing events to distinct (user, month) pairs.
FLOOR_MONTH = ("SELECT count(*) FROM "
               "(SELECT DISTINCT user_id, date_trunc('month', ts) FROM events)")
FLOOR_WEEK = ("SELECT count(*) FROM "
              "(SELECT DISTINCT user_id, date_trunc('week', ts) FROM events)")

# The typical analyst query: distinct user-months joined to themselves one month back
# (retained or resurrected) and one month forward (churned), plus each user's first month.
SELF_JOIN_MONTH = """
WITH ma AS (
  SELECT DISTINCT user_id, date_trunc('month', ts) AS month FROM events
), firsts AS (
  SELECT user_id, min(month) AS first_month FROM ma GROUP BY user_id
), classified AS (
  SELECT cur.month,
    CASE WHEN cur.month = f.first_month THEN 'new'
         WHEN prev.user_id IS NOT NULL THEN 'retained'
         ELSE 'resurrected' END AS state
  FROM ma AS cur
  JOIN firsts AS f ON f.user_id = cur.user_id
  LEFT JOIN ma AS prev
    ON prev.user_id = cur.user_id AND prev.month = cur.month - INTERVAL 1 MONTH
), churned AS (
  SELECT prev.month + INTERVAL 1 MONTH AS month, count(*) AS churned_users
  FROM ma AS prev
  LEFT JOIN ma AS nxt
    ON nxt.user_id = prev.user_id AND nxt.month = prev.month + INTERVAL 1 MONTH
  WHERE nxt.user_id IS NULL AND prev.month < (SELECT max(month) FROM ma)
  GROUP BY 1
), tallied AS (
  SELECT month, count(*) AS active_users,
    count(CASE WHEN state = 'new' THEN 1 END) AS new_users,
    count(CASE WHEN state = 'retained' THEN 1 END) AS retained_users,
    count(CASE WHEN state = 'resurrected' THEN 1 END) AS resurrected_users
  FROM classified GROUP BY month
)
SELECT CAST(t.month AS DATE) AS period_start, t.active_users, t.new_users, t.retained_users,
  t.resurrected_users, coalesce(c.churned_users, 0) AS churned_users
FROM tallied AS t LEFT JOIN churned AS c ON c.month = t.month
"""


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
  SELECT period + INTERVAL 1 {unit} AS period, count(*) AS churned_users
  FROM seq
  WHERE (next_period IS NULL OR next_period > period + INTERVAL 1 {unit})
    AND period < (SELECT max(period) FROM pa)
  GROUP BY 1
)
SELECT CAST(t.period AS DATE) AS period_start, t.active_users, t.new_users, t.retained_users,
  t.resurrected_users, coalesce(c.churned_users, 0) AS churned_users
FROM tallied AS t LEFT JOIN churned AS c ON c.period = t.period
"""


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
