-- sqlgen 0.1.0: run-time checks for golden.yml (spec 14d0360ab40a36dc), target redshift.
-- Read-only. Run it after create_all.sql, e.g. from a scheduled job: each row is an assumption of the spec the data breaks now (alert on any row).
-- Management metrics, not audited figures: a row here means some views leave rows out.
-- Two statements. The first reads only the catalog: a column missing or of another type than declared. When it returns a row, the second (the data) may stop with the engine's own error.
/* One row per declared column that the catalog lists with another type, or not at all (found_type NULL: not listed; an aggregate over no row is not NULL everywhere). */
SELECT
  'activity' AS checked_section,
  CASE
    WHEN sqlgen_listed.sqlgen_columns = 0
    THEN 'missing_column_timestamp'
    ELSE 'column_type_timestamp'
  END AS broken_assumption,
  CASE WHEN sqlgen_listed.sqlgen_columns > 0 THEN sqlgen_listed.sqlgen_type END AS found_type
FROM (
  /* activity.timestamp: its catalog rows (none: not listed), declared timestamp. */
  SELECT
    COUNT(*) AS sqlgen_columns,
    MIN(sqlgen_accepted) AS sqlgen_ok,
    MAX(sqlgen_found_type) AS sqlgen_type
  FROM (
    SELECT
      data_type AS sqlgen_found_type,
      CASE WHEN LOWER(data_type) = 'timestamp without time zone' THEN 1 ELSE 0 END AS sqlgen_accepted
    FROM information_schema.columns
    WHERE
      LOWER(table_schema) = 'raw'
      AND LOWER(table_name) = 'app_events'
      AND LOWER(column_name) = 'occurred_at'
  ) AS sqlgen_catalog
) AS sqlgen_listed
WHERE
  sqlgen_listed.sqlgen_columns = 0 OR sqlgen_listed.sqlgen_ok = 0
UNION ALL
SELECT
  'activity.first_seen' AS checked_section,
  CASE
    WHEN sqlgen_listed.sqlgen_columns = 0
    THEN 'missing_column_timestamp'
    ELSE 'column_type_timestamp'
  END AS broken_assumption,
  CASE WHEN sqlgen_listed.sqlgen_columns > 0 THEN sqlgen_listed.sqlgen_type END AS found_type
FROM (
  /* activity.first_seen.timestamp: its catalog rows (none: not listed), declared date. */
  SELECT
    COUNT(*) AS sqlgen_columns,
    MIN(sqlgen_accepted) AS sqlgen_ok,
    MAX(sqlgen_found_type) AS sqlgen_type
  FROM (
    SELECT
      data_type AS sqlgen_found_type,
      CASE WHEN LOWER(data_type) = 'date' THEN 1 ELSE 0 END AS sqlgen_accepted
    FROM information_schema.columns
    WHERE
      LOWER(table_schema) = 'raw'
      AND LOWER(table_name) = 'users'
      AND LOWER(column_name) = 'signed_up_at'
  ) AS sqlgen_catalog
) AS sqlgen_listed
WHERE
  sqlgen_listed.sqlgen_columns = 0 OR sqlgen_listed.sqlgen_ok = 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  CASE
    WHEN sqlgen_listed.sqlgen_columns = 0
    THEN 'missing_column_timestamp'
    ELSE 'column_type_timestamp'
  END AS broken_assumption,
  CASE WHEN sqlgen_listed.sqlgen_columns > 0 THEN sqlgen_listed.sqlgen_type END AS found_type
FROM (
  /* revenue.timestamp: its catalog rows (none: not listed), declared timestamp. */
  SELECT
    COUNT(*) AS sqlgen_columns,
    MIN(sqlgen_accepted) AS sqlgen_ok,
    MAX(sqlgen_found_type) AS sqlgen_type
  FROM (
    SELECT
      data_type AS sqlgen_found_type,
      CASE WHEN LOWER(data_type) = 'timestamp without time zone' THEN 1 ELSE 0 END AS sqlgen_accepted
    FROM information_schema.columns
    WHERE
      LOWER(table_schema) = 'billing'
      AND LOWER(table_name) = 'invoice_lines'
      AND LOWER(column_name) = 'invoiced_at'
  ) AS sqlgen_catalog
) AS sqlgen_listed
WHERE
  sqlgen_listed.sqlgen_columns = 0 OR sqlgen_listed.sqlgen_ok = 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  CASE
    WHEN sqlgen_listed.sqlgen_columns = 0
    THEN 'missing_column_amount'
    ELSE 'column_type_amount'
  END AS broken_assumption,
  CASE WHEN sqlgen_listed.sqlgen_columns > 0 THEN sqlgen_listed.sqlgen_type END AS found_type
