//! The standard-state correction of a Boresch restraint: by numerical quadrature
//! of its six one-dimensional integrals, with the analytic harmonic formula as a
//! cross-check.

use super::quadrature::{integrate, peak_breaks};
use crate::units::{kt_in, EnergyUnit, KJ_PER_KCAL};
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;
use std::fmt;

/// Volume per molecule at the 1 M standard concentration, in Å³:
/// 10²⁷ Å³ per litre / N_A (N_A = 6.02214076 × 10²³ mol⁻¹, exact since SI 2019).
///
/// ```
/// use legwork_numerics::cycle::STANDARD_VOLUME_A3;
/// assert!((STANDARD_VOLUME_A3 - 1660.539).abs() < 1e-3);
/// ```
pub const STANDARD_VOLUME_A3: f64 = 1.0e27 / 6.022_140_76e23;

/// Above this difference (kcal/mol) between the analytic formula and the
/// quadrature, [`RestraintRelease::analytic_departs`] is true and the cycle
/// carries a warning. The threshold is the one the issue tracker asked for
/// (common practice, no source): a tenth of the ~0.5 kcal/mol a chemist reads
/// as a meaningful difference.
pub const ANALYTIC_TOLERANCE_KCAL: f64 = 0.05;

/// Half-width of each integration range in standard deviations of the
/// Boltzmann factor's Gaussian, √(kT/k): exp(−40²/2) ≈ 10⁻³⁴⁸ underflows, so
/// nothing outside it contributes in double precision.
const SUPPORT_WIDTHS: f64 = 40.0;

/// Relative tolerance of each one-dimensional integral (its error enters ΔG as
/// kT × 10⁻¹², far below anything reported).
const REL_TOL: f64 = 1e-12;

/// A six-degree-of-freedom restraint between receptor and ligand anchor atoms
/// (Boresch et al. 2003, J. Phys. Chem. B 107, 9535): one distance, two angles and
/// three dihedrals, each held by a harmonic term U = ½ k (x − x₀)².
///
/// Units: r0 in Å, angles in degrees, k_r in kcal/mol/Å², angular force
/// constants in kcal/mol/rad². The reference dihedrals do not enter the
/// correction (each dihedral is integrated over its full period), so they are
/// not needed here.
///
/// ```
/// use legwork_numerics::cycle::BoreschRestraint;
/// use legwork_numerics::units::EnergyUnit;
/// let r = BoreschRestraint {
///     r0: 5.0, theta_a: 90.0, theta_b: 90.0,
///     k_r: 10.0, k_theta_a: 10.0, k_theta_b: 10.0,
///     k_phi_a: 10.0, k_phi_b: 10.0, k_phi_c: 10.0,
/// };
/// r.validate()?;
/// let release = r.release(298.15, EnergyUnit::KcalPerMol)?;
/// assert!(release.quadrature < 0.0); // releasing into 1 M is favourable
/// assert!(!release.analytic_departs(298.15, EnergyUnit::KcalPerMol));
/// # Ok::<(), legwork_numerics::cycle::RestraintError>(())
/// ```
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

/// One parameter of a [`BoreschRestraint`], for errors that point at it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum RestraintParameter {
    /// `r0`
    R0,
    /// `theta_a`
    ThetaA,
    /// `theta_b`
    ThetaB,
    /// `k_r`
    KR,
    /// `k_theta_a`
    KThetaA,
    /// `k_theta_b`
    KThetaB,
    /// `k_phi_a`
    KPhiA,
    /// `k_phi_b`
    KPhiB,
    /// `k_phi_c`
    KPhiC,
}

