//! Progress without a terminal: with standard error captured (not a terminal),
//! `run` prints one-line progress records instead of bars.

use crate::life_support::{legwork, small_campaign, text};

#[test]
fn run_off_a_terminal_prints_one_line_records_ending_all_done() {
    let tmp = tempfile::tempdir().unwrap();
    let file = small_campaign(tmp.path(), "");
    let out = legwork(
        tmp.path(),
        &["run", file.to_str().unwrap(), "--progress-every", "0"],
    );
    assert!(out.status.success(), "{}", text(&out));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!err.contains('\u{1b}'), "no terminal codes in a log: {err}");
    assert!(!err.contains("[=="), "no bars off a terminal: {err}");
    let records: Vec<&str> = err.lines().filter(|l| l.contains(" progress: ")).collect();
    assert!(records.len() >= 2, "a record per change: {err}");
    let done: Vec<usize> = records
        .iter()
        .map(|l| {
            let after = l.split(" progress: ").nth(1).unwrap();
            after.split('/').next().unwrap().parse().unwrap()
        })
        .collect();
    assert!(
        done.windows(2).all(|w| w[0] <= w[1]),
        "done never goes back: {records:?}"
    );
    let last = records.last().unwrap();
    // 3 edges × 2 legs × (1 prepare + 6 windows) = 42 tasks.
    assert!(
        last.contains("42/42 done") && last.contains("ETA now"),
        "{last}"
    );
    assert!(
        records
            .iter()
            .any(|l| l.contains("submitted") && !l.contains("· since last: 0 submitted")),
        "{records:?}"
    );
    for r in &records {
        assert!(
            r.contains("running") && r.contains("queued") && r.contains("failed"),
            "{r}"
        );
    }
}

#[test]
fn a_long_interval_prints_the_first_change_and_the_end_only() {
    let tmp = tempfile::tempdir().unwrap();
    let file = small_campaign(tmp.path(), "");
    // An interval far longer than the run: the first change, then the last state.
    let out = legwork(
        tmp.path(),
        &["run", file.to_str().unwrap(), "--progress-every", "86400"],
    );
    assert!(out.status.success(), "{}", text(&out));
    let err = String::from_utf8_lossy(&out.stderr);
    let records: Vec<&str> = err.lines().filter(|l| l.contains(" progress: ")).collect();
    assert_eq!(records.len(), 2, "{err}");
    assert!(records[1].contains("42/42 done"), "{err}");
}
