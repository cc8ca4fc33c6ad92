{%- import '_periods.sql' as p with context -%}
{%- import '_activity.sql' as a with context -%}
{#- Per period, how many users were active on exactly 1, 2, ... distinct days of it: one
    row for every day count the period can hold (1 at day grain, 1..7 weekly, 28..31
    monthly, up to 92 quarterly and 366 yearly), zero rows and empty periods included.
    With refresh (refresh.sql), only the periods from the changed one on, from their days. -#}
{%- set longest = {'day': 1, 'week': 7, 'month': 31, 'quarter': 92, 'year': 366}[grain.name] -%}
{%- set places = longest | string | length -%}
WITH {{ a.user_periods() }}, depth_counts AS (
  /* Users per period and number of distinct active days. */
  SELECT period_key AS depth_key, active_days AS depth_days, COUNT(*) AS depth_users
  FROM user_periods
  GROUP BY period_key, active_days
), period_totals AS (
  /* Active users and user-days per period. */
  SELECT period_key AS total_key, COUNT(*) AS total_users, SUM(active_days) AS total_user_days
  FROM user_periods
  GROUP BY period_key
), data_range AS (
{%- if refresh %}
  /* The first period of the calendar (the changed one, or the first with data when later), the last period with data, and the last active date. */
  SELECT (SELECT CASE WHEN data_first_key > changed_key THEN data_first_key ELSE changed_key END FROM refresh_bounds) AS first_key,
    MAX(period_key) AS last_key,
{%- else %}
  /* The first and last period with data, and the last active date. */
  SELECT MIN(period_key) AS first_key, MAX(period_key) AS last_key,
{%- endif %}
    MAX(last_active_date) AS data_through
  FROM user_periods
), {{ p.digits_cte() }}, calendar AS (
  /* Every period from the first to the last, empty periods included. */
  SELECT
    r.first_key + {{ grain.step }} * ({{ p.counting_value(grain.calendar_digits) }}) AS calendar_key,
    r.last_key AS final_key,
    r.data_through AS through_date
  FROM data_range AS r
  CROSS JOIN {{ p.counting(grain.calendar_digits) }}
  WHERE r.first_key + {{ grain.step }} * ({{ p.counting_value(grain.calendar_digits) }}) <= r.last_key
), spans AS (
  /* Days in each period, and the days seen so far (the last period may be in progress). */
  SELECT
    calendar_key AS span_key,
{%- if grain.family == 'day' %}
    {{ grain.step }} AS span_days,
{%- else %}
    DATE_DIFF('day', {{ p.period_start('calendar_key') }}, {{ p.period_start('calendar_key + ' ~ grain.step) }}) AS span_days,
{%- endif %}
    CASE
      WHEN calendar_key = final_key THEN DATE_DIFF('day', {{ p.period_start('calendar_key') }}, through_date) + 1
{%- if grain.family == 'day' %}
      ELSE {{ grain.step }}
{%- else %}
      ELSE DATE_DIFF('day', {{ p.period_start('calendar_key') }}, {{ p.period_start('calendar_key + ' ~ grain.step) }})
{%- endif %}
    END AS seen_days
  FROM calendar
{%- if longest > 1 %}
), day_counts AS (
  /* Day counts 1 up to the longest period of the grain. */
  SELECT {{ p.counting_value(places) }} + 1 AS day_count
  FROM {{ p.counting(places) }}
  WHERE {{ p.counting_value(places) }} < {{ longest }}
{%- endif %}
), cells AS (
  /* One cell per period and possible day count. */
{%- if longest == 1 %}
  SELECT span_key AS cell_key, 1 AS cell_days, span_days AS cell_span, seen_days AS cell_seen
  FROM spans
{%- else %}
  SELECT s.span_key AS cell_key, d.day_count AS cell_days, s.span_days AS cell_span,
    s.seen_days AS cell_seen
  FROM spans AS s
  CROSS JOIN day_counts AS d
  WHERE d.day_count <= s.span_days
{%- endif %}
)
/* Users active on exactly that many days (0 when none), their share, and the daily-to-period ratio. */
SELECT
  {{ p.period_start('c.cell_key') }} AS period_start,
  c.cell_days AS active_days,
  COALESCE(d.depth_users, 0) AS users,
  CAST(COALESCE(d.depth_users, 0) AS DOUBLE) / NULLIF(COALESCE(t.total_users, 0), 0) AS share_of_active_users,
  CAST(COALESCE(t.total_user_days, 0) AS DOUBLE) / NULLIF(c.cell_seen * COALESCE(t.total_users, 0), 0) AS daily_to_period_ratio,
  COALESCE(t.total_users, 0) AS period_active_users,
  c.cell_seen AS observed_days,
  CASE WHEN c.cell_seen < c.cell_span THEN 'in_progress' ELSE 'complete' END AS period_status,
  c.cell_key AS period_key
FROM cells AS c
LEFT JOIN depth_counts AS d
  ON d.depth_key = c.cell_key AND d.depth_days = c.cell_days
LEFT JOIN period_totals AS t
  ON t.total_key = c.cell_key
{%- if source.report_from %}
WHERE c.cell_key >= {{ p.report_key() }}
{%- endif %}
