-- The script `copse demo` runs (go run ./cmd/copse demo). It expects the demo tables
-- (invoices, new_invoices, new_invoice_outcomes, feature_dictionary) that the demo
-- generates; lines starting with "--:" are printed as the demo's narration.

--: copse demo — which invoices will be paid more than 30 days late, and how late?
--: ===============================================================================
--:
--: The data are invented. A fictional wholesale distributor has 20,000 paid invoices
--: (table invoices) and 5,000 open ones to score (table new_invoices). How late each
--: invoice was paid follows a known rule, so we can check what the models find:
--:
--:   z = 3.0·(past_late_share − 0.25) + 2.5·(credit_use − 0.60) + 0.25·(open_invoices − 5)
--:     + 0.03·(terms_days − 30) + 1.2·exp(−tenure_months / 18)
--:     + segment (construction +0.9, public +0.6, hospitality +0.45, retail 0, healthcare −0.45)
--:     + 0.15·ln(amount / 2000) + 0.2 if region = 'islands' + 0.1 if channel = 'web'
--:   days_late = max(0, round(14 + 12·z + 9·noise)),  noise ~ N(0, 1)
--:   late_30   = days_late > 30
--:
--: A missing past_late_share counts as 0.35 and a missing credit_use as 0.60.
--: invoice_date, noise_x and noise_tag play no part: a sound model ranks them below
--: every true driver.
--:
--: 1. The paid invoices
SELECT count(*)                                   AS invoices,
       count(*) FILTER (late_30)                  AS over_30_days_late,
       round(avg(late_30::INTEGER), 3)            AS late_share,
       round(avg(days_late), 1)                   AS mean_days_late,
       count(*) FILTER (past_late_share IS NULL)  AS no_payment_history,
       count(*) FILTER (credit_use IS NULL)       AS no_credit_limit
FROM invoices;

--: Every fifth paid invoice (invoice_id divisible by 5) is set aside: no model trains
--: on these 4,000, and step 9 uses them to weigh a blend of models. The models learn
--: from the other 16,000. A split by id is fixed and repeatable; the two parts look
--: alike, within what chance gives on 4,000 invoices.
CREATE VIEW training_invoices AS SELECT * FROM invoices WHERE invoice_id % 5 <> 0;
CREATE VIEW blend_invoices AS SELECT * FROM invoices WHERE invoice_id % 5 = 0;

SELECT 'training_invoices' AS part, count(*) AS invoices,
       round(avg(late_30::INTEGER), 3) AS late_share, round(avg(days_late), 1) AS mean_days_late
FROM training_invoices
UNION ALL
SELECT 'blend_invoices', count(*), round(avg(late_30::INTEGER), 3), round(avg(days_late), 1)
FROM blend_invoices;

--: 2. Train a random forest on them. copse_train reads the view, grows the trees and
--:    keeps the model in the database under the name 'late_risk'. The key column and
--:    the other outcome (days_late) are not features; min_leaf stops splitting at
--:    leaves of 10 invoices.
SELECT model, version, method, task, target, rows, rows_skipped, features, trees,
       oob_metric, round(oob_value, 4) AS oob_value
FROM copse_train('late_risk', 'training_invoices',
                 target := 'late_30', key := 'invoice_id', exclude := ['days_late'],
                 trees := 100, min_leaf := 10, seed := 42);

--: 3. How good is it? Each invoice is scored by the trees that never saw it (out of bag),
--:    an honest estimate without a separate test set. copse_oob gives one row per
--:    training row, keyed by invoice_id, to join back to the invoices.
SELECT i.late_30 AS actual, o.predicted, count(*) AS invoices
FROM copse_oob('late_risk') o
JOIN invoices i ON i.invoice_id = CAST(o.key AS BIGINT)
GROUP BY i.late_30, o.predicted
ORDER BY i.late_30, o.predicted;

SELECT round(avg((i.late_30::VARCHAR = o.predicted)::INTEGER), 4)   AS accuracy,
       round(avg(power(o.probability - i.late_30::INTEGER, 2)), 4) AS brier_score
