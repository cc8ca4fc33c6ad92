{#- The state table's updates in refresh.sql, each statement on its own (step picks them):
  late  before reading: the source rows now before from_day, less those there when from_day
        was set, are late rows older than the lookback; add them to late_rows (two updates:
        each reads its own columns as they were before it, on every engine).
  mark  after the per-(user, day) table is up to date: read_from keeps the from_day this
        refresh read from; the newest day is the new mark; the rows between the old from_day
        and the new one join rows_before; then the new from_day.
  first after the mark: the per-user first active dates. A date before read_from never
        changes (the days before it are never rewritten); the others are deleted and found
        again among the days from read_from on, for the users with no earlier date.
  delete (with table, column, unit) before a table's rows are inserted again: its rows from
        the first period (unit 'day': the first day) holding read_from on.
  Every subquery reads the state table through its own FROM, never a correlated name, and
  no statement changes a column its subqueries read. WHERE TRUE: BigQuery refuses an
  UPDATE without a WHERE clause. -#}
{%- import '_periods.sql' as p with context -%}
{%- set state = ref('sqlgen_refresh_state') -%}
{%- if step == 'late' -%}
UPDATE {{ state }} SET late_rows = late_rows - rows_before, rows_before = (SELECT COUNT(__timestamp__) FROM __activity_table__ WHERE __timestamp__ < (SELECT from_day FROM {{ state }})) WHERE TRUE;
UPDATE {{ state }} SET late_rows = late_rows + rows_before WHERE TRUE;
{%- elif step == 'mark' -%}
UPDATE {{ state }} SET read_from = from_day WHERE TRUE;
UPDATE {{ state }} SET mark_day = COALESCE((SELECT MAX(activity_date) FROM {{ ref('sqlgen_activity_days') }} WHERE activity_date >= (SELECT from_day FROM {{ state }})), mark_day) WHERE TRUE;
UPDATE {{ state }} SET rows_before = rows_before + (SELECT COUNT(__timestamp__) FROM __activity_table__ WHERE __timestamp__ >= (SELECT from_day FROM {{ state }}) AND __timestamp__ < (SELECT COALESCE(CAST(mark_day + INTERVAL ({{ -lookback }}) DAY AS DATE), CAST('__activity_valid_from__' AS DATE)) FROM {{ state }})) WHERE TRUE;
UPDATE {{ state }} SET from_day = COALESCE(CAST(mark_day + INTERVAL ({{ -lookback }}) DAY AS DATE), CAST('__activity_valid_from__' AS DATE)) WHERE TRUE;
{%- elif step == 'first' -%}
{%- set first = ref('sqlgen_first_days') -%}
DELETE FROM {{ first }} WHERE first_date >= (SELECT read_from FROM {{ state }});
INSERT INTO {{ first }}
SELECT d.user_id, MIN(d.activity_date) AS first_date
FROM {{ ref('sqlgen_activity_days') }} AS d
LEFT JOIN {{ first }} AS k
  ON k.user_id = d.user_id
WHERE d.activity_date >= (SELECT read_from FROM {{ state }}) AND k.user_id IS NULL
GROUP BY d.user_id;
{%- else -%}
DELETE FROM {{ ref(table) }} WHERE {{ column }} >= (SELECT {% if unit == 'day' %}DATE_DIFF('day', DATE '1970-01-05', read_from){% else %}{{ p.period_key('read_from') }}{% endif %} FROM {{ state }});
{%- endif %}
