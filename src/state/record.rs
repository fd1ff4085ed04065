//! What legwork knows of one task and one submission.

use serde::{Deserialize, Serialize};

/// The state of a task.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Default, Serialize, Deserialize,
)]
#[serde(rename_all = "lowercase")]
pub enum TaskState {
    /// Not submitted (or returned to the plan after a dependency failed).
    #[default]
    Planned,
    /// In the scheduler's queue, not started.
    Queued,
    /// Started.
    Running,
    /// Exited 0 and its output validates.
    Done,
    /// Ended any other way; the reason says how.
    Failed,
    /// Gone from the queue with no exit marker.
    Lost,
    /// Cancelled through legwork.
    Cancelled,
}

impl TaskState {
    /// Every state, in table order.
    pub const ALL: [TaskState; 7] = [
        TaskState::Planned,
        TaskState::Queued,
        TaskState::Running,
        TaskState::Done,
        TaskState::Failed,
        TaskState::Lost,
        TaskState::Cancelled,
    ];

    /// Queued or running: holds a place in the scheduler.
    pub fn is_live(self) -> bool {
        matches!(self, TaskState::Queued | TaskState::Running)
    }

    /// The lower-case name.
    pub fn name(self) -> &'static str {
        match self {
            TaskState::Planned => "planned",
            TaskState::Queued => "queued",
            TaskState::Running => "running",
            TaskState::Done => "done",
            TaskState::Failed => "failed",
            TaskState::Lost => "lost",
            TaskState::Cancelled => "cancelled",
        }
    }
}

impl std::str::FromStr for TaskState {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        TaskState::ALL
            .into_iter()
            .find(|t| t.name() == s)
            .ok_or_else(|| {
                format!("unknown task state `{s}`; one of planned, queued, running, done, failed, lost, cancelled")
            })
    }
}

/// Why a task failed, in classes a user acts on differently.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum FailureKind {
    /// Exited non-zero.
    ExitCode,
    /// Killed by a signal.
    Signal,
    /// Killed at its walltime (resume multiplies the walltime).
    Walltime,
    /// Killed for exceeding its memory.
    OutOfMemory,
    /// Its node failed (or could not boot).
    NodeFailure,
    /// Exited 0 but its output is missing, empty or short (a rerun can cure it).
    Output,
    /// Exited 0 and its output is complete, but the reader cannot read it (a
    /// reader setting: never rerun by itself, re-read once the reader is fixed).
    Unreadable,
    /// Cancelled or preempted by someone other than legwork.
    Cancelled,
    /// Gone from the queue with no exit marker.
    Lost,
    /// Any other scheduler verdict.
    Scheduler,
}

impl FailureKind {
    /// The label in the status table.
    pub fn label(self) -> &'static str {
        match self {
            FailureKind::ExitCode => "exit code",
            FailureKind::Signal => "signal",
            FailureKind::Walltime => "walltime",
            FailureKind::OutOfMemory => "out of memory",
            FailureKind::NodeFailure => "node failure",
            FailureKind::Output => "output missing or short",
            FailureKind::Unreadable => "output unreadable",
            FailureKind::Cancelled => "cancelled outside legwork",
            FailureKind::Lost => "lost",
            FailureKind::Scheduler => "scheduler",
        }
    }
}

/// What legwork knows of one task.
#[derive(Debug, Clone, PartialEq, Eq, Default, Serialize, Deserialize)]
pub struct TaskRecord {
    /// Current state.
    pub state: TaskState,
    /// Attempts submitted so far (the current one when live).
    pub attempt: u32,
    /// The submission of the current attempt.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub submission: Option<u64>,
    /// Why it failed or was lost.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub reason: Option<String>,
    /// Class of failure.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub kind: Option<FailureKind>,
    /// Walltime of the next attempt when raised after a walltime kill (seconds).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub walltime_s: Option<u64>,
    /// When the current attempt's element was first seen gone from the queue with
    /// no exit marker (UTC, RFC 3339); cleared by the next state change.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub awaiting_marker_since: Option<String>,
}

/// Where a submission stands.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum SubmissionStatus {
    /// Journalled before calling the scheduler; no job id yet.
    Intent,
    /// The scheduler accepted it.
    Submitted,
    /// Never reached the scheduler (it refused, or a crash came first).
    Abandoned,
}

/// One element of a submission: task id, attempt, array index.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct SubmittedTask {
    /// Task id.
    pub task: String,
    /// Attempt.
    pub attempt: u32,
    /// Array index.
    pub index: usize,
    /// Hash of the `task.sh` this attempt was submitted with (see
    /// [`super::life`]: a later render that differs makes a done task outdated).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub script: Option<String>,
    /// The frames its output had to hold when it was submitted (a higher
    /// target later makes a done task short).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub frames: Option<u64>,
}

/// One submission (a subset of one batch as one array job).
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct SubmissionRecord {
    /// Batch id.
    pub batch: String,
    /// Job name.
    pub name: String,
    /// Its elements.
    pub tasks: Vec<SubmittedTask>,
    /// Where it stands.
    pub status: SubmissionStatus,
    /// Job id, once submitted.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub job: Option<String>,
}
