{%- import '_periods.sql' as p with context -%}
{%- import '_revenue.sql' as r with context -%}
{%- import '_segments.sql' as s with context -%}
{#- revenue_accounting per value of each segment with customer_key: customer_revenue's rows
    (one per customer and period) carry the customer's one value, from the segment's table
    keyed by the revenue customer, so the values partition the customers and their sums add
    up to revenue_accounting in every period. A customer missing from the table is NULL. -#}
WITH
{%- for seg in segments if seg.customer_key %}
{%- set i = segments.index(seg) %}{% if not loop.first %},{% endif %} seg_customers_{{ i }} AS (
  /* Segment {{ i + 1 }}: one value per customer key of the table, the smallest non-NULL one for a key listed twice. */
  SELECT __segment_customer_{{ i }}__ AS sqlgen_key, MIN(__segment_{{ i }}__) AS sqlgen_choice, 1 AS sqlgen_found
  FROM __segment_table_{{ i }}__
  WHERE __segment_customer_{{ i }}__ IS NOT NULL
  GROUP BY __segment_customer_{{ i }}__
)
{%- endfor %}, segment_rows AS (
  /* Each customer_revenue row once per segment, with the customer's value as text (value_missing 1 for NULL). */
{%- for seg in segments if seg.customer_key %}
{%- set i = segments.index(seg) %}
  {% if not loop.first %}UNION ALL
  {% endif %}SELECT
    '__segment_name_{{ i }}__' AS segment_name,
    CASE WHEN t.sqlgen_found = 1 AND t.sqlgen_choice IS NOT NULL THEN 0 ELSE 1 END AS value_missing,
    CASE WHEN t.sqlgen_found = 1 THEN COALESCE(CAST(t.sqlgen_choice AS TEXT), '') ELSE '' END AS value_text,
    c.period_key AS row_key,
    c.revenue AS row_revenue,
    c.previous_revenue AS row_previous,
    c.new_revenue AS row_new,
    c.expansion_revenue AS row_expansion,
    c.resurrected_revenue AS row_resurrected,
    c.contraction_revenue AS row_contraction,
    c.churned_revenue AS row_churned,
    c.retained_revenue AS row_retained,
    c.period_amount AS row_amount,
    c.counted_as_zero AS row_zeroed,
    c.state AS row_state
  FROM {{ ref('customer_revenue') }} AS c
  LEFT JOIN seg_customers_{{ i }} AS t
    ON t.sqlgen_key = c.customer_id
{%- endfor %}
), tallies AS (
  /* The rows summed per segment, value and period: the identities hold per row, so they hold in the sums. */
  SELECT
    segment_name AS tally_segment,
    value_missing AS tally_missing,
    value_text AS tally_text,
    row_key AS tally_key,
    SUM(row_revenue) AS revenue_sum,
    SUM(row_previous) AS previous_sum,
    SUM(row_new) AS new_sum,
    SUM(row_expansion) AS expansion_sum,
    SUM(row_resurrected) AS resurrected_sum,
    SUM(row_contraction) AS contraction_sum,
    SUM(row_churned) AS churned_sum,
    SUM(row_retained) AS retained_sum,
    SUM(CASE WHEN row_zeroed = 1 THEN row_amount ELSE 0 END) AS zeroed_sum,
    SUM(CASE WHEN row_amount IS NULL THEN 0 ELSE row_amount END) AS amount_sum,
    COUNT(CASE WHEN row_revenue > 0 THEN 1 END) AS customer_count,
    COUNT(CASE WHEN row_previous > 0 THEN 1 END) AS previous_count,
    COUNT(CASE WHEN row_state = 'new' THEN 1 END) AS new_count,
    COUNT(CASE WHEN row_state = 'expansion' THEN 1 END) AS expansion_count,
    COUNT(CASE WHEN row_state = 'resurrected' THEN 1 END) AS resurrected_count,
    COUNT(CASE WHEN row_state = 'contraction' THEN 1 END) AS contraction_count,
    COUNT(CASE WHEN row_state = 'churned' THEN 1 END) AS churned_count,
    COUNT(CASE WHEN row_revenue > 0 AND row_previous > 0 THEN 1 END) AS retained_count,
    COUNT(CASE WHEN row_state = 'retained_flat' THEN 1 END) AS flat_count,
    COUNT(CASE WHEN row_zeroed = 1 THEN 1 END) AS zeroed_count
  FROM segment_rows
  GROUP BY segment_name, value_missing, value_text, row_key
), data_range AS (
  /* The first and last period with revenue data, and the last date: revenue_accounting's own. */
  SELECT
    {{ p.period_key('first_date') }} AS first_key,
    {{ p.period_key('last_date') }} AS last_key,
    last_date AS data_through
  FROM {{ ref('revenue_source_summary') }}
), {{ s.value_calendar() }}, filled AS (
  /* Each value's sums on the whole calendar, zeros for its empty periods. */
  SELECT
    v.value_segment,
    v.value_null,
    v.value_label,
    c.calendar_key,
    COALESCE(t.revenue_sum, 0) AS revenue_amount,
    COALESCE(t.previous_sum, 0) AS previous_amount,
    COALESCE(t.new_sum, 0) AS new_amount,
    COALESCE(t.expansion_sum, 0) AS expansion_amount,
    COALESCE(t.resurrected_sum, 0) AS resurrected_amount,
    COALESCE(t.contraction_sum, 0) AS contraction_amount,
    COALESCE(t.churned_sum, 0) AS churned_amount,
    COALESCE(t.retained_sum, 0) AS retained_amount,
    COALESCE(t.zeroed_sum, 0) AS zeroed_total,
    COALESCE(t.amount_sum, 0) AS amount_all,
    COALESCE(t.customer_count, 0) AS customer_count,
    COALESCE(t.previous_count, 0) AS previous_count,
    COALESCE(t.new_count, 0) AS new_count,
    COALESCE(t.expansion_count, 0) AS expansion_count,
    COALESCE(t.resurrected_count, 0) AS resurrected_count,
    COALESCE(t.contraction_count, 0) AS contraction_count,
    COALESCE(t.churned_count, 0) AS churned_count,
    COALESCE(t.retained_count, 0) AS retained_count,
    COALESCE(t.flat_count, 0) AS flat_count,
    COALESCE(t.zeroed_count, 0) AS zeroed_count,
    CASE
      WHEN c.calendar_key = e.last_key AND e.after_data_key = e.last_key THEN 'in_progress'
      ELSE 'complete'
    END AS status
  FROM calendar AS c
  CROSS JOIN segment_values AS v
  CROSS JOIN data_edge AS e
  LEFT JOIN tallies AS t
    ON t.tally_segment = v.value_segment
    AND t.tally_missing = v.value_null
    AND t.tally_text = v.value_label
    AND t.tally_key = c.calendar_key
)
/* One row per segment, value and period. The values partition the customers: they add up to revenue_accounting. */
SELECT
  value_segment AS segment,
  {{ s.segment_value('value_null', 'value_label') }} AS segment_value,
  {{ p.period_start('calendar_key') }} AS period_start,
  {{ r.money('revenue_amount') }} AS revenue,
  {{ r.money('previous_amount') }} AS previous_revenue,
  {{ r.money('new_amount') }} AS new_revenue,
  {{ r.money('expansion_amount') }} AS expansion_revenue,
  {{ r.money('resurrected_amount') }} AS resurrected_revenue,
  {{ r.money('contraction_amount') }} AS contraction_revenue,
  {{ r.money('churned_amount') }} AS churned_revenue,
  {{ r.money('retained_amount') }} AS retained_revenue,
  customer_count AS customers,
  previous_count AS previous_customers,
  new_count AS new_customers,
  expansion_count AS expansion_customers,
  resurrected_count AS resurrected_customers,
  contraction_count AS contraction_customers,
  churned_count AS churned_customers,
  retained_count AS retained_customers,
  flat_count AS flat_customers,
  {{ r.ratio('new_amount + resurrected_amount + expansion_amount', 'churned_amount + contraction_amount') }} AS quick_ratio,
  {{ r.ratio('previous_amount - churned_amount - contraction_amount', 'previous_amount') }} AS gross_revenue_retention,
  {{ r.ratio('previous_amount - churned_amount - contraction_amount + expansion_amount', 'previous_amount') }} AS net_revenue_retention,
  zeroed_count AS zeroed_customers,
  {{ r.money('zeroed_total') }} AS zeroed_amount,
  {{ r.money('amount_all') }} AS amount_total,
  status AS period_status,
  calendar_key AS period_key
FROM filled
