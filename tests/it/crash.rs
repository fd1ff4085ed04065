//! Crash safety: legwork killed with SIGKILL at random points while it submits
//! and while it resumes (20 trials each) against a fake Slurm (shell shims on
//! PATH that record every submission), then run to the end. Checked against the
//! fake scheduler's own records: no task is ever submitted twice for the same
//! attempt or while another attempt of it is live, and none is lost.

use crate::scheduler_support::plan;
use legwork::scheduler::{self, SchedulerConfig, SchedulerKind};
use legwork::state::{self, CampaignState, Context, ExitCodeOnly, Selection};
use rand::{Rng, SeedableRng};
use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Duration;

const DRIVER: &str = "LEGWORK_CRASH_DRIVER";

fn config() -> SchedulerConfig {
    SchedulerConfig {
        kind: SchedulerKind::SLURM,
        max_queued: 0,
        ..Default::default()
    }
}

/// Not a test of its own: the child process the crash test starts and kills.
#[test]
fn driver() {
    let Ok(mode) = std::env::var(DRIVER) else {
        return;
    };
    let root = PathBuf::from(std::env::var("LEGWORK_CRASH_ROOT").unwrap());
    let cfg = config();
    let mut st = CampaignState::open(&root, plan(30, 4, 600), Duration::from_secs(60)).unwrap();
    let mut sched = scheduler::build(&cfg, &root, "t");
    let ctx = Context {
        campaign: "t",
        config: &cfg,
        batch_template: None,
        hooks: &ExitCodeOnly,
        clock: &legwork::state::SystemClock,
    };
    match mode.as_str() {
        "submit" => {
            state::submit_ready(&mut st, sched.as_mut(), &ctx, &Selection::all()).unwrap();
        }
        "resume" => {
            state::resume(&mut st, sched.as_mut(), &ctx, &Selection::all()).unwrap();
        }
        other => panic!("unknown mode {other}"),
    }
}

fn run_driver(mode: &str, root: &Path, fake: &Path, kill_after: Option<Duration>) {
    let shims = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/slurm/bin");
    let path = format!("{}:{}", shims.display(), std::env::var("PATH").unwrap());
    let mut child = Command::new(std::env::current_exe().unwrap())
        .args([
            "--exact",
            "crash::driver",
            "--nocapture",
            "--test-threads=1",
        ])
        .env(DRIVER, mode)
        .env("LEGWORK_CRASH_ROOT", root)
        .env("FAKE_SLURM_DIR", fake)
        .env("FAKE_SLURM_DELAY", "0.01")
        .env("PATH", path)
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    match kill_after {
        Some(t) => {
            std::thread::sleep(t);
            let _ = child.kill(); // SIGKILL
            let _ = child.wait();
        }
        None => assert!(child.wait().unwrap().success(), "the final {mode} failed"),
    }
}

/// task dir → [(job, attempt)] from the fake sbatch's log.
fn submissions(fake: &Path) -> HashMap<String, Vec<(String, u32)>> {
    let mut m: HashMap<String, Vec<(String, u32)>> = HashMap::new();
    let log = std::fs::read_to_string(fake.join("submissions.log")).unwrap_or_default();
    for line in log.lines() {
        let mut f = line.splitn(4, ' ');
        let (job, idx, attempt, dir) = (
            f.next().unwrap(),
            f.next().unwrap(),
            f.next().unwrap(),
            f.next().unwrap(),
        );
        m.entry(dir.to_string())
            .or_default()
            .push((format!("{job}_{idx}"), attempt.parse().unwrap()));
    }
    m
}

/// element id → state, from the fake scheduler's table.
fn elements(fake: &Path) -> HashMap<String, String> {
    std::fs::read_to_string(fake.join("elements"))
        .unwrap_or_default()
        .lines()
        .map(|l| {
            let f: Vec<&str> = l.split('|').collect();
            (f[0].to_string(), f[2].to_string())
        })
        .collect()
}

fn check(root: &Path, fake: &Path, want_attempts: &dyn Fn(&str) -> u32) {
    let subs = submissions(fake);
    let els = elements(fake);
    for t in &plan(30, 4, 600).tasks {
        let dir = root.join(&t.dir).display().to_string();
        let got = subs.get(&dir).cloned().unwrap_or_default();
        let want = want_attempts(&t.id);
        let attempts: Vec<u32> = got.iter().map(|g| g.1).collect();
        assert_eq!(
            attempts,
            (1..=want).collect::<Vec<_>>(),
            "{}: submitted as attempts {attempts:?}, expected each of 1..={want} once",
            t.id
        );
        let live = got
            .iter()
            .filter(|(e, _)| matches!(els.get(e).map(String::as_str), Some("PENDING" | "RUNNING")))
            .count();
        assert_eq!(live, 1, "{}: {live} live attempts in the queue", t.id);
    }
}

#[test]
fn sigkill_during_submit_and_resume_never_submits_twice_and_loses_nothing() {
    let d = tempfile::tempdir().unwrap();
    let root = d.path().join("campaign");
    let fake = d.path().join("fake-slurm");
    std::fs::create_dir_all(&root).unwrap();
    std::fs::create_dir_all(&fake).unwrap();
    let p = plan(30, 4, 600);
    crate::scheduler_support::write_tasks(&root, &p, "exit 0\n");
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(20261201);
    for _ in 0..20 {
        let ms = rng.gen_range(0..1500);
        run_driver("submit", &root, &fake, Some(Duration::from_millis(ms)));
    }
    run_driver("submit", &root, &fake, None);
    check(&root, &fake, &|_| 1);

    // Every window of the first 15 edges fails in the (fake) queue.
    let failing = |id: &str| {
        let k: usize = id[1..id.find('a').unwrap()].parse().unwrap();
        k < 15 && id.contains("/w")
    };
    let subs = submissions(&fake);
    let mut table = std::fs::read_to_string(fake.join("elements")).unwrap();
    for t in p.tasks.iter().filter(|t| failing(&t.id)) {
        let (el, _) = &subs[&root.join(&t.dir).display().to_string()][0];
        table = table.replace(&format!("{el}|"), &format!("{el}~|"));
    }
    let table: String = table
        .lines()
        .map(|l| {
            if l.contains("~|") {
                l.replace("~|", "|").replace("|PENDING", "|FAILED") + "\n"
            } else {
                l.to_string() + "\n"
            }
        })
        .collect();
    std::fs::write(fake.join("elements"), table).unwrap();
    for _ in 0..20 {
        let ms = rng.gen_range(0..1200);
        run_driver("resume", &root, &fake, Some(Duration::from_millis(ms)));
    }
    run_driver("resume", &root, &fake, None);
    check(&root, &fake, &|id| if failing(id) { 2 } else { 1 });
}
