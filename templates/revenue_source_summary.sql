{%- import '_revenue.sql' as r with context -%}
WITH {{ r.source_rows() }}
/* Each source row falls in exactly one count; the counted rows' first and last dates. */
SELECT
  COUNT(*) AS source_rows,
  COUNT(CASE WHEN row_status = 'null_customer' THEN 1 END) AS null_customer_rows,
  COUNT(CASE WHEN row_status = 'null_date' THEN 1 END) AS null_date_rows,
  COUNT(CASE WHEN row_status = 'null_amount' THEN 1 END) AS null_amount_rows,
  COUNT(CASE WHEN row_status = 'filtered_out' THEN 1 END) AS filtered_out_rows,
  COUNT(CASE WHEN row_status = 'invalid' THEN 1 END) AS invalid_rows,
  COUNT(CASE WHEN row_status = 'counted' THEN 1 END) AS counted_rows,
  MIN(CASE WHEN row_status = 'counted' THEN row_date END) AS first_date,
  MAX(CASE WHEN row_status = 'counted' THEN {{ r.row_last_date() }} END) AS last_date
FROM sqlgen_rows
