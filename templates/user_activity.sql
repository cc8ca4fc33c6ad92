{%- import '_periods.sql' as p with context -%}
{%- import '_activity.sql' as a with context -%}
WITH {{ a.user_periods() }}
/* One row per user and active period, its start date from the period key. */
SELECT
  user_id,
  period_key,
  {{ p.period_start('period_key') }} AS period_start,
  events,
  active_days,
  first_active_date,
  last_active_date
FROM user_periods
{%- if source.report_from %}
WHERE period_key >= {{ p.report_key() }}{% if refresh %} AND period_key >= (SELECT changed_key FROM refresh_bounds){% endif %}
{%- elif refresh %}
WHERE period_key >= (SELECT changed_key FROM refresh_bounds)
{%- endif %}
