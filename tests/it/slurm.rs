//! The demo campaign (reduced: three edges, two windows per leg, 300 frames)
//! through a real Slurm brought up by `tests/slurm/provision.sh`, with injected
//! faults: every window of one edge fails on its first attempt (4 of 12 windows,
//! 33 %), every window of another hangs on its first attempt; three of those are
//! cancelled from outside with `scancel` and the fourth runs into its walltime.
//! `legwork resume` is repeated until everything is done. Checks: every task is
//! done; no attempt of a task was submitted before the previous attempt had
//! ended (the journal's submission times against the wrapper's own records);
//! the window tables are byte-identical to a clean local-executor run with the
//! same seeds. Skipped, loudly, only when Slurm cannot be installed or started
//! (not root, no apt-get).

use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::time::{Duration, Instant};

const LEGWORK: &str = env!("CARGO_BIN_EXE_legwork");

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

struct Cluster {
    dir: PathBuf,
    conf: PathBuf,
}

impl Drop for Cluster {
    fn drop(&mut self) {
        let _ = Command::new("bash")
            .arg(repo().join("tests/slurm/provision.sh"))
            .arg("stop")
            .arg(&self.dir)
            .status();
    }
}

fn campaign(path: &Path, root: &Path, kind: &str, faults: bool) {
    let r = repo();
    let (e1, e2) = if faults {
        ("{ fault_fail_after: 60 }", "{ fault_hang_attempt: 1 }")
    } else {
        ("{}", "{}")
    };
    let yaml = format!(
        r#"campaign: orrin-{kind}
seed: 20261201
temperature_K: 298.15
unit: kcal/mol
templates: {templates}
root: {root}
scheduler: {{ kind: {kind}, max_queued: 64, max_attempts: 4, poll_seconds: 1 }}
vars: {{ dimensions: 3, phi: 0.9, checkpoint_every: 50 }}
ligands: {ligands}
edges:
  - {{ a: ork-01, b: ork-02, vars: {e1} }}
  - {{ a: ork-02, b: ork-03, vars: {e2} }}
  - [ork-01, ork-03]
legs:
  complex:
    sign: 1
    lambdas: {{ count: 2, spacing: linear }}
    replicas: 1
    resources: {{ cpus: 1, memory: 100M, walltime: 1m }}
    vars: {{ environment: complex }}
  solvent:
    sign: -1
    lambdas: {{ count: 2, spacing: linear }}
    replicas: 1
    resources: {{ cpus: 1, memory: 100M, walltime: 1m }}
    vars: {{ environment: solvent }}
stages:
  - {{ name: prepare, per: leg, template: prepare.sh.tera }}
  - {{ name: production, per: window, after: [prepare], template: production.sh.tera, output: window.tsv, frames: 300 }}
reader: {{ format: window-table }}
"#,
        templates = r.join("templates/demo").display(),
        root = root.display(),
        ligands = r.join("demo-data/ligands.csv").display(),
    );
    std::fs::write(path, yaml).unwrap();
}

fn legwork(args: &[&str], file: &Path, conf: Option<&Path>) -> Output {
    let mut c = Command::new(LEGWORK);
    c.args(args).arg(file);
    if let Some(conf) = conf {
        c.env("SLURM_CONF", conf);
    }
    c.output().unwrap()
}

fn status_json(file: &Path, conf: Option<&Path>) -> serde_json::Value {
    let out = legwork(&["status", "--json"], file, conf);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn squeue(conf: &Path) -> Vec<(String, String, String)> {
    let out = Command::new("squeue")
        .args(["-h", "-r", "-o", "%i|%j|%T"])
        .env("SLURM_CONF", conf)
        .output()
        .unwrap();
    String::from_utf8_lossy(&out.stdout)
        .lines()
        .filter_map(|l| {
            let f: Vec<&str> = l.split('|').collect();
            (f.len() == 3).then(|| (f[0].into(), f[1].into(), f[2].into()))
        })
        .collect()
}

fn windows(root: &Path) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = walkdir::WalkDir::new(root)
        .into_iter()
        .flatten()
        .filter(|e| e.file_name() == "window.tsv")
        .map(|e| e.path().strip_prefix(root).unwrap().to_path_buf())
        .collect();
    v.sort();
    v
}

