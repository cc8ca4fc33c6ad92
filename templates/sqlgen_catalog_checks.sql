{#- The catalog half of the run-time guard: one row per column whose type the spec declares
    that the warehouse's catalog does not list (a renamed column, a dropped table) or lists
    with another type (a timestamp column reloaded as text, a money column as a float). It
    reads only the catalog, so it answers even when the views can no longer be read.
    columns: (section, key, kind, marker) per declared column. Each marker table is
    replaced by the target's catalog rows of that column (dialects.catalog_rows): the
    catalog's own spelling of the type (sqlgen_found_type) and whether it is of the declared
    kind (sqlgen_accepted, 1 or 0). -#}
/* One row per declared column that the catalog lists with another type, or not at all (found_type NULL: not listed; an aggregate over no row is not NULL everywhere). */
{% for section, key, kind, marker in columns -%}
{% if not loop.first %}UNION ALL
{% endif -%}
SELECT '{{ section }}' AS checked_section, CASE WHEN sqlgen_listed.sqlgen_columns = 0 THEN 'missing_column_{{ key }}' ELSE 'column_type_{{ key }}' END AS broken_assumption, CASE WHEN sqlgen_listed.sqlgen_columns > 0 THEN sqlgen_listed.sqlgen_type END AS found_type
FROM (
  /* {{ section }}.{{ key }}: its catalog rows (none: not listed), declared {{ kind }}. */
  SELECT COUNT(*) AS sqlgen_columns, MIN(sqlgen_accepted) AS sqlgen_ok, MAX(sqlgen_found_type) AS sqlgen_type
  FROM {{ marker }}
) AS sqlgen_listed
WHERE sqlgen_listed.sqlgen_columns = 0 OR sqlgen_listed.sqlgen_ok = 0
{% endfor %}
