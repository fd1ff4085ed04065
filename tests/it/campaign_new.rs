//! `legwork new DIR` scaffolds a campaign that checks and expands as it is.

use assert_cmd::Command;

fn legwork() -> Command {
    Command::cargo_bin("legwork").unwrap()
}

#[test]
fn scaffold_checks_and_expands() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("series");
    legwork().arg("new").arg(&dir).assert().success();
    for f in [
        "campaign.yaml",
        "templates/prepare.sh.tera",
        "templates/production.sh.tera",
        "ligands.csv",
        "measured.csv",
    ] {
        assert!(dir.join(f).is_file(), "{f} missing");
    }
    let text = std::fs::read_to_string(dir.join("campaign.yaml")).unwrap();
    for line in text.lines().filter(|l| {
        l.starts_with("templates:") || l.starts_with("ligands:") || l.starts_with("experiment:")
    }) {
        assert!(
            !line.contains(".."),
            "path not moved into the new folder: {line}"
        );
    }
    let out = legwork()
        .args(["check", "--json"])
        .arg(dir.join("campaign.yaml"))
        .assert()
        .success()
        .get_output()
        .clone();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["ok"], true);
    assert!(v["total_tasks"].as_u64().unwrap() > 0);
    legwork()
        .arg("-q")
        .arg("expand")
        .arg(dir.join("campaign.yaml"))
        .assert()
        .success();
    let root = std::path::PathBuf::from(v["root"].as_str().unwrap());
    assert!(root.starts_with(&dir));
    let scripts = walkdir::WalkDir::new(&root)
        .into_iter()
        .filter_map(Result::ok)
        .filter(|e| e.file_name() == "task.sh")
        .count();
    assert_eq!(scripts as u64, v["total_tasks"].as_u64().unwrap());
}

#[test]
fn refuses_a_folder_that_is_not_empty() {
    let tmp = tempfile::tempdir().unwrap();
    std::fs::write(tmp.path().join("keep.txt"), "mine").unwrap();
    let out = legwork()
        .arg("new")
        .arg(tmp.path())
        .assert()
        .code(2)
        .get_output()
        .clone();
    assert!(String::from_utf8_lossy(&out.stderr).contains("not an empty folder"));
    assert_eq!(
        std::fs::read_dir(tmp.path()).unwrap().count(),
        1,
        "nothing written"
    );
}

#[test]
fn an_empty_folder_is_fine() {
    let tmp = tempfile::tempdir().unwrap();
    legwork().arg("new").arg(tmp.path()).assert().success();
    assert!(tmp.path().join("campaign.yaml").is_file());
}
