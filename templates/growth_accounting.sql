{%- import '_periods.sql' as p with context -%}
{%- import '_activity.sql' as a with context -%}
{#- One grouping of the events into active (user, period) pairs, then one LAG per user:
    each pair is new (no earlier period), retained (the previous period) or resurrected
    (an earlier one). Churn needs no second pass: of last period's actives, those not
    retained now are churned, so churned = previous actives - retained. The events are
    read once: the data range comes from the per-period tallies, not from a second read
    (engines that inline CTEs would group the events twice).
    With first_seen, a user's first active period counts as resurrected, not new, when
    the user was first seen in an earlier period (seen_key < period_key).
    With refresh (refresh.sql), only the periods from the changed one on, from the days of
    the period before it on: a user with no period read before this one but a first active
    period before it (first_key) returns after a gap, so prior_key takes first_key (any key
    before period_key - step gives resurrected); the period before gives previous actives. -#}
{%- set fs = source.first_seen -%}
WITH {{ a.active_periods(reads='period_before') }}, sequenced AS (
  /* Each active (user, period) with the previous active period of the user (NULL: the first){% if refresh %}; with none read, the first active period when earlier{% endif %}. */
  SELECT
    period_key,
    last_date,
{%- if refresh %}
    COALESCE(LAG(period_key) OVER (PARTITION BY user_id ORDER BY period_key), CASE WHEN first_key < period_key THEN first_key END) AS prior_key
{%- else %}
    LAG(period_key) OVER (PARTITION BY user_id ORDER BY period_key) AS prior_key{% endif %}{% if fs %},
    seen_key{% endif %}
  FROM active_periods
), tallies AS (
  /* Per period: actives. new (no earlier period), retained (the period before), resurrected (an earlier one). */
  SELECT
    period_key AS tally_key,
    MAX(last_date) AS through_tally,
    COUNT(*) AS active_tally,
{%- if fs %}
    COUNT(CASE WHEN prior_key IS NULL AND (seen_key IS NULL OR seen_key >= period_key) THEN 1 END) AS new_tally,
    COUNT(CASE WHEN prior_key = period_key - {{ grain.step }} THEN 1 END) AS retained_tally,
    COUNT(CASE WHEN prior_key < period_key - {{ grain.step }} OR (prior_key IS NULL AND seen_key < period_key) THEN 1 END) AS resurrected_tally
{%- else %}
    COUNT(CASE WHEN prior_key IS NULL THEN 1 END) AS new_tally,
    COUNT(CASE WHEN prior_key = period_key - {{ grain.step }} THEN 1 END) AS retained_tally,
    COUNT(CASE WHEN prior_key < period_key - {{ grain.step }} THEN 1 END) AS resurrected_tally
{%- endif %}
  FROM sequenced
  GROUP BY period_key
), data_range AS (
{%- if refresh %}
  /* The first period of the calendar (the one before the changed period, or the first with data when later), the last period with data, and the last active date. */
  SELECT
    (SELECT CASE WHEN data_first_key > changed_key - {{ grain.step }} THEN data_first_key ELSE changed_key - {{ grain.step }} END FROM refresh_bounds) AS first_key,
{%- else %}
  /* The first and last period with data, and the last active date. */
  SELECT
    MIN(tally_key) AS first_key,
{%- endif %}
    MAX(tally_key) AS last_key,
    MAX(through_tally) AS data_through
  FROM tallies
), data_edge AS (
  /* The period of the day after the data: if it is the last period, that period is still in progress. */
  SELECT first_key, last_key, data_through,
    {{ p.period_key("data_through + INTERVAL 1 DAY") }} AS after_data_key
  FROM data_range
), {{ p.digits_cte() }}, calendar AS (
  /* Every period from the first to the last, by the step of the grain, empty periods included. */
  SELECT e.first_key + {{ grain.step }} * ({{ p.counting_value(grain.calendar_digits) }}) AS calendar_key
  FROM data_edge AS e
  CROSS JOIN {{ p.counting(grain.calendar_digits) }}
  WHERE e.first_key + {{ grain.step }} * ({{ p.counting_value(grain.calendar_digits) }}) <= e.last_key
), filled AS (
  /* The tallies on the calendar, zeros for empty periods. */
  SELECT
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
  CROSS JOIN data_edge AS e
  LEFT JOIN tallies AS t
    ON t.tally_key = c.calendar_key
), sequenced_totals AS (
  /* Each period with the actives of the period before (0 for the first). */
  SELECT
    calendar_key,
    active_count,
    COALESCE(LAG(active_count) OVER (ORDER BY calendar_key), 0) AS previous_count,
    new_count,
    retained_count,
    resurrected_count,
    status
  FROM filled
), balanced AS (
  /* The churn identity: every previous active is retained now or churned, so churned = previous - retained. */
  SELECT
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
/* One row per period: its start date from the key, counts, and ratios (NULL on a zero denominator). */
SELECT
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
{%- if source.report_from %}
/* Only the periods from report_from on: the earlier ones were computed, so previous_active_users of the first row shown is real. */
WHERE calendar_key >= {{ p.report_key() }}{% if refresh %} AND calendar_key >= (SELECT changed_key FROM refresh_bounds){% endif %}
{%- elif refresh %}
/* Only the periods from the changed one on: refresh.sql deleted them. */
WHERE calendar_key >= (SELECT changed_key FROM refresh_bounds)
{%- endif %}
