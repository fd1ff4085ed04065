#!/usr/bin/env python3
"""A second engine of legwork's own, for the tests: one particle in D dimensions
in a harmonic well whose offset, centre and stiffness are switched by two λ
components, sampled exactly (independent draws from each state's Boltzmann
distribution), written in shapes unlike legwork's window table.

Potential at state (a, s), a = λ_charge, s = λ_shape:

    U(x; a, s) = a·c + ½ K(s) |x − a·d·e₁|²,   K(s) = (1 − s)·k_a + s·k_b

Free energy (Gaussian integral): F(a, s) = a·c − (D/2) kT ln(2π kT / K(s)), so
from (0, 0) to (1, 1):

    ΔF = c + (D/2) kT ln(k_b / k_a)

dU/da = c − K(s)·d·(x₁ − a·d);  dU/ds = ½ (k_b − k_a) |x − a·d·e₁|².

Energies are in kJ/mol (`--unit kcal/mol` divides by 4.184), lengths in nm.
Shapes:

- rows: `@` and `;` comment lines, a header, then one line per frame: step,
  a wall-clock column (to ignore), dU/dλ of both components, and the energy at
  every state relative to the sampled state (dE_j = U_j − U_sampled).
- blocks: each frame is a `frame N` line followed by `label = value` lines:
  time, the slopes of both components, the absolute energy at every state, and
  a label to ignore.

Only Python's standard library; deterministic for a given --seed.
"""

import argparse
import math
import os
import random
import sys

R_KJ = 8.314462618e-3  # kJ/(mol·K), CODATA 2018


def floats(text):
    return [float(v) for v in text.split(",") if v.strip() != ""]


def main():
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--shape", choices=["rows", "blocks"], required=True)
    p.add_argument("--charge", type=floats, required=True, help="λ_charge of every state")
    p.add_argument("--shape-lambdas", type=floats, required=True, help="λ_shape of every state")
    p.add_argument("--state", type=int, required=True)
    p.add_argument("--k-a", type=float, required=True)
    p.add_argument("--k-b", type=float, required=True)
    p.add_argument("--offset", type=float, required=True)
    p.add_argument("--shift", type=float, default=0.1)
    p.add_argument("--dimensions", type=int, default=3)
    p.add_argument("--temperature", type=float, default=300.0)
    p.add_argument("--frames", type=int, required=True)
    p.add_argument("--seed", type=int, required=True)
    p.add_argument("--unit", choices=["kJ/mol", "kcal/mol"], default="kJ/mol")
    p.add_argument("--declare", action="store_true",
                   help="write energy_unit and temperature_K comment lines")
    p.add_argument("--claim-state", type=int, help="write a 'state:' comment line with this value")
    p.add_argument("--declare-lambdas", action="store_true",
                   help="write 'lambdas.charge:' and 'lambdas.shape:' comment lines")
    p.add_argument("--output", required=True)
    p.add_argument("--count-file", help="append one line per run to this file")
    p.add_argument("--short-first-run", action="store_true",
                   help="on the first run of this output (per --count-file), write half the frames and exit 0, "
                        "as an engine stopped early would")
    a = p.parse_args()

    first_run = True
    if a.count_file:
        here = os.path.abspath(a.output)
        if os.path.exists(a.count_file):
            with open(a.count_file) as f:
                first_run = here not in (line.strip() for line in f)
        with open(a.count_file, "a") as f:
            f.write(f"{here}\n")
    if a.short_first_run and first_run:
        a.frames //= 2
    lam_c, lam_s = a.charge, a.shape_lambdas
    n = len(lam_c)
    if len(lam_s) != n or not 0 <= a.state < n:
        print("toy_engine: λ lists differ in length or --state is out of range", file=sys.stderr)
        return 2
    kt = R_KJ * a.temperature
    to_unit = 1.0 if a.unit == "kJ/mol" else 1.0 / 4.184
    rng = random.Random(a.seed)
    ca, cs = lam_c[a.state], lam_s[a.state]
    k_here = (1 - cs) * a.k_a + cs * a.k_b
    sigma = math.sqrt(kt / k_here)

    def energy(x, lc, ls):
        k = (1 - ls) * a.k_a + ls * a.k_b
        r2 = (x[0] - lc * a.shift) ** 2 + sum(v * v for v in x[1:])
        return lc * a.offset + 0.5 * k * r2

    tmp = a.output + ".part"
    with open(tmp, "w") as out:
        if a.shape == "rows":
            out.write("@ toy engine, row output\n")
            out.write("; energies relative to the sampled state\n")
            if a.declare:
                out.write(f"@ energy_unit: {a.unit}\n@ temperature_K: {a.temperature}\n")
            if a.claim_state is not None:
                out.write(f"@ state: {a.claim_state}\n")
            if a.declare_lambdas:
                out.write("@ lambdas.charge: " + " ".join(map(str, lam_c)) + "\n")
                out.write("@ lambdas.shape: " + " ".join(map(str, lam_s)) + "\n")
            cols = ["step", "wallclock", "dUdl_charge", "dUdl_shape"] + [f"dE_{j}" for j in range(n)]
            out.write("  ".join(cols) + "\n")
        else:
            out.write("# toy engine, block output\n")
            if a.declare:
                out.write(f"# energy_unit: {a.unit}\n# temperature_K: {a.temperature}\n")
            if a.claim_state is not None:
                out.write(f"# state: {a.claim_state}\n")
            if a.declare_lambdas:
                out.write("# lambdas.charge: " + " ".join(map(str, lam_c)) + "\n")
                out.write("# lambdas.shape: " + " ".join(map(str, lam_s)) + "\n")
        for t in range(a.frames):
            x = [ca * a.shift + rng.gauss(0.0, sigma)] + [rng.gauss(0.0, sigma) for _ in range(a.dimensions - 1)]
            r1 = x[0] - ca * a.shift
            r2 = r1 * r1 + sum(v * v for v in x[1:])
            du_c = a.offset - k_here * a.shift * r1
            du_s = 0.5 * (a.k_b - a.k_a) * r2
            us = [energy(x, lam_c[j], lam_s[j]) for j in range(n)]
            if a.shape == "rows":
                here = us[a.state]
                fields = [str(t), f"{0.001 * t:.3f}", f"{du_c * to_unit:.10g}", f"{du_s * to_unit:.10g}"]
                fields += [f"{(u - here) * to_unit:.10g}" for u in us]
                out.write("  ".join(fields) + "\n")
                if t % 97 == 0:
                    out.write("; progress note\n")
            else:
                out.write(f"frame {t}\n  time = {0.002 * t:.3f}\n")
                out.write(f"  slope charge = {du_c * to_unit:.10g}\n")
                out.write(f"  slope shape = {du_s * to_unit:.10g}\n")
                for j, u in enumerate(us):
                    out.write(f"  energy at state {j} = {u * to_unit:.10g}\n")
                out.write(f"  kinetic = {1.5 * kt:.6f}\n")
    os.replace(tmp, a.output)
    return 0


if __name__ == "__main__":
    sys.exit(main())
