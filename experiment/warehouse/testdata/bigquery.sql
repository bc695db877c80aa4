-- Golden file: the query of goldenDefinition (build_test.go) in BigQuery's (GoogleSQL) dialect.
-- Not run here (no BigQuery in CI); reviewed by hand against:
--   https://cloud.google.com/bigquery/docs/reference/standard-sql/lexical
--       (looked up: `` quoted identifiers with the escapes of string literals; '' strings with
--        \ escapes, no raw newline)
--   https://cloud.google.com/bigquery/docs/reference/standard-sql/timestamp_functions#timestamp_add
--       (TIMESTAMP_ADD(ts, INTERVAL n SECOND|MICROSECOND); from memory)
--   https://cloud.google.com/bigquery/docs/reference/standard-sql/data-types (TIMESTAMP '...+00', INT64; from memory)
-- armtally: counts and diagnostics of 2 experiment(s), bigquery dialect
WITH
w_base AS (
  SELECT CAST(`user_id` AS STRING) AS w_user,
    `ts` AS w_ts,
    CAST(`event` AS STRING) AS w_event,
    COALESCE(CAST(`experiment` AS STRING), '') AS w_key,
    CAST(`arm` AS STRING) AS w_arm,
    CAST(`platform` AS STRING) AS w_s1
  FROM `analytics`.`events` t
),
w_class AS (
  SELECT b.w_user AS w_user,
    b.w_ts AS w_ts,
    b.w_event AS w_event,
    b.w_key AS w_key,
    b.w_arm AS w_arm,
    b.w_s1 AS w_s1,
    CASE WHEN ((b.w_user IS NULL) OR (b.w_user = '')) THEN 1 WHEN (b.w_ts IS NULL) THEN 2 WHEN ((b.w_event IS NULL) OR (b.w_event = '')) THEN 3 WHEN ((b.w_event = 'exposure') AND ((b.w_arm IS NULL) OR (b.w_arm = ''))) THEN 4 WHEN ((b.w_event = 'exposure') AND (CASE WHEN (b.w_key = 'checkout-2026') THEN CASE WHEN (NOT (b.w_arm IN ('control', 'one-page'))) THEN 1 ELSE 0 END ELSE 0 END = 1)) THEN 5 ELSE 0 END AS w_bad
  FROM w_base b
),
w_input AS (
  SELECT COUNT(*) AS w_rows,
    SUM(CASE WHEN (c.w_bad = 0) THEN 1 ELSE 0 END) AS w_valid,
    SUM(CASE WHEN ((c.w_bad = 0) AND (c.w_event = 'exposure')) THEN 1 ELSE 0 END) AS w_expo,
    MAX(CASE WHEN (c.w_bad = 0) THEN c.w_ts END) AS w_fresh,
    SUM(CASE WHEN (c.w_bad = 1) THEN 1 ELSE 0 END) AS w_bad1,
    SUM(CASE WHEN (c.w_bad = 2) THEN 1 ELSE 0 END) AS w_bad2,
    SUM(CASE WHEN (c.w_bad = 3) THEN 1 ELSE 0 END) AS w_bad3,
    SUM(CASE WHEN (c.w_bad = 4) THEN 1 ELSE 0 END) AS w_bad4,
    SUM(CASE WHEN (c.w_bad = 5) THEN 1 ELSE 0 END) AS w_bad5
  FROM w_class c
),
w_rel AS (
  SELECT c.w_user AS w_user,
    c.w_ts AS w_ts,
    c.w_event AS w_event,
    c.w_key AS w_key,
    c.w_arm AS w_arm,
    c.w_s1 AS w_s1
  FROM w_class c
  WHERE ((c.w_bad = 0) AND (c.w_event IN ('exposure', 'purchase', 'signup', 'share')))
),
w_x_1 AS (
  SELECT r.w_user AS w_user,
    r.w_ts AS w_ts,
    r.w_arm AS w_arm,
    r.w_s1 AS w_s1
  FROM w_rel r
  WHERE (((r.w_event = 'exposure') AND (r.w_key = 'checkout-2026')) AND ((r.w_ts >= TIMESTAMP '2026-11-02 00:00:00.000000+00') AND (r.w_ts < TIMESTAMP '2026-11-23 00:00:00.000000+00')))
),
w_t_1 AS (
  SELECT x.w_user AS w_user,
    x.w_ts AS w_ts,
    x.w_arm AS w_arm,
    MIN(x.w_ts) OVER (PARTITION BY x.w_user) AS w_t0,
    x.w_s1 AS w_s1
  FROM w_x_1 x
),
w_f_1 AS (
  SELECT t.w_user AS w_user,
    MIN(t.w_t0) AS w_t0,
    MIN(CASE WHEN (t.w_ts = t.w_t0) THEN t.w_arm END) AS w_arm,
    CASE WHEN (COUNT(DISTINCT t.w_arm) > 1) THEN 1 ELSE 0 END AS w_multi,
    CASE WHEN (COUNT(DISTINCT CASE WHEN (t.w_ts = t.w_t0) THEN t.w_arm END) > 1) THEN 1 ELSE 0 END AS w_tied,
    MIN(CASE WHEN (t.w_ts = t.w_t0) THEN t.w_s1 END) AS w_s1
  FROM w_t_1 t
  GROUP BY t.w_user
),
w_e_1 AS (
  SELECT r.w_user AS w_user,
    COUNT(*) AS w_n,
    SUM(CASE WHEN (r.w_ts >= TIMESTAMP '2026-11-23 00:00:00.000000+00') THEN 1 ELSE 0 END) AS w_late,
    SUM(CASE WHEN ((r.w_ts < TIMESTAMP '2026-11-23 00:00:00.000000+00') AND (f.w_user IS NULL)) THEN 1 ELSE 0 END) AS w_never,
    SUM(CASE WHEN (((r.w_ts < TIMESTAMP '2026-11-23 00:00:00.000000+00') AND (NOT (f.w_user IS NULL))) AND (NOT (f.w_multi = 0))) THEN 1 ELSE 0 END) AS w_excl,
    SUM(CASE WHEN (((r.w_ts < TIMESTAMP '2026-11-23 00:00:00.000000+00') AND (f.w_multi = 0)) AND (r.w_ts < f.w_t0)) THEN 1 ELSE 0 END) AS w_before,
    SUM(CASE WHEN (((r.w_ts < TIMESTAMP '2026-11-23 00:00:00.000000+00') AND (f.w_multi = 0)) AND (r.w_ts >= f.w_t0)) THEN 1 ELSE 0 END) AS w_in,
    SUM(CASE WHEN (((((r.w_ts < TIMESTAMP '2026-11-23 00:00:00.000000+00') AND (f.w_multi = 0)) AND (r.w_ts >= f.w_t0)) AND (r.w_event = 'purchase')) AND (r.w_ts >= TIMESTAMP_ADD(f.w_t0, INTERVAL 604800 SECOND))) THEN 1 ELSE 0 END) AS w_o1,
    MAX(CASE WHEN (((((r.w_ts < TIMESTAMP '2026-11-23 00:00:00.000000+00') AND (f.w_multi = 0)) AND (r.w_ts >= f.w_t0)) AND (r.w_event = 'purchase')) AND (r.w_ts < TIMESTAMP_ADD(f.w_t0, INTERVAL 604800 SECOND))) THEN 1 ELSE 0 END) AS w_c1,
    SUM(CASE WHEN (((((r.w_ts < TIMESTAMP '2026-11-23 00:00:00.000000+00') AND (f.w_multi = 0)) AND (r.w_ts >= f.w_t0)) AND (r.w_event IN ('signup', 'share'))) AND (r.w_ts >= TIMESTAMP_ADD(f.w_t0, INTERVAL 1500000 MICROSECOND))) THEN 1 ELSE 0 END) AS w_o2,
    MAX(CASE WHEN (((((r.w_ts < TIMESTAMP '2026-11-23 00:00:00.000000+00') AND (f.w_multi = 0)) AND (r.w_ts >= f.w_t0)) AND (r.w_event IN ('signup', 'share'))) AND (r.w_ts < TIMESTAMP_ADD(f.w_t0, INTERVAL 1500000 MICROSECOND))) THEN 1 ELSE 0 END) AS w_c2
  FROM w_rel r
  LEFT JOIN w_f_1 f ON (r.w_user = f.w_user)
  WHERE (r.w_event IN ('purchase', 'signup', 'share'))
  GROUP BY r.w_user
),
w_a_1 AS (
  SELECT f.w_arm AS w_arm,
    CASE WHEN (f.w_multi = 0) THEN 1 ELSE 0 END AS w_ok,
    f.w_multi AS w_multi,
    f.w_tied AS w_tied,
    f.w_s1 AS w_s1,
    COALESCE(e.w_c1, 0) AS w_c1,
    CASE WHEN ((f.w_multi = 0) AND (TIMESTAMP_ADD(f.w_t0, INTERVAL 604800 SECOND) > TIMESTAMP '2026-11-23 00:00:00.000000+00')) THEN 1 ELSE 0 END AS w_i1,
    COALESCE(e.w_c2, 0) AS w_c2,
    CASE WHEN ((f.w_multi = 0) AND (TIMESTAMP_ADD(f.w_t0, INTERVAL 1500000 MICROSECOND) > TIMESTAMP '2026-11-23 00:00:00.000000+00')) THEN 1 ELSE 0 END AS w_i2
  FROM w_f_1 f
  LEFT JOIN w_e_1 e ON (f.w_user = e.w_user)
),
w_g_1 AS (
  SELECT x.w_arm AS w_arm,
    MIN(x.w_ts) AS w_first
  FROM w_x_1 x
  GROUP BY x.w_arm
),
w_n_1 AS (
  SELECT a.w_arm AS w_arm,
    COUNT(*) AS w_exposed,
    SUM(a.w_ok) AS w_units
  FROM w_a_1 a
  GROUP BY a.w_arm
),
w_xc_1 AS (
  SELECT SUM(CASE WHEN (r.w_key = 'checkout-2026') THEN 1 ELSE 0 END) AS w_rows,
    SUM(CASE WHEN ((r.w_key = 'checkout-2026') AND (NOT ((r.w_ts >= TIMESTAMP '2026-11-02 00:00:00.000000+00') AND (r.w_ts < TIMESTAMP '2026-11-23 00:00:00.000000+00')))) THEN 1 ELSE 0 END) AS w_outside,
    SUM(CASE WHEN (NOT (r.w_key = 'checkout-2026')) THEN 1 ELSE 0 END) AS w_other
  FROM w_rel r
  WHERE (r.w_event = 'exposure')
),
w_ec_1 AS (
  SELECT SUM(e.w_n) AS w_n,
    SUM(e.w_late) AS w_late,
    SUM(e.w_never) AS w_never,
    SUM(e.w_excl) AS w_excl,
    SUM(e.w_before) AS w_before,
    SUM(e.w_in) AS w_in,
    SUM(e.w_o1) AS w_o1,
    SUM(e.w_o2) AS w_o2
  FROM w_e_1 e
),
w_uc_1 AS (
  SELECT COUNT(*) AS w_units,
    SUM(a.w_multi) AS w_multi,
    0 AS w_tied
  FROM w_a_1 a
),
w_x_2 AS (
  SELECT r.w_user AS w_user,
    r.w_ts AS w_ts,
    r.w_arm AS w_arm
  FROM w_rel r
  WHERE ((r.w_event = 'exposure') AND (r.w_key = 'search-ranking'))
),
w_t_2 AS (
  SELECT x.w_user AS w_user,
    x.w_ts AS w_ts,
    x.w_arm AS w_arm,
    MIN(x.w_ts) OVER (PARTITION BY x.w_user) AS w_t0
  FROM w_x_2 x
),
w_f_2 AS (
  SELECT t.w_user AS w_user,
    MIN(t.w_t0) AS w_t0,
    MIN(CASE WHEN (t.w_ts = t.w_t0) THEN t.w_arm END) AS w_arm,
    CASE WHEN (COUNT(DISTINCT t.w_arm) > 1) THEN 1 ELSE 0 END AS w_multi,
    CASE WHEN (COUNT(DISTINCT CASE WHEN (t.w_ts = t.w_t0) THEN t.w_arm END) > 1) THEN 1 ELSE 0 END AS w_tied
  FROM w_t_2 t
  GROUP BY t.w_user
),
w_e_2 AS (
  SELECT r.w_user AS w_user,
    COUNT(*) AS w_n,
    0 AS w_late,
    SUM(CASE WHEN (f.w_user IS NULL) THEN 1 ELSE 0 END) AS w_never,
    SUM(CASE WHEN ((NOT (f.w_user IS NULL)) AND (NOT (f.w_tied = 0))) THEN 1 ELSE 0 END) AS w_excl,
    SUM(CASE WHEN ((f.w_tied = 0) AND (r.w_ts < f.w_t0)) THEN 1 ELSE 0 END) AS w_before,
    SUM(CASE WHEN ((f.w_tied = 0) AND (r.w_ts >= f.w_t0)) THEN 1 ELSE 0 END) AS w_in,
    SUM(CASE WHEN ((((f.w_tied = 0) AND (r.w_ts >= f.w_t0)) AND (r.w_event = 'signup')) AND (r.w_ts >= TIMESTAMP_ADD(f.w_t0, INTERVAL 259200 SECOND))) THEN 1 ELSE 0 END) AS w_o1,
    MAX(CASE WHEN ((((f.w_tied = 0) AND (r.w_ts >= f.w_t0)) AND (r.w_event = 'signup')) AND (r.w_ts < TIMESTAMP_ADD(f.w_t0, INTERVAL 259200 SECOND))) THEN 1 ELSE 0 END) AS w_c1
  FROM w_rel r
  LEFT JOIN w_f_2 f ON (r.w_user = f.w_user)
  WHERE (r.w_event = 'signup')
  GROUP BY r.w_user
),
w_a_2 AS (
  SELECT f.w_arm AS w_arm,
    CASE WHEN (f.w_tied = 0) THEN 1 ELSE 0 END AS w_ok,
    f.w_multi AS w_multi,
    f.w_tied AS w_tied,
    COALESCE(e.w_c1, 0) AS w_c1,
    CASE WHEN ((f.w_tied = 0) AND (TIMESTAMP_ADD(f.w_t0, INTERVAL 259200 SECOND) > i.w_fresh)) THEN 1 ELSE 0 END AS w_i1
  FROM w_f_2 f
  LEFT JOIN w_e_2 e ON (f.w_user = e.w_user)
  CROSS JOIN w_input i
),
w_g_2 AS (
  SELECT x.w_arm AS w_arm,
    MIN(x.w_ts) AS w_first
  FROM w_x_2 x
  GROUP BY x.w_arm
),
w_n_2 AS (
  SELECT a.w_arm AS w_arm,
    COUNT(*) AS w_exposed,
    SUM(a.w_ok) AS w_units
  FROM w_a_2 a
  GROUP BY a.w_arm
),
w_xc_2 AS (
  SELECT SUM(CASE WHEN (r.w_key = 'search-ranking') THEN 1 ELSE 0 END) AS w_rows,
    SUM(CASE WHEN ((r.w_key = 'search-ranking') AND (1 = 0)) THEN 1 ELSE 0 END) AS w_outside,
    SUM(CASE WHEN (NOT (r.w_key = 'search-ranking')) THEN 1 ELSE 0 END) AS w_other
  FROM w_rel r
  WHERE (r.w_event = 'exposure')
),
w_ec_2 AS (
  SELECT SUM(e.w_n) AS w_n,
    SUM(e.w_late) AS w_late,
    SUM(e.w_never) AS w_never,
    SUM(e.w_excl) AS w_excl,
    SUM(e.w_before) AS w_before,
    SUM(e.w_in) AS w_in,
    SUM(e.w_o1) AS w_o1
  FROM w_e_2 e
),
w_uc_2 AS (
  SELECT COUNT(*) AS w_units,
    SUM(a.w_multi) AS w_multi,
    SUM(a.w_tied) AS w_tied
  FROM w_a_2 a
)
SELECT CAST(NULL AS STRING) AS `experiment`,
  'input' AS `kind`,
  'freshness' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(NULL AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  i.w_fresh AS `at_time`
FROM w_input i
UNION ALL
SELECT CAST(NULL AS STRING) AS `experiment`,
  'input' AS `kind`,
  'rows_read' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(i.w_rows AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_input i
UNION ALL
SELECT CAST(NULL AS STRING) AS `experiment`,
  'input' AS `kind`,
  'valid_rows' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(i.w_valid AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_input i
UNION ALL
SELECT CAST(NULL AS STRING) AS `experiment`,
  'input' AS `kind`,
  'exposure_event_rows' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(i.w_expo AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_input i
UNION ALL
SELECT CAST(NULL AS STRING) AS `experiment`,
  'input' AS `kind`,
  'null_user' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(i.w_bad1 AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_input i
UNION ALL
SELECT CAST(NULL AS STRING) AS `experiment`,
  'input' AS `kind`,
  'null_timestamp' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(i.w_bad2 AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_input i
UNION ALL
SELECT CAST(NULL AS STRING) AS `experiment`,
  'input' AS `kind`,
  'null_event' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(i.w_bad3 AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_input i
UNION ALL
SELECT CAST(NULL AS STRING) AS `experiment`,
  'input' AS `kind`,
  'exposure_without_arm' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(i.w_bad4 AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_input i
UNION ALL
SELECT CAST(NULL AS STRING) AS `experiment`,
  'input' AS `kind`,
  'unknown_arm' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(i.w_bad5 AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_input i
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'count' AS `kind`,
  CAST(NULL AS STRING) AS `name`,
  a.w_arm AS `arm`,
  a.w_s1 AS `platform`,
  'purchase' AS `metric`,
  CAST(SUM(CASE WHEN (a.w_i1 = 0) THEN 1 ELSE 0 END) AS INT64) AS `units`,
  CAST(SUM(CASE WHEN ((a.w_c1 = 1) AND (a.w_i1 = 0)) THEN 1 ELSE 0 END) AS INT64) AS `conversions`,
  CAST(SUM(a.w_i1) AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_a_1 a
WHERE (a.w_ok = 1)
GROUP BY a.w_arm, a.w_s1
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'count' AS `kind`,
  CAST(NULL AS STRING) AS `name`,
  a.w_arm AS `arm`,
  a.w_s1 AS `platform`,
  'engaged' AS `metric`,
  CAST(SUM(CASE WHEN (a.w_i2 = 0) THEN 1 ELSE 0 END) AS INT64) AS `units`,
  CAST(SUM(CASE WHEN ((a.w_c2 = 1) AND (a.w_i2 = 0)) THEN 1 ELSE 0 END) AS INT64) AS `conversions`,
  CAST(SUM(a.w_i2) AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_a_1 a
WHERE (a.w_ok = 1)
GROUP BY a.w_arm, a.w_s1
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'arm' AS `kind`,
  CAST(NULL AS STRING) AS `name`,
  g.w_arm AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(n.w_exposed, 0) AS INT64) AS `units`,
  CAST(COALESCE(n.w_units, 0) AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  g.w_first AS `at_time`
FROM w_g_1 g
LEFT JOIN w_n_1 n ON (g.w_arm = n.w_arm)
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'counter' AS `kind`,
  'exposure_rows' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_rows, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_xc_1 c
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'counter' AS `kind`,
  'exposures_outside_window' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_outside, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_xc_1 c
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'counter' AS `kind`,
  'other_experiment' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_other, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_xc_1 c
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'counter' AS `kind`,
  'metric_events' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_n, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_ec_1 c
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'counter' AS `kind`,
  'after_window_end' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_late, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_ec_1 c
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'counter' AS `kind`,
  'unit_never_exposed' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_never, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_ec_1 c
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'counter' AS `kind`,
  'unit_excluded' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_excl, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_ec_1 c
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'counter' AS `kind`,
  'before_exposure' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_before, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_ec_1 c
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'counter' AS `kind`,
  'metric_events_in_unit' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_in, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_ec_1 c
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'counter' AS `kind`,
  'outside_attribution_window' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  'purchase' AS `metric`,
  CAST(COALESCE(c.w_o1, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_ec_1 c
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'counter' AS `kind`,
  'outside_attribution_window' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  'engaged' AS `metric`,
  CAST(COALESCE(c.w_o2, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_ec_1 c
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'counter' AS `kind`,
  'units_exposed' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_units, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_uc_1 c
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'counter' AS `kind`,
  'multi_arm_units' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_multi, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_uc_1 c
UNION ALL
SELECT 'checkout-2026' AS `experiment`,
  'counter' AS `kind`,
  'tied_units' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_tied, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_uc_1 c
UNION ALL
SELECT 'search-ranking' AS `experiment`,
  'count' AS `kind`,
  CAST(NULL AS STRING) AS `name`,
  a.w_arm AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  'signup' AS `metric`,
  CAST(COUNT(*) AS INT64) AS `units`,
  CAST(SUM(CASE WHEN (a.w_c1 = 1) THEN 1 ELSE 0 END) AS INT64) AS `conversions`,
  CAST(SUM(a.w_i1) AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_a_2 a
WHERE (a.w_ok = 1)
GROUP BY a.w_arm
UNION ALL
SELECT 'search-ranking' AS `experiment`,
  'arm' AS `kind`,
  CAST(NULL AS STRING) AS `name`,
  g.w_arm AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(n.w_exposed, 0) AS INT64) AS `units`,
  CAST(COALESCE(n.w_units, 0) AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  g.w_first AS `at_time`
FROM w_g_2 g
LEFT JOIN w_n_2 n ON (g.w_arm = n.w_arm)
UNION ALL
SELECT 'search-ranking' AS `experiment`,
  'counter' AS `kind`,
  'exposure_rows' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_rows, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_xc_2 c
UNION ALL
SELECT 'search-ranking' AS `experiment`,
  'counter' AS `kind`,
  'exposures_outside_window' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_outside, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_xc_2 c
UNION ALL
SELECT 'search-ranking' AS `experiment`,
  'counter' AS `kind`,
  'other_experiment' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_other, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_xc_2 c
UNION ALL
SELECT 'search-ranking' AS `experiment`,
  'counter' AS `kind`,
  'metric_events' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_n, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_ec_2 c
UNION ALL
SELECT 'search-ranking' AS `experiment`,
  'counter' AS `kind`,
  'after_window_end' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_late, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_ec_2 c
UNION ALL
SELECT 'search-ranking' AS `experiment`,
  'counter' AS `kind`,
  'unit_never_exposed' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_never, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_ec_2 c
UNION ALL
SELECT 'search-ranking' AS `experiment`,
  'counter' AS `kind`,
  'unit_excluded' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_excl, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_ec_2 c
UNION ALL
SELECT 'search-ranking' AS `experiment`,
  'counter' AS `kind`,
  'before_exposure' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_before, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_ec_2 c
UNION ALL
SELECT 'search-ranking' AS `experiment`,
  'counter' AS `kind`,
  'metric_events_in_unit' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_in, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_ec_2 c
UNION ALL
SELECT 'search-ranking' AS `experiment`,
  'counter' AS `kind`,
  'outside_attribution_window' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  'signup' AS `metric`,
  CAST(COALESCE(c.w_o1, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_ec_2 c
UNION ALL
SELECT 'search-ranking' AS `experiment`,
  'counter' AS `kind`,
  'units_exposed' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_units, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_uc_2 c
UNION ALL
SELECT 'search-ranking' AS `experiment`,
  'counter' AS `kind`,
  'multi_arm_units' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_multi, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_uc_2 c
UNION ALL
SELECT 'search-ranking' AS `experiment`,
  'counter' AS `kind`,
  'tied_units' AS `name`,
  CAST(NULL AS STRING) AS `arm`,
  CAST(NULL AS STRING) AS `platform`,
  CAST(NULL AS STRING) AS `metric`,
  CAST(COALESCE(c.w_tied, 0) AS INT64) AS `units`,
  CAST(NULL AS INT64) AS `conversions`,
  CAST(NULL AS INT64) AS `immature`,
  NULL AS `at_time`
FROM w_uc_2 c;
