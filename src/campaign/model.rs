//! The validated campaign: every path absolute, every default filled in.

use super::lambdas::LambdaSchedule;
use crate::collect::ReaderConfig;
use crate::estimate::AnalysisOptions;
use crate::plan::Resources;
use crate::scheduler::SchedulerConfig;
use crate::units::EnergyUnit;
use serde::Serialize;
use std::path::PathBuf;

/// Free-form template variables.
pub type Vars = serde_json::Map<String, serde_json::Value>;

/// What the campaign computes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum CampaignKind {
    /// Relative binding free energies along edges between ligands.
    Relative,
    /// Absolute binding free energy of each ligand.
    Absolute,
    /// Solvation free energy of each ligand.
    Solvation,
}

impl CampaignKind {
    /// The spelling used in campaign files.
    pub fn as_str(self) -> &'static str {
        match self {
            CampaignKind::Relative => "relative",
            CampaignKind::Absolute => "absolute",
            CampaignKind::Solvation => "solvation",
        }
    }
}

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

/// A Boresch-style orientational restraint of an absolute-binding leg
/// (Boresch et al. 2003, J. Phys. Chem. B 107, 9535).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Restraint {
    /// Only `boresch` for now.
    pub kind: String,
    /// Reference distance r0 in Å.
    pub r0: f64,
    /// Reference angle θA in degrees.
    pub theta_a: f64,
    /// Reference angle θB in degrees.
    pub theta_b: f64,
    /// Distance force constant, kcal/mol/Å².
    pub k_r: f64,
    /// Angle force constant for θA, kcal/mol/rad².
    pub k_theta_a: f64,
    /// Angle force constant for θB, kcal/mol/rad².
    pub k_theta_b: f64,
    /// Dihedral force constant φA, kcal/mol/rad².
    pub k_phi_a: f64,
    /// Dihedral force constant φB, kcal/mol/rad².
    pub k_phi_b: f64,
    /// Dihedral force constant φC, kcal/mol/rad².
    pub k_phi_c: f64,
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
    /// Orientational restraint (absolute binding).
    pub restraint: Option<Restraint>,
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

    /// The subjects tasks are made for: edges (relative) or ligands.
    pub fn subjects(&self) -> Vec<crate::plan::Subject> {
        use crate::plan::Subject;
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
