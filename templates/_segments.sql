{#- Reading the activity table for the segmented views, once for every segment.

  segment_periods(windows)  the CTEs ending in segment_periods: one row per segment, value,
                     user and active period (segment_name, value_missing, value_text, user_id,
                     period_key, last_date and the window columns asked for: prior_key,
                     later_key, first_key, see window_columns; with first_seen, seen_key:
                     the user's first-seen period, NULL without one). The windows run on each
                     segment's own keys (the user alone for kind user: its states are the
                     totals'), before the values become text. The events are grouped once, by user, period
                     and the value of every segment read from the rows; each segment then
                     reads that grouping, many times smaller than the events:
    kind event            the user's periods per value of the row's column;
    kind user, no table   every period of the user, with the value on the user's first
                          counted row (ties: the smallest non-NULL value);
    kind user, table      every period of the user, with the table's value (NULL for a user
                          missing from it; the smallest non-NULL one for a user listed twice).
  A value is compared as text: value_text is the value cast to text ('' for NULL) and
  value_missing is 1 for NULL, so that plain equality joins keep NULL as a group of its own.
  value_calendar()   after the CTEs data_range (first_key, last_key, data_through) and
                     tallies (tally_segment, tally_missing, tally_text, ...): data_edge,
                     the calendar of periods and segment_values, every segment and value.
  segment_value(m, t) the value shown: NULL when missing, else the text.
-#}
{%- import '_activity.sql' as a with context -%}
{%- import '_periods.sql' as p with context -%}

{%- macro segment_periods(windows=('prior',)) -%}
{#- Only the segments that split the activity views (a table with customer_key alone does not). -#}
{#- segment_carry (sqlgen/render.py): the values read from the rows, then sqlgen_seg_ts when a kind user segment is among them. -#}
{%- set ns = namespace(carry=segment_carry, first=false, user=false) -%}
{%- for s in segments if s.splits_activity -%}
{%- if s.from_events and s.kind == 'user' -%}{%- set ns.first = true -%}{%- endif -%}
{%- if s.kind == 'user' -%}{%- set ns.user = true -%}{%- endif -%}
{%- endfor -%}
{%- set alone = (ns.carry | length) - (1 if ns.first else 0) == 1 -%}
{{ a.keyed(ns.carry) }}, seg_grouped AS (
  /* The one grouping of the events: per user, period and value of each segment read from the rows{% if ns.first %}, the first timestamp{% endif %} and the last active date. */
  SELECT user_id, period_key{% for _c, name in ns.carry if name != 'sqlgen_seg_ts' %}, {{ name }}{% endfor %},{% if ns.first %} MIN(sqlgen_seg_ts) AS first_ts,{% endif %} MAX(activity_date) AS last_date
  FROM keyed
  GROUP BY user_id, period_key{% for _c, name in ns.carry if name != 'sqlgen_seg_ts' %}, {{ name }}{% endfor %}
)
{%- set user_periods = 'seg_user_periods' if ns.carry else 'seg_grouped' -%}
{%- if ns.user and ns.carry %}, seg_user_periods AS (
  /* One row per user and active period, for the segments whose value is the user's. */
  SELECT user_id, period_key, MAX(last_date) AS last_date
  FROM seg_grouped
  GROUP BY user_id, period_key
)
{%- endif -%}
{%- if ns.first %}, seg_first AS (
  /* Each user's first counted timestamp. */
  SELECT user_id AS first_user, MIN(first_ts) AS user_first_ts
  FROM seg_grouped
  GROUP BY user_id
)
{%- endif -%}
{%- if ns.user %}, seg_user_sequenced AS (
  /* The kind user segments' states are the totals': each user's periods sequenced once, by user. */
  SELECT user_id, period_key, last_date{{ window_columns(windows, 'user_id') }}
  FROM {{ user_periods }}
)
{%- endif -%}
{%- for s in segments if s.splits_activity -%}
{%- set i = segments.index(s) -%}
{%- if s.kind == 'event' %}, seg_rows_{{ i }} AS (
  /* Segment {{ i + 1 }} (kind event): each user's active periods per value of the row{% if not alone %} (one grouping of the rows above: several segments are read from them){% endif %}. */
{%- if alone %}
  SELECT user_id, period_key, sqlgen_seg_{{ i }} AS seg_value, last_date AS seg_last
  FROM seg_grouped
{%- else %}
  SELECT user_id, period_key, sqlgen_seg_{{ i }} AS seg_value, MAX(last_date) AS seg_last
  FROM seg_grouped
  GROUP BY user_id, period_key, sqlgen_seg_{{ i }}
{%- endif %}
), seg_sequenced_{{ i }} AS (
  /* Segment {{ i + 1 }}: each user's periods sequenced within each value. */
  SELECT user_id, period_key, seg_value, seg_last{{ window_columns(windows, 'user_id, seg_value') }}
  FROM seg_rows_{{ i }}
)
{%- elif s.from_events %}, seg_choice_{{ i }} AS (
  /* Segment {{ i + 1 }} (kind user): the value on the user's first counted row, the smallest non-NULL one on a tie. */
  SELECT g.user_id AS choice_user, MIN(g.sqlgen_seg_{{ i }}) AS choice
  FROM seg_grouped AS g
  JOIN seg_first AS f
    ON g.user_id = f.first_user AND g.first_ts = f.user_first_ts
  GROUP BY g.user_id
), seg_sequenced_{{ i }} AS (
  /* Segment {{ i + 1 }}: every active period of the user, sequenced, with the user's value. */
  SELECT u.user_id, u.period_key, c.choice AS seg_value, u.last_date AS seg_last{{ window_copies(windows) }}
  FROM seg_user_sequenced AS u
  JOIN seg_choice_{{ i }} AS c
    ON c.choice_user = u.user_id
)
{%- else %}, seg_table_{{ i }} AS (
  /* Segment {{ i + 1 }} (kind user): one value per user key of the table, the smallest non-NULL one for a key listed twice. */
  SELECT __segment_key_{{ i }}__ AS sqlgen_key, MIN(__segment_{{ i }}__) AS sqlgen_choice, 1 AS sqlgen_found
  FROM __segment_table_{{ i }}__
  WHERE __segment_key_{{ i }}__ IS NOT NULL
  GROUP BY __segment_key_{{ i }}__
), seg_sequenced_{{ i }} AS (
  /* Segment {{ i + 1 }}: every active period of the user, sequenced, with the table's value (NULL for a user missing from it). */
  SELECT u.user_id, u.period_key, CASE WHEN t.sqlgen_found = 1 THEN t.sqlgen_choice END AS seg_value, u.last_date AS seg_last{{ window_copies(windows) }}
  FROM seg_user_sequenced AS u
  LEFT JOIN seg_table_{{ i }} AS t
    ON t.sqlgen_key = u.user_id
)
{%- endif -%}
{%- endfor %}, {{ 'segment_union' if source.first_seen else 'segment_periods' }} AS (
  /* Every segment's rows, the value as text: value_missing 1 for NULL, value_text '' then. */
{%- for s in segments if s.splits_activity %}
  {% if not loop.first %}UNION ALL
  {% endif %}SELECT '__segment_name_{{ segments.index(s) }}__' AS segment_name, CASE WHEN seg_value IS NULL THEN 1 ELSE 0 END AS value_missing, COALESCE(CAST(seg_value AS TEXT), '') AS value_text, user_id, period_key, seg_last AS last_date{{ window_copies(windows) }}
  FROM seg_sequenced_{{ segments.index(s) }}
{%- endfor %}
)
{%- if source.first_seen %}, {{ a.first_seen_ctes() }}, segment_periods AS (
  /* Each segment's rows with the period the user was first seen in (NULL: no valid first-seen date). */
  SELECT q.segment_name, q.value_missing, q.value_text, q.user_id, q.period_key, q.last_date{% for name in windows %}, q.{{ name }}_key{% endfor %}, CASE WHEN s.sqlgen_seen_found = 1 THEN s.sqlgen_seen_key END AS seen_key
  FROM segment_union AS q
  LEFT JOIN first_seen AS s
    ON s.sqlgen_seen_user = q.user_id
)
{%- endif %}
{%- endmacro -%}

{#- The window columns a view asks for, over each user's periods in order, partitioned by
    ``by``: prior_key (the previous active period, NULL for the first), later_key (the next,
    NULL for the last), first_key (the first active period). -#}
{%- macro window_columns(windows, by) -%}
{%- for name in windows %},
    {% if name == 'prior' %}LAG(period_key){% elif name == 'later' %}LEAD(period_key){% else %}MIN(period_key){% endif %} OVER (PARTITION BY {{ by }} ORDER BY period_key) AS {{ name }}_key
{%- endfor -%}
{%- endmacro -%}

{%- macro window_copies(windows) -%}
{%- for name in windows %}, {{ name }}_key{% endfor -%}
{%- endmacro -%}

{%- macro segment_value(missing, text) -%}
CASE WHEN {{ missing }} = 1 THEN NULL ELSE {{ text }} END
{%- endmacro -%}

{%- macro value_calendar() -%}
data_edge AS (
  /* The period of the day after the data: if it is the last period, that period is still in progress. */
  SELECT first_key, last_key, data_through,
    {{ p.period_key("data_through + INTERVAL 1 DAY") }} AS after_data_key
  FROM data_range
), {{ p.digits_cte() }}, calendar AS (
  /* Every period from the first to the last, by the step of the grain, empty periods included: the totals' calendar. */
  SELECT e.first_key + {{ grain.step }} * ({{ p.counting_value(grain.calendar_digits) }}) AS calendar_key
  FROM data_edge AS e
  CROSS JOIN {{ p.counting(grain.calendar_digits) }}
  WHERE e.first_key + {{ grain.step }} * ({{ p.counting_value(grain.calendar_digits) }}) <= e.last_key
), segment_values AS (
  /* Every segment and value seen. */
  SELECT DISTINCT tally_segment AS value_segment, tally_missing AS value_null, tally_text AS value_label
  FROM tallies
)
{%- endmacro -%}
