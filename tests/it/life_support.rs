//! A small demo campaign (invented scenario, demo engine) for the campaign-life
//! tests: three ligands of the demo series on one cycle, one replica per leg,
//! six windows of 400 frames, on the local executor. Paths are absolute, so the
//! campaign file can live in any temporary folder.

use assert_cmd::Command;
use std::path::{Path, PathBuf};

/// Writes `campaign.yaml` into `dir` (with `extra` appended to its top level)
/// and returns its path. The tree goes to `dir/tree`.
pub fn small_campaign(dir: &Path, extra: &str) -> PathBuf {
    small_campaign_with(dir, "{}", extra)
}

/// As [`small_campaign`], with `vars` (a YAML mapping) on the third edge,
/// ork-02+ork-03 (e.g. a demo-engine fault for that edge alone).
pub fn small_campaign_with(dir: &Path, third_edge_vars: &str, extra: &str) -> PathBuf {
    let repo = Path::new(env!("CARGO_MANIFEST_DIR"));
    let text = format!(
        "campaign: life-demo
seed: 11
templates: {templates}
root: tree
scheduler: {{ kind: local, max_parallel: 16, poll_seconds: 0.2, max_attempts: 2 }}
vars: {{ dimensions: 3, phi: 0.9, checkpoint_every: 100 }}
ligands: {ligands}
edges:
  - [ork-01, ork-02]
  - [ork-01, ork-03]
  - {{ a: ork-02, b: ork-03, vars: {third_edge_vars} }}
legs:
  complex:
    sign: 1
    lambdas: {{ count: 6, spacing: ends }}
    resources: {{ cpus: 1, walltime: 10m }}
    vars: {{ environment: complex }}
  solvent:
    sign: -1
    lambdas: {{ count: 6, spacing: ends }}
    resources: {{ cpus: 1, walltime: 10m }}
    vars: {{ environment: solvent }}
stages:
  - {{ name: prepare, per: leg, template: prepare.sh.tera }}
  - {{ name: production, per: window, after: [prepare], template: production.sh.tera,
      output: window.tsv, frames: 400 }}
{extra}
",
        templates = repo.join("templates/demo").display(),
        ligands = repo.join("demo-data/ligands.csv").display(),
    );
    let file = dir.join("campaign.yaml");
    std::fs::write(&file, text).unwrap();
    file
}

/// `legwork ARGS` in `dir`, its output captured (standard output and error are
/// not terminals).
pub fn legwork(dir: &Path, args: &[&str]) -> std::process::Output {
    Command::cargo_bin("legwork")
        .unwrap()
        .current_dir(dir)
        .args(args)
        .output()
        .unwrap()
}

/// Both output streams, for assertion messages.
pub fn text(out: &std::process::Output) -> String {
    format!(
        "status {:?}\n--- stdout\n{}\n--- stderr\n{}",
        out.status.code(),
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    )
}

/// The rows of a CSV file as header → value maps.
pub fn rows(path: &Path) -> Vec<std::collections::HashMap<String, String>> {
    let mut r = csv::Reader::from_path(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let headers = r.headers().unwrap().clone();
    r.records()
        .map(|rec| {
            let rec = rec.unwrap();
            headers
                .iter()
                .zip(rec.iter())
                .map(|(h, v)| (h.to_string(), v.to_string()))
                .collect()
        })
        .collect()
}
