"""Reference for the Boresch restraint correction: direct numerical integration
of the restraint's Boltzmann factor (scipy.integrate.quad), no small-width
approximations.

Reads JSON {"temperature_K": T, "restraints": [{r0, theta_a, theta_b, k_r,
k_theta_a, k_theta_b, k_phi_a, k_phi_b, k_phi_c}, ...]} on stdin and writes
{"release_kcal": [...]}: the free energy of releasing each restraint from the
decoupled ligand into the 1 M standard state, kcal/mol.

The restrained configuration integral factorises in the six Boresch
coordinates (Boresch et al. 2003, J. Phys. Chem. B 107, 9535): with the
Jacobians r^2 for the distance, sin(theta) for each angle and 1 for each
dihedral, Z = I_r * I_thetaA * I_thetaB * I_phiA * I_phiB * I_phiC, while the
unrestrained ligand at 1 M has Z0 = V0 * 8 pi^2. Then dG_release = kT ln(Z / Z0).
"""
import json
import math
import sys

from scipy import integrate

R_KCAL = 8.314462618e-3 / 4.184  # CODATA 2018 R, thermochemical calorie (NIST SP 811)
V0 = 1e27 / 6.02214076e23        # Å^3 per molecule at 1 mol/L


def release(r, T):
    kt = R_KCAL * T
    b = 1.0 / kt
    r0 = r["r0"]
    ta, tb = math.radians(r["theta_a"]), math.radians(r["theta_b"])
    # U = k/2 (x - x0)^2
    i_r, _ = integrate.quad(lambda x: x * x * math.exp(-0.5 * b * r["k_r"] * (x - r0) ** 2),
                            0.0, r0 + 40.0 * math.sqrt(kt / r["k_r"]), points=[r0], limit=400)
    def angle(k, t0):
        v, _ = integrate.quad(lambda t: math.sin(t) * math.exp(-0.5 * b * k * (t - t0) ** 2),
                              0.0, math.pi, points=[t0], limit=400)
        return v
    def dihedral(k):
        # The dihedral difference is periodic; measured from the reference it lies in (-pi, pi].
        v, _ = integrate.quad(lambda p: math.exp(-0.5 * b * k * p * p), -math.pi, math.pi,
                              points=[0.0], limit=400)
        return v
    z = (i_r * angle(r["k_theta_a"], ta) * angle(r["k_theta_b"], tb)
         * dihedral(r["k_phi_a"]) * dihedral(r["k_phi_b"]) * dihedral(r["k_phi_c"]))
    return kt * math.log(z / (V0 * 8.0 * math.pi ** 2))


def main():
    data = json.load(sys.stdin)
    out = [release(r, data["temperature_K"]) for r in data["restraints"]]
    json.dump({"release_kcal": out}, sys.stdout)


if __name__ == "__main__":
    main()
