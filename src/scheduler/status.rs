//! What a scheduler says about one job element.

use serde::{Deserialize, Serialize};

/// A scheduler's view of one element, mapped onto one vocabulary for all of them.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub enum QueueState {
    /// Waiting to start (the reason, e.g. a dependency or priority, is in
    /// [`JobStatus::reason`]).
    Pending,
    /// Held by the user or an administrator.
    Held,
    /// Running.
    Running,
    /// Finished running; the scheduler is cleaning up.
    Completing,
    /// Stopped by the scheduler, will continue.
    Suspended,
    /// Put back in the queue (node failure or preemption with requeue).
    Requeued,
    /// Ended with exit code 0.
    Completed,
    /// Ended with a non-zero exit code.
    Failed,
    /// Killed at its walltime limit.
    Timeout,
    /// Killed for exceeding its memory.
    OutOfMemory,
    /// Its node failed.
    NodeFail,
    /// Preempted and not requeued.
    Preempted,
    /// Its node could not boot.
    BootFail,
    /// Its deadline passed before it could run.
    Deadline,
    /// Cancelled by a user or administrator.
    Cancelled,
    /// Will never start: a job it depends on failed.
    DependencyNeverSatisfied,
    /// A state legwork does not know (the scheduler's own word).
    Other(String),
}

impl QueueState {
    /// Whether the element still holds (or will hold) a place in the queue.
    pub fn is_live(&self) -> bool {
        matches!(
            self,
            QueueState::Pending
                | QueueState::Held
                | QueueState::Running
                | QueueState::Completing
                | QueueState::Suspended
                | QueueState::Requeued
                | QueueState::DependencyNeverSatisfied
        )
    }

    /// Whether it has started (its markers may exist).
    pub fn has_started(&self) -> bool {
        matches!(
            self,
            QueueState::Running | QueueState::Completing | QueueState::Suspended
        )
    }

    /// The failure reason a user can act on, for a terminal state that is not a
    /// success; `None` for live states and for [`QueueState::Completed`].
    pub fn failure_reason(&self) -> Option<String> {
        Some(match self {
            QueueState::Failed => "non-zero exit".into(),
            QueueState::Timeout => "walltime exceeded".into(),
            QueueState::OutOfMemory => "out of memory".into(),
            QueueState::NodeFail => "node failure".into(),
            QueueState::Preempted => "preempted".into(),
            QueueState::BootFail => "node boot failure".into(),
            QueueState::Deadline => "deadline passed".into(),
            QueueState::Cancelled => "cancelled outside legwork".into(),
            QueueState::Other(s) => format!("scheduler state {s}"),
            _ => return None,
        })
    }
}

/// The status of one element.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct JobStatus {
    /// Its state.
    pub state: QueueState,
    /// The scheduler's reason (why pending, why it failed), if it gave one.
    pub reason: Option<String>,
    /// Exit code, when ended and known.
    pub exit_code: Option<i32>,
    /// Signal that ended it, when known.
    pub signal: Option<i32>,
}

impl JobStatus {
    /// A status with only a state.
    pub fn new(state: QueueState) -> Self {
        JobStatus {
            state,
            reason: None,
            exit_code: None,
            signal: None,
        }
    }
}
