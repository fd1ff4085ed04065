//! A controller outage is waited out: a fake `squeue` that fails (as Slurm's
//! does while slurmctld is down) for minutes of a fake clock, while `watch`
//! follows a campaign through a fake Slurm that runs what it accepts. The
//! campaign completes with every attempt started once; an outage longer than
//! `scheduler.outage_wait_seconds` ends the watch with the scheduler's error.

use crate::exactly_once::{starts, submitted};
use crate::scheduler_support::{plan, write_tasks};
use legwork::scheduler::{self, SchedulerConfig, SchedulerKind};
use legwork::state::{self, CampaignState, Clock, Context, ExitCodeOnly, TaskState};
use std::path::Path;
use std::sync::atomic::AtomicBool;
use std::sync::Mutex;
use std::time::Duration;

/// A clock whose sleeps move it forward instead of waiting.
struct FakeClock {
    now: Mutex<chrono::DateTime<chrono::Utc>>,
    slept: Mutex<Duration>,
}

impl FakeClock {
    fn new() -> Self {
        FakeClock {
            now: Mutex::new(chrono::Utc::now()),
            slept: Mutex::new(Duration::ZERO),
        }
    }
}

impl Clock for FakeClock {
    fn now(&self) -> chrono::DateTime<chrono::Utc> {
        *self.now.lock().unwrap()
    }
    fn sleep(&self, d: Duration) {
        *self.now.lock().unwrap() += chrono::Duration::from_std(d).unwrap();
        *self.slept.lock().unwrap() += d;
    }
}

fn config(fake: &Path, fails: &str, outage_wait_seconds: u64) -> SchedulerConfig {
    SchedulerConfig {
        kind: SchedulerKind::SLURM,
        max_queued: 0,
        marker_grace_seconds: Some(0),
        outage_wait_seconds,
        commands_dir: Some(
            Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/slurm-faulty/bin"),
        ),
        command_env: vec![
            ("FAKE_SLURM_DIR".into(), fake.display().to_string()),
            ("FAKE_SQUEUE_FAILS".into(), fails.into()),
        ],
        ..Default::default()
    }
}

fn watch(
    fails: &str,
    outage_wait_seconds: u64,
) -> (tempfile::TempDir, Result<(), String>, Duration) {
    let d = tempfile::tempdir().unwrap();
    let root = d.path().join("campaign");
    let fake = d.path().join("fake-slurm");
    std::fs::create_dir_all(&fake).unwrap();
    let p = plan(2, 2, 600);
    write_tasks(&root, &p, "exit 0\n");
    let cfg = config(&fake, fails, outage_wait_seconds);
    let clock = FakeClock::new();
    let ctx = Context {
        campaign: "t",
        config: &cfg,
        batch_template: None,
        hooks: &ExitCodeOnly,
        clock: &clock,
    };
    let mut st = CampaignState::open(&root, p.clone(), Duration::from_secs(60)).unwrap();
    let mut sched = scheduler::build(&cfg, &root, "t");
    let stop = AtomicBool::new(false);
    let r = state::watch_until_settled(
        &mut st,
        sched.as_mut(),
        &ctx,
        Duration::from_millis(100),
        &stop,
        &mut |_| {},
    );
    let slept = *clock.slept.lock().unwrap();
    let r = match r {
        Ok(_) => {
            for (ti, t) in p.tasks.iter().enumerate() {
                let dir = root.join(&t.dir);
                assert_eq!(st.state(ti), TaskState::Done, "{} not done", t.id);
                assert_eq!(starts(&dir), vec![1], "{} started as attempts", t.id);
                assert_eq!(
                    submitted(&fake)[&dir.display().to_string()],
                    vec![1],
                    "{} submitted as attempts",
                    t.id
                );
            }
            Ok(())
        }
        Err(e) => Err(e.to_string()),
    };
    (d, r, slept)
}

#[test]
fn a_controller_down_for_minutes_is_waited_out_and_the_campaign_completes() {
    // 12 failed calls: the runner's own 4 tries, three times; the outage
    // back-off waits 30 + 60 + 120 s of the fake clock in between.
    let (_d, r, slept) = watch("12", 900);
    r.unwrap();
    assert_eq!(slept, Duration::from_secs(210), "waits of the back-off");
}

#[test]
fn an_outage_longer_than_the_wait_ends_the_watch_with_the_scheduler_error() {
    let (_d, r, slept) = watch("always", 200);
    let e = r.unwrap_err();
    assert!(e.contains("Unable to contact slurm controller"), "{e}");
    // 30 + 60 + 110 (the rest of the 200 s), then one last try.
    assert_eq!(slept, Duration::from_secs(200));
}
