{#- The state table of `output.materialize: incremental`, one row, as create_all.sql leaves it:
    mark_day    the newest local date of the per-(user, day) table (the high-water mark)
    from_day    mark_day - output.lookback days: refresh.sql reads the source rows from it on
                and computes those days again (valid_from when there is no data yet)
    rows_before the source rows with a timestamp before from_day, counted when it was set
    late_rows   the rows found before from_day that were not there when it was set: late
                rows older than the lookback, not in the tables (create_all.sql includes them)
    read_from   the from_day the last refresh read from: the tables' rows from its period on
                are the ones it computed again
    pending_before, pending_mark, pending_between: what a refresh has counted so far, NULL
                between refreshes; only its last statement moves them into the columns
                above (sqlgen_refresh_steps.sql) -#}
WITH marked AS (
  /* The high-water mark: the newest day with activity (NULL when there is none). */
  SELECT CASE WHEN COUNT(activity_date) > 0 THEN MAX(activity_date) END AS sqlgen_mark FROM {{ ref('sqlgen_activity_days') }}
), windowed AS (
  /* The first day the next refresh computes again. */
  SELECT sqlgen_mark, COALESCE(CAST(sqlgen_mark + INTERVAL ({{ -lookback }}) DAY AS DATE), CAST('__activity_valid_from__' AS DATE)) AS sqlgen_from
  FROM marked
)
SELECT
  sqlgen_mark AS mark_day,
  sqlgen_from AS from_day,
  (SELECT COUNT(__timestamp__) FROM __activity_table__ WHERE __timestamp__ < (SELECT sqlgen_from FROM windowed)) AS rows_before,
  CAST(0 AS BIGINT) AS late_rows,
  sqlgen_from AS read_from,
  CAST(NULL AS BIGINT) AS pending_before,
  CAST(NULL AS DATE) AS pending_mark,
  CAST(NULL AS BIGINT) AS pending_between
FROM windowed
