-- Recipe: train on Parquet exports and score them in one query.
--
-- Run it on a database that holds the demo tables:
--   copse demo --db demo.duckdb
--   copse sql --db demo.duckdb sql/recipe_parquet.sql
-- It writes the folder copse_recipe_export/ in the current directory (and replaces it
-- when run again).

--: Recipe: Parquet exports
--: =======================
--: 1. Export the invoices as a warehouse would: a folder of Parquet files, one folder
--:    per region.
COPY invoices TO 'copse_recipe_export' (FORMAT parquet, PARTITION_BY (region), OVERWRITE);

SELECT region, count(*) AS invoices
FROM read_parquet('copse_recipe_export/*/*.parquet', hive_partitioning = true)
GROUP BY region
ORDER BY region;

--: 2. Train straight from the files: the source is a table function call (quotes
--:    inside the source string are doubled).
SELECT model, version, rows, features, trees, oob_metric, round(oob_value, 4) AS oob_value
FROM copse_train('late_from_parquet',
                 'read_parquet(''copse_recipe_export/*/*.parquet'', hive_partitioning = true)',
                 target := 'late_30', key := 'invoice_id', exclude := ['days_late'],
                 trees := 30, seed := 7);

--: 3. Score every exported invoice in the same kind of query, without loading it first.
SELECT region,
       count(*)                                             AS invoices,
       round(avg(copse_score('late_from_parquet', p)), 3)   AS mean_p_late_30,
       round(avg(late_30::INTEGER), 3)                      AS actual_late_share,
       count(*) FILTER (copse_label('late_from_parquet', p) = 'true') AS flagged
FROM read_parquet('copse_recipe_export/*/*.parquet', hive_partitioning = true) p
GROUP BY region
ORDER BY region;
