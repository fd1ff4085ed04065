//! The toy system and its exact free energy.
//!
//! A particle in d dimensions feels two harmonic wells, mixed linearly in λ:
//!
//! U_λ(x) = (1 − λ)·[c_A + ½ k_A |x − a|²] + λ·[c_B + ½ k_B |x − b|²].
//!
//! Completing the square, with k_λ = (1 − λ)k_A + λk_B and
//! m_λ = [(1 − λ)k_A a + λk_B b] / k_λ,
//!
//! (1 − λ)k_A|x − a|² + λk_B|x − b|² = k_λ|x − m_λ|² + λ(1 − λ) k_A k_B |a − b|² / k_λ,
//!
//! so U_λ is a single harmonic well of stiffness k_λ centred at m_λ plus a constant.
//! Its configurational integral is a Gaussian one,
//! Z(λ) = exp(−[(1 − λ)c_A + λc_B + ½λ(1 − λ)k_A k_B|a − b|²/k_λ]/kT) · (2πkT/k_λ)^{d/2},
//! and F(λ) = −kT ln Z(λ):
//!
//! F(λ) = (1 − λ)c_A + λc_B + ½λ(1 − λ)k_A k_B|a − b|²/k_λ − (d/2) kT ln(2πkT/k_λ).
//!
//! At the ends the middle term vanishes, so ΔG = F(1) − F(0) = c_B − c_A + (d/2) kT ln(k_B/k_A):
//! the distance between the wells changes how hard the leg is to sample, not its answer.
//! The Boltzmann distribution at λ is the normal N(m_λ, kT/k_λ · I).
//!
//! Energies are in kcal/mol, lengths in Å, force constants in kcal/mol/Å². Each well's
//! centre lies on the first axis at its `shift`; the other coordinates are 0.

use super::DemoError;
use crate::units::{EnergyUnit, GAS_CONSTANT_KJ, KJ_PER_KCAL};

/// One end state's well: c + ½ k |x − (shift, 0, …, 0)|².
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Well {
    /// the constant offset c (kcal/mol)
    pub offset: f64,
    /// the force constant k (kcal/mol/Å²), positive
    pub k: f64,
    /// the centre's position along the first axis (Å)
    pub shift: f64,
}

impl Well {
    /// The well's energy at `x` (kcal/mol).
    #[inline]
    pub fn energy(&self, x: &[f64]) -> f64 {
        let mut r2 = 0.0;
        for (i, xi) in x.iter().enumerate() {
            let d = if i == 0 { xi - self.shift } else { *xi };
            r2 += d * d;
        }
        self.offset + 0.5 * self.k * r2
    }
}

/// The two-well system of one leg at one temperature.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ToySystem {
    /// end state A (λ = 0)
    pub a: Well,
    /// end state B (λ = 1)
    pub b: Well,
    /// number of spatial dimensions d
    pub dimensions: usize,
    /// kT in kcal/mol
    pub kt: f64,
}

/// kT in kcal/mol at `temperature_k`.
pub fn kt_kcal(temperature_k: f64) -> f64 {
    GAS_CONSTANT_KJ * temperature_k / KJ_PER_KCAL
}

impl ToySystem {
    /// Checks the parameters and builds the system at `temperature_k` kelvin.
    pub fn new(a: Well, b: Well, dimensions: usize, temperature_k: f64) -> Result<Self, DemoError> {
        for (name, w) in [("a-k", &a), ("b-k", &b)] {
            if !(w.k.is_finite() && w.k > 0.0) {
                return Err(DemoError::parameter(
                    name,
                    format!("force constant must be a positive number, got {}", w.k),
                ));
            }
            if !(w.offset.is_finite() && w.shift.is_finite()) {
                return Err(DemoError::parameter(
                    name,
                    "offset and shift must be finite numbers",
                ));
            }
        }
        if dimensions == 0 {
            return Err(DemoError::parameter("dimensions", "must be at least 1"));
        }
        if !(temperature_k.is_finite() && temperature_k > 0.0) {
            return Err(DemoError::parameter(
                "temperature",
                format!("must be a positive number of kelvin, got {temperature_k}"),
            ));
        }
        Ok(ToySystem {
            a,
            b,
            dimensions,
            kt: kt_kcal(temperature_k),
        })
    }

