//! The local executor end to end through the state library: a hand-built plan,
//! task scripts written here, the real detached executor process.

use crate::scheduler_support::*;
use legwork::scheduler::{self, SchedulerConfig};
use legwork::state::{self, markers, CampaignState, Context, FailureKind, Selection};
use std::sync::atomic::AtomicBool;
use std::time::Duration;

fn config(max_parallel: usize) -> SchedulerConfig {
    with_built_legwork(SchedulerConfig {
        max_parallel: Some(max_parallel),
        poll_seconds: 0.1,
        ..Default::default()
    })
}

fn settle(
    st: &mut CampaignState,
    sched: &mut dyn scheduler::Scheduler,
    ctx: &Context,
) -> state::Summary {
    let stop = AtomicBool::new(false);
    state::watch_until_settled(
        st,
        sched,
        ctx,
        Duration::from_millis(100),
        &stop,
        &mut |_| {},
    )
    .unwrap()
    .summary
}

// Every task records its start and end (nanoseconds) so the test can check
// ordering and concurrency from the tasks' own clocks.
const OK: &str =
    "s=$(date +%s%N); sleep 0.2; echo ok > out.txt; echo \"$s $(date +%s%N)\" > span.txt\n";

#[test]
fn a_campaign_runs_to_done_with_dependencies_and_the_concurrency_limit() {
    let d = tempfile::tempdir().unwrap();
    let root = d.path();
    let plan = plan(2, 4, 60);
    write_tasks(root, &plan, OK);
    let cfg = config(2);
    let mut st = CampaignState::open(root, plan.clone(), Duration::ZERO).unwrap();
    let mut sched = scheduler::build(&cfg, root, "t");
    let hooks = OutTxt;
    let ctx = Context {
        campaign: "t",
        config: &cfg,
        batch_template: None,
        hooks: &hooks,
        clock: &legwork::state::SystemClock,
    };
    let s = settle(&mut st, sched.as_mut(), &ctx);
    assert!(s.all_done(), "{s:?}");
    let span = |t: &legwork::plan::Task| -> (u128, u128) {
        let s = std::fs::read_to_string(root.join(&t.dir).join("span.txt")).unwrap();
        let v: Vec<u128> = s.split_whitespace().map(|x| x.parse().unwrap()).collect();
        (v[0], v[1])
    };
    let spans: Vec<(u128, u128)> = plan.tasks.iter().map(span).collect();
    for (i, t) in plan.tasks.iter().enumerate() {
        // Every window started after its prepare ended.
        for &a in &t.after {
            assert!(
                spans[i].0 >= spans[a].1,
                "{} started before {} ended",
                t.id,
                plan.tasks[a].id
            );
        }
        let m = markers::started(&root.join(&t.dir), 1).expect("start marker of attempt 1");
        assert!(!m.host.is_empty());
        let e = markers::exited(&root.join(&t.dir), 1).expect("exit marker of attempt 1");
        assert_eq!(e.code, Some(0));
    }
    // At no instant were more than max_parallel = 2 tasks running.
    for &(s0, _) in &spans {
        let overlapping = spans.iter().filter(|&&(a, b)| a <= s0 && s0 < b).count();
        assert!(overlapping <= 2, "{overlapping} tasks ran at once");
    }
}

#[test]
fn failures_are_reported_with_reasons_and_resume_reruns_them() {
    let d = tempfile::tempdir().unwrap();
    let root = d.path();
    let plan = plan(1, 4, 60);
    // Windows 1 and 3 fail on their first attempt; window 2 exits 0 without output.
    let script = r#"
w=$(basename "$(dirname "$PWD")")
n=$(cat .n 2>/dev/null || echo 0); n=$((n+1)); echo $n > .n
if [ $n = 1 ] && { [ $w = w01 ] || [ $w = w03 ]; }; then exit 3; fi
if [ $n = 1 ] && [ $w = w02 ]; then exit 0; fi
echo ok > out.txt
"#;
    write_tasks(root, &plan, script);
    let cfg = config(4);
    let hooks = OutTxt;
    let ctx = Context {
        campaign: "t",
        config: &cfg,
        batch_template: None,
        hooks: &hooks,
        clock: &legwork::state::SystemClock,
    };
    let mut st = CampaignState::open(root, plan.clone(), Duration::ZERO).unwrap();
    let mut sched = scheduler::build(&cfg, root, "t");
    let s = settle(&mut st, sched.as_mut(), &ctx);
    assert_eq!(s.total.failed, 3, "{s:?}");
    assert_eq!(s.total.done, 2);
    let w1 = st.record(st.task_index("e0a+e0b/complex/r1/w01/production").unwrap());
    assert_eq!(w1.kind, Some(FailureKind::ExitCode));
    assert!(
        w1.reason.as_deref().unwrap().contains("exit code 3"),
        "{w1:?}"
    );
    let w2 = st.record(st.task_index("e0a+e0b/complex/r1/w02/production").unwrap());
    assert_eq!(w2.kind, Some(FailureKind::Output));
    assert!(w2.reason.as_deref().unwrap().contains("out.txt is missing"));

    let r = state::resume(&mut st, sched.as_mut(), &ctx, &Selection::all()).unwrap();
    assert_eq!(r.requeued.len(), 3);
    let s = settle(&mut st, sched.as_mut(), &ctx);
    assert!(s.all_done(), "{s:?}");
    assert_eq!(w1.attempt, 1);
    let w1 = st.record(st.task_index("e0a+e0b/complex/r1/w01/production").unwrap());
    assert_eq!(w1.attempt, 2);
    // Window 0 was done and never ran again.
    let w0_dir = root.join("e0a+e0b/complex/r1/w00/production");
    assert_eq!(
        std::fs::read_to_string(w0_dir.join(".n")).unwrap().trim(),
        "1"
    );
}