FROM (
  /* revenue.amount: its catalog rows (none: not listed), declared decimal. */
  SELECT
    COUNT(*) AS sqlgen_columns,
    MIN(sqlgen_accepted) AS sqlgen_ok,
    MAX(sqlgen_found_type) AS sqlgen_type
  FROM (
    SELECT
      data_type AS sqlgen_found_type,
      CASE WHEN LOWER(data_type) = 'numeric' AND numeric_scale = 2 THEN 1 ELSE 0 END AS sqlgen_accepted
    FROM information_schema.columns
    WHERE
      LOWER(table_schema) = 'billing'
      AND LOWER(table_name) = 'invoice_lines'
      AND LOWER(column_name) = 'amount'
  ) AS sqlgen_catalog
) AS sqlgen_listed
WHERE
  sqlgen_listed.sqlgen_columns = 0 OR sqlgen_listed.sqlgen_ok = 0;

/* One row per broken assumption: the section, what broke, and how many rows break it. */
SELECT
  'activity' AS checked_section,
  'null_user' AS broken_assumption,
  null_user_rows AS failing_rows
FROM "growth".activity_source_summary
WHERE
  null_user_rows > 0
UNION ALL
SELECT
  'activity' AS checked_section,
  'null_timestamp' AS broken_assumption,
  null_timestamp_rows AS failing_rows
FROM "growth".activity_source_summary
WHERE
  null_timestamp_rows > 0
UNION ALL
SELECT
  'activity' AS checked_section,
  'out_of_range' AS broken_assumption,
  out_of_range_rows AS failing_rows
FROM "growth".activity_source_summary
WHERE
  out_of_range_rows > 0
UNION ALL
SELECT
  'activity' AS checked_section,
  'unconverted' AS broken_assumption,
  unconverted_rows AS failing_rows
FROM "growth".activity_source_summary
WHERE
  unconverted_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'null_customer' AS broken_assumption,
  null_customer_rows AS failing_rows
FROM "growth".revenue_source_summary
WHERE
  null_customer_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'null_date' AS broken_assumption,
  null_date_rows AS failing_rows
FROM "growth".revenue_source_summary
WHERE
  null_date_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'null_amount' AS broken_assumption,
  null_amount_rows AS failing_rows
FROM "growth".revenue_source_summary
WHERE
  null_amount_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'out_of_range' AS broken_assumption,
  out_of_range_rows AS failing_rows
FROM "growth".revenue_source_summary
WHERE
  out_of_range_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'invalid' AS broken_assumption,
  invalid_rows AS failing_rows
FROM "growth".revenue_source_summary
WHERE
  invalid_rows > 0
UNION ALL
SELECT
  'activity' AS checked_section,
  'wrong_type_timestamp' AS broken_assumption,
  sqlgen_typed.sqlgen_wrong_rows AS failing_rows
FROM (
  /* activity.timestamp: values that do not read as TIMESTAMP. */
  SELECT
    COUNT(*) AS sqlgen_wrong_rows
  FROM "raw"."app_events"
  WHERE
    "occurred_at" IS NOT NULL AND TRY_CAST("occurred_at" AS TIMESTAMP) IS NULL
) AS sqlgen_typed
WHERE
  sqlgen_typed.sqlgen_wrong_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'wrong_type_timestamp' AS broken_assumption,
  sqlgen_typed.sqlgen_wrong_rows AS failing_rows
FROM (
  /* revenue.timestamp: values that do not read as TIMESTAMP. */
  SELECT
    COUNT(*) AS sqlgen_wrong_rows
  FROM "billing"."invoice_lines"
  WHERE
    "invoiced_at" IS NOT NULL AND TRY_CAST("invoiced_at" AS TIMESTAMP) IS NULL
) AS sqlgen_typed
WHERE
  sqlgen_typed.sqlgen_wrong_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'wrong_type_amount' AS broken_assumption,
  sqlgen_typed.sqlgen_wrong_rows AS failing_rows
FROM (
  /* revenue.amount: values that do not read as DECIMAL(29, 2). */
  SELECT
    COUNT(*) AS sqlgen_wrong_rows
  FROM "billing"."invoice_lines"
  WHERE
    "amount" IS NOT NULL AND TRY_CAST("amount" AS DECIMAL(29, 2)) IS NULL
) AS sqlgen_typed
WHERE
  sqlgen_typed.sqlgen_wrong_rows > 0;
