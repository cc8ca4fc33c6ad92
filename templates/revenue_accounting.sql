{%- import '_periods.sql' as p with context -%}
{%- import '_revenue.sql' as r with context -%}
{#- Sums of customer_revenue per period over every period from the first to the last with
    revenue data (empty periods as zeros); the identities hold per customer row, so they hold
    exactly in these sums. -#}
WITH tallies AS (
  /* customer_revenue summed per period: the identities hold per row, so they hold in the sums. */
  SELECT
    period_key AS tally_key,
    SUM(revenue) AS revenue_sum,
    SUM(previous_revenue) AS previous_sum,
    SUM(new_revenue) AS new_sum,
    SUM(expansion_revenue) AS expansion_sum,
    SUM(resurrected_revenue) AS resurrected_sum,
    SUM(contraction_revenue) AS contraction_sum,
    SUM(churned_revenue) AS churned_sum,
    SUM(retained_revenue) AS retained_sum,
    SUM(CASE WHEN counted_as_zero = 1 THEN period_amount ELSE 0 END) AS zeroed_sum,
    SUM(CASE WHEN period_amount IS NULL THEN 0 ELSE period_amount END) AS amount_sum,
    COUNT(CASE WHEN revenue > 0 THEN 1 END) AS customer_count,
    COUNT(CASE WHEN previous_revenue > 0 THEN 1 END) AS previous_count,
    COUNT(CASE WHEN state = 'new' THEN 1 END) AS new_count,
    COUNT(CASE WHEN state = 'expansion' THEN 1 END) AS expansion_count,
    COUNT(CASE WHEN state = 'resurrected' THEN 1 END) AS resurrected_count,
    COUNT(CASE WHEN state = 'contraction' THEN 1 END) AS contraction_count,
    COUNT(CASE WHEN state = 'churned' THEN 1 END) AS churned_count,
    COUNT(CASE WHEN revenue > 0 AND previous_revenue > 0 THEN 1 END) AS retained_count,
    COUNT(CASE WHEN state = 'retained_flat' THEN 1 END) AS flat_count,
    COUNT(CASE WHEN counted_as_zero = 1 THEN 1 END) AS zeroed_count
  FROM {{ ref('customer_revenue') }}
  GROUP BY period_key
), data_range AS (
  /* The first and last period with revenue data, and the last date. */
  SELECT
    {{ p.period_key('first_date') }} AS first_key,
    {{ p.period_key('last_date') }} AS last_key,
    last_date AS data_through
  FROM {{ ref('revenue_source_summary') }}
), data_edge AS (
  /* The period of the day after the data: if it is the last period, that period is still in progress. */
  SELECT first_key, last_key, data_through,
    {{ p.period_key("data_through + INTERVAL 1 DAY") }} AS after_data_key
  FROM data_range
), {{ p.digits_cte() }}, calendar AS (
  /* Every period from the first to the last, empty periods included. */
  SELECT e.first_key + {{ grain.step }} * ({{ p.counting_value(grain.calendar_digits) }}) AS calendar_key
  FROM data_edge AS e
  CROSS JOIN {{ p.counting(grain.calendar_digits) }}
  WHERE e.first_key + {{ grain.step }} * ({{ p.counting_value(grain.calendar_digits) }}) <= e.last_key
), filled AS (
  /* The sums on the calendar, zeros for empty periods. */
  SELECT
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
  CROSS JOIN data_edge AS e
  LEFT JOIN tallies AS t
    ON t.tally_key = c.calendar_key
)
/* One row per period. quick ratio = (new + resurrected + expansion) / (churned + contraction). */
SELECT
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