FROM copse_oob('late_risk') o
JOIN invoices i ON i.invoice_id = CAST(o.key AS BIGINT);

--: The same out-of-bag results per customer segment: a first check that the model
--: errs no more for one group than for another.
SELECT i.segment,
       count(*)                                                    AS invoices,
       round(avg((i.late_30::VARCHAR <> o.predicted)::INTEGER), 3) AS error_rate,
       round(avg(o.probability), 3)                                AS mean_p_late_30,
       round(avg(i.late_30::INTEGER), 3)                           AS actual_late_share
FROM copse_oob('late_risk') o
JOIN invoices i ON i.invoice_id = CAST(o.key AS BIGINT)
GROUP BY i.segment
ORDER BY i.segment;

--: The error as trees are added: it falls quickly, then levels off.
SELECT trees, metric, round(value, 4) AS value
FROM copse_curve('late_risk')
WHERE trees IN (1, 5, 10, 25, 50, 100)
ORDER BY trees;

--: 4. What drives it? Both importance measures, joined to the feature dictionary.
--:    Impurity decrease sums to 1 and leans towards columns with many distinct values;
--:    permutation importance is the loss of accuracy when a column is shuffled out of
--:    bag, so columns that play no part sit near 0.
SELECT imp.rank,
       imp.feature,
       round(imp.importance, 3)  AS impurity,
       round(perm.importance, 4) AS permutation,
       round(perm.std, 4)        AS permutation_std,
       d.owner,
       d.description
FROM copse_importance('late_risk') imp
JOIN copse_importance('late_risk', method := 'permutation') perm ON perm.feature = imp.feature
JOIN feature_dictionary d ON d.feature = imp.feature
ORDER BY imp.rank;

--: 5. How many days late? A regression forest on the same invoices.
SELECT model, version, method, task, target, rows, features, trees,
       oob_metric, round(oob_value, 3) AS oob_value
FROM copse_train('days_late', 'SELECT * EXCLUDE (late_30) FROM training_invoices',
                 target := 'days_late', key := 'invoice_id', trees := 50, min_leaf := 10, seed := 42);

SELECT rank, feature, round(importance, 3) AS impurity
FROM copse_importance('days_late')
ORDER BY rank
LIMIT 6;

--: 6. Score the open invoices: the ten most likely to be paid over 30 days late.
SELECT invoice_id, segment, region, amount, terms_days, tenure_months,
       round(copse_score('late_risk', n), 3)  AS p_late_30,
       copse_label('late_risk', n)            AS label,
       round(copse_score('days_late', n), 1)  AS expected_days_late
FROM new_invoices n
ORDER BY p_late_30 DESC, invoice_id
LIMIT 10;

--: The same scores per segment, beside what happened later (new_invoice_outcomes).
SELECT n.segment,
       count(*)                                     AS invoices,
       round(avg(copse_score('late_risk', n)), 3)   AS mean_p_late_30,
       round(avg(o.late_30::INTEGER), 3)            AS actual_late_share,
       round(avg(copse_score('days_late', n)), 1)   AS mean_expected_days,
       round(avg(o.days_late), 1)                   AS actual_mean_days
FROM new_invoices n
JOIN new_invoice_outcomes o ON o.invoice_id = n.invoice_id
GROUP BY n.segment
ORDER BY n.segment;

--: copse_predict returns every column of a source with the prediction beside it.
SELECT invoice_id, segment, prediction, round(probability, 3) AS probability
FROM copse_predict('late_risk', 'SELECT invoice_id, * EXCLUDE (invoice_id) FROM new_invoices WHERE invoice_id <= 100005')
ORDER BY invoice_id;

