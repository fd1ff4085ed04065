//! Rendering is atomic per batch: legwork killed (SIGKILL, by its own test hook
//! `LEGWORK_KILL_AFTER_SCRIPT_WRITES=k`) right after the k-th task script write
//! of a resubmission or of a re-expand, for k = 1, 2, …, leaves every script
//! either the old one or the new one and known as legwork's own: its content has
//! the hash the render manifest (with its journal of renders replayed) holds,
//! and the attempt the script passes to the engine is the manifest's. The next
//! command carries on, nothing is called "edited by hand", and the campaign
//! completes with every task's attempt started exactly once (counted in each
//! task's attempt history).

use crate::exactly_once::starts;
use crate::life_support::{small_campaign_with, text};
use assert_cmd::cargo::CommandCargoExt;
use legwork::render::manifest::{self, Manifest};
use std::os::unix::process::ExitStatusExt;
use std::path::Path;
use std::process::Command;

const HOOK: &str = "LEGWORK_KILL_AFTER_SCRIPT_WRITES";

/// `legwork -q ARGS` in `dir`, killed after its `kill_after`-th script write.
fn legwork_killed(dir: &Path, args: &[&str], kill_after: Option<usize>) -> std::process::Output {
    let mut c = Command::cargo_bin("legwork").unwrap();
    c.current_dir(dir).arg("-q").args(args);
    if let Some(k) = kill_after {
        c.env(HOOK, k.to_string());
    }
    c.output().unwrap()
}

/// Every `task.sh` under `tree` is the one the manifest records, rendered for
/// the attempt it records.
fn every_script_is_ours(tree: &Path, when: &str) {
    let man = Manifest::load(tree);
    let mut seen = 0;
    for e in walkdir::WalkDir::new(tree)
        .into_iter()
        .filter_map(Result::ok)
    {
        if e.file_name() != "task.sh" {
            continue;
        }
        seen += 1;
        let rel = e.path().strip_prefix(tree).unwrap().to_string_lossy();
        let bytes = std::fs::read(e.path()).unwrap();
        let entry = man
            .entries
            .get(rel.as_ref())
            .unwrap_or_else(|| panic!("{when}: {rel} is not in the manifest"));
        assert_eq!(
            manifest::hash(&bytes),
            entry.hash,
            "{when}: {rel} is not the script the manifest records"
        );
        let text = String::from_utf8_lossy(&bytes);
        if let Some(at) = text.find("--attempt ") {
            let n: String = text[at + 10..]
                .chars()
                .filter(|c| *c != '\'')
                .take_while(char::is_ascii_digit)
                .collect();
            assert_eq!(
                n,
                entry.attempt.to_string(),
                "{when}: {rel} runs attempt {n}, the manifest says {}",
                entry.attempt
            );
        }
    }
    assert_eq!(seen, 42, "{when}: task scripts in the tree");
}

fn killed(out: &std::process::Output) -> bool {
    out.status.signal() == Some(9)
}

#[test]
fn a_kill_between_script_writes_of_a_resubmission_leaves_every_script_ours() {
    let tmp = tempfile::tempdir().unwrap();
    // The third edge's 12 windows fail half-way on their first attempt; the
    // second attempt (re-rendered, restarting from the checkpoint) succeeds.
    let file = small_campaign_with(tmp.path(), "{ fault_fail_after: 250 }", "");
    let f = file.to_str().unwrap();
    let tree = tmp.path().join("tree");
    let out = legwork_killed(tmp.path(), &["expand", f], None);
    assert!(out.status.success(), "{}", text(&out));
    let mut kills = 0;
    let mut all_err = String::new();
    for k in 1..=40 {
        let out = legwork_killed(tmp.path(), &["run", f], Some(k));
        all_err.push_str(&String::from_utf8_lossy(&out.stderr));
        if !killed(&out) {
            assert!(out.status.success(), "run with k = {k}: {}", text(&out));
            break;
        }
        kills += 1;
        every_script_is_ours(&tree, &format!("after a kill at write {k}"));
    }
    assert!(kills >= 3, "only {kills} runs were stopped between writes");
    let out = legwork_killed(tmp.path(), &["run", f], None);
    all_err.push_str(&String::from_utf8_lossy(&out.stderr));
    assert!(out.status.success(), "{}", text(&out));
    assert!(!all_err.contains("edited by hand"), "{all_err}");
    every_script_is_ours(&tree, "at the end");
    let mut second = 0;
    for e in walkdir::WalkDir::new(&tree)
        .into_iter()
        .filter_map(Result::ok)
    {
        if e.file_name() != "task.sh" {
            continue;
        }
        let dir = e.path().parent().unwrap();
        let got = starts(dir);
        let third_window =
            dir.starts_with(tree.join("ork-02+ork-03")) && dir.parent().unwrap().ends_with_window();
        let want = if third_window { vec![1, 2] } else { vec![1] };
        assert_eq!(got, want, "{}: attempts started", dir.display());
        second += usize::from(third_window);
    }
    assert_eq!(second, 12, "windows with a second attempt");
}

#[test]
fn a_kill_between_script_writes_of_a_re_expand_leaves_every_script_ours() {
    let tmp = tempfile::tempdir().unwrap();
    let file = small_campaign_with(tmp.path(), "{}", "");
    let f = file.to_str().unwrap();
    let tree = tmp.path().join("tree");
    let out = legwork_killed(tmp.path(), &["expand", f], None);
    assert!(out.status.success(), "{}", text(&out));
    // A changed variable changes every production script (36): each is
    // replaced, and each killed expand replaces k more (1 + 2 + … + 13 = 32).
    let yaml = std::fs::read_to_string(&file).unwrap();
    std::fs::write(&file, yaml.replace("phi: 0.9", "phi: 0.8")).unwrap();
    let mut kills = 0;
    for k in [1, 2, 3, 5, 8, 13] {
        let out = legwork_killed(tmp.path(), &["expand", f], Some(k));
        assert!(
            killed(&out),
            "expand with k = {k} was not stopped: {}",
            text(&out)
        );
        kills += 1;
        every_script_is_ours(&tree, &format!("after a kill at write {k}"));
    }
    let out = crate::life_support::legwork(tmp.path(), &["expand", f]);
    assert!(out.status.success(), "{}", text(&out));
    let said = String::from_utf8_lossy(&out.stdout);
    assert!(said.contains(" 0 protected"), "{}", text(&out));
    every_script_is_ours(&tree, "at the end");
    assert!(!tree.join(".legwork/render-journal.tsv").exists());
    assert_eq!(kills, 6);
    let scripts = walkdir::WalkDir::new(&tree)
        .into_iter()
        .filter_map(Result::ok)
        .filter(|e| e.file_name() == "task.sh")
        .filter(|e| {
            std::fs::read_to_string(e.path())
                .unwrap()
                .contains("--phi 0.9")
        })
        .count();
    assert_eq!(scripts, 0, "scripts still with the old variable");
}

trait WindowDir {
    fn ends_with_window(&self) -> bool;
}

impl WindowDir for Path {
    /// A window task's folder is `w<NN>` (the prepare task's is not).
    fn ends_with_window(&self) -> bool {
        self.file_name()
            .and_then(|n| n.to_str())
            .is_some_and(|n| n.starts_with('w') && n[1..].chars().all(|c| c.is_ascii_digit()))
    }
}
