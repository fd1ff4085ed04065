//! From what the scheduler says about an element and what the task's markers say
//! to a task state with an actionable reason ("done means done").

use super::markers;
use super::record::{FailureKind, TaskState};
use crate::scheduler::{hms, JobStatus, QueueState};
use std::path::Path;

/// The verdict on one live task.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) enum Verdict {
    /// Still queued or running (state to record).
    Live(TaskState),
    /// Will never start; put it back in the plan.
    Blocked,
    /// Ended: the new state, reason and class.
    Ended(TaskState, Option<String>, Option<FailureKind>),
}

fn signal_name(n: i32) -> String {
    match n {
        1 => "HUP".into(),
        2 => "INT".into(),
        6 => "ABRT".into(),
        9 => "KILL".into(),
        11 => "SEGV".into(),
        15 => "TERM".into(),
        n => n.to_string(),
    }
}

/// Classifies a task whose current attempt is `attempt` in `dir`, given its
/// element's status (`None`: the scheduler no longer knows it) and whether the
/// queue view includes accounting. `walltime_s` is the attempt's limit;
/// `check_output` validates the output after exit 0.
pub(crate) fn classify(
    status: Option<&JobStatus>,
    dir: &Path,
    attempt: u32,
    walltime_s: u64,
    check_output: &dyn Fn() -> Result<(), String>,
) -> Verdict {
    if let Some(st) = status {
        if st.state == QueueState::DependencyNeverSatisfied {
            return Verdict::Blocked;
        }
        if st.state.is_live() {
            let running = st.state.has_started();
            return Verdict::Live(if running {
                TaskState::Running
            } else {
                TaskState::Queued
            });
        }
    }
    let exited = markers::exited(dir, attempt);
    let q = status.map(|s| &s.state);
    let failed = |reason: String, kind| Verdict::Ended(TaskState::Failed, Some(reason), Some(kind));
    match exited {
        Some(ex) => {
            let clean = ex.code == Some(0) && ex.signal.is_none();
            if clean {
                return match check_output() {
                    Ok(()) => Verdict::Ended(TaskState::Done, None, None),
                    Err(why) => {
                        let (reason, kind) = super::reasons::output_failure(why);
                        failed(reason, kind)
                    }
                };
            }
            let elapsed = ex.elapsed_s();
            let near_limit = elapsed.is_some_and(|e| e >= 0.97 * walltime_s as f64);
            match (q, ex.signal.as_deref()) {
                (Some(QueueState::Timeout), _) => failed(
                    format!("walltime {} exceeded", hms(walltime_s)),
                    FailureKind::Walltime,
                ),
                (Some(QueueState::OutOfMemory), _) => failed(
                    "out of memory (killed by the scheduler)".into(),
                    FailureKind::OutOfMemory,
                ),
                (Some(QueueState::NodeFail | QueueState::BootFail), _) => {
                    failed("node failure".into(), FailureKind::NodeFailure)
                }
                (_, Some("TERM" | "XCPU" | "USR1" | "USR2")) if near_limit => failed(
                    format!(
                        "walltime {} exceeded (SIG{} after {:.0} s)",
                        hms(walltime_s),
                        ex.signal.as_deref().unwrap_or(""),
                        elapsed.unwrap_or(0.0)
                    ),
                    FailureKind::Walltime,
                ),
                (Some(QueueState::Cancelled | QueueState::Preempted), sig) => failed(
                    format!(
                        "cancelled or preempted outside legwork{}",
                        sig.map(|s| format!(" (SIG{s})")).unwrap_or_default()
                    ),
                    FailureKind::Cancelled,
                ),
                (_, Some("KILL")) => failed(
                    "killed by SIGKILL (often out of memory, or a hard walltime kill)".into(),
                    FailureKind::Signal,
                ),
                (_, Some(sig)) => failed(
                    format!("killed by SIG{sig} (cancelled, preempted or stopped)"),
                    FailureKind::Signal,
                ),
                (_, None) => failed(
                    format!(
                        "exit code {}; see the job's error log under .legwork/logs/",
                        ex.code
                            .map(|c| c.to_string())
                            .unwrap_or_else(|| "unknown".into())
                    ),
                    FailureKind::ExitCode,
                ),
            }
        }
        None => {
            let started = markers::started(dir, attempt).is_some();
            let st = status;
            match st.map(|s| &s.state) {
                Some(QueueState::Timeout) => failed(
                    format!("walltime {} exceeded (no exit marker)", hms(walltime_s)),
                    FailureKind::Walltime,
                ),
                Some(QueueState::OutOfMemory) => {
                    failed("out of memory (no exit marker)".into(), FailureKind::OutOfMemory)
                }
                Some(QueueState::NodeFail | QueueState::BootFail) => {
                    failed("node failure (no exit marker)".into(), FailureKind::NodeFailure)
                }
                Some(QueueState::Cancelled | QueueState::Preempted) => failed(
                    if started {
                        "cancelled or preempted outside legwork while running".into()
                    } else {
                        "cancelled outside legwork before it started".into()
                    },
                    FailureKind::Cancelled,
                ),
                Some(s @ (QueueState::Failed | QueueState::Deadline | QueueState::Other(_))) => {
                    let st = st.unwrap();
                    let how = match (st.exit_code, st.signal) {
                        (_, Some(sig)) => format!("SIG{}", signal_name(sig)),
                        (Some(c), None) => format!("exit code {c}"),
                        _ => s.failure_reason().unwrap_or_default(),
                    };
                    failed(
                        format!(
                            "{how}{} (no exit marker: the wrapper did not finish)",
                            st.reason.as_ref().map(|r| format!(", {r}")).unwrap_or_default()
                        ),
                        FailureKind::Scheduler,
                    )
                }
                Some(QueueState::Completed) => failed(
                    "the scheduler says it ended 0 but it left no exit marker; is the task directory on a filesystem the compute node sees?".into(),
                    FailureKind::Scheduler,
                ),
                _ => Verdict::Ended(
                    TaskState::Lost,
                    Some(if started {
                        "gone from the queue while running, with no exit marker (node lost or killed hard)".into()
                    } else {
                        "gone from the queue without starting, and no exit marker".into()
                    }),
                    Some(FailureKind::Lost),
                ),
            }
        }
    }
}

/// Whether an ended verdict rests only on a missing exit marker that may still
/// arrive: the scheduler no longer lists the element, or lists it as completed,
/// and the attempt has no exit marker yet.
pub(crate) fn marker_may_be_late(status: Option<&JobStatus>, dir: &Path, attempt: u32) -> bool {
    matches!(status.map(|s| &s.state), None | Some(QueueState::Completed))
        && markers::exited(dir, attempt).is_none()
}
