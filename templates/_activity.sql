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
                    With first_seen, also seen_key: the period the user was first seen in
                    (NULL when the users table has no valid date for the user).
  user_periods()    source_ctes(), the CTEs user_days (one row per user and active day,
                    with its events) and keyed_days, and user_periods: one row per user
                    and active period with its events, distinct active days and first and
                    last active dates.
A view reads these CTEs rather than another view, so that each is computed once per query
however often the view refers to it.
With `output.materialize: incremental` (from_days), source_ctes() reads the per-(user, day)
table instead (its rows are what `dated` grouped by user and date, with their count as
sqlgen_events), which user_periods() takes as its user_days; every other CTE is unchanged.
With carry (the segmented views' columns read from the rows), it reads the per-(user, day,
value) table, which keeps those columns (the timestamp as its earliest one per row).
since (source_ctes) keeps only the rows from the state table's from_day on: the rows a
refresh reads again.
With refresh (refresh.sql's query of a table it computes again from the first changed
period on, sqlgen/materialize.py PER_PERIOD), source_ctes() starts with the CTE
refresh_bounds (changed_key: the period holding the state's from_day, which only the
refresh's last statement moves: the first period the refresh changes; changed_date:
from_day; data_first_date and data_first_key: the first active date of any user and its
period) and reads only the per-day rows from reads on:
'period' the first day of the changed period, 'period_before' of the period before it,
a number n: n days before from_day. active_periods() then adds first_key: the period of
the user's first active date, from the per-user table refresh.sql keeps exact (a user
whose earlier periods are not read is told apart from a new one).
-#}
{%- import '_periods.sql' as p with context -%}

