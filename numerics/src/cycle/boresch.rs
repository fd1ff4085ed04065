//! The analytic standard-state correction of a Boresch restraint.

use crate::units::{kt_in, EnergyUnit, KJ_PER_KCAL};
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

/// Volume per molecule at the 1 M standard concentration, in Å³:
/// 10²⁷ Å³ per litre / N_A (N_A = 6.02214076 × 10²³ mol⁻¹, exact since SI 2019).
pub const STANDARD_VOLUME_A3: f64 = 1.0e27 / 6.022_140_76e23;

/// A six-degree-of-freedom restraint between receptor and ligand anchor atoms
/// (Boresch et al. 2003, J. Phys. Chem. B 107, 9535): one distance, two angles and
/// three dihedrals, each held by a harmonic term U = ½ k (x − x₀)².
///
/// Units follow the campaign file: r0 in Å, angles in degrees, k_r in
/// kcal/mol/Å², angular force constants in kcal/mol/rad². The reference
/// dihedrals do not enter the correction, so they are not needed here.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BoreschRestraint {
    /// Reference anchor–anchor distance, Å.
    pub r0: f64,
    /// Reference angle at the receptor side, degrees.
    pub theta_a: f64,
    /// Reference angle at the ligand side, degrees.
    pub theta_b: f64,
    /// Distance force constant, kcal/mol/Å².
    pub k_r: f64,
    /// Force constant of angle θ_A, kcal/mol/rad².
    pub k_theta_a: f64,
    /// Force constant of angle θ_B, kcal/mol/rad².
    pub k_theta_b: f64,
    /// Force constant of dihedral φ_A, kcal/mol/rad².
    pub k_phi_a: f64,
    /// Force constant of dihedral φ_B, kcal/mol/rad².
    pub k_phi_b: f64,
    /// Force constant of dihedral φ_C, kcal/mol/rad².
    pub k_phi_c: f64,
}

impl BoreschRestraint {
    /// Checks that the restraint can be evaluated: positive force constants and
    /// distance, reference angles strictly between 0° and 180° (at 0° or 180° the
    /// analytic formula diverges because sin θ = 0).
    pub fn validate(&self) -> Result<(), String> {
        let ks = [
            ("k_r", self.k_r),
            ("k_theta_a", self.k_theta_a),
            ("k_theta_b", self.k_theta_b),
            ("k_phi_a", self.k_phi_a),
            ("k_phi_b", self.k_phi_b),
            ("k_phi_c", self.k_phi_c),
        ];
        for (name, k) in ks {
            if !(k.is_finite() && k > 0.0) {
                return Err(format!("{name} = {k}: force constants must be positive"));
            }
        }
        if !(self.r0.is_finite() && self.r0 > 0.0) {
            return Err(format!("r0 = {} Å: the distance must be positive", self.r0));
        }
        for (name, t) in [("theta_a", self.theta_a), ("theta_b", self.theta_b)] {
            if !(t.is_finite() && t > 0.0 && t < 180.0) {
                return Err(format!(
                    "{name} = {t}°: reference angles must lie strictly between 0 and 180 degrees"
                ));
            }
        }
        Ok(())
    }

    /// Free energy of releasing the restraint from the decoupled ligand into the
    /// 1 M standard state, in `unit` at `temperature_k` (Boresch et al. 2003, J. Phys. Chem. B 107, 9535; equation number from memory: eq. 32):
    ///
    /// ΔG = −kT ln[ 8π² V° √(k_r k_θA k_θB k_φA k_φB k_φC) / (r0² sin θA sin θB (2π kT)³) ]
    ///
    /// Negative for any restraint that confines the ligand more than the standard
    /// volume does. The formula assumes stiff restraints (Gaussian integrals
    /// extended to infinity, r² and sin θ frozen at their reference values).
    pub fn release_free_energy(&self, temperature_k: f64, unit: EnergyUnit) -> f64 {
        // Work in kcal/mol and Å, the units the force constants are given in.
        let kt = kt_in(EnergyUnit::KcalPerMol, temperature_k);
        let k_product =
            self.k_r * self.k_theta_a * self.k_theta_b * self.k_phi_a * self.k_phi_b * self.k_phi_c;
        let numerator = 8.0 * PI * PI * STANDARD_VOLUME_A3 * k_product.sqrt();
        let denominator = self.r0
            * self.r0
            * self.theta_a.to_radians().sin()
            * self.theta_b.to_radians().sin()
            * (2.0 * PI * kt).powi(3);
        let dg_kcal = -kt * (numerator / denominator).ln();
        dg_kcal * KJ_PER_KCAL / unit.kj_per_unit(temperature_k)
    }
}
