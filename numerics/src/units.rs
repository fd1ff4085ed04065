//! Energy units, the molar gas constant and conversions.
//!
//! Every energy inside legwork's numeric core is either a reduced energy (in units
//! of kT, dimensionless) or carries its [`EnergyUnit`] explicitly. Conversions go
//! through kJ/mol.

use serde::{Deserialize, Serialize};
use std::fmt;
use std::str::FromStr;

/// Molar gas constant R in kJ/(mol·K) (CODATA 2018: R = 8.314462618 J/(mol·K)).
pub const GAS_CONSTANT_KJ: f64 = 8.314_462_618e-3;

/// Kilojoules per thermochemical kilocalorie (NIST SP 811: 1 cal_th = 4.184 J).
pub const KJ_PER_KCAL: f64 = 4.184;

/// An energy unit as written in campaign files, window tables and on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub enum EnergyUnit {
    /// kilojoules per mole
    #[serde(rename = "kJ/mol")]
    KjPerMol,
    /// thermochemical kilocalories per mole
    #[serde(rename = "kcal/mol")]
    KcalPerMol,
    /// multiples of kT at the temperature in force (reduced units)
    #[serde(rename = "kT")]
    Kt,
}

impl EnergyUnit {
    /// All units, in the order they are listed in help texts.
    pub const ALL: [EnergyUnit; 3] = [EnergyUnit::KcalPerMol, EnergyUnit::KjPerMol, EnergyUnit::Kt];

    /// The usual spelling (`kJ/mol`, `kcal/mol`, `kT`).
    ///
    /// ```
    /// use legwork_numerics::units::EnergyUnit;
    /// assert_eq!(EnergyUnit::KcalPerMol.as_str(), "kcal/mol");
    /// assert_eq!(EnergyUnit::Kt.to_string(), "kT");
    /// ```
    pub fn as_str(self) -> &'static str {
        match self {
            EnergyUnit::KjPerMol => "kJ/mol",
            EnergyUnit::KcalPerMol => "kcal/mol",
            EnergyUnit::Kt => "kT",
        }
    }

    /// kJ/mol per one of this unit at temperature `t_kelvin` (the temperature
    /// matters only for [`EnergyUnit::Kt`]).
    ///
    /// ```
    /// use legwork_numerics::units::EnergyUnit;
    /// assert_eq!(EnergyUnit::KcalPerMol.kj_per_unit(300.0), 4.184);
    /// assert!((EnergyUnit::Kt.kj_per_unit(300.0) - 2.494_338_8).abs() < 1e-7);
    /// ```
    pub fn kj_per_unit(self, t_kelvin: f64) -> f64 {
        match self {
            EnergyUnit::KjPerMol => 1.0,
            EnergyUnit::KcalPerMol => KJ_PER_KCAL,
            EnergyUnit::Kt => GAS_CONSTANT_KJ * t_kelvin,
        }
    }

    /// Factor that converts a value in `self` to a value in `to` at `t_kelvin`.
    ///
    /// ```
    /// use legwork_numerics::units::EnergyUnit;
    /// let f = EnergyUnit::KjPerMol.factor_to(EnergyUnit::KcalPerMol, 298.15);
    /// assert!((f - 1.0 / 4.184).abs() < 1e-15);
    /// ```
    pub fn factor_to(self, to: EnergyUnit, t_kelvin: f64) -> f64 {
        self.kj_per_unit(t_kelvin) / to.kj_per_unit(t_kelvin)
    }

    /// Converts `value` from `self` to `to` at `t_kelvin`.
    ///
    /// ```
    /// use legwork_numerics::units::EnergyUnit;
    /// let kt = EnergyUnit::KcalPerMol.convert(0.592_484_9, EnergyUnit::Kt, 298.15);
    /// assert!((kt - 1.0).abs() < 1e-6);
    /// ```
    pub fn convert(self, value: f64, to: EnergyUnit, t_kelvin: f64) -> f64 {
        value * self.factor_to(to, t_kelvin)
    }
}

impl fmt::Display for EnergyUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// The text was not one of the known unit spellings (see [`EnergyUnit`]'s
/// `FromStr`: `kcal/mol`, `kcal mol-1`, `kJ/mol`, `kj/mol`, `kJ mol-1`, `kT`, `kt`).
///
/// ```
/// use legwork_numerics::units::EnergyUnit;
/// let e = "eV".parse::<EnergyUnit>().unwrap_err();
/// assert_eq!(e.to_string(), "unknown energy unit 'eV': use kcal/mol, kJ/mol or kT");
/// ```
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("unknown energy unit '{0}': use kcal/mol, kJ/mol or kT")]
pub struct UnknownUnit(pub String);

impl FromStr for EnergyUnit {
    type Err = UnknownUnit;
    /// Parses a unit spelling (surrounding blanks ignored).
    ///
    /// # Errors
    ///
    /// [`UnknownUnit`] for any other text.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s.trim() {
            "kJ/mol" | "kj/mol" | "kJ mol-1" => Ok(EnergyUnit::KjPerMol),
            "kcal/mol" | "kcal mol-1" => Ok(EnergyUnit::KcalPerMol),
            "kT" | "kt" => Ok(EnergyUnit::Kt),
            other => Err(UnknownUnit(other.to_string())),
        }
    }
}

/// kT in kJ/mol at `t_kelvin` (R T, [`GAS_CONSTANT_KJ`]).
///
/// ```
/// assert!((legwork_numerics::units::kt_kj(298.15) - 2.478_957).abs() < 1e-6);
/// ```
pub fn kt_kj(t_kelvin: f64) -> f64 {
    GAS_CONSTANT_KJ * t_kelvin
}

/// kT in `unit` at `t_kelvin`.
///
/// ```
/// use legwork_numerics::units::{kt_in, EnergyUnit};
/// assert!((kt_in(EnergyUnit::KcalPerMol, 298.15) - 0.592_484_9).abs() < 1e-7);
/// assert_eq!(kt_in(EnergyUnit::Kt, 298.15), 1.0);
/// ```
pub fn kt_in(unit: EnergyUnit, t_kelvin: f64) -> f64 {
    EnergyUnit::Kt.factor_to(unit, t_kelvin)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kt_at_room_temperature() {
        // R T at 298.15 K = 2.4789570 kJ/mol = 0.5924849 kcal/mol
        // (CODATA 2018 R; thermochemical calorie, NIST SP 811).
        assert!((kt_kj(298.15) - 2.478_957_0).abs() < 1e-6);
        assert!((kt_in(EnergyUnit::KcalPerMol, 298.15) - 0.592_484_9).abs() < 1e-6);
    }

    #[test]
    fn round_trip() {
        let v = EnergyUnit::KcalPerMol.convert(1.5, EnergyUnit::Kt, 310.0);
        let back = EnergyUnit::Kt.convert(v, EnergyUnit::KcalPerMol, 310.0);
        assert!((back - 1.5).abs() < 1e-12);
        assert_eq!(
            "kJ/mol".parse::<EnergyUnit>().unwrap(),
            EnergyUnit::KjPerMol
        );
        assert!("eV".parse::<EnergyUnit>().is_err());
    }
}
