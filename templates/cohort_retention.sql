{%- import '_periods.sql' as p with context -%}
{%- import '_activity.sql' as a with context -%}
{#- data_range reads active_periods, not the small cohort_actives: with a single reference
    DuckDB would inline active_periods and turn the MIN window into a join of two groupings
    of the events (measured in bench/: 1.80x the floor against 1.14x). -#}
{#- Cohort = a user's first active period; one row per cohort and age (periods since the
    cohort period) up to the last period with data, zero rows included: a full triangle.
    With first_seen the cohort is the earlier of the first-seen and first active periods,
    and a cohort's size counts its users whether or not they were active at age 0.
    With refresh (refresh.sql), only the cells from the changed period on, from its days:
    a user's cohort is the period of the first active date (first_key, from the per-user
    table refresh.sql keeps), and a cohort's size its users in that table. -#}
{%- set fs = source.first_seen -%}
{%- if fs %}
WITH {{ a.active_periods() }}, marked AS (
  /* Each active (user, period) with the cohort of the user (the earlier of the first-seen and first active periods), and the first active period. */
  SELECT
    period_key AS marked_key,
    MIN(CASE WHEN seen_key < period_key THEN seen_key ELSE period_key END) OVER (PARTITION BY user_id) AS marked_cohort_key,
    MIN(period_key) OVER (PARTITION BY user_id) AS marked_first_key
  FROM active_periods
), cohort_actives AS (
  /* Actives per cohort and period. */
  SELECT marked_cohort_key AS active_cohort_key, marked_key AS active_key, COUNT(*) AS active_count
  FROM marked
  GROUP BY marked_cohort_key, marked_key
), cohort_sizes AS (
  /* The size of a cohort: its users, each counted once (in the user's first active period). */
  SELECT marked_cohort_key AS size_key, COUNT(CASE WHEN marked_key = marked_first_key THEN 1 END) AS size_count
  FROM marked
  GROUP BY marked_cohort_key
), data_range AS (
  /* The first cohort and the last period with data. */
  SELECT MIN(marked_cohort_key) AS first_data_key, MAX(marked_key) AS last_data_key
  FROM marked
){% elif refresh %}
WITH {{ a.active_periods() }}, marked AS (
  /* Each active (user, period) read with the cohort of the user: the period of the first active date. */
  SELECT
    period_key AS marked_key,
    first_key AS marked_cohort_key
  FROM active_periods
), cohort_actives AS (
  /* Actives per cohort and period. */
  SELECT marked_cohort_key AS active_cohort_key, marked_key AS active_key, COUNT(*) AS active_count
  FROM marked
  GROUP BY marked_cohort_key, marked_key
), cohort_sizes AS (
  /* The size of a cohort: the users whose first active date is in it. */
  SELECT {{ p.period_key('first_date') }} AS size_key, COUNT(*) AS size_count
  FROM {{ ref('sqlgen_first_days') }}
  GROUP BY {{ p.period_key('first_date') }}
), data_range AS (
  /* The first cohort and the last period with data. */
  SELECT (SELECT data_first_key FROM refresh_bounds) AS first_data_key, MAX(period_key) AS last_data_key
  FROM active_periods
){% else %}
WITH {{ a.active_periods() }}, marked AS (
  /* Each active (user, period) with the cohort of the user: the first active period. */
  SELECT
    period_key AS marked_key,
    MIN(period_key) OVER (PARTITION BY user_id) AS marked_cohort_key
  FROM active_periods
), cohort_actives AS (
  /* Actives per cohort and period. */
  SELECT marked_cohort_key AS active_cohort_key, marked_key AS active_key, COUNT(*) AS active_count
  FROM marked
  GROUP BY marked_cohort_key, marked_key
), cohort_sizes AS (
  /* The size of a cohort: its actives in the cohort period. */
  SELECT active_cohort_key AS size_key, active_count AS size_count
  FROM cohort_actives
  WHERE active_key = active_cohort_key
), data_range AS (
  /* The first and last period with data. */
  SELECT MIN(period_key) AS first_data_key, MAX(period_key) AS last_data_key
  FROM active_periods
){% endif %}, {{ p.digits_cte() }}, ages AS (
  /* Ages 0, 1, 2, ... periods, as many as the data spans. */
  SELECT {{ p.counting_value(grain.calendar_digits) }} AS age_number
  FROM data_range AS r
  CROSS JOIN {{ p.counting(grain.calendar_digits) }}
  WHERE r.first_data_key + {{ grain.step }} * ({{ p.counting_value(grain.calendar_digits) }}) <= r.last_data_key
), triangle AS (
  /* Every cohort and age up to the last period with data: the full triangle. */
  SELECT
    s.size_key AS cell_cohort_key,
    g.age_number AS cell_age,
    s.size_key + {{ grain.step }} * g.age_number AS cell_key,
    s.size_count AS cell_size
  FROM cohort_sizes AS s
  CROSS JOIN ages AS g
  CROSS JOIN data_range AS r
  WHERE s.size_key + {{ grain.step }} * g.age_number <= r.last_data_key{% if refresh %}
    AND s.size_key + {{ grain.step }} * g.age_number >= (SELECT changed_key FROM refresh_bounds){% endif %}
)
/* Each cell with its actives (0 when none) and retention = actives / cohort size. */
SELECT
  {{ p.period_start('t.cell_cohort_key') }} AS cohort_start,
  t.cell_age AS age,
  {{ p.period_start('t.cell_key') }} AS period_start,
  t.cell_size AS cohort_users,
  COALESCE(c.active_count, 0) AS active_users,
  CAST(COALESCE(c.active_count, 0) AS DOUBLE) / NULLIF(t.cell_size, 0) AS retention_rate,
  t.cell_cohort_key AS cohort_key,
  t.cell_key AS period_key
FROM triangle AS t
LEFT JOIN cohort_actives AS c
  ON c.active_cohort_key = t.cell_cohort_key AND c.active_key = t.cell_key
{%- if source.report_from %}
/* Only the cohorts from report_from on: an earlier cohort is not shown at any age. */
WHERE t.cell_cohort_key >= {{ p.report_key() }}
{%- endif %}
