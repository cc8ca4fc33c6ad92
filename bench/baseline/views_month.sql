-- sqlgen's DuckDB views for bench's spec (grain month) as generated before the
-- views read one lean grouping of the events (sqlgen at commit e942290), kept
-- verbatim so that bench/run.py times the before and after in the same run.
-- Regenerate only to move the baseline; see bench/README.md.


-- user_activity
CREATE OR REPLACE VIEW "before_month".user_activity AS
WITH sqlgen_source AS (
  SELECT
    "user_id" AS sqlgen_user,
    "ts" AS sqlgen_ts
  FROM "events"
  WHERE
    NOT "user_id" IS NULL AND NOT "ts" IS NULL
), dated AS (
  SELECT
    sqlgen_user AS user_id,
    CAST(sqlgen_ts AS DATE) AS activity_date
  FROM sqlgen_source
), keyed AS (
  SELECT
    user_id,
    activity_date,
    (
      EXTRACT(YEAR FROM activity_date) * 12 + EXTRACT(MONTH FROM activity_date) - 1
    ) AS period_key
  FROM dated
  WHERE
    NOT activity_date IS NULL
)
SELECT
  user_id,
  period_key,
  CAST(CAST('1970-01-01' AS DATE) + INTERVAL (period_key - 23640) MONTH AS DATE) AS period_start,
  COUNT(*) AS events,
  COUNT(DISTINCT activity_date) AS active_days,
  MIN(activity_date) AS first_active_date,
  MAX(activity_date) AS last_active_date
FROM keyed
GROUP BY
  user_id,
  period_key;

-- user_states
CREATE OR REPLACE VIEW "before_month".user_states AS
WITH sequenced AS (
  SELECT
    user_id,
    period_key,
    LAG(period_key) OVER (PARTITION BY user_id ORDER BY period_key) AS prior_key,
    LEAD(period_key) OVER (PARTITION BY user_id ORDER BY period_key) AS later_key
  FROM "before_month".user_activity
), data_range AS (
  SELECT
    MAX(period_key) AS last_key
  FROM "before_month".user_activity
), lapsed AS (
  SELECT
    s.user_id,
    s.period_key + 1 AS lapse_key
  FROM sequenced AS s
  CROSS JOIN data_range AS r
  WHERE
    (
      s.later_key IS NULL OR s.later_key <> s.period_key + 1
    )
    AND s.period_key + 1 <= r.last_key
)
SELECT
  user_id,
  period_key,
  CAST(CAST('1970-01-01' AS DATE) + INTERVAL (period_key - 23640) MONTH AS DATE) AS period_start,
  CASE
    WHEN prior_key IS NULL
    THEN 'new'
    WHEN prior_key = period_key - 1
    THEN 'retained'
    ELSE 'resurrected'
  END AS state
FROM sequenced
UNION ALL
SELECT
  user_id,
  lapse_key AS period_key,
  CAST(CAST('1970-01-01' AS DATE) + INTERVAL (lapse_key - 23640) MONTH AS DATE) AS period_start,
  'churned' AS state
FROM lapsed;