impl RestraintParameter {
    /// The name of the [`BoreschRestraint`] field it is (`r0`, `theta_a`, `k_r`, …).
    ///
    /// ```
    /// use legwork_numerics::cycle::RestraintParameter;
    /// assert_eq!(RestraintParameter::KPhiB.field(), "k_phi_b");
    /// ```
    pub fn field(self) -> &'static str {
        match self {
            RestraintParameter::R0 => "r0",
            RestraintParameter::ThetaA => "theta_a",
            RestraintParameter::ThetaB => "theta_b",
            RestraintParameter::KR => "k_r",
            RestraintParameter::KThetaA => "k_theta_a",
            RestraintParameter::KThetaB => "k_theta_b",
            RestraintParameter::KPhiA => "k_phi_a",
            RestraintParameter::KPhiB => "k_phi_b",
            RestraintParameter::KPhiC => "k_phi_c",
        }
    }

    /// The unit its value is in.
    ///
    /// ```
    /// use legwork_numerics::cycle::RestraintParameter;
    /// assert_eq!(RestraintParameter::KR.unit(), "kcal/mol/Å²");
    /// ```
    pub fn unit(self) -> &'static str {
        match self {
            RestraintParameter::R0 => "Å",
            RestraintParameter::ThetaA | RestraintParameter::ThetaB => "°",
            RestraintParameter::KR => "kcal/mol/Å²",
            _ => "kcal/mol/rad²",
        }
    }
}

impl fmt::Display for RestraintParameter {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.field())
    }
}

/// Why a restraint cannot be evaluated. The messages name the restraint's own
/// fields; a caller that read the restraint from a file adds where it was.
#[derive(Debug, Clone, Copy, PartialEq, thiserror::Error)]
pub enum RestraintError {
    /// A force constant is zero, negative or not finite. A zero force constant
    /// leaves a degree of freedom free, so the restraint holds nothing there and
    /// its correction is not defined.
    #[error("{parameter} = {value} {}: a force constant must be a finite number above 0", parameter.unit())]
    ForceConstant {
        /// Which constant.
        parameter: RestraintParameter,
        /// Its value.
        value: f64,
    },
    /// The reference distance is not a finite positive number.
    #[error("r0 = {value} Å: the reference distance must be a finite number above 0")]
    Distance {
        /// Its value.
        value: f64,
    },
    /// A reference angle is at or beyond 0° or 180° (at a straight angle the
    /// dihedrals built on it are undefined).
    #[error("{parameter} = {value}°: a reference angle must lie strictly between 0° and 180° (at a straight angle its dihedrals are undefined)")]
    Angle {
        /// Which angle.
        parameter: RestraintParameter,
        /// Its value.
        value: f64,
    },
    /// The temperature is not a finite positive number.
    #[error("temperature = {value} K: it must be a finite number above 0")]
    Temperature {
        /// Its value.
        value: f64,
    },
    /// A one-dimensional integral did not reach its tolerance (not seen for
    /// valid restraints; reported rather than returned as a number).
    #[error("the quadrature of the {parameter} factor did not converge (error estimate {error:e} of {value:e})")]
    Quadrature {
        /// The factor (its force constant).
        parameter: RestraintParameter,
        /// The integral reached.
        value: f64,
        /// Its error estimate.
        error: f64,
    },
}

impl RestraintError {
    /// The parameter at fault, if the error is about one.
    ///
    /// ```
    /// use legwork_numerics::cycle::{RestraintError, RestraintParameter};
    /// let e = RestraintError::Distance { value: -1.0 };
    /// assert_eq!(e.parameter(), Some(RestraintParameter::R0));
    /// ```
    pub fn parameter(&self) -> Option<RestraintParameter> {
        match self {
            RestraintError::ForceConstant { parameter, .. }
            | RestraintError::Angle { parameter, .. }
            | RestraintError::Quadrature { parameter, .. } => Some(*parameter),
            RestraintError::Distance { .. } => Some(RestraintParameter::R0),
            RestraintError::Temperature { .. } => None,
        }
    }
}

/// The free energy of releasing a restraint into the 1 M standard state, two ways.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct RestraintRelease {
    /// By quadrature of the six one-dimensional integrals: the value used.
    pub quadrature: f64,
    /// By the analytic harmonic formula (Boresch et al. 2003): a cross-check.
    pub analytic: f64,
    /// Error estimate of `quadrature` (from the integrals' Gauss–Kronrod error
    /// estimates, propagated through kT ln).
    pub quadrature_error: f64,
}

