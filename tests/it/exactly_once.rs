//! Exactly-once submission against a fake Slurm that runs what it accepts
//! (`tests/fixtures/slurm-faulty/bin`) and, on every other `sbatch`, misbehaves
//! after accepting the job: it answers "Socket timed out", hangs past the
//! command timeout, or prints no job id. Each campaign must end complete with
//! every task's attempt started exactly once (counted in each task's attempt
//! history, `.attempts.jsonl`) and every attempt submitted exactly once
//! (counted in the fake scheduler's own log).

use crate::scheduler_support::{exit_code_context, plan, write_tasks};
use legwork::scheduler::{self, SchedulerConfig, SchedulerKind};
use legwork::state::{self, CampaignState, TaskState};
use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;
use std::time::Duration;

fn shims() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/slurm-faulty/bin")
}

fn faulty(fake: &Path, fault: &str) -> SchedulerConfig {
    SchedulerConfig {
        kind: SchedulerKind::SLURM,
        max_queued: 0,
        marker_grace_seconds: Some(0),
        // The hang is 6 s, the timeout 3 s: the hung sbatch is stopped.
        command_timeout_seconds: 3,
        commands_dir: Some(shims()),
        command_env: vec![
            ("FAKE_SLURM_DIR".into(), fake.display().to_string()),
            ("FAKE_SLURM_FAULT".into(), fault.into()),
            ("FAKE_SLURM_HANG".into(), "6".into()),
        ],
        ..Default::default()
    }
}

/// Starts recorded in one task's attempt history, by attempt.
pub fn starts(dir: &Path) -> Vec<u32> {
    std::fs::read_to_string(dir.join(".attempts.jsonl"))
        .unwrap_or_default()
        .lines()
        .filter_map(|l| serde_json::from_str::<serde_json::Value>(l).ok())
        .filter(|v| v.get("code").is_none())
        .map(|v| v["attempt"].as_u64().unwrap() as u32)
        .collect()
}

/// task dir → attempts submitted, from the fake sbatch's log.
pub fn submitted(fake: &Path) -> HashMap<String, Vec<u32>> {
    let mut m: HashMap<String, Vec<u32>> = HashMap::new();
    for line in std::fs::read_to_string(fake.join("submissions.log"))
        .unwrap_or_default()
        .lines()
    {
        let f: Vec<&str> = line.splitn(4, ' ').collect();
        m.entry(f[3].to_string())
            .or_default()
            .push(f[2].parse().unwrap());
    }
    m
}

fn run_campaign_through(fault: &str) {
    let d = tempfile::tempdir().unwrap();
    let root = d.path().join("campaign");
    let fake = d.path().join("fake-slurm");
    std::fs::create_dir_all(&fake).unwrap();
    let p = plan(3, 3, 600);
    write_tasks(&root, &p, "echo ok > out.txt\n");
    let cfg = faulty(&fake, fault);
    let mut st = CampaignState::open(&root, p.clone(), Duration::from_secs(60)).unwrap();
    let mut sched = scheduler::build(&cfg, &root, "t");
    let ctx = exit_code_context(&cfg);
    let stop = AtomicBool::new(false);
    let settled = state::watch_until_settled(
        &mut st,
        sched.as_mut(),
        &ctx,
        Duration::from_millis(100),
        &stop,
        &mut |_| {},
    )
    .unwrap();
    let calls: u32 = std::fs::read_to_string(fake.join("calls"))
        .unwrap()
        .trim()
        .parse()
        .unwrap();
    assert!(
        calls >= 2,
        "{fault}: only {calls} sbatch call, so no fault was injected"
    );
    let subs = submitted(&fake);
    for (ti, t) in p.tasks.iter().enumerate() {
        let dir = root.join(&t.dir);
        assert_eq!(
            st.state(ti),
            TaskState::Done,
            "{fault}: {} is not done ({:?})",
            t.id,
            st.record(ti)
        );
        assert_eq!(
            starts(&dir),
            vec![1],
            "{fault}: {} started as attempts",
            t.id
        );
        assert_eq!(
            subs.get(&dir.display().to_string())
                .cloned()
                .unwrap_or_default(),
            vec![1],
            "{fault}: {} submitted as attempts",
            t.id
        );
    }
    assert_eq!(settled.summary.total.live(), 0);
}

#[test]
fn an_sbatch_that_accepts_then_times_out_submits_each_attempt_once() {
    run_campaign_through("timeout");
}

#[test]
fn an_sbatch_that_accepts_then_hangs_past_the_timeout_submits_each_attempt_once() {
    run_campaign_through("hang");
}

#[test]
fn an_sbatch_that_prints_no_job_id_submits_each_attempt_once() {
    run_campaign_through("no-id");
}

