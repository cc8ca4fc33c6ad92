{%- import '_periods.sql' as p with context -%}
{%- import '_segments.sql' as s with context -%}
{#- cohort_retention per segment value: a user's cohort is the user's first active period in
    the value (for a kind user segment, the user's first active period). The ages run to the
    totals' last period with data. With first_seen the cohort is the earlier of the
    first-seen period and the first active period in the value, and a cohort's size counts
    its users whether or not they were active at age 0. -#}
WITH {{ s.segment_periods(['first']) }}, marked AS (
  /* Each active (segment, value, user, period) with the user's cohort in the value: the first active period there. */
  SELECT
    segment_name,
    value_missing,
    value_text,
    period_key AS marked_key,
{%- if source.first_seen %}
    CASE WHEN seen_key < first_key THEN seen_key ELSE first_key END AS marked_cohort_key,
    first_key AS marked_first_key
{%- else %}
    first_key AS marked_cohort_key
{%- endif %}
  FROM segment_periods
), cohort_actives AS (
  /* Actives per segment, value, cohort and period. */
  SELECT
    segment_name AS active_segment,
    value_missing AS active_missing,
    value_text AS active_text,
    marked_cohort_key AS active_cohort_key,
    marked_key AS active_key,
    COUNT(*) AS active_count
  FROM marked
  GROUP BY segment_name, value_missing, value_text, marked_cohort_key, marked_key
), cohort_sizes AS (
{%- if source.first_seen %}
  /* The size of a cohort: its users in the value, each counted once (in the user's first active period there). */
  SELECT segment_name AS size_segment, value_missing AS size_missing, value_text AS size_text, marked_cohort_key AS size_key, COUNT(CASE WHEN marked_key = marked_first_key THEN 1 END) AS size_count
  FROM marked
  GROUP BY segment_name, value_missing, value_text, marked_cohort_key
), data_range AS (
  /* The first cohort and the last period with data. */
  SELECT MIN(marked_cohort_key) AS first_data_key, MAX(marked_key) AS last_data_key
  FROM marked
),
{%- else %}
  /* The size of a cohort: its actives in the cohort period. */
  SELECT active_segment AS size_segment, active_missing AS size_missing, active_text AS size_text, active_cohort_key AS size_key, active_count AS size_count
  FROM cohort_actives
  WHERE active_key = active_cohort_key
), data_range AS (
  /* The first and last period with data. */
  SELECT MIN(period_key) AS first_data_key, MAX(period_key) AS last_data_key
  FROM segment_periods
),
{%- endif %} {{ p.digits_cte() }}, ages AS (
  /* Ages 0, 1, 2, ... periods, as many as the data spans. */
  SELECT {{ p.counting_value(grain.calendar_digits) }} AS age_number
  FROM data_range AS r
  CROSS JOIN {{ p.counting(grain.calendar_digits) }}
  WHERE r.first_data_key + {{ grain.step }} * ({{ p.counting_value(grain.calendar_digits) }}) <= r.last_data_key
), triangle AS (
  /* Every segment, value, cohort and age up to the last period with data. */
  SELECT
    z.size_segment AS cell_segment,
    z.size_missing AS cell_missing,
    z.size_text AS cell_text,
    z.size_key AS cell_cohort_key,
    g.age_number AS cell_age,
    z.size_key + {{ grain.step }} * g.age_number AS cell_key,
    z.size_count AS cell_size
  FROM cohort_sizes AS z
  CROSS JOIN ages AS g
  CROSS JOIN data_range AS r
  WHERE z.size_key + {{ grain.step }} * g.age_number <= r.last_data_key
)
/* Each cell with its actives (0 when none) and retention = actives / cohort size. For a kind event segment a user is in a cohort of every value the user was active with: the values need not add up to the totals. */
SELECT
  t.cell_segment AS segment,
  {{ s.segment_value('t.cell_missing', 't.cell_text') }} AS segment_value,
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
  ON c.active_segment = t.cell_segment
  AND c.active_missing = t.cell_missing
  AND c.active_text = t.cell_text
  AND c.active_cohort_key = t.cell_cohort_key
  AND c.active_key = t.cell_key
