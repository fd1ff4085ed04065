//! A campaign that changes after it ran: outdated tasks are shown and rerun
//! only on request (their previous output kept aside); raising `frames` or
//! `legwork extend` makes windows short, and they continue from their
//! checkpoints, one more attempt each, while everything else stays untouched.

use crate::life_support::{legwork, rows, small_campaign, text};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::time::SystemTime;

fn json(dir: &Path, file: &Path) -> serde_json::Value {
    let out = legwork(dir, &["status", "--json", file.to_str().unwrap()]);
    assert!(out.status.success(), "{}", text(&out));
    serde_json::from_slice(&out.stdout).unwrap()
}

/// Every file under `tree` that a task wrote (outside `.legwork/`, `results/`
/// and `report/`), with its bytes and modification time.
fn snapshot(tree: &Path) -> BTreeMap<PathBuf, (Vec<u8>, SystemTime)> {
    walkdir::WalkDir::new(tree)
        .into_iter()
        .filter_entry(|e| {
            let n = e.file_name().to_string_lossy();
            !(e.depth() == 1 && (n == ".legwork" || n == "results" || n == "report"))
        })
        .flatten()
        .filter(|e| e.file_type().is_file())
        .map(|e| {
            let p = e.path().to_path_buf();
            let m = std::fs::metadata(&p).unwrap().modified().unwrap();
            (p.clone(), (std::fs::read(&p).unwrap(), m))
        })
        .collect()
}

/// The attempts whose start the wrapper recorded in `dir`'s attempt history.
fn started_attempts(dir: &Path) -> Vec<u64> {
    std::fs::read_to_string(dir.join(".attempts.jsonl"))
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str::<serde_json::Value>(l).unwrap())
        .filter(|v| v.get("host").is_some())
        .map(|v| v["attempt"].as_u64().unwrap())
        .collect()
}

fn frames_in(table: &Path) -> usize {
    std::fs::read_to_string(table)
        .unwrap()
        .lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("time"))
        .count()
}