#[test]
fn a_walltime_kill_is_named_and_resume_gives_more_time() {
    let d = tempfile::tempdir().unwrap();
    let root = d.path();
    let plan = plan(1, 2, 2);
    // Window 1 hangs on its first attempt; the executor must stop it at 2 s.
    let script = r#"
w=$(basename "$(dirname "$PWD")")
n=$(cat .n 2>/dev/null || echo 0); n=$((n+1)); echo $n > .n
if [ $n = 1 ] && [ $w = w01 ]; then sleep 600; fi
echo ok > out.txt
"#;
    write_tasks(root, &plan, script);
    let cfg = config(4);
    let hooks = OutTxt;
    let ctx = Context {
        campaign: "t",
        config: &cfg,
        batch_template: None,
        hooks: &hooks,
        clock: &legwork::state::SystemClock,
    };
    let mut st = CampaignState::open(root, plan.clone(), Duration::ZERO).unwrap();
    let mut sched = scheduler::build(&cfg, root, "t");
    let s = settle(&mut st, sched.as_mut(), &ctx);
    assert_eq!(s.total.failed, 1, "{s:?}");
    let i = st.task_index("e0a+e0b/complex/r1/w01/production").unwrap();
    let r = st.record(i);
    assert_eq!(r.kind, Some(FailureKind::Walltime), "{r:?}");
    let ex = markers::exited(&root.join(&plan.tasks[i].dir), 1).unwrap();
    assert_eq!(
        ex.signal.as_deref(),
        Some("TERM"),
        "the wrapper records the walltime SIGTERM"
    );
    let rs = state::resume(&mut st, sched.as_mut(), &ctx, &Selection::all()).unwrap();
    assert_eq!(rs.walltime_raised, 1);
    // 2 s × the default factor 1.5.
    assert_eq!(st.record(i).walltime_s, Some(3));
    let s = settle(&mut st, sched.as_mut(), &ctx);
    assert!(s.all_done(), "{s:?}");
}

#[test]
fn a_failed_dependency_holds_its_windows_back_until_resume() {
    let d = tempfile::tempdir().unwrap();
    let root = d.path();
    let plan = plan(1, 3, 60);
    let script = r#"
n=$(cat .n 2>/dev/null || echo 0); n=$((n+1)); echo $n > .n
if [ $n = 1 ] && [ "$(basename "$PWD")" = prepare ]; then exit 1; fi
echo ok > out.txt
"#;
    write_tasks(root, &plan, script);
    let cfg = config(4);
    let hooks = OutTxt;
    let ctx = Context {
        campaign: "t",
        config: &cfg,
        batch_template: None,
        hooks: &hooks,
        clock: &legwork::state::SystemClock,
    };
    let mut st = CampaignState::open(root, plan.clone(), Duration::ZERO).unwrap();
    let mut sched = scheduler::build(&cfg, root, "t");
    let s = settle(&mut st, sched.as_mut(), &ctx);
    assert_eq!(s.total.failed, 1, "{s:?}");
    assert_eq!(s.total.planned, 3, "windows wait for their prepare: {s:?}");
    for t in &plan.tasks[1..] {
        assert!(
            !root.join(&t.dir).join(".n").exists(),
            "{} ran without its prepare",
            t.id
        );
    }
    state::resume(&mut st, sched.as_mut(), &ctx, &Selection::all()).unwrap();
    let s = settle(&mut st, sched.as_mut(), &ctx);
    assert!(s.all_done(), "{s:?}");
    // Windows ran once, as attempt 1.
    for t in &plan.tasks[1..] {
        assert_eq!(st.record(st.task_index(&t.id).unwrap()).attempt, 1);
    }
}

