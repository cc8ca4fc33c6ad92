{#- The per-user table of `output.materialize: incremental`: each user's first active date,
    from the per-(user, day) table. refresh.sql keeps it exact without reading the history
    (sqlgen_refresh_steps.sql, step 'first'); the tables' refresh queries read it to tell a
    user's first period from a return after a gap older than the days they read. -#}
/* One row per user with the first active date. */
SELECT user_id, MIN(activity_date) AS first_date
FROM {{ ref('sqlgen_activity_days') }}
GROUP BY user_id
