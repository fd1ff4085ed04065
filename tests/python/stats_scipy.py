"""Reference for the agreement statistics: scipy.stats.pearsonr and
scipy.stats.kendalltau (tau-b, scipy's default, which handles ties), plus
numpy for RMSE and MUE.

Reads JSON {"cases": [{"pred": [...], "meas": [...]}, ...]} and writes
{"results": [{"pearson": r, "kendall": tau, "rmse": x, "mue": y}, ...]}.
"""
import json
import sys

import numpy as np
from scipy import stats


def main():
    d = json.load(sys.stdin)
    out = []
    for c in d["cases"]:
        p = np.asarray(c["pred"], dtype=float)
        m = np.asarray(c["meas"], dtype=float)
        out.append({
            "pearson": float(stats.pearsonr(p, m)[0]),
            "kendall": float(stats.kendalltau(p, m)[0]),
            "rmse": float(np.sqrt(np.mean((p - m) ** 2))),
            "mue": float(np.mean(np.abs(p - m))),
        })
    json.dump({"results": out}, sys.stdout)


if __name__ == "__main__":
    main()
