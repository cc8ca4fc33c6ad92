{%- import '_periods.sql' as p with context -%}
{%- import '_activity.sql' as a with context -%}
{#- Trailing windows of N days, accounted against the previous window (the N days before).
    Work is proportional to user-blocks of activity, not to days x window: the days are cut
    into blocks of B days, B the shortest window, and the events grouped once by (user,
    block). Inside a block two active days of a user are less than B <= N days apart, so
    the user never lapses inside a block: each block with first active day f and last
    active day l, followed by the user's next active day b (NULL when none), opens spans of
    days in which the user counts in the window ending that day:
      active   in windows ending [f, min(l+N, b))
      previous in windows ending [f+N, min(l+N, b)+N)        (active N days earlier)
      new      in windows ending [f, f+N) for the user's first block
      churned  in windows ending [l+N, min(l+2N, b)) when b > l+N or b is NULL
    Spans become +1/-1 changes per day and a running sum over the calendar turns them into
    counts. retained = previous - churned and resurrected = active - new - retained.
    With first_seen, a user first seen on day s before the window is not new in it (the
    user is resurrected there, as in growth accounting): the first block's new span ends at
    min(f, s) + N instead of f + N, and is empty when s + N <= f.
    With refresh (refresh.sql), only the days from from_day (day r) on: a day's counts
    depend on the activity of the 2N days up to it, and every span of a block ending
    before the block holding r - 2N ends before r (l + 2N <= r), so only the blocks from
    that one on are read; a block is the user's first when its first day is the user's
    first active date (the per-user table refresh.sql keeps), and the calendar starts at
    the first block read (or at r, or the first active date when later). -#}
{%- set block = windows | min -%}
{%- set longest = windows | max -%}
{%- set fs = source.first_seen -%}
WITH {{ a.source_ctes(reads=2 * longest + block) }}, numbered AS (
  /* Each active day as a day number: days since Monday 1970-01-05. */
  SELECT user_id AS day_user, DATE_DIFF('day', DATE '1970-01-05', activity_date) AS day_number
  FROM dated
), blocked AS (
  /* Days cut into blocks as long as the shortest window. */
  SELECT day_user, day_number, day_number - (day_number + {{ 700000 - 700000 % block }}) % {{ block }} AS block_number
  FROM numbered
), user_blocks AS (
  /* First and last active day of each user in each block. */
  SELECT day_user AS block_user, block_number, MIN(day_number) AS first_day,
    MAX(day_number) AS last_day
  FROM blocked
{%- if refresh %}
  WHERE block_number >= (SELECT DATE_DIFF('day', DATE '1970-01-05', changed_date) - 2 * {{ longest }} - (DATE_DIFF('day', DATE '1970-01-05', changed_date) - 2 * {{ longest }} + {{ 700000 - 700000 % block }}) % {{ block }} FROM refresh_bounds)
{%- endif %}
  GROUP BY day_user, block_number
){% if fs %}, {{ a.first_seen_ctes('day') }}{% endif %}, visits AS (
  /* Each block with the previous block of the user and next active day{% if fs %}, and new_from: the first active day, or the first-seen day when earlier{% endif %}. */
  SELECT
    {%- if fs %}
    b.first_day,
    b.last_day,
    LAG(b.block_number) OVER (PARTITION BY b.block_user ORDER BY b.block_number) AS prior_block,
    LEAD(b.first_day) OVER (PARTITION BY b.block_user ORDER BY b.block_number) AS next_day,
    CASE
      WHEN s.sqlgen_seen_found = 1 AND s.sqlgen_seen_key < b.first_day THEN s.sqlgen_seen_key
      ELSE b.first_day
    END AS new_from
  FROM user_blocks AS b
  LEFT JOIN first_seen AS s
    ON s.sqlgen_seen_user = b.block_user
    {%- elif refresh %}
    b.first_day,
    b.last_day,
    LAG(b.block_number) OVER (PARTITION BY b.block_user ORDER BY b.block_number) AS prior_block,
    LEAD(b.first_day) OVER (PARTITION BY b.block_user ORDER BY b.block_number) AS next_day,
    DATE_DIFF('day', DATE '1970-01-05', f.first_date) AS user_first_day
  FROM user_blocks AS b
  JOIN {{ ref('sqlgen_first_days') }} AS f
    ON f.user_id = b.block_user
    {%- else %}
    first_day,
    last_day,
    LAG(block_number) OVER (PARTITION BY block_user ORDER BY block_number) AS prior_block,
    LEAD(first_day) OVER (PARTITION BY block_user ORDER BY block_number) AS next_day
  FROM user_blocks
    {%- endif %}
), window_lengths AS (
  /* The window lengths, in days. */
{%- for n in windows %}
  {% if not loop.first %}UNION ALL {% endif %}SELECT {{ n }} AS window_length
{%- endfor %}
), spans AS (
  /* Per block and window, the days whose window counts the user: active, lapsing, churned. */
  SELECT
    w.window_length AS span_window,
    v.first_day AS start_day,
    v.last_day + w.window_length AS lapse_day,
    CASE
      WHEN v.next_day IS NULL OR v.next_day > v.last_day + w.window_length
        THEN v.last_day + w.window_length
      ELSE v.next_day
    END AS end_day,
    CASE
      WHEN v.next_day IS NULL OR v.next_day > v.last_day + 2 * w.window_length
        THEN v.last_day + 2 * w.window_length
      ELSE v.next_day
    END AS churn_end_day,
{%- if fs %}
    v.new_from + w.window_length AS new_end_day,
    CASE WHEN v.prior_block IS NULL AND v.new_from + w.window_length > v.first_day THEN 1 ELSE 0 END AS first_visit,
{%- elif refresh %}
    CASE WHEN v.first_day = v.user_first_day THEN 1 ELSE 0 END AS first_visit,
{%- else %}
    CASE WHEN v.prior_block IS NULL THEN 1 ELSE 0 END AS first_visit,
{%- endif %}
    CASE WHEN v.next_day IS NULL OR v.next_day > v.last_day + w.window_length THEN 1 ELSE 0 END AS lapse
  FROM visits AS v
  CROSS JOIN window_lengths AS w
), boundaries AS (
  /* Each span as +1 where it starts and -1 where it ends. */
  SELECT span_window AS change_window, start_day AS change_day, 1 AS active_delta,
    0 AS previous_delta, first_visit AS new_delta, 0 AS churn_delta
  FROM spans
  UNION ALL
{%- if fs %}
  SELECT span_window, start_day + span_window, 0, 1, 0, 0
  FROM spans
  UNION ALL
  SELECT span_window, new_end_day, 0, 0, -1, 0
  FROM spans
  WHERE first_visit = 1
{%- else %}
  SELECT span_window, start_day + span_window, 0, 1, 0 - first_visit, 0
  FROM spans
{%- endif %}
  UNION ALL
  SELECT span_window, end_day, -1, 0, 0, 0
  FROM spans
  UNION ALL
  SELECT span_window, end_day + span_window, 0, -1, 0, 0
  FROM spans
  UNION ALL
  SELECT span_window, lapse_day, 0, 0, 0, 1
  FROM spans
  WHERE lapse = 1
  UNION ALL
  SELECT span_window, churn_end_day, 0, 0, 0, -1
  FROM spans
  WHERE lapse = 1
), changes AS (
  /* The changes summed per window and day. */
  SELECT
    change_window,
    change_day,
    SUM(active_delta) AS active_change,
    SUM(previous_delta) AS previous_change,
    SUM(new_delta) AS new_change,
    SUM(churn_delta) AS churn_change
  FROM boundaries
  GROUP BY change_window, change_day
), data_range AS (
{%- if refresh %}
  /* The first day of the calendar: the first block read, or from_day when earlier and later than the first active date; the last active day. */
  SELECT
    CASE WHEN MIN(first_day) < (SELECT DATE_DIFF('day', DATE '1970-01-05', CASE WHEN data_first_date > changed_date THEN data_first_date ELSE changed_date END) FROM refresh_bounds) THEN MIN(first_day)
      ELSE (SELECT DATE_DIFF('day', DATE '1970-01-05', CASE WHEN data_first_date > changed_date THEN data_first_date ELSE changed_date END) FROM refresh_bounds) END AS first_day,
    MAX(last_day) AS last_day
  FROM user_blocks
{%- else %}
  /* The first and last active day. */
  SELECT MIN(first_day) AS first_day, MAX(last_day) AS last_day
  FROM user_blocks
{%- endif %}
), {{ p.digits_cte() }}, calendar AS (
  /* Every day from the first to the last. */
  SELECT r.first_day + {{ p.counting_value(grain.day_digits) }} AS calendar_day
  FROM data_range AS r
  CROSS JOIN {{ p.counting(grain.day_digits) }}
  WHERE r.first_day + {{ p.counting_value(grain.day_digits) }} <= r.last_day
), running AS (
  /* Running sums of the changes give the counts of each day per window. */
  SELECT
    c.calendar_day AS grid_day,
    w.window_length AS grid_window,
    SUM(COALESCE(ch.active_change, 0)) OVER (PARTITION BY w.window_length ORDER BY c.calendar_day ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW) AS active_count,
    SUM(COALESCE(ch.previous_change, 0)) OVER (PARTITION BY w.window_length ORDER BY c.calendar_day ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW) AS previous_count,
    SUM(COALESCE(ch.new_change, 0)) OVER (PARTITION BY w.window_length ORDER BY c.calendar_day ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW) AS new_count,
    SUM(COALESCE(ch.churn_change, 0)) OVER (PARTITION BY w.window_length ORDER BY c.calendar_day ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW) AS churned_count
  FROM calendar AS c
  CROSS JOIN window_lengths AS w
  LEFT JOIN changes AS ch
    ON ch.change_window = w.window_length AND ch.change_day = c.calendar_day
), tallied AS (
  /* retained = previous - churned: every user of the previous window is retained or churned. */
  SELECT
    grid_day,
    grid_window,
    CAST(active_count AS BIGINT) AS active_tally,
    CAST(previous_count AS BIGINT) AS previous_tally,
    CAST(new_count AS BIGINT) AS new_tally,
    CAST(previous_count - churned_count AS BIGINT) AS retained_tally,
    CAST(churned_count AS BIGINT) AS churned_tally
  FROM running
)
/* One row per day and window. resurrected = active - new - retained. */
SELECT
  CAST(DATE '1970-01-05' + INTERVAL (grid_day) DAY AS DATE) AS day,
  grid_window AS window_days,
  active_tally AS active_users,
  previous_tally AS previous_active_users,
  new_tally AS new_users,
  retained_tally AS retained_users,
  active_tally - new_tally - retained_tally AS resurrected_users,
  churned_tally AS churned_users,
  CAST(active_tally - retained_tally AS DOUBLE) / NULLIF(churned_tally, 0) AS quick_ratio,
  grid_day AS day_key
FROM tallied
{%- if source.report_from %}
WHERE grid_day >= DATE_DIFF('day', DATE '1970-01-05', CAST('__report_from__' AS DATE)){% if refresh %} AND grid_day >= (SELECT DATE_DIFF('day', DATE '1970-01-05', changed_date) FROM refresh_bounds){% endif %}
{%- elif refresh %}
WHERE grid_day >= (SELECT DATE_DIFF('day', DATE '1970-01-05', changed_date) FROM refresh_bounds)
{%- endif %}
