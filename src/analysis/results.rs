//! The analysis's results: what the report formats. [`Results`] is exactly what
//! `results/summary.json` holds; `legwork report` reads it back and re-renders.

use crate::cycle::{CampaignKind, EdgeResult};
use crate::network::stats::Comparison;
use crate::network::{CycleClosure, Hysteresis, LigandEstimate, Measured, Offset};
use crate::units::EnergyUnit;
use serde::{Deserialize, Serialize};

/// Version of the summary.json layout, bumped on incompatible changes.
pub const RESULTS_SCHEMA: u32 = 1;

/// Everything a campaign's results tables and report show.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Results {
    /// Layout version ([`RESULTS_SCHEMA`]).
    pub schema: u32,
    /// Campaign name.
    pub campaign: String,
    /// Relative, absolute or solvation.
    pub kind: CampaignKind,
    /// The campaign unit every energy below is in.
    pub unit: EnergyUnit,
    /// Temperature, K (spelled `temperature_K` as in the campaign file).
    #[serde(rename = "temperature_K")]
    pub temperature_k: f64,
    /// Name of the headline estimator (e.g. `mbar`).
    pub estimator: String,
    /// When the results were assembled (RFC 3339), if known.
    #[serde(default)]
    pub generated_at: Option<String>,
    /// One entry per finished leg replica.
    pub legs: Vec<LegReplica>,
    /// One entry per closed cycle: edges (relative) or ligands (absolute, solvation).
    pub edges: Vec<EdgeResult>,
    /// Per-ligand ΔG (network for relative campaigns, the cycle itself otherwise).
    pub ligands: Vec<LigandEstimate>,
    /// How the network's offset was fixed, per connected component (empty for absolute campaigns).
    #[serde(default)]
    pub offsets: Vec<Offset>,
    /// Cycle closures of a cycle basis.
    #[serde(default)]
    pub cycles: Vec<CycleClosure>,
    /// Edges run in both directions.
    #[serde(default)]
    pub hysteresis: Vec<Hysteresis>,
    /// Measured values, converted to ΔG in the campaign unit.
    #[serde(default)]
    pub measured: Vec<Measured>,
    /// Statistics against experiment, when there are measurements.
    #[serde(default)]
    pub statistics: Option<Comparison>,
    /// Leg replicas without a result: not finished yet, or finished but
    /// their estimate failed ([`MissingWork::status`] says which, `note` why).
    #[serde(default)]
    pub missing: Vec<MissingWork>,
    /// Subjects (edges, or ligands of absolute campaigns) with no result, and why.
    #[serde(default)]
    pub left_out: Vec<LeftOut>,
    /// Campaign-level warnings.
    #[serde(default)]
    pub warnings: Vec<String>,
    /// Core-hours, GPU-hours, rate and ETA when the results were collected
    /// (absent when the analysis ran without the campaign's state).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub costs: Option<crate::state::costs::Costs>,
    /// Leg replicas whose result rests on outdated outputs, or on the frames
    /// that exist while they are being extended (see [`WorkNote`]).
    #[serde(default)]
    pub notes: Vec<WorkNote>,
}

/// What a leg replica's result rests on, when that is not simply its latest
/// finished windows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum NoteKind {
    /// Some windows' outputs come from a script that has changed since they ran.
    Outdated,
    /// Some windows are being extended (or rerun): their previous frames are used.
    Extending,
}

/// A note on one leg replica's result.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct WorkNote {
    /// Subject id.
    pub subject: String,
    /// Leg name.
    pub leg: String,
    /// Replica number.
    pub replica: u32,
    /// Outdated or being extended.
    pub kind: NoteKind,
    /// The windows concerned.
    pub windows: Vec<usize>,
    /// In words, with what to do.
    pub note: String,
}

/// One estimator's answer for a leg replica.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MethodValue {
    /// Estimator name (`ti`, `ti_spline`, `exp_forward`, `exp_reverse`, `bar`, `mbar`).
    pub method: String,
    /// ΔG of the leg, campaign unit.
    #[serde(deserialize_with = "super::lenient::f64")]
    pub dg: f64,
    /// Its σ.
    #[serde(deserialize_with = "super::lenient::f64")]
    pub sigma: f64,
}

/// One λ window of a leg replica (for a leg with several λ components, one
/// entry per window and component).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct WindowSummary {
    /// λ of the window's state (of `component`, when given).
    pub lambda: f64,
    /// The λ component this dU/dλ belongs to; absent for single-component legs.
    #[serde(default)]
    pub component: Option<String>,
    /// Mean dU/dλ (of `component`), campaign unit per unit λ.
    #[serde(deserialize_with = "super::lenient::f64")]
    pub dudl_mean: f64,
    /// Standard error of the mean dU/dλ (decorrelated).
    #[serde(deserialize_with = "super::lenient::f64")]
    pub dudl_sem: f64,
    /// Frames read.
    #[serde(default)]
    pub frames: Option<u64>,
    /// Frames discarded as equilibration.
    #[serde(default)]
    pub discarded: Option<u64>,
    /// Statistical inefficiency g of the kept frames.
    #[serde(default)]
    pub inefficiency: Option<f64>,
}

