//! Failure reasons by kind: the output a reader could not read (which a rerun
//! of the engine cannot cure, so it is never resubmitted by itself and is
//! re-read instead), and what to do next for each kind of failure.

use super::journal::Event;
use super::record::{FailureKind, TaskState};
use super::{CampaignState, Context, Selection, StateError};

/// How a [`super::TaskHooks::check_output`] reason starts when the output is
/// complete but does not read with the campaign's reader (a reader setting, not
/// a run that died).
pub const OUTPUT_UNREADABLE: &str = "output unreadable: ";

/// The reason and kind of a task that exited 0 but whose output check said `why`.
pub(crate) fn output_failure(why: String) -> (String, FailureKind) {
    if why.starts_with(OUTPUT_UNREADABLE) {
        (why, FailureKind::Unreadable)
    } else {
        (format!("exit 0 but {why}"), FailureKind::Output)
    }
}

/// What to do about failures of `kind`, in one line (`FILE` is the campaign).
pub fn next_step(kind: Option<FailureKind>) -> &'static str {
    match kind {
        Some(FailureKind::Unreadable) => {
            "the engine finished and its output is kept; nothing reruns it. Fix the reader \
             (try it on one file: `legwork try-reader FILE --leg LEG OUTPUT`), then \
             `legwork resume FILE` re-reads these outputs without running the engine"
        }
        Some(FailureKind::Output) => {
            "the output is missing or short (the engine died or was stopped); `legwork resume FILE` reruns these tasks"
        }
        Some(FailureKind::Walltime) => {
            "`legwork resume FILE` reruns them with the walltime multiplied by scheduler.walltime_factor"
        }
        Some(FailureKind::ExitCode | FailureKind::Signal) => {
            "read the job logs under .legwork/logs/; `legwork resume FILE` reruns them"
        }
        _ => "`legwork resume FILE` reruns them",
    }
}

/// What [`revalidate_unreadable`] found.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Revalidated {
    /// Tasks whose output now reads: done, without a rerun.
    pub now_done: Vec<String>,
    /// Tasks whose output still does not read.
    pub still_unreadable: Vec<String>,
    /// Tasks whose output now reads but is short: an ordinary output failure,
    /// which resume reruns.
    pub now_short: Vec<String>,
}

/// Reads again the outputs of the selected tasks that failed as unreadable
/// (with the reader as it is now), without running anything: those that read
/// become done; those that still do not keep their (updated) reason.
pub fn revalidate_unreadable(
    state: &mut CampaignState,
    ctx: &Context,
    sel: &Selection,
) -> Result<Revalidated, StateError> {
    let mut out = Revalidated::default();
    let mut events = Vec::new();
    for ti in 0..state.plan.tasks.len() {
        let st = state.state(ti);
        let r = state.record(ti);
        let task = &state.plan.tasks[ti];
        if st != TaskState::Failed
            || r.kind != Some(FailureKind::Unreadable)
            || !sel.matches(task, st)
        {
            continue;
        }
        let dir = state.task_dir(task);
        let (new, reason, kind) = match ctx.hooks.check_output(&state.plan, ti, &dir) {
            Ok(()) => {
                out.now_done.push(task.id.clone());
                (TaskState::Done, None, None)
            }
            Err(why) => {
                let (reason, kind) = output_failure(why);
                if kind == FailureKind::Unreadable {
                    out.still_unreadable.push(task.id.clone());
                } else {
                    out.now_short.push(task.id.clone());
                }
                (TaskState::Failed, Some(reason), Some(kind))
            }
        };
        if new != st || reason != r.reason || kind != r.kind {
            events.push(Event::Task {
                task: task.id.clone(),
                state: new,
                attempt: r.attempt,
                reason,
                kind,
                walltime_s: None,
            });
        }
    }
    let changed = !events.is_empty();
    for e in events {
        state.record_event(e);
    }
    if changed {
        state.commit()?;
    }
    Ok(out)
}
