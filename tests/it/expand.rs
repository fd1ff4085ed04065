//! Expansion into a plan (pure) and rendering the tree (idempotent, confined,
//! protecting hand edits).

use assert_cmd::Command;
use legwork::campaign::{self, Campaign, LoadOptions};
use legwork::plan::{self, BatchDep, Subject};
use legwork::render::{self, RenderError, RenderOptions};
use proptest::prelude::*;
use std::collections::HashSet;
use std::path::{Path, PathBuf};

fn fixture() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/campaigns/basic")
}

/// A copy of the basic fixture in a temporary folder, loaded with its tree at
/// `<tmp>/tree`.
fn basic() -> (tempfile::TempDir, Campaign) {
    let dir = tempfile::tempdir().unwrap();
    for entry in walkdir::WalkDir::new(fixture()) {
        let entry = entry.unwrap();
        let rel = entry.path().strip_prefix(fixture()).unwrap();
        let to = dir.path().join(rel);
        if entry.file_type().is_dir() {
            std::fs::create_dir_all(&to).unwrap();
        } else {
            std::fs::copy(entry.path(), &to).unwrap();
        }
    }
    let c = load(dir.path());
    (dir, c)
}

fn load(dir: &Path) -> Campaign {
    campaign::load(
        &dir.join("campaign.yaml"),
        &LoadOptions {
            root_override: Some(dir.join("tree")),
        },
    )
    .unwrap()
    .campaign
}

fn write(c: &Campaign, force: bool) -> render::TreeReport {
    let p = plan::expand(c);
    render::write_tree(
        c,
        &p,
        &RenderOptions {
            force,
            dry_run: false,
        },
    )
    .unwrap()
}

/// Runs `legwork VERB <dir>/campaign.yaml`, expects exit 2 (bad input), and
/// returns its standard error.
fn refused(verb: &str, dir: &Path) -> String {
    let out = Command::cargo_bin("legwork")
        .unwrap()
        .arg(verb)
        .arg(dir.join("campaign.yaml"))
        .assert()
        .code(2)
        .get_output()
        .clone();
    String::from_utf8_lossy(&out.stderr).into_owned()
}

#[test]
fn plan_of_the_basic_campaign() {
    let (_d, c) = basic();
    let p = plan::expand(&c);
    // edges × Σ_legs replicas × (windows × per-window stages + per-leg stages)
    // = 2 × (2 × (5 + 1) + 1 × (3 + 1)) = 32
    assert_eq!(p.tasks.len(), 32);
    assert_eq!(p.batches.len(), 2 * (2 + 1) * 2);
    let t = &p.tasks[p
        .task_by_id("lig-1+lig-2/complex/r2/w03/production")
        .unwrap()];
    assert_eq!(t.window, Some(3));
    assert_eq!(t.replica, 2);
    assert_eq!(
        t.dir,
        PathBuf::from("lig-1+lig-2/complex/r2/w03/production")
    );
    assert_eq!(t.resources.cpus, 4);
    assert_eq!(t.resources.memory_mb, 2048);
    assert_eq!(t.resources.walltime_s, 5400);
    assert_eq!(t.frames, Some(100));
    let prep = p.task_by_id("lig-1+lig-2/complex/r2/prepare").unwrap();
    assert_eq!(t.after, vec![prep]);
    let b = &p.batches[t.batch];
    assert_eq!(b.id, "lig-1+lig-2/complex/r2/production");
    assert_eq!(b.after, vec![BatchDep::All(p.tasks[prep].batch)]);
    let windows: Vec<usize> = b
        .tasks
        .iter()
        .map(|&i| p.tasks[i].window.unwrap())
        .collect();
    assert_eq!(windows, vec![0, 1, 2, 3, 4]);
    // λ states and the analysed windows are there for collect.
    assert_eq!(
        p.leg("complex").unwrap().lambdas,
        vec![0.0, 0.25, 0.5, 0.75, 1.0]
    );
    assert_eq!(p.analysed_stage.as_deref(), Some("production"));
    let ws = p
        .windows_of(
            &Subject::Edge {
                a: "lig-2".into(),
                b: "lig-3".into(),
            },
            "solvent",
            1,
        )
        .unwrap();
    assert_eq!(ws.tasks.len(), 3);
    assert_eq!(c.analysed_stage().unwrap().name, "production");
}

