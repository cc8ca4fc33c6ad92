{%- import '_periods.sql' as p with context -%}
WITH sqlgen_source AS (
  SELECT __user__ AS sqlgen_user, __timestamp__ AS sqlgen_ts
  FROM __activity_table__
  WHERE __user__ IS NOT NULL AND __timestamp__ IS NOT NULL{% if source.where %} AND (__where__){% endif %}
), dated AS (
  SELECT sqlgen_user AS user_id, {{ p.local_date('sqlgen_ts') }} AS activity_date
  FROM sqlgen_source
), keyed AS (
  SELECT user_id, activity_date, {{ p.period_key('activity_date') }} AS period_key
  FROM dated
  WHERE activity_date IS NOT NULL
)
SELECT
  user_id,
  period_key,
  {{ p.period_start('period_key') }} AS period_start,
  COUNT(*) AS events,
  COUNT(DISTINCT activity_date) AS active_days,
  MIN(activity_date) AS first_active_date,
  MAX(activity_date) AS last_active_date
FROM keyed
GROUP BY user_id, period_key