#[test]
fn a_changed_variable_marks_finished_tasks_outdated_and_rerun_keeps_the_old_output() {
    let tmp = tempfile::tempdir().unwrap();
    let file = small_campaign(tmp.path(), "");
    let f = file.to_str().unwrap();
    let run = legwork(tmp.path(), &["-q", "run", f]);
    assert!(run.status.success(), "{}", text(&run));
    let tree = tmp.path().join("tree");
    assert_eq!(json(tmp.path(), &file)["outdated"]["count"], 0);

    // The production template uses `vars.phi`; the prepare template does not.
    let yaml = std::fs::read_to_string(&file).unwrap();
    std::fs::write(&file, yaml.replace("phi: 0.9", "phi: 0.8")).unwrap();
    let st = json(tmp.path(), &file);
    // 3 edges × 2 legs × 6 windows of production; no prepare task.
    assert_eq!(st["outdated"]["count"], 36, "{st}");
    assert!(st["outdated"]["tasks"]
        .as_array()
        .unwrap()
        .iter()
        .all(|t| t.as_str().unwrap().ends_with("/production")));
    assert_eq!(st["total"]["done"], 42, "nothing reran by itself");

    // expand re-renders the scripts, but the tasks stay done and outdated.
    let ex = legwork(tmp.path(), &["-q", "expand", f]);
    assert!(ex.status.success(), "{}", text(&ex));
    let st = json(tmp.path(), &file);
    assert_eq!(st["outdated"]["count"], 36, "{st}");
    assert_eq!(st["total"]["done"], 42);
    let plain = legwork(tmp.path(), &["status", f]);
    assert!(
        String::from_utf8_lossy(&plain.stdout).contains("outdated: 36 done tasks"),
        "{}",
        text(&plain)
    );

    // collect computes everything from what is there and says what is outdated.
    let c = legwork(tmp.path(), &["collect", f]);
    assert!(c.status.success(), "{}", text(&c));
    let out = String::from_utf8_lossy(&c.stdout);
    assert!(
        out.contains("ork-01+ork-02/complex/r1: rests on 6 outdated window(s)"),
        "{}",
        text(&c)
    );
    let summary: serde_json::Value =
        serde_json::from_slice(&std::fs::read(tree.join("results/summary.json")).unwrap()).unwrap();
    let notes = summary["notes"].as_array().unwrap();
    assert_eq!(notes.len(), 6, "{notes:?}");
    assert!(notes.iter().all(|n| n["kind"] == "outdated"));
    let html = std::fs::read_to_string(tree.join("report/index.html")).unwrap();
    assert!(html.contains("id=\"notes\"") && html.contains("rests on 6 outdated"));

    // A rerun needs a selection.
    let bare = legwork(tmp.path(), &["rerun", f]);
    assert_eq!(bare.status.code(), Some(2), "{}", text(&bare));
    assert!(String::from_utf8_lossy(&bare.stderr).contains("hint:"));

    let w3 = tree.join("ork-01+ork-02/complex/r1/w03/production");
    let before = std::fs::read(w3.join("window.tsv")).unwrap();
    let others = snapshot(&tree.join("ork-01+ork-03"));
    let r = legwork(
        tmp.path(),
        &[
            "rerun",
            f,
            "--outdated",
            "--edge",
            "ork-01+ork-02",
            "--leg",
            "complex",
        ],
    );
    assert!(r.status.success(), "{}", text(&r));
    assert!(String::from_utf8_lossy(&r.stdout).contains("running 6 finished tasks again"));
    let w = legwork(tmp.path(), &["-q", "watch", f]);
    assert!(w.status.success(), "{}", text(&w));

    let st = json(tmp.path(), &file);
    assert_eq!(st["outdated"]["count"], 30, "{st}");
    assert_eq!(st["total"]["done"], 42);
    // The previous output is kept aside with its attempt number, unchanged.
    let kept = w3.join("previous/attempt-1/window.tsv");
    assert_eq!(std::fs::read(&kept).unwrap(), before);
    let kept_note: serde_json::Value =
        serde_json::from_slice(&std::fs::read(w3.join("previous/attempt-1/.kept.json")).unwrap())
            .unwrap();
    assert_eq!(kept_note["why"], "rerun");
    // The new run used φ = 0.8: a different table, from attempt 2, each
    // attempt started exactly once.
    assert_ne!(std::fs::read(w3.join("window.tsv")).unwrap(), before);
    assert_eq!(started_attempts(&w3), [1, 2]);
    assert_eq!(
        started_attempts(&tree.join("ork-01+ork-02/complex/r1/prepare")),
        [1]
    );
    // Tasks outside the selection were not touched.
    assert_eq!(snapshot(&tree.join("ork-01+ork-03")), others);
}

