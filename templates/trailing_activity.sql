{%- import '_periods.sql' as p with context -%}
{#- Trailing windows of N days, accounted against the previous window (the N days before).
    Work is proportional to user-days of activity: each active day of a user opens a span of
    days in which the user counts as active in the window ending that day, closed by the
    user's next active day or N days later. Spans become +1/-1 changes per day, and a running
    sum over the calendar turns them into counts; no day is joined to N days of events.
    For an active day a with next active day b (NULL when none) and window N:
      active   in windows ending [a, min(a+N, b))
      previous in windows ending [a+N, min(a+N, b)+N)       (active N days earlier)
      new      in windows ending [a, a+N) for the user's first active day
      churned  in windows ending [a+N, min(a+2N, b)) when b > a+N or b is NULL
    retained = previous - churned and resurrected = active - new - retained. -#}
WITH sqlgen_source AS (
  SELECT __user__ AS sqlgen_user, __timestamp__ AS sqlgen_ts
  FROM __activity_table__
  WHERE __user__ IS NOT NULL AND __timestamp__ IS NOT NULL{% if source.where %} AND (__where__){% endif %}
), dated AS (
  SELECT sqlgen_user AS day_user, {{ p.local_date('sqlgen_ts') }} AS activity_date
  FROM sqlgen_source
), numbered AS (
  SELECT day_user, DATE_DIFF('day', DATE '1970-01-05', activity_date) AS day_number
  FROM dated
), user_days AS (
  SELECT day_user AS visit_user, day_number AS visit_day
  FROM numbered
  GROUP BY day_user, day_number
), visits AS (
  SELECT
    visit_user,
    visit_day,
    LAG(visit_day) OVER (PARTITION BY visit_user ORDER BY visit_day) AS prior_day,
    LEAD(visit_day) OVER (PARTITION BY visit_user ORDER BY visit_day) AS next_day
  FROM user_days
), window_lengths AS (
{%- for n in windows %}
  {% if not loop.first %}UNION ALL {% endif %}SELECT {{ n }} AS window_length
{%- endfor %}
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
    CASE WHEN v.next_day IS NULL OR v.next_day > v.visit_day + w.window_length THEN 1 ELSE 0 END AS lapse
  FROM visits AS v
  CROSS JOIN window_lengths AS w
), boundaries AS (
  SELECT span_window AS change_window, start_day AS change_day, 1 AS active_delta,
    0 AS previous_delta, first_visit AS new_delta, 0 AS churn_delta
  FROM spans
  UNION ALL
  SELECT span_window, start_day + span_window, 0, 1, 0 - first_visit, lapse
  FROM spans
  UNION ALL
  SELECT span_window, end_day, -1, 0, 0, 0
  FROM spans
  UNION ALL
  SELECT span_window, end_day + span_window, 0, -1, 0, 0
  FROM spans
  UNION ALL
  SELECT span_window, churn_end_day, 0, 0, 0, -1
  FROM spans
  WHERE lapse = 1
), changes AS (
  SELECT
    change_window,
    change_day,
    SUM(active_delta) AS active_change,
    SUM(previous_delta) AS previous_change,
    SUM(new_delta) AS new_change,
    SUM(churn_delta) AS churn_change
  FROM boundaries
  GROUP BY change_window, change_day
), data_range AS (
  SELECT MIN(visit_day) AS first_day, MAX(visit_day) AS last_day
  FROM user_days
), {{ p.digits_cte() }}, calendar AS (
  SELECT r.first_day + {{ p.counting_value(5) }} AS calendar_day
  FROM data_range AS r
  CROSS JOIN {{ p.counting(5) }}
  WHERE r.first_day + {{ p.counting_value(5) }} <= r.last_day
), running AS (
  SELECT
    c.calendar_day AS grid_day,
    w.window_length AS grid_window,
    SUM(COALESCE(ch.active_change, 0)) OVER (PARTITION BY w.window_length ORDER BY c.calendar_day ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW) AS active_count,
    SUM(COALESCE(ch.previous_change, 0)) OVER (PARTITION BY w.window_length ORDER BY c.calendar_day ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW) AS previous_count,
    SUM(COALESCE(ch.new_change, 0)) OVER (PARTITION BY w.window_length ORDER BY c.calendar_day ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW) AS new_count,
    SUM(COALESCE(ch.churn_change, 0)) OVER (PARTITION BY w.window_length ORDER BY c.calendar_day ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW) AS churned_count
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
  CAST(DATE '1970-01-05' + INTERVAL (grid_day) DAY AS DATE) AS day,
  grid_window AS window_days,
  active_tally AS active_users,
  previous_tally AS previous_active_users,
  new_tally AS new_users,
  retained_tally AS retained_users,
  active_tally - new_tally - retained_tally AS resurrected_users,
  churned_tally AS churned_users,
  CAST(active_tally - retained_tally AS DOUBLE) / NULLIF(churned_tally, 0) AS quick_ratio,
  grid_day AS day_key
FROM tallied