#[test]
fn seeds_are_reproducible_and_differ_between_replicas() {
    let (_d, c) = basic();
    let a = plan::expand(&c);
    let b = plan::expand(&c);
    assert_eq!(a, b, "expansion is a pure function of the campaign");
    let r1 = &a.tasks[a
        .task_by_id("lig-1+lig-2/complex/r1/w00/production")
        .unwrap()];
    let r2 = &a.tasks[a
        .task_by_id("lig-1+lig-2/complex/r2/w00/production")
        .unwrap()];
    assert_ne!(r1.seed, r2.seed);
    assert_eq!(r1.seed, plan::task_seed(42, &r1.id));
    // Computed independently with Python's hashlib:
    // struct.unpack('<Q', sha256(struct.pack('<Q', 42) + b'lig-1+lig-2/complex/r2/w03/production').digest()[:8])
    assert_eq!(
        plan::task_seed(42, "lig-1+lig-2/complex/r2/w03/production"),
        3_064_854_014_407_595_500
    );
    let seeds: HashSet<u64> = a.tasks.iter().map(|t| t.seed).collect();
    assert_eq!(seeds.len(), a.tasks.len());
}

#[test]
fn window_labels_widen_past_99_windows() {
    assert_eq!(plan::window_label(7, 12), "w07");
    assert_eq!(plan::window_label(7, 100), "w007");
    assert_eq!(plan::window_label(99, 99), "w99");
}

#[test]
fn elementwise_dependencies_between_per_window_stages() {
    let (dir, _) = basic();
    let f = dir.path().join("campaign.yaml");
    let text = std::fs::read_to_string(&f).unwrap()
        + "  - name: analyse\n    per: window\n    after: [production]\n    template: production.sh.tera\n  - name: summary\n    per: leg\n    after: [analyse]\n    template: prepare.sh.tera\n";
    std::fs::write(&f, text).unwrap();
    let c = load(dir.path());
    let p = plan::expand(&c);
    let a = &p.tasks[p.task_by_id("lig-1+lig-2/complex/r1/w02/analyse").unwrap()];
    assert_eq!(
        a.after,
        vec![p
            .task_by_id("lig-1+lig-2/complex/r1/w02/production")
            .unwrap()]
    );
    let prod_batch = p.tasks[a.after[0]].batch;
    assert_eq!(
        p.batches[a.batch].after,
        vec![BatchDep::Elementwise(prod_batch)]
    );
    let s = &p.tasks[p.task_by_id("lig-1+lig-2/complex/r1/summary").unwrap()];
    assert_eq!(
        s.after.len(),
        5,
        "a per-leg stage after a per-window one waits for every window"
    );
    assert_eq!(
        p.analysed_stage.as_deref(),
        Some("analyse"),
        "the last per-window stage"
    );
    // batches come after those they wait for
    for (i, b) in p.batches.iter().enumerate() {
        for d in &b.after {
            let (BatchDep::All(j) | BatchDep::Elementwise(j)) = *d;
            assert!(j < i);
        }
    }
}

fn campaign_text(ligands: usize, legs: &[(usize, u32)], stages: &[bool], absolute: bool) -> String {
    let mut s = String::from("campaign: p\nseed: 7\ntemplates: templates\nligands:\n");
    for i in 0..ligands {
        s += &format!("  - id: l{i}\n");
    }
    if !absolute {
        s += "edges:\n";
        for i in 1..ligands {
            s += &format!("  - [l{}, l{i}]\n", i - 1);
        }
    } else {
        s += "kind: absolute\n";
    }
    s += "legs:\n";
    for (i, (w, r)) in legs.iter().enumerate() {
        s += &format!("  leg{i}:\n    sign: 1\n    lambdas: {{ count: {w}, spacing: ends }}\n    replicas: {r}\n");
    }
    s += "stages:\n";
    for (i, per_window) in stages.iter().enumerate() {
        let per = if *per_window { "window" } else { "leg" };
        s += &format!("  - name: s{i}\n    per: {per}\n    template: t.sh.tera\n");
        if i > 0 {
            s += &format!("    after: [s{}]\n", i - 1);
        }
    }
    s
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 24, ..ProptestConfig::default() })]

    /// Task count = subjects × Σ_legs replicas × (windows × per-window stages +
    /// per-leg stages), the formula of the issue.
    #[test]
    fn task_counts_match_the_formula(
        ligands in 2usize..6,
        legs in prop::collection::vec((2usize..15, 1u32..4), 1..4),
        stages in prop::collection::vec(any::<bool>(), 1..4),
        absolute in any::<bool>(),
    ) {
        let dir = tempfile::tempdir().unwrap();
        std::fs::create_dir(dir.path().join("templates")).unwrap();
        std::fs::write(dir.path().join("templates/t.sh.tera"), "{{ task.id }}\n").unwrap();
        std::fs::write(dir.path().join("campaign.yaml"), campaign_text(ligands, &legs, &stages, absolute)).unwrap();
        let c = load(dir.path());
        let p = plan::expand(&c);
        let subjects = if absolute { ligands } else { ligands - 1 };
        let per_window = stages.iter().filter(|w| **w).count();
        let per_leg = stages.len() - per_window;
        let expected: usize = subjects * legs.iter().map(|(w, r)| *r as usize * (w * per_window + per_leg)).sum::<usize>();
        prop_assert_eq!(p.tasks.len(), expected);
        prop_assert_eq!(p.batches.len(), subjects * legs.iter().map(|(_, r)| *r as usize).sum::<usize>() * stages.len());
        let ids: HashSet<&str> = p.tasks.iter().map(|t| t.id.as_str()).collect();
        prop_assert_eq!(ids.len(), p.tasks.len());
        let mut covered = 0;
        for (bi, b) in p.batches.iter().enumerate() {
            covered += b.tasks.len();
            for &t in &b.tasks {
                prop_assert_eq!(p.tasks[t].batch, bi);
                for &d in &p.tasks[t].after {
                    prop_assert!(d < t, "dependencies come first");
                }
            }
        }
        prop_assert_eq!(covered, p.tasks.len());
    }
}

