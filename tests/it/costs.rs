//! Cost and time (`status`, `status --json`, progress records, the report and
//! results/costs.csv) on the small demo campaign with one edge's production
//! windows failing their first attempt (demo engine fault injection). The hours
//! are checked against a sum computed here, independently, from the markers the
//! wrapper wrote: (exit time − start time) × the cores (GPUs) the leg requests.

use crate::life_support::{legwork, small_campaign_with, text};
use chrono::{DateTime, Utc};
use std::collections::BTreeMap;
use std::path::Path;

/// An attempt's [start, end].
type Span = (DateTime<Utc>, DateTime<Utc>);

/// Requested per leg in the campaign below: (cpus, gpus).
fn requested(leg: &str) -> (f64, f64) {
    match leg {
        "complex" => (3.0, 1.0),
        _ => (1.0, 0.0),
    }
}

#[derive(Default, Debug)]
struct Sums {
    ok_core: f64,
    ok_gpu: f64,
    failed_core: f64,
    failed_gpu: f64,
    failed_attempts: usize,
}

fn t(s: &str) -> DateTime<Utc> {
    DateTime::parse_from_rfc3339(s).unwrap().with_timezone(&Utc)
}

/// Per leg, from every exit line of every `.attempts.jsonl` under `tree`, and
/// every attempt's [start, end].
fn sums_from_markers(tree: &Path) -> (BTreeMap<String, Sums>, Vec<Span>) {
    let mut by = BTreeMap::<String, Sums>::new();
    let mut spans = Vec::new();
    for e in walkdir::WalkDir::new(tree) {
        let e = e.unwrap();
        if e.file_name() != ".attempts.jsonl" {
            continue;
        }
        let rel = e.path().strip_prefix(tree).unwrap();
        // <subject>/<leg>/r<N>/...
        let leg = rel.iter().nth(1).unwrap().to_str().unwrap().to_string();
        let (cpus, gpus) = requested(&leg);
        let s = by.entry(leg).or_default();
        for line in std::fs::read_to_string(e.path()).unwrap().lines() {
            let v: serde_json::Value = serde_json::from_str(line).unwrap();
            if v.get("code").is_none() {
                continue;
            }
            let (a, b) = (
                t(v["started"].as_str().unwrap()),
                t(v["time"].as_str().unwrap()),
            );
            spans.push((a, b));
            let hours = (b - a).num_milliseconds() as f64 / 3.6e6;
            if v["code"] == 0 && v["signal"].is_null() {
                s.ok_core += hours * cpus;
                s.ok_gpu += hours * gpus;
            } else {
                s.failed_core += hours * cpus;
                s.failed_gpu += hours * gpus;
                s.failed_attempts += 1;
            }
        }
    }
    (by, spans)
}

/// The length of the union of intervals: sort, merge overlapping, add up.
fn union_hours(mut spans: Vec<(DateTime<Utc>, DateTime<Utc>)>) -> f64 {
    spans.sort();
    let mut merged: Vec<(DateTime<Utc>, DateTime<Utc>)> = Vec::new();
    for (a, b) in spans {
        match merged.last_mut() {
            Some(last) if a <= last.1 => last.1 = last.1.max(b),
            _ => merged.push((a, b)),
        }
    }
    merged
        .iter()
        .map(|(a, b)| (*b - *a).num_milliseconds() as f64 / 3.6e6)
        .sum()
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 + 1e-6 * b.abs()
}

fn faulty_campaign(dir: &Path) -> std::path::PathBuf {
    let file = small_campaign_with(dir, "{ fault_fail_after: 150 }", "");
    let text = std::fs::read_to_string(&file).unwrap().replacen(
        "resources: { cpus: 1, walltime: 10m }\n    vars: { environment: complex }",
        "resources: { cpus: 3, gpus: 1, walltime: 10m }\n    vars: { environment: complex }",
        1,
    );
    assert!(text.contains("gpus: 1"));
    std::fs::write(&file, text).unwrap();
    file
}