#[test]
fn raising_one_legs_frames_extends_only_its_windows_from_their_checkpoints() {
    let tmp = tempfile::tempdir().unwrap();
    let file = small_campaign(tmp.path(), "");
    let f = file.to_str().unwrap();
    let run = legwork(tmp.path(), &["-q", "run", f]);
    assert!(run.status.success(), "{}", text(&run));
    let tree = tmp.path().join("tree");
    let solvent_before: BTreeMap<_, _> = snapshot(&tree)
        .into_iter()
        .filter(|(p, _)| !p.to_string_lossy().contains("/complex/"))
        .collect();
    let w2 = tree.join("ork-01+ork-03/complex/r1/w02/production");
    let table_before = std::fs::read(w2.join("window.tsv")).unwrap();
    let edges_before = rows(&tree.join("results/edges.csv"));

    // The complex leg now asks 600 frames of each window (the stage says 400),
    // and only one task may be queued at a time, so most extensions wait.
    let yaml = std::fs::read_to_string(&file).unwrap();
    let raised = yaml.replacen(
        "    vars: { environment: complex }\n",
        "    vars: { environment: complex }\n    frames: 600\n",
        1,
    );
    std::fs::write(
        &file,
        raised.replace("max_attempts: 2 }", "max_attempts: 2, max_queued: 1 }"),
    )
    .unwrap();
    let st = json(tmp.path(), &file);
    assert_eq!(st["short"]["count"], 18, "{st}");
    assert_eq!(st["short"]["tasks"][0]["had"], 400);
    assert_eq!(st["short"]["tasks"][0]["wants"], 600);
    assert_eq!(st["total"]["failed"], 0, "short is not failed");

    let r = legwork(tmp.path(), &["resume", f]);
    assert!(r.status.success(), "{}", text(&r));
    assert!(
        String::from_utf8_lossy(&r.stdout)
            .contains("extending 18 short windows (18 from a checkpoint"),
        "{}",
        text(&r)
    );
    // In between: collect uses the frames that exist and says so; no result is wiped.
    let c = legwork(tmp.path(), &["collect", f]);
    assert!(c.status.success(), "{}", text(&c));
    assert!(
        String::from_utf8_lossy(&c.stdout).contains("being extended"),
        "{}",
        text(&c)
    );
    assert_eq!(rows(&tree.join("results/edges.csv")).len(), 3);
    assert_eq!(
        std::fs::read(w2.join("previous/attempt-1/window.tsv")).unwrap(),
        table_before
    );

    std::fs::write(&file, &raised).unwrap();
    let w = legwork(tmp.path(), &["-q", "watch", f]);
    assert!(w.status.success(), "{}", text(&w));
    let st = json(tmp.path(), &file);
    assert_eq!(st["short"]["count"], 0, "{st}");
    assert_eq!(st["total"]["done"], 42);

    // Only the complex windows ran, once more each, and they appended: the
    // first 400 frames are the old table's bytes.
    for edge in ["ork-01+ork-02", "ork-01+ork-03", "ork-02+ork-03"] {
        for k in 0..6 {
            let d = tree.join(format!("{edge}/complex/r1/w{k:02}/production"));
            assert_eq!(started_attempts(&d), [1, 2], "{}", d.display());
            assert_eq!(frames_in(&d.join("window.tsv")), 600);
        }
        assert_eq!(
            started_attempts(&tree.join(format!("{edge}/complex/r1/prepare"))),
            [1]
        );
    }
    let table_after = std::fs::read(w2.join("window.tsv")).unwrap();
    assert_eq!(&table_after[..table_before.len()], &table_before[..]);
    let log = std::fs::read_to_string(w2.join("task.sh")).unwrap();
    assert!(log.contains("--frames 600") && log.contains("--attempt 2"));
    let solvent_after: BTreeMap<_, _> = snapshot(&tree)
        .into_iter()
        .filter(|(p, _)| !p.to_string_lossy().contains("/complex/"))
        .collect();
    assert_eq!(
        solvent_after, solvent_before,
        "solvent outputs untouched (bytes and mtimes)"
    );

    // The extended windows equal an uninterrupted 600-frame run's (the demo
    // engine's restart guarantee), so the results are those of such a run.
    let fresh_dir = tempfile::tempdir().unwrap();
    let fresh = small_campaign(fresh_dir.path(), "");
    let y = std::fs::read_to_string(&fresh).unwrap().replacen(
        "    vars: { environment: complex }\n",
        "    vars: { environment: complex }\n    frames: 600\n",
        1,
    );
    std::fs::write(&fresh, y).unwrap();
    let fr = legwork(fresh_dir.path(), &["-q", "run", fresh.to_str().unwrap()]);
    assert!(fr.status.success(), "{}", text(&fr));
    let fresh_table = fresh_dir
        .path()
        .join("tree/ork-01+ork-03/complex/r1/w02/production/window.tsv");
    assert_eq!(std::fs::read(fresh_table).unwrap(), table_after);

    let c = legwork(tmp.path(), &["-q", "collect", f]);
    assert!(c.status.success(), "{}", text(&c));
    let edges = rows(&tree.join("results/edges.csv"));
    assert_ne!(edges, edges_before, "the extended frames are used");
    assert_eq!(
        edges,
        rows(&fresh_dir.path().join("tree/results/edges.csv"))
    );
    check_exact(&edges);
}