-- growth_accounting
CREATE OR REPLACE VIEW "before_month".growth_accounting AS
WITH tallies AS (
  SELECT
    period_key AS tally_key,
    COUNT(CASE WHEN state <> 'churned' THEN 1 END) AS active_tally,
    COUNT(CASE WHEN state = 'new' THEN 1 END) AS new_tally,
    COUNT(CASE WHEN state = 'retained' THEN 1 END) AS retained_tally,
    COUNT(CASE WHEN state = 'resurrected' THEN 1 END) AS resurrected_tally,
    COUNT(CASE WHEN state = 'churned' THEN 1 END) AS churned_tally
  FROM "before_month".user_states
  GROUP BY
    period_key
), data_range AS (
  SELECT
    MIN(period_key) AS first_key,
    MAX(period_key) AS last_key,
    MAX(last_active_date) AS data_through
  FROM "before_month".user_activity
), data_edge AS (
  SELECT
    first_key,
    last_key,
    data_through,
    (
      EXTRACT(YEAR FROM data_through + INTERVAL 1 DAY) * 12 + EXTRACT(MONTH FROM data_through + INTERVAL 1 DAY) - 1
    ) AS after_data_key
  FROM data_range
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
), calendar AS (
  SELECT
    e.first_key + 1 * (
      digit_0.n + digit_1.n * 10 + digit_2.n * 100 + digit_3.n * 1000
    ) AS calendar_key
  FROM data_edge AS e
  CROSS JOIN digits AS digit_0
  CROSS JOIN digits AS digit_1
  CROSS JOIN digits AS digit_2
  CROSS JOIN digits AS digit_3
  WHERE
    e.first_key + 1 * (
      digit_0.n + digit_1.n * 10 + digit_2.n * 100 + digit_3.n * 1000
    ) <= e.last_key
), filled AS (
  SELECT
    c.calendar_key,
    COALESCE(t.active_tally, 0) AS active_count,
    COALESCE(t.new_tally, 0) AS new_count,
    COALESCE(t.retained_tally, 0) AS retained_count,
    COALESCE(t.resurrected_tally, 0) AS resurrected_count,
    COALESCE(t.churned_tally, 0) AS churned_count,
    CASE
      WHEN c.calendar_key = e.last_key AND e.after_data_key = e.last_key
      THEN 'in_progress'
      ELSE 'complete'
    END AS status
  FROM calendar AS c
  CROSS JOIN data_edge AS e
  LEFT JOIN tallies AS t
    ON t.tally_key = c.calendar_key
), sequenced AS (
  SELECT
    calendar_key,
    active_count,
    COALESCE(LAG(active_count) OVER (ORDER BY calendar_key), 0) AS previous_count,
    new_count,
    retained_count,
    resurrected_count,
    churned_count,
    status
  FROM filled
)
SELECT
  CAST(CAST('1970-01-01' AS DATE) + INTERVAL (calendar_key - 23640) MONTH AS DATE) AS period_start,
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
FROM sequenced;

