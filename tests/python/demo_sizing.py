"""How accurately can the demo campaign's edges be estimated? A sizing check, not a test.

Runs the demo engine for every edge of demo-data/exact.csv exactly as the demo
campaign does (12 windows, `ends` spacing (1 − cos(πi/11))/2, 2000 frames, φ = 0.9,
2 replicas, prepared start), estimates each leg by MBAR (self-consistent iteration,
Shirts & Chodera 2008, J. Chem. Phys. 129, 124105, eq. 11) after dropping the first
DISCARD frames, and prints each edge's error against the exact ΔΔG over SEEDS
independent repetitions. Slow (minutes): run by hand after changing ligands.csv.

usage: demo_sizing.py ENGINE DISCARD SEEDS
"""
import csv, os, subprocess, sys, tempfile
import numpy as np
from scipy.special import logsumexp

engine, discard, seeds = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
here = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "demo-data")
lig = {r["id"]: r for r in csv.DictReader(open(os.path.join(here, "ligands.csv")))}
exact = [(r["ligand_a"], r["ligand_b"], float(r["ddg_exact"])) for r in csv.DictReader(open(os.path.join(here, "exact.csv")))]
kt = 8.314462618e-3 * 298.15 / 4.184  # kcal/mol (CODATA 2018 R, NIST SP 811 calorie)
lam = (1 - np.cos(np.pi * np.arange(12) / 11)) / 2
lams = ",".join(repr(float(x)) for x in lam)
tmp = tempfile.mkdtemp()


def mbar(u_kn, n_k):
    f = np.zeros(u_kn.shape[0])
    for _ in range(100000):
        lw = logsumexp(f[:, None] + np.log(n_k)[:, None] - u_kn, axis=0)
        new = -logsumexp(-u_kn - lw[None, :], axis=1)
        new -= new[0]
        if np.max(np.abs(new - f)) < 1e-10:
            return new
        f = new
    return f


def leg(a, b, env, seed):
    A, B = lig[a], lig[b]
    start = os.path.join(tmp, "start.txt")
    subprocess.run([engine, "prepare", "--a-k", A[env + "_k"], "--a-shift", A[env + "_shift"], "--output", start], check=True)
    us = []
    for s in range(12):
        out = os.path.join(tmp, f"w{s}.tsv")
        subprocess.run([engine, "run", "--a-offset", A[env + "_offset"], "--a-k", A[env + "_k"], "--a-shift", A[env + "_shift"],
                        "--b-offset", B[env + "_offset"], "--b-k", B[env + "_k"], "--b-shift", B[env + "_shift"],
                        "--lambdas", lams, "--state", str(s), "--frames", "2000", "--seed", str(seed * 1000 + s),
                        "--start", start, "--output", out], check=True)
        us.append(np.loadtxt(out, comments="#", skiprows=6)[discard:, 2:] / kt)
    f = mbar(np.concatenate(us).T, np.array([len(u) for u in us], float))
    return (f[-1] - f[0]) * kt


for a, b, ddg in exact:
    errs = np.array([np.mean([leg(a, b, "complex", 10 * s + r) - leg(a, b, "solvent", 10 * s + r) for r in range(2)]) - ddg
                     for s in range(seeds)])
    print(f"{a}+{b} exact {ddg:+.3f}  mean error {errs.mean():+.3f}  sd {errs.std(ddof=1):.3f}  max |error| {abs(errs).max():.3f}", flush=True)
