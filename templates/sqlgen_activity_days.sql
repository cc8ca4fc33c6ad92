{%- import '_activity.sql' as a with context -%}
{#- The per-(user, local date) table of `output.materialize: incremental`: the activity rows
    that count (the same rows as every view's `dated`), grouped once, with their count.
    Every activity table is computed from it. With since (refresh.sql), only the source rows
    from the state table's from_day on are read, and only those days are produced: the days
    refresh.sql deleted. A timestamp on or after from_day has a local date on or after it
    (no time zone conversion: the local date is the timestamp's date), so those days are
    complete. -#}
WITH {{ a.source_ctes(since=since) }}
/* One row per user and local date with the number of activity rows. */
SELECT user_id, activity_date, COUNT(*) AS events
FROM dated
{%- if since %}
WHERE activity_date >= (SELECT from_day FROM {{ ref('sqlgen_refresh_state') }})
{%- endif %}
GROUP BY user_id, activity_date