#[test]
fn a_refused_submission_is_not_retried_and_names_the_refusal() {
    // The real fake sbatch refuses a script it cannot read: a hard failure,
    // which must reach the user without a retry or a look-up.
    use legwork::state::submit_once::{ambiguous, SubmitOutcome};
    let d = tempfile::tempdir().unwrap();
    let fake = d.path().join("fake");
    std::fs::create_dir_all(&fake).unwrap();
    let cfg = faulty(&fake, "");
    let mut sched = scheduler::build(&cfg, d.path(), "t");
    let (mut sub, _) = crate::scheduler_support::rendered_submission(sched.as_ref(), d.path(), "1");
    sub.script = d.path().join("missing.sh");
    let looked = std::cell::Cell::new(0);
    match state::submit_once::submit_exactly_once(sched.as_mut(), &sub, &|_| {
        looked.set(looked.get() + 1)
    }) {
        SubmitOutcome::NotTaken(e) => assert!(!ambiguous(&e), "{e}"),
        other => panic!("expected a refusal, got {other:?}"),
    }
    assert_eq!(looked.get(), 0, "a refusal was looked up by name");
    assert_eq!(
        std::fs::read_to_string(fake.join("calls"))
            .unwrap_or_default()
            .trim(),
        "",
        "sbatch was run although the script was missing"
    );
}

/// Runs a campaign to the end through the fake Slurm that runs what it
/// accepts, damages its journal with `damage`, and runs it again: nothing may
/// be submitted or started a second time, and every task ends done.
fn rerun_after(damage: &dyn Fn(&Path)) -> PathBuf {
    let d = tempfile::tempdir().unwrap().keep();
    let root = d.join("campaign");
    let fake = d.join("fake-slurm");
    std::fs::create_dir_all(&fake).unwrap();
    let p = plan(3, 3, 600);
    write_tasks(&root, &p, "echo ok > out.txt\n");
    let cfg = faulty(&fake, "");
    let ctx = exit_code_context(&cfg);
    let stop = AtomicBool::new(false);
    for round in 0..2 {
        let mut st = CampaignState::open(&root, p.clone(), Duration::from_secs(60)).unwrap();
        let mut sched = scheduler::build(&cfg, &root, "t");
        state::watch_until_settled(
            &mut st,
            sched.as_mut(),
            &ctx,
            Duration::from_millis(100),
            &stop,
            &mut |_| {},
        )
        .unwrap();
        let subs = submitted(&fake);
        for (ti, t) in p.tasks.iter().enumerate() {
            let dir = root.join(&t.dir);
            assert_eq!(
                st.state(ti),
                TaskState::Done,
                "round {round}: {} not done",
                t.id
            );
            assert_eq!(
                starts(&dir),
                vec![1],
                "round {round}: {} started as attempts",
                t.id
            );
            assert_eq!(
                subs[&dir.display().to_string()],
                vec![1],
                "round {round}: {} submitted as attempts",
                t.id
            );
        }
        drop(st);
        if round == 0 {
            damage(&root.join(".legwork"));
        }
    }
    d
}

#[test]
fn a_deleted_journal_is_rebuilt_from_the_tree_and_nothing_runs_again() {
    let d = rerun_after(&|dir| {
        std::fs::remove_file(dir.join("journal.jsonl")).unwrap();
        let _ = std::fs::remove_file(dir.join("snapshot.json"));
    });
    std::fs::remove_dir_all(d).unwrap();
}

#[test]
fn a_journal_cut_at_a_line_boundary_is_rebuilt_from_the_tree() {
    let d = rerun_after(&|dir| {
        let j = dir.join("journal.jsonl");
        let text = std::fs::read_to_string(&j).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        let keep = lines[..lines.len() / 2].join("\n") + "\n";
        std::fs::write(&j, keep).unwrap();
    });
    std::fs::remove_dir_all(d).unwrap();
}

#[test]
fn a_corrupted_journal_line_is_set_aside_and_the_state_rebuilt() {
    let d = rerun_after(&|dir| {
        let j = dir.join("journal.jsonl");
        let text = std::fs::read_to_string(&j).unwrap();
        let mut lines: Vec<String> = text.lines().map(String::from).collect();
        let mid = lines.len() / 2;
        lines[mid] = "{\"t\":\"2026-01-01\",\"event\":{garbage".into();
        std::fs::write(&j, lines.join("\n") + "\n").unwrap();
    });
    let side = std::fs::read_to_string(d.join("campaign/.legwork/journal.damaged")).unwrap();
    assert!(
        side.contains("\t{\"t\":\"2026-01-01\",\"event\":{garbage"),
        "{side}"
    );
    let lineno: usize = side.split('\t').next().unwrap().parse().unwrap();
    assert!(lineno > 1, "the line number {lineno} of the set-aside line");
    std::fs::remove_dir_all(d).unwrap();
}
