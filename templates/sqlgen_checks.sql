{#- The run-time guard: one row per assumption of the spec that the data breaks now, none
    when all hold. It reads the source summary views (which count every row in exactly one
    category), so it writes nothing and needs only read access to them. -#}
{%- set activity_checks = [
      ('activity', 'null_user', 'null_user_rows', 'activity_source_summary'),
      ('activity', 'null_timestamp', 'null_timestamp_rows', 'activity_source_summary'),
      ('activity', 'out_of_range', 'out_of_range_rows', 'activity_source_summary'),
      ('activity', 'unconverted', 'unconverted_rows', 'activity_source_summary'),
    ] if source else [] -%}
{#- Each activity definition's own summary (definitions.<name>). -#}
{%- for name in definitions -%}
{%- for check in [('null_user', 'null_user_rows'), ('null_timestamp', 'null_timestamp_rows'),
                  ('out_of_range', 'out_of_range_rows'), ('unconverted', 'unconverted_rows')] -%}
{%- set _ = activity_checks.append(('definitions.' ~ name, check[0], check[1], name ~ '_activity_source_summary')) -%}
{%- endfor -%}
{%- endfor -%}
{%- set revenue_checks = [
      ('revenue', 'null_customer', 'null_customer_rows', 'revenue_source_summary'),
      ('revenue', 'null_date', 'null_date_rows', 'revenue_source_summary'),
      ('revenue', 'null_amount', 'null_amount_rows', 'revenue_source_summary'),
      ('revenue', 'out_of_range', 'out_of_range_rows', 'revenue_source_summary'),
      ('revenue', 'invalid', 'invalid_rows', 'revenue_source_summary'),
    ] if revenue else [] -%}
{#- Each column whose type the spec declares, read straight from its table: the values
    that are not NULL and do not read as that type (TRY_CAST gives NULL), such as text in a
    timestamp or amount column on an engine that stores any value in any column (SQLite)
    or reads text as a date or a number (MySQL, Spark). The views leave such rows out or,
    for an amount read as 0, count them wrong. -#}
{%- set kinds = {'timestamp': 'TIMESTAMP', 'timestamptz': 'TIMESTAMPTZ', 'date': 'DATE'} -%}
{%- set type_checks = [] -%}
{%- if source -%}
{%- set _ = type_checks.append(('activity', 'timestamp', '__timestamp__', kinds[source.timestamp_type], '__activity_table__')) -%}
{%- endif -%}
{%- if revenue -%}
{%- for key, marker in [('timestamp', '__revenue_timestamp__'), ('start', '__revenue_start__'), ('end', '__revenue_end__')] if revenue[key] -%}
{%- set _ = type_checks.append(('revenue', key, marker, kinds[revenue.timestamp_type], '__revenue_table__')) -%}
{%- endfor -%}
{#- 29 digits: wide enough for any amount, and a NUMERIC BigQuery takes (at most 29 digits before the point). -#}
{%- set _ = type_checks.append(('revenue', 'amount', '__amount__', 'DECIMAL(29, ' ~ revenue.scale ~ ')', '__revenue_table__')) -%}
{%- endif -%}
/* One row per broken assumption: the section, what broke, and how many rows break it. */
{% for section, name, column, summary in activity_checks + revenue_checks -%}
{% if not loop.first %}UNION ALL
{% endif -%}
SELECT '{{ section }}' AS checked_section, '{{ name }}' AS broken_assumption, {{ column }} AS failing_rows
FROM {{ ref(summary) }}
WHERE {{ column }} > 0
{% endfor -%}
{% for section, key, marker, type, table in type_checks -%}
{% if activity_checks or revenue_checks or not loop.first %}UNION ALL
{% endif -%}
SELECT '{{ section }}' AS checked_section, 'wrong_type_{{ key }}' AS broken_assumption, sqlgen_typed.sqlgen_wrong_rows AS failing_rows
FROM (
  /* {{ section }}.{{ key }}: values that do not read as {{ type }}. */
  SELECT COUNT(*) AS sqlgen_wrong_rows
  FROM {{ table }}
  WHERE {{ marker }} IS NOT NULL AND TRY_CAST({{ marker }} AS {{ type }}) IS NULL
) AS sqlgen_typed
WHERE sqlgen_typed.sqlgen_wrong_rows > 0
{% endfor %}
