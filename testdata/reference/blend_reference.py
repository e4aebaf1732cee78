#!/usr/bin/python3
"""Reference weights for copse's learned blend weights (forest/blend_fit_test.go).

Run from anywhere:   /usr/bin/python3 testdata/reference/blend_reference.py

Uses only Debian 12's python3-numpy 1:1.24.2-1+deb12u1 and python3-scipy 1.10.1
(no pip, no network). It writes testdata/reference/blend_reference.json, which holds
both the members' predictions (generated here with fixed seeds) and the reference
solutions, so the Go test reads exactly the numbers the references saw. The output
is the same on every run.

1. regression: weights a >= 0 with sum(a) = 1 minimising the mean squared error
   (1/n)||P a - y||^2 of the blend. Solved with scipy.optimize.nnls (Lawson & Hanson's
   non-negative least squares) on the system augmented with one row lam*(1 ... 1 | 1),
   which enforces sum(a) = 1 up to O(1/lam^2) (the penalty method, common practice).
2. classification: weights a >= 0 with sum(a) = 1 minimising the mean log loss
   -(1/n) sum_r ln(sum_j a_j p_rj) of the averaged probabilities, p_rj member j's
   probability of row r's class. Solved with scipy.optimize.minimize, method SLSQP,
   with the equality constraint and bounds [0, 1].
"""
import json, os
import numpy as np
import scipy
from scipy.optimize import nnls, minimize

HERE = os.path.dirname(os.path.abspath(__file__))


def regression():
    rng = np.random.default_rng(20261202)
    n = 200
    x = rng.uniform(-2, 2, size=(n, 3))
    y = np.sin(x[:, 0]) * 3 + x[:, 1] ** 2 - x[:, 2]
    members = [
        y + rng.normal(0, 0.4, n),                # good
        y + rng.normal(0, 0.8, n) + 0.3,          # worse, biased
        0.6 * y + rng.normal(0, 0.5, n),          # shrunk
        rng.normal(y.mean(), y.std(), n),         # pure noise
    ]
    P = np.column_stack(members)
    lam = 1e4
    s = 1 / np.sqrt(n)
    A = np.vstack([P * s, lam * np.ones((1, P.shape[1]))])
    b = np.concatenate([y * s, [lam]])
    a, _ = nnls(A, b, maxiter=1000)
    mse = float(np.mean((P @ a - y) ** 2))
    return {"target": y.tolist(), "members": [m.tolist() for m in members],
            "weights": a.tolist(), "mse": mse, "lambda": lam}


def classification():
    rng = np.random.default_rng(7)
    n, K = 300, 3
    y = rng.integers(0, K, n)
    onehot = np.eye(K)[y]

    def member(signal, noise):
        z = signal * onehot + rng.normal(0, noise, (n, K))
        e = np.exp(z - z.max(axis=1, keepdims=True))
        return e / e.sum(axis=1, keepdims=True)

    members = [member(2.0, 1.0), member(1.0, 1.0), member(3.0, 2.5), member(0.0, 1.0)]
    Z = np.column_stack([m[np.arange(n), y] for m in members])

    def loss(a):
        return -np.mean(np.log(Z @ a))

    def grad(a):
        return -(Z / (Z @ a)[:, None]).mean(axis=0)

    M = Z.shape[1]
    res = minimize(loss, np.full(M, 1 / M), jac=grad, method="SLSQP",
                   bounds=[(0, 1)] * M,
                   constraints=[{"type": "eq", "fun": lambda a: a.sum() - 1, "jac": lambda a: np.ones(M)}],
                   options={"ftol": 1e-15, "maxiter": 1000})
    return {"target": y.tolist(), "classes": K, "members": [m.ravel().tolist() for m in members],
            "weights": res.x.tolist(), "log_loss": float(res.fun), "success": bool(res.success)}


def main():
    out = {
        "generated_by": {"script": "testdata/reference/blend_reference.py",
                         "numpy": np.__version__, "scipy": scipy.__version__},
        "regression": regression(),
        "classification": classification(),
    }
    with open(os.path.join(HERE, "blend_reference.json"), "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
