// Package forest is copse's tree-ensemble engine: it bins a columnar data set once, grows
// trees by histogram split search, and combines them as a single tree, bagging, a random
// forest, gradient boosting or AdaBoost, with out-of-bag results, importance and a binary
// model encoding. A linear baseline (least squares or logistic regression, optional
// ridge; see [Linear]) is a model kind of the same engine, scored and encoded alike.
//
// It is pure Go: it knows nothing of SQL, DuckDB or the command line. The host fills a
// [Dataset] column by column, calls [Train], and scores with [Model.Predict] or
// [Model.PredictRow].
//
// # Conventions
//
// A row in model coding is one float64 per feature in model order: numeric values as
// they are, categorical values as level codes; NaN marks a missing value, and a negative
// or unknown level code is treated like one. Missing values and unseen levels follow each
// node's default direction, learned in training.
//
// Weights default to one per row; a bootstrap copy of a row adds its weight again.
//
// # Glossary
//
//   - row: one training example; feature: one input column; target: what is predicted.
//   - bin: a range of a numeric feature's values, or a group of categorical levels; bin 0
//     holds missing values. Training reads only bins.
//   - node, leaf: a tree's split points and end points; nodes are numbered so that a
//     child's ID is greater than its parent's.
//   - cover: the training weight that reached a node.
//   - gain: a split's weighted impurity decrease, W·I(node) − W_L·I(left) − W_R·I(right).
//   - out-of-bag (OOB): the rows a tree did not draw; scoring each row with only those
//     trees estimates error on new data. Bagged methods only.
//   - round: one boosting step, one tree fitted to the loss's gradient at the current
//     raw scores (one tree per class for the multinomial loss); raw score: the initial
//     score plus the trees' values, before the link (identity, exp for Poisson means,
//     the logistic function or the softmax for class probabilities).
//   - gradient g, hessian h: the first and second derivative of a row's loss in its raw
//     score; a boosted leaf's value is −Σg/(Σh + λ), shrunk by the learning rate, or for
//     absolute, Huber and quantile loss a quantile of the leaf's residuals.
//   - holdout: rows kept out of boosting to choose the number of rounds.
//
// # What it does not do
//
// It reads no files and no SQL, prints nothing, and keeps no global state.
package forest
