"""Reference for the network solve: numpy.linalg.lstsq on the weighted design.

Reads JSON {"n": N, "edges": [[a, b, ddg, sigma], ...]} (0-based ligand
indices; ddg = G[b] - G[a]) and writes {"g": [...], "cov": [[...]]}.
Rows of the design are scaled by 1/sigma, so lstsq minimises the same weighted
sum of squares. Its minimum-norm solution has sum(G) = 0 (the null space of
the design is the constant vector), i.e. the series-mean gauge. The covariance
is the pseudo-inverse of A^T W A, which is the covariance in that same gauge.
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
    json.dump({"g": g.tolist(), "cov": cov.tolist()}, sys.stdout)


if __name__ == "__main__":
    main()
