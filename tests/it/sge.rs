//! Grid Engine through fake `qsub`/`qstat`/`qacct`/`qdel` shims replaying outputs
//! in the formats of the Grid Engine manual pages (tests/fixtures/sge/).
//! Verified against recorded outputs only, not a live cell.

use crate::scheduler_support::*;
use legwork::scheduler::{self, QueueState, SchedulerKind};

#[test]
fn sge_arrays_holds_live_and_accounted_states_names_and_cancel() {
    let d = tempfile::tempdir().unwrap();
    let (cfg, log) = with_shims(SchedulerKind::SGE, d.path());
    let mut s = scheduler::build(&cfg, d.path(), "t");
    let (sub, text) = rendered_submission(s.as_ref(), d.path(), "4000");
    assert!(text.contains("#$ -t 1-4\n"), "{text}");
    assert!(text.contains("#$ -tc 2\n"), "{text}");
    assert!(text.contains("#$ -l h_rt=01:30:00\n"), "{text}");

    let job = s.submit(&sub).unwrap();
    assert_eq!(job, "4321");
    let calls = std::fs::read_to_string(&log).unwrap();
    assert!(
        calls.contains(&format!(
            "qsub -terse -hold_jid 4000 {}",
            sub.script.display()
        )),
        "{calls}"
    );

    let q = s.query(std::slice::from_ref(&job)).unwrap();
    let st = |i| q.elements[&s.element_id(&job, i)].clone();
    assert_eq!(st(1).state, QueueState::Running);
    assert_eq!(st(2).state, QueueState::Completed);
    // qacct's `failed 37 : qmaster enforced h_rt …` is a walltime kill.
    assert_eq!(st(3).state, QueueState::Timeout);
    assert_eq!(st(4).state, QueueState::Pending);
    assert!(
        !q.elements.keys().any(|k| k.starts_with("9999")),
        "another user's job leaked in"
    );
    // One qstat and one qacct (by the campaign's job-name pattern) per poll.
    let calls = std::fs::read_to_string(&log).unwrap();
    assert!(calls.lines().any(|l| l == "qacct -j lw.t.*"), "{calls}");

    assert_eq!(s.find_by_name(&sub.name).unwrap(), vec![job.clone()]);
    s.cancel(&[s.element_id(&job, 4)]).unwrap();
    let calls = std::fs::read_to_string(&log).unwrap();
    assert!(calls.lines().any(|l| l == "qdel 4321 -t 4"), "{calls}");
}
