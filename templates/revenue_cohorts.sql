{%- import '_periods.sql' as p with context -%}
{%- import '_revenue.sql' as r with context -%}
{#- Cohort = a customer's first period with revenue (customer_revenue.revenue > 0); one row
    per cohort and age up to the last period of revenue data, zero rows included. Revenue
    is summed from customer_revenue, so it follows the same rules (a zero or negative
    period total counts as no revenue). Net revenue retention is the cohort's revenue at
    this age over its revenue at age 0. -#}
WITH marked AS (
  /* Each customer_revenue row with the cohort of the customer: the first period with revenue. */
  SELECT
    period_key AS marked_key,
    revenue AS marked_revenue,
    MIN(CASE WHEN revenue > 0 THEN period_key END) OVER (PARTITION BY customer_id) AS marked_cohort_key
  FROM {{ ref('customer_revenue') }}
), cohort_revenue AS (
  /* Paying customers and revenue per cohort and period. */
  SELECT
    marked_cohort_key AS revenue_cohort_key,
    marked_key AS revenue_key,
    COUNT(CASE WHEN marked_revenue > 0 THEN 1 END) AS paying_count,
    SUM(marked_revenue) AS revenue_sum
  FROM marked
  WHERE marked_key >= marked_cohort_key
  GROUP BY marked_cohort_key, marked_key
), cohort_sizes AS (
  /* The size of a cohort: its paying customers in the cohort period. */
  SELECT revenue_cohort_key AS size_key, paying_count AS size_count
  FROM cohort_revenue
  WHERE revenue_key = revenue_cohort_key
), data_range AS (
  /* The first and last period of revenue data. */
  SELECT
    {{ p.period_key('first_date') }} AS first_data_key,
    {{ p.period_key('last_date') }} AS last_data_key
  FROM {{ ref('revenue_source_summary') }}
), {{ p.digits_cte() }}, ages AS (
  /* Ages 0, 1, 2, ... periods, as many as the data spans. */
  SELECT {{ p.counting_value(grain.calendar_digits) }} AS age_number
  FROM data_range AS d
  CROSS JOIN {{ p.counting(grain.calendar_digits) }}
  WHERE d.first_data_key + {{ grain.step }} * ({{ p.counting_value(grain.calendar_digits) }}) <= d.last_data_key
), triangle AS (
  /* Every cohort and age up to the last period with data. */
  SELECT
    s.size_key AS cell_cohort_key,
    g.age_number AS cell_age,
    s.size_key + {{ grain.step }} * g.age_number AS cell_key,
    s.size_count AS cell_size
  FROM cohort_sizes AS s
  CROSS JOIN ages AS g
  CROSS JOIN data_range AS d
  WHERE s.size_key + {{ grain.step }} * g.age_number <= d.last_data_key
), cells AS (
  /* Each cell with its paying customers and revenue (0 when none). */
  SELECT
    t.cell_cohort_key,
    t.cell_age,
    t.cell_key,
    t.cell_size,
    COALESCE(v.paying_count, 0) AS cell_paying,
    COALESCE(v.revenue_sum, 0) AS cell_revenue
  FROM triangle AS t
  LEFT JOIN cohort_revenue AS v
    ON v.revenue_cohort_key = t.cell_cohort_key AND v.revenue_key = t.cell_key
), running AS (
  /* Cumulative revenue per cohort, and its revenue at age 0. */
  SELECT
    cell_cohort_key,
    cell_age,
    cell_key,
    cell_size,
    cell_paying,
    cell_revenue,
    SUM(cell_revenue) OVER (PARTITION BY cell_cohort_key ORDER BY cell_age ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW) AS cumulative_amount,
    MAX(CASE WHEN cell_age = 0 THEN cell_revenue END) OVER (PARTITION BY cell_cohort_key) AS base_amount
  FROM cells
)
/* Net revenue retention = revenue at this age / revenue at age 0. */
SELECT
  {{ p.period_start('cell_cohort_key') }} AS cohort_start,
  cell_age AS age,
  {{ p.period_start('cell_key') }} AS period_start,
  cell_size AS cohort_customers,
  cell_paying AS paying_customers,
  {{ r.money('cell_revenue') }} AS revenue,
  {{ r.money('cumulative_amount') }} AS cumulative_revenue,
  {{ r.ratio('cell_revenue', 'base_amount') }} AS net_revenue_retention,
  cell_cohort_key AS cohort_key,
  cell_key AS period_key
FROM running
