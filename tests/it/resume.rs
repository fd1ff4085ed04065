//! Resume never starts a second attempt beside a live one: a task cancelled
//! through legwork whose element the scheduler still lists (a stub that keeps
//! everything pending, as Slurm keeps a job COMPLETING) is not resubmitted by
//! `resume --state cancelled`; once the scheduler has let it go, it is.

use crate::scheduler_support::{exit_code_context, plan, Stub};
use legwork::state::{self, CampaignState, Selection, TaskState};
use std::time::Duration;

#[test]
fn a_cancelled_task_still_in_the_queue_is_not_resubmitted() {
    let d = tempfile::tempdir().unwrap();
    let cfg = legwork::scheduler::SchedulerConfig::default();
    let ctx = exit_code_context(&cfg);
    let mut st = CampaignState::open(d.path(), plan(1, 2, 60), Duration::ZERO).unwrap();
    let (mut stub, _) = Stub::new();
    state::submit_ready(&mut st, &mut stub, &ctx, &Selection::all()).unwrap();
    let c = state::cancel(&mut st, &mut stub, &Selection::all(), "test").unwrap();
    assert_eq!(c.live, 3);
    let sel = Selection {
        states: vec![TaskState::Cancelled],
        ..Default::default()
    };
    let r = state::resume(&mut st, &mut stub, &ctx, &sel).unwrap();
    assert!(
        r.requeued.is_empty(),
        "resubmitted beside a live attempt: {:?}",
        r.requeued
    );
    assert_eq!(st.summary().total.cancelled, 3);

    // A scheduler that has forgotten those jobs: now they come back.
    let (mut fresh, _) = Stub::new();
    let r = state::resume(&mut st, &mut fresh, &ctx, &sel).unwrap();
    assert_eq!(r.requeued.len(), 3);
    assert_eq!(r.submitted.tasks, 3);
    let prepare = st.record(0);
    assert_eq!((prepare.state, prepare.attempt), (TaskState::Queued, 2));
}
