{%- import '_periods.sql' as p with context -%}
WITH sqlgen_source AS (
  SELECT
    __user__ AS sqlgen_user,
    __timestamp__ AS sqlgen_ts,
    CASE WHEN {% if source.where %}(__where__){% else %}TRUE{% endif %} THEN 1 ELSE 0 END AS sqlgen_kept
  FROM __activity_table__
)
SELECT
  COUNT(*) AS source_rows,
  COUNT(CASE WHEN sqlgen_user IS NULL THEN 1 END) AS null_user_rows,
  COUNT(CASE WHEN sqlgen_user IS NOT NULL AND sqlgen_ts IS NULL THEN 1 END) AS null_timestamp_rows,
  COUNT(CASE WHEN sqlgen_user IS NOT NULL AND sqlgen_ts IS NOT NULL AND sqlgen_kept = 0 THEN 1 END) AS filtered_out_rows,
  COUNT(CASE WHEN sqlgen_user IS NOT NULL AND sqlgen_ts IS NOT NULL AND sqlgen_kept = 1 THEN 1 END) AS counted_rows
FROM sqlgen_source
