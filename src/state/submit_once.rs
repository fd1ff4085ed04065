//! Exactly-once submission. A submission command can fail *after* the
//! scheduler took the job: Slurm answers "Socket timed out" or hangs past the
//! command timeout once it has queued it, and a submit command can exit 0
//! without printing the id. Retrying such a failure blindly runs the same
//! attempt twice. Here an ambiguous outcome is resolved by looking the job up
//! by its name (every legwork job name is unique to one submission number)
//! before anything is retried; only a submission the scheduler certainly did
//! not take is submitted again, under the same name, so a late arrival of the
//! first one is found by the same look-up.

use crate::scheduler::{JobId, Scheduler, SchedulerError, Submission};
use std::time::Duration;

/// How one submission ended.
#[derive(Debug)]
pub enum SubmitOutcome {
    /// The scheduler holds it as this job.
    Taken(JobId),
    /// The scheduler certainly did not take it: it refused the request, the
    /// command could not start, or several tries came back ambiguous and the
    /// job was not found by name after any of them.
    NotTaken(SchedulerError),
    /// It may or may not have been taken and the look-up by name failed too:
    /// the intent stays in the journal, and the next reconciliation (every poll
    /// begins with one) resolves it by name.
    Unresolved(SchedulerError),
}

/// Whether a failed submission may nevertheless have been taken.
pub fn ambiguous(e: &SchedulerError) -> bool {
    match e {
        // Exit 0 without a readable id: it was most likely taken.
        SchedulerError::Parse { .. } => true,
        SchedulerError::Run(r) => r.is_transient(),
        SchedulerError::Io { .. } | SchedulerError::Template { .. } => false,
    }
}

/// Submission tries when every outcome was ambiguous and the job was not found.
const TRIES: u32 = 3;

/// The waits before each look-up by name after an ambiguous outcome: a
/// controller that timed out may still be processing the request (common
/// practice, no source: a few seconds covers a controller's queue of RPCs).
const LOOKUPS: &[Duration] = &[
    Duration::ZERO,
    Duration::from_secs(2),
    Duration::from_secs(5),
];

/// Submits `sub` so that the scheduler holds it at most once, and says how it
/// ended. `sleep` waits between look-ups (a test may shorten it).
pub fn submit_exactly_once(
    sched: &mut dyn Scheduler,
    sub: &Submission,
    sleep: &dyn Fn(Duration),
) -> SubmitOutcome {
    let mut last = None;
    for attempt in 1..=TRIES {
        let err = match sched.submit(sub) {
            Ok(job) => return SubmitOutcome::Taken(job),
            Err(e) if !ambiguous(&e) => return SubmitOutcome::NotTaken(e),
            Err(e) => e,
        };
        tracing::warn!(
            "submission {} may or may not have reached the scheduler ({err}); looking it up by name before anything else",
            sub.name
        );
        for wait in LOOKUPS {
            sleep(*wait);
            match sched.find_by_name(&sub.name) {
                Ok(ids) if !ids.is_empty() => {
                    return SubmitOutcome::Taken(keep_first(sched, sub, ids))
                }
                Ok(_) => {}
                Err(lookup) => {
                    tracing::warn!(
                        "could not look up {} by name ({lookup}); legwork resolves it at the next poll",
                        sub.name
                    );
                    return SubmitOutcome::Unresolved(err);
                }
            }
        }
        tracing::warn!(
            "{} is not in the scheduler after try {attempt} of {TRIES}: the scheduler did not take it",
            sub.name
        );
        last = Some(err);
    }
    SubmitOutcome::NotTaken(last.expect("at least one try"))
}

/// Of several jobs carrying one submission's name (a try that arrived late), the
/// first is kept and the others are cancelled before any of their elements can
/// start a task (and the wrapper refuses an attempt already started).
fn keep_first(sched: &mut dyn Scheduler, sub: &Submission, mut ids: Vec<JobId>) -> JobId {
    ids.sort_by_key(|j| (j.len(), j.clone()));
    let keep = ids.remove(0);
    if !ids.is_empty() {
        tracing::warn!(
            "{} reached the scheduler {} times; keeping job {keep} and cancelling {ids:?}",
            sub.name,
            ids.len() + 1
        );
        let extra: Vec<String> = ids
            .iter()
            .flat_map(|j| {
                sub.elements
                    .iter()
                    .map(|e| sched.element_id(j, e.array_index))
                    .collect::<Vec<_>>()
            })
            .collect();
        if let Err(e) = sched.cancel(&extra) {
            tracing::warn!("could not cancel the extra jobs {ids:?}: {e}");
        }
    }
    keep
}
