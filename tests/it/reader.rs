//! Reading window output: the native window table with no configuration, the
//! configurable column reader, and the errors a user gets for bad files.

use legwork::collect::config::{
    ColumnRef, ColumnsConfig, DudlColumns, Energies, OnConflict, ReaderFormat,
};
use legwork::collect::{
    read_leg, read_window, read_window_with, validate_output, ReadError, ReaderConfig, WindowHint,
};
use legwork::units::EnergyUnit;
use std::path::{Path, PathBuf};

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn table(state: usize, lambdas: &str, unit: &str, body: &str) -> String {
    let k = lambdas.split_whitespace().count();
    let cols: Vec<String> = (0..k).map(|j| format!("u{j}")).collect();
    format!(
        "# legwork window table 1\n# temperature_K: 300\n# energy_unit: {unit}\n# state: {state}\n# lambdas: {lambdas}\ntime\tdudl\t{}\n{body}",
        cols.join("\t")
    )
}

#[test]
fn window_table_converts_energies_to_kt() {
    let d = tempfile::tempdir().unwrap();
    let p = write(
        d.path(),
        "w.tsv",
        &table(
            1,
            "0 0.5 1",
            "kJ/mol",
            "0\t2.5\t10\t20\t30\n1\t-1\t11\t21\t31\n",
        ),
    );
    let w = read_window(&p, &ReaderConfig::default()).unwrap();
    // kT at 300 K = R·300 with R = 8.314462618 J/(mol·K) (CODATA 2018).
    let kt = 8.314_462_618e-3 * 300.0;
    assert_eq!((w.state, w.frames, w.n_states), (1, 2, 3));
    assert_eq!(w.lambdas, vec![0.0, 0.5, 1.0]);
    assert!((w.row(1)[2] - 31.0 / kt).abs() < 1e-12);
    assert!((w.dudl_at(0, 0) - 2.5 / kt).abs() < 1e-12);
    let kcal = write(
        d.path(),
        "c.tsv",
        &table(0, "0 1", "kcal/mol", "0\t0\t1\t2\n"),
    );
    let w = read_window(&kcal, &ReaderConfig::default()).unwrap();
    // 1 kcal = 4.184 kJ (thermochemical calorie, NIST SP 811).
    assert!((w.row(0)[1] - 2.0 * 4.184 / kt).abs() < 1e-12);
}

#[test]
fn truncated_last_line_is_dropped_with_a_warning() {
    let d = tempfile::tempdir().unwrap();
    let p = write(
        d.path(),
        "w.tsv",
        &table(0, "0 1", "kT", "0\t1\t0\t1\n1\t1\t0\t1.5\n2\t1\t0\t1."),
    );
    let w = read_window(&p, &ReaderConfig::default()).unwrap();
    assert_eq!(w.frames, 2);
    assert!(w.warnings[0].contains("w.tsv:9"), "{:?}", w.warnings);
}

#[test]
fn non_finite_values_name_file_line_column_and_header() {
    let d = tempfile::tempdir().unwrap();
    let p = write(
        d.path(),
        "w.tsv",
        &table(0, "0 1", "kT", "0\t1\t0\t1\n1\t1\t0\tnan\n"),
    );
    let e = read_window(&p, &ReaderConfig::default())
        .unwrap_err()
        .to_string();
    assert!(e.contains("w.tsv:8:7: column 'u1'"), "{e}");
    assert!(e.contains("not finite"), "{e}");
    let p = write(d.path(), "x.tsv", &table(0, "0 1", "kT", "0\t1x\t0\t1\n"));
    let e = read_window(&p, &ReaderConfig::default())
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("x.tsv:7:3: column 'dudl': '1x' is not a number"),
        "{e}"
    );
}

