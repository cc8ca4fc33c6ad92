-- sqlgen 0.1.0: run-time checks for golden.yml (spec 14d0360ab40a36dc), target spark.
-- Read-only. Run it after create_all.sql, e.g. from a scheduled job: each row is an assumption of the spec the data breaks now (alert on any row).
-- Management metrics, not audited figures: a row here means some views leave rows out.
-- no catalog check on spark: Spark has no information_schema; DESCRIBE TABLE lists the types (in ANSI mode a value of another type stops the views with Spark's own error)
/* One row per broken assumption: the section, what broke, and how many rows break it. */
SELECT
  'activity' AS checked_section,
  'null_user' AS broken_assumption,
  null_user_rows AS failing_rows
FROM `growth`.activity_source_summary
WHERE
  null_user_rows > 0
UNION ALL
SELECT
  'activity' AS checked_section,
  'null_timestamp' AS broken_assumption,
  null_timestamp_rows AS failing_rows
FROM `growth`.activity_source_summary
WHERE
  null_timestamp_rows > 0
UNION ALL
SELECT
  'activity' AS checked_section,
  'out_of_range' AS broken_assumption,
  out_of_range_rows AS failing_rows
FROM `growth`.activity_source_summary
WHERE
  out_of_range_rows > 0
UNION ALL
SELECT
  'activity' AS checked_section,
  'unconverted' AS broken_assumption,
  unconverted_rows AS failing_rows
FROM `growth`.activity_source_summary
WHERE
  unconverted_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'null_customer' AS broken_assumption,
  null_customer_rows AS failing_rows
FROM `growth`.revenue_source_summary
WHERE
  null_customer_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'null_date' AS broken_assumption,
  null_date_rows AS failing_rows
FROM `growth`.revenue_source_summary
WHERE
  null_date_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'null_amount' AS broken_assumption,
  null_amount_rows AS failing_rows
FROM `growth`.revenue_source_summary
WHERE
  null_amount_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'out_of_range' AS broken_assumption,
  out_of_range_rows AS failing_rows
FROM `growth`.revenue_source_summary
WHERE
  out_of_range_rows > 0
UNION ALL
SELECT
  'revenue' AS checked_section,
  'invalid' AS broken_assumption,
  invalid_rows AS failing_rows
FROM `growth`.revenue_source_summary
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
  FROM `raw`.`app_events`
  WHERE
    `occurred_at` IS NOT NULL AND TRY_CAST(`occurred_at` AS TIMESTAMP_NTZ) IS NULL
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
  FROM `billing`.`invoice_lines`
  WHERE
    `invoiced_at` IS NOT NULL AND TRY_CAST(`invoiced_at` AS TIMESTAMP_NTZ) IS NULL
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
  FROM `billing`.`invoice_lines`
  WHERE
    `amount` IS NOT NULL AND TRY_CAST(`amount` AS DECIMAL(29, 2)) IS NULL
) AS sqlgen_typed
WHERE
  sqlgen_typed.sqlgen_wrong_rows > 0;
