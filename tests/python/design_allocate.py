"""Reference for the A-optimal allocation of frames (scipy.optimize SLSQP).

Reads JSON {"ligands": n, "edges": [[a, b], ...], "windows": [[group, a, frames,
cost], ...], "budget": B}. Window w adds a_w / N_w to the variance v_g of its
group g (edge g); the ligands' covariance is pinv(L) with L the Laplacian
weighted by 1/v_g. Minimises trace(pinv(L)) over extra frames x_w >= 0 with
sum(cost_w x_w) = B, with the analytic gradient
d trace / d N_w = -|pinv(L) a_g|^2 a_w / (v_g^2 N_w^2).
Writes {"objective": ..., "extra": [...], "uniform": ...}.
"""
import json
import sys

import numpy as np
from scipy.optimize import minimize


def main():
    d = json.load(sys.stdin)
    n = d["ligands"]
    edges = np.asarray(d["edges"], dtype=int)
    win = np.asarray(d["windows"], dtype=float)
    g = win[:, 0].astype(int)
    a = win[:, 1]
    n0 = win[:, 2]
    c = win[:, 3]
    budget = float(d["budget"])
    inc = np.zeros((len(edges), n))
    for k, (i, j) in enumerate(edges):
        inc[k, i] = -1.0
        inc[k, j] = 1.0

    def parts(x):
        frames = n0 + x
        v = np.bincount(g, weights=a / frames, minlength=len(edges))
        lap = inc.T @ np.diag(1.0 / v) @ inc
        m = np.linalg.pinv(lap)
        return frames, v, m

    def f(x):
        return np.trace(parts(x)[2])

    def grad(x):
        frames, v, m = parts(x)
        y = inc @ m  # row e: (pinv(L) a_e)^T
        s = np.sum(y * y, axis=1)
        return -s[g] * a / (v[g] ** 2 * frames ** 2)

    x0 = np.full(len(a), budget / c.sum())
    res = minimize(
        f, x0, jac=grad, method="SLSQP",
        bounds=[(0.0, None)] * len(a),
        constraints=[{"type": "eq", "fun": lambda x: c @ x - budget, "jac": lambda x: c}],
        options={"ftol": 1e-15, "maxiter": 2000},
    )
    json.dump({"objective": float(res.fun), "extra": res.x.tolist(),
               "uniform": float(f(x0)), "success": bool(res.success)}, sys.stdout)


if __name__ == "__main__":
    main()
