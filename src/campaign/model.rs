//! The validated campaign: every path absolute, every default filled in.

use super::lambdas::LambdaSchedule;
use crate::collect::ReaderConfig;
use crate::estimate::AnalysisOptions;
use crate::scheduler::SchedulerConfig;
use crate::units::EnergyUnit;
use serde::{Deserialize, Serialize};
use std::path::PathBuf;

pub use crate::cycle::{BoreschRestraint, CampaignKind, Subject};

/// What one task asks of the scheduler (the plan uses this type as it is).
#[derive(Debug, Clone, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub struct Resources {
    /// CPU cores.
    pub cpus: u32,
    /// GPUs.
    pub gpus: u32,
    /// memory in MiB (0: the scheduler's default)
    pub memory_mb: u64,
    /// wall-clock limit in seconds
    pub walltime_s: u64,
}

/// Free-form template variables.
pub type Vars = serde_json::Map<String, serde_json::Value>;

/// One ligand of the series.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Ligand {
    /// Safe id.
    pub id: String,
    /// Its template variables.
    pub vars: Vars,
}

/// A relative transformation from ligand `a` to ligand `b`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Edge {
    /// First ligand (λ = 0).
    pub a: String,
    /// Second ligand (λ = 1).
    pub b: String,
    /// Its template variables.
    pub vars: Vars,
}

impl Edge {
    /// `a+b`.
    pub fn id(&self) -> String {
        format!("{}+{}", self.a, self.b)
    }
}

/// One leg of every edge (or ligand): e.g. `complex` and `solvent`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Leg {
    /// Safe name.
    pub name: String,
    /// +1 or −1: its sign in the cycle.
    pub sign: i32,
    /// Its λ states.
    pub lambdas: LambdaSchedule,
    /// Independent replicas, ≥ 1.
    pub replicas: u32,
    /// What each of its tasks asks of the scheduler.
    pub resources: Resources,
    /// Its template variables.
    pub vars: Vars,
    /// Constant added to this leg's signed contribution, in the campaign unit.
    pub correction: Option<f64>,
    /// Orientational restraint (absolute binding), the core's own type.
    pub restraint: Option<BoreschRestraint>,
    /// How this leg's window output is read, when it differs from the campaign's
    /// `reader:` (see [`Campaign::reader_for`]).
    pub reader: Option<ReaderConfig>,
    /// Frames its analysed stage's windows must hold (`frames`, `window_frames`),
    /// over the stage's own `frames`.
    pub frames: super::frames::LegFrames,
}

impl Leg {
    /// Number of windows (λ states).
    pub fn windows(&self) -> usize {
        self.lambdas.count()
    }
}

/// Whether a stage runs once per leg and replica, or once per window.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum StagePer {
    /// Once per subject × leg × replica.
    Leg,
    /// Once per subject × leg × replica × window.
    Window,
}

impl StagePer {
    /// `leg` or `window`.
    pub fn as_str(self) -> &'static str {
        match self {
            StagePer::Leg => "leg",
            StagePer::Window => "window",
        }
    }
}

/// One step of the work: a template rendered into every task of the stage.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Stage {
    /// Safe name.
    pub name: String,
    /// Per leg or per window.
    pub per: StagePer,
    /// Stages that must finish first (for the same subject, leg and replica).
    pub after: Vec<String>,
    /// Template file, relative to the template folder.
    pub template: String,
    /// Template file, absolute.
    pub template_path: PathBuf,
    /// The file the task must leave in its directory, relative to it.
    pub output: Option<String>,
    /// Frames the output must hold for the task to count as done.
    pub frames: Option<u64>,
    /// Its template variables.
    pub vars: Vars,
}

/// A validated campaign.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Campaign {
    /// Campaign name.
    pub name: String,
    /// The campaign file, absolute.
    pub file: PathBuf,
    /// The folder holding it.
    pub dir: PathBuf,
    /// Where the tree goes, absolute.
    pub root: PathBuf,
    /// The template folder, absolute.
    pub templates_dir: PathBuf,
    /// Measured affinities CSV, absolute.
    pub experiment: Option<PathBuf>,
    /// Campaign seed.
    pub seed: u64,
    /// Temperature in K.
    #[serde(rename = "temperature_K")]
    pub temperature_k: f64,
    /// Energy unit of results and corrections.
    pub unit: EnergyUnit,
    /// Relative, absolute or solvation.
    pub kind: CampaignKind,
    /// The scheduler section.
    pub scheduler: SchedulerConfig,
    /// Campaign-wide template variables.
    pub vars: Vars,
    /// Ligands in file order.
    pub ligands: Vec<Ligand>,
    /// Edges in file order (empty unless relative).
    pub edges: Vec<Edge>,
    /// The ligand whose ΔG anchors the network, if given.
    pub reference_ligand: Option<String>,
    /// Legs in file order.
    pub legs: Vec<Leg>,
    /// Stages in dependency order (file order where free).
    pub stages: Vec<Stage>,
    /// How window output is read.
    pub reader: ReaderConfig,
    /// Estimator and options.
    pub analysis: AnalysisOptions,
    /// Hash of everything the tree depends on (campaign file, ligand and edge
    /// files, templates): unchanged inputs give an unchanged tree.
    pub fingerprint: String,
}

impl Campaign {
    /// The stage whose output is analysed: `analysis.stage`, else the last per-window
    /// stage.
    pub fn analysed_stage(&self) -> Option<&Stage> {
        match &self.analysis.stage {
            Some(name) => self.stage(name),
            None => self.stages.iter().rev().find(|s| s.per == StagePer::Window),
        }
    }

    /// A stage by name.
    pub fn stage(&self, name: &str) -> Option<&Stage> {
        self.stages.iter().find(|s| s.name == name)
    }

    /// A leg by name.
    pub fn leg(&self, name: &str) -> Option<&Leg> {
        self.legs.iter().find(|l| l.name == name)
    }

    /// A ligand by id.
    pub fn ligand(&self, id: &str) -> Option<&Ligand> {
        self.ligands.iter().find(|l| l.id == id)
    }

    /// How a leg's window output is read: its own `reader:`, else the campaign's.
    pub fn reader_for<'a>(&'a self, leg: &'a Leg) -> &'a ReaderConfig {
        leg.reader.as_ref().unwrap_or(&self.reader)
    }

    /// The subjects tasks are made for: edges (relative) or ligands.
    pub fn subjects(&self) -> Vec<Subject> {
        match self.kind {
            CampaignKind::Relative => self
                .edges
                .iter()
                .map(|e| Subject::Edge {
                    a: e.a.clone(),
                    b: e.b.clone(),
                })
                .collect(),
            _ => self
                .ligands
                .iter()
                .map(|l| Subject::Ligand { id: l.id.clone() })
                .collect(),
        }
    }
}
