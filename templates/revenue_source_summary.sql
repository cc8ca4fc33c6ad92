{%- import '_periods.sql' as p with context -%}
{%- import '_revenue.sql' as r with context -%}
WITH {{ r.source_rows(p) }}
/* Each source row falls in exactly one count. the first and last dates of the counted rows. */
SELECT
  COUNT(*) AS source_rows,
  COUNT(CASE WHEN row_status = 'null_customer' THEN 1 END) AS null_customer_rows,
  COUNT(CASE WHEN row_status = 'null_date' THEN 1 END) AS null_date_rows,
  COUNT(CASE WHEN row_status = 'null_amount' THEN 1 END) AS null_amount_rows,
  COUNT(CASE WHEN row_status = 'filtered_out' THEN 1 END) AS filtered_out_rows,
  COUNT(CASE WHEN row_status = 'out_of_range' THEN 1 END) AS out_of_range_rows,
  COUNT(CASE WHEN row_status = 'invalid' THEN 1 END) AS invalid_rows,
  COUNT(CASE WHEN row_status = 'counted' THEN 1 END) AS counted_rows,
  {%- if revenue.shape == 'subscriptions' and revenue.measure == 'run_rate' %}
  {#- A subscription that starts and ends inside one period is in force at no period's end. #}
  COUNT(CASE WHEN row_status = 'counted' AND row_end IS NOT NULL AND {{ p.period_key('row_end') }} = {{ p.period_key('row_date') }} THEN 1 END) AS no_run_rate_rows,
  {%- endif %}
  MIN(CASE WHEN row_status = 'counted' THEN row_date END) AS first_date,
  MAX(CASE WHEN row_status = 'counted' THEN {{ r.row_last_date() }} END) AS last_date
FROM sqlgen_rows