{%- macro source_ctes(carry=(), since=False, reads='period') -%}
{%- if from_days and refresh %}
{%- if reads == 'period' %}{% set start = p.period_start('changed_key') %}
{%- elif reads == 'period_before' %}{% set start = p.period_start('changed_key - ' ~ grain.step) %}
{%- else %}{% set start = 'CAST(changed_date + INTERVAL (' ~ (-reads) ~ ') DAY AS DATE)' %}{% endif %}
refresh_bounds AS (
  /* refresh.sql: the first period it computes again (the one holding the state's from_day: days before from_day never change), from_day, and the first active date of any user with its period. */
  SELECT
    {{ p.period_key('s.from_day') }} AS changed_key,
    s.from_day AS changed_date,
    f.sqlgen_first_date AS data_first_date,
    {{ p.period_key('f.sqlgen_first_date') }} AS data_first_key
  FROM {{ ref('sqlgen_refresh_state') }} AS s
  CROSS JOIN (SELECT MIN(first_date) AS sqlgen_first_date FROM {{ ref('sqlgen_first_days') }}) AS f
), dated AS (
  /* The per-(user, day) rows the changed rows depend on: {% if reads == 'period' %}from the changed period on{% elif reads == 'period_before' %}from the period before the changed one on{% else %}from {{ reads }} days before from_day on{% endif %}. */
  SELECT user_id, activity_date, events AS sqlgen_events
  FROM {{ ref('sqlgen_activity_days') }}
  WHERE activity_date >= (SELECT {{ start }} FROM refresh_bounds)
)
{%- elif from_days and carry %}
dated AS (
  /* The activity rows that count, grouped by user, local date and the columns the segments read from the rows (the table refresh.sql keeps up to date). */
  SELECT user_id, activity_date, events AS sqlgen_events{% for _column, name in carry %}, {{ name }}{% endfor %}
  FROM {{ ref('sqlgen_segment_days') }}
)
{%- elif from_days %}
dated AS (
  /* The activity rows that count, grouped by user and local date (the table refresh.sql keeps up to date). */
  SELECT user_id, activity_date, events AS sqlgen_events
  FROM {{ ref('sqlgen_activity_days') }}
)
{%- else %}
sqlgen_source AS (
  /* The activity rows that count: a user and a timestamp, and kept by the filter of the spec.
     A timestamp far outside the valid range becomes NULL before any zone conversion. */
  SELECT __user__ AS sqlgen_user, {{ p.near_value('__timestamp__', source.timestamp_type, 'activity') }} AS sqlgen_ts{% for column, name in carry %}, {{ column }} AS {{ name }}{% endfor %}
  FROM __activity_table__
  WHERE __user__ IS NOT NULL AND __timestamp__ IS NOT NULL{% if source.where %} AND (__where__){% endif %}{% if since %} AND __timestamp__ >= (SELECT from_day FROM {{ ref('sqlgen_refresh_state') }}){% endif %}
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
{%- endif %}
{%- endmacro -%}

{%- macro keyed(carry=(), reads='period') -%}
{{ source_ctes(carry, reads=reads) }}, keyed AS (
  /* {% if grain.family == 'day' %}period_key: days since Monday 1970-01-05, a week keyed by its first day, so adjacent periods differ by the step in days{% else %}period_key: year * 12 + month - 1, a quarter or year keyed by its first month, so adjacent periods differ by the step in months{% endif %}. */
  SELECT user_id, activity_date, {{ p.period_key('activity_date') }} AS period_key{% for _column, name in carry %}, {{ name }}{% endfor %}{% if from_days %}, sqlgen_events{% endif %}
  FROM dated
)
{%- endmacro -%}

{%- macro active_periods(reads='period') -%}
{%- if refresh %}
{{ keyed(reads=reads) }}, grouped_periods AS (
  /* One row per user and active period read, with the last active date. */
  SELECT user_id, period_key, MAX(activity_date) AS last_date
  FROM keyed
  GROUP BY user_id, period_key
), active_periods AS (
  /* Each active (user, period) read, with first_key: the period of the user's first active date (earlier periods are not read). */
  SELECT g.user_id, g.period_key, g.last_date, {{ p.period_key('f.first_date') }} AS first_key
  FROM grouped_periods AS g
  JOIN {{ ref('sqlgen_first_days') }} AS f
    ON f.user_id = g.user_id
)
{%- elif source.first_seen %}
{{ keyed() }}, grouped_periods AS (
  /* One row per user and active period (the one grouping of the events), with the last active date. */
  SELECT user_id, period_key, MAX(activity_date) AS last_date
  FROM keyed
  GROUP BY user_id, period_key
), {{ first_seen_ctes() }}, active_periods AS (
  /* Each active (user, period) with the period the user was first seen in (NULL: no valid first-seen date). */
  SELECT g.user_id, g.period_key, g.last_date, CASE WHEN s.sqlgen_seen_found = 1 THEN s.sqlgen_seen_key END AS seen_key
  FROM grouped_periods AS g
  LEFT JOIN first_seen AS s
    ON s.sqlgen_seen_user = g.user_id
)
{%- else %}
{{ keyed() }}, active_periods AS (
  /* One row per user and active period (the one grouping of the events), with the last active date. */
  SELECT user_id, period_key, MAX(activity_date) AS last_date
  FROM keyed
  GROUP BY user_id, period_key
)
{%- endif %}
{%- endmacro -%}

{#- The users table of first_seen: one row per user with the period key of the earliest
    valid first-seen date (NULL or sentinel dates are ignored, as activity rows are), and
    sqlgen_seen_found = 1 so that a user missing from it is told apart after a LEFT JOIN
    even where unmatched columns read as 0 rather than NULL (ClickHouse by default).
    With key='day' (trailing windows) sqlgen_seen_key is that date's day number instead:
    days since Monday 1970-01-05, as trailing_activity numbers its days. -#}
{%- macro first_seen_ctes(key='period') -%}
seen_source AS (
  /* The first-seen rows with a user and a timestamp; a timestamp far outside the valid range becomes NULL. */
  SELECT __seen_user__ AS sqlgen_seen_user, {{ p.near_value('__seen_timestamp__', source.first_seen.timestamp_type, 'seen') }} AS sqlgen_seen_ts
  FROM __seen_table__
  WHERE __seen_user__ IS NOT NULL AND __seen_timestamp__ IS NOT NULL
), seen_local AS (
  /* The local calendar date of each first-seen row, by the time zone rule of the spec. */
  SELECT sqlgen_seen_user, {{ p.local_date('sqlgen_seen_ts', source.first_seen.timestamp_type) }} AS sqlgen_seen_date
  FROM seen_source
), seen_dates AS (
  /* The earliest valid first-seen date of each user (a user listed twice: the earliest row). */
  SELECT sqlgen_seen_user, MIN(sqlgen_seen_date) AS sqlgen_seen_first
  FROM seen_local
  WHERE {{ p.in_range('sqlgen_seen_date', 'activity') }}
  GROUP BY sqlgen_seen_user
), first_seen AS (
{%- if key == 'day' %}
  /* The day number of that date: days since Monday 1970-01-05. */
  SELECT sqlgen_seen_user, DATE_DIFF('day', DATE '1970-01-05', sqlgen_seen_first) AS sqlgen_seen_key, 1 AS sqlgen_seen_found
{%- else %}
  /* The period key of that date. */
  SELECT sqlgen_seen_user, {{ p.period_key('sqlgen_seen_first') }} AS sqlgen_seen_key, 1 AS sqlgen_seen_found
{%- endif %}
  FROM seen_dates
)
{%- endmacro -%}

{%- macro user_periods(reads='period') -%}
{{ source_ctes(reads=reads) }}, user_days AS (
  /* One row per user and active day with its events: the rows are grouped once, so the distinct active days of a period are its rows (a DISTINCT count would group them a second time). */
{%- if from_days %}
  SELECT user_id, activity_date, sqlgen_events AS day_events
  FROM dated
{%- else %}
  SELECT user_id, activity_date, COUNT(*) AS day_events
  FROM dated
  GROUP BY user_id, activity_date
{%- endif %}
), keyed_days AS (
  /* Each active day of a user, with its period key. */
  SELECT user_id, activity_date, {{ p.period_key('activity_date') }} AS period_key, day_events
  FROM user_days
), user_periods AS (
  /* One row per user and active period: events, distinct active days, first and last active dates. */
  SELECT
    user_id,
    period_key,
    CAST(SUM(day_events) AS BIGINT) AS events,
    COUNT(*) AS active_days,
    MIN(activity_date) AS first_active_date,
    MAX(activity_date) AS last_active_date
  FROM keyed_days
  GROUP BY user_id, period_key
)
{%- endmacro -%}
