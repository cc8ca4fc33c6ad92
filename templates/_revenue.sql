{#- Revenue helpers shared by revenue_source_summary, customer_revenue and revenue_accounting,
written once in the source dialect (DuckDB). The context holds `revenue` (the spec's revenue
source) besides `grain`.

Money stays DECIMAL: sums and differences keep the amount's scale, money columns are written
through money() (ROUND to the spec's scale, a no-op on a DECIMAL of that scale), and the one
division money needs (a subscription's share of a month) is done on whole units of the scale
with integer arithmetic, so every engine rounds it the same way.
-#}

{#- The local calendar date of a revenue timestamp (the same rule as for activity). -#}
{%- macro local_date(ts) -%}
{%- if revenue.timestamp_type == 'date' -%}
CAST({{ ts }} AS DATE)
{%- elif revenue.timestamp_type == 'timestamptz' -%}
CAST({{ ts }} AT TIME ZONE {{ "'__revenue_timezone__'" if revenue.timezone else "'UTC'" }} AS DATE)
{%- elif revenue.timezone -%}
CAST(({{ ts }} AT TIME ZONE 'UTC') AT TIME ZONE '__revenue_timezone__' AS DATE)
{%- else -%}
CAST({{ ts }} AS DATE)
{%- endif -%}
{%- endmacro -%}

{#- The first day of calendar month k (k = year * 12 + month - 1), whatever the grain. -#}
{%- macro month_start(k) -%}
CAST(DATE '1970-01-01' + INTERVAL ({{ k }} - 23640) MONTH AS DATE)
{%- endmacro -%}

{#- A money value at the amount's scale. -#}
{%- macro money(x) -%}
ROUND({{ x }}, {{ revenue.scale }})
{%- endmacro -%}

{#- One unit of the scale (0.01 for scale 2) as an exact DECIMAL. -#}
{%- macro unit() -%}
{%- if revenue.scale == 0 -%}
CAST('1' AS DECIMAL(18, 0))
{%- else -%}
CAST('0.{{ '0' * (revenue.scale - 1) }}1' AS DECIMAL(18, {{ revenue.scale }}))
{%- endif -%}
{%- endmacro -%}

{#- A floating-point ratio of two money or count values, NULL on a zero denominator. -#}
{%- macro ratio(numerator, denominator) -%}
CAST({{ numerator }} AS DOUBLE) / NULLIF(CAST({{ denominator }} AS DOUBLE), 0)
{%- endmacro -%}

{#- Months in a subscription's billing interval: fixed, or read from the interval column
    (an unknown value gives NULL and the row is counted as invalid). -#}
{%- macro interval_months() -%}
{%- if revenue.interval_column -%}
CASE LOWER(__revenue_interval__)
  WHEN 'month' THEN 1 WHEN 'monthly' THEN 1
  WHEN 'quarter' THEN 3 WHEN 'quarterly' THEN 3
  WHEN 'year' THEN 12 WHEN 'yearly' THEN 12
END
{%- else -%}
{{ {'month': 1, 'quarter': 3, 'year': 12}[revenue.interval] }}
{%- endif -%}
{%- endmacro -%}

{#- CTEs sqlgen_source, sqlgen_dated and sqlgen_rows: every row of the revenue table with
    its local date(s) and a row_status (null_customer, null_date, null_amount, filtered_out,
    out_of_range, invalid or counted), tried in that order. The summary counts them;
    customer_revenue keeps the counted rows. The valid range (see _periods.sql) applies to a
    charge's date and a subscription's start: outside it the row is out_of_range, whatever
    its end. A subscription end before valid_from makes the row out_of_range too; an end on
    or after valid_until (such as 9999-12-31) means no end, like NULL. -#}
{%- macro source_rows(p) -%}
{%- set dated_column = '__revenue_timestamp__' if revenue.shape == 'charges' else '__revenue_start__' -%}
{%- set raw_type = 'DATE' if revenue.timestamp_type == 'date' else 'TIMESTAMP' -%}
sqlgen_source AS (
  /* Every row of the revenue table with the columns the views read, marked as kept by the filter of the spec. */
  SELECT
    __customer__ AS sqlgen_customer,
    {{ dated_column }} AS sqlgen_date_value,
    {{ p.near_value(dated_column, revenue.timestamp_type, 'revenue') }} AS sqlgen_date_near,
    __amount__ AS sqlgen_amount,
    {% if revenue.where %}CASE WHEN (__revenue_where__) THEN 1 ELSE 0 END{% else %}1{% endif %} AS sqlgen_kept
    {%- if revenue.shape == 'subscriptions' %},
    {% if revenue.end %}{{ p.near_value('__revenue_end__', revenue.timestamp_type, 'revenue') }}{% else %}CAST(NULL AS DATE){% endif %} AS sqlgen_end_near,
    {% if revenue.end %}CASE WHEN __revenue_end__ < CAST('__revenue_near_from__' AS {{ raw_type }}) THEN 1 ELSE 0 END{% else %}0{% endif %} AS sqlgen_end_early,
    {{ interval_months() }} AS sqlgen_months
    {%- endif %}
  FROM __revenue_table__
), sqlgen_dated AS (
  /* The local calendar date(s) of each row, by the time zone rule of the spec. */
  SELECT
    sqlgen_customer,
    sqlgen_amount,
    sqlgen_kept,
    sqlgen_date_value,
    sqlgen_date_near,
    {{ local_date('sqlgen_date_near') }} AS row_date
    {%- if revenue.shape == 'subscriptions' %},
    {% if revenue.end %}{{ local_date('sqlgen_end_near') }}{% else %}sqlgen_end_near{% endif %} AS sqlgen_end_date,
    sqlgen_end_early,
    sqlgen_months AS row_months
    {%- endif %}
  FROM sqlgen_source
), sqlgen_rows AS (
  /* The status of each row: the first reason it is not counted, else counted. */
  SELECT
    sqlgen_customer,
    sqlgen_amount,
    row_date,
    {%- if revenue.shape == 'subscriptions' %}
    CASE WHEN sqlgen_end_date < CAST('__revenue_valid_until__' AS DATE) THEN sqlgen_end_date END AS row_end,
    row_months,
    {%- endif %}
    CASE
      WHEN sqlgen_customer IS NULL THEN 'null_customer'
      WHEN sqlgen_date_value IS NULL OR (sqlgen_date_near IS NOT NULL AND row_date IS NULL) THEN 'null_date'
      WHEN sqlgen_amount IS NULL THEN 'null_amount'
      WHEN sqlgen_kept = 0 THEN 'filtered_out'
      WHEN row_date IS NULL OR NOT ({{ p.in_range('row_date', 'revenue') }}) THEN 'out_of_range'
      {%- if revenue.shape == 'subscriptions' %}
      WHEN sqlgen_end_early = 1 OR sqlgen_end_date < CAST('__revenue_valid_from__' AS DATE) THEN 'out_of_range'
      WHEN row_months IS NULL THEN 'invalid'
      WHEN sqlgen_end_date < CAST('__revenue_valid_until__' AS DATE) AND sqlgen_end_date <= row_date THEN 'invalid'
      {%- endif %}
      ELSE 'counted'
    END AS row_status
  FROM sqlgen_dated
)
{%- endmacro -%}

{#- The newest date a counted row holds: a charge's date, a subscription's start or end. -#}
{%- macro row_last_date() -%}
{%- if revenue.shape == 'subscriptions' -%}
CASE WHEN row_end IS NULL THEN row_date ELSE row_end END
{%- else -%}
row_date
{%- endif -%}
{%- endmacro -%}

{#- CTEs ending in data_range(first_key, last_key) and totals(total_customer, total_key,
    total_amount): each customer's total in each period, before the zero/negative rule.
    `counted` must hold the counted rows (counted_customer, counted_date, counted_amount,
    and for subscriptions counted_end, counted_months). -#}
{%- macro period_totals(p) -%}
bounds AS (
  /* The first and last date of the counted rows. */
  SELECT
    MIN(counted_date) AS first_date,
    MAX({{ 'CASE WHEN counted_end IS NULL THEN counted_date ELSE counted_end END' if revenue.shape == 'subscriptions' else 'counted_date' }}) AS last_date
  FROM counted
), data_range AS (
  /* The first and last period of the counted rows. */
  SELECT {{ p.period_key('first_date') }} AS first_key, {{ p.period_key('last_date') }} AS last_key
  FROM bounds
), {% if revenue.shape == 'charges' -%}
keyed AS (
  /* Each charge with its period key. */
  SELECT counted_customer AS keyed_customer, {{ p.period_key('counted_date') }} AS keyed_key, counted_amount AS keyed_amount
  FROM counted
), totals AS (
  /* The total of each customer per period, rounded to the scale of the amount. */
  SELECT keyed_customer AS total_customer, keyed_key AS total_key, {{ money('SUM(keyed_amount)') }} AS total_amount
  FROM keyed
  GROUP BY keyed_customer, keyed_key
)
{%- elif revenue.measure == 'run_rate' -%}
{{ run_rate_totals(p) }}
{%- else -%}
{{ subscription_totals(p) }}
{%- endif -%}
{%- endmacro -%}

{#- Subscriptions, measure run_rate, every grain: a customer's total in a period is the sum
    of the monthly amounts (amount / months in the interval, rounded half away from zero to
    whole units of the scale, once per subscription) of its subscriptions in force on the
    period's last day. With `end` the first day not covered, a subscription is in force at
    the end of every period from the one holding its start to the one before the one
    holding its end (to the last period while it runs): one key range [first, last], empty
    when it starts and ends inside one period (revenue_source_summary counts those rows).
    So the work is one range join of the ranges with the periods and one grouping.
    +amount / -amount edges with a running SUM per customer would still need a row per
    customer and period (customer_revenue has one for every period with revenue), so they
    would add a window sort to the same join; the range join alone is simpler and no slower. -#}
{%- macro run_rate_totals(p) -%}
ranges AS (
  /* The periods in force of each subscription at the end of the period: from the period of its start
     to the period before the one holding its end (to the last period while it runs). */
  SELECT
    c.counted_customer AS range_customer,
    {{ p.period_key('c.counted_date') }} AS range_first_key,
    CASE WHEN c.counted_end IS NULL THEN d.last_key ELSE {{ p.period_key('c.counted_end') }} - {{ grain.step }} END AS range_last_key,
    CAST(ROUND(c.counted_amount * {{ 10 ** revenue.scale }}, 0) AS BIGINT) AS range_units,
    c.counted_months AS range_months
  FROM counted AS c
  CROSS JOIN data_range AS d
), monthly AS (
  /* Its monthly amount: amount / months of the interval, in whole units of the scale,
     rounded half away from zero. */
  SELECT
    range_customer AS monthly_customer,
    range_first_key AS monthly_first_key,
    range_last_key AS monthly_last_key,
    CASE WHEN range_units < 0 THEN -1 ELSE 1 END * CAST(
      ((2 * ABS(range_units) + range_months) - (2 * ABS(range_units) + range_months) % (2 * range_months))
      / (2 * range_months) AS BIGINT) AS monthly_units
  FROM ranges
  WHERE range_first_key <= range_last_key
), {{ p.digits_cte() }}, period_ends AS (
  /* Every period from the first to the last. */
  SELECT d.first_key + {{ grain.step }} * ({{ p.counting_value(grain.calendar_digits) }}) AS end_key
  FROM data_range AS d
  CROSS JOIN {{ p.counting(grain.calendar_digits) }}
  WHERE d.first_key + {{ grain.step }} * ({{ p.counting_value(grain.calendar_digits) }}) <= d.last_key
), totals AS (
  /* The run rate of a customer in a period: the monthly amounts in force at its end. */
  SELECT
    m.monthly_customer AS total_customer,
    e.end_key AS total_key,
    {{ money('CAST(SUM(m.monthly_units) AS BIGINT) * ' ~ unit()) }} AS total_amount
  FROM monthly AS m
  CROSS JOIN period_ends AS e
  WHERE e.end_key >= m.monthly_first_key AND e.end_key <= m.monthly_last_key
  GROUP BY m.monthly_customer, e.end_key
)
{%- endmacro -%}

{#- Subscriptions, measure recognized, month, quarter and year grains: a subscription earns amount / (months in
    its interval) in each calendar month it covers in full, and covered days / days in the
    month of that in a month it covers in part. Day and week grains: it earns
    amount * 12 / (months in its interval) / 365 for each day it covers (a constant daily
    rate, so a flat plan stays flat). A share is one subscription's days in one segment (a
    calendar month, or a day or week); it is computed in whole units of the scale with
    integer arithmetic, rounded half away from zero, and the shares are summed. -#}
{%- macro subscription_totals(p) -%}
spans AS (
  /* Each counted subscription in whole units of the scale of the amount. */
  SELECT
    counted_customer AS span_customer,
    counted_date AS span_start,
    counted_end AS span_end,
    CAST(ROUND(counted_amount * {{ 10 ** revenue.scale }}, 0) AS BIGINT) AS span_units,
    counted_months AS span_months
  FROM counted
), {{ p.digits_cte() }}, {{ segments(p) }}, pieces AS (
  /* The covered days of each subscription in each segment, as an integer fraction of the segment. */
  SELECT
    s.span_customer AS piece_customer,
    g.segment_key AS piece_key,
    s.span_units AS piece_units,
    ABS(s.span_units){% if grain.family == 'day' %} * 12{% endif %} * DATE_DIFF('day',
      CASE WHEN s.span_start > g.segment_start THEN s.span_start ELSE g.segment_start END,
      CASE WHEN s.span_end IS NOT NULL AND s.span_end < g.segment_end THEN s.span_end ELSE g.segment_end END
    ) AS piece_numerator,
    s.span_months * g.segment_days AS piece_denominator
  FROM spans AS s
  CROSS JOIN segments AS g
  WHERE s.span_start < g.segment_end
    AND (s.span_end IS NULL OR s.span_end > g.segment_start)
), shares AS (
  /* Each piece in whole units, rounded half away from zero with integer arithmetic. */
  SELECT
    piece_customer AS share_customer,
    piece_key AS share_key,
    CASE WHEN piece_units < 0 THEN -1 ELSE 1 END * CAST(
      ((2 * piece_numerator + piece_denominator) - (2 * piece_numerator + piece_denominator) % (2 * piece_denominator))
      / (2 * piece_denominator) AS BIGINT) AS share_units
  FROM pieces
), totals AS (
  /* The total of each customer per period: the sum of its shares. */
  SELECT
    share_customer AS total_customer,
    share_key AS total_key,
    {{ money('CAST(SUM(share_units) AS BIGINT) * ' ~ unit()) }} AS total_amount
  FROM shares
  GROUP BY share_customer, share_key
)
{%- endmacro -%}

{#- segments(segment_key, segment_start, segment_end, segment_days): what a share is taken
    of, end exclusive, from the first period to the last. Month-family grains: each calendar
    month, with its number of days. Day and week grains: each period, against a 365-day year. -#}
{%- macro segments(p) -%}
{%- if grain.family == 'month' -%}
months AS (
  /* Every calendar month the data spans. */
  SELECT d.first_key + {{ p.counting_value(grain.month_digits) }} AS segment_month
  FROM data_range AS d
  CROSS JOIN {{ p.counting(grain.month_digits) }}
  WHERE d.first_key + {{ p.counting_value(grain.month_digits) }} <= d.last_key{% if grain.step > 1 %} + {{ grain.step - 1 }}{% endif %}
), month_edges AS (
  /* Each month with its period key and its first day and the first day of the next month. */
  SELECT
    {% if grain.step == 1 %}segment_month{% else %}segment_month - (segment_month % 12) % {{ grain.step }}{% endif %} AS edge_key,
    {{ month_start('segment_month') }} AS edge_start,
    {{ month_start('segment_month + 1') }} AS edge_end
  FROM months
), segments AS (
  /* Each month as a segment of its period, with its number of days. */
  SELECT
    edge_key AS segment_key,
    edge_start AS segment_start,
    edge_end AS segment_end,
    DATE_DIFF('day', edge_start, edge_end) AS segment_days
  FROM month_edges
)
{%- else -%}
periods AS (
  /* Every period the data spans. */
  SELECT d.first_key + {{ grain.step }} * ({{ p.counting_value(grain.calendar_digits) }}) AS calendar_key
  FROM data_range AS d
  CROSS JOIN {{ p.counting(grain.calendar_digits) }}
  WHERE d.first_key + {{ grain.step }} * ({{ p.counting_value(grain.calendar_digits) }}) <= d.last_key
), segments AS (
  /* Each period as a segment, against a 365-day year. */
  SELECT
    calendar_key AS segment_key,
    {{ p.period_start('calendar_key') }} AS segment_start,
    {{ p.period_start('calendar_key + ' ~ grain.step) }} AS segment_end,
    365 AS segment_days
  FROM periods
)
{%- endif -%}
{%- endmacro -%}
