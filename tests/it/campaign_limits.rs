//! Hostile or absurd campaign input: alias bombs, numbers beyond their type, ids
//! too long for a path, templates outside their folder, resources and scheduler
//! settings out of range, a byte-order mark, and template variables that would
//! reach a shell unquoted. Each is refused (or warned about) by `check` with its
//! file, line and a hint, before anything is written.

use super::campaign_errors::{assert_error, edited, load_err, setup, BASE};
use assert_cmd::Command;
use legwork::campaign::{self, LoadOptions, Severity};

#[test]
fn replicas_beyond_u32_are_an_error_not_one_replica() {
    let d = assert_error(
        &edited("    replicas: 1", "    replicas: 4294967297"),
        "campaign.yaml",
        15,
        "must be a whole number from 0 to 4294967295, not 4294967297",
    );
    assert_eq!(d.col, 15);
}

#[test]
fn an_alias_bomb_fails_at_the_alias_that_passes_the_limit() {
    // 35 lines: each anchor holds ten aliases of the one before, so the last one
    // would stand for 10^34 values if expanded.
    let mut bomb = String::from("vars:\n  a0: &a0 [x, x, x, x, x, x, x, x, x, x]\n");
    for i in 1..34 {
        let list = vec![format!("*a{}", i - 1); 10].join(", ");
        bomb.push_str(&format!("  a{i}: &a{i} [{list}]\n"));
    }
    assert_eq!(bomb.lines().count(), 35);
    let yaml = edited("seed: 1\n", &format!("seed: 1\n{bomb}"));
    let (_d, err) = load_err(&yaml);
    let e = err.errors().next().unwrap();
    assert!(e.message.contains("not valid YAML"), "{err}");
    assert!(e.message.contains("aliases"), "{err}");
    // a0 is line 4; a1…a3 copy 110, 1110 and 11 110 values; a4 (line 8) passes 100 000.
    assert_eq!(e.line, 8, "{err}");
    assert!(e.hint.is_some());
}

#[test]
fn a_300_character_id_fails_in_check_and_expand_writes_nothing() {
    let long = "x".repeat(300);
    let (dir, file) = setup(&BASE.replace("  - id: c\n", &format!("  - id: c\n  - id: {long}\n")));
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
        stderr.contains("campaign.yaml:8:") && stderr.contains("300 characters long, more than 64"),
        "{stderr}"
    );
    assert!(stderr.contains("hint:") && stderr.contains("at most 64 characters"));
    Command::cargo_bin("legwork")
        .unwrap()
        .arg("expand")
        .arg(&file)
        .assert()
        .code(2);
    assert!(!dir.path().join("t").exists(), "nothing may be written");
}

#[test]
fn a_batch_template_outside_the_template_folder_is_refused() {
    let d = assert_error(
        &edited(
            "seed: 1\n",
            "seed: 1\nscheduler: { kind: slurm, batch_template: ../../../../etc/passwd }\n",
        ),
        "campaign.yaml",
        3,
        "scheduler.batch_template: '../../../../etc/passwd' leaves its folder",
    );
    assert!(d.hint.unwrap().contains("inside the template folder"));
}

#[test]
fn a_batch_template_that_does_not_exist_is_refused() {
    assert_error(
        &edited(
            "seed: 1\n",
            "seed: 1\nscheduler: { kind: slurm, batch_template: mine.sh.tera }\n",
        ),
        "campaign.yaml",
        3,
        "mine.sh.tera does not exist",
    );
}

#[test]
fn absurd_resources_are_refused_with_the_allowed_range() {
    let d = assert_error(
        &edited("{ cpus: 1,", "{ cpus: 1000000000,"),
        "campaign.yaml",
        16,
        "cpus of leg 'complex' = 1000000000 is out of range",
    );
    assert_eq!(d.hint.unwrap(), "allowed: 1 to 100000");
    let d = assert_error(
        &edited("walltime: 1h", "walltime: 99999999d"),
        "campaign.yaml",
        16,
        "walltime '99999999d' of leg 'complex' is longer than a year",
    );
    assert!(d.hint.unwrap().contains("1s to 365d"));
    let d = assert_error(
        &edited("{ cpus: 1,", "{ cpus: 1, gpus: -1,"),
        "campaign.yaml",
        16,
        "gpus in resources of leg 'complex' must be a whole number from 0 to 4294967295, not -1",
    );
    assert!(d.col > 1);
}

#[test]
fn scheduler_settings_out_of_range_are_each_reported() {
    let yaml = edited(
        "seed: 1\n",
        "seed: 1\nscheduler:\n  kind: slurm\n  walltime_factor: -2\n  poll_seconds: 0\n  max_attempts: 0\n",
    );
    let (_d, err) = load_err(&yaml);
    let find = |needle: &str| {
        err.errors()
            .find(|d| d.message.contains(needle))
            .unwrap_or_else(|| panic!("no '{needle}' in:\n{err}"))
            .clone()
    };
    let f = find("scheduler.walltime_factor = -2 is out of range");
    assert_eq!((f.line, f.hint.as_deref()), (5, Some("allowed: 1 to 10")));
    let p = find("scheduler.poll_seconds = 0 is out of range");
    assert_eq!((p.line, p.hint.as_deref()), (6, Some("allowed: 1 to 3600")));
    let a = find("scheduler.max_attempts = 0 is out of range");
    assert_eq!((a.line, a.hint.as_deref()), (7, Some("allowed: 1 to 100")));
}

