//! The demo campaign (reduced: three edges, three windows per leg, 300 frames)
//! through a real Grid Engine brought up by `tests/sge/provision.sh` (a private
//! cell on this machine), with injected faults: every window of one edge fails
//! on its first attempt (6 of 18 windows), every window of another hangs on its
//! first attempt; five of those are deleted from outside with `qdel -t` while
//! they run and the sixth runs into its walltime (`h_rt`). Each leg's windows
//! are one array job held on the leg's `prepare` job (`-hold_jid`), throttled
//! to two running at once (`-tc 2`). `legwork resume` is repeated until
//! everything is done. Checks: the reasons `status` gives for each kind of
//! failure; every task is done in the end; no attempt of a task was submitted
//! before the previous attempt had ended, and no attempt started twice; no
//! window started before its leg's `prepare` had ended; never more than two
//! elements of one array ran at once; the window tables are byte-identical to a
//! clean local-executor run with the same seeds. Skipped, loudly, only when Grid
//! Engine cannot be installed or started (not root, no apt-get).

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::time::{Duration, Instant};

type Time = chrono::DateTime<chrono::FixedOffset>;

const LEGWORK: &str = env!("CARGO_BIN_EXE_legwork");
const WINDOWS: usize = 3;
const THROTTLE: usize = 2;

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// The private cell; stopped (daemons and jobs) when dropped.
struct Cell {
    dir: PathBuf,
    /// SGE_ROOT, SGE_CELL and the ports, from `DIR/env`.
    env: Vec<(String, String)>,
}

impl Cell {
    fn command(&self, program: &str) -> Command {
        let mut c = Command::new(program);
        c.envs(self.env.iter().map(|(k, v)| (k, v)));
        c
    }
}

impl Drop for Cell {
    fn drop(&mut self) {
        let _ = Command::new("bash")
            .arg(repo().join("tests/sge/provision.sh"))
            .arg("stop")
            .arg(&self.dir)
            .env("PATH", real_path())
            .status();
    }
}

