{#- Reading the activity table, written once for every view that reads it.

  source_ctes()     the CTEs sqlgen_source, sqlgen_local and dated: one row per kept activity
                    row, as (user_id, activity_date) with the local date of the spec's time
                    zone rule; rows with a NULL user or timestamp, a local date that came out
                    NULL or one outside the valid range are left out
                    (activity_source_summary counts them).
  keyed()           source_ctes() and the CTE keyed: (user_id, activity_date, period_key).
  carry             (optional, both macros) (expression, name) pairs of further columns of
                    the activity table carried through every CTE under those names (the
                    segments' values, see _segments.sql).
  active_periods()  the CTE active_periods: the distinct (user_id, period_key) pairs, with
                    the last active date of each (the only other column any period view
                    needs, for period_status). This one grouping is the unavoidable pass over
                    the events; everything after it reads a table many times smaller.
  user_periods()    keyed() and the CTE user_periods: one row per user and active period
                    with its events, distinct active days and first and last active dates.
A view reads these CTEs rather than another view, so that each is computed once per query
however often the view refers to it.
-#}
{%- import '_periods.sql' as p with context -%}

{%- macro source_ctes(carry=()) -%}
sqlgen_source AS (
  /* The activity rows that count: a user and a timestamp, and kept by the filter of the spec.
     A timestamp far outside the valid range becomes NULL before any zone conversion. */
  SELECT __user__ AS sqlgen_user, {{ p.near_value('__timestamp__', source.timestamp_type, 'activity') }} AS sqlgen_ts{% for column, name in carry %}, {{ column }} AS {{ name }}{% endfor %}
  FROM __activity_table__
  WHERE __user__ IS NOT NULL AND __timestamp__ IS NOT NULL{% if source.where %} AND (__where__){% endif %}
), sqlgen_local AS (
  /* The local calendar date of each row, by the time zone rule of the spec. */
  SELECT sqlgen_user, {{ p.local_date('sqlgen_ts') }} AS sqlgen_date{% for _column, name in carry %}, {{ name }}{% endfor %}
  FROM sqlgen_source
), dated AS (
  /* The rows whose local date is inside the valid range (the summary counts the others). */
  SELECT sqlgen_user AS user_id, sqlgen_date AS activity_date{% for _column, name in carry %}, {{ name }}{% endfor %}
  FROM sqlgen_local
  WHERE {{ p.in_range('sqlgen_date', 'activity') }}
)
{%- endmacro -%}

{%- macro keyed(carry=()) -%}
{{ source_ctes(carry) }}, keyed AS (
  /* {% if grain.family == 'day' %}period_key: days since Monday 1970-01-05, a week keyed by its first day, so adjacent periods differ by the step in days{% else %}period_key: year * 12 + month - 1, a quarter or year keyed by its first month, so adjacent periods differ by the step in months{% endif %}. */
  SELECT user_id, activity_date, {{ p.period_key('activity_date') }} AS period_key{% for _column, name in carry %}, {{ name }}{% endfor %}
  FROM dated
)
{%- endmacro -%}

{%- macro active_periods() -%}
{{ keyed() }}, active_periods AS (
  /* One row per user and active period (the one grouping of the events), with the last active date. */
  SELECT user_id, period_key, MAX(activity_date) AS last_date
  FROM keyed
  GROUP BY user_id, period_key
)
{%- endmacro -%}

{%- macro user_periods() -%}
{{ keyed() }}, user_periods AS (
  /* One row per user and active period: events, distinct active days, first and last active dates. */
  SELECT
    user_id,
    period_key,
    COUNT(*) AS events,
    COUNT(DISTINCT activity_date) AS active_days,
    MIN(activity_date) AS first_active_date,
    MAX(activity_date) AS last_active_date
  FROM keyed
  GROUP BY user_id, period_key
)
{%- endmacro -%}
