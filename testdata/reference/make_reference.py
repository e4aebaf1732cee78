#!/usr/bin/python3
"""Make the test data and reference values for copse's tests.

Run from anywhere:   /usr/bin/python3 testdata/reference/make_reference.py

Uses only Debian's python3-numpy and python3-sklearn (no pip). It:
  1. copies Iris and Wisconsin breast cancer from the CSVs shipped in
     Debian's python3-sklearn into testdata/iris.csv, testdata/breast_cancer.csv
     (numbers copied as text, unchanged; class codes turned into names);
  2. generates testdata/friedman1_train.csv and friedman1_test.csv with fixed seeds;
  3. fits scikit-learn models on those testdata CSVs (read back from disk, so the
     values refer to exactly the files the Go tests read) and writes
     testdata/reference/reference.json.
Everything except "generated_by.date" is deterministic for a given library version.
"""
import csv, datetime, json, math, os, platform
import numpy as np
import sklearn
from sklearn.ensemble import RandomForestClassifier, RandomForestRegressor
from sklearn.ensemble import HistGradientBoostingClassifier, HistGradientBoostingRegressor
from sklearn.metrics import log_loss, mean_squared_error, r2_score
from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor

HERE = os.path.dirname(os.path.abspath(__file__))
TESTDATA = os.path.dirname(HERE)
SKDATA = os.path.join(os.path.dirname(sklearn.__file__), "datasets", "data")

BC_NAMES = [  # the 30 WDBC features, order as in sklearn's load_breast_cancer
    "mean radius", "mean texture", "mean perimeter", "mean area", "mean smoothness",
    "mean compactness", "mean concavity", "mean concave points", "mean symmetry",
    "mean fractal dimension", "radius error", "texture error", "perimeter error",
    "area error", "smoothness error", "compactness error", "concavity error",
    "concave points error", "symmetry error", "fractal dimension error",
    "worst radius", "worst texture", "worst perimeter", "worst area",
    "worst smoothness", "worst compactness", "worst concavity",
    "worst concave points", "worst symmetry", "worst fractal dimension"]


