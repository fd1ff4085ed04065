//! LSF through fake `bsub`/`bjobs`/`bkill` shims replaying outputs in the
//! formats of the IBM Spectrum LSF command reference (tests/fixtures/lsf/).
//! Verified against recorded outputs only, not a live cluster.

use crate::scheduler_support::*;
use legwork::scheduler::{self, QueueState, SchedulerKind};

#[test]
fn lsf_arrays_dependencies_states_names_and_cancel() {
    let d = tempfile::tempdir().unwrap();
    let (cfg, log) = with_shims(SchedulerKind::LSF, d.path());
    let mut s = scheduler::build(&cfg, d.path(), "t");
    let (sub, text) = rendered_submission(s.as_ref(), d.path(), "5000");
    // LSF indices start at 1: positions 0..3 are elements 1..4.
    assert!(
        text.contains(&format!("#BSUB -J {}[1-4]%2\n", sub.name)),
        "{text}"
    );
    assert!(text.contains("#BSUB -W 90\n"), "{text}");
    assert!(text.contains("#BSUB -M 2048MB\n"), "{text}");

    let job = s.submit(&sub).unwrap();
    assert_eq!(job, "5678");
    let calls = std::fs::read_to_string(&log).unwrap();
    assert!(calls.contains("bsub -w done(5000)\n"), "{calls}");
    assert!(
        calls.contains("stdin: #BSUB -n 4"),
        "bsub reads the script on stdin: {calls}"
    );

    let q = s.query(std::slice::from_ref(&job)).unwrap();
    let st = |i| q.elements[&s.element_id(&job, i)].clone();
    assert_eq!(st(1).state, QueueState::Running);
    assert_eq!(st(2).state, QueueState::Completed);
    assert_eq!(
        (st(3).state, st(3).exit_code),
        (QueueState::Failed, Some(3))
    );
    assert_eq!(st(4).state, QueueState::Pending);
    assert!(!q.elements.contains_key("777"));

    assert_eq!(s.find_by_name(&sub.name).unwrap(), vec![job.clone()]);
    s.cancel(&[s.element_id(&job, 1)]).unwrap();
    let calls = std::fs::read_to_string(&log).unwrap();
    assert!(calls.lines().any(|l| l == "bkill 5678[1]"), "{calls}");
}
