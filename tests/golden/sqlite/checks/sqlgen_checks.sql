-- sqlgen 0.1.0: run-time checks for golden.yml (spec 7a207e946e070b26), target sqlite.
-- Read-only. Run it after create_all.sql, e.g. from a scheduled job: each row is an assumption of the spec the data breaks now (alert on any row).
-- Management metrics, not audited figures: a row here means some views leave rows out.
-- no catalog check on sqlite: SQLite keeps each value's own type whatever the column's: the wrong_type_ rows count the values instead
/* One row per broken assumption: the section, what broke, and how many rows break it. */
SELECT
  'activity' AS checked_section,
  'null_user' AS broken_assumption,
  null_user_rows AS failing_rows
FROM activity_source_summary
WHERE
  null_user_rows > 0
UNION ALL
SELECT
  'activity' AS checked_section,
  'null_timestamp' AS broken_assumption,
  null_timestamp_rows AS failing_rows
FROM activity_source_summary
WHERE
  null_timestamp_rows > 0
UNION ALL
SELECT
  'activity' AS checked_section,
  'out_of_range' AS broken_assumption,
  out_of_range_rows AS failing_rows
FROM activity_source_summary
WHERE
  out_of_range_rows > 0
UNION ALL
SELECT
  'activity' AS checked_section,
  'unconverted' AS broken_assumption,
  unconverted_rows AS failing_rows
FROM activity_source_summary
WHERE
  unconverted_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'null_customer' AS broken_assumption,
  null_customer_rows AS failing_rows
FROM revenue_source_summary
WHERE
  null_customer_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'null_date' AS broken_assumption,
  null_date_rows AS failing_rows
FROM revenue_source_summary
WHERE
  null_date_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'null_amount' AS broken_assumption,
  null_amount_rows AS failing_rows
FROM revenue_source_summary
WHERE
  null_amount_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'out_of_range' AS broken_assumption,
  out_of_range_rows AS failing_rows
FROM revenue_source_summary
WHERE
  out_of_range_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'invalid' AS broken_assumption,
  invalid_rows AS failing_rows
FROM revenue_source_summary
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
  FROM "app_events"
  WHERE
    "occurred_at" IS NOT NULL AND DATETIME("occurred_at") IS NULL
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
  FROM "invoice_lines"
  WHERE
    "invoiced_at" IS NOT NULL AND DATETIME("invoiced_at") IS NULL
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
  FROM "invoice_lines"
  WHERE
    "amount" IS NOT NULL
    AND CASE WHEN TYPEOF("amount") IN ('integer', 'real') THEN "amount" END IS NULL
) AS sqlgen_typed
WHERE
  sqlgen_typed.sqlgen_wrong_rows > 0;
