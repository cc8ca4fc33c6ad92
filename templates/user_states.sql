{%- import '_periods.sql' as p with context -%}
{%- import '_activity.sql' as a with context -%}
{%- set fs = source.first_seen -%}
WITH {{ a.active_periods() }}, sequenced AS (
  /* Each active (user, period) with the previous and next active periods of the user. */
  SELECT
    user_id,
    period_key,
    LAG(period_key) OVER (PARTITION BY user_id ORDER BY period_key) AS prior_key,
    LEAD(period_key) OVER (PARTITION BY user_id ORDER BY period_key) AS later_key{% if fs %},
    seen_key{% endif %}
  FROM active_periods
), data_range AS (
  /* The last period with data: a user lapses only before it. */
  SELECT MAX(period_key) AS last_key FROM active_periods
), lapsed AS (
  /* Churned: the period after an active one in which the user is not active, up to the last period. */
  SELECT s.user_id, s.period_key + {{ grain.step }} AS lapse_key
  FROM sequenced AS s
  CROSS JOIN data_range AS r
  WHERE (s.later_key IS NULL OR s.later_key <> s.period_key + {{ grain.step }})
    AND s.period_key + {{ grain.step }} <= r.last_key
)
/* Active periods are new, retained or resurrected by the previous active period. then the churned ones. */
SELECT
  user_id,
  period_key,
  {{ p.period_start('period_key') }} AS period_start,
  CASE
{%- if fs %}
    WHEN prior_key IS NULL AND seen_key < period_key THEN 'resurrected'
{%- endif %}
    WHEN prior_key IS NULL THEN 'new'
    WHEN prior_key = period_key - {{ grain.step }} THEN 'retained'
    ELSE 'resurrected'
  END AS state
FROM sequenced
{%- if source.report_from %}
WHERE period_key >= {{ p.report_key() }}
{%- endif %}
UNION ALL
SELECT
  user_id,
  lapse_key AS period_key,
  {{ p.period_start('lapse_key') }} AS period_start,
  'churned' AS state
FROM lapsed
{%- if source.report_from %}
WHERE lapse_key >= {{ p.report_key() }}
{%- endif %}
