"""F(λ) of the demo engine's toy system by numerical quadrature (scipy.integrate.quad).

Reads the engine's `run --exact --json` output on stdin and the same parameters as
arguments; computes F(λ) = −kT ln ∫ exp(−U_λ(x)/kT) dx without completing the square.
The integrand factorises over coordinates (U_λ is a sum of per-coordinate terms), so
the d-dimensional integral is a product of 1-D integrals. Exits 1 on disagreement.
"""
import argparse, json, math, sys
from scipy.integrate import quad

R_KJ = 8.314462618e-3  # kJ/(mol K), CODATA 2018
KJ_PER_KCAL = 4.184    # thermochemical calorie, NIST SP 811

p = argparse.ArgumentParser()
for name in ["a-offset", "a-k", "a-shift", "b-offset", "b-k", "b-shift"]:
    p.add_argument("--" + name, type=float, required=True)
p.add_argument("--dimensions", type=int, default=3)
p.add_argument("--temperature", type=float, default=298.15)
p.add_argument("--unit", default="kcal/mol")
a = p.parse_args()
report = json.load(sys.stdin)

kt = R_KJ * a.temperature / KJ_PER_KCAL  # kcal/mol
to_unit = {"kcal/mol": 1.0, "kJ/mol": KJ_PER_KCAL, "kT": 1.0 / kt}[a.unit]


def free_energy(lam):
    const = (1 - lam) * a.a_offset + lam * a.b_offset
    log_z = -const / kt
    for i in range(a.dimensions):
        ca, cb = (a.a_shift, a.b_shift) if i == 0 else (0.0, 0.0)
        f = lambda x: math.exp(-0.5 * ((1 - lam) * a.a_k * (x - ca) ** 2 + lam * a.b_k * (x - cb) ** 2) / kt)
        mid = ((1 - lam) * a.a_k * ca + lam * a.b_k * cb) / ((1 - lam) * a.a_k + lam * a.b_k)
        val, _ = quad(lambda y: f(y + mid), -math.inf, math.inf, epsabs=0, epsrel=1e-12)
        log_z += math.log(val)
    return -kt * log_z


bad = 0
f0 = free_energy(report["states"][0]["lambda"])
for s in report["states"]:
    f = free_energy(s["lambda"])
    for got, want, what in [(s["free_energy"], f * to_unit, "F"), (s["relative"], (f - f0) * to_unit, "F - F0")]:
        ok = abs(got - want) <= 1e-8 * max(1.0, abs(want))
        print(f"λ={s['lambda']:<5} {what:7} engine {got:+.10f}  quad {want:+.10f}  {'ok' if ok else 'MISMATCH'}")
        bad += not ok
dg = (free_energy(1.0) - free_energy(0.0)) * to_unit
if abs(report["delta_g"] - dg) > 1e-8 * max(1.0, abs(dg)):
    print(f"ΔG engine {report['delta_g']} quad {dg} MISMATCH")
    bad += 1
sys.exit(1 if bad else 0)