def copy_sklearn_csv(src, dst, header, target):
    """sklearn's files: first line 'n_rows,n_features,class0,class1,...',
    then rows of features followed by the integer class code."""
    with open(os.path.join(SKDATA, src), newline="") as f:
        rows = list(csv.reader(f))
    n, p, classes = int(rows[0][0]), int(rows[0][1]), rows[0][2:]
    body = rows[1:]
    assert len(body) == n and all(len(r) == p + 1 for r in body)
    with open(os.path.join(TESTDATA, dst), "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(header + [target])
        for r in body:
            w.writerow(r[:p] + [classes[int(r[p])]])


def read_csv(name):
    """Return (feature names, X float64, y as text column) of a testdata CSV."""
    with open(os.path.join(TESTDATA, name), newline="") as f:
        rows = list(csv.reader(f))
    X = np.array([[float(v) for v in r[:-1]] for r in rows[1:]])
    return rows[0][:-1], X, np.array([r[-1] for r in rows[1:]])


def friedman1_true(X):
    """Friedman (1991) #1 regression function, noise-free; x6..x10 unused."""
    return (10 * np.sin(np.pi * X[:, 0] * X[:, 1]) + 20 * (X[:, 2] - 0.5) ** 2
            + 10 * X[:, 3] + 5 * X[:, 4])


def write_friedman1(name, n, seed):
    """x1..x10 ~ U(0,1), y = f(x) + N(0,1); repr() is the shortest text that
    parses back to the same double (Go's strconv.ParseFloat agrees)."""
    rng = np.random.default_rng(seed)
    X = rng.uniform(0.0, 1.0, size=(n, 10))
    y = friedman1_true(X) + rng.normal(0.0, 1.0, size=n)
    with open(os.path.join(TESTDATA, name), "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["x%d" % i for i in range(1, 11)] + ["y"])
        for xi, yi in zip(X, y):
            w.writerow([repr(float(v)) for v in xi] + [repr(float(yi))])
    return X, y


# ---- 1. data files -------------------------------------------------------
copy_sklearn_csv("iris.csv", "iris.csv",
                 ["sepal_length", "sepal_width", "petal_length", "petal_width"], "species")
copy_sklearn_csv("breast_cancer.csv", "breast_cancer.csv",
                 [s.replace(" ", "_") for s in BC_NAMES], "diagnosis")
FRIEDMAN_SEEDS = {"train": 20240101, "test": 20240102}
Xtr0, ytr0 = write_friedman1("friedman1_train.csv", 2000, FRIEDMAN_SEEDS["train"])
Xte0, yte0 = write_friedman1("friedman1_test.csv", 5000, FRIEDMAN_SEEDS["test"])

ref = {"generated_by": {
    "script": "testdata/reference/make_reference.py",
    "python": platform.python_version(),
    "sklearn": sklearn.__version__,
    "numpy": np.__version__,
    "date": datetime.date.today().isoformat()}}

# ---- 2. iris: one fully grown CART classification tree on all 150 rows ----
names, X, y = read_csv("iris.csv")
t = DecisionTreeClassifier(criterion="gini", random_state=0).fit(X, y)
ref["iris_tree"] = {
    "model": "DecisionTreeClassifier(criterion='gini', random_state=0), fully grown, all 150 rows",
    "train_accuracy": t.score(X, y),
    "root_feature": names[t.tree_.feature[0]],
    # sklearn stores X as float32; the threshold is the midpoint of two float32
    # values computed in float64, so it can differ from the float64 midpoint in the last digits
    "root_threshold": float(t.tree_.threshold[0]),
    # the root split is a tie: petal_length <= 2.45 and petal_width <= 0.8 both cut off
    # setosa exactly (same Gini decrease, 1/3); sklearn's random feature order picks one
    "root_gini_decrease": float(t.tree_.impurity[0] - sum(
        t.tree_.weighted_n_node_samples[c] / t.tree_.weighted_n_node_samples[0] * t.tree_.impurity[c]
        for c in (t.tree_.children_left[0], t.tree_.children_right[0]))),
    "root_split_tied_with": "petal_length <= 2.45 (same Gini decrease)",
    "n_leaves": int(t.get_n_leaves()),
    "depth": int(t.get_depth()),  # edges on the longest root-to-leaf path (root alone = 0)
}

# ---- 3. breast cancer: random forest out-of-bag error, 5 seeds ------------
names, X, y = read_csv("breast_cancer.csv")
oob = {}
for seed in [1, 2, 3, 4, 5]:
    rf = RandomForestClassifier(n_estimators=200, max_features="sqrt", bootstrap=True,
                                oob_score=True, min_samples_leaf=1,
                                random_state=seed, n_jobs=-1).fit(X, y)
    oob[str(seed)] = 1.0 - rf.oob_score_  # share of rows misclassified by their OOB vote
ref["breast_cancer_forest_oob"] = {
    "model": "RandomForestClassifier(n_estimators=200, max_features='sqrt', bootstrap=True, "
             "oob_score=True, min_samples_leaf=1), all 569 rows",
    "n_estimators": 200,
    "features_per_split": int(math.sqrt(X.shape[1])),  # int(sqrt(30)) = 5
    "oob_error_by_random_state": oob,
    "oob_error_mean": float(np.mean(list(oob.values()))),
}

# ---- 4. Friedman #1: forest and single tree, train 2000 / test 5000 --------
names, Xtr, ytr = read_csv("friedman1_train.csv")
_, Xte, yte = read_csv("friedman1_test.csv")
ytr, yte = ytr.astype(float), yte.astype(float)
# the CSV text must give back exactly the generated doubles
assert np.array_equal(Xtr, Xtr0) and np.array_equal(ytr, ytr0)
assert np.array_equal(Xte, Xte0) and np.array_equal(yte, yte0)
rf = RandomForestRegressor(n_estimators=500, max_features=3, min_samples_leaf=1,
                           random_state=0, n_jobs=-1).fit(Xtr, ytr)
pred = rf.predict(Xte)
ref["friedman1_forest"] = {
    "model": "RandomForestRegressor(n_estimators=500, max_features=3, min_samples_leaf=1, "
             "random_state=0) on friedman1_train.csv, scored on friedman1_test.csv",
    "data_seeds": FRIEDMAN_SEEDS,  # numpy.random.default_rng seeds used for the CSVs
    "features_per_split": 3,       # 10 features / 3
    "test_r2": r2_score(yte, pred),
    "test_rmse": math.sqrt(mean_squared_error(yte, pred)),
    # R^2 of the noise-free formula on the noisy test y: the best any model can do
    "true_function_test_r2": r2_score(yte, friedman1_true(Xte)),
    "true_function_test_rmse": math.sqrt(mean_squared_error(yte, friedman1_true(Xte))),
    # mean decrease in squared-error impurity, normalised to sum to 1
    "impurity_importances": dict(zip(names, map(float, rf.feature_importances_))),
}
tree = DecisionTreeRegressor(random_state=0).fit(Xtr, ytr)
ref["friedman1_tree"] = {
    "model": "DecisionTreeRegressor(random_state=0), fully grown, same split",
    "test_r2": r2_score(yte, tree.predict(Xte)),
}

# ---- 5. histogram gradient boosting: Friedman #1 and breast cancer ----------
HGB = dict(max_iter=100, learning_rate=0.1, max_depth=6, max_leaf_nodes=None,
           l2_regularization=0.0, min_samples_leaf=20, early_stopping=False, max_bins=255)
HGB_TEXT = ("max_iter=100, learning_rate=0.1, max_depth=6, max_leaf_nodes=None, "
            "l2_regularization=0, min_samples_leaf=20, early_stopping=False, max_bins=255")
hgb = HistGradientBoostingRegressor(loss="squared_error", **HGB).fit(Xtr, ytr)
ref["friedman1_boosting"] = {
    "model": "HistGradientBoostingRegressor(" + HGB_TEXT + ") on friedman1_train.csv, "
             "scored on friedman1_test.csv",
    "test_rmse": math.sqrt(mean_squared_error(yte, hgb.predict(Xte))),
}
names, X, y = read_csv("breast_cancer.csv")
# a fixed 30 % test split of the 569 rows (0-based row indices after the header)
test_rows = sorted(int(i) for i in np.random.default_rng(20240103).permutation(len(y))[:171])
is_test = np.zeros(len(y), dtype=bool)
is_test[test_rows] = True
hgb = HistGradientBoostingClassifier(loss="log_loss", **HGB).fit(X[~is_test], y[~is_test])
assert list(hgb.classes_) == ["benign", "malignant"]
ref["breast_cancer_boosting"] = {
    "model": "HistGradientBoostingClassifier(" + HGB_TEXT + ") on the rows of breast_cancer.csv "
             "not in test_rows, scored on test_rows; positive class malignant",
    "test_rows": test_rows,
    "test_log_loss": log_loss(y[is_test], hgb.predict_proba(X[is_test]), labels=hgb.classes_),
}
names, X, y = read_csv("iris.csv")
# a fixed 30 % test split of the 150 rows (0-based row indices after the header)
test_rows = sorted(int(i) for i in np.random.default_rng(20240104).permutation(len(y))[:45])
is_test = np.zeros(len(y), dtype=bool)
is_test[test_rows] = True
hgb = HistGradientBoostingClassifier(loss="log_loss", **HGB).fit(X[~is_test], y[~is_test])
assert list(hgb.classes_) == ["setosa", "versicolor", "virginica"]
ref["iris_boosting"] = {
    "model": "HistGradientBoostingClassifier(" + HGB_TEXT + ") on the rows of iris.csv "
             "not in test_rows (softmax, one tree per class per round), scored on test_rows",
    "test_rows": test_rows,
    "test_log_loss": log_loss(y[is_test], hgb.predict_proba(X[is_test]), labels=hgb.classes_),
    "test_accuracy": float(np.mean(hgb.predict(X[is_test]) == y[is_test])),
}

# ---- 6. AdaBoost (SAMME) with stumps on Iris: training accuracy -------------
from sklearn.ensemble import AdaBoostClassifier
names, X, y = read_csv("iris.csv")
ada = AdaBoostClassifier(estimator=DecisionTreeClassifier(max_depth=1), n_estimators=100,
                         learning_rate=1.0, algorithm="SAMME", random_state=0).fit(X, y)
ref["iris_adaboost"] = {
    "model": "AdaBoostClassifier(algorithm='SAMME', n_estimators=100, learning_rate=1.0, "
             "estimator=DecisionTreeClassifier(max_depth=1), random_state=0) on all of iris.csv",
    "train_accuracy": float(np.mean(ada.predict(X) == y)),
    "rounds": len(ada.estimators_),
}

with open(os.path.join(HERE, "reference.json"), "w") as f:
    json.dump(ref, f, indent=2)
    f.write("\n")
