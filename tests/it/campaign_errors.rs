//! Malformed campaign files: every problem is reported with its file, line and
//! a hint, all at once, and nothing is written.

use assert_cmd::Command;
use legwork::campaign::{self, CampaignError, Diagnostic, LoadOptions, Severity};
use std::path::{Path, PathBuf};

/// A valid campaign; each case below changes one or two lines of it.
pub(crate) const BASE: &str = "\
campaign: t
seed: 1
templates: templates
ligands:
  - id: a
  - id: b
  - id: c
edges:
  - [a, b]
  - [b, c]
legs:
  complex:
    sign: 1
    lambdas: [0, 0.5, 1]
    replicas: 1
    resources: { cpus: 1, walltime: 1h, memory: 1G }
stages:
  - name: prepare
    per: leg
    template: prepare.sh.tera
  - name: production
    per: window
    after: [prepare]
    template: production.sh.tera
";

pub(crate) fn setup(yaml: &str) -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let t = dir.path().join("templates");
    std::fs::create_dir(&t).unwrap();
    std::fs::write(t.join("prepare.sh.tera"), "#!/bin/sh\necho {{ task.id }}\n").unwrap();
    std::fs::write(
        t.join("production.sh.tera"),
        "#!/bin/sh\necho {{ task.id }} {{ window.lambda }}\n",
    )
    .unwrap();
    let file = dir.path().join("campaign.yaml");
    std::fs::write(&file, yaml).unwrap();
    (dir, file)
}

pub(crate) fn edited(from: &str, to: &str) -> String {
    assert!(BASE.contains(from), "the base campaign has no '{from}'");
    BASE.replacen(from, to, 1)
}

pub(crate) fn load_err(yaml: &str) -> (tempfile::TempDir, CampaignError) {
    let (dir, file) = setup(yaml);
    let err =
        campaign::load(&file, &LoadOptions::default()).expect_err("campaign should be invalid");
    (dir, err)
}

/// The error must be at `line` of `file_name` and say `needle`; it must also carry
/// a hint, and the whole report must name the file and line as `file:line:`.
pub(crate) fn assert_error(yaml: &str, file_name: &str, line: usize, needle: &str) -> Diagnostic {
    let (_dir, err) = load_err(yaml);
    let found = err
        .errors()
        .find(|d| d.message.contains(needle))
        .unwrap_or_else(|| panic!("no error saying '{needle}' in:\n{err}"))
        .clone();
    assert_eq!(found.line, line, "wrong line for '{needle}':\n{err}");
    assert!(
        found.file.ends_with(file_name),
        "wrong file for '{needle}': {}",
        found.file.display()
    );
    assert!(found.hint.is_some(), "no hint for '{needle}'");
    assert!(found.col >= 1 || found.line == 0);
    let text = err.to_string();
    assert!(
        text.contains(&format!("{file_name}:{line}:")),
        "report does not show {file_name}:{line}:\n{text}"
    );
    assert!(text.contains("hint: "));
    found
}

pub(crate) fn assert_warning(yaml: &str, line: usize, needle: &str) {
    let (_dir, file) = setup(yaml);
    let loaded = campaign::load(&file, &LoadOptions::default()).expect("a warning is not an error");
    let w = loaded
        .warnings
        .iter()
        .find(|d| d.message.contains(needle))
        .unwrap_or_else(|| panic!("no warning saying '{needle}': {:?}", loaded.warnings));
    assert_eq!(w.severity, Severity::Warning);
    assert_eq!(w.line, line);
}

#[test]
fn the_base_campaign_is_valid() {
    let (_dir, file) = setup(BASE);
    let loaded = campaign::load(&file, &LoadOptions::default()).unwrap();
    assert!(loaded.warnings.is_empty(), "{:?}", loaded.warnings);
}

