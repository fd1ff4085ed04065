//! PBS Pro through fake `qsub`/`qstat`/`qselect`/`qdel` shims replaying outputs
//! in the formats of the PBS Professional reference guide
//! (tests/fixtures/pbs/). Verified against recorded outputs only, not a live
//! server.

use crate::scheduler_support::*;
use legwork::scheduler::{self, QueueState, SchedulerKind};

#[test]
fn pbs_arrays_dependencies_states_names_and_cancel() {
    let d = tempfile::tempdir().unwrap();
    let (cfg, log) = with_shims(SchedulerKind::PBS, d.path());
    let mut s = scheduler::build(&cfg, d.path(), "t");
    let (sub, text) = rendered_submission(s.as_ref(), d.path(), "1200[].pbs01");
    // PBS Pro arrays are ranges: a subset is renumbered 1..n.
    assert!(text.contains("#PBS -J 1-4\n"), "{text}");
    assert!(
        text.contains("#PBS -l select=1:ncpus=4:ngpus=1:mem=2048mb\n"),
        "{text}"
    );
    assert!(text.contains("#PBS -l walltime=01:30:00\n"), "{text}");
    assert!(text.contains(&format!("#PBS -N {}\n", sub.name)), "{text}");
    assert!(text.contains("  4) dir="), "{text}");

    let job = s.submit(&sub).unwrap();
    assert_eq!(job, "1234[].pbs01");
    let calls = std::fs::read_to_string(&log).unwrap();
    assert!(
        calls.contains(&format!(
            "qsub -W depend=afterok:1200[].pbs01 {}",
            sub.script.display()
        )),
        "{calls}"
    );

    let q = s.query(std::slice::from_ref(&job)).unwrap();
    let st = |i| q.elements[&s.element_id(&job, i)].clone();
    assert_eq!(st(1).state, QueueState::Running);
    assert_eq!(st(2).state, QueueState::Completed);
    assert_eq!(
        (st(3).state, st(3).exit_code),
        (QueueState::Failed, Some(2))
    );
    // Exit status 256 + n: killed by signal n (here SIGTERM).
    assert_eq!((st(4).state, st(4).signal), (QueueState::Failed, Some(15)));
    assert!(
        !q.elements.contains_key("1234[].pbs01"),
        "the array's parent line is not an element"
    );

    assert_eq!(s.find_by_name(&sub.name).unwrap(), vec![job.clone()]);
    s.cancel(&[s.element_id(&job, 1)]).unwrap();
    let calls = std::fs::read_to_string(&log).unwrap();
    assert!(calls.lines().any(|l| l == "qdel 1234[1].pbs01"), "{calls}");
}