#[test]
fn missing_columns_and_metadata_are_clear_errors() {
    let d = tempfile::tempdir().unwrap();
    let text = "# legwork window table 1\n# temperature_K: 300\n# energy_unit: kT\n# state: 0\n# lambdas: 0 1\ntime\tdudl\tu0\n0\t1\t2\n";
    let e = read_window(&write(d.path(), "a.tsv", text), &ReaderConfig::default())
        .unwrap_err()
        .to_string();
    assert!(e.contains("no column 'u1'"), "{e}");
    let text = "# legwork window table 1\n# temperature_K: 300\n# energy_unit: kT\n# lambdas: 0 1\ntime\tdudl\tu0\tu1\n0\t1\t2\t3\n";
    let e = read_window(&write(d.path(), "b.tsv", text), &ReaderConfig::default())
        .unwrap_err()
        .to_string();
    assert!(e.contains("# state: N"), "{e}");
    let e = read_window(
        &write(d.path(), "c.tsv", "time u0\n1 2\n"),
        &ReaderConfig::default(),
    )
    .unwrap_err()
    .to_string();
    assert!(
        e.contains("not a legwork window table") && e.contains("configure a reader"),
        "{e}"
    );
    let p = write(d.path(), "short.tsv", &table(0, "0 1", "kT", "0\t1\t0\n"));
    let e = read_window(&p, &ReaderConfig::default())
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("short.tsv:7:") && e.contains("missing 'u1'"),
        "{e}"
    );
}

#[test]
fn leg_is_sorted_and_checked_for_consistency() {
    let d = tempfile::tempdir().unwrap();
    let a = write(d.path(), "a.tsv", &table(1, "0 1", "kT", "0\t1\t0\t1\n"));
    let b = write(d.path(), "b.tsv", &table(0, "0 1", "kT", "0\t1\t0\t1\n"));
    let leg = read_leg(&[a.clone(), b.clone()], &ReaderConfig::default()).unwrap();
    assert_eq!(leg.windows[0].source, b);
    assert_eq!(leg.windows[1].state, 1);

    let c = write(d.path(), "c.tsv", &table(0, "0 0.7", "kT", "0\t1\t0\t1\n"));
    let e = read_leg(&[a.clone(), c], &ReaderConfig::default()).unwrap_err();
    assert!(
        matches!(e, ReadError::Leg(_)) && e.to_string().contains("disagree on the λ list"),
        "{e}"
    );

    let e = read_leg(std::slice::from_ref(&a), &ReaderConfig::default())
        .unwrap_err()
        .to_string();
    assert!(e.contains("state(s) [0]"), "{e}");

    let empty = write(d.path(), "e.tsv", &table(0, "0 1", "kT", ""));
    let e = read_leg(&[a.clone(), empty], &ReaderConfig::default())
        .unwrap_err()
        .to_string();
    assert!(e.contains("e.tsv: no data lines"), "{e}");

    let a2 = write(d.path(), "a2.tsv", &table(1, "0 1", "kT", "0\t1\t0\t1\n"));
    let e = read_leg(&[a, a2, b], &ReaderConfig::default())
        .unwrap_err()
        .to_string();
    assert!(e.contains("both sampled state 1"), "{e}");
}

#[test]
fn column_reader_by_name_and_index_with_relative_energies() {
    let d = tempfile::tempdir().unwrap();
    let text = "@ produced by some engine\n@ state: 1\nstep  dE_lo  dE_self dE_hi  dvdl\n1  0.5  0  -0.25  3\n2  0.75 0  -0.5   4\n";
    let p = write(d.path(), "out.dat", text);
    let cfg = ReaderConfig {
        format: ReaderFormat::Columns,
        columns: Some(ColumnsConfig {
            comment: vec!["@".into()],
            delimiter: None,
            header: true,
            time: Some(ColumnRef::Name("step".into())),
            dudl: Some(DudlColumns::One(ColumnRef::Index(4))),
            energies: Energies::List(vec![
                ColumnRef::Name("dE_lo".into()),
                ColumnRef::Index(2),
                ColumnRef::Name("dE_hi".into()),
            ]),
            energies_relative: true,
            energy_unit: EnergyUnit::KcalPerMol,
            temperature_k: Some(310.0),
        }),
        ..Default::default()
    };
    let w = read_window(&p, &cfg).unwrap();
    let kt_kcal = 8.314_462_618e-3 * 310.0 / 4.184;
    assert_eq!((w.state, w.frames, w.n_states), (1, 2, 3));
    assert!((w.row(1)[2] + 0.5 / kt_kcal).abs() < 1e-12);
    assert!((w.dudl_at(1, 0) - 4.0 / kt_kcal).abs() < 1e-12);
    assert!(w.warnings.iter().any(|m| m.contains("no λ list")));
    let bad = write(
        d.path(),
        "bad.dat",
        "@ state: 1\nstep dE_lo dE_self dE_hi dvdl\n1 0.5 0 oops 3\n",
    );
    let e = read_window(&bad, &cfg).unwrap_err().to_string();
    assert!(
        e.contains("bad.dat:3:9: column 'dE_hi': 'oops' is not a number"),
        "{e}"
    );
}

