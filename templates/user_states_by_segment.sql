{%- import '_periods.sql' as p with context -%}
{%- import '_segments.sql' as s with context -%}
{#- user_states per segment value: a user's states within each value (for a kind user
    segment, the user's one value, so the states are the totals'). With first_seen, a user's
    first active period in a value is resurrected when the user was first seen earlier. -#}
WITH {{ s.segment_periods(['prior', 'later']) }}, data_range AS (
  /* The last period with data: a user lapses only before it. */
  SELECT MAX(period_key) AS last_key FROM segment_periods
), lapsed AS (
  /* Churned: the period after an active one in which the user is not active in the value, up to the last period. */
  SELECT q.segment_name AS lapse_segment, q.value_missing AS lapse_missing, q.value_text AS lapse_text, q.user_id AS lapse_user, q.period_key + {{ grain.step }} AS lapse_key
  FROM segment_periods AS q
  CROSS JOIN data_range AS r
  WHERE (q.later_key IS NULL OR q.later_key <> q.period_key + {{ grain.step }})
    AND q.period_key + {{ grain.step }} <= r.last_key
)
/* Active periods are new, retained or resurrected by the previous active period in the value. then the churned ones. */
SELECT
  segment_name AS segment,
  {{ s.segment_value('value_missing', 'value_text') }} AS segment_value,
  user_id,
  period_key,
  {{ p.period_start('period_key') }} AS period_start,
  CASE
{%- if source.first_seen %}
    WHEN prior_key IS NULL AND seen_key < period_key THEN 'resurrected'
{%- endif %}
    WHEN prior_key IS NULL THEN 'new'
    WHEN prior_key = period_key - {{ grain.step }} THEN 'retained'
    ELSE 'resurrected'
  END AS state
FROM segment_periods
UNION ALL
SELECT
  lapse_segment AS segment,
  {{ s.segment_value('lapse_missing', 'lapse_text') }} AS segment_value,
  lapse_user AS user_id,
  lapse_key AS period_key,
  {{ p.period_start('lapse_key') }} AS period_start,
  'churned' AS state
FROM lapsed
