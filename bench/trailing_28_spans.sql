-- Trailing 28-day active users for every day from the first to the last day with activity,
-- in proportion to user-days (no day x window join): each active day of a user covers that
-- day and the 27 after it, cut where the user's next active day starts, so a user's spans
-- never overlap. +1 where a span starts, -1 after it ends, and a running sum over days.
WITH ud AS (
  SELECT DISTINCT user_id, CAST(ts AS DATE) AS day FROM events
), spans AS (
  SELECT day AS start_day,
    LEAST(LEAD(day) OVER (PARTITION BY user_id ORDER BY day), day + 28) AS end_day
  FROM ud
), deltas AS (
  SELECT start_day AS day, 1 AS delta FROM spans
  UNION ALL
  SELECT end_day AS day, -1 AS delta FROM spans
), per_day AS (
  SELECT day, sum(delta) AS change FROM deltas GROUP BY day
), bounds AS (
  SELECT CAST(min(day) AS TIMESTAMP) AS lo, CAST(max(day) AS TIMESTAMP) AS hi FROM ud
), calendar AS (
  SELECT CAST(unnest(generate_series(lo, hi, INTERVAL 1 DAY)) AS DATE) AS day FROM bounds
)
SELECT c.day,
  CAST(sum(coalesce(p.change, 0)) OVER (ORDER BY c.day) AS BIGINT) AS trailing_users
FROM calendar AS c
LEFT JOIN per_day AS p ON p.day = c.day
