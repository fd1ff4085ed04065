//! Which tasks an operation touches: by subject (edge or ligand), leg, replica,
//! window, stage, state or task id. Empty lists select everything.

use super::record::TaskState;
use crate::plan::Task;

/// A selection of tasks. Within one list any entry matches; across lists all
/// must match.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Selection {
    /// Subject ids (`a+b` for an edge, a ligand id).
    pub subjects: Vec<String>,
    /// Leg names.
    pub legs: Vec<String>,
    /// Replica numbers (from 1).
    pub replicas: Vec<u32>,
    /// Window indices (from 0).
    pub windows: Vec<usize>,
    /// Stage names.
    pub stages: Vec<String>,
    /// States.
    pub states: Vec<TaskState>,
    /// Task ids or id prefixes (`ork-01+ork-02/complex/`).
    pub tasks: Vec<String>,
}

impl Selection {
    /// Everything.
    pub fn all() -> Self {
        Self::default()
    }

    /// Whether the selection restricts nothing.
    pub fn is_everything(&self) -> bool {
        *self == Self::default()
    }

    /// Whether `task`, in `state`, is selected.
    pub fn matches(&self, task: &Task, state: TaskState) -> bool {
        (self.subjects.is_empty() || self.subjects.contains(&task.subject.id()))
            && (self.legs.is_empty() || self.legs.contains(&task.leg))
            && (self.replicas.is_empty() || self.replicas.contains(&task.replica))
            && (self.windows.is_empty() || task.window.is_some_and(|w| self.windows.contains(&w)))
            && (self.stages.is_empty() || self.stages.contains(&task.stage))
            && (self.states.is_empty() || self.states.contains(&state))
            && (self.tasks.is_empty() || self.tasks.iter().any(|p| task.id.starts_with(p.as_str())))
    }
}