#[test]
fn unknown_top_level_key_suggests_the_right_one() {
    let d = assert_error(
        &edited("seed: 1", "sedd: 1"),
        "campaign.yaml",
        2,
        "unknown key 'sedd'",
    );
    assert!(d.hint.unwrap().contains("did you mean 'seed'"));
}

#[test]
fn unknown_leg_key_suggests_the_right_one() {
    let d = assert_error(
        &edited("    replicas: 1", "    replica: 1"),
        "campaign.yaml",
        15,
        "unknown key 'replica'",
    );
    assert!(d.hint.unwrap().contains("'replicas'"));
}

#[test]
fn repeated_key() {
    assert_error(
        &edited("seed: 1\n", "seed: 1\nseed: 2\n"),
        "campaign.yaml",
        3,
        "appears twice",
    );
}

#[test]
fn wrong_type() {
    assert_error(
        &edited("seed: 1", "seed: [1]"),
        "campaign.yaml",
        2,
        "seed must be a whole number",
    );
}

#[test]
fn yaml_syntax_error() {
    let (_d, err) = load_err(&edited("lambdas: [0, 0.5, 1]", "lambdas: [0, 0.5, 1"));
    let e = err.errors().next().unwrap();
    assert!(e.message.contains("not valid YAML"), "{err}");
    assert!((14..=17).contains(&e.line), "{err}");
}

#[test]
fn duplicate_ligand_id() {
    assert_error(
        &edited("  - id: c", "  - id: a"),
        "campaign.yaml",
        7,
        "duplicate ligand id 'a'",
    );
}

#[test]
fn edge_with_unknown_ligand() {
    let d = assert_error(
        &edited("  - [b, c]", "  - [b, cc]"),
        "campaign.yaml",
        10,
        "unknown ligand 'cc'",
    );
    assert_eq!(d.col, 9);
    assert!(d.hint.unwrap().contains("did you mean 'c'"));
}

#[test]
fn self_edge() {
    assert_error(
        &edited("  - [b, c]", "  - [b, b]"),
        "campaign.yaml",
        10,
        "joins a ligand to itself",
    );
}

#[test]
fn duplicate_edge() {
    assert_error(
        &edited("  - [b, c]", "  - [a, b]"),
        "campaign.yaml",
        10,
        "duplicate edge a+b",
    );
}

#[test]
fn reversed_edge_is_a_warning() {
    let yaml = edited("  - [b, c]", "  - [b, c]\n  - [c, b]");
    assert_warning(&yaml, 11, "reverse");
}

#[test]
fn disconnected_network_is_a_warning() {
    assert_warning(&edited("  - [b, c]\n", ""), 8, "disconnected");
}

#[test]
fn lambda_outside_unit_interval() {
    let d = assert_error(
        &edited("[0, 0.5, 1]", "[0, 1.5, 1]"),
        "campaign.yaml",
        14,
        "outside [0, 1]",
    );
    assert_eq!(d.col, 18, "points at the offending value");
}

#[test]
fn lambda_not_monotonic() {
    assert_error(
        &edited("[0, 0.5, 1]", "[0, 0.7, 0.5, 1]"),
        "campaign.yaml",
        14,
        "not monotonic",
    );
}

#[test]
fn lambda_repeated() {
    assert_error(
        &edited("[0, 0.5, 1]", "[0, 0.5, 0.5, 1]"),
        "campaign.yaml",
        14,
        "repeated",
    );
}

#[test]
fn lambda_fewer_than_two() {
    assert_error(
        &edited("[0, 0.5, 1]", "[0]"),
        "campaign.yaml",
        14,
        "at least 2 states",
    );
    assert_error(
        &edited("[0, 0.5, 1]", "{ count: 1 }"),
        "campaign.yaml",
        14,
        "at least 2 states",
    );
}

#[test]
fn lambda_must_start_at_0_and_end_at_1() {
    assert_error(
        &edited("[0, 0.5, 1]", "[0.1, 0.5, 1]"),
        "campaign.yaml",
        14,
        "first λ is 0.1",
    );
    assert_error(
        &edited("[0, 0.5, 1]", "[0, 0.5, 0.9]"),
        "campaign.yaml",
        14,
        "last λ is 0.9",
    );
}

