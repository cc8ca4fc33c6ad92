"""Seeded synthetic activity and charges tables, generated inside DuckDB with SQL only.

Shape (all invented): users arrive over 24 months at a growing rate; each user has a
lifetime of active months (geometric, mean depending on the user), is active in about 85 %
of the months of that lifetime, and afterwards comes back now and then (resurrection).
Events per active user-month are heavy tailed (log-normal, per-user level). About 12 % of
users pay a monthly plan that changes now and then (expansion, contraction) while they are
active. Every random draw is a hash of (seed, row keys, draw name), so the same seed gives
the same table whatever the thread count.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import duckdb

MONTHS = 24
FIRST_MONTH = "2023-01-01"
SEED = 20240611


@dataclass(frozen=True)
class Size:
    """A dataset size: how many users, and the per-user engagement level that sets events."""

    name: str
    users: int
    events_level: float  # log of the median events per active user-month


SIZES = {
    "smoke": Size("smoke", 5_000, 1.65),
    "1m": Size("1m", 25_000, 1.65),
    "10m": Size("10m", 250_000, 1.65),
    "100m": Size("100m", 2_500_000, 1.65),
}


def _u(*keys: str) -> str:
    """A uniform draw in [0, 1) from a hash of the seed and the given SQL keys."""
    inner = ", ".join((str(SEED),) + keys)
    return f"(hash({inner}) % 1000000007) / 1000000007.0"


def _normal(*keys: str) -> str:
    """A standard normal draw (Box-Muller over two hashed uniforms)."""
    u1 = _u(*keys, "'n1'")
    u2 = _u(*keys, "'n2'")
    return f"(sqrt(-2 * ln(1 - {u1})) * cos(2 * pi() * {u2}))"


def users_sql(size: Size) -> str:
    """One row per user: arrival month and day, lifetime, return rate, engagement, plan."""
    growth = 0.08  # arrivals grow by about 8 % a month
    return f"""
CREATE TABLE users AS
SELECT
  i AS user_id,
  CAST(LEAST({MONTHS - 1}, FLOOR(ln(1 + {_u('i', "'arrive'")} * (exp({growth} * {MONTHS}) - 1))
       / {growth})) AS INTEGER) AS arrival_month,
  CAST(FLOOR({_u('i', "'day'")} * 28) AS INTEGER) AS arrival_day,
  -- lifetime in months: geometric with a survival rate between 0.55 and 0.97 per user
  CAST(1 + FLOOR(ln(1 - {_u('i', "'life'")}) / ln(0.55 + 0.42 * {_u('i', "'surv'")}))
       AS INTEGER) AS lifetime,
  0.02 + 0.10 * {_u('i', "'back'")} AS return_rate,
  {size.events_level} + 0.6 * {_normal('i', "'level'")} AS level,
  CASE WHEN {_u('i', "'pays'")} < 0.12 THEN 1 ELSE 0 END AS payer
FROM range({size.users}) AS t(i)
"""


USER_MONTHS_SQL = f"""
CREATE TABLE user_months AS
WITH candidates AS (
  SELECT u.*, m.month, m.month - u.arrival_month AS age
  FROM users AS u CROSS JOIN range({MONTHS}) AS m(month)
  WHERE m.month >= u.arrival_month
)
SELECT user_id, month, age, payer, arrival_day,
  CAST(LEAST(3000, 1 + FLOOR(exp(level + 1.0 * {_normal('user_id', 'month', "'events'")})))
       AS INTEGER) AS n_events
FROM candidates
WHERE age = 0
   OR (age < lifetime AND {_u('user_id', 'month', "'active'")} < 0.85)
   OR (age >= lifetime AND {_u('user_id', 'month', "'active'")} < return_rate)
