#!/usr/bin/env python3
"""TI quadrature by scipy, the reference for legwork's TI.

Reads {"segments": [{"x": [...], "y": [...], "sem": [...]}, ...]} on stdin and
prints {"trapezoid": {"value", "sigma"}, "spline": {"value", "sigma"}}: the sum over
segments of scipy.integrate.trapezoid and of the integral of
scipy.interpolate.CubicSpline(x, y, bc_type="natural"). Both rules are linear in y,
so each σ is sqrt(Σ c_i² sem_i²) with c_i the integral of the rule applied to the
i-th unit vector.

With "frames" (per state, per frame, dU/dλ of every component) and, per segment,
"states" (the state of each node) and "component", σ comes instead from the
per-frame total z_n = Σ_c w_ic y_nc of each window (w the rule's weights), so the
covariance between components sampled from the same frames is kept:
σ² = Σ_i g_i var(z)_i / n_i, with g the statistical inefficiency of z by Geyer's
initial positive sequence (Geyer 1992, Statist. Sci. 7, 473) corrected to first
order for the bias that subtracting the sample mean puts into the autocovariance
(E[Ĉ(t)] ≈ C(t) − C(0) g/N)."""
import json, sys
import numpy as np
from scipy.integrate import trapezoid
from scipy.interpolate import CubicSpline

def spline_integral(x, y):
    if len(x) < 3:
        return trapezoid(y, x)
    return float(CubicSpline(x, y, bc_type="natural").integrate(x[0], x[-1]))

def inefficiency(x):
    n = len(x)
    d = np.asarray(x, dtype=float) - np.mean(x)
    c0 = float(d @ d) / n
    if n < 3 or c0 <= 0:
        return 1.0
    t = np.arange(1, n - 1)
    acov = np.correlate(d, d, mode="full")[n:2 * n - 2]  # lags 1 .. n-2
    rho = acov / ((n - t) * c0) * (1 - t / n)
    rho = np.concatenate(([1.0], rho))  # rho[t] for t = 0 .. n-2
    g, last = -1.0, 0
    for m in range(0, (len(rho)) // 2):
        pair = rho[2 * m] + rho[2 * m + 1]
        if pair <= 0:
            break
        g += 2 * pair
        last = 2 * m + 1
    g = max(g, 1.0)
    shrink = min(max((2 * last + 1 - g) / n, 0.0), 0.2)
    return max(g / (1 - shrink), 1.0)

doc = json.load(sys.stdin)
out = {"trapezoid": [0.0, 0.0], "spline": [0.0, 0.0]}
for seg in doc["segments"]:
    x, y, s = (np.asarray(seg[k], dtype=float) for k in ("x", "y", "sem"))
    eye = np.eye(len(x))
    for name, rule in (("trapezoid", lambda v: float(trapezoid(v, x))), ("spline", lambda v: spline_integral(x, v))):
        c = np.array([rule(e) for e in eye])
        out[name][0] += rule(y)
        out[name][1] += float(np.sum(c ** 2 * s ** 2))
frames = doc.get("frames")
if frames is not None:
    k, c = len(frames), len(frames[0][0])
    for name, rule in (("trapezoid", None), ("spline", None)):
        w = np.zeros((k, c))
        for seg in doc["segments"]:
            x = np.asarray(seg["x"], dtype=float)
            eye = np.eye(len(x))
            f = (lambda v: float(trapezoid(v, x))) if name == "trapezoid" else (lambda v: spline_integral(x, v))
            w[seg["states"], seg["component"]] += [f(e) for e in eye]
        var = 0.0
        for i in range(k):
            z = np.asarray(frames[i], dtype=float) @ w[i]
            var += inefficiency(z) * np.var(z, ddof=1) / len(z)
        out[name][1] = var
print(json.dumps({k: {"value": v, "sigma": v2 ** 0.5} for k, (v, v2) in out.items()}))
