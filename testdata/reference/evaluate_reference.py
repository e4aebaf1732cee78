#!/usr/bin/python3
"""Reference values for copse's evaluation metrics (forest/evaluate_test.go).

Run from anywhere:   /usr/bin/python3 testdata/reference/evaluate_reference.py

Uses only Debian's python3-numpy and python3-sklearn (1.2.1, no pip). It draws fixed,
seeded scores and outcomes (no model is fitted: the metrics are checked on the scores
themselves), computes scikit-learn's metrics on them, and writes both the data and the
values to testdata/reference/evaluate_reference.json. The output is the same on every
run (no date is recorded). Floats are written with repr, so Go reads the same doubles.
"""
import json, os, platform
import numpy as np
import sklearn
from sklearn.calibration import calibration_curve
from sklearn.metrics import (accuracy_score, balanced_accuracy_score, brier_score_loss,
                             confusion_matrix, f1_score, log_loss, mean_absolute_error,
                             mean_poisson_deviance, mean_squared_error, precision_score,
                             r2_score, recall_score, roc_auc_score, roc_curve)

HERE = os.path.dirname(os.path.abspath(__file__))
rng = np.random.default_rng(20260502)


def fl(a):
    return [float(x) for x in a]


def binary_case(y, p, w):
    """Metrics of positive-class probabilities p against outcomes y (0/1), weights w
    (None: unweighted). The predicted class is the argmax of [1-p, p], the first on ties,
    as copse's forest.Class picks it."""
    pred = np.argmax(np.column_stack([1 - p, p]), axis=1)
    fpr, tpr, thr = roc_curve(y, p, sample_weight=w, drop_intermediate=False)
    out = {
        "accuracy": accuracy_score(y, pred, sample_weight=w),
        "balanced_accuracy": balanced_accuracy_score(y, pred, sample_weight=w),
        "precision": precision_score(y, pred, sample_weight=w, zero_division=0),
        "recall": recall_score(y, pred, sample_weight=w, zero_division=0),
        "f1": f1_score(y, pred, sample_weight=w, zero_division=0),
        "auc": roc_auc_score(y, p, sample_weight=w),
        "log_loss": log_loss(y, p, sample_weight=w),
        "brier": brier_score_loss(y, p, sample_weight=w),
        "confusion": confusion_matrix(y, pred, sample_weight=w).astype(float).ravel().tolist(),
        # roc_curve's first point has threshold max(p)+1 and rates 0, 0; copse's has +Inf.
        "roc_threshold": fl(thr[1:]), "roc_tpr": fl(tpr), "roc_fpr": fl(fpr),
    }
    return {k: (float(v) if np.isscalar(v) else v) for k, v in out.items()}


# ---- binary: 400 rows, scores on a grid of 0.01 (so many tie) in [0.01, 0.99] ----
n = 400
yb = rng.integers(0, 2, n)
pb = np.clip(np.round(1 / (1 + np.exp(-(1.6 * (2 * yb - 1) + rng.normal(0, 1.5, n)))), 2), 0.01, 0.99)
wb = np.round(rng.uniform(0.25, 3.0, n), 2)
prob_true, prob_pred = calibration_curve(yb, pb, n_bins=10, strategy="uniform")
binary = {"labels": [int(v) for v in yb], "scores": fl(pb), "weights": fl(wb),
          "unweighted": binary_case(yb, pb, None), "weighted": binary_case(yb, pb, wb),
          # calibration_curve (no weights in 1.2.1) returns only the non-empty bins.
          "calibration_bins": 10,
          "calibration_mean_predicted": fl(prob_pred), "calibration_observed_rate": fl(prob_true)}

# ---- three classes: 300 rows, probabilities from a noisy softmax ----
n = 300
ym = rng.integers(0, 3, n)
logits = rng.normal(0, 1, (n, 3))
logits[np.arange(n), ym] += 1.2
P = np.exp(logits)
P /= P.sum(axis=1, keepdims=True)
wm = np.round(rng.uniform(0.25, 3.0, n), 2)


def multi_case(w):
    pred = np.argmax(P, axis=1)
    return {
        "accuracy": float(accuracy_score(ym, pred, sample_weight=w)),
        "balanced_accuracy": float(balanced_accuracy_score(ym, pred, sample_weight=w)),
        "precision": float(precision_score(ym, pred, average="macro", sample_weight=w, zero_division=0)),
        "recall": float(recall_score(ym, pred, average="macro", sample_weight=w, zero_division=0)),
        "f1": float(f1_score(ym, pred, average="macro", sample_weight=w, zero_division=0)),
        "auc": float(roc_auc_score(ym, P, multi_class="ovr", average="macro", sample_weight=w)),
        "log_loss": float(log_loss(ym, P, sample_weight=w)),
        "confusion": confusion_matrix(ym, pred, sample_weight=w).astype(float).ravel().tolist(),
    }


multi = {"labels": [int(v) for v in ym], "probs": fl(P.ravel()), "weights": fl(wm),
         "unweighted": multi_case(None), "weighted": multi_case(wm)}

# ---- regression: 250 counts with positive predictions ----
n = 250
mu = np.exp(rng.normal(0.5, 0.7, n))
yr = rng.poisson(mu).astype(float)
pr = mu * np.exp(rng.normal(0, 0.3, n))
wr = np.round(rng.uniform(0.25, 3.0, n), 2)


def reg_case(w):
    mse = mean_squared_error(yr, pr, sample_weight=w)
    return {"mse": float(mse), "rmse": float(np.sqrt(mse)),
            "mae": float(mean_absolute_error(yr, pr, sample_weight=w)),
            "r2": float(r2_score(yr, pr, sample_weight=w)),
            "poisson_deviance": float(mean_poisson_deviance(yr, pr, sample_weight=w))}


regression = {"actual": fl(yr), "predicted": fl(pr), "weights": fl(wr),
              "unweighted": reg_case(None), "weighted": reg_case(wr)}

ref = {"generated_by": {"script": "testdata/reference/evaluate_reference.py",
                        "python": platform.python_version(), "sklearn": sklearn.__version__,
                        "numpy": np.__version__, "seed": 20260502},
       "binary": binary, "multiclass": multi, "regression": regression}
with open(os.path.join(HERE, "evaluate_reference.json"), "w") as f:
    json.dump(ref, f, indent=1)
    f.write("\n")
