//! The journal: replay gives back what was written, a torn last line (crash
//! mid-write) is dropped, a corrupt middle line is an error naming its line, a
//! snapshot plus the journal's tail equals a full replay, one writer at a time,
//! and `rescan` rebuilds the state from the task markers alone.

use crate::scheduler_support::{exit_code_context, plan, Stub};
use legwork::state::{self, CampaignState, Event, Journal, StateError, SubmittedTask, TaskState};
use std::io::Write;
use std::time::Duration;

fn events(n: usize) -> Vec<Event> {
    (0..n)
        .map(|i| Event::Task {
            task: format!("t{i}"),
            state: if i % 2 == 0 {
                TaskState::Done
            } else {
                TaskState::Failed
            },
            attempt: 1,
            reason: (i % 2 == 1).then(|| "exit code 1".to_string()),
            kind: None,
            walltime_s: None,
        })
        .collect()
}

#[test]
fn replay_returns_what_was_written_and_drops_a_torn_tail() {
    let d = tempfile::tempdir().unwrap();
    let (mut j, s0) = Journal::open(d.path()).unwrap();
    assert!(s0.tasks.is_empty());
    let mut expect = legwork::state::StateData::default();
    for e in events(10) {
        expect.apply(&e);
    }
    j.append(&events(10)).unwrap();
    drop(j);
    // A crash mid-write leaves half a line.
    let path = d.path().join("journal.jsonl");
    let good_len = std::fs::metadata(&path).unwrap().len();
    std::fs::OpenOptions::new()
        .append(true)
        .open(&path)
        .unwrap()
        .write_all(br#"{"t":"x","event":"task","ta"#)
        .unwrap();
    let (mut j, s1) = Journal::open(d.path()).unwrap();
    assert_eq!(s1, expect);
    assert_eq!(
        std::fs::metadata(&path).unwrap().len(),
        good_len,
        "the torn line is cut off"
    );
    // Appending after the cut starts on a clean line.
    j.append(&events(1)).unwrap();
    drop(j);
    let (_, s2) = Journal::open(d.path()).unwrap();
    assert_eq!(s2, expect);
}

#[test]
fn a_corrupt_line_in_the_middle_is_set_aside_with_its_number_and_the_rest_replayed() {
    let d = tempfile::tempdir().unwrap();
    let (mut j, _) = Journal::open(d.path()).unwrap();
    j.append(&events(2)).unwrap();
    drop(j);
    let (_, expect_full) = Journal::open(d.path()).unwrap();
    let path = d.path().join("journal.jsonl");
    let text = std::fs::read_to_string(&path).unwrap();
    let mut lines: Vec<&str> = text.lines().collect();
    lines.insert(1, "not json");
    std::fs::write(&path, lines.join("\n") + "\n").unwrap();
    let (mut j3, state) = Journal::open(d.path()).unwrap();
    assert_eq!(state, expect_full, "every readable line is replayed");
    let why = j3.take_damage().expect("the damage is reported");
    assert!(why.contains("1 unreadable line"), "{why}");
    assert_eq!(
        std::fs::read_to_string(d.path().join("journal.damaged")).unwrap(),
        "2\tnot json\n"
    );
}

#[test]
fn snapshot_plus_tail_equals_a_full_replay() {
    let d = tempfile::tempdir().unwrap();
    let (mut j, mut s) = Journal::open(d.path()).unwrap();
    let intent = Event::Intent {
        sub: 1,
        batch: "b".into(),
        name: "lw.t.b.s1".into(),
        tasks: vec![SubmittedTask {
            task: "t0".into(),
            attempt: 1,
            index: 0,
            script: None,
            frames: None,
        }],
    };
    for e in [
        intent.clone(),
        Event::Submitted {
            sub: 1,
            job: "9".into(),
        },
    ] {
        s.apply(&e);
        j.append(&[e]).unwrap();
    }
    j.snapshot(&s).unwrap();
    for e in events(5) {
        s.apply(&e);
        j.append(&[e]).unwrap();
    }
    drop(j);
    let (_, from_snapshot) = Journal::open(d.path()).unwrap();
    assert_eq!(from_snapshot, s);
    std::fs::remove_file(d.path().join("snapshot.json")).unwrap();
    let (_, full) = Journal::open(d.path()).unwrap();
    assert_eq!(full, s);
    assert_eq!(full.next_submission, 2);
}

#[test]
fn a_second_writer_is_refused_with_the_holder_named() {
    let d = tempfile::tempdir().unwrap();
    let _first = CampaignState::open(d.path(), plan(1, 1, 60), Duration::ZERO).unwrap();
    match CampaignState::open(d.path(), plan(1, 1, 60), Duration::from_millis(200)) {
        Err(StateError::Lock(e)) => {
            let msg = e.to_string();
            assert!(
                msg.contains(&format!("pid {}", std::process::id())),
                "{msg}"
            );
        }
        Err(e) => panic!("{e}"),
        Ok(_) => panic!("two writers at once"),
    }
}

#[test]
fn the_cli_exits_4_naming_the_holder_of_the_lock() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    std::fs::write(
        dir.join("c.yaml"),
        format!(
            "campaign: c\nseed: 1\ntemperature_K: 300\ntemplates: {t}\nroot: {r}\nligands: [{{id: a}}, {{id: b}}]\nedges: [[a, b]]\nlegs:\n  l:\n    sign: 1\n    lambdas: {{count: 2}}\n    resources: {{cpus: 1, walltime: 1m}}\nstages:\n  - {{name: prepare, per: leg, template: prepare.sh.tera}}\n",
            t = dir.join("tpl").display(),
            r = dir.join("root").display()
        ),
    )
    .unwrap();
    std::fs::create_dir_all(dir.join("tpl")).unwrap();
    std::fs::write(dir.join("tpl/prepare.sh.tera"), "true\n").unwrap();
    let _held =
        legwork::state::CampaignLock::acquire(&dir.join("root/.legwork"), Duration::ZERO).unwrap();
    // A verb that changes the queue needs the writer lock.
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_legwork"))
        .args(["resume", "--lock-wait", "0.2"])
        .arg(dir.join("c.yaml"))
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(4), "{err}");
    assert!(
        err.contains(&format!("pid {}", std::process::id())),
        "{err}"
    );
    // `status` only looks: it answers from the journal and names the holder.
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_legwork"))
        .args(["status", "--lock-wait", "0.2"])
        .arg(dir.join("c.yaml"))
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{err}");
    assert!(
        err.contains(&format!("pid {}", std::process::id())),
        "{err}"
    );
}

