{%- import '_periods.sql' as p with context -%}
{#- Each row falls in exactly one category, tried in this order, so the counts add up to
    source_rows. The valid range is tried after `where` and before the zone conversion. -#}
WITH sqlgen_source AS (
  /* Every row of the activity table, marked as kept or not by the filter of the spec. */
  SELECT
    __user__ AS sqlgen_user,
    __timestamp__ AS sqlgen_ts,
    {{ p.near_value('__timestamp__', source.timestamp_type, 'activity') }} AS sqlgen_near_ts,
    CASE WHEN {% if source.where %}(__where__){% else %}TRUE{% endif %} THEN 1 ELSE 0 END AS sqlgen_kept
  FROM __activity_table__
), sqlgen_dated AS (
  /* The local calendar date of each row, by the time zone rule of the spec. */
  SELECT sqlgen_user, sqlgen_ts, sqlgen_near_ts, sqlgen_kept, {{ p.local_date('sqlgen_near_ts') }} AS sqlgen_local_date
  FROM sqlgen_source
), sqlgen_sorted AS (
  /* One status per row, tried in order: the first that applies. */
  SELECT
    CASE
      WHEN sqlgen_user IS NULL THEN 'null_user'
      WHEN sqlgen_ts IS NULL THEN 'null_timestamp'
      WHEN sqlgen_kept = 0 THEN 'filtered_out'
      WHEN sqlgen_near_ts IS NULL THEN 'out_of_range'
      WHEN sqlgen_local_date IS NULL THEN 'unconverted'
      WHEN {{ p.in_range('sqlgen_local_date', 'activity') }} THEN 'counted'
      ELSE 'out_of_range'
    END AS row_status
  FROM sqlgen_dated
)
/* Each source row falls in exactly one count: null user, null timestamp, filtered out, out of range, unconverted or counted. */
SELECT
  COUNT(*) AS source_rows,
  COUNT(CASE WHEN row_status = 'null_user' THEN 1 END) AS null_user_rows,
  COUNT(CASE WHEN row_status = 'null_timestamp' THEN 1 END) AS null_timestamp_rows,
  COUNT(CASE WHEN row_status = 'filtered_out' THEN 1 END) AS filtered_out_rows,
  COUNT(CASE WHEN row_status = 'out_of_range' THEN 1 END) AS out_of_range_rows,
  COUNT(CASE WHEN row_status = 'unconverted' THEN 1 END) AS unconverted_rows,
  COUNT(CASE WHEN row_status = 'counted' THEN 1 END) AS counted_rows
FROM sqlgen_sorted