#[test]
fn validate_output_counts_frames() {
    let d = tempfile::tempdir().unwrap();
    let p = write(
        d.path(),
        "w.tsv",
        &table(0, "0 1", "kT", "0\t1\t0\t1\n1\t1\t0\t1\n"),
    );
    assert_eq!(
        validate_output(&p, &ReaderConfig::default(), Some(2)).unwrap(),
        2
    );
    let e = validate_output(&p, &ReaderConfig::default(), Some(3)).unwrap_err();
    assert!(matches!(
        e,
        ReadError::TooFewFrames {
            frames: 2,
            min: 3,
            ..
        }
    ));
}

fn hint(state: usize, lambdas: &[f64], components: &[(&str, &[f64])]) -> WindowHint {
    WindowHint {
        state: Some(state),
        lambdas: Some(lambdas.to_vec()),
        component_lambdas: (!components.is_empty()).then(|| {
            components
                .iter()
                .map(|(n, l)| (n.to_string(), l.to_vec()))
                .collect()
        }),
        campaign_temperature_k: Some(300.0),
        what: Some("leg test".into()),
        ..Default::default()
    }
}

fn yaml_reader(text: &str) -> ReaderConfig {
    let d = tempfile::tempdir().unwrap();
    let path = d.path().join("reader.yaml");
    std::fs::write(&path, text).unwrap();
    legwork::collect::config::load_reader_file(&path).unwrap()
}

const BLOCKS: &str = "reader:\n  format: blocks\n  blocks:\n    start: frame\n    dudl: slope\n    energies: { matching: \"^energy \" }\n    energy_unit: kT\n";

#[test]
fn blocks_reader_reads_labelled_frames_and_reports_bad_ones() {
    let d = tempfile::tempdir().unwrap();
    let cfg = yaml_reader(BLOCKS);
    let h = hint(1, &[0.0, 1.0], &[]);
    let good = "# banner\nsome engine banner line 7\nframe 0\n  energy 0 = 1.5\n  energy 1 = 0.25\n  slope: 2\n  other 9\nframe 1\n  slope 3\n  energy 1 = 0.5\n  energy 0 = 2.5\n";
    let w = read_window_with(&write(d.path(), "a.txt", good), &cfg, &h).unwrap();
    assert_eq!((w.frames, w.n_states, w.state), (2, 2, 1));
    assert_eq!(w.row(1), &[2.5, 0.5]);
    assert_eq!(w.dudl_at(0, 0), 2.0);
    // A frame cut short at the end of the file is dropped with a warning.
    let torn = format!("{good}frame 2\n  energy 0 = 1.0\n");
    let w = read_window_with(&write(d.path(), "b.txt", &torn), &cfg, &h).unwrap();
    assert_eq!(w.frames, 2);
    assert!(
        w.warnings
            .iter()
            .any(|m| m.contains("last frame is incomplete")),
        "{:?}",
        w.warnings
    );
    // A frame in the middle without a quantity, a label given twice, an energy
    // label the first frame did not have: errors at the line.
    for (text, expect) in [
        ("frame 0\n energy 0 = 1\n energy 1 = 2\n slope 1\nframe 1\n energy 0 = 1\n slope 1\nframe 2\n energy 0 = 1\n energy 1 = 1\n slope 1\n", "c.txt:5: the frame that starts here has no 'energy 1'"),
        ("frame 0\n energy 0 = 1\n energy 0 = 2\n energy 1 = 2\n slope 1\n", "c.txt:3: label 'energy 0' appears twice"),
        ("frame 0\n energy 0 = 1\n energy 1 = 2\n slope 1\nframe 1\n energy 0 = 1\n energy 1 = 2\n energy 2 = 2\n slope 1\n", "c.txt:8: energy label 'energy 2' (matching /^energy /) was not in the first frame"),
        ("frame 0\n energy 0 = x\n energy 1 = 2\n slope 1\n", "c.txt:2:2: column 'energy 0': 'x' is not a number"),
    ] {
        let p = write(d.path(), "c.txt", text);
        let e = read_window_with(&p, &cfg, &h).unwrap_err().to_string();
        assert!(e.contains(expect), "{e}");
    }
    // No frame start at all.
    let p = write(d.path(), "d.txt", "step 0\n energy 0 = 1\n");
    let e = read_window_with(&p, &cfg, &h).unwrap_err().to_string();
    assert!(e.contains("no line starts a frame"), "{e}");
}

