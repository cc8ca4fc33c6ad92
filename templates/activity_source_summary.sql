{%- import '_periods.sql' as p with context -%}
WITH sqlgen_source AS (
  /* Every row of the activity table, marked as kept or not by the spec's filter. */
  SELECT
    __user__ AS sqlgen_user,
    __timestamp__ AS sqlgen_ts,
    CASE WHEN {% if source.where %}(__where__){% else %}TRUE{% endif %} THEN 1 ELSE 0 END AS sqlgen_kept
  FROM __activity_table__
), sqlgen_dated AS (
  /* Each row's local calendar date, by the spec's time zone rule. */
  SELECT sqlgen_user, sqlgen_ts, sqlgen_kept, {{ p.local_date('sqlgen_ts') }} AS sqlgen_local_date
  FROM sqlgen_source
)
/* Each source row falls in exactly one count: null user, null timestamp, filtered out, unconverted or counted. */
SELECT
  COUNT(*) AS source_rows,
  COUNT(CASE WHEN sqlgen_user IS NULL THEN 1 END) AS null_user_rows,
  COUNT(CASE WHEN sqlgen_user IS NOT NULL AND sqlgen_ts IS NULL THEN 1 END) AS null_timestamp_rows,
  COUNT(CASE WHEN sqlgen_user IS NOT NULL AND sqlgen_ts IS NOT NULL AND sqlgen_kept = 0 THEN 1 END) AS filtered_out_rows,
  COUNT(CASE WHEN sqlgen_user IS NOT NULL AND sqlgen_ts IS NOT NULL AND sqlgen_kept = 1 AND sqlgen_local_date IS NULL THEN 1 END) AS unconverted_rows,
  COUNT(CASE WHEN sqlgen_user IS NOT NULL AND sqlgen_ts IS NOT NULL AND sqlgen_kept = 1 AND sqlgen_local_date IS NOT NULL THEN 1 END) AS counted_rows
FROM sqlgen_dated
