//! Looking never waits: `status` and `collect` answer while `watch` holds the
//! campaign. They read a read-only view of the journal; only `collect`'s writing
//! of results/ and report/ takes a lock, and not the campaign's.

use crate::life_support::{legwork, rows, small_campaign_with, text};
use assert_cmd::cargo::CommandCargoExt;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// Waits (bounded) until `ready()` says yes; panics with `what` otherwise. A
/// wait for something to happen, not a timed assertion.
fn wait_for(what: &str, mut ready: impl FnMut() -> bool) {
    let start = Instant::now();
    while !ready() {
        assert!(
            start.elapsed() < Duration::from_secs(120),
            "gave up waiting for {what}"
        );
        std::thread::sleep(Duration::from_millis(200));
    }
}

#[test]
fn status_and_collect_answer_while_watch_holds_the_campaign() {
    let tmp = tempfile::tempdir().unwrap();
    // The third edge's windows hang half-way on their first attempt, so `watch`
    // keeps the campaign (and its lock) while the other two edges finish.
    let file = small_campaign_with(tmp.path(), "{ fault_hang_attempt: 1 }", "");
    let f = file.to_str().unwrap();
    let sub = legwork(tmp.path(), &["-q", "submit", f]);
    assert!(sub.status.success(), "{}", text(&sub));
    let mut watch = Command::cargo_bin("legwork")
        .unwrap()
        .current_dir(tmp.path())
        .args(["-q", "watch", f])
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let lock = tmp.path().join("tree/.legwork/lock");
    wait_for("watch to take the lock", || {
        std::fs::read_to_string(&lock).is_ok_and(|t| t.contains("watch"))
    });

    // Two edges × two legs × (prepare + 6 windows), and the third edge's prepares.
    let mut last = String::new();
    wait_for("the two healthy edges to finish", || {
        let st = legwork(tmp.path(), &["status", "--json", f]);
        assert!(
            st.status.success(),
            "status must answer while watch runs: {}",
            text(&st)
        );
        let err = String::from_utf8_lossy(&st.stderr);
        assert!(
            err.contains("note:") && err.contains("watch"),
            "{}",
            text(&st)
        );
        let json: serde_json::Value = serde_json::from_slice(&st.stdout).unwrap();
        last = json["total"].to_string();
        json["total"]["done"] == 30
    });
    assert_eq!(
        watch.try_wait().unwrap(),
        None,
        "watch still holds the campaign ({last})"
    );

    let table = legwork(tmp.path(), &["status", f]);
    assert!(table.status.success(), "{}", text(&table));
    assert!(String::from_utf8_lossy(&table.stdout).contains("complex/production"));

    let col = legwork(tmp.path(), &["collect", f]);
    assert_eq!(
        col.status.code(),
        Some(3),
        "incomplete, but answered: {}",
        text(&col)
    );
    let edges = rows(&tmp.path().join("tree/results/edges.csv"));
    let subjects: Vec<&str> = edges.iter().map(|e| e["subject"].as_str()).collect();
    assert_eq!(subjects, ["ork-01+ork-02", "ork-01+ork-03"]);
    assert!(tmp.path().join("tree/report/index.html").is_file());
    assert_eq!(
        watch.try_wait().unwrap(),
        None,
        "watch held the campaign throughout"
    );

    // A command that changes the queue still needs the writer lock.
    let resume = legwork(tmp.path(), &["resume", f, "--lock-wait", "0"]);
    assert_eq!(resume.status.code(), Some(4), "{}", text(&resume));

    nix::sys::signal::kill(
        nix::unistd::Pid::from_raw(watch.id() as i32),
        nix::sys::signal::Signal::SIGINT,
    )
    .unwrap();
    let code = watch.wait().unwrap().code();
    assert_eq!(code, Some(130), "Ctrl-C stops watch and its local tasks");
}