#[test]
fn energy_columns_by_pattern_and_range_follow_the_legs_state_count() {
    let d = tempfile::tempdir().unwrap();
    let text = "t a e0 e1 e2 e3\n0 9 1 2 3 4\n";
    let p = write(d.path(), "r.dat", text);
    let range =
        yaml_reader("format: columns\ncolumns:\n  energies: { from: e0 }\n  energy_unit: kT\n");
    // The same setting gives 3 states for a 3-state leg and 4 for a 4-state leg.
    let w3 = read_window_with(&p, &range, &hint(0, &[0.0, 0.5, 1.0], &[])).unwrap();
    assert_eq!(w3.row(0), &[1.0, 2.0, 3.0]);
    let w4 = read_window_with(&p, &range, &hint(0, &[0.0, 0.3, 0.6, 1.0], &[])).unwrap();
    assert_eq!(w4.row(0), &[1.0, 2.0, 3.0, 4.0]);
    let e = read_window_with(&p, &range, &hint(0, &[0.0, 0.2, 0.4, 0.6, 1.0], &[]))
        .unwrap_err()
        .to_string();
    assert!(e.contains("need 5 columns"), "{e}");
    let pattern = yaml_reader(
        "format: columns\ncolumns:\n  energies: { matching: \"^e\\\\d$\" }\n  energy_unit: kT\n",
    );
    let e = read_window_with(&p, &pattern, &hint(0, &[0.0, 1.0], &[]))
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("selects 4 columns") && e.contains("has 2 states"),
        "{e}"
    );
    // Headerless: indices from 0, and the first line is a frame.
    let bare = yaml_reader("format: columns\ncolumns:\n  header: false\n  energies: { from: 2, count: 2 }\n  energy_unit: kT\n");
    let p = write(d.path(), "bare.dat", "0 9 1 2\n1 9 3 4\n");
    let w = read_window_with(&p, &bare, &hint(1, &[0.0, 1.0], &[])).unwrap();
    assert_eq!((w.frames, w.row(0)), (2, &[1.0, 2.0][..]));
}

#[test]
fn a_file_that_states_other_lambdas_than_the_plan_is_an_error_naming_both() {
    let d = tempfile::tempdir().unwrap();
    let p = write(
        d.path(),
        "w.tsv",
        &table(1, "0 0.4 1", "kT", "0\t1\t0\t1\t2\n"),
    );
    let e = read_window_with(
        &p,
        &ReaderConfig::default(),
        &hint(1, &[0.0, 0.5, 1.0], &[]),
    )
    .unwrap_err()
    .to_string();
    assert!(
        e.contains(
            "w.tsv:5: the file says λ = 0.4 at state 1 but the campaign's plan says 0.5 (leg test)"
        ),
        "{e}"
    );
    // Agreeing to the printed precision is agreement.
    let ok = read_window_with(
        &p,
        &ReaderConfig::default(),
        &hint(1, &[0.0, 0.4004, 1.0], &[]),
    );
    assert!(ok.is_ok(), "{ok:?}");
}

