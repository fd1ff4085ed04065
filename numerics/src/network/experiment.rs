//! Measured affinities as the network uses them: one ΔG per ligand, and the
//! conversion of a dissociation or inhibition constant K into ΔG = RT ln(K / 1 M).
//! An IC50 is taken as if it were Ki, which is an approximation (it depends on the
//! assay's substrate concentration; Cheng & Prusoff 1973, from memory), and is
//! marked as such. Reading the CSV that holds them is the tool's job, not the core's.

use crate::units::GAS_CONSTANT_KJ;
use serde::{Deserialize, Serialize};

/// What was measured for a ligand.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MeasuredKind {
    /// A binding free energy.
    Dg,
    /// An inhibition constant.
    Ki,
    /// A dissociation constant.
    Kd,
    /// A half-maximal inhibitory concentration (taken as Ki: approximate).
    Ic50,
}

/// One measured ligand, converted to a ΔG.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Measured {
    /// Ligand id.
    pub ligand: String,
    /// ΔG in the unit asked for.
    pub dg: f64,
    /// What was measured.
    pub kind: MeasuredKind,
    /// The value as written.
    pub value: f64,
    /// The unit as written.
    pub unit: String,
    /// Line in the file (from 1).
    pub line: u64,
}

/// ΔG = RT ln(K / 1 M) in kJ/mol for a constant K given in mol/L (R from
/// CODATA 2018). Not finite for K ≤ 0; callers check K first.
///
/// ```
/// use legwork_numerics::network::dg_from_constant_kj;
/// // 1 nM at 298.15 K: RT ln(1e-9) = 2.478957 × (−20.723266) = −51.372086 kJ/mol.
/// assert!((dg_from_constant_kj(1e-9, 298.15) - (-51.372_086)).abs() < 1e-5);
/// ```
pub fn dg_from_constant_kj(k_molar: f64, temperature_k: f64) -> f64 {
    GAS_CONSTANT_KJ * temperature_k * k_molar.ln()
}

/// The factor that takes a concentration in `unit` (pM, nM, uM/µM/μM, mM, M) to
/// mol/L, or `None` for another unit.
///
/// ```
/// use legwork_numerics::network::molar_factor;
/// assert_eq!(molar_factor("nM"), Some(1e-9));
/// assert_eq!(molar_factor("g/L"), None);
/// ```
pub fn molar_factor(unit: &str) -> Option<f64> {
    Some(match unit {
        "pM" => 1e-12,
        "nM" => 1e-9,
        "uM" | "µM" | "μM" => 1e-6,
        "mM" => 1e-3,
        "M" => 1.0,
        _ => return None,
    })
}
