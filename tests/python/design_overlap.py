"""Reference for the predicted adjacent overlap (scipy.integrate.quad).

Reads JSON {"positions": [...], "counts": [...] or null} and writes
{"overlap": [...]}: for every neighbouring pair, min(O_{i,i+1}, O_{i+1,i}) with
O_ij = N_j * integral of p_i p_j / sum_k N_k p_k over the real line and
p_k = N(positions[k], 1): the large-sample limit of MBAR's overlap matrix
(Klimovich, Shirts & Mobley 2015) for unit-variance Gaussian states.
"""
import json
import sys

import numpy as np
from scipy.integrate import quad
from scipy.stats import norm


def main():
    d = json.load(sys.stdin)
    pos = np.asarray(d["positions"], dtype=float)
    counts = d.get("counts")
    n = np.ones_like(pos) if counts is None else np.asarray(counts, dtype=float)
    out = []
    for i in range(len(pos) - 1):
        def f(x, i=i):
            p = norm.pdf(x, loc=pos)
            return p[i] * p[i + 1] / np.dot(n, p)
        lo, hi = pos[i] - 12.0, pos[i + 1] + 12.0
        val, _ = quad(f, lo, hi, epsabs=1e-13, epsrel=1e-11, limit=400,
                      points=[pos[i], pos[i + 1]] if pos[i + 1] > pos[i] else None)
        out.append(min(n[i + 1] * val, n[i] * val))
    json.dump({"overlap": out}, sys.stdout)


if __name__ == "__main__":
    main()
