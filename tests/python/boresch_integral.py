"""Reference for the Boresch restraint correction: direct numerical integration
of the restraint's Boltzmann factor, no small-width approximations, two ways.

Reads JSON {"temperature_K": T, "restraints": [{r0, theta_a, theta_b, k_r,
k_theta_a, k_theta_b, k_phi_a, k_phi_b, k_phi_c}, ...]} on stdin and writes
{"release_kcal": [...], "release_tplquad_kcal": [...]}: the free energy of
releasing each restraint from the decoupled ligand into the 1 M standard
state, kcal/mol.

The restrained configuration integral factorises in the six Boresch
coordinates (Boresch et al. 2003, J. Phys. Chem. B 107, 9535): with the
Jacobians r^2 for the distance, sin(theta) for each angle and 1 for each
dihedral, Z = I_r * I_thetaA * I_thetaB * I_phiA * I_phiB * I_phiC, while the
unrestrained ligand at 1 M has Z0 = V0 * 8 pi^2. Then dG_release = kT ln(Z / Z0).

- release_kcal: each of the six factors by scipy.integrate.quad (adaptive
  Gauss-Kronrod, QUADPACK qagse) over the factor's whole range.
- release_tplquad_kcal: the three factors of the ligand's position (r, theta_A,
  phi_A) as one triple integral by scipy.integrate.tplquad (nested quad), which
  does not assume the factorisation of that part; the orientation factors by quad.
"""
import json
import math
import sys

from scipy import integrate

R_KCAL = 8.314462618e-3 / 4.184  # CODATA 2018 R, thermochemical calorie (NIST SP 811)
V0 = 1e27 / 6.02214076e23        # Å^3 per molecule at 1 mol/L


def factors(r, kt):
    """The six one-dimensional integrals, each by quad."""
    b = 1.0 / kt
    r0 = r["r0"]
    ta, tb = math.radians(r["theta_a"]), math.radians(r["theta_b"])
    s_r = math.sqrt(kt / r["k_r"])
    # U = k/2 (x - x0)^2
    i_r, _ = integrate.quad(lambda x: x * x * math.exp(-0.5 * b * r["k_r"] * (x - r0) ** 2),
                            max(0.0, r0 - 40.0 * s_r), r0 + 40.0 * s_r, points=[r0],
                            limit=400, epsabs=0.0, epsrel=1e-12)

    def angle(k, t0):
        v, _ = integrate.quad(lambda t: math.sin(t) * math.exp(-0.5 * b * k * (t - t0) ** 2),
                              0.0, math.pi, points=[t0], limit=400, epsabs=0.0, epsrel=1e-12)
        return v

    def dihedral(k):
        # The dihedral difference is periodic; measured from the reference it lies in (-pi, pi].
        v, _ = integrate.quad(lambda p: math.exp(-0.5 * b * k * p * p), -math.pi, math.pi,
                              points=[0.0], limit=400, epsabs=0.0, epsrel=1e-12)
        return v

    return (i_r, angle(r["k_theta_a"], ta), angle(r["k_theta_b"], tb),
            dihedral(r["k_phi_a"]), dihedral(r["k_phi_b"]), dihedral(r["k_phi_c"]))


def position_tplquad(r, kt):
    """∫∫∫ r² sin(θA) exp(−β[U_r + U_θA + U_φA]) dφA dθA dr by tplquad, each
    range cut to 12 widths sqrt(kT/k) about the reference (exp(-72) ~ 5e-32 beyond)."""
    b = 1.0 / kt
    r0, t0 = r["r0"], math.radians(r["theta_a"])
    kr, kt_a, kp = r["k_r"], r["k_theta_a"], r["k_phi_a"]
    w = lambda k: 12.0 * math.sqrt(kt / k)
    f = lambda p, t, x: (x * x * math.sin(t)
                         * math.exp(-0.5 * b * (kr * (x - r0) ** 2 + kt_a * (t - t0) ** 2
                                                + kp * p * p)))
    p_half = min(math.pi, w(kp))
    v, _ = integrate.tplquad(f, max(0.0, r0 - w(kr)), r0 + w(kr),
                             max(0.0, t0 - w(kt_a)), min(math.pi, t0 + w(kt_a)),
                             -p_half, p_half, epsabs=0.0, epsrel=1e-8)
    return v


def release(r, T):
    kt = R_KCAL * T
    z = math.prod(factors(r, kt))
    return kt * math.log(z / (V0 * 8.0 * math.pi ** 2))


def release_tplquad(r, T):
    kt = R_KCAL * T
    f = factors(r, kt)
    z = position_tplquad(r, kt) * f[2] * f[4] * f[5]
    return kt * math.log(z / (V0 * 8.0 * math.pi ** 2))


def main():
    data = json.load(sys.stdin)
    t = data["temperature_K"]
    json.dump({
        "release_kcal": [release(r, t) for r in data["restraints"]],
        "release_tplquad_kcal": [release_tplquad(r, t) for r in data["restraints"]],
    }, sys.stdout)


if __name__ == "__main__":
    main()