/// ΔG estimated from growing fractions of the data, from the start (forward) and
/// from the end (reverse).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Convergence {
    /// Fraction of the data used for each point (0, 1].
    #[serde(deserialize_with = "super::lenient::vec")]
    pub fractions: Vec<f64>,
    /// ΔG from the first fraction of every window.
    #[serde(deserialize_with = "super::lenient::vec")]
    pub forward: Vec<f64>,
    /// σ of `forward`.
    #[serde(deserialize_with = "super::lenient::vec")]
    pub forward_sigma: Vec<f64>,
    /// ΔG from the last fraction of every window.
    #[serde(deserialize_with = "super::lenient::vec")]
    pub reverse: Vec<f64>,
    /// σ of `reverse`.
    #[serde(deserialize_with = "super::lenient::vec")]
    pub reverse_sigma: Vec<f64>,
}

/// One finished leg replica.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LegReplica {
    /// Subject id (`a+b` or a ligand id).
    pub subject: String,
    /// Leg name.
    pub leg: String,
    /// Replica number (from 1).
    pub replica: u32,
    /// Sign of the leg in its cycle (shown in the tables; [`crate::analysis::assemble`]
    /// closes cycles with the campaign's own leg signs).
    pub sign: f64,
    /// ΔG of the headline estimator, campaign unit.
    #[serde(deserialize_with = "super::lenient::f64")]
    pub dg: f64,
    /// Its σ.
    #[serde(deserialize_with = "super::lenient::f64")]
    pub sigma: f64,
    /// Every estimator computed (the headline one included).
    #[serde(default)]
    pub methods: Vec<MethodValue>,
    /// Overlap matrix (K × K, rows sum to 1).
    #[serde(default, deserialize_with = "super::lenient::matrix")]
    pub overlap: Vec<Vec<f64>>,
    /// Smallest overlap between neighbouring states.
    #[serde(default)]
    pub min_adjacent_overlap: Option<f64>,
    /// Per-window λ, dU/dλ and diagnostics, in state order.
    #[serde(default)]
    pub windows: Vec<WindowSummary>,
    /// The TI estimate the ⟨dU/dλ⟩ plot names: the headline estimator when it is
    /// a TI method, else trapezoid TI (`ti`), else `ti_spline`; absent when no
    /// TI was computed. One of [`LegReplica::methods`], never recomputed.
    #[serde(default)]
    pub ti: Option<MethodValue>,
    /// Forward and reverse convergence.
    #[serde(default)]
    pub convergence: Option<Convergence>,
    /// Warnings from the estimators.
    #[serde(default)]
    pub warnings: Vec<String>,
}

/// Why a leg replica has no result.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MissingStatus {
    /// Some of its windows are not done yet.
    #[default]
    Unfinished,
    /// Every window is done, but reading or estimating them failed.
    Failed,
}

impl MissingStatus {
    /// The name used in files (`unfinished`, `failed`).
    pub fn as_str(self) -> &'static str {
        match self {
            MissingStatus::Unfinished => "unfinished",
            MissingStatus::Failed => "failed",
        }
    }
}

/// A subject (edge or ligand) that has no result.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LeftOut {
    /// Subject id.
    pub subject: String,
    /// Why, e.g. "leg 'complex' has no usable replica (1 failed)".
    pub reason: String,
}

/// A leg replica without a result: not finished, or its estimate failed.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MissingWork {
    /// Subject id.
    pub subject: String,
    /// Leg name.
    pub leg: String,
    /// Replica number.
    pub replica: u32,
    /// Windows with usable output.
    pub windows_done: usize,
    /// Windows the leg has.
    pub windows_total: usize,
    /// Unfinished or failed.
    #[serde(default)]
    pub status: MissingStatus,
    /// Why it is missing (e.g. "3 of 12 windows done", or the reader's or
    /// estimator's error).
    #[serde(default)]
    pub note: String,
}

impl Results {
    /// Whether anything the campaign asks for has no result (a leg replica
    /// unfinished or failed, a subject left out).
    pub fn incomplete(&self) -> bool {
        !self.missing.is_empty() || !self.left_out.is_empty()
    }

    /// Leg replicas whose estimate failed.
    pub fn failed(&self) -> impl Iterator<Item = &MissingWork> {
        self.missing
            .iter()
            .filter(|m| m.status == MissingStatus::Failed)
    }

    /// The campaign unit's size of 1 kcal/mol (for the ±1 kcal/mol band).
    pub fn one_kcal(&self) -> f64 {
        EnergyUnit::KcalPerMol.convert(1.0, self.unit, self.temperature_k)
    }

    /// Whether any measured value came from an IC50.
    pub fn uses_ic50(&self) -> bool {
        self.measured
            .iter()
            .any(|m| m.kind == crate::network::MeasuredKind::Ic50)
    }

    /// Ligands sorted from most to least favourable ΔG.
    pub fn ranked_ligands(&self) -> Vec<&LigandEstimate> {
        let mut v: Vec<&LigandEstimate> = self.ligands.iter().collect();
        v.sort_by(|a, b| a.dg.total_cmp(&b.dg));
        v
    }

    /// Edges sorted worst first: by |residual|/σ when the network ran, else by σ.
    pub fn worst_edges(&self) -> Vec<&EdgeResult> {
        let mut v: Vec<&EdgeResult> = self.edges.iter().collect();
        let score = |e: &EdgeResult| match e.residual {
            Some(r) if e.sigma > 0.0 => (r / e.sigma).abs(),
            _ => e.sigma,
        };
        v.sort_by(|a, b| score(b).total_cmp(&score(a)));
        v
    }
}