#[test]
fn rescan_rebuilds_done_and_failed_from_the_markers() {
    let d = tempfile::tempdir().unwrap();
    let root = d.path();
    let p = plan(1, 2, 60);
    let cfg = legwork::scheduler::SchedulerConfig::default();
    let ctx = exit_code_context(&cfg);
    // Exit markers as the wrapper writes them: prepare and w00 exited 0, w01 exited 7.
    for (t, code) in p.tasks.iter().zip([0, 0, 7]) {
        let dir = root.join(&t.dir);
        std::fs::create_dir_all(&dir).unwrap();
        std::fs::write(
            dir.join(".exited.json"),
            format!(r#"{{"time":"2026-12-01T10:00:05Z","started":"2026-12-01T10:00:00Z","job":"1_0","attempt":1,"code":{code},"signal":null}}"#),
        )
        .unwrap();
    }
    let mut st = CampaignState::open(root, p.clone(), Duration::ZERO).unwrap();
    let (mut stub, _) = Stub::new();
    let changed = state::rescan(&mut st, &mut stub, &ctx).unwrap();
    assert_eq!(changed, 3);
    let s = st.summary();
    assert_eq!((s.total.done, s.total.failed), (2, 1));
    assert!(
        s.reasons[0].reason.contains("exit code 7"),
        "{:?}",
        s.reasons
    );
}
