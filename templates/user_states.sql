{%- import '_periods.sql' as p with context -%}
{%- import '_activity.sql' as a with context -%}
{%- set fs = source.first_seen -%}
{#- With refresh (refresh.sql), only the rows from the changed period on, from the days of
    the period before it on (its actives lapse in the changed period); a user with no
    period read before one but a first active period before it (first_key) returns after
    a gap, as in growth_accounting. -#}
WITH {{ a.active_periods(reads='period_before') }}, sequenced AS (
  /* Each active (user, period) with the previous and next active periods of the user{% if refresh %} (with no previous one read, the first active period when earlier){% endif %}. */
  SELECT
    user_id,
    period_key,
{%- if refresh %}
    COALESCE(LAG(period_key) OVER (PARTITION BY user_id ORDER BY period_key), CASE WHEN first_key < period_key THEN first_key END) AS prior_key,
{%- else %}
    LAG(period_key) OVER (PARTITION BY user_id ORDER BY period_key) AS prior_key,
{%- endif %}
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
WHERE period_key >= {{ p.report_key() }}{% if refresh %} AND period_key >= (SELECT changed_key FROM refresh_bounds){% endif %}
{%- elif refresh %}
WHERE period_key >= (SELECT changed_key FROM refresh_bounds)
{%- endif %}
UNION ALL
SELECT
  user_id,
  lapse_key AS period_key,
  {{ p.period_start('lapse_key') }} AS period_start,
  'churned' AS state
FROM lapsed
{%- if source.report_from %}
WHERE lapse_key >= {{ p.report_key() }}{% if refresh %} AND lapse_key >= (SELECT changed_key FROM refresh_bounds){% endif %}
{%- elif refresh %}
WHERE lapse_key >= (SELECT changed_key FROM refresh_bounds)
{%- endif %}