"""

EVENTS_SQL = f"""
CREATE TABLE events AS
WITH expanded AS (
  SELECT user_id, month, age, arrival_day, unnest(range(n_events)) AS j
  FROM user_months
), placed AS (
  SELECT user_id, j, month,
    DATE '{FIRST_MONTH}' + to_months(CAST(month AS INTEGER)) AS month_start,
    CASE WHEN age = 0 THEN arrival_day ELSE 0 END AS first_day
  FROM expanded
), timed AS (
  SELECT user_id, month_start, first_day,
    date_diff('day', month_start, month_start + INTERVAL 1 MONTH) AS month_days,
    {_u('user_id', 'month', 'j', "'day'")} AS u_day,
    CAST(FLOOR({_u('user_id', 'month', 'j', "'sec'")} * 86400) AS INTEGER) AS second
  FROM placed
)
SELECT user_id,
  CAST(month_start AS TIMESTAMP)
    + to_days(CAST(first_day + FLOOR(u_day * (month_days - first_day)) AS INTEGER))
    + to_seconds(second) AS ts
FROM timed
ORDER BY ts
"""

# Monthly charges for paying users in their active months. The plan moves up or down in
# about a fifth of the months; amounts are whole currency units with cents.
CHARGES_SQL = f"""
CREATE TABLE charges AS
SELECT
  user_id AS customer_id,
  CAST(DATE '{FIRST_MONTH}' + to_months(CAST(month AS INTEGER)) AS TIMESTAMP)
    + to_days(CASE WHEN age = 0 THEN arrival_day ELSE 0 END) + INTERVAL 9 HOUR AS charged_at,
  CAST([9.99, 19.99, 49.99, 99.99][
    1 + CAST(FLOOR(LEAST(3.999, 1.2 * {_u('user_id', "'plan'")} + 0.9
        * {_u('user_id', 'month', "'move'")} * CASE WHEN age > 0 THEN 1 ELSE 0 END)) AS INTEGER)
  ] AS DECIMAL(12, 2)) AS amount
FROM user_months
WHERE payer = 1
ORDER BY charged_at
"""


# For the segmented views: each event gets a platform (p0 .. p9; a user's own one on about
# 80 % of the events, any one on the others), and each user a sign-up channel (c0 .. c9, no
# channel for about 5 % of users) in a table of its own. Added to a database that lacks them.
SEGMENT_EVENTS_SQL = f"""
CREATE TABLE segment_events AS
SELECT user_id, ts,
  'p' || CAST(CASE WHEN {_u('user_id', 'epoch_us(ts)', "'alt'")} < 0.2
                   THEN hash(user_id, ts, 'pick') % 10
                   ELSE hash(user_id, 'platform') % 10 END AS VARCHAR) AS platform
FROM events
ORDER BY ts
"""
SEGMENT_USERS_SQL = f"""
CREATE TABLE segment_users AS
SELECT user_id,
  CASE WHEN {_u('user_id', "'nochannel'")} < 0.05 THEN NULL
       ELSE 'c' || CAST(hash(user_id, 'channel') % 10 AS VARCHAR) END AS channel
