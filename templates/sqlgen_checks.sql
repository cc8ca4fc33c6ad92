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
/* One row per broken assumption: the section, what broke, and how many rows break it. */
{% for section, name, column, summary in activity_checks + revenue_checks -%}
{% if not loop.first %}UNION ALL
{% endif -%}
SELECT '{{ section }}' AS checked_section, '{{ name }}' AS broken_assumption, {{ column }} AS failing_rows
FROM {{ ref(summary) }}
WHERE {{ column }} > 0
{% endfor %}