/// Polls `cond` every 50 ms; fails the test with `what` after 20 s.
fn wait_until(what: &str, cond: impl Fn() -> bool) {
    let t = std::time::Instant::now();
    while !cond() {
        assert!(t.elapsed() < Duration::from_secs(20), "{what}");
        std::thread::sleep(Duration::from_millis(50));
    }
}

/// The process id a task or the executor wrote to `path`.
fn read_pid(path: impl AsRef<std::path::Path>) -> i32 {
    std::fs::read_to_string(path)
        .unwrap()
        .trim()
        .parse()
        .unwrap()
}

fn pid_alive(pid: i32) -> bool {
    nix::sys::signal::kill(nix::unistd::Pid::from_raw(pid), None).is_ok()
}

#[test]
fn cancel_stops_running_tasks_and_keeps_planned_ones_back() {
    let d = tempfile::tempdir().unwrap();
    let root = d.path();
    let plan = plan(1, 2, 600);
    write_tasks(root, &plan, "echo $$ > task.pid; sleep 600\n");
    let cfg = config(4);
    let hooks = OutTxt;
    let ctx = Context {
        campaign: "t",
        config: &cfg,
        batch_template: None,
        hooks: &hooks,
        clock: &legwork::state::SystemClock,
    };
    let mut st = CampaignState::open(root, plan.clone(), Duration::ZERO).unwrap();
    let mut sched = scheduler::build(&cfg, root, "t");
    state::submit_ready(&mut st, sched.as_mut(), &ctx, &Selection::all()).unwrap();
    let pidfile = root.join(&plan.tasks[0].dir).join("task.pid");
    wait_until("prepare never started", || pidfile.exists());
    let pid: i32 = read_pid(&pidfile);
    let c = state::cancel(&mut st, sched.as_mut(), &Selection::all(), "test").unwrap();
    // The windows were queued behind their prepare, so all three were live.
    assert_eq!((c.live, c.planned), (3, 0));
    wait_until("the cancelled task still runs", || !pid_alive(pid));
    let s = st.summary();
    assert_eq!(s.total.cancelled, 3);
    // Nothing more is submitted, and resume leaves cancelled tasks alone by default.
    let r = state::resume(&mut st, sched.as_mut(), &ctx, &Selection::all()).unwrap();
    assert!(r.requeued.is_empty());
    assert_eq!(r.submitted.tasks, 0);
}

#[test]
fn a_killed_executor_leaves_its_tasks_failed_or_lost_and_resume_reruns_them() {
    let d = tempfile::tempdir().unwrap();
    let root = d.path();
    let plan = plan(1, 2, 600);
    let script = r#"
n=$(cat .n 2>/dev/null || echo 0); n=$((n+1)); echo $n > .n
if [ $n = 1 ] && [ "$(basename "$PWD")" = prepare ]; then echo $$ > task.pid; sleep 600; fi
echo ok > out.txt
"#;
    write_tasks(root, &plan, script);
    let cfg = config(4);
    let hooks = OutTxt;
    let ctx = Context {
        campaign: "t",
        config: &cfg,
        batch_template: None,
        hooks: &hooks,
        clock: &legwork::state::SystemClock,
    };
    let mut st = CampaignState::open(root, plan.clone(), Duration::ZERO).unwrap();
    let mut sched = scheduler::build(&cfg, root, "t");
    state::submit_ready(&mut st, sched.as_mut(), &ctx, &Selection::all()).unwrap();
    let pidfile = root.join(&plan.tasks[0].dir).join("task.pid");
    wait_until("prepare never started", || pidfile.exists());
    let task_pid: i32 = read_pid(&pidfile);
    let exec: i32 = std::fs::read_to_string(root.join(".legwork/local/executor.ready"))
        .unwrap()
        .trim()
        .parse()
        .unwrap();
    nix::sys::signal::kill(
        nix::unistd::Pid::from_raw(exec),
        nix::sys::signal::Signal::SIGKILL,
    )
    .unwrap();
    wait_until("the task outlived its executor", || !pid_alive(task_pid));
    let s = settle(&mut st, sched.as_mut(), &ctx);
    assert_eq!(s.total.failed + s.total.lost, 1, "{s:?}");
    assert_eq!(s.total.planned, 2, "{s:?}");
    let r = state::resume(&mut st, sched.as_mut(), &ctx, &Selection::all()).unwrap();
    assert_eq!(r.requeued.len(), 1);
    let s = settle(&mut st, sched.as_mut(), &ctx);
    assert!(s.all_done(), "{s:?}");
}