--: 7. A gradient-boosted model beside the forest. Boosting grows small trees one after
--:    another, each fitted to what the trees before it left unexplained. Here: at most
--:    100 rounds of trees 4 levels deep, logistic loss, learning rate 0.2. A fifth of its
--:    training invoices is held out inside the training (not the blend's 4,000): it
--:    stops after 10 rounds without a lower holdout loss and keeps the best round
--:    (trees), whose holdout log loss is the oob_value.
SELECT model, version, method, task, target, rows, features, trees,
       oob_metric, round(oob_value, 4) AS oob_value
FROM copse_train('late_boost', 'training_invoices',
                 target := 'late_30', key := 'invoice_id', exclude := ['days_late'],
                 method := 'boosting', loss := 'logistic', trees := 100, max_depth := 4,
                 learning_rate := 0.2, holdout_fraction := 0.2, seed := 42);

--: The log loss by round, on the training rows and on the held-out ones. The training
--: loss keeps falling; the holdout loss levels off and, past the best round, falls no more.
WITH curve AS (
    SELECT trees                                       AS boosting_round,
           max(value) FILTER (metric = 'train_loss')   AS train_loss,
           max(value) FILTER (metric = 'holdout_loss') AS holdout_loss
    FROM copse_curve('late_boost')
    GROUP BY trees
), kept AS (
    SELECT trees AS best_round FROM copse_models() WHERE name = 'late_boost'
)
SELECT c.boosting_round         AS round,
       round(c.train_loss, 4)   AS train_loss,
       round(c.holdout_loss, 4) AS holdout_loss,
       CASE WHEN c.boosting_round = k.best_round THEN 'best, kept'
            WHEN c.boosting_round = (SELECT max(boosting_round) FROM curve) THEN 'stopped'
            ELSE '' END         AS note
FROM curve c, kept k
WHERE c.boosting_round IN (1, 10, 25, 50)
   OR c.boosting_round = k.best_round
   OR c.boosting_round = (SELECT max(boosting_round) FROM curve)
ORDER BY c.boosting_round;

--: What drives it: the boosted model's five most important features by impurity
--: decrease, with the forest's rank beside them. A boosted model has no out-of-bag
--: rows, so it has no permutation importance.
SELECT b.rank,
       b.feature,
       round(b.importance, 3) AS impurity,
       f.rank                 AS forest_rank,
       d.owner,
       d.description
FROM copse_importance('late_boost') b
JOIN copse_importance('late_risk') f ON f.feature = b.feature
JOIN feature_dictionary d ON d.feature = b.feature
ORDER BY b.rank
LIMIT 5;

--: 8. A linear baseline: logistic regression on the same 16,000 invoices. Each
--:    categorical column becomes one indicator per level, and a missing value becomes
--:    the training mean plus a "missing" indicator. Simple models keep complex ones
--:    honest: a forest has to beat this to earn its keep.
SELECT model, version, method, task, target, rows, features
FROM copse_train('late_linear', 'training_invoices',
                 target := 'late_30', key := 'invoice_id', exclude := ['days_late'],
                 method := 'linear');

--: Its six terms with the largest z (estimate over standard error). They are the
--: rule's strong drivers, each estimate about 2.3 times the rule's coefficient (the
--: rule's noise sets the log-odds scale); segment is measured against construction.
SELECT term, round(estimate, 4) AS estimate, round(std_error, 4) AS std_error, round(z, 1) AS z
FROM copse_coefficients('late_linear')
WHERE term <> '(intercept)'
ORDER BY abs(z) DESC, term
LIMIT 6;

--: 9. A blend of the three. Each member scores the 4,000 invoices set aside in step 1,
--:    which none of them trained on, and copse_blend learns the weights (at least 0,
--:    summing to 1) that give the lowest log loss of the averaged probabilities there.
--:    The blend is a model like the others, scored with copse_score.
SELECT model, version, method, task, target, features, oob_metric, round(oob_value, 4) AS oob_value
FROM copse_blend('late_blend', members := ['late_risk', 'late_boost', 'late_linear'],
                 weights := 'fit', holdout := 'blend_invoices');

--: The learned weights, with each member's own log loss on those 4,000 invoices. The
--: blend's loss is never above its best member's, since each member alone is one of
--: the weightings tried. A weight of 0 means that member added nothing the others had
--: not: it says how much a member helped on these rows, not why.
SELECT member, round(weight, 3) AS weight, rule, fit_metric, fit_rows,
       round(member_loss, 4) AS member_loss, round(blend_loss, 4) AS blend_loss
FROM copse_members('late_blend');

--: 10. The four models side by side on the open invoices, whose outcomes are now known
--:     (new_invoice_outcomes): no model trained on them and no weight was fitted on them.
--:     log_loss and brier_score (the mean of (p_late_30 − actual)²) judge the
--:     probabilities, lower is better; auc is the chance that a late invoice scores
--:     above one paid on time (0.5 is guessing); error_rate counts a p_late_30 above
--:     0.5 as late; the last column is the share of actually late invoices among each
--:     model's riskiest 10 % (500 invoices). "base rate" gives every invoice the
--:     training invoices' late share, for scale.
WITH scored AS (
    SELECT 1 AS pos, 'late_risk' AS model, 'forest' AS method, invoice_id,
           copse_score('late_risk', n) AS p_late_30
    FROM new_invoices n
    UNION ALL
    SELECT 2, 'late_boost', 'boosting', invoice_id, copse_score('late_boost', n) FROM new_invoices n
    UNION ALL
    SELECT 3, 'late_linear', 'linear', invoice_id, copse_score('late_linear', n) FROM new_invoices n
    UNION ALL
    SELECT 4, 'late_blend', 'blend', invoice_id, copse_score('late_blend', n) FROM new_invoices n
    UNION ALL
    SELECT 5, 'base rate', 'constant', invoice_id,
           (SELECT avg(late_30::INTEGER) FROM training_invoices)
    FROM new_invoices
), ranked AS (
    SELECT s.pos, s.model, s.method, s.p_late_30, o.late_30::INTEGER AS actual,
           -- the middle rank among tied scores, for the rank-sum form of auc
           rank() OVER (PARTITION BY s.model ORDER BY s.p_late_30)
             + (count(*) OVER (PARTITION BY s.model, s.p_late_30) - 1) / 2.0 AS score_rank,
           row_number() OVER (PARTITION BY s.model ORDER BY s.p_late_30 DESC, s.invoice_id) AS risk_rank,
           count(*) OVER (PARTITION BY s.model) AS invoices
    FROM scored s
    JOIN new_invoice_outcomes o ON o.invoice_id = s.invoice_id
)
SELECT model,
       method,
       round(-avg(CASE WHEN actual = 1 THEN ln(greatest(p_late_30, 1e-15))
                       ELSE ln(greatest(1 - p_late_30, 1e-15)) END), 4)  AS log_loss,
       round(avg(power(p_late_30 - actual, 2)), 4)                      AS brier_score,
       round((sum(score_rank) FILTER (actual = 1) - sum(actual) * (sum(actual) + 1) / 2)
             / (sum(actual) * (count(*) - sum(actual))), 4)             AS auc,
       round(avg(((p_late_30 > 0.5)::INTEGER <> actual)::INTEGER), 4)   AS error_rate,
       round(avg(actual) FILTER (risk_rank <= invoices / 10), 3)        AS late_share_top_10pct
FROM ranked
GROUP BY pos, model, method
ORDER BY pos;

--: Lateness here follows a smooth rule, close to linear in the columns: the forest
--: trails, the linear baseline holds its own against boosting, and the blend has the
--: lowest log loss, Brier score and error rate. On 5,000 invoices a small gap between
--: two models can be chance: compare them again as new outcomes come in.
--:
--: 11. The models kept in this database.
SELECT name, version, method, task, target, rows, features, trees,
       oob_metric, round(oob_value, 4) AS oob_value
FROM copse_models()
ORDER BY name, version;

--: Use with care
--: -------------
--: A model is decision support, not a decision.
--: - Check it for bias across groups and for stability over time before relying on it.
--: - Adverse decisions about a person or a customer may require reasons and human review.
--: - Local law and licensed professional practice prevail over anything a model says.