impl RestraintRelease {
    /// `analytic − quadrature`.
    pub fn difference(&self) -> f64 {
        self.analytic - self.quadrature
    }

    /// Whether the analytic formula is off by more than
    /// [`ANALYTIC_TOLERANCE_KCAL`]; `unit` and `temperature_k` are those the
    /// release was computed in.
    ///
    /// ```
    /// use legwork_numerics::cycle::RestraintRelease;
    /// use legwork_numerics::units::EnergyUnit;
    /// let r = RestraintRelease { quadrature: -5.0, analytic: -4.9, quadrature_error: 0.0 };
    /// assert!(r.analytic_departs(300.0, EnergyUnit::KcalPerMol));
    /// assert!(!r.analytic_departs(300.0, EnergyUnit::KjPerMol)); // 0.1 kJ/mol < 0.05 kcal/mol
    /// ```
    pub fn analytic_departs(&self, temperature_k: f64, unit: EnergyUnit) -> bool {
        let kcal = self.difference().abs() * unit.factor_to(EnergyUnit::KcalPerMol, temperature_k);
        kcal > ANALYTIC_TOLERANCE_KCAL
    }
}

impl BoreschRestraint {
    /// The force constants with the parameter each one is.
    fn force_constants(&self) -> [(RestraintParameter, f64); 6] {
        [
            (RestraintParameter::KR, self.k_r),
            (RestraintParameter::KThetaA, self.k_theta_a),
            (RestraintParameter::KThetaB, self.k_theta_b),
            (RestraintParameter::KPhiA, self.k_phi_a),
            (RestraintParameter::KPhiB, self.k_phi_b),
            (RestraintParameter::KPhiC, self.k_phi_c),
        ]
    }

    /// Checks that the restraint can be evaluated: every force constant finite
    /// and above 0, r0 finite and above 0, both reference angles strictly
    /// between 0° and 180°. The one rule for every caller (checking a campaign
    /// before it runs, and closing a cycle after).
    ///
    /// # Errors
    ///
    /// The first parameter that breaks the rule, as a [`RestraintError`]
    /// (force constants first, then r0, then the angles).
    ///
    /// ```
    /// use legwork_numerics::cycle::{BoreschRestraint, RestraintError, RestraintParameter};
    /// let mut r = BoreschRestraint {
    ///     r0: 5.0, theta_a: 90.0, theta_b: 90.0,
    ///     k_r: 10.0, k_theta_a: 10.0, k_theta_b: 10.0,
    ///     k_phi_a: 10.0, k_phi_b: 10.0, k_phi_c: 10.0,
    /// };
    /// assert!(r.validate().is_ok());
    /// r.k_phi_c = 0.0;
    /// assert_eq!(
    ///     r.validate(),
    ///     Err(RestraintError::ForceConstant { parameter: RestraintParameter::KPhiC, value: 0.0 })
    /// );
    /// ```
    pub fn validate(&self) -> Result<(), RestraintError> {
        for (parameter, value) in self.force_constants() {
            if !(value.is_finite() && value > 0.0) {
                return Err(RestraintError::ForceConstant { parameter, value });
            }
        }
        if !(self.r0.is_finite() && self.r0 > 0.0) {
            return Err(RestraintError::Distance { value: self.r0 });
        }
        for (parameter, value) in [
            (RestraintParameter::ThetaA, self.theta_a),
            (RestraintParameter::ThetaB, self.theta_b),
        ] {
            if !(value.is_finite() && value > 0.0 && value < 180.0) {
                return Err(RestraintError::Angle { parameter, value });
            }
        }
        Ok(())
    }