-- cohort_retention
CREATE OR REPLACE VIEW "before_month".cohort_retention AS
WITH marked AS (
  SELECT
    period_key AS marked_key,
    MIN(period_key) OVER (PARTITION BY user_id) AS marked_cohort_key
  FROM "before_month".user_activity
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
  FROM "before_month".user_activity
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
  ON c.active_cohort_key = t.cell_cohort_key AND c.active_key = t.cell_key;

-- trailing_activity
CREATE OR REPLACE VIEW "before_month".trailing_activity AS
WITH sqlgen_source AS (
  SELECT
    "user_id" AS sqlgen_user,
    "ts" AS sqlgen_ts
  FROM "events"
  WHERE
    NOT "user_id" IS NULL AND NOT "ts" IS NULL
), dated AS (
  SELECT
    sqlgen_user AS day_user,
    CAST(sqlgen_ts AS DATE) AS activity_date
  FROM sqlgen_source
), numbered AS (
  SELECT
    day_user,
    DATE_DIFF('DAY', CAST('1970-01-05' AS DATE), activity_date) AS day_number
  FROM dated
), user_days AS (
  SELECT
    day_user AS visit_user,
    day_number AS visit_day
  FROM numbered
  GROUP BY
    day_user,
    day_number
), visits AS (
  SELECT
    visit_user,
    visit_day,
    LAG(visit_day) OVER (PARTITION BY visit_user ORDER BY visit_day) AS prior_day,
    LEAD(visit_day) OVER (PARTITION BY visit_user ORDER BY visit_day) AS next_day
  FROM user_days
), window_lengths AS (
  SELECT
    28 AS window_length
), spans AS (
  SELECT
    w.window_length AS span_window,
    v.visit_day AS start_day,
    CASE
      WHEN v.next_day IS NULL OR v.next_day > v.visit_day + w.window_length
      THEN v.visit_day + w.window_length
      ELSE v.next_day
    END AS end_day,
    CASE
      WHEN v.next_day IS NULL OR v.next_day > v.visit_day + 2 * w.window_length
      THEN v.visit_day + 2 * w.window_length
      ELSE v.next_day
    END AS churn_end_day,
    CASE WHEN v.prior_day IS NULL THEN 1 ELSE 0 END AS first_visit,
    CASE
      WHEN v.next_day IS NULL OR v.next_day > v.visit_day + w.window_length
      THEN 1
      ELSE 0
    END AS lapse
  FROM visits AS v
  CROSS JOIN window_lengths AS w
), boundaries AS (
  SELECT
    span_window AS change_window,
    start_day AS change_day,
    1 AS active_delta,
    0 AS previous_delta,
    first_visit AS new_delta,
    0 AS churn_delta
  FROM spans
  UNION ALL
  SELECT
    span_window,
    start_day + span_window,
    0,
    1,
    0 - first_visit,
    lapse
  FROM spans
  UNION ALL
  SELECT
    span_window,
    end_day,
    -1,
    0,
    0,
    0
  FROM spans
  UNION ALL
  SELECT
    span_window,
    end_day + span_window,
    0,
    -1,
    0,
    0
  FROM spans
  UNION ALL
  SELECT
    span_window,
    churn_end_day,
    0,
    0,
    0,
    -1
  FROM spans
  WHERE
    lapse = 1
), changes AS (
  SELECT
    change_window,
    change_day,
    SUM(active_delta) AS active_change,
    SUM(previous_delta) AS previous_change,
    SUM(new_delta) AS new_change,
    SUM(churn_delta) AS churn_change
  FROM boundaries
  GROUP BY
    change_window,
    change_day
), data_range AS (
  SELECT
    MIN(visit_day) AS first_day,
    MAX(visit_day) AS last_day
  FROM user_days
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
), calendar AS (
  SELECT
    r.first_day + digit_0.n + digit_1.n * 10 + digit_2.n * 100 + digit_3.n * 1000 + digit_4.n * 10000 AS calendar_day
  FROM data_range AS r
  CROSS JOIN digits AS digit_0
  CROSS JOIN digits AS digit_1
  CROSS JOIN digits AS digit_2
  CROSS JOIN digits AS digit_3
  CROSS JOIN digits AS digit_4
  WHERE
    r.first_day + digit_0.n + digit_1.n * 10 + digit_2.n * 100 + digit_3.n * 1000 + digit_4.n * 10000 <= r.last_day
), running AS (
  SELECT
    c.calendar_day AS grid_day,
    w.window_length AS grid_window,
    SUM(COALESCE(ch.active_change, 0)) OVER (
      PARTITION BY w.window_length
      ORDER BY c.calendar_day
      ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW
    ) AS active_count,
    SUM(COALESCE(ch.previous_change, 0)) OVER (
      PARTITION BY w.window_length
      ORDER BY c.calendar_day
      ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW
    ) AS previous_count,
    SUM(COALESCE(ch.new_change, 0)) OVER (
      PARTITION BY w.window_length
      ORDER BY c.calendar_day
      ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW
    ) AS new_count,
    SUM(COALESCE(ch.churn_change, 0)) OVER (
      PARTITION BY w.window_length
      ORDER BY c.calendar_day
      ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW
    ) AS churned_count
  FROM calendar AS c
  CROSS JOIN window_lengths AS w
  LEFT JOIN changes AS ch
    ON ch.change_window = w.window_length AND ch.change_day = c.calendar_day
), tallied AS (
  SELECT
    grid_day,
    grid_window,
    CAST(active_count AS BIGINT) AS active_tally,
    CAST(previous_count AS BIGINT) AS previous_tally,
    CAST(new_count AS BIGINT) AS new_tally,
    CAST(previous_count - churned_count AS BIGINT) AS retained_tally,
    CAST(churned_count AS BIGINT) AS churned_tally
  FROM running
)
SELECT
  CAST(CAST('1970-01-05' AS DATE) + INTERVAL (grid_day) DAY AS DATE) AS day,
  grid_window AS window_days,
  active_tally AS active_users,
  previous_tally AS previous_active_users,
  new_tally AS new_users,
  retained_tally AS retained_users,
  active_tally - new_tally - retained_tally AS resurrected_users,
  churned_tally AS churned_users,
  CAST(active_tally - retained_tally AS DOUBLE) / NULLIF(churned_tally, 0) AS quick_ratio,
  grid_day AS day_key
FROM tallied;
