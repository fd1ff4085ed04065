#!/usr/bin/env python3
"""TI quadrature by scipy, the reference for legwork's TI.

Reads {"segments": [{"x": [...], "y": [...], "sem": [...]}, ...]} on stdin and
prints {"trapezoid": {"value", "sigma"}, "spline": {"value", "sigma"}}: the sum over
segments of scipy.integrate.trapezoid and of the integral of
scipy.interpolate.CubicSpline(x, y, bc_type="natural"). Both rules are linear in y,
so each σ is sqrt(Σ c_i² sem_i²) with c_i the integral of the rule applied to the
i-th unit vector."""
import json, sys
import numpy as np
from scipy.integrate import trapezoid
from scipy.interpolate import CubicSpline

def spline_integral(x, y):
    if len(x) < 3:
        return trapezoid(y, x)
    return float(CubicSpline(x, y, bc_type="natural").integrate(x[0], x[-1]))

doc = json.load(sys.stdin)
out = {"trapezoid": [0.0, 0.0], "spline": [0.0, 0.0]}
for seg in doc["segments"]:
    x, y, s = (np.asarray(seg[k], dtype=float) for k in ("x", "y", "sem"))
    eye = np.eye(len(x))
    for name, rule in (("trapezoid", lambda v: float(trapezoid(v, x))), ("spline", lambda v: spline_integral(x, v))):
        c = np.array([rule(e) for e in eye])
        out[name][0] += rule(y)
        out[name][1] += float(np.sum(c ** 2 * s ** 2))
print(json.dumps({k: {"value": v, "sigma": v2 ** 0.5} for k, (v, v2) in out.items()}))