FROM (SELECT DISTINCT user_id FROM events)
"""


def add_segment_tables(path: Path, log=print) -> None:
    """Add segment_events and segment_users to a generated database that lacks them."""
    con = duckdb.connect(str(path))
    have = {row[0] for row in con.execute("SELECT table_name FROM information_schema.tables")
            .fetchall()}
    for name, sql in (("segment_events", SEGMENT_EVENTS_SQL),
                      ("segment_users", SEGMENT_USERS_SQL)):
        if name not in have:
            log(f"generating {name} ...")
            con.execute(sql)
    con.execute("CHECKPOINT")
    con.close()


# Revenue for the generator's paying users (the same users as in `events`: the users table is
# rebuilt from the same seeded draws). Each payer has a run of up to six subscriptions, one
# after the other: the first starts on the user's arrival day, each lasts a geometric number
# of months (mean about 5), the next moves the plan one step up (upgrade, 35 %) or down
# (downgrade, 25 %) or keeps it, and starts the day the previous one ends, or one to three
# months later (a lapse and a return, 15 %). After the last one the customer churns: it ends
# then, unless that is after the data's end (2024-12-31), when it has no end (NULL). About
# 15 % of payers bill yearly (ten months' price), the others monthly. Starts are mid-month
# (the arrival day), so the run rate at a month's end counts a subscription only from its
# first month end.
PLAN_PRICES = "[9.99, 19.99, 49.99, 99.99]"
SUBSCRIPTIONS_SQL = f"""
CREATE TABLE subscriptions AS
WITH payers AS (
  SELECT user_id, arrival_month, arrival_day,
    CAST(1 + FLOOR({_u('user_id', "'subs'")} * 6) AS INTEGER) AS n_subs,
    CAST(FLOOR({_u('user_id', "'plan'")} * 3) AS INTEGER) AS first_plan,
    CASE WHEN {_u('user_id', "'yearly'")} < 0.15 THEN 'year' ELSE 'month' END AS billing
  FROM users
  WHERE payer = 1
), pieces AS (
  SELECT p.*, k,
    CAST(1 + FLOOR(ln(1 - {_u('user_id', 'k', "'len'")}) / ln(0.8)) AS INTEGER) AS months,
    CASE WHEN k > 0 AND {_u('user_id', 'k', "'gap'")} < 0.15
         THEN 1 + CAST(FLOOR({_u('user_id', 'k', "'gaplen'")} * 3) AS INTEGER) ELSE 0 END AS gap,
    CASE WHEN k = 0 THEN 0
         WHEN {_u('user_id', 'k', "'move'")} < 0.35 THEN 1
         WHEN {_u('user_id', 'k', "'move'")} < 0.60 THEN -1 ELSE 0 END AS step
  FROM payers AS p CROSS JOIN range(6) AS t(k)
  WHERE k < p.n_subs
), placed AS (
  SELECT user_id, arrival_month, arrival_day, billing, k, n_subs, months,
    SUM(gap) OVER w
      + COALESCE(SUM(months) OVER (w ROWS BETWEEN UNBOUNDED PRECEDING AND 1 PRECEDING), 0)
      AS offset_months,
    CAST(GREATEST(0, LEAST(3, first_plan + SUM(step) OVER w)) AS INTEGER) AS plan
  FROM pieces
  WINDOW w AS (PARTITION BY user_id ORDER BY k)
), dated AS (
  SELECT user_id, billing, k, n_subs, plan,
    DATE '{FIRST_MONTH}' + to_months(CAST(arrival_month + offset_months AS INTEGER))
      + to_days(arrival_day) AS started_at,
    DATE '{FIRST_MONTH}' + to_months(CAST(arrival_month + offset_months + months AS INTEGER))
      + to_days(arrival_day) AS ends_at
  FROM placed
)
SELECT user_id AS customer_id, k AS sequence, CAST(started_at AS DATE) AS started_at,
  CASE WHEN ends_at > DATE '2024-12-31' THEN NULL ELSE CAST(ends_at AS DATE) END AS ended_at,
  billing,
  CAST({PLAN_PRICES}[plan + 1] * CASE WHEN billing = 'year' THEN 10 ELSE 1 END
       AS DECIMAL(12, 2)) AS amount
