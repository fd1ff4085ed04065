//! Bringing your own engine: a second engine of the project's own,
//! `tests/engines/toy_engine.py` (Python's standard library only), writes two
//! shapes unlike the window table — rows of energies relative to the sampled
//! state in kJ/mol with `@`/`;` comments, an ignored column and two λ
//! components; and blocks of `label = value` lines in kcal/mol — for campaigns
//! (`tests/fixtures/campaigns/own-engine/`) whose legs have 16 and 12 windows.
//! Each runs end to end through `legwork run` on the local executor and is held
//! to the engine's closed-form free energies; each reader mistake is a clear
//! error before launch, or costs no engine run after it.

use assert_cmd::Command;
use std::collections::HashMap;
use std::path::{Path, PathBuf};

/// kT at 300 K in kJ/mol: R = 8.314462618 J/(mol·K) (CODATA 2018).
const KT: f64 = 8.314_462_618e-3 * 300.0;

/// ΔF of a toy-engine leg from (λ_charge, λ_shape) = (0, 0) to (1, 1): the
/// Gaussian integral of U = a·c + ½K(s)|x − a·d·e₁|² in D = 3 dimensions gives
/// F = a·c − (D/2) kT ln(2π kT/K), so ΔF = c + (3/2) kT ln(k_b/k_a).
fn exact_leg(offset: f64, k_a: f64, k_b: f64) -> f64 {
    offset + 1.5 * KT * (k_b / k_a).ln()
}

/// The legs of the fixture campaigns: bound (16 windows, c = 4, k 100 → 250)
/// and free (12 windows, c = 1.5, k 150 → 200).
fn exact() -> HashMap<&'static str, f64> {
    HashMap::from([
        ("bound", exact_leg(4.0, 100.0, 250.0)),
        ("free", exact_leg(1.5, 150.0, 200.0)),
    ])
}

fn python() -> bool {
    let ok = std::process::Command::new("python3")
        .arg("--version")
        .output()
        .is_ok_and(|o| o.status.success());
    if !ok {
        crate::skip::skipped("python3 is not on PATH; the toy engine needs it");
    }
    ok
}

/// A copy of the fixture folder with the engine beside the campaign files,
/// `edit` applied to campaign file `name`.
fn setup(name: &str, edit: impl Fn(String) -> String) -> (tempfile::TempDir, PathBuf) {
    let tmp = tempfile::tempdir().unwrap();
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/campaigns/own-engine");
    let dir = tmp.path().join("campaign");
    std::fs::create_dir_all(dir.join("templates")).unwrap();
    for f in ["rows.yaml", "blocks.yaml", "templates/production.sh.tera"] {
        std::fs::copy(src.join(f), dir.join(f)).unwrap();
    }
    std::fs::copy(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/engines/toy_engine.py"),
        dir.join("toy_engine.py"),
    )
    .unwrap();
    let file = dir.join(name);
    let text = std::fs::read_to_string(&file).unwrap();
    std::fs::write(&file, edit(text)).unwrap();
    (tmp, file)
}

fn legwork(file: &Path, args: &[&str]) -> std::process::Output {
    Command::cargo_bin("legwork")
        .unwrap()
        .current_dir(file.parent().unwrap())
        .args(args)
        .output()
        .unwrap()
}