/// Each edge's ΔΔG within 3σ of the demo's closed-form answer
/// (demo-data/exact.csv): the acceptance bound for a Gaussian error with an
/// honest σ (a 3σ miss has probability 0.27% per edge; the seeds are fixed).
fn check_exact(edges: &[std::collections::HashMap<String, String>]) {
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data/exact.csv");
    let exact = rows(&demo);
    for e in edges {
        let truth: f64 = exact
            .iter()
            .find(|x| x["ligand_a"] == e["ligand_a"] && x["ligand_b"] == e["ligand_b"])
            .unwrap()["ddg_exact"]
            .parse()
            .unwrap();
        let ddg: f64 = e["ddg"].parse().unwrap();
        let sigma: f64 = e["sigma"].parse().unwrap();
        assert!(
            (ddg - truth).abs() <= 3.0 * sigma,
            "{}: ΔΔG {ddg:.3} ± {sigma:.3} vs exact {truth:.3}",
            e["subject"]
        );
    }
}

#[test]
fn extend_by_and_to_asks_a_selection_for_more_frames() {
    let tmp = tempfile::tempdir().unwrap();
    let file = small_campaign(tmp.path(), "");
    let f = file.to_str().unwrap();
    let run = legwork(tmp.path(), &["-q", "run", f]);
    assert!(run.status.success(), "{}", text(&run));
    let tree = tmp.path().join("tree");
    let untouched = snapshot(&tree.join("ork-01+ork-02"));

    let need = legwork(tmp.path(), &["extend", f]);
    assert_eq!(
        need.status.code(),
        Some(2),
        "--by or --to is required: {}",
        text(&need)
    );

    let by = legwork(
        tmp.path(),
        &[
            "extend",
            f,
            "--by",
            "100",
            "--edge",
            "ork-01+ork-03",
            "--leg",
            "solvent",
        ],
    );
    assert!(by.status.success(), "{}", text(&by));
    assert!(
        String::from_utf8_lossy(&by.stdout).contains("extending 6 windows (6 from a checkpoint")
    );
    let w = legwork(tmp.path(), &["-q", "watch", f]);
    assert!(w.status.success(), "{}", text(&w));
    let leg = tree.join("ork-01+ork-03/solvent/r1");
    for k in 0..6 {
        let d = leg.join(format!("w{k:02}/production"));
        assert_eq!(frames_in(&d.join("window.tsv")), 500);
        assert_eq!(started_attempts(&d), [1, 2]);
    }

    // --to below what is asked now changes nothing; above, only the window named.
    let low = legwork(
        tmp.path(),
        &[
            "extend",
            f,
            "--to",
            "450",
            "--edge",
            "ork-01+ork-03",
            "--leg",
            "solvent",
        ],
    );
    assert_eq!(low.status.code(), Some(3), "{}", text(&low));
    let to = legwork(
        tmp.path(),
        &[
            "extend",
            f,
            "--to",
            "700",
            "--edge",
            "ork-01+ork-03",
            "--leg",
            "solvent",
            "--window",
            "2",
        ],
    );
    assert!(to.status.success(), "{}", text(&to));
    let w = legwork(tmp.path(), &["-q", "watch", f]);
    assert!(w.status.success(), "{}", text(&w));
    assert_eq!(frames_in(&leg.join("w02/production/window.tsv")), 700);
    assert_eq!(started_attempts(&leg.join("w02/production")), [1, 2, 3]);
    assert_eq!(frames_in(&leg.join("w03/production/window.tsv")), 500);
    // The targets persist: a later status still asks 700 of window 2 and finds it done.
    let st = json(tmp.path(), &file);
    assert_eq!(st["short"]["count"], 0, "{st}");
    assert_eq!(st["total"]["done"], 42);
    assert_eq!(snapshot(&tree.join("ork-01+ork-02")), untouched);
}