#[test]
fn second_expand_rewrites_nothing() {
    let (_d, c) = basic();
    let first = write(&c, false);
    assert_eq!(first.written, 32);
    let f = c.root.join("lig-1+lig-2/complex/r1/w00/production/task.sh");
    let before = std::fs::metadata(&f).unwrap().modified().unwrap();
    let second = write(&c, false);
    assert_eq!((second.written, second.unchanged), (0, 32));
    assert!(second.protected.is_empty());
    assert_eq!(std::fs::metadata(&f).unwrap().modified().unwrap(), before);
    // Also after the fast path is defeated (same inputs, manifest fingerprint gone).
    let m = c.root.join(".legwork/render-manifest.tsv");
    let text = std::fs::read_to_string(&m).unwrap();
    std::fs::write(&m, text.replace("# fingerprint: ", "# fingerprint: x")).unwrap();
    let third = write(&c, false);
    assert_eq!((third.written, third.unchanged), (0, 32));
    assert_eq!(std::fs::metadata(&f).unwrap().modified().unwrap(), before);
}

#[test]
fn edited_file_is_protected_and_listed_until_forced() {
    let (dir, c) = basic();
    write(&c, false);
    let rel = PathBuf::from("lig-2+lig-3/solvent/r1/w01/production/task.sh");
    let f = c.root.join(&rel);
    std::fs::write(&f, "#!/bin/sh\necho my own edit\n").unwrap();
    let r = write(&c, false);
    assert_eq!(r.protected, vec![rel.clone()]);
    assert_eq!(
        std::fs::read_to_string(&f).unwrap(),
        "#!/bin/sh\necho my own edit\n"
    );
    // A template change rewrites the others but still not the edited file.
    let t = dir.path().join("templates/production.sh.tera");
    let text = std::fs::read_to_string(&t).unwrap() + "# changed\n";
    std::fs::write(&t, text).unwrap();
    let c = load(dir.path());
    let r = write(&c, false);
    assert_eq!(r.written, 25);
    assert_eq!(r.protected, vec![rel.clone()]);
    assert!(std::fs::read_to_string(&f).unwrap().contains("my own edit"));
    let r = write(&c, true);
    assert_eq!(r.written, 1);
    assert!(r.protected.is_empty());
    assert!(std::fs::read_to_string(&f)
        .unwrap()
        .ends_with("# changed\n"));
}

#[test]
fn expand_command_lists_protected_files() {
    let (dir, _c) = basic();
    let file = dir.path().join("campaign.yaml");
    let root = dir.path().join("tree");
    Command::cargo_bin("legwork")
        .unwrap()
        .arg("expand")
        .arg(&file)
        .arg("--root")
        .arg(&root)
        .assert()
        .success();
    std::fs::write(
        root.join("lig-1+lig-2/complex/r1/prepare/task.sh"),
        "edited\n",
    )
    .unwrap();
    let out = Command::cargo_bin("legwork")
        .unwrap()
        .arg("expand")
        .arg(&file)
        .arg("--root")
        .arg(&root)
        .assert()
        .success()
        .get_output()
        .clone();
    let stdout = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        stdout.contains("wrote 0 task scripts, 31 unchanged, 1 protected"),
        "{stdout}"
    );
    assert!(
        stderr.contains("lig-1+lig-2/complex/r1/prepare/task.sh") && stderr.contains("--force"),
        "{stderr}"
    );
}

