//! Reading window output: the native window table with no configuration, the
//! configurable column reader, and the errors a user gets for bad files.

use legwork::collect::config::{ColumnRef, ColumnsConfig, DudlColumns, Energies, ReaderFormat};
use legwork::collect::{read_leg, read_window, validate_output, ReadError, ReaderConfig};
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