    /// k_λ = (1 − λ)k_A + λk_B.
    pub fn k_lambda(&self, lambda: f64) -> f64 {
        (1.0 - lambda) * self.a.k + lambda * self.b.k
    }

    /// The first coordinate of the centre m_λ of the mixed well (the others are 0).
    pub fn center(&self, lambda: f64) -> f64 {
        ((1.0 - lambda) * self.a.k * self.a.shift + lambda * self.b.k * self.b.shift)
            / self.k_lambda(lambda)
    }

    /// The thermal width per coordinate at λ, √(kT/k_λ) (Å).
    pub fn sigma(&self, lambda: f64) -> f64 {
        (self.kt / self.k_lambda(lambda)).sqrt()
    }

    /// U_λ(x) in kcal/mol.
    pub fn energy(&self, lambda: f64, x: &[f64]) -> f64 {
        (1.0 - lambda) * self.a.energy(x) + lambda * self.b.energy(x)
    }

    /// The exact free energy F(λ) in kcal/mol (see the module documentation).
    pub fn free_energy(&self, lambda: f64) -> f64 {
        let kl = self.k_lambda(lambda);
        let d = self.b.shift - self.a.shift;
        (1.0 - lambda) * self.a.offset
            + lambda * self.b.offset
            + 0.5 * lambda * (1.0 - lambda) * self.a.k * self.b.k * d * d / kl
            - 0.5
                * self.dimensions as f64
                * self.kt
                * (2.0 * std::f64::consts::PI * self.kt / kl).ln()
    }

    /// The exact ΔG = F(1) − F(0) = c_B − c_A + (d/2) kT ln(k_B/k_A), in kcal/mol.
    pub fn delta_g(&self) -> f64 {
        self.b.offset - self.a.offset
            + 0.5 * self.dimensions as f64 * self.kt * (self.b.k / self.a.k).ln()
    }

    /// ΔG converted to `unit`.
    pub fn delta_g_in(&self, unit: EnergyUnit, temperature_k: f64) -> f64 {
        EnergyUnit::KcalPerMol.convert(self.delta_g(), unit, temperature_k)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sys() -> ToySystem {
        let a = Well {
            offset: 1.0,
            k: 2.0,
            shift: 0.0,
        };
        let b = Well {
            offset: -0.5,
            k: 6.0,
            shift: 1.5,
        };
        ToySystem::new(a, b, 3, 300.0).unwrap()
    }

    #[test]
    fn delta_g_is_f1_minus_f0() {
        let s = sys();
        assert!((s.free_energy(1.0) - s.free_energy(0.0) - s.delta_g()).abs() < 1e-12);
    }

    #[test]
    fn completing_the_square_matches_the_energy() {
        // U_λ(x) − [k_λ/2 |x − m_λ|²] must be the same constant at every x.
        let s = sys();
        let lam = 0.3;
        let m = s.center(lam);
        let rest = |x: &[f64]| {
            let r2 = (x[0] - m).powi(2) + x[1] * x[1] + x[2] * x[2];
            s.energy(lam, x) - 0.5 * s.k_lambda(lam) * r2
        };
        let c0 = rest(&[0.1, 0.2, -0.3]);
        let c1 = rest(&[2.0, -1.0, 0.7]);
        assert!((c0 - c1).abs() < 1e-12);
    }

    #[test]
    fn rejects_nonpositive_force_constants() {
        let a = Well {
            offset: 0.0,
            k: 0.0,
            shift: 0.0,
        };
        assert!(ToySystem::new(a, a, 3, 300.0).is_err());
    }
}