#[test]
fn dry_run_writes_nothing() {
    let (_d, c) = basic();
    let p = plan::expand(&c);
    let r = render::write_tree(
        &c,
        &p,
        &RenderOptions {
            dry_run: true,
            ..Default::default()
        },
    )
    .unwrap();
    assert_eq!(r.written, 32);
    assert!(!c.root.exists());
}

#[test]
fn undefined_variable_names_task_and_template_and_writes_nothing() {
    let (dir, _) = basic();
    std::fs::write(
        dir.path().join("templates/prepare.sh.tera"),
        "echo {{ vars.no_such_thing }}\n",
    )
    .unwrap();
    let c = load(dir.path());
    let p = plan::expand(&c);
    let err = render::write_tree(&c, &p, &RenderOptions::default()).unwrap_err();
    match &err {
        RenderError::Template {
            task,
            template,
            message,
        } => {
            assert!(task.ends_with("/prepare"), "{task}");
            assert!(template.ends_with("prepare.sh.tera"));
            assert!(message.contains("no_such_thing"), "{message}");
        }
        other => panic!("{other}"),
    }
    assert!(!c.root.exists(), "nothing written");
    let stderr = refused("check", dir.path());
    assert!(
        stderr.contains("/prepare: template") && stderr.contains("no_such_thing"),
        "check finds it too: {stderr}"
    );
}

#[test]
fn check_finds_a_template_error_that_only_the_last_window_reaches() {
    // The first task of every stage renders; only window 2 reaches the typo.
    let (dir, _) = basic();
    let path = dir.path().join("templates/production.sh.tera");
    let text = std::fs::read_to_string(&path).unwrap();
    std::fs::write(
        &path,
        format!("{text}{{% if window.index == 2 %}}echo {{{{ vars.no_such_window_thing }}}}{{% endif %}}\n"),
    )
    .unwrap();
    let stderr = refused("check", dir.path());
    assert!(
        stderr.contains("/w02/production: template") && stderr.contains("no_such_window_thing"),
        "{stderr}"
    );
}

#[test]
fn paths_cannot_escape_the_root() {
    let root = Path::new("/tmp/some-root");
    assert!(render::confined(root, Path::new("a+b/leg/r1/prepare/task.sh")).is_ok());
    for bad in [
        "../x/task.sh",
        "a/../../x",
        "/etc/passwd",
        ".legwork/x",
        "./a",
    ] {
        assert!(
            matches!(
                render::confined(root, Path::new(bad)),
                Err(RenderError::Escape(_))
            ),
            "{bad} must be refused"
        );
    }
}

#[test]
fn a_symlink_in_the_tree_is_refused() {
    let (dir, c) = basic();
    let elsewhere = dir.path().join("elsewhere");
    std::fs::create_dir_all(&elsewhere).unwrap();
    std::fs::create_dir_all(&c.root).unwrap();
    std::os::unix::fs::symlink(&elsewhere, c.root.join("lig-1+lig-2")).unwrap();
    let p = plan::expand(&c);
    let err = render::write_tree(&c, &p, &RenderOptions::default()).unwrap_err();
    assert!(matches!(err, RenderError::Escape(_)), "{err}");
    assert_eq!(
        std::fs::read_dir(&elsewhere).unwrap().count(),
        0,
        "nothing written through the link"
    );
}

#[test]
fn ids_that_would_escape_or_inject_are_rejected_by_check() {
    for (bad, why) in [
        ("../../etc", "starts with '.'"),
        ("a/../../b", "'/'"),
        ("a$(touch x)", "'$'"),
        ("a;b", "';'"),
        ("`id`", "'`'"),
        ("-rf", "starts with '-'"),
    ] {
        let (dir, _) = basic();
        std::fs::write(
            dir.path().join("ligands.csv"),
            format!("id\nlig-1\nlig-2\nlig-3\n{bad}\n"),
        )
        .unwrap();
        let stderr = refused("expand", dir.path());
        assert!(
            stderr.contains("ligands.csv:5:1: error: ligand id") && stderr.contains(why),
            "{bad}: {stderr}"
        );
        assert!(
            !dir.path().join("basic").exists(),
            "nothing written for {bad}"
        );
    }
}

