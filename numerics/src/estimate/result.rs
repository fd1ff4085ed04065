//! What an estimate of one leg returns. Every energy is reduced (kT) unless a
//! method says otherwise; convert with [`DeltaG::in_unit`].

use super::options::Method;
use super::warning::LegWarning;
use crate::units::EnergyUnit;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// A free-energy difference and its standard error.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct DeltaG {
    /// The difference.
    pub delta_g: f64,
    /// Its standard error.
    pub sigma: f64,
}

impl DeltaG {
    /// This value (taken to be in kT) in `unit` at `temperature_k`.
    pub fn in_unit(self, unit: EnergyUnit, temperature_k: f64) -> DeltaG {
        let f = EnergyUnit::Kt.factor_to(unit, temperature_k);
        DeltaG {
            delta_g: self.delta_g * f,
            sigma: self.sigma * f,
        }
    }
}

/// Per-window diagnostics. `equilibration_frames`, `inefficiency` and `used` are
/// those of the energy series (EXP, BAR, MBAR); the `ti_` ones those of dU/dλ.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct WindowDiagnostics {
    /// 0-based state index.
    pub state: usize,
    /// Frames read.
    pub frames: usize,
    /// Frames discarded as equilibration.
    pub equilibration_frames: usize,
    /// Statistical inefficiency of the equilibrated part.
    pub inefficiency: f64,
    /// Frames used by the estimators.
    pub used: usize,
    /// Frames discarded for TI (dU/dλ series), when TI ran.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ti_equilibration_frames: Option<usize>,
    /// Statistical inefficiency of dU/dλ, when TI ran.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ti_inefficiency: Option<f64>,
    /// Frames used by TI, when TI ran.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ti_used: Option<usize>,
}

/// One window's mean dU/dλ (kT) ± its standard error, for the TI plot.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TiPoint {
    /// 0-based state index.
    pub state: usize,
    /// λ component.
    pub component: String,
    /// λ of that component at this state.
    pub lambda: f64,
    /// Mean dU/dλ, kT.
    pub mean: f64,
    /// Standard error of the mean, kT.
    pub sem: f64,
}

/// One adjacent pair's estimates (kT).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PairEstimate {
    /// Lower state.
    pub from: usize,
    /// Upper state (`from + 1`).
    pub to: usize,
    /// Estimates of G(to) − G(from) by method (exp_forward, exp_reverse, bar, mbar).
    pub estimates: BTreeMap<Method, DeltaG>,
}

/// ΔG from a growing share of every window's data.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ConvergencePoint {
    /// Share of each window's used frames, 0.1 … 1.0.
    pub fraction: f64,
    /// From the first `fraction` of each window.
    pub forward: DeltaG,
    /// From the last `fraction` of each window.
    pub reverse: DeltaG,
}

/// Forward and reverse convergence series.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Convergence {
    /// The estimator used.
    pub method: Method,
    /// One point per fraction.
    pub points: Vec<ConvergencePoint>,
}

/// MBAR's free energies of every state and their covariance.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MbarDetails {
    /// Reduced free energy of every state relative to state 0.
    pub f: Vec<f64>,
    /// Standard error of f_k − f_0.
    pub sigma_f: Vec<f64>,
    /// Asymptotic covariance of the free energies (kT²).
    pub covariance: Vec<Vec<f64>>,
    /// Newton iterations.
    pub iterations: usize,
    /// Passes over the samples in the solve (a machine-independent measure of its
    /// cost).
    #[serde(default)]
    pub passes: usize,
    /// Wall time of the solve (BAR start, Newton, covariance, overlap), seconds.
    pub solve_seconds: f64,
}

/// The estimate of one leg: G(last state) − G(first state) by every method asked
/// for, with diagnostics and warnings.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LegEstimate {
    /// Number of states.
    pub n_states: usize,
    /// Temperature, K.
    pub temperature_k: f64,
    /// Primary λ of every state.
    pub lambdas: Vec<f64>,
    /// ΔG (kT) by method.
    pub estimates: BTreeMap<Method, DeltaG>,
    /// MBAR free energies and covariance, when MBAR ran.
    pub mbar: Option<MbarDetails>,
    /// Overlap matrix (from MBAR's weights).
    pub overlap: Option<Vec<Vec<f64>>>,
    /// Smallest overlap between neighbouring states.
    pub min_adjacent_overlap: Option<f64>,
    /// Per-window diagnostics.
    pub windows: Vec<WindowDiagnostics>,
    /// Per-window mean dU/dλ, when TI ran.
    pub ti_points: Vec<TiPoint>,
    /// Per adjacent pair estimates.
    pub pairs: Vec<PairEstimate>,
    /// Forward/reverse convergence, when asked for.
    pub convergence: Option<Convergence>,
    /// Warnings worded in kT: which window or pair, what is wrong, what to do (the
    /// messages of `warning_details`, one per problem).
    pub warnings: Vec<String>,
    /// The same warnings as data, to word in another unit
    /// ([`LegWarning::message`]) or to pick out by window.
    #[serde(default)]
    pub warning_details: Vec<LegWarning>,
    /// Estimators whose value or error bar cannot be trusted, with the reason (too
    /// little overlap for the asymptotic error bar, a window of identical
    /// frames…). Weighting such an estimate by 1/σ² would be wrong.
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub unreliable: BTreeMap<Method, String>,
}

impl LegEstimate {
    /// MBAR's G(j) − G(i) (kT) and its standard error from the covariance.
    ///
    /// # Panics
    ///
    /// When `i` or `j` is not a state.
    pub fn mbar_difference(&self, i: usize, j: usize) -> Option<DeltaG> {
        let m = self.mbar.as_ref()?;
        let c = &m.covariance;
        let var = c[i][i] + c[j][j] - 2.0 * c[i][j];
        Some(DeltaG {
            delta_g: m.f[j] - m.f[i],
            sigma: var.max(0.0).sqrt(),
        })
    }

    /// Whether `method`'s estimate and error bar can be used as they are (false
    /// when it is in [`LegEstimate::unreliable`]).
    pub fn is_reliable(&self, method: Method) -> bool {
        !self.unreliable.contains_key(&method)
    }

    /// The warnings worded with energies in `unit`.
    pub fn warnings_in(&self, unit: EnergyUnit) -> Vec<String> {
        self.warning_details
            .iter()
            .map(|w| w.message(unit, self.temperature_k))
            .collect()
    }

    /// ΔG ± σ of `method` in `unit`.
    pub fn delta_g_in(&self, method: Method, unit: EnergyUnit) -> Option<DeltaG> {
        self.estimates
            .get(&method)
            .map(|d| d.in_unit(unit, self.temperature_k))
    }
}