fn text(o: &std::process::Output) -> String {
    format!(
        "{}\n{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    )
}

fn engine_runs(file: &Path) -> usize {
    std::fs::read_to_string(file.parent().unwrap().join("engine-runs.log"))
        .map(|s| s.lines().count())
        .unwrap_or(0)
}

/// (dg, sigma) per leg from results/legs.csv.
fn legs(root: &Path) -> HashMap<String, (f64, f64)> {
    let mut r = csv::Reader::from_path(root.join("results/legs.csv")).unwrap();
    let h = r.headers().unwrap().clone();
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let (leg, dg, sigma) = (col("leg"), col("dg"), col("sigma"));
    r.records()
        .map(|rec| {
            let rec = rec.unwrap();
            (
                rec[leg].to_string(),
                (rec[dg].parse().unwrap(), rec[sigma].parse().unwrap()),
            )
        })
        .collect()
}

/// Every leg within 3σ of its closed form (a 3σ miss has probability 0.27 %
/// per leg for a Gaussian error with an honest σ), with a plausible σ.
fn assert_exact(root: &Path) {
    let got = legs(root);
    let truth = exact();
    assert_eq!(got.len(), 2, "{got:?}");
    for (leg, (dg, sigma)) in &got {
        let t = truth[leg.as_str()];
        assert!(*sigma > 0.0 && *sigma < 0.2, "{leg}: implausible σ {sigma}");
        assert!(
            (dg - t).abs() <= 3.0 * sigma,
            "{leg}: ΔG {dg:.4} ± {sigma:.4} kJ/mol vs exact {t:.4}"
        );
    }
}

#[test]
fn rows_end_to_end_match_the_closed_form_and_short_outputs_are_rerun() {
    if !python() {
        return;
    }
    // The free leg's first run of every window stops half-way and exits 0, as an
    // engine cut short would: those 12 outputs are short and must be rerun.
    let (_tmp, file) = setup("rows.yaml", |s| {
        s.replace(
            "vars: { environment: free, offset: 1.5 }",
            "vars: { environment: free, offset: 1.5, short_first_run: true }",
        )
    });
    let out = legwork(&file, &["-q", "run", "rows.yaml"]);
    assert!(out.status.success(), "{}", text(&out));
    assert_eq!(
        engine_runs(&file),
        16 + 12 + 12,
        "every window once, and each short window once more"
    );
    assert_exact(&file.parent().unwrap().join("toy-rows"));
}

#[test]
fn blocks_end_to_end_match_the_closed_form() {
    if !python() {
        return;
    }
    let (_tmp, file) = setup("blocks.yaml", |s| s);
    let check = legwork(&file, &["check", "blocks.yaml"]);
    assert!(check.status.success(), "{}", text(&check));
    let out = legwork(&file, &["-q", "run", "blocks.yaml"]);
    assert!(out.status.success(), "{}", text(&out));
    assert_eq!(engine_runs(&file), 28);
    assert_exact(&file.parent().unwrap().join("toy-blocks"));
}

#[test]
fn legs_with_their_own_readers_read_two_shapes_in_one_campaign() {
    if !python() {
        return;
    }
    // The bound leg's engine writes blocks (absolute energies in kcal/mol) and
    // the leg carries its own `reader:`; the free leg keeps the campaign's rows
    // reader. One `legwork run`, both legs against the closed form.
    let (_tmp, file) = setup("rows.yaml", |s| {
        s.replace(
            "    vars: { environment: bound, offset: 4.0 }\n",
            "    vars: { environment: bound, offset: 4.0, shape: blocks, unit: kcal/mol }\n    \
             reader:\n      format: blocks\n      blocks:\n        start: frame\n        \
             dudl: { charge: slope charge, shape: slope shape }\n        \
             energies: { matching: \"^energy at state \" }\n        energy_unit: kcal/mol\n",
        )
    });
    let text_now = std::fs::read_to_string(&file).unwrap();
    assert!(
        text_now.contains("format: blocks"),
        "the edit did not apply"
    );
    let check = legwork(&file, &["check", "rows.yaml"]);
    assert!(check.status.success(), "{}", text(&check));
    let summary = text(&check);
    assert!(
        summary.contains("blocks") && summary.contains("columns"),
        "check names both readers: {summary}"
    );
    let out = legwork(&file, &["-q", "run", "rows.yaml"]);
    assert!(out.status.success(), "{}", text(&out));
    assert_eq!(engine_runs(&file), 28, "every window once");
    let bound = std::fs::read_to_string(
        file.parent()
            .unwrap()
            .join("toy-rows/toy-a+toy-b/bound/r1/w00/production/out.dat"),
    )
    .unwrap();
    assert!(bound.contains("frame"), "the bound leg wrote blocks");
    assert_exact(&file.parent().unwrap().join("toy-rows"));
}

#[test]
fn a_reader_mistake_costs_no_engine_run() {
    if !python() {
        return;
    }
    // The mistake of a new user: only '@' as a comment prefix, so the engine's
    // ';' lines are taken for the header and the energy pattern finds nothing.
    let good = "comment: [\"@\", \";\"]";
    let (_tmp, file) = setup("rows.yaml", |s| s.replace(good, "comment: [\"@\"]"));
    let first = legwork(&file, &["run", "rows.yaml"]);
    let said = text(&first);
    assert_eq!(first.status.code(), Some(3), "{said}");
    assert_eq!(engine_runs(&file), 28, "no window ran twice:\n{said}");
    assert!(said.contains("[output unreadable] 28 tasks:"), "{said}");
    assert!(
        !said.contains("[output unreadable] 1 task:"),
        "one group for the kind, not one per file:\n{said}"
    );
    assert!(
        said.contains("`legwork resume FILE` re-reads these outputs without running the engine"),
        "{said}"
    );
    // try-reader shows the problem on one of the outputs.
    let one = file
        .parent()
        .unwrap()
        .join("toy-rows/toy-a+toy-b/free/r1/w04/production/out.dat");
    let tried = legwork(
        &file,
        &[
            "try-reader",
            "rows.yaml",
            "--leg",
            "free",
            one.to_str().unwrap(),
        ],
    );
    assert_eq!(tried.status.code(), Some(2), "{}", text(&tried));
    assert!(text(&tried).contains("dE_"), "{}", text(&tried));

    // Fix the reader; the next run re-reads the outputs and runs nothing.
    let fixed = std::fs::read_to_string(&file)
        .unwrap()
        .replace("comment: [\"@\"]", good);
    std::fs::write(&file, fixed).unwrap();
    let status = legwork(&file, &["status", "rows.yaml"]);
    assert!(
        text(&status).contains("output unreadable"),
        "{}",
        text(&status)
    );
    let second = legwork(&file, &["-q", "run", "rows.yaml"]);
    assert!(second.status.success(), "{}", text(&second));
    assert_eq!(engine_runs(&file), 28, "fixing the reader reran nothing");
    assert_exact(&file.parent().unwrap().join("toy-rows"));
}

/// Runs the toy engine directly for every window of the free leg (12 states) in
/// `dir`, with extra flags.
fn engine_files(dir: &Path, shape: &str, unit: &str, extra: &[&str]) -> Vec<PathBuf> {
    engine_files_with(dir, shape, unit, extra, false)
}

/// [`engine_files`]; with `claim`, each file also says which state it sampled.
fn engine_files_with(
    dir: &Path,
    shape: &str,
    unit: &str,
    extra: &[&str],
    claim: bool,
) -> Vec<PathBuf> {
    let charge = "0,0.2,0.4,0.6,0.8,1,1,1,1,1,1,1";
    let shape_l = "0,0,0,0,0,0,0.2,0.4,0.6,0.8,0.9,1";
    let engine = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/engines/toy_engine.py");
    (0..12)
        .map(|j| {
            let out = dir.join(format!("{shape}-{j:02}.txt"));
            let st = std::process::Command::new("python3")
                .arg(&engine)
                .args([
                    "--shape",
                    shape,
                    "--charge",
                    charge,
                    "--shape-lambdas",
                    shape_l,
                ])
                .args(["--state", &j.to_string(), "--k-a", "150", "--k-b", "200"])
                .args(["--offset", "1.5", "--frames", "300", "--unit", unit])
                .args(["--seed", &(1000 + j).to_string(), "--output"])
                .arg(&out)
                .args(extra)
                .args(if claim {
                    vec!["--claim-state".to_string(), j.to_string()]
                } else {
                    vec![]
                })
                .status()
                .unwrap();
            assert!(st.success());
            out
        })
        .collect()
}

fn paths(files: &[PathBuf]) -> Vec<&str> {
    files.iter().map(|p| p.to_str().unwrap()).collect()
}

#[test]
fn try_reader_shows_what_it_understood_and_the_legs_dg() {
    if !python() {
        return;
    }
    let (tmp, file) = setup("rows.yaml", |s| s);
    let files = engine_files(tmp.path(), "rows", "kJ/mol", &[]);
    let mut args = vec!["try-reader", "rows.yaml", "--leg", "free", "--in-order"];
    args.extend(paths(&files));
    let out = legwork(&file, &args);
    let said = text(&out);
    assert!(out.status.success(), "{said}");
    for expect in [
        "header: true (the default): the first non-comment line names the columns and is not a frame",
        "wallclock (column 1)   → ignored",
        "dUdl_shape (column 3)  → dU/dλ of component shape",
        "dE_11 (column 15)      → energy at state 11",
        "the campaign's temperature_K (the file does not say)",
        "kJ/mol, the reader's energy_unit (the file does not say)",
        "first 5 frames in reduced units (kT)",
        "leg free: G(state 11) − G(state 0) in kJ/mol at 300 K",
    ] {
        assert!(said.contains(expect), "missing {expect:?} in:\n{said}");
    }
    // The MBAR line holds the leg's ΔG, within 3σ of the closed form.
    let line = said
        .lines()
        .find(|l| l.trim_start().starts_with("mbar"))
        .unwrap();
    let nums: Vec<f64> = line
        .split_whitespace()
        .filter_map(|w| w.parse().ok())
        .collect();
    let (dg, sigma) = (nums[0], nums[1]);
    let t = exact()["free"];
    assert!((dg - t).abs() <= 3.0 * sigma, "{dg} ± {sigma} vs {t}");

    // The block shape of the same samples (same seeds) gives the same ΔG: the
    // two readers agree to the engine's printed precision.
    let blocks = engine_files(tmp.path(), "blocks", "kcal/mol", &[]);
    let bfile = file.with_file_name("blocks.yaml");
    let mut args = vec!["try-reader", "blocks.yaml", "--leg", "free", "--in-order"];
    args.extend(paths(&blocks));
    let out = legwork(&bfile, &args);
    let bsaid = text(&out);
    assert!(out.status.success(), "{bsaid}");
    let bline = bsaid
        .lines()
        .find(|l| l.trim_start().starts_with("mbar"))
        .unwrap();
    assert_eq!(line, bline, "rows and blocks of the same samples");
}

#[test]
fn estimate_accepts_a_reader_configuration() {
    if !python() {
        return;
    }
    let (tmp, file) = setup("rows.yaml", |s| s);
    // Files that say which state they sampled, every state's λ and the
    // temperature: what a file needs when no campaign is there to say it.
    let files = engine_files_with(
        tmp.path(),
        "rows",
        "kJ/mol",
        &["--declare", "--declare-lambdas"],
        true,
    );
    let mut args = vec![
        "estimate",
        "--reader",
        "rows.yaml",
        "--unit",
        "kJ/mol",
        "--json",
    ];
    args.extend(paths(&files));
    let out = legwork(&file, &args);
    assert!(out.status.success(), "{}", text(&out));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let (dg, sigma) = (
        v["estimates"]["mbar"]["delta_g"].as_f64().unwrap(),
        v["estimates"]["mbar"]["sigma"].as_f64().unwrap(),
    );
    let t = exact()["free"];
    assert!((dg - t).abs() <= 3.0 * sigma, "{dg} ± {sigma} vs {t}");
    // A reader file that is not one: exit 2, naming the file.
    let bad = tmp.path().join("bad.yaml");
    std::fs::write(&bad, "format: colums\n").unwrap();
    let out = legwork(
        &file,
        &[
            "estimate",
            "--reader",
            bad.to_str().unwrap(),
            files[0].to_str().unwrap(),
        ],
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(
        text(&out).contains("bad.yaml: not a reader configuration"),
        "{}",
        text(&out)
    );
}

/// One file of the free leg, window 3, written with `extra` flags.
fn one_window(tmp: &Path, shape: &str, unit: &str, extra: &[&str]) -> PathBuf {
    engine_files(tmp, shape, unit, extra).swap_remove(3)
}

#[test]
fn a_file_that_disagrees_with_the_plan_names_both_values() {
    if !python() {
        return;
    }
    let (tmp, file) = setup("rows.yaml", |s| s);
    let f = one_window(tmp.path(), "rows", "kJ/mol", &["--claim-state", "5"]);
    let out = legwork(
        &file,
        &[
            "try-reader",
            "rows.yaml",
            "--leg",
            "free",
            "--window",
            "3",
            f.to_str().unwrap(),
        ],
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(
        text(&out)
            .contains("the file says it sampled state 5 but the campaign's plan says state 3"),
        "{}",
        text(&out)
    );
}

#[test]
fn unit_and_temperature_conflicts_stop_unless_told_which_wins() {
    if !python() {
        return;
    }
    // The engine declares kcal/mol; the reader says kJ/mol.
    let (tmp, file) = setup("rows.yaml", |s| s);
    let files = engine_files(tmp.path(), "rows", "kcal/mol", &["--declare"]);
    let one = files[3].to_str().unwrap();
    let out = legwork(
        &file,
        &[
            "try-reader",
            "rows.yaml",
            "--leg",
            "free",
            "--window",
            "3",
            one,
        ],
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(
        text(&out)
            .contains("the file says energy_unit kcal/mol but the reader's energy_unit is kJ/mol"),
        "{}",
        text(&out)
    );
    // Told that the file wins: read, and said once for all twelve files.
    let (_t2, told) = setup("rows.yaml", |s| {
        s.replace("reader:\n", "reader:\n  on_conflict: use-file\n")
    });
    let mut args = vec!["try-reader", "rows.yaml", "--leg", "free", "--in-order"];
    args.extend(paths(&files));
    let out = legwork(&told, &args);
    let said = text(&out);
    assert!(out.status.success(), "{said}");
    assert_eq!(
        said.matches("read the files as their own energy_unit kcal/mol, not the reader's kJ/mol")
            .count(),
        1,
        "{said}"
    );
    let line = said
        .lines()
        .find(|l| l.trim_start().starts_with("mbar"))
        .unwrap();
    let nums: Vec<f64> = line
        .split_whitespace()
        .filter_map(|w| w.parse().ok())
        .collect();
    let t = exact()["free"];
    assert!((nums[0] - t).abs() <= 3.0 * nums[1], "{line} vs {t}");

    // The engine ran at 310 K and says so; the campaign says 300 K.
    let hot = one_window(
        tmp.path(),
        "rows",
        "kJ/mol",
        &["--declare", "--temperature", "310"],
    );
    let out = legwork(
        &file,
        &[
            "try-reader",
            "rows.yaml",
            "--leg",
            "free",
            "--window",
            "3",
            hot.to_str().unwrap(),
        ],
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(
        text(&out).contains(
            "the file says temperature_K 310 K but the campaign's temperature_K is 300 K"
        ),
        "{}",
        text(&out)
    );
}

/// `check` refuses reader settings that cannot fit a leg, naming the leg, with a
/// hint and exit code 2 (no engine needed).
#[test]
fn check_verifies_the_reader_against_every_leg() {
    let cases: [(&str, &str, &str); 5] = [
        (
            "dudl: { charge: dUdl_charge, shape: dUdl_shape }",
            "dudl: { charge: dUdl_charge, vdw: dUdl_shape }",
            "leg bound has λ components charge, shape but reader.columns.dudl gives charge, vdw",
        ),
        (
            "energies: { matching: \"^dE_\" }",
            "energies: [dE_0, dE_1, dE_2, dE_3, dE_4, dE_5, dE_6, dE_7, dE_8, dE_9, dE_10, dE_11]",
            "reader.columns.energies selects 12 energies but leg bound has 16 states",
        ),
        (
            "energy_unit: kJ/mol\n",
            "energy_unit: kJ/mol\n    temperature_K: 310\n",
            "reader.columns.temperature_K is 310 K but the campaign's temperature_K is 300 K",
        ),
        (
            "energies_relative: true",
            "energies_relative: true\n    header: false",
            "reader.columns names column 'dUdl_charge' but `header: false`",
        ),
        (
            "format: columns",
            "format: window-table",
            "`reader:` has a `columns` section but its format is window-table",
        ),
    ];
    for (from, to, expect) in cases {
        let (_tmp, file) = setup("rows.yaml", |s| {
            assert!(s.contains(from), "{from}");
            s.replace(from, to)
        });
        let out = legwork(&file, &["check", "rows.yaml"]);
        let said = text(&out);
        assert_eq!(out.status.code(), Some(2), "{to}: {said}");
        assert!(
            said.contains(expect),
            "{to}: expected {expect:?} in\n{said}"
        );
        assert!(said.contains("hint: "), "{said}");
        assert!(
            !file.parent().unwrap().join("toy-rows").exists(),
            "check writes nothing"
        );
    }
}