#[test]
fn golden_production_script() {
    let (_d, c) = basic();
    write(&c, false);
    let got = std::fs::read_to_string(c.root.join("lig-1+lig-2/complex/r2/w03/production/task.sh"))
        .unwrap();
    let got = got.replace(&c.root.display().to_string(), "<ROOT>");
    let golden = std::fs::read_to_string(fixture().join("golden/production.sh")).unwrap();
    assert_eq!(got, golden);
}

#[test]
fn rerender_for_a_resubmission_is_kept_by_the_next_expand() {
    let (_d, c) = basic();
    write(&c, false);
    let p = plan::expand(&c);
    let i = p
        .task_by_id("lig-1+lig-2/complex/r1/w01/production")
        .unwrap();
    let path = render::render_task(&c, &p, i, 2, true).unwrap();
    assert!(std::fs::read_to_string(&path)
        .unwrap()
        .contains("(attempt 2, restart)"));
    let r = write(&c, false);
    assert_eq!(
        (r.written, r.unchanged),
        (0, 32),
        "expand does not undo the resubmission"
    );
    assert!(r.protected.is_empty());
    assert!(std::fs::read_to_string(&path)
        .unwrap()
        .contains("(attempt 2, restart)"));
}

#[test]
fn context_has_every_documented_variable() {
    let (_d, c) = basic();
    let p = plan::expand(&c);
    let i = p
        .task_by_id("lig-2+lig-3/complex/r1/w04/production")
        .unwrap();
    let ctx = render::task_context(&c, &p, i, 1, false).into_json();
    for key in [
        "campaign",
        "task",
        "subject",
        "edge",
        "ligand_a",
        "ligand_b",
        "leg",
        "replica",
        "window",
        "states",
        "lambdas",
        "components",
        "stage",
        "resources",
        "after",
        "vars",
        "scheduler",
        "legwork",
    ] {
        assert!(ctx.get(key).is_some(), "context lacks {key}");
    }
    assert_eq!(ctx["window"]["lambda"], 1.0);
    assert_eq!(ctx["window"]["lambdas"]["lambda"], 1.0);
    assert_eq!(ctx["states"].as_array().unwrap().len(), 5);
    assert_eq!(ctx["leg"]["sign"], 1);
    assert_eq!(ctx["resources"]["walltime"], "01:30:00");
    assert_eq!(ctx["resources"]["memory_mb"], 2048);
    assert_eq!(ctx["ligand_b"]["vars"]["charge"], 0);
    // merged vars: campaign < leg < edge < stage
    assert_eq!(ctx["vars"]["environment"], "complex");
    assert_eq!(ctx["vars"]["mapping"], "core 1-6");
    assert_eq!(ctx["vars"]["engine_flags"], "--fast --quiet");
    assert_eq!(
        ctx["after"]["prepare"]["id"],
        "lig-2+lig-3/complex/r1/prepare"
    );
    assert_eq!(
        ctx["task"]["dir"],
        c.root
            .join("lig-2+lig-3/complex/r1/w04/production")
            .display()
            .to_string()
    );
    assert_eq!(ctx["campaign"]["temperature_K"], 300.0);
    assert!(ctx["legwork"]["exe"].as_str().unwrap().starts_with('/'));
}

#[test]
fn check_summary_counts_and_hours() {
    let out = Command::cargo_bin("legwork")
        .unwrap()
        .args(["check", "--json"])
        .arg(fixture().join("campaign.yaml"))
        .assert()
        .success()
        .get_output()
        .clone();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["ok"], true);
    assert_eq!(v["ligands"], 3);
    assert_eq!(v["edges"], 2);
    assert_eq!(v["tasks"]["prepare"], 6);
    assert_eq!(v["tasks"]["production"], 26);
    // complex: 2 edges × 2 replicas × 6 tasks × 4 cpus × 1.5 h = 144; solvent:
    // 2 × 1 × 4 × 2 cpus × 0.5 h = 8 → 152 core-hours; GPUs 2 × 2 × 6 × 1.5 = 36.
    assert_eq!(v["core_hours"], 152.0);
    assert_eq!(v["gpu_hours"], 36.0);
}