#[test]
fn components_of_unequal_length() {
    let yaml = edited(
        "[0, 0.5, 1]",
        "{ components: { charge: [0, 1, 1], vdw: [0, 1] } }",
    );
    assert_error(
        &yaml,
        "campaign.yaml",
        14,
        "has 2 values but 'charge' has 3",
    );
}

#[test]
fn unknown_spacing() {
    let d = assert_error(
        &edited("[0, 0.5, 1]", "{ count: 5, spacing: end }"),
        "campaign.yaml",
        14,
        "unknown λ spacing",
    );
    assert!(d.hint.unwrap().contains("'ends'"));
}

#[test]
fn replicas_below_one() {
    assert_error(
        &edited("    replicas: 1", "    replicas: 0"),
        "campaign.yaml",
        15,
        "replicas of leg 'complex' must be a whole number ≥ 1",
    );
}

#[test]
fn sign_must_be_plus_or_minus_one() {
    assert_error(
        &edited("    sign: 1", "    sign: 2"),
        "campaign.yaml",
        13,
        "must be 1 or -1",
    );
}

#[test]
fn unknown_scheduler_kind() {
    let d = assert_error(
        &edited("seed: 1\n", "seed: 1\nscheduler: { kind: slurmm }\n"),
        "campaign.yaml",
        3,
        "unknown scheduler kind 'slurmm'",
    );
    assert!(d.hint.unwrap().contains("did you mean 'slurm'"));
}

#[test]
fn unknown_key_in_a_section_owned_elsewhere() {
    let d = assert_error(
        &edited("seed: 1\n", "seed: 1\nreader: { formatt: columns }\n"),
        "campaign.yaml",
        3,
        "unknown key 'formatt' in reader",
    );
    assert!(d.hint.unwrap().contains("did you mean 'format'"));
}

#[test]
fn wrong_type_in_a_section_owned_elsewhere_points_at_the_value() {
    let yaml = edited(
        "seed: 1\n",
        "seed: 1\nscheduler:\n  kind: slurm\n  max_queued: lots\n",
    );
    let (_d, err) = load_err(&yaml);
    let e = err.errors().next().unwrap();
    assert!(
        e.message
            .contains("scheduler.max_queued must be a whole number from 0 to 18446744073709551615, not a string"),
        "{err}"
    );
    assert!(e.hint.as_deref().unwrap().contains("whole number"), "{err}");
    assert_eq!((e.line, e.col), (5, 15), "{err}");
}

#[test]
fn walltime_that_does_not_parse() {
    assert_error(
        &edited("walltime: 1h", "walltime: 1 hour"),
        "campaign.yaml",
        16,
        "walltime '1 hour' is not understood",
    );
}

#[test]
fn memory_that_does_not_parse() {
    assert_error(
        &edited("memory: 1G", "memory: 1Q"),
        "campaign.yaml",
        16,
        "memory '1Q' is not understood",
    );
}

#[test]
fn missing_template() {
    assert_error(
        &edited("template: production.sh.tera", "template: prod.sh.tera"),
        "campaign.yaml",
        24,
        "does not exist",
    );
}

#[test]
fn template_that_does_not_parse_is_reported_at_its_own_line() {
    let (dir, file) = setup(BASE);
    std::fs::write(
        dir.path().join("templates/production.sh.tera"),
        "#!/bin/sh\n# ok\necho {{ task.id | }}\necho done\n",
    )
    .unwrap();
    let err = campaign::load(&file, &LoadOptions::default()).unwrap_err();
    let d = err.errors().next().unwrap();
    assert!(d.file.ends_with("templates/production.sh.tera"), "{err}");
    assert_eq!(d.line, 3, "{err}");
    assert!(d.message.contains("does not parse"), "{err}");
}

