"""Reference for the network solve: numpy.linalg.lstsq on the weighted design.

Reads JSON {"n": N, "edges": [[a, b, ddg, sigma], ...]} (0-based ligand
indices; ddg = G[b] - G[a]) and writes {"g": [...], "cov": [[...]]}.
Rows of the design are scaled by 1/sigma, so lstsq minimises the same weighted
sum of squares. Its minimum-norm solution has sum(G) = 0 (the null space of
the design is the constant vector), i.e. the series-mean gauge. The covariance
is the pseudo-inverse of A^T W A, which is the covariance in that same gauge.

With "anchor": [k, value] in the input it also writes {"g_anchor": [...],
"sigma_anchor": [...]}: the solution with G[k] = value, by lstsq on the design
with column k removed (its known contribution moved to the right-hand side), and
each ligand's sigma relative to ligand k from the inverse of that reduced normal
matrix (0 at k itself).
"""
import json
import sys

import numpy as np


def main():
    d = json.load(sys.stdin)
    n = d["n"]
    e = d["edges"]
    a = np.zeros((len(e), n))
    y = np.zeros(len(e))
    w = np.zeros(len(e))
    for k, (i, j, ddg, s) in enumerate(e):
        a[k, int(i)] = -1.0
        a[k, int(j)] = 1.0
        y[k] = ddg
        w[k] = 1.0 / s
    g, *_ = np.linalg.lstsq(a * w[:, None], y * w, rcond=None)
    cov = np.linalg.pinv((a * w[:, None]).T @ (a * w[:, None]))
    out = {"g": g.tolist(), "cov": cov.tolist()}
    if "anchor" in d:
        k, value = int(d["anchor"][0]), float(d["anchor"][1])
        keep = [i for i in range(n) if i != k]
        aw = a * w[:, None]
        rhs = y * w - aw[:, k] * value
        x, *_ = np.linalg.lstsq(aw[:, keep], rhs, rcond=None)
        ga = np.full(n, value)
        ga[keep] = x
        cov_red = np.linalg.inv(aw[:, keep].T @ aw[:, keep])
        sa = np.zeros(n)
        sa[keep] = np.sqrt(np.diag(cov_red))
        out["g_anchor"] = ga.tolist()
        out["sigma_anchor"] = sa.tolist()
    json.dump(out, sys.stdout)


if __name__ == "__main__":
    main()
