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
    """Events, users, user-months and user-weeks of the events table, and charge rows."""
    sql = """
    SELECT
      (SELECT count(*) FROM events),
      (SELECT count(DISTINCT user_id) FROM events),
      (SELECT count(*) FROM (SELECT DISTINCT user_id, date_trunc('month', ts) FROM events)),
      (SELECT count(*) FROM (SELECT DISTINCT user_id, date_trunc('week', ts) FROM events)),
      (SELECT count(*) FROM (SELECT DISTINCT user_id, CAST(ts AS DATE) FROM events)),
      (SELECT count(*) FROM charges)
    """
    keys = ("events", "users", "user_months", "user_weeks", "user_days", "charges")
    return dict(zip(keys, con.execute(sql).fetchall()[0], strict=True))