#[test]
fn absolute_campaign_with_components_and_restraint() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir(dir.path().join("templates")).unwrap();
    std::fs::write(
        dir.path().join("templates/w.sh.tera"),
        "{{ ligand.id }} {{ window.lambdas.vdw }} {{ vars.box }} {{ components | join(sep=\",\") }}\n",
    )
    .unwrap();
    std::fs::write(
        dir.path().join("campaign.yaml"),
        r#"campaign: abs
kind: absolute
unit: kJ/mol
templates: templates
vars: { box: 30 }
ligands:
  - { id: x1, vars: { box: 45 } }
  - x2
legs:
  bound:
    sign: -1
    correction: -1.25
    restraint: { kind: boresch, r0: 5.0, theta_a: 90, theta_b: 60, k_r: 10, k_theta_a: 10, k_theta_b: 10, k_phi_a: 10, k_phi_b: 10, k_phi_c: 10 }
    lambdas:
      components:
        restraint: [0, 1, 1, 1]
        charge: [0, 0, 1, 1]
        vdw: [0, 0, 0, 1]
stages:
  - { name: run, per: window, template: w.sh.tera }
"#,
    )
    .unwrap();
    let c = load(dir.path());
    assert_eq!(c.kind, campaign::CampaignKind::Absolute);
    let leg = &c.legs[0];
    assert_eq!(leg.correction, Some(-1.25));
    assert_eq!(leg.restraint.as_ref().unwrap().theta_b, 60.0);
    assert_eq!(leg.lambdas.components, vec!["restraint", "charge", "vdw"]);
    let p = plan::expand(&c);
    // 2 ligands × 1 leg × 1 replica × 4 windows
    assert_eq!(p.tasks.len(), 8);
    assert_eq!(
        p.leg("bound").unwrap().lambdas,
        vec![0.0, 1.0 / 3.0, 2.0 / 3.0, 1.0]
    );
    write(&c, false);
    let got = std::fs::read_to_string(c.root.join("x1/bound/r1/w03/run/task.sh")).unwrap();
    assert_eq!(
        got, "x1 1 45 restraint,charge,vdw\n",
        "ligand vars win over campaign vars"
    );
    let got = std::fs::read_to_string(c.root.join("x2/bound/r1/w01/run/task.sh")).unwrap();
    assert_eq!(got, "x2 0 30 restraint,charge,vdw\n");
}

#[test]
fn a_file_half_written_by_a_crashed_expand_is_replaced() {
    let (_d, c) = basic();
    write(&c, false);
    let rel = "lig-1+lig-2/solvent/r1/w02/production/task.sh";
    let f = c.root.join(rel);
    let full = std::fs::read_to_string(&f).unwrap();
    // What a crash leaves: a partial file, no manifest entry, the marker.
    std::fs::write(&f, &full[..full.len() / 2]).unwrap();
    let m = c.root.join(".legwork/render-manifest.tsv");
    let kept: String = std::fs::read_to_string(&m)
        .unwrap()
        .lines()
        .filter(|l| !l.starts_with(rel))
        .map(|l| format!("{l}\n"))
        .collect();
    std::fs::write(&m, &kept).unwrap();
    let marker = c.root.join(".legwork/render-in-progress");
    std::fs::write(&marker, "1\n").unwrap();
    let r = write(&c, false);
    assert!(r.protected.is_empty());
    assert_eq!(r.written, 1);
    assert_eq!(std::fs::read_to_string(&f).unwrap(), full);
    assert!(!marker.exists());
    // Without the marker the same unknown file is the user's, and protected.
    std::fs::write(&f, "mine\n").unwrap();
    std::fs::write(&m, &kept).unwrap();
    let r = write(&c, false);
    assert_eq!(r.protected, vec![PathBuf::from(rel)]);
}

#[test]
fn files_of_tasks_no_longer_planned_are_reported_and_kept() {
    let (dir, c) = basic();
    write(&c, false);
    let f = dir.path().join("campaign.yaml");
    let text = std::fs::read_to_string(&f)
        .unwrap()
        .replace("    replicas: 2\n", "    replicas: 1\n");
    std::fs::write(&f, text).unwrap();
    let c = load(dir.path());
    let r = write(&c, false);
    // replica 2 of complex: 2 edges × (5 windows + 1 prepare)
    assert_eq!(r.stale.len(), 12);
    assert!(r
        .stale
        .iter()
        .all(|p| p.to_string_lossy().contains("/complex/r2/")));
    assert!(c.root.join(&r.stale[0]).exists(), "left in place");
    assert_eq!(r.written, 0);
}
