//! Scale: the number of scheduler queries per poll does not grow with the number
//! of tasks (a count, not a time): one `query` for 100,000 tasks as for 100, and
//! a fixed number of Slurm commands (squeue + sacct) whatever the number of jobs.

use crate::scheduler_support::{exit_code_context, plan, Stub};
use legwork::scheduler::{self, SchedulerConfig, SchedulerKind};
use legwork::state::{self, CampaignState, Selection};
use std::path::Path;
use std::time::Duration;

fn queries_per_poll(edges: usize, windows: usize) -> (usize, u64) {
    let d = tempfile::tempdir().unwrap();
    let p = plan(edges, windows, 600);
    let n = p.tasks.len();
    let cfg = SchedulerConfig {
        max_queued: 0,
        ..Default::default()
    };
    let mut st = CampaignState::open(d.path(), p, Duration::ZERO).unwrap();
    let (mut stub, queries) = Stub::new();
    let ctx = exit_code_context(&cfg);
    let s = state::submit_ready(&mut st, &mut stub, &ctx, &Selection::all()).unwrap();
    assert_eq!(
        s.tasks, n,
        "every task is ready (the stub queues the windows behind their prepare)"
    );
    let before = queries.get();
    state::poll(&mut st, &mut stub, &ctx).unwrap();
    assert_eq!(st.summary().total.queued, n);
    (n, queries.get() - before)
}

#[test]
fn one_query_per_poll_for_a_hundred_or_a_hundred_thousand_tasks() {
    let (small, q_small) = queries_per_poll(10, 9);
    let (large, q_large) = queries_per_poll(1000, 99);
    assert_eq!((small, large), (100, 100_000));
    assert_eq!(q_small, 1);
    assert_eq!(q_large, q_small);
}

/// Slurm commands one poll runs, counted by the fake shims' invocation log.
fn slurm_commands_per_poll(edges: usize) -> Vec<String> {
    let d = tempfile::tempdir().unwrap();
    let root = d.path().join("c");
    let fake = d.path().join("fake");
    std::fs::create_dir_all(&fake).unwrap();
    // Wrap each shim so every call is logged with its program name.
    let shims = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/slurm/bin");
    let logged = d.path().join("bin");
    std::fs::create_dir_all(&logged).unwrap();
    for prog in ["sbatch", "squeue", "sacct", "scancel"] {
        let w = logged.join(prog);
        std::fs::write(
            &w,
            format!(
                "#!/bin/bash\nexport FAKE_SLURM_DIR='{}'\necho {prog} >> \"$FAKE_SLURM_DIR/calls\"\nexec {} \"$@\"\n",
                fake.display(),
                shims.join(prog).display()
            ),
        )
        .unwrap();
        use std::os::unix::fs::PermissionsExt;
        std::fs::set_permissions(&w, std::fs::Permissions::from_mode(0o755)).unwrap();
    }
    let p = plan(edges, 4, 600);
    let cfg = SchedulerConfig {
        kind: SchedulerKind::SLURM,
        max_queued: 0,
        commands_dir: Some(logged.clone()),
        ..Default::default()
    };
    let mut st = CampaignState::open(&root, p, Duration::ZERO).unwrap();
    let mut sched = scheduler::build(&cfg, &root, "t");
    let ctx = exit_code_context(&cfg);
    state::submit_ready(&mut st, sched.as_mut(), &ctx, &Selection::all()).unwrap();
    std::fs::remove_file(fake.join("calls")).unwrap();
    state::poll(&mut st, sched.as_mut(), &ctx).unwrap();
    std::fs::read_to_string(fake.join("calls"))
        .unwrap()
        .lines()
        .map(String::from)
        .collect()
}

#[test]
fn a_slurm_poll_runs_the_same_commands_for_2_or_40_jobs() {
    let small = slurm_commands_per_poll(1);
    let large = slurm_commands_per_poll(20);
    assert_eq!(small, vec!["squeue", "sacct"]);
    assert_eq!(large, small);
}
