{#- Period arithmetic shared by every view, written once in the source dialect (DuckDB).

Each period is an integer key, so adjacent periods are compared with integer arithmetic and
never with a dialect's date arithmetic:
  day family   key = days since Monday 1970-01-05; a week key is the key of its first day,
               so adjacent weeks differ by 7 whatever day the week starts on.
  month family key = year * 12 + month - 1; a quarter or year key is the key of its first
               month, so adjacent quarters differ by 3 and adjacent years by 12.
-#}

{%- macro period_key(d) -%}
{%- if grain.family == 'day' -%}
{%- if grain.step == 1 -%}
DATE_DIFF('day', DATE '1970-01-05', {{ d }})
{%- else -%}
(DATE_DIFF('day', DATE '1970-01-05', {{ d }}) - (DATE_DIFF('day', DATE '1970-01-05', {{ d }}) + {{ 700000 - grain.week_offset }}) % 7)
{%- endif -%}
{%- else -%}
{%- if grain.step == 1 -%}
(EXTRACT(YEAR FROM {{ d }}) * 12 + EXTRACT(MONTH FROM {{ d }}) - 1)
{%- else -%}
(EXTRACT(YEAR FROM {{ d }}) * 12 + EXTRACT(MONTH FROM {{ d }}) - 1 - (EXTRACT(MONTH FROM {{ d }}) - 1) % {{ grain.step }})
{%- endif -%}
{%- endif -%}
{%- endmacro -%}

{%- macro period_start(k) -%}
{%- if grain.family == 'day' -%}
CAST(DATE '1970-01-05' + INTERVAL ({{ k }}) DAY AS DATE)
{%- else -%}
CAST(DATE '1970-01-01' + INTERVAL ({{ k }} - 23640) MONTH AS DATE)
{%- endif -%}
{%- endmacro -%}

{#- The local calendar date of an activity timestamp (the spec's time zone rule); kind: the
    column's type when it is not the activity timestamp's (the first-seen column). -#}
{%- macro local_date(ts, kind=None) -%}
{%- set kind = kind or source.timestamp_type -%}
{%- if kind == 'date' -%}
CAST({{ ts }} AS DATE)
{%- elif kind == 'timestamptz' -%}
CAST({{ ts }} AT TIME ZONE {{ "'__timezone__'" if source.timezone else "'UTC'" }} AS DATE)
{%- elif source.timezone -%}
CAST(({{ ts }} AT TIME ZONE 'UTC') AT TIME ZONE '__timezone__' AS DATE)
{%- else -%}
CAST({{ ts }} AS DATE)
{%- endif -%}
{%- endmacro -%}

{#- The valid time range of a source (prefix 'activity' or 'revenue'), in two steps so that a
    sentinel value (0001-01-01, 9999-12-31 23:59:59) never reaches a time zone conversion,
    which overflows or fails on some engines:
  near_value(ts)  the raw value when it lies within two days of the range, else NULL: a
                  comparison with no zone rule (a timestamptz is compared in the session
                  zone, less than a day off, inside the margin). Convert this, not the raw value.
  in_range(d)     the exact rule on the local date: valid_from <= d < valid_until.
A row whose near value is NULL or whose local date fails in_range is out of range. -#}
{%- macro near_value(ts, kind, prefix) -%}
{%- set type = 'DATE' if kind == 'date' else 'TIMESTAMP' -%}
CASE WHEN {{ ts }} >= CAST('__{{ prefix }}_near_from__' AS {{ type }}) AND {{ ts }} < CAST('__{{ prefix }}_near_until__' AS {{ type }}) THEN {{ ts }} END
{%- endmacro -%}

{#- The period key of the period holding report_from: earlier periods are not shown. -#}
{%- macro report_key() -%}
{{ period_key("CAST('__report_from__' AS DATE)") }}
{%- endmacro -%}

{%- macro in_range(d, prefix) -%}
{{ d }} >= CAST('__{{ prefix }}_valid_from__' AS DATE) AND {{ d }} < CAST('__{{ prefix }}_valid_until__' AS DATE)
{%- endmacro -%}

{#- Integers 0 .. 10^digits - 1 from a cross join of a digits CTE: portable to every target,
    with no recursion and no series function. The compiler sizes each calendar from the
    valid range (render.grain_of), so it holds every period a view's data can reach. -#}
{%- macro digits_cte() -%}
digits AS (
  /* The digits 0 to 9: cross joins of copies count 0, 1, 2, ... for a calendar. */
  SELECT 0 AS n UNION ALL SELECT 1 UNION ALL SELECT 2 UNION ALL SELECT 3 UNION ALL SELECT 4
  UNION ALL SELECT 5 UNION ALL SELECT 6 UNION ALL SELECT 7 UNION ALL SELECT 8 UNION ALL SELECT 9
)
{%- endmacro -%}

{%- macro counting(digits) -%}
{%- for i in range(digits) %}{% if not loop.first %} CROSS JOIN {% endif %}digits AS digit_{{ i }}{% endfor -%}
{%- endmacro -%}

{%- macro counting_value(digits) -%}
{%- for i in range(digits) %}{% if not loop.first %} + {% endif %}digit_{{ i }}.n{% if i > 0 %} * {{ 10 ** i }}{% endif %}{% endfor -%}
{%- endmacro -%}