#[test]
fn the_demo_campaign_survives_failures_hangs_and_scancel_on_a_real_slurm() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("slurm");
    let up = Command::new("bash")
        .arg(repo().join("tests/slurm/provision.sh"))
        .arg("start")
        .arg(&dir)
        .output()
        .unwrap();
    if up.status.code() == Some(77) {
        crate::skip::skipped(&format!(
            "real-Slurm test: {}",
            String::from_utf8_lossy(&up.stderr).trim()
        ));
        return;
    }
    assert!(
        up.status.success(),
        "provisioning failed:\n{}",
        String::from_utf8_lossy(&up.stderr)
    );
    let cluster = Cluster {
        conf: dir.join("slurm.conf"),
        dir,
    };
    let conf = Some(cluster.conf.as_path());
    let root = tmp.path().join("run-slurm");
    let file = tmp.path().join("slurm.yaml");
    campaign(&file, &root, "slurm", true);

    let out = legwork(&["submit"], &file, conf);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );

    // Cancel three of the four hanging windows from outside once they run.
    let t = Instant::now();
    let mut cancelled = Vec::new();
    while cancelled.len() < 3 {
        assert!(
            t.elapsed() < Duration::from_secs(120),
            "the hanging windows never ran"
        );
        for (id, name, state) in squeue(&cluster.conf) {
            if name.contains("ork-02-ork-03")
                && name.contains("production")
                && state == "RUNNING"
                && !cancelled.contains(&id)
                && cancelled.len() < 3
            {
                // Let it write a checkpoint first, so the rerun restarts from it.
                std::thread::sleep(Duration::from_millis(500));
                let ok = Command::new("scancel")
                    .arg(&id)
                    .env("SLURM_CONF", &cluster.conf)
                    .status()
                    .unwrap();
                assert!(ok.success());
                cancelled.push(id);
            }
        }
        std::thread::sleep(Duration::from_millis(200));
    }
    let out = legwork(&["watch", "--interval", "1", "-q"], &file, conf);
    assert_eq!(
        out.status.code(),
        Some(3),
        "watch ends incomplete: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let s = status_json(&file, conf);
    let kinds: Vec<(String, usize)> = s["reasons"]
        .as_array()
        .unwrap()
        .iter()
        .map(|g| {
            (
                g["kind"].as_str().unwrap().to_string(),
                g["tasks"].as_array().unwrap().len(),
            )
        })
        .collect();
    let count = |k: &str| {
        kinds
            .iter()
            .filter(|g| g.0 == k)
            .map(|g| g.1)
            .sum::<usize>()
    };
    assert_eq!(count("exit code"), 4, "{kinds:?}");
    assert_eq!(count("walltime"), 1, "{kinds:?}");
    // scancel reaches the wrapper as SIGTERM well before the walltime.
    assert_eq!(
        count("signal") + count("cancelled outside legwork"),
        3,
        "{kinds:?}"
    );
    assert_eq!(
        s["total"]["failed"].as_u64().unwrap() + s["total"]["lost"].as_u64().unwrap(),
        8
    );

    for round in 0.. {
        assert!(round < 4, "still not done after 4 resumes: {s}");
        let out = legwork(&["resume"], &file, conf);
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let out = legwork(&["watch", "--interval", "1", "-q"], &file, conf);
        if out.status.success() {
            break;
        }
    }
    let s = status_json(&file, conf);
    assert_eq!(
        s["total"]["done"],
        s["total"]["planned"].as_u64().unwrap() + s["total"]["done"].as_u64().unwrap()
    );
    assert_eq!(s["total"]["done"].as_u64().unwrap(), 3 * 2 * (1 + 2));

    // No attempt was submitted before the previous one ended: journal intent
    // times against the wrapper's start/exit records in each task directory.
    let journal = std::fs::read_to_string(root.join(".legwork/journal.jsonl")).unwrap();
    let mut intents: Vec<(String, u32, chrono::DateTime<chrono::FixedOffset>)> = Vec::new();
    for line in journal.lines() {
        let v: serde_json::Value = serde_json::from_str(line).unwrap();
        if v["event"] == "intent" {
            let t = chrono::DateTime::parse_from_rfc3339(v["t"].as_str().unwrap()).unwrap();
            for task in v["tasks"].as_array().unwrap() {
                intents.push((
                    task["task"].as_str().unwrap().into(),
                    task["attempt"].as_u64().unwrap() as u32,
                    t,
                ));
            }
        }
    }
    let mut reruns = 0;
    for (task, attempt, t) in &intents {
        if *attempt < 2 {
            continue;
        }
        reruns += 1;
        let hist =
            std::fs::read_to_string(root.join(task).join(".attempts.jsonl")).unwrap_or_default();
        for line in hist.lines() {
            let v: serde_json::Value = serde_json::from_str(line).unwrap();
            if v["attempt"].as_u64().unwrap() as u32 == attempt - 1 && v.get("code").is_some() {
                let ended =
                    chrono::DateTime::parse_from_rfc3339(v["time"].as_str().unwrap()).unwrap();
                assert!(
                    *t >= ended,
                    "{task}: attempt {attempt} submitted at {t} before attempt {} ended at {ended}",
                    attempt - 1
                );
            }
        }
        // Attempt numbers in the history never repeat a start.
        let starts: Vec<u64> = hist
            .lines()
            .map(|l| serde_json::from_str::<serde_json::Value>(l).unwrap())
            .filter(|v| v.get("host").is_some())
            .map(|v| v["attempt"].as_u64().unwrap())
            .collect();
        let mut sorted = starts.clone();
        sorted.dedup();
        assert_eq!(
            starts, sorted,
            "{task}: an attempt started twice: {starts:?}"
        );
    }
    assert!(reruns >= 8, "only {reruns} reruns were submitted");

    // The same campaign, clean, through the local executor: identical tables.
    let root2 = tmp.path().join("run-local");
    let file2 = tmp.path().join("local.yaml");
    campaign(&file2, &root2, "local", false);
    let out = legwork(&["submit"], &file2, None);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let out = legwork(&["watch", "--interval", "0.3", "-q"], &file2, None);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let a = windows(&root);
    assert_eq!(a.len(), 12);
    assert_eq!(a, windows(&root2));
    for w in &a {
        assert!(
            std::fs::read(root.join(w)).unwrap() == std::fs::read(root2.join(w)).unwrap(),
            "{} differs between the Slurm and the local run",
            w.display()
        );
    }
    drop(cluster);
}
