{#- The state table's updates in refresh.sql, each statement on its own (step picks them).
  The state row is the refresh's commit point: until the last statement every step reads
  the state's committed columns (from_day above all) and writes only the pending ones, so a
  run that fails anywhere, on a target without transactions too, leaves the state as it
  was, and the next run computes the same days and periods again.
  late   before reading: pending_before, the source rows now before from_day (less
         rows_before, those there when from_day was set: late rows older than the lookback).
  mark   after the per-(user, day) table is up to date: pending_mark, the newest day from
         from_day on (the new mark); then pending_between, the source rows from from_day to
         the new from_day (mark less the lookback).
  first  the per-user first active dates. A date before from_day never changes (the days
         before it are never rewritten); the others are deleted and found again among the
         days from from_day on, for the users with no earlier date.
  delete (with table, column, unit) before a table's rows are inserted again: its rows from
         the first period (unit 'day': the first day) holding from_day on.
  commit the last statement: late rows added up, the mark and from_day moved, read_from
         keeps the from_day this refresh read from, pending columns emptied. One UPDATE
         whose every assignment reads only columns no earlier assignment of it sets
         (MySQL assigns from left to right; other engines read the row as it was).
  Every subquery reads the state table through its own FROM, never a correlated name.
  WHERE TRUE: BigQuery refuses an UPDATE without a WHERE clause. -#}
{%- import '_periods.sql' as p with context -%}
{%- set state = ref('sqlgen_refresh_state') -%}
{%- macro from_after(mark) -%}
COALESCE(CAST({{ mark }} + INTERVAL ({{ -lookback }}) DAY AS DATE), CAST('__activity_valid_from__' AS DATE))
{%- endmacro -%}
{%- if step == 'late' -%}
UPDATE {{ state }} SET pending_before = (SELECT COUNT(__timestamp__) FROM __activity_table__ WHERE __timestamp__ < (SELECT from_day FROM {{ state }})) WHERE TRUE;
{%- elif step == 'mark' -%}
UPDATE {{ state }} SET pending_mark = COALESCE((SELECT CASE WHEN COUNT(activity_date) > 0 THEN MAX(activity_date) END FROM {{ ref('sqlgen_activity_days') }} WHERE activity_date >= (SELECT from_day FROM {{ state }})), mark_day) WHERE TRUE;
UPDATE {{ state }} SET pending_between = (SELECT COUNT(__timestamp__) FROM __activity_table__ WHERE __timestamp__ >= (SELECT from_day FROM {{ state }}) AND __timestamp__ < (SELECT {{ from_after('pending_mark') }} FROM {{ state }})) WHERE TRUE;
{%- elif step == 'first' -%}
{%- set first = ref('sqlgen_first_days') -%}
DELETE FROM {{ first }} WHERE first_date >= (SELECT from_day FROM {{ state }});
INSERT INTO {{ first }}
SELECT d.user_id, MIN(d.activity_date) AS first_date
FROM {{ ref('sqlgen_activity_days') }} AS d
LEFT JOIN {{ first }} AS k
  ON k.user_id = d.user_id
WHERE d.activity_date >= (SELECT from_day FROM {{ state }}) AND k.user_id IS NULL
GROUP BY d.user_id;
{%- elif step == 'commit' -%}
UPDATE {{ state }} SET late_rows = late_rows + pending_before - rows_before, rows_before = pending_before + pending_between, read_from = from_day, from_day = {{ from_after('pending_mark') }}, mark_day = pending_mark, pending_before = NULL, pending_mark = NULL, pending_between = NULL WHERE TRUE;
{%- else -%}
DELETE FROM {{ ref(table) }} WHERE {{ column }} >= (SELECT {% if unit == 'day' %}DATE_DIFF('day', DATE '1970-01-05', from_day){% else %}{{ p.period_key('from_day') }}{% endif %} FROM {{ state }});
{%- endif %}
