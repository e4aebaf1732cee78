-- Recipe: retrain a model, compare its versions, drop an old one.
--
-- Run it on a database that holds the demo tables:
--   copse demo --db demo.duckdb
--   copse sql --db demo.duckdb sql/recipe_versions.sql

--: Recipe: model versions
--: ======================
--: 1. Train a shallow forest, then train the same name again with full-depth trees:
--:    the second training adds version 2, it does not replace version 1.
SELECT model, version, trees, oob_metric, round(oob_value, 4) AS oob_value
FROM copse_train('late_check', 'invoices',
                 target := 'late_30', key := 'invoice_id', exclude := ['days_late'],
                 trees := 20, max_depth := 3, seed := 3);

SELECT model, version, trees, oob_metric, round(oob_value, 4) AS oob_value
FROM copse_train('late_check', 'invoices',
                 target := 'late_30', key := 'invoice_id', exclude := ['days_late'],
                 trees := 20, seed := 3);

SELECT name, version, method, trees, oob_metric, round(oob_value, 4) AS oob_value
FROM copse_models()
WHERE name = 'late_check'
ORDER BY version;

--: 2. 'late_check' scores with the latest version, 'late_check@1' with the first.
SELECT round(avg(copse_score('late_check@1', n)), 4)  AS mean_p_version_1,
       round(avg(copse_score('late_check', n)), 4)    AS mean_p_latest,
       count(*) FILTER (copse_label('late_check@1', n) <> copse_label('late_check', n)) AS labels_differ
FROM new_invoices n;

--: 3. Drop version 1; the latest stays.
SELECT * FROM copse_drop('late_check@1');

SELECT name, version FROM copse_models() WHERE name = 'late_check' ORDER BY version;
