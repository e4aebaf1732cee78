-- Recipe: what a notebook sends to `copse serve` — train, score, read importance and
-- judge the model, as plain SQL. Any PostgreSQL client can send these statements:
--
--   copse demo --db demo.duckdb --pictures ''
--   copse serve --db demo.duckdb                 # 127.0.0.1:5433, loopback only
--   psql "host=127.0.0.1 port=5433 user=me dbname=demo" -f sql/recipe_notebook.sql
--
-- From Python (psycopg), R (RPostgres) or Go (pgx), send each statement as it is; put
-- values that change from cell to cell in parameters ($1, $2; psycopg writes %s).
-- The test suite runs this script in-process on the demo tables.

--: Recipe: a notebook session
--: ===========================
--: 1. Train a forest on the paid invoices (a notebook cell; interrupting the cell
--:    cancels the training on the server and leaves the catalog as it was).
SELECT model, version, trees, oob_metric, round(oob_value, 4) AS oob_value
FROM copse_train('nb_late', 'invoices',
                 target := 'late_30', key := 'invoice_id', exclude := ['days_late'],
                 trees := 40, seed := 11);

--: 2. Its most important inputs, joined to the feature dictionary the analysts keep.
SELECT i.rank, i.feature, round(i.importance, 4) AS importance, d.description
FROM copse_importance('nb_late') i
LEFT JOIN feature_dictionary d ON d.feature = i.feature
ORDER BY i.rank
LIMIT 5;

--: 3. Score the open invoices and list the riskiest, for a dashboard's table.
SELECT invoice_id, segment, round(copse_score('nb_late', n), 3) AS p_late_30
FROM new_invoices n
ORDER BY p_late_30 DESC, invoice_id
LIMIT 5;

--: 4. Judge the model on outcomes that came in later (rows it never trained on).
SELECT metric, round(value, 4) AS value
FROM copse_evaluate('nb_late', 'SELECT n.*, o.late_30 FROM new_invoices n JOIN new_invoice_outcomes o USING (invoice_id)')
WHERE metric IN ('auc', 'log_loss', 'brier', 'error', 'rows')
ORDER BY metric;

--: 5. Leave the shared database as it was found.
SELECT * FROM copse_drop('nb_late');
