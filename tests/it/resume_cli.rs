//! A task that used all its attempts stays failed until the user allows more:
//! `legwork run` stops with exit 3 naming the way out, and after
//! `legwork resume --extra-attempts 1` a second `legwork run` finishes.

use assert_cmd::Command;
use std::path::Path;

#[test]
fn exhausted_tasks_come_back_with_extra_attempts() {
    let repo = Path::new(env!("CARGO_MANIFEST_DIR"));
    let demo = std::fs::read_to_string(repo.join("campaigns/demo.yaml")).unwrap();
    let edges_start = demo.find("\nedges:").unwrap();
    let legs_start = demo.find("\nlegs:").unwrap();
    // One edge, one attempt per task, and every production window failing on its
    // first attempt (the demo engine's fail-after fault fires on attempt 1 only).
    let yaml = format!(
        "{}\nedges:\n  - [ork-01, ork-02]\n{}",
        &demo[..edges_start],
        &demo[legs_start..]
    )
    .replace(
        "templates: ../templates/demo",
        &format!("templates: {}", repo.join("templates/demo").display()),
    )
    .replace(
        "ligands: ../demo-data/ligands.csv",
        &format!("ligands: {}", repo.join("demo-data/ligands.csv").display()),
    )
    .replace(
        "experiment: ../demo-data/measured.csv",
        &format!(
            "experiment: {}",
            repo.join("demo-data/measured.csv").display()
        ),
    )
    .replace("max_attempts: 3", "max_attempts: 1")
    .replace(
        "  checkpoint_every: 500",
        "  checkpoint_every: 500\n  fault_fail_after: 100",
    );
    assert!(yaml.contains("fault_fail_after: 100") && yaml.contains("max_attempts: 1"));
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("one-edge.yaml");
    std::fs::write(&file, yaml).unwrap();
    let legwork = || {
        let mut c = Command::cargo_bin("legwork").unwrap();
        c.arg("-q");
        c
    };

    let first = legwork().arg("run").arg(&file).output().unwrap();
    assert_eq!(first.status.code(), Some(3), "{:?}", first);
    let resume = legwork()
        .args(["resume", "--extra-attempts", "1"])
        .arg(&file)
        .output()
        .unwrap();
    assert!(resume.status.success(), "{:?}", resume);
    let second = legwork().arg("run").arg(&file).output().unwrap();
    assert!(second.status.success(), "{:?}", second);
    let edges = std::fs::read_to_string(dir.path().join("orrin-demo/results/edges.csv")).unwrap();
    assert!(edges.contains("ork-01+ork-02"), "{edges}");
}