#[test]
fn relative_energies_must_be_zero_at_the_sampled_state() {
    let d = tempfile::tempdir().unwrap();
    let cfg = yaml_reader("format: columns\ncolumns:\n  energies: [d0, d1, d2]\n  energies_relative: true\n  energy_unit: kT\n");
    let p = write(d.path(), "r.dat", "d0 d1 d2\n0.5 0 -1\n0.25 0 2\n");
    assert!(read_window_with(&p, &cfg, &hint(1, &[0.0, 0.5, 1.0], &[])).is_ok());
    // The wrong state (or columns out of order) shows as a non-zero own energy.
    let e = read_window_with(&p, &cfg, &hint(2, &[0.0, 0.5, 1.0], &[]))
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("energy of the sampled state 2 (column 'd2') is -1"),
        "{e}"
    );
}

#[test]
fn a_unit_conflict_stops_or_is_settled_and_said_once() {
    let d = tempfile::tempdir().unwrap();
    let text = "# energy_unit: kcal/mol\nd0 d1\n0 1\n";
    let files: Vec<PathBuf> = (0..2)
        .map(|j| write(d.path(), &format!("w{j}.dat"), text))
        .collect();
    let stop =
        yaml_reader("format: columns\ncolumns:\n  energies: [d0, d1]\n  energy_unit: kJ/mol\n");
    let e = read_window_with(&files[0], &stop, &hint(0, &[0.0, 1.0], &[]))
        .unwrap_err()
        .to_string();
    assert!(
        e.contains(
            "w0.dat:1: the file says energy_unit kcal/mol but the reader's energy_unit is kJ/mol"
        ),
        "{e}"
    );
    let mut wins = stop.clone();
    wins.on_conflict = OnConflict::UseFile;
    let windows: Vec<_> = files
        .iter()
        .enumerate()
        .map(|(j, f)| read_window_with(f, &wins, &hint(j, &[0.0, 1.0], &[])).unwrap())
        .collect();
    // 1 kcal/mol = 4.184 kJ/mol (NIST SP 811); kT = R·300 K (CODATA 2018).
    let kt_kj = 8.314_462_618e-3 * 300.0;
    assert!((windows[0].row(0)[1] - 4.184 / kt_kj).abs() < 1e-12);
    let leg = legwork::collect::assemble(windows).unwrap();
    let notes = leg
        .warnings
        .iter()
        .filter(|w| w.contains("use-file"))
        .count();
    assert_eq!(notes, 1, "{:?}", leg.warnings);
}

#[test]
fn only_missing_empty_or_short_outputs_are_worth_a_rerun() {
    let d = tempfile::tempdir().unwrap();
    let cfg = ReaderConfig::default();
    let missing = validate_output(&d.path().join("none.tsv"), &cfg, None).unwrap_err();
    let empty = validate_output(&write(d.path(), "e.tsv", ""), &cfg, None).unwrap_err();
    let header_only = validate_output(
        &write(d.path(), "h.tsv", &table(0, "0 1", "kT", "")),
        &cfg,
        None,
    )
    .unwrap_err();
    let short = validate_output(
        &write(d.path(), "s.tsv", &table(0, "0 1", "kT", "0\t1\t0\t1\n")),
        &cfg,
        Some(5),
    )
    .unwrap_err();
    for e in [&missing, &empty, &header_only, &short] {
        assert!(e.rerun_can_fix(), "{e}");
    }
    let garbled = validate_output(
        &write(d.path(), "g.tsv", &table(0, "0 1", "kT", "0\t1\tx\t1\n")),
        &cfg,
        None,
    )
    .unwrap_err();
    let other_format =
        validate_output(&write(d.path(), "o.dat", "step u0 u1\n0 1 2\n"), &cfg, None).unwrap_err();
    for e in [&garbled, &other_format] {
        assert!(!e.rerun_can_fix(), "{e}");
    }
}

