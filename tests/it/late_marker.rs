//! A task whose element has left the queue without an exit marker is not called
//! lost until the scheduler's marker grace has passed: on a shared filesystem a
//! marker written on a compute node can take a while to show on the login node.
//! A marker that arrives in time makes the task done, the wait survives
//! reopening the state, and with no grace (the local executor's default) the
//! verdict is immediate. Time is a fake clock the test moves forward.

use crate::scheduler_support::{exit_code_context, plan, Stub};
use legwork::scheduler::{SchedulerConfig, SchedulerKind};
use legwork::state::{self, CampaignState, Clock, Context, Selection, TaskState};
use std::path::Path;
use std::sync::Mutex;
use std::time::Duration;

/// A clock that stands still until the test moves it.
struct FakeClock(Mutex<chrono::DateTime<chrono::Utc>>);

impl FakeClock {
    fn new() -> Self {
        FakeClock(Mutex::new(chrono::Utc::now()))
    }
    fn advance(&self, d: Duration) {
        let mut t = self.0.lock().unwrap();
        *t += chrono::Duration::from_std(d).unwrap();
    }
}

impl Clock for FakeClock {
    fn now(&self) -> chrono::DateTime<chrono::Utc> {
        *self.0.lock().unwrap()
    }
}

fn write_exit_marker(dir: &Path, attempt: u32, code: i32) {
    std::fs::create_dir_all(dir).unwrap();
    let now = chrono::Utc::now().to_rfc3339();
    std::fs::write(
        dir.join(".exited.json"),
        format!(
            r#"{{"time":"{now}","started":"{now}","job":"1_0","attempt":{attempt},"code":{code},"signal":null}}"#
        ),
    )
    .unwrap();
}

fn states(st: &CampaignState) -> Vec<TaskState> {
    (0..st.plan().tasks.len())
        .map(|i| st.record(i).state)
        .collect()
}

/// A fresh campaign of `plan(1, 2, 60)` in `dir`, every task submitted to a stub
/// that has then forgotten them all (none has an exit marker).
fn submitted_then_gone(dir: &Path, ctx: &legwork::state::Context) -> (CampaignState, Stub) {
    let mut st = CampaignState::open(dir, plan(1, 2, 60), Duration::ZERO).unwrap();
    let (mut stub, _) = Stub::new();
    state::submit_ready(&mut st, &mut stub, ctx, &Selection::all()).unwrap();
    assert!(states(&st).iter().all(|s| *s == TaskState::Queued));
    stub.gone = true;
    (st, stub)
}

#[test]
fn a_task_gone_from_the_queue_waits_for_its_marker_before_it_is_lost() {
    let d = tempfile::tempdir().unwrap();
    let cfg = SchedulerConfig {
        kind: SchedulerKind::SLURM,
        marker_grace_seconds: Some(120),
        ..Default::default()
    };
    let clock = FakeClock::new();
    let ctx = Context {
        clock: &clock,
        ..exit_code_context(&cfg)
    };
    // Every element leaves the queue; none has an exit marker yet.
    let (mut st, mut stub) = submitted_then_gone(d.path(), &ctx);
    let n = st.plan().tasks.len();
    let p = state::poll(&mut st, &mut stub, &ctx).unwrap();
    assert_eq!(p.awaiting_marker, n);
    assert_eq!(p.ended, 0);
    assert!(states(&st).iter().all(|s| s.is_live()), "{:?}", states(&st));
    // Still waiting just before the grace is over.
    clock.advance(Duration::from_secs(119));
    let p = state::poll(&mut st, &mut stub, &ctx).unwrap();
    assert_eq!((p.awaiting_marker, p.ended), (n, 0));
    // `status` says so rather than leaving them as plain "running".
    let summary = st.summary();
    assert_eq!(summary.awaiting_marker.len(), n);
    let shown = legwork::commands::status::table(&summary, SchedulerKind::SLURM, false);
    assert!(
        shown.contains(&format!(
            "{n} tasks left the queue without an exit marker yet"
        )),
        "{shown}"
    );

    // The first task's marker shows up within the grace: it is done.
    let first = st.plan().tasks[0].clone();
    write_exit_marker(&st.task_dir(&first), 1, 0);
    let p = state::poll(&mut st, &mut stub, &ctx).unwrap();
    assert_eq!((p.awaiting_marker, p.ended), (n - 1, 1));
    assert_eq!(st.record(0).state, TaskState::Done);
    assert_eq!(st.record(0).awaiting_marker_since, None);

    // The wait is journalled: a fresh process picks it up where it was.
    drop(st);
    let mut st = CampaignState::open(d.path(), plan(1, 2, 60), Duration::ZERO).unwrap();
    assert!(st.record(1).awaiting_marker_since.is_some());
    clock.advance(Duration::from_secs(1));
    let p = state::poll(&mut st, &mut stub, &ctx).unwrap();
    assert_eq!((p.awaiting_marker, p.ended), (0, n - 1));
    assert!(st.summary().awaiting_marker.is_empty());
    for i in 1..n {
        let r = st.record(i);
        assert_eq!(r.state, TaskState::Lost, "task {i}");
        let why = r.reason.unwrap_or_default();
        assert!(
            why.contains("waited 120 s") && why.contains("no exit marker"),
            "{why}"
        );
    }
}

#[test]
fn without_a_grace_the_verdict_is_immediate() {
    let d = tempfile::tempdir().unwrap();
    // The local executor's default: its markers are on the same machine.
    let cfg = SchedulerConfig::default();
    assert_eq!(cfg.marker_grace_s(), 0);
    let slurm = SchedulerConfig {
        kind: SchedulerKind::SLURM,
        ..Default::default()
    };
    assert!(slurm.marker_grace_s() > 0);
    let ctx = exit_code_context(&cfg);
    let (mut st, mut stub) = submitted_then_gone(d.path(), &ctx);
    let n = st.plan().tasks.len();
    let p = state::poll(&mut st, &mut stub, &ctx).unwrap();
    assert_eq!((p.awaiting_marker, p.ended), (0, n));
    assert!(states(&st).iter().all(|s| *s == TaskState::Lost));
}