#[test]
fn stage_after_unknown_stage() {
    let d = assert_error(
        &edited("after: [prepare]", "after: [prepair]"),
        "campaign.yaml",
        23,
        "unknown stage 'prepair'",
    );
    assert!(d.hint.unwrap().contains("did you mean 'prepare'"));
}

#[test]
fn stages_in_a_cycle() {
    assert_error(
        &edited("    per: leg\n", "    after: [production]\n"),
        "campaign.yaml",
        19,
        "cycle",
    );
}

#[test]
fn unsafe_ligand_id() {
    let d = assert_error(
        &edited("  - id: c", "  - id: \"c;rm -rf\""),
        "campaign.yaml",
        7,
        "not a safe id",
    );
    assert!(
        d.message.contains("';'") && d.message.contains("space"),
        "{}",
        d.message
    );
}

#[test]
fn unsafe_leg_name() {
    assert_error(
        &edited("  complex:", "  ../complex:"),
        "campaign.yaml",
        12,
        "leg name '../complex' is not a safe id",
    );
}

#[test]
fn template_path_escaping_the_folder() {
    assert_error(
        &edited("template: prepare.sh.tera", "template: ../../etc/passwd"),
        "campaign.yaml",
        20,
        "leaves its folder",
    );
}

#[test]
fn ligand_csv_errors_carry_the_csv_line() {
    let (dir, file) = setup(&edited(
        "ligands:\n  - id: a\n  - id: b\n  - id: c\n",
        "ligands: ligs.csv\n\n\n\n",
    ));
    std::fs::write(
        dir.path().join("ligs.csv"),
        "# invented\nid,charge\na,0\nb,1\na,0\nc,0\n",
    )
    .unwrap();
    let err = campaign::load(&file, &LoadOptions::default()).unwrap_err();
    let d = err
        .errors()
        .find(|d| d.message.contains("duplicate ligand id 'a'"))
        .expect("duplicate reported");
    assert!(d.file.ends_with("ligs.csv"));
    assert_eq!(d.line, 5, "{err}");
}

#[test]
fn every_problem_is_reported_in_one_run() {
    let yaml = edited("seed: 1", "sedd: 1")
        .replace("[0, 0.5, 1]", "[0, 1.5, 1]")
        .replace("after: [prepare]", "after: [nope]");
    let (_d, err) = load_err(&yaml);
    let mut lines: Vec<usize> = err.errors().map(|d| d.line).collect();
    lines.dedup();
    assert_eq!(lines, vec![2, 14, 23], "{err}");
}

#[test]
fn check_exits_2_and_expand_writes_nothing() {
    let (dir, file) = setup(&edited("  - [b, c]", "  - [b, b]"));
    let out = Command::cargo_bin("legwork")
        .unwrap()
        .arg("check")
        .arg(&file)
        .assert()
        .code(2)
        .get_output()
        .clone();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        stderr.contains("campaign.yaml:10:6: error: edge b+b joins a ligand to itself"),
        "{stderr}"
    );
    assert!(stderr.contains("hint:"));
    Command::cargo_bin("legwork")
        .unwrap()
        .arg("expand")
        .arg(&file)
        .assert()
        .code(2);
    assert!(
        !Path::new(&dir.path().join("t")).exists(),
        "nothing may be written"
    );
}

#[test]
fn check_json_lists_the_problems() {
    let (_dir, file) = setup(&edited("    sign: 1", "    sign: 3"));
    let out = Command::cargo_bin("legwork")
        .unwrap()
        .args(["check", "--json"])
        .arg(&file)
        .assert()
        .code(2)
        .get_output()
        .clone();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["ok"], false);
    assert_eq!(v["diagnostics"][0]["line"], 13);
    assert_eq!(v["diagnostics"][0]["severity"], "error");
}