    /// Free energy of releasing the restraint from the decoupled ligand into the
    /// 1 M standard state, in `unit` at `temperature_k`, by quadrature and by the
    /// analytic formula.
    ///
    /// The restrained configuration integral factorises in the six Boresch
    /// coordinates: Z = I_r · I_θA · I_θB · I_φA · I_φB · I_φC with
    ///
    /// - I_r = ∫₀^∞ r² e^{−β k_r (r − r0)²/2} dr (the r² Jacobian),
    /// - I_θ = ∫₀^π sin θ e^{−β k_θ (θ − θ0)²/2} dθ (the sin θ Jacobian),
    /// - I_φ = ∫₋π^π e^{−β k_φ Δφ²/2} dΔφ (the full period, Δφ the periodic
    ///   difference from the reference dihedral),
    ///
    /// while the free ligand at 1 M has Z° = V° · 8π² (V° =
    /// [`STANDARD_VOLUME_A3`]; 8π² = ∫ sin θ dθ dφ dψ over all orientations).
    /// Then ΔG_release = −kT ln(Z° / Z) (Boresch et al. 2003, J. Phys. Chem. B
    /// 107, 9535, who give Z in this factorised form).
    ///
    /// Each integral is taken by adaptive 15-point Gauss–Kronrod quadrature on
    /// the part of its range within 40 √(kT/k) of the reference value (outside
    /// it the integrand underflows), to a relative error of 10⁻¹².
    ///
    /// The analytic formula extends each Gaussian to infinity and freezes r² and
    /// sin θ at their reference values:
    /// ΔG = −kT ln[ 8π² V° √(k_r k_θA k_θB k_φA k_φB k_φC) / (r0² sin θA sin θB (2π kT)³) ]
    /// (Boresch et al. 2003, eq. 32; equation number from memory). It is exact
    /// only in the stiff limit.
    ///
    /// # Errors
    ///
    /// [`RestraintError`] when [`validate`](Self::validate) fails, when the
    /// temperature is not positive, or (not seen for valid input) when an
    /// integral does not converge.
    ///
    /// ```
    /// use legwork_numerics::cycle::BoreschRestraint;
    /// use legwork_numerics::units::EnergyUnit;
    /// // A weak restraint: the analytic formula is visibly off.
    /// let weak = BoreschRestraint {
    ///     r0: 3.0, theta_a: 90.0, theta_b: 90.0,
    ///     k_r: 1.0, k_theta_a: 1.0, k_theta_b: 1.0,
    ///     k_phi_a: 1.0, k_phi_b: 1.0, k_phi_c: 1.0,
    /// };
    /// let r = weak.release(298.15, EnergyUnit::KcalPerMol)?;
    /// assert!(r.analytic_departs(298.15, EnergyUnit::KcalPerMol));
    /// # Ok::<(), legwork_numerics::cycle::RestraintError>(())
    /// ```
    pub fn release(
        &self,
        temperature_k: f64,
        unit: EnergyUnit,
    ) -> Result<RestraintRelease, RestraintError> {
        self.validate()?;
        if !(temperature_k.is_finite() && temperature_k > 0.0) {
            return Err(RestraintError::Temperature {
                value: temperature_k,
            });
        }
        // Work in kcal/mol, Å and rad, the units the force constants are given in.
        let kt = kt_in(EnergyUnit::KcalPerMol, temperature_k);
        let ta = self.theta_a.to_radians();
        let tb = self.theta_b.to_radians();
        let factors = [
            (
                RestraintParameter::KR,
                distance_factor(self.r0, self.k_r, kt),
            ),
            (
                RestraintParameter::KThetaA,
                angle_factor(ta, self.k_theta_a, kt),
            ),
            (
                RestraintParameter::KThetaB,
                angle_factor(tb, self.k_theta_b, kt),
            ),
            (RestraintParameter::KPhiA, dihedral_factor(self.k_phi_a, kt)),
            (RestraintParameter::KPhiB, dihedral_factor(self.k_phi_b, kt)),
            (RestraintParameter::KPhiC, dihedral_factor(self.k_phi_c, kt)),
        ];
        let (mut ln_z, mut rel_err) = (0.0, 0.0);
        for (parameter, q) in factors {
            if !q.converged || q.value.is_nan() || q.value <= 0.0 {
                return Err(RestraintError::Quadrature {
                    parameter,
                    value: q.value,
                    error: q.error,
                });
            }
            ln_z += q.value.ln();
            rel_err += q.error / q.value;
        }
        let ln_z0 = (8.0 * PI * PI * STANDARD_VOLUME_A3).ln();
        let to_unit = KJ_PER_KCAL / unit.kj_per_unit(temperature_k);
        Ok(RestraintRelease {
            quadrature: kt * (ln_z - ln_z0) * to_unit,
            analytic: self.analytic_kcal(kt) * to_unit,
            quadrature_error: kt * rel_err * to_unit,
        })
    }

