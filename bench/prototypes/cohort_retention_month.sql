-- cohort_retention (grain: month) reading one lean grouping of the events, every column
-- and row of sqlgen's view. The only change: `user_activity` (read twice by the view, each
-- time with its unused COUNT(DISTINCT activity_date), MIN and MAX of dates) is replaced by
-- active_periods, the distinct (user, period) pairs, computed once. The rest is the
-- generated SQL of the view, unchanged.
WITH sqlgen_source AS (
  SELECT "user_id" AS sqlgen_user, "ts" AS sqlgen_ts
  FROM "events"
  WHERE NOT "user_id" IS NULL AND NOT "ts" IS NULL
), dated AS (
  SELECT sqlgen_user AS user_id, CAST(sqlgen_ts AS DATE) AS activity_date
  FROM sqlgen_source
), active_periods AS (
  SELECT user_id,
    (EXTRACT(YEAR FROM activity_date) * 12 + EXTRACT(MONTH FROM activity_date) - 1) AS period_key
  FROM dated
  GROUP BY user_id, (EXTRACT(YEAR FROM activity_date) * 12 + EXTRACT(MONTH FROM activity_date) - 1)
), marked AS (
  SELECT
    period_key AS marked_key,
    MIN(period_key) OVER (PARTITION BY user_id) AS marked_cohort_key
  FROM active_periods
), cohort_actives AS (
  SELECT
    marked_cohort_key AS active_cohort_key,
    marked_key AS active_key,
    COUNT(*) AS active_count
  FROM marked
  GROUP BY
    marked_cohort_key,
    marked_key
), cohort_sizes AS (
  SELECT
    active_cohort_key AS size_key,
    active_count AS size_count
  FROM cohort_actives
  WHERE
    active_key = active_cohort_key
), data_range AS (
  SELECT
    MIN(period_key) AS first_data_key,
    MAX(period_key) AS last_data_key
  FROM active_periods
), digits AS (
  SELECT
    0 AS n
  UNION ALL
  SELECT
    1
  UNION ALL
  SELECT
    2
  UNION ALL
  SELECT
    3
  UNION ALL
  SELECT
    4
  UNION ALL
  SELECT
    5
  UNION ALL
  SELECT
    6
  UNION ALL
  SELECT
    7
  UNION ALL
  SELECT
    8
  UNION ALL
  SELECT
    9
), ages AS (
  SELECT
    digit_0.n + digit_1.n * 10 + digit_2.n * 100 + digit_3.n * 1000 AS age_number
  FROM data_range AS r
  CROSS JOIN digits AS digit_0
  CROSS JOIN digits AS digit_1
  CROSS JOIN digits AS digit_2
  CROSS JOIN digits AS digit_3
  WHERE
    r.first_data_key + 1 * (
      digit_0.n + digit_1.n * 10 + digit_2.n * 100 + digit_3.n * 1000
    ) <= r.last_data_key
), triangle AS (
  SELECT
    s.size_key AS cell_cohort_key,
    g.age_number AS cell_age,
    s.size_key + 1 * g.age_number AS cell_key,
    s.size_count AS cell_size
  FROM cohort_sizes AS s
  CROSS JOIN ages AS g
  CROSS JOIN data_range AS r
  WHERE
    s.size_key + 1 * g.age_number <= r.last_data_key
)
SELECT
  CAST(CAST('1970-01-01' AS DATE) + INTERVAL (t.cell_cohort_key - 23640) MONTH AS DATE) AS cohort_start,
  t.cell_age AS age,
  CAST(CAST('1970-01-01' AS DATE) + INTERVAL (t.cell_key - 23640) MONTH AS DATE) AS period_start,
  t.cell_size AS cohort_users,
  COALESCE(c.active_count, 0) AS active_users,
  CAST(COALESCE(c.active_count, 0) AS DOUBLE) / NULLIF(t.cell_size, 0) AS retention_rate,
  t.cell_cohort_key AS cohort_key,
  t.cell_key AS period_key
FROM triangle AS t
LEFT JOIN cohort_actives AS c
  ON c.active_cohort_key = t.cell_cohort_key AND c.active_key = t.cell_key
