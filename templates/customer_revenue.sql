{%- import '_periods.sql' as p with context -%}
{%- import '_revenue.sql' as r with context -%}
{#- Revenue of a customer in a period is its period total when positive, else 0 (a zero or
    negative total, e.g. a refund, counts as no revenue and is flagged). Each row splits the
    change from the previous period into exactly one component, so per row
      revenue = previous + new + resurrected + expansion - contraction - churned
      previous = retained + contraction + churned. -#}
WITH {{ r.source_rows(p) }}, counted AS (
  /* The counted rows only. */
  SELECT
    sqlgen_customer AS counted_customer,
    row_date AS counted_date,
    sqlgen_amount AS counted_amount
    {%- if revenue.shape == 'subscriptions' %},
    row_end AS counted_end,
    row_months AS counted_months
    {%- endif %}
  FROM sqlgen_rows
  WHERE row_status = 'counted'
), {{ r.period_totals(p) }}, entries AS (
  /* Each total as the revenue of this period, and again as the previous revenue of the next period. */
  SELECT
    total_customer AS entry_customer,
    total_key AS entry_key,
    total_amount AS entry_total,
    1 AS entry_rows,
    CASE WHEN total_amount > 0 THEN total_amount ELSE 0 END AS entry_current,
    0 AS entry_previous
  FROM totals
  UNION ALL
  SELECT
    t.total_customer,
    t.total_key + {{ grain.step }},
    0,
    0,
    0,
    t.total_amount
  FROM totals AS t
  CROSS JOIN data_range AS d
  WHERE t.total_amount > 0 AND t.total_key + {{ grain.step }} <= d.last_key
), combined AS (
  /* Per customer and period: current revenue (a total of 0 or less counts as 0) and previous revenue. */
  SELECT
    entry_customer AS customer_key,
    entry_key AS revenue_key,
    SUM(entry_total) AS summed_total,
    MAX(entry_rows) AS has_rows,
    SUM(entry_current) AS current_amount,
    SUM(entry_previous) AS previous_amount
  FROM entries
  GROUP BY entry_customer, entry_key
), firsts AS (
  /* The first period of each customer with revenue. */
  SELECT
    customer_key,
    revenue_key,
    summed_total,
    has_rows,
    current_amount,
    previous_amount,
    MIN(CASE WHEN current_amount > 0 THEN revenue_key END) OVER (PARTITION BY customer_key) AS first_paid_key
  FROM combined
), staged AS (
  /* Exactly one state per row, so revenue = previous + new + resurrected + expansion - contraction - churned. */
  SELECT
    customer_key,
    revenue_key,
    summed_total,
    has_rows,
    current_amount,
    previous_amount,
    CASE
      WHEN current_amount > 0 AND previous_amount > 0 THEN
        CASE
          WHEN current_amount > previous_amount THEN 'expansion'
          WHEN current_amount < previous_amount THEN 'contraction'
          ELSE 'retained_flat'
        END
      WHEN current_amount > 0 AND revenue_key = first_paid_key THEN 'new'
      WHEN current_amount > 0 THEN 'resurrected'
      WHEN previous_amount > 0 THEN 'churned'
      ELSE 'no_revenue'
    END AS revenue_state
  FROM firsts
)
/* Each change in exactly one component. previous = retained + contraction + churned. */
SELECT
  customer_key AS customer_id,
  revenue_key AS period_key,
  {{ p.period_start('revenue_key') }} AS period_start,
  {{ r.money('current_amount') }} AS revenue,
  {{ r.money('previous_amount') }} AS previous_revenue,
  revenue_state AS state,
  {{ r.money("CASE WHEN revenue_state = 'new' THEN current_amount ELSE 0 END") }} AS new_revenue,
  {{ r.money("CASE WHEN revenue_state = 'expansion' THEN current_amount - previous_amount ELSE 0 END") }} AS expansion_revenue,
  {{ r.money("CASE WHEN revenue_state = 'resurrected' THEN current_amount ELSE 0 END") }} AS resurrected_revenue,
  {{ r.money("CASE WHEN revenue_state = 'contraction' THEN previous_amount - current_amount ELSE 0 END") }} AS contraction_revenue,
  {{ r.money("CASE WHEN revenue_state = 'churned' THEN previous_amount ELSE 0 END") }} AS churned_revenue,
  {{ r.money('CASE WHEN current_amount < previous_amount THEN current_amount ELSE previous_amount END') }} AS retained_revenue,
  CASE WHEN has_rows = 1 THEN {{ r.money('summed_total') }} END AS period_amount,
  CASE WHEN has_rows = 1 AND summed_total <= 0 THEN 1 ELSE 0 END AS counted_as_zero
FROM staged
