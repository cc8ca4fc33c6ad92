{%- import '_activity.sql' as a with context -%}
{#- The per-(user, local date, segment values) table of `output.materialize: incremental`,
    for the segmented views of a spec with segments read from the activity rows: the same
    rows as sqlgen_activity_days, grouped once by user, date and the columns the segments
    read from the rows (segment_carry), with their count and, for a kind user segment, the
    earliest timestamp (its value is the one on the user's first row). With since
    (refresh.sql), only the days from the state table's from_day on, as for the per-day
    table. -#}
{%- set values = segment_carry | rejectattr(1, 'equalto', 'sqlgen_seg_ts') | list -%}
{%- set first = segment_carry | length > values | length -%}
WITH {{ a.source_ctes(carry=segment_carry, since=since) }}
/* One row per user, local date and value of each segment read from the rows, with the number of activity rows. */
SELECT user_id, activity_date{% for _column, name in values %}, {{ name }}{% endfor %}{% if first %}, MIN(sqlgen_seg_ts) AS sqlgen_seg_ts{% endif %}, COUNT(*) AS events
FROM dated
{%- if since %}
WHERE activity_date >= (SELECT from_day FROM {{ ref('sqlgen_refresh_state') }})
{%- endif %}
GROUP BY user_id, activity_date{% for _column, name in values %}, {{ name }}{% endfor %}