#[test]
fn ligand_yaml_file_errors_carry_its_line() {
    let (dir, file) = setup(&edited(
        "ligands:\n  - id: a\n  - id: b\n  - id: c\n",
        "ligands: ligs.yaml\n\n\n\n",
    ));
    std::fs::write(
        dir.path().join("ligs.yaml"),
        "- a\n- { id: b, vars: { charge: 1 } }\n- { id: \"c d\" }\n",
    )
    .unwrap();
    let err = campaign::load(&file, &LoadOptions::default()).unwrap_err();
    let d = err
        .errors()
        .find(|d| d.message.contains("'c d' is not a safe id"))
        .expect("reported");
    assert!(d.file.ends_with("ligs.yaml"));
    assert_eq!(d.line, 3, "{err}");
}

#[test]
fn edge_csv_errors_carry_the_csv_line() {
    let (dir, file) = setup(&edited(
        "edges:\n  - [a, b]\n  - [b, c]\n",
        "edges: edges.csv\n\n\n",
    ));
    std::fs::write(
        dir.path().join("edges.csv"),
        "a,b,mapping\na,b,m1\nb,q,m2\n",
    )
    .unwrap();
    let err = campaign::load(&file, &LoadOptions::default()).unwrap_err();
    let d = err
        .errors()
        .find(|d| d.message.contains("unknown ligand 'q'"))
        .expect("reported");
    assert!(d.file.ends_with("edges.csv"));
    assert_eq!(d.line, 3, "{err}");
}

#[test]
fn a_stage_with_a_missing_template_still_has_its_after_checked() {
    let yaml = edited("after: [prepare]", "after: [prepair]").replacen(
        "template: production.sh.tera",
        "template: prod.sh.tera",
        1,
    );
    let (_dir, err) = load_err(&yaml);
    let messages: Vec<&str> = err.errors().map(|d| d.message.as_str()).collect();
    assert!(
        messages
            .iter()
            .any(|m| m.contains("unknown stage 'prepair'")),
        "{err}"
    );
    assert!(messages.iter().any(|m| m.contains("prod.sh.tera")), "{err}");
}

#[test]
fn leg_frames_and_window_frames_are_checked_where_they_are() {
    let leg = "    replicas: 1\n";
    // Line 15 is the leg's `replicas:`; the new keys follow it.
    assert_error(
        &edited(leg, "    replicas: 1\n    frames: 0\n"),
        "campaign.yaml",
        16,
        "frames of leg 'complex' must be at least 1",
    );
    assert_error(
        &edited(
            leg,
            "    replicas: 1\n    window_frames: { 1: 500, 3: 500 }\n",
        ),
        "campaign.yaml",
        16,
        "window 3 does not exist",
    );
    assert_error(
        &edited(leg, "    replicas: 1\n    window_frames: { last: 500 }\n"),
        "campaign.yaml",
        16,
        "`last` is not a window number",
    );
    assert_error(
        &edited(leg, "    replicas: 1\n    window_frames: [500]\n"),
        "campaign.yaml",
        16,
        "must map window numbers to frames",
    );
}

#[test]
fn a_windows_frames_override_its_legs_which_override_the_stages() {
    let yaml = edited(
        "    replicas: 1\n",
        "    replicas: 1\n    frames: 800\n    window_frames: { 2: 1200 }\n",
    )
    .replace(
        "template: production.sh.tera\n",
        "template: production.sh.tera\n    output: w.tsv\n    frames: 500\n",
    );
    let (_dir, file) = setup(&yaml);
    let loaded = campaign::load(&file, &LoadOptions::default()).unwrap();
    let plan = legwork::plan::expand(&loaded.campaign);
    let frames = |id: &str| plan.tasks[plan.task_by_id(id).unwrap()].frames;
    assert_eq!(frames("a+b/complex/r1/w00/production"), Some(800));
    assert_eq!(frames("a+b/complex/r1/w01/production"), Some(800));
    assert_eq!(frames("a+b/complex/r1/w02/production"), Some(1200));
    // A per-leg stage keeps its own (none).
    assert_eq!(frames("a+b/complex/r1/prepare"), None);
}