    /// The release free energy by quadrature (the `quadrature` of
    /// [`release`](Self::release)), in `unit` at `temperature_k`.
    ///
    /// # Panics
    ///
    /// When [`release`](Self::release) fails: call [`validate`](Self::validate)
    /// first, or use `release` to get the error.
    ///
    /// ```
    /// use legwork_numerics::cycle::BoreschRestraint;
    /// use legwork_numerics::units::EnergyUnit;
    /// let r = BoreschRestraint {
    ///     r0: 5.2, theta_a: 90.0, theta_b: 90.0,
    ///     k_r: 10.0, k_theta_a: 10.0, k_theta_b: 10.0,
    ///     k_phi_a: 10.0, k_phi_b: 10.0, k_phi_c: 10.0,
    /// };
    /// let kcal = r.release_free_energy(298.15, EnergyUnit::KcalPerMol);
    /// let kj = r.release_free_energy(298.15, EnergyUnit::KjPerMol);
    /// assert!((kj - 4.184 * kcal).abs() < 1e-9);
    /// ```
    pub fn release_free_energy(&self, temperature_k: f64, unit: EnergyUnit) -> f64 {
        match self.release(temperature_k, unit) {
            Ok(r) => r.quadrature,
            Err(e) => panic!("restraint cannot be evaluated: {e}"),
        }
    }

    /// The release free energy by the analytic harmonic formula only (see
    /// [`release`](Self::release)), in `unit` at `temperature_k`. Defined for
    /// any input; meaningful only for a restraint that passes
    /// [`validate`](Self::validate), and accurate only when it is stiff.
    ///
    /// ```
    /// use legwork_numerics::cycle::BoreschRestraint;
    /// use legwork_numerics::units::EnergyUnit;
    /// let r = BoreschRestraint {
    ///     r0: 5.2, theta_a: 90.0, theta_b: 90.0,
    ///     k_r: 10.0, k_theta_a: 10.0, k_theta_b: 10.0,
    ///     k_phi_a: 10.0, k_phi_b: 10.0, k_phi_c: 10.0,
    /// };
    /// let g = r.release_free_energy_analytic(298.15, EnergyUnit::KcalPerMol);
    /// assert!((g - (-6.7845)).abs() < 2e-3);
    /// ```
    pub fn release_free_energy_analytic(&self, temperature_k: f64, unit: EnergyUnit) -> f64 {
        let kt = kt_in(EnergyUnit::KcalPerMol, temperature_k);
        self.analytic_kcal(kt) * KJ_PER_KCAL / unit.kj_per_unit(temperature_k)
    }

    fn analytic_kcal(&self, kt: f64) -> f64 {
        let k_product: f64 = self.force_constants().iter().map(|(_, k)| k).product();
        let numerator = 8.0 * PI * PI * STANDARD_VOLUME_A3 * k_product.sqrt();
        let denominator = self.r0
            * self.r0
            * self.theta_a.to_radians().sin()
            * self.theta_b.to_radians().sin()
            * (2.0 * PI * kt).powi(3);
        -kt * (numerator / denominator).ln()
    }
}