#[test]
fn the_local_executor_may_poll_faster() {
    let yaml = edited(
        "seed: 1\n",
        "seed: 1\nscheduler: { kind: local, poll_seconds: 0.5 }\n",
    );
    let (_d, file) = setup(&yaml);
    let c = campaign::load(&file, &LoadOptions::default())
        .unwrap()
        .campaign;
    assert_eq!(c.scheduler.poll_seconds, 0.5);
    let d = assert_error(
        &edited(
            "seed: 1\n",
            "seed: 1\nscheduler: { kind: local, poll_seconds: 0 }\n",
        ),
        "campaign.yaml",
        3,
        "scheduler.poll_seconds = 0 is out of range",
    );
    assert_eq!(d.hint.unwrap(), "allowed: 0.1 to 3600");
}

#[test]
fn a_key_given_twice_in_a_typed_section_is_reported() {
    assert_error(
        &edited(
            "seed: 1\n",
            "seed: 1\nscheduler:\n  kind: slurm\n  max_queued: 5\n  max_queued: 6\n",
        ),
        "campaign.yaml",
        6,
        "key 'max_queued' appears twice in scheduler",
    );
}

#[test]
fn a_byte_order_mark_at_the_start_is_ignored() {
    let (_d, file) = setup(&format!("\u{feff}{BASE}"));
    let loaded = campaign::load(&file, &LoadOptions::default()).unwrap();
    assert_eq!(loaded.campaign.name, "t");
    assert!(loaded.warnings.is_empty(), "{:?}", loaded.warnings);
}

#[test]
fn a_variable_reaching_the_shell_unquoted_draws_a_warning_at_its_template_line() {
    let yaml = BASE
        .replace(
            "  - id: a\n",
            "  - { id: a, vars: { smiles: \"$(touch x)\" } }\n",
        )
        .replace("  - id: b\n", "  - { id: b, vars: { smiles: CCO } }\n")
        .replace("  - id: c\n", "  - { id: c, vars: { smiles: CCN } }\n");
    let (dir, file) = setup(&yaml);
    let template = dir.path().join("templates/production.sh.tera");
    std::fs::write(
        &template,
        "#!/bin/sh\n# {{ ligand_a.vars.smiles }} in a comment runs nothing\necho {{ task.id }}\n\
         run --a {{ ligand_a.vars.smiles }} --b {{ ligand_b.vars.smiles | shell_quote }}\n",
    )
    .unwrap();
    let loaded = campaign::load(&file, &LoadOptions::default()).unwrap();
    assert_eq!(loaded.warnings.len(), 1, "{:?}", loaded.warnings);
    let w = &loaded.warnings[0];
    assert_eq!(w.severity, Severity::Warning);
    assert_eq!(w.file, template);
    assert_eq!((w.line, w.col), (4, 9));
    assert!(
        w.message.contains("ligand_a.vars.smiles") && w.message.contains("$(touch x)"),
        "{w}"
    );
    assert!(w.hint.as_deref().unwrap().contains("| shell_quote"));
    let out = Command::cargo_bin("legwork")
        .unwrap()
        .arg("check")
        .arg(&file)
        .assert()
        .success()
        .get_output()
        .clone();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        stderr.contains("production.sh.tera:4:9: warning: ligand_a.vars.smiles"),
        "{stderr}"
    );
}

#[test]
fn quoted_or_harmless_values_draw_no_warning() {
    let yaml = BASE.replace(
        "  - id: a\n",
        "  - { id: a, vars: { smiles: CCO, flags: \"--fast --quiet\" } }\n",
    );
    let (dir, file) = setup(&yaml);
    std::fs::write(
        dir.path().join("templates/production.sh.tera"),
        "#!/bin/sh\necho {{ task.id }}\nrun {{ ligand_a.vars.smiles }} {{ ligand_a.vars.flags }}\n",
    )
    .unwrap();
    let loaded = campaign::load(&file, &LoadOptions::default()).unwrap();
    assert!(loaded.warnings.is_empty(), "{:?}", loaded.warnings);
}

#[test]
fn a_zero_force_constant_is_refused_before_the_campaign_runs() {
    let yaml = edited(
        "    replicas: 1\n",
        "    replicas: 1\n    restraint:\n      kind: boresch\n      r0: 5.0\n      theta_a: 90\n      theta_b: 90\n      k_r: 0\n      k_theta_a: 10\n      k_theta_b: 10\n      k_phi_a: 10\n      k_phi_b: 10\n      k_phi_c: 10\n",
    );
    let d = assert_error(&yaml, "campaign.yaml", 21, "k_r = 0 is outside (0, inf)");
    assert!(d.hint.unwrap().contains("must be positive"));
    let d = assert_error(
        &yaml.replace("      k_r: 0\n", "      k_rr: 10\n"),
        "campaign.yaml",
        21,
        "unknown key 'k_rr' in restraint of leg 'complex'",
    );
    assert!(d.hint.unwrap().contains("did you mean 'k_r'"));
}

#[test]
fn a_leg_may_bring_its_own_reader() {
    let yaml = edited(
        "    replicas: 1\n",
        "    replicas: 1\n    reader: { format: columns, columns: { energy_unit: kJ/mol, energies: [1, 2, 3] } }\n",
    );
    let (_d, file) = setup(&yaml);
    let c = campaign::load(&file, &LoadOptions::default())
        .unwrap()
        .campaign;
    let leg = c.leg("complex").unwrap();
    let own = leg.reader.as_ref().expect("the leg's reader");
    assert_eq!(c.reader_for(leg), own);
    assert_ne!(c.reader_for(leg), &c.reader);
    let d = assert_error(
        &yaml.replace("{ format: columns,", "{ formt: columns,"),
        "campaign.yaml",
        16,
        "unknown key 'formt' in reader of leg 'complex'",
    );
    assert!(d.hint.unwrap().contains("did you mean 'format'"));
}
