{%- import '_periods.sql' as p with context -%}
{%- import '_segments.sql' as s with context -%}
{#- growth_accounting per segment value: the same steps, each partitioned by segment and
    value (prior_key, each row's previous active period of the user in the value, comes with
    segment_periods; value_missing, value_text: NULL is a group of its own). The calendar is the
    totals' one (every segment covers every counted row, so its first and last period are
    the totals'), crossed with every value, so each value's rows span it. A kind user
    segment gives each user one value, so its values' counts add up to the totals; a kind
    event segment counts a user in every value the user was active with, so they need not.
    With first_seen, a user's first active period in a value counts as resurrected, not new,
    when the user was first seen in an earlier period (seen_key < period_key). -#}
WITH {{ s.segment_periods(['prior']) }}, tallies AS (
  /* Per segment, value and period: actives, new, retained, resurrected. */
  SELECT
    segment_name AS tally_segment,
    value_missing AS tally_missing,
    value_text AS tally_text,
    period_key AS tally_key,
    MAX(last_date) AS through_tally,
    COUNT(*) AS active_tally,
{%- if source.first_seen %}
    COUNT(CASE WHEN prior_key IS NULL AND (seen_key IS NULL OR seen_key >= period_key) THEN 1 END) AS new_tally,
    COUNT(CASE WHEN prior_key = period_key - {{ grain.step }} THEN 1 END) AS retained_tally,
    COUNT(CASE WHEN prior_key < period_key - {{ grain.step }} OR (prior_key IS NULL AND seen_key < period_key) THEN 1 END) AS resurrected_tally
{%- else %}
    COUNT(CASE WHEN prior_key IS NULL THEN 1 END) AS new_tally,
    COUNT(CASE WHEN prior_key = period_key - {{ grain.step }} THEN 1 END) AS retained_tally,
    COUNT(CASE WHEN prior_key < period_key - {{ grain.step }} THEN 1 END) AS resurrected_tally
{%- endif %}
  FROM segment_periods
  GROUP BY segment_name, value_missing, value_text, period_key
), data_range AS (
  /* The first and last period with data, and the last active date: the totals' own. */
  SELECT
    MIN(tally_key) AS first_key,
    MAX(tally_key) AS last_key,
    MAX(through_tally) AS data_through
  FROM tallies
), {{ s.value_calendar() }}, filled AS (
  /* Each value's tallies on the whole calendar, zeros for its empty periods. */
  SELECT
    v.value_segment,
    v.value_null,
    v.value_label,
    c.calendar_key,
    COALESCE(t.active_tally, 0) AS active_count,
    COALESCE(t.new_tally, 0) AS new_count,
    COALESCE(t.retained_tally, 0) AS retained_count,
    COALESCE(t.resurrected_tally, 0) AS resurrected_count,
    CASE
      WHEN c.calendar_key = e.last_key AND e.after_data_key = e.last_key THEN 'in_progress'
      ELSE 'complete'
    END AS status
  FROM calendar AS c
  CROSS JOIN segment_values AS v
  CROSS JOIN data_edge AS e
  LEFT JOIN tallies AS t
    ON t.tally_segment = v.value_segment
    AND t.tally_missing = v.value_null
    AND t.tally_text = v.value_label
    AND t.tally_key = c.calendar_key
), sequenced_totals AS (
  /* Each value's periods with its actives of the period before (0 for the first). */
  SELECT
    value_segment,
    value_null,
    value_label,
    calendar_key,
    active_count,
    COALESCE(LAG(active_count) OVER (PARTITION BY value_segment, value_null, value_label ORDER BY calendar_key), 0) AS previous_count,
    new_count,
    retained_count,
    resurrected_count,
    status
  FROM filled
), balanced AS (
  /* The churn identity per value: every previous active is retained now or churned, so churned = previous - retained. */
  SELECT
    value_segment,
    value_null,
    value_label,
    calendar_key,
    active_count,
    previous_count,
    new_count,
    retained_count,
    resurrected_count,
    previous_count - retained_count AS churned_count,
    status
  FROM sequenced_totals
)
/* One row per segment, value and period. For a kind event segment a user counts in every value the user was active with: the values need not add up to the totals. */
SELECT
  value_segment AS segment,
  {{ s.segment_value('value_null', 'value_label') }} AS segment_value,
  {{ p.period_start('calendar_key') }} AS period_start,
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
FROM balanced