#[test]
fn hours_per_leg_match_the_markers_with_failed_attempts_apart() {
    let tmp = tempfile::tempdir().unwrap();
    let file = faulty_campaign(tmp.path());
    let f = file.to_str().unwrap();
    let run = legwork(tmp.path(), &["run", f, "--progress-every", "0"]);
    assert!(run.status.success(), "{}", text(&run));
    let err = String::from_utf8_lossy(&run.stderr);
    let last = err.lines().rfind(|l| l.contains(" progress: ")).unwrap();
    assert!(
        last.contains("core-h (") && last.contains("GPU-h ("),
        "{last}"
    );

    let out = legwork(tmp.path(), &["status", f, "--json"]);
    assert!(out.status.success(), "{}", text(&out));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["total"]["done"], 42, "the summary's keys stay: {v}");
    let costs = &v["costs"];
    let (expected, spans) = sums_from_markers(&tmp.path().join("tree"));

    let mut failed_attempts = 0;
    for leg in ["complex", "solvent"] {
        let got = costs["legs"]
            .as_array()
            .unwrap()
            .iter()
            .find(|l| l["leg"] == leg)
            .unwrap();
        let want = &expected[leg];
        let num = |k: &str, h: &str| got[k][h].as_f64().unwrap();
        assert!(
            close(num("succeeded", "core_h"), want.ok_core),
            "{leg}: {got} vs {want:?}"
        );
        assert!(
            close(num("succeeded", "gpu_h"), want.ok_gpu),
            "{leg}: {got} vs {want:?}"
        );
        assert!(
            close(num("failed", "core_h"), want.failed_core),
            "{leg}: {got} vs {want:?}"
        );
        assert!(
            close(num("failed", "gpu_h"), want.failed_gpu),
            "{leg}: {got} vs {want:?}"
        );
        assert_eq!(got["failed"]["attempts"], want.failed_attempts);
        // The faulty edge's six production windows of each leg failed once.
        assert_eq!(want.failed_attempts, 6, "{leg}: {want:?}");
        assert!(want.failed_core > 0.0);
        failed_attempts += want.failed_attempts;
    }
    assert!(expected["complex"].failed_gpu > 0.0 && expected["solvent"].ok_gpu == 0.0);
    let total = &costs["total"];
    let sum = |f: fn(&Sums) -> f64| expected.values().map(f).sum::<f64>();
    assert!(close(
        total["failed"]["core_h"].as_f64().unwrap(),
        sum(|s| s.failed_core)
    ));
    assert!(close(
        total["succeeded"]["core_h"].as_f64().unwrap(),
        sum(|s| s.ok_core)
    ));
    assert_eq!(total["failed"]["attempts"], failed_attempts);
    assert_eq!(total["running"]["attempts"], 0);

    // Rate = tasks done per hour of the union of attempt spans; all done: ETA 0.
    let busy = union_hours(spans);
    assert!(
        close(costs["busy_h"].as_f64().unwrap(), busy),
        "{costs} vs {busy}"
    );
    assert!(close(costs["rate_per_h"].as_f64().unwrap(), 42.0 / busy));
    assert_eq!(costs["eta_h"].as_f64(), Some(0.0));

    let table = legwork(tmp.path(), &["status", f]);
    let table = String::from_utf8_lossy(&table.stdout);
    assert!(
        table.contains("cost so far") && table.contains("every task is done"),
        "{table}"
    );
    let total_row = table.lines().rfind(|l| l.starts_with("total")).unwrap();
    assert!(
        total_row.contains("42/42") && total_row.contains("(12)"),
        "{total_row}"
    );
}

#[test]
fn collect_writes_costs_csv_and_the_report_section() {
    let tmp = tempfile::tempdir().unwrap();
    let file = faulty_campaign(tmp.path());
    let f = file.to_str().unwrap();
    let run = legwork(tmp.path(), &["run", f]);
    assert!(run.status.success(), "{}", text(&run));
    let (expected, _) = sums_from_markers(&tmp.path().join("tree"));
    let rows = crate::life_support::rows(&tmp.path().join("tree/results/costs.csv"));
    let total = rows.iter().find(|r| r["leg"] == "total").unwrap();
    let want: f64 = expected.values().map(|s| s.ok_core + s.failed_core).sum();
    let got: f64 = total["core_h"].parse().unwrap();
    // The CSV prints six decimals.
    assert!((got - want).abs() < 2e-6, "{got} vs {want}");
    assert_eq!(total["failed_attempts"], "12");
    let complex = rows.iter().find(|r| r["leg"] == "complex").unwrap();
    let gpu: f64 = complex["failed_gpu_h"].parse().unwrap();
    assert!((gpu - expected["complex"].failed_gpu).abs() < 2e-6);
    let html = std::fs::read_to_string(tmp.path().join("tree/report/index.html")).unwrap();
    assert!(
        html.contains("<h2 id=\"costs\">Cost and time</h2>"),
        "no cost section"
    );
    assert!(html.contains("failed attempts"));
    // `report` re-renders from summary.json and keeps the section.
    let out = legwork(tmp.path(), &["report", f]);
    assert!(out.status.success(), "{}", text(&out));
    let html = std::fs::read_to_string(tmp.path().join("tree/report/index.html")).unwrap();
    assert!(html.contains("id=\"costs\""));
}
