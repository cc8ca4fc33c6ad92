{#- The state table's updates in refresh.sql, each statement on its own (step picks them):
  late  before reading: the source rows now before from_day, less those there when from_day
        was set, are late rows older than the lookback; add them to late_rows (two updates:
        each reads its own columns as they were before it, on every engine).
  mark  after the per-(user, day) table is up to date: the newest day is the new mark; the
        rows between the old from_day and the new one join rows_before; then the new from_day.
  Every subquery reads the state table through its own FROM, never a correlated name, and
  no statement changes a column its subqueries read. WHERE TRUE: BigQuery refuses an
  UPDATE without a WHERE clause. -#}
{%- set state = ref('sqlgen_refresh_state') -%}
{%- if step == 'late' -%}
UPDATE {{ state }} SET late_rows = late_rows - rows_before, rows_before = (SELECT COUNT(__timestamp__) FROM __activity_table__ WHERE __timestamp__ < (SELECT from_day FROM {{ state }})) WHERE TRUE;
UPDATE {{ state }} SET late_rows = late_rows + rows_before WHERE TRUE;
{%- else -%}
UPDATE {{ state }} SET mark_day = COALESCE((SELECT MAX(activity_date) FROM {{ ref('sqlgen_activity_days') }} WHERE activity_date >= (SELECT from_day FROM {{ state }})), mark_day) WHERE TRUE;
UPDATE {{ state }} SET rows_before = rows_before + (SELECT COUNT(__timestamp__) FROM __activity_table__ WHERE __timestamp__ >= (SELECT from_day FROM {{ state }}) AND __timestamp__ < (SELECT COALESCE(CAST(mark_day + INTERVAL ({{ -lookback }}) DAY AS DATE), CAST('__activity_valid_from__' AS DATE)) FROM {{ state }})) WHERE TRUE;
UPDATE {{ state }} SET from_day = COALESCE(CAST(mark_day + INTERVAL ({{ -lookback }}) DAY AS DATE), CAST('__activity_valid_from__' AS DATE)) WHERE TRUE;
{%- endif %}
