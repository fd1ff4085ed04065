//! The plan: every task of a campaign with its id, directory, λ state, resources,
//! seed and dependencies, and the batches they are submitted in.
//!
//! Expansion is pure: a validated campaign in, a [`Plan`] out, no I/O. The same plan
//! drives `expand`, `submit`, `status` and `collect`.

mod expand;

pub use expand::{expand, task_seed, window_label};

use serde::{Deserialize, Serialize};
use std::collections::HashMap;
use std::path::PathBuf;

/// Index of a task in [`Plan::tasks`].
pub type TaskIndex = usize;
/// Index of a batch in [`Plan::batches`].
pub type BatchIndex = usize;

pub use legwork_numerics::cycle::Subject;

pub use crate::campaign::model::Resources;

/// One scheduler job or array element: one stage of one window (or of one leg)
/// of one replica of one leg of one subject.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Task {
    /// Stable id, e.g. `lig-a+lig-b/complex/r1/w07/production` or
    /// `lig-a+lig-b/complex/r1/prepare` for a per-leg stage.
    pub id: String,
    /// The edge or ligand.
    pub subject: Subject,
    /// Leg name.
    pub leg: String,
    /// Replica number, from 1.
    pub replica: u32,
    /// Window (λ state) index from 0; `None` for a per-leg stage.
    pub window: Option<usize>,
    /// Stage name.
    pub stage: String,
    /// The task's directory, relative to the campaign root.
    pub dir: PathBuf,
    /// Tasks that must be done before this one starts.
    pub after: Vec<TaskIndex>,
    /// What it asks of the scheduler.
    pub resources: Resources,
    /// Seed for the engine, derived from the campaign seed and the task id.
    pub seed: u64,
    /// Frames the stage must produce for the task to count as done, if it says.
    pub frames: Option<u64>,
    /// The batch this task is submitted in.
    pub batch: BatchIndex,
}

/// How a batch waits for another batch.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum BatchDep {
    /// Every task of this batch waits for every task of that batch
    /// (a per-leg stage before the windows that need it).
    All(BatchIndex),
    /// Element i of this batch waits for element i of that batch (two per-window
    /// stages of the same windows).
    Elementwise(BatchIndex),
}

/// Tasks submitted together as one array: one stage of one leg of one replica of
/// one subject. The array index of a task is its position in `tasks`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Batch {
    /// Stable id, e.g. `lig-a+lig-b/complex/r1/production`.
    pub id: String,
    /// Stage name.
    pub stage: String,
    /// Member tasks, in window order.
    pub tasks: Vec<TaskIndex>,
    /// Batches this one waits for.
    pub after: Vec<BatchDep>,
    /// Shared resources of every member.
    pub resources: Resources,
}

/// Every task and batch of a campaign.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Plan {
    /// Campaign name.
    pub campaign: String,
    /// Every task, grouped by batch, batches in dependency order.
    pub tasks: Vec<Task>,
    /// Every batch, in dependency order (a batch comes after those it waits for).
    pub batches: Vec<Batch>,
    /// The λ states of every leg, in the campaign's leg order.
    #[serde(default)]
    pub legs: Vec<LegStates>,
    /// The stage whose output is analysed (see `Campaign::analysed_stage`).
    #[serde(default)]
    pub analysed_stage: Option<String>,
    /// For every subject × leg × replica, the analysed stage's window tasks in
    /// window order (what `collect` reads).
    #[serde(default)]
    pub windows: Vec<WindowSet>,
    /// Task id → index; rebuilt by [`Plan::reindex`] after deserialising.
    #[serde(skip)]
    pub by_id: HashMap<String, TaskIndex>,
}

/// The λ states of one leg.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LegStates {
    /// Leg name.
    pub name: String,
    /// Component names (`lambda` for a single-component leg).
    pub components: Vec<String>,
    /// The primary λ of every state.
    pub lambdas: Vec<f64>,
    /// `states[k][c]`: component `c` at state `k`.
    pub states: Vec<Vec<f64>>,
}

/// The analysed stage's windows of one subject × leg × replica.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct WindowSet {
    /// The edge or ligand.
    pub subject: Subject,
    /// Leg name.
    pub leg: String,
    /// Replica, from 1.
    pub replica: u32,
    /// One task per window, in window order.
    pub tasks: Vec<TaskIndex>,
}

impl Plan {
    /// The index of the task with this id.
    pub fn task_by_id(&self, id: &str) -> Option<TaskIndex> {
        if self.by_id.is_empty() && !self.tasks.is_empty() {
            return self.tasks.iter().position(|t| t.id == id);
        }
        self.by_id.get(id).copied()
    }

    /// Rebuilds the id index (needed after deserialising a plan).
    pub fn reindex(&mut self) {
        self.by_id = self
            .tasks
            .iter()
            .enumerate()
            .map(|(i, t)| (t.id.clone(), i))
            .collect();
    }

    /// The λ states of a leg.
    pub fn leg(&self, name: &str) -> Option<&LegStates> {
        self.legs.iter().find(|l| l.name == name)
    }

    /// The analysed windows of one subject × leg × replica.
    pub fn windows_of(&self, subject: &Subject, leg: &str, replica: u32) -> Option<&WindowSet> {
        self.windows
            .iter()
            .find(|w| &w.subject == subject && w.leg == leg && w.replica == replica)
    }

    /// How many tasks each stage has, in stage order of first appearance.
    pub fn tasks_per_stage(&self) -> Vec<(String, usize)> {
        let mut out: Vec<(String, usize)> = Vec::new();
        for b in &self.batches {
            match out.iter_mut().find(|(s, _)| *s == b.stage) {
                Some((_, n)) => *n += b.tasks.len(),
                None => out.push((b.stage.clone(), b.tasks.len())),
            }
        }
        out
    }
}