/// `PATH` without the recorded-output tests' fake `qsub`/`qstat`/`qacct`/`qdel`
/// (tests/fixtures/*/bin), which those tests put first in this process's `PATH`
/// while this one may be running beside them.
fn real_path() -> String {
    let fixtures = repo().join("tests/fixtures");
    let path = std::env::var_os("PATH").unwrap_or_default();
    let kept: Vec<PathBuf> = std::env::split_paths(&path)
        .filter(|p| !p.starts_with(&fixtures))
        .collect();
    std::env::join_paths(kept).unwrap().into_string().unwrap()
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
scheduler: {{ kind: {kind}, max_queued: 64, max_attempts: 4, poll_seconds: 1, array_throttle: {THROTTLE} }}
vars: {{ dimensions: 3, phi: 0.9, checkpoint_every: 50 }}
ligands: {ligands}
edges:
  - {{ a: ork-01, b: ork-02, vars: {e1} }}
  - {{ a: ork-02, b: ork-03, vars: {e2} }}
  - [ork-01, ork-03]
legs:
  complex:
    sign: 1
    lambdas: {{ count: {WINDOWS}, spacing: linear }}
    replicas: 1
    resources: {{ cpus: 1, memory: 100M, walltime: 30s }}
    vars: {{ environment: complex }}
  solvent:
    sign: -1
    lambdas: {{ count: {WINDOWS}, spacing: linear }}
    replicas: 1
    resources: {{ cpus: 1, memory: 100M, walltime: 30s }}
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

fn legwork(args: &[&str], file: &Path, cell: Option<&Cell>) -> Output {
    let mut c = Command::new(LEGWORK);
    c.args(args).arg(file);
    if let Some(cell) = cell {
        c.envs(cell.env.iter().map(|(k, v)| (k, v)));
    }
    c.output().unwrap()
}

fn ok(out: &Output) {
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

fn status_json(file: &Path, cell: Option<&Cell>) -> serde_json::Value {
    let out = legwork(&["status", "--json"], file, cell);
    ok(&out);
    serde_json::from_slice(&out.stdout).unwrap()
}

/// Running array tasks as an outsider sees them in `qstat -r` (the plain
/// listing cuts job names at ten characters; `-r` adds the full name):
/// (job id, task id, full job name).
fn running_tasks(cell: &Cell) -> Vec<(String, String, String)> {
    let out = cell
        .command("qstat")
        .args(["-r", "-u", "*"])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    let mut v = Vec::new();
    let mut current: Option<(String, String)> = None;
    for line in text.lines() {
        let f: Vec<&str> = line.split_whitespace().collect();
        if f.first()
            .is_some_and(|x| x.chars().all(|c| c.is_ascii_digit()))
            && f.len() >= 10
        {
            // job-ID prior name user state date time queue slots ja-task-ID
            current = (f[4] == "r").then(|| (f[0].to_string(), f[9].to_string()));
        } else if let (Some(name), Some((job, task))) =
            (line.trim().strip_prefix("Full jobname:"), current.take())
        {
            v.push((job, task, name.trim().to_string()));
        }
    }
    v
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

fn rfc3339(v: &serde_json::Value) -> Time {
    chrono::DateTime::parse_from_rfc3339(v.as_str().unwrap()).unwrap()
}

/// Every attempt of every task from the wrapper's own records: (task, job
/// element id `job.task`, attempt, start, end when the wrapper saw it end).
/// A task killed outright (`qdel` and `h_rt` both send SIGKILL) leaves no end.
#[allow(clippy::type_complexity)]
fn attempts(root: &Path, tasks: &[String]) -> Vec<(String, String, u64, Time, Option<Time>)> {
    let mut v = Vec::new();
    for task in tasks {
        let hist =
            std::fs::read_to_string(root.join(task).join(".attempts.jsonl")).unwrap_or_default();
        let recs: Vec<serde_json::Value> = hist
            .lines()
            .map(|l| serde_json::from_str(l).unwrap())
            .collect();
        for r in recs.iter().filter(|r| r.get("host").is_some()) {
            let end = recs
                .iter()
                .find(|e| e.get("code").is_some() && e["job"] == r["job"])
                .map(|e| rfc3339(&e["time"]));
            v.push((
                task.clone(),
                r["job"].as_str().unwrap().to_string(),
                r["attempt"].as_u64().unwrap(),
                rfc3339(&r["time"]),
                end,
            ));
        }
    }
    v
}

/// End times of every ended array element of the campaign, from Grid Engine's
/// accounting (`qacct`, whole seconds, local time).
fn accounted_ends(cell: &Cell) -> BTreeMap<String, Time> {
    let out = cell
        .command("qacct")
        .args(["-j", "lw.orrin-sge.*"])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    let mut ends = BTreeMap::new();
    for rec in text.split("==============================================================") {
        let field = |k: &str| {
            rec.lines()
                .find_map(|l| l.strip_prefix(k).map(|v| v.trim().to_string()))
        };
        if let (Some(job), Some(task), Some(end)) =
            (field("jobnumber"), field("taskid"), field("end_time"))
        {
            let naive = chrono::NaiveDateTime::parse_from_str(&end, "%a %b %e %H:%M:%S %Y")
                .unwrap_or_else(|e| panic!("qacct end_time {end:?}: {e}"));
            let local = naive
                .and_local_timezone(chrono::Local)
                .earliest()
                .unwrap()
                .fixed_offset();
            ends.insert(format!("{job}.{task}"), local);
        }
    }
    ends
}

#[test]
fn the_demo_campaign_survives_failures_hangs_and_qdel_on_a_real_grid_engine() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("sge");
    let up = Command::new("bash")
        .arg(repo().join("tests/sge/provision.sh"))
        .arg("start")
        .arg(&dir)
        .env("PATH", real_path())
        .output()
        .unwrap();
    if up.status.code() == Some(77) {
        crate::skip::skipped(&format!(
            "real-Grid-Engine test: {}",
            String::from_utf8_lossy(&up.stderr).trim()
        ));
        return;
    }
    assert!(
        up.status.success(),
        "provisioning failed:\n{}",
        String::from_utf8_lossy(&up.stderr)
    );
    let env = std::fs::read_to_string(dir.join("env")).unwrap();
    let mut env: Vec<(String, String)> = env
        .lines()
        .filter_map(|l| l.strip_prefix("export ")?.split_once('='))
        .map(|(k, v)| (k.to_string(), v.to_string()))
        .collect();
    env.push(("PATH".into(), real_path()));
    let cell = Cell { dir, env };
    let root = tmp.path().join("run-sge");
    let file = tmp.path().join("sge.yaml");
    campaign(&file, &root, "sge", true);

    ok(&legwork(&["submit"], &file, Some(&cell)));

    // Delete five of the six hanging windows from outside once they run; the
    // sixth is left to its walltime.
    let hanging = 2 * WINDOWS;
    let t = Instant::now();
    let mut deleted: Vec<(String, String)> = Vec::new();
    while deleted.len() < hanging - 1 {
        assert!(
            t.elapsed() < Duration::from_secs(120),
            "the hanging windows never ran (deleted so far: {deleted:?})"
        );
        for (job, task, name) in running_tasks(&cell) {
            let id = (job.clone(), task.clone());
            if name.contains("ork-02-ork-03")
                && name.contains("production")
                && !deleted.contains(&id)
                && deleted.len() < hanging - 1
            {
                // Let it write a checkpoint first, so the rerun restarts from it.
                std::thread::sleep(Duration::from_millis(500));
                let out = cell
                    .command("qdel")
                    .args([job.as_str(), "-t", task.as_str()])
                    .output()
                    .unwrap();
                ok(&out);
                deleted.push(id);
            }
        }
        std::thread::sleep(Duration::from_millis(200));
    }
    let out = legwork(&["watch", "--interval", "1", "-q"], &file, Some(&cell));
    assert_eq!(
        out.status.code(),
        Some(3),
        "watch ends incomplete: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let s = status_json(&file, Some(&cell));
    let kinds: Vec<(String, String, usize)> = s["reasons"]
        .as_array()
        .unwrap()
        .iter()
        .map(|g| {
            (
                g["kind"].as_str().unwrap().to_string(),
                g["reason"].as_str().unwrap().to_string(),
                g["tasks"].as_array().unwrap().len(),
            )
        })
        .collect();
    let count = |k: &str, text: &str| {
        kinds
            .iter()
            .filter(|g| g.0 == k && g.1.contains(text))
            .map(|g| g.2)
            .sum::<usize>()
    };
    assert_eq!(count("exit code", "exit code 1"), 2 * WINDOWS, "{kinds:?}");
    // h_rt kills with SIGKILL, so the wrapper leaves no exit marker; qacct's
    // `failed 37 : qmaster enforced h_rt …` says why.
    assert_eq!(
        count("walltime", "walltime 00:00:30 exceeded"),
        1,
        "{kinds:?}"
    );
    // qdel kills with SIGKILL too; qacct's `failed 100 : assumedly after job`
    // cannot tell it from another outside kill, and the reason says both.
    assert_eq!(count("scheduler", "SIGKILL"), hanging - 1, "{kinds:?}");
    assert_eq!(
        count("scheduler", "deleted with qdel"),
        hanging - 1,
        "{kinds:?}"
    );
    assert_eq!(
        s["total"]["failed"].as_u64().unwrap() + s["total"]["lost"].as_u64().unwrap(),
        (4 * WINDOWS) as u64
    );

    let mut s = s;
    for round in 0.. {
        assert!(round < 4, "still not done after 4 resumes: {s}");
        ok(&legwork(&["resume"], &file, Some(&cell)));
        let out = legwork(&["watch", "--interval", "1", "-q"], &file, Some(&cell));
        s = status_json(&file, Some(&cell));
        if out.status.success() {
            break;
        }
    }
    let tasks = 3 * 2 * (1 + WINDOWS);
    assert_eq!(s["total"]["done"].as_u64().unwrap(), tasks as u64, "{s}");

    // No attempt was submitted before the previous one ended: journal intent
    // times against the wrapper's start/exit records in each task directory
    // (and, for an attempt killed outright, Grid Engine's accounting).
    let ends = accounted_ends(&cell);
    let journal = std::fs::read_to_string(root.join(".legwork/journal.jsonl")).unwrap();
    let mut intents: Vec<(String, u64, Time)> = Vec::new();
    for line in journal.lines() {
        let v: serde_json::Value = serde_json::from_str(line).unwrap();
        if v["event"] == "intent" {
            for task in v["tasks"].as_array().unwrap() {
                intents.push((
                    task["task"].as_str().unwrap().into(),
                    task["attempt"].as_u64().unwrap(),
                    rfc3339(&v["t"]),
                ));
            }
        }
    }
    let mut names: Vec<String> = intents.iter().map(|i| i.0.clone()).collect();
    names.sort();
    names.dedup();
    assert_eq!(names.len(), tasks);
    let runs = attempts(&root, &names);
    let end_of = |job: &str, end: Option<Time>| -> Time {
        end.or_else(|| ends.get(job).copied())
            .unwrap_or_else(|| panic!("{job}: no end in the wrapper's records or in qacct"))
    };
    let mut reruns = 0;
    for (task, attempt, t) in &intents {
        if *attempt < 2 {
            continue;
        }
        reruns += 1;
        let prev: Vec<_> = runs
            .iter()
            .filter(|r| &r.0 == task && r.2 == attempt - 1)
            .collect();
        assert_eq!(
            prev.len(),
            1,
            "{task}: attempt {} started {} times",
            attempt - 1,
            prev.len()
        );
        let ended = end_of(&prev[0].1, prev[0].4);
        assert!(
            *t >= ended,
            "{task}: attempt {attempt} submitted at {t} before attempt {} ended at {ended}",
            attempt - 1
        );
    }
    assert!(reruns >= 4 * WINDOWS, "only {reruns} reruns were submitted");
    for task in &names {
        let mut starts: Vec<u64> = runs.iter().filter(|r| &r.0 == task).map(|r| r.2).collect();
        let n = starts.len();
        starts.dedup();
        assert_eq!(
            starts.len(),
            n,
            "{task}: an attempt started twice: {starts:?}"
        );
    }

    // Dependencies: every window attempt started after its leg's prepare ended.
    for (task, job, _, start, _) in &runs {
        let Some(leg) = task
            .split("/w")
            .next()
            .filter(|_| task.ends_with("/production"))
        else {
            continue;
        };
        let prep = format!("{leg}/prepare");
        let (_, pjob, _, _, pend) = runs
            .iter()
            .find(|r| r.0 == prep)
            .unwrap_or_else(|| panic!("{prep} never ran"));
        let pend = end_of(pjob, *pend);
        assert!(
            *start >= pend,
            "{task} ({job}) started at {start}, before {prep} ended at {pend}"
        );
    }

    // Throttle: never more than THROTTLE elements of one array job running at once.
    let mut by_job: BTreeMap<&str, Vec<(Time, Time)>> = BTreeMap::new();
    for (_, element, _, start, end) in &runs {
        let job = element.split('.').next().unwrap();
        by_job
            .entry(job)
            .or_default()
            .push((*start, end_of(element, *end)));
    }
    let mut widest = 0;
    for (job, spans) in &by_job {
        widest = widest.max(spans.len());
        for (s, _) in spans {
            let at_once = spans.iter().filter(|(a, b)| a <= s && s < b).count();
            assert!(
                at_once <= THROTTLE,
                "job {job}: {at_once} elements running at {s}: {spans:?}"
            );
        }
    }
    assert!(widest > THROTTLE, "no array was wider than the throttle");

    // The same campaign, clean, through the local executor: identical tables.
    let root2 = tmp.path().join("run-local");
    let file2 = tmp.path().join("local.yaml");
    campaign(&file2, &root2, "local", false);
    ok(&legwork(&["submit"], &file2, None));
    ok(&legwork(
        &["watch", "--interval", "0.3", "-q"],
        &file2,
        None,
    ));
    let a = windows(&root);
    assert_eq!(a.len(), 3 * 2 * WINDOWS);
    assert_eq!(a, windows(&root2));
    for w in &a {
        assert!(
            std::fs::read(root.join(w)).unwrap() == std::fs::read(root2.join(w)).unwrap(),
            "{} differs between the Grid Engine and the local run",
            w.display()
        );
    }
    drop(cell);
}
