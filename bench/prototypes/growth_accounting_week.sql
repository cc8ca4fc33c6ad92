-- growth_accounting (grain: week, weeks starting on Monday) in one pass over the events: every column and row of
-- sqlgen's view, for the spec of bench/generated.py (table events, user_id, ts).
-- What changes against the generated view:
--   1. distinct (user, period) pairs come straight from the source in ONE grouping (only
--      MAX(activity_date) is carried, for period_status), instead of reading the
--      user_activity view three times (through user_states twice and directly once), whose
--      COUNT(DISTINCT activity_date), MIN and MAX are computed although unused here;
--   2. states are counted per period directly from LAG/LEAD (arrivals) and one grouping of
--      lapses on period_key + 1 (departures), with no UNION ALL of per-user state strings;
--   3. churn after the last period is dropped by the calendar join (calendar ends at last_key).
-- Portable as the templates are: integer period keys, COUNT(CASE ...), LAG/LEAD, digits.
WITH sqlgen_source AS (
  SELECT "user_id" AS sqlgen_user, "ts" AS sqlgen_ts
  FROM "events"
  WHERE NOT "user_id" IS NULL AND NOT "ts" IS NULL
), dated AS (
  SELECT sqlgen_user AS user_id, CAST(sqlgen_ts AS DATE) AS activity_date
  FROM sqlgen_source
), keyed AS (
  SELECT user_id, activity_date,
    (DATE_DIFF('day', DATE '1970-01-05', activity_date)
     - (DATE_DIFF('day', DATE '1970-01-05', activity_date) + 700000) % 7) AS period_key
  FROM dated
), active_periods AS (
  SELECT user_id, period_key, MAX(activity_date) AS last_date
  FROM keyed
  GROUP BY user_id, period_key
), sequenced AS (
  SELECT
    period_key,
    LAG(period_key) OVER (PARTITION BY user_id ORDER BY period_key) AS prior_key,
    LEAD(period_key) OVER (PARTITION BY user_id ORDER BY period_key) AS later_key
  FROM active_periods
), arrivals AS (
  SELECT
    period_key AS arrival_key,
    COUNT(*) AS active_count,
    COUNT(CASE WHEN prior_key IS NULL THEN 1 END) AS new_count,
    COUNT(CASE WHEN prior_key = period_key - 7 THEN 1 END) AS retained_count,
    COUNT(CASE WHEN prior_key < period_key - 7 THEN 1 END) AS resurrected_count
  FROM sequenced
  GROUP BY period_key
), departures AS (
  SELECT period_key + 7 AS lapse_key, COUNT(*) AS churned_count
  FROM sequenced
  WHERE later_key IS NULL OR later_key <> period_key + 7
  GROUP BY period_key + 7
), data_range AS (
  SELECT MIN(period_key) AS first_key, MAX(period_key) AS last_key,
    MAX(last_date) AS data_through
  FROM active_periods
), data_edge AS (
  SELECT first_key, last_key, data_through,
    (DATE_DIFF('day', DATE '1970-01-05', data_through + INTERVAL 1 DAY)
     - (DATE_DIFF('day', DATE '1970-01-05', data_through + INTERVAL 1 DAY) + 700000) % 7)
    AS after_data_key
  FROM data_range
), digits AS (
  SELECT 0 AS n UNION ALL SELECT 1 UNION ALL SELECT 2 UNION ALL SELECT 3 UNION ALL SELECT 4
  UNION ALL SELECT 5 UNION ALL SELECT 6 UNION ALL SELECT 7 UNION ALL SELECT 8 UNION ALL SELECT 9
), calendar AS (
  SELECT e.first_key + 7 * (digit_0.n + digit_1.n * 10 + digit_2.n * 100 + digit_3.n * 1000)
    AS calendar_key
  FROM data_edge AS e
  CROSS JOIN digits AS digit_0 CROSS JOIN digits AS digit_1
  CROSS JOIN digits AS digit_2 CROSS JOIN digits AS digit_3
  WHERE e.first_key + 7 * (digit_0.n + digit_1.n * 10 + digit_2.n * 100 + digit_3.n * 1000)
    <= e.last_key
), filled AS (
  SELECT
    c.calendar_key,
    COALESCE(a.active_count, 0) AS active_count,
    COALESCE(a.new_count, 0) AS new_count,
    COALESCE(a.retained_count, 0) AS retained_count,
    COALESCE(a.resurrected_count, 0) AS resurrected_count,
    COALESCE(d.churned_count, 0) AS churned_count,
    CASE
      WHEN c.calendar_key = e.last_key AND e.after_data_key = e.last_key THEN 'in_progress'
      ELSE 'complete'
    END AS status
  FROM calendar AS c
  CROSS JOIN data_edge AS e
  LEFT JOIN arrivals AS a ON a.arrival_key = c.calendar_key
  LEFT JOIN departures AS d ON d.lapse_key = c.calendar_key
), sequenced_totals AS (
  SELECT
    calendar_key, active_count,
    COALESCE(LAG(active_count) OVER (ORDER BY calendar_key), 0) AS previous_count,
    new_count, retained_count, resurrected_count, churned_count, status
  FROM filled
)
SELECT
  CAST(CAST('1970-01-05' AS DATE) + INTERVAL (calendar_key) DAY AS DATE) AS period_start,
  active_count AS active_users,
  previous_count AS previous_active_users,
  new_count AS new_users,
  retained_count AS retained_users,
  resurrected_count AS resurrected_users,
  churned_count AS churned_users,
  active_count - previous_count AS net_change,
  CAST(new_count + resurrected_count AS DOUBLE) / NULLIF(churned_count, 0) AS quick_ratio,
  CAST(retained_count AS DOUBLE) / NULLIF(previous_count, 0) AS retention_rate,
  CAST(churned_count AS DOUBLE) / NULLIF(previous_count, 0) AS churn_rate,
  status AS period_status,
  calendar_key AS period_key
FROM sequenced_totals