/// The README's worked examples: each sample output, read with the reader
/// settings printed after it, gives frames (the states and λ as a campaign's
/// plan would pass them).
#[test]
fn the_readmes_worked_examples_read() {
    let readme =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md")).unwrap();
    let start = readme
        .find("### Worked examples")
        .expect("the section exists");
    let section = &readme[start..];
    let section = &section[..section[4..].find("\n## ").map_or(section.len(), |i| i + 4)];
    let blocks: Vec<(&str, &str)> = section
        .split("```")
        .skip(1)
        .step_by(2)
        .map(|b| b.split_once('\n').unwrap())
        .collect();
    let pairs: Vec<_> = blocks.chunks(2).collect();
    assert_eq!(pairs.len(), 3, "three worked examples");
    let hints = [
        hint(
            1,
            &[0.0, 0.3, 0.6, 1.0],
            &[
                ("charge", &[0.0, 1.0, 1.0, 1.0]),
                ("vdw", &[0.0, 0.0, 0.5, 1.0]),
            ],
        ),
        hint(0, &[0.0, 0.5, 1.0], &[]),
        WindowHint {
            campaign_temperature_k: Some(310.0),
            ..hint(0, &[0.0, 1.0], &[])
        },
    ];
    let d = tempfile::tempdir().unwrap();
    for (pair, h) in pairs.iter().zip(hints) {
        let (sample, settings) = (pair[0].1, pair[1]);
        assert_eq!(settings.0, "yaml");
        let cfg = yaml_reader(settings.1);
        let p = write(d.path(), "example.txt", sample);
        let w = read_window_with(&p, &cfg, &h).unwrap_or_else(|e| panic!("{e}\n{sample}"));
        assert!(w.frames >= 1 && w.n_states >= 2, "{sample}");
    }
}

/// Every "see *X*" in the README, and every README section that the tool's
/// messages and the shipped templates name (`README: *X*`, `README *X*`,
/// `README, "X"`), is a heading of the README.
#[test]
fn readme_references_name_sections_that_exist() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let readme = std::fs::read_to_string(root.join("README.md")).unwrap();
    let headings: Vec<String> = readme
        .lines()
        .filter(|l| l.starts_with('#'))
        .map(|l| l.trim_start_matches('#').trim().to_string())
        .collect();
    let see = regex::Regex::new(r"see \*([^*]+)\*").unwrap();
    let mut refs: Vec<(String, String)> = see
        .captures_iter(&readme)
        .map(|c| ("README.md".to_string(), c[1].to_string()))
        .collect();
    assert!(
        refs.len() >= 5,
        "the README refers to its sections: {refs:?}"
    );
    let named = regex::Regex::new(r#"README[:,]? (?:\*([^*]+)\*|"([^"]+)")"#).unwrap();
    for dir in ["src", "templates", "numerics/src"] {
        for entry in walkdir::WalkDir::new(root.join(dir)) {
            let entry = entry.unwrap();
            if !entry.file_type().is_file() {
                continue;
            }
            let Ok(text) = std::fs::read_to_string(entry.path()) else {
                continue;
            };
            for c in named.captures_iter(&text) {
                refs.push((
                    entry.path().display().to_string(),
                    c.get(1).or(c.get(2)).unwrap().as_str().to_string(),
                ));
            }
        }
    }
    // A reference may wrap onto the next (comment) line.
    let words = |r: &str| {
        r.split_whitespace()
            .filter(|w| !matches!(*w, "#" | "//" | "///" | "//!"))
            .collect::<Vec<_>>()
            .join(" ")
    };
    let bad: Vec<&(String, String)> = refs
        .iter()
        .filter(|(_, r)| !headings.iter().any(|h| *h == words(r)))
        .collect();
    assert!(
        bad.is_empty(),
        "references to sections that do not exist: {bad:?}"
    );
}