/// I_r = ∫₀^∞ r² exp(−k (r − r0)² / 2kT) dr, Å³.
fn distance_factor(r0: f64, k: f64, kt: f64) -> super::quadrature::Quadrature {
    let s = (kt / k).sqrt();
    let lo = (r0 - SUPPORT_WIDTHS * s).max(0.0);
    let hi = r0 + SUPPORT_WIDTHS * s;
    let breaks = peak_breaks(r0, s);
    integrate(
        |r| r * r * (-0.5 * ((r - r0) / s).powi(2)).exp(),
        lo,
        hi,
        &breaks,
        REL_TOL,
        0.0,
    )
}

/// I_θ = ∫₀^π sin θ exp(−k (θ − θ0)² / 2kT) dθ.
fn angle_factor(theta0: f64, k: f64, kt: f64) -> super::quadrature::Quadrature {
    let s = (kt / k).sqrt();
    let lo = (theta0 - SUPPORT_WIDTHS * s).max(0.0);
    let hi = (theta0 + SUPPORT_WIDTHS * s).min(PI);
    let breaks = peak_breaks(theta0, s);
    integrate(
        |t| t.sin() * (-0.5 * ((t - theta0) / s).powi(2)).exp(),
        lo,
        hi,
        &breaks,
        REL_TOL,
        0.0,
    )
}

/// I_φ = ∫₋π^π exp(−k Δφ² / 2kT) dΔφ.
fn dihedral_factor(k: f64, kt: f64) -> super::quadrature::Quadrature {
    let s = (kt / k).sqrt();
    let half = (SUPPORT_WIDTHS * s).min(PI);
    let breaks = peak_breaks(0.0, s);
    integrate(
        |p| (-0.5 * (p / s).powi(2)).exp(),
        -half,
        half,
        &breaks,
        REL_TOL,
        0.0,
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    fn uniform(k: f64, r0: f64, ta: f64, tb: f64) -> BoreschRestraint {
        BoreschRestraint {
            r0,
            theta_a: ta,
            theta_b: tb,
            k_r: k,
            k_theta_a: k,
            k_theta_b: k,
            k_phi_a: k,
            k_phi_b: k,
            k_phi_c: k,
        }
    }

    #[test]
    fn stiff_limit_agrees_with_the_analytic_formula() {
        // The analytic formula is the stiff limit of the same integrals
        // (Boresch et al. 2003): at k = 1000 every Gaussian is ~0.02 wide and
        // the two must agree to far below the reporting precision.
        let r = uniform(1000.0, 6.0, 80.0, 100.0)
            .release(300.0, EnergyUnit::KcalPerMol)
            .unwrap();
        assert!(r.difference().abs() < 1e-3, "{r:?}");
        assert!(r.quadrature_error < 1e-9);
    }

    #[test]
    fn closed_forms_of_the_single_factors() {
        // Textbook integrals: ∫₋π^π e^{−x²/2s²} dx = s√(2π) erf(π/(s√2)); for a
        // dihedral so soft that s → ∞ the factor tends to 2π, and
        // ∫₀^π sin θ dθ = 2 for the angle.
        let kt = 0.6;
        let d = dihedral_factor(1e-9, kt);
        assert!((d.value - 2.0 * PI).abs() < 1e-6, "{}", d.value);
        let a = angle_factor(PI / 2.0, 1e-9, kt);
        assert!((a.value - 2.0).abs() < 1e-6, "{}", a.value);
        // ∫₀^∞ r² e^{−(r−r0)²/2s²} dr → s√(2π)(r0² + s²) when r0 ≫ s.
        let (r0, k) = (10.0, 100.0);
        let s = (kt / k).sqrt();
        let r = distance_factor(r0, k, kt);
        let exact = s * (2.0 * PI).sqrt() * (r0 * r0 + s * s);
        assert!((r.value - exact).abs() < 1e-11 * exact);
    }
}