FROM dated
WHERE started_at <= DATE '2024-12-31'
ORDER BY started_at, customer_id
"""

# One invoice per billing interval of each subscription, on the day it renews (its start
# day of the month), until it ends or the data ends; then refunds: about 3 % of invoices are
# refunded in full a few days later (a negative line in the same month, so the month's total
# can be zero), about 4 % get a partial credit of 20 % (a service credit).
INVOICES_SQL = f"""
CREATE TABLE invoices AS
WITH billed AS (
  SELECT s.customer_id, s.sequence, s.amount, s.ended_at, b,
    CAST(s.started_at + to_months(CAST(b * CASE WHEN s.billing = 'year' THEN 12 ELSE 1 END
         AS INTEGER)) AS DATE) AS billed_on
  FROM subscriptions AS s CROSS JOIN range(24) AS t(b)
), kept AS (
  SELECT * FROM billed
  WHERE billed_on <= DATE '2024-12-31' AND (ended_at IS NULL OR billed_on < ended_at)
), lines AS (
  SELECT customer_id, CAST(billed_on AS TIMESTAMP) + INTERVAL 10 HOUR AS invoiced_at, amount
  FROM kept
  UNION ALL
  SELECT customer_id,
    CAST(billed_on AS TIMESTAMP) + INTERVAL 10 HOUR
      + to_days(CAST(FLOOR({_u('customer_id', 'sequence', 'b', "'rday'")} * 5) AS INTEGER)),
    CASE WHEN {_u('customer_id', 'sequence', 'b', "'refund'")} < 0.03 THEN -amount
         ELSE CAST(-ROUND(amount * 0.2, 2) AS DECIMAL(12, 2)) END
  FROM kept
  WHERE {_u('customer_id', 'sequence', 'b', "'refund'")} < 0.07
)
SELECT customer_id, invoiced_at, CAST(amount AS DECIMAL(12, 2)) AS amount
FROM lines
WHERE invoiced_at < TIMESTAMP '2025-01-01'
ORDER BY invoiced_at, customer_id
"""


def add_revenue_tables(path: Path, size: Size, log=print) -> None:
    """Add subscriptions and invoices to a generated database that lacks them."""
    con = duckdb.connect(str(path))
    have = {row[0] for row in con.execute("SELECT table_name FROM information_schema.tables")
            .fetchall()}
    if {"subscriptions", "invoices"} <= have:
        con.close()
        return
    con.execute("SET enable_progress_bar = false")
    con.execute(users_sql(size).replace("CREATE TABLE users", "CREATE TEMP TABLE users"))
    for name, sql in (("subscriptions", SUBSCRIPTIONS_SQL), ("invoices", INVOICES_SQL)):
        if name not in have:
            log(f"generating {name} ...")
            con.execute(sql)
    con.execute("DROP TABLE users")
    con.execute("CHECKPOINT")
    con.close()


def database_path(size: Size, data_dir: Path) -> Path:
    """Where the generated database of a size lives."""
    return data_dir / f"activity_{size.name}.duckdb"


def generate(size: Size, data_dir: Path, log=print) -> Path:
    """Create the database of a size unless it exists already; return its path."""
    path = database_path(size, data_dir)
    if path.exists():
        return path
    data_dir.mkdir(parents=True, exist_ok=True)
    partial = path.with_suffix(".partial")
    for leftover in (partial, Path(f"{partial}.wal")):
        if leftover.exists():
            leftover.unlink()
    con = duckdb.connect(str(partial))
    con.execute("SET enable_progress_bar = false")
    for label, sql in (("users", users_sql(size)), ("user_months", USER_MONTHS_SQL),
                       ("events", EVENTS_SQL), ("charges", CHARGES_SQL)):
        log(f"generating {label} ...")
        con.execute(sql)
    con.execute("DROP TABLE user_months")
    con.execute("DROP TABLE users")
    con.execute("CHECKPOINT")
    con.close()
    os.replace(partial, path)
    return path


def describe(con: duckdb.DuckDBPyConnection) -> dict[str, int]:
    """Events, users, user-months, user-weeks and user-days of the events table; charge,
    invoice (refund lines among them) and subscription rows, and paying customers."""
    sql = """
    SELECT
      (SELECT count(*) FROM events),
      (SELECT count(DISTINCT user_id) FROM events),
      (SELECT count(*) FROM (SELECT DISTINCT user_id, date_trunc('month', ts) FROM events)),
      (SELECT count(*) FROM (SELECT DISTINCT user_id, date_trunc('week', ts) FROM events)),
      (SELECT count(*) FROM (SELECT DISTINCT user_id, CAST(ts AS DATE) FROM events)),
      (SELECT count(*) FROM charges),
      (SELECT count(*) FROM invoices),
      (SELECT count(*) FILTER (WHERE amount < 0) FROM invoices),
      (SELECT count(*) FROM subscriptions),
      (SELECT count(DISTINCT customer_id) FROM subscriptions)
    """
    keys = ("events", "users", "user_months", "user_weeks", "user_days", "charges",
            "invoices", "refund_lines", "subscriptions", "customers")
    return dict(zip(keys, con.execute(sql).fetchall()[0], strict=True))
