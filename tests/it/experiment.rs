//! Reading measured affinities (format in the README, "Results and the report") and converting them to ΔG.

use legwork::collect::experiment::{parse_measured, read_measured, ExperimentError, IC50_NOTE};
use legwork::network::dg_from_constant_kj;
use legwork::network::MeasuredKind;
use legwork::units::EnergyUnit;

const T: f64 = 298.15;

fn parse(text: &str) -> Result<Vec<legwork::network::Measured>, ExperimentError> {
    parse_measured(text, "measured.csv", T, EnergyUnit::KcalPerMol)
}

fn message(text: &str) -> String {
    parse(text).unwrap_err().to_string()
}

#[test]
fn ki_of_one_nanomolar_by_hand() {
    // Hand calculation with R from CODATA 2018 (8.314462618 J/(mol·K)):
    // RT = 8.314462618 × 298.15 = 2478.957 J/mol = 2.478957 kJ/mol;
    // ln(1e-9) = −9 ln 10 = −20.723266;
    // ΔG = 2.478957 × (−20.723266) = −51.372086 kJ/mol
    //    = −51.372086 / 4.184 = −12.278223 kcal/mol (thermochemical calorie, NIST SP 811).
    assert!((dg_from_constant_kj(1e-9, T) - (-51.372_086)).abs() < 1e-5);
    let m = parse("ligand,kind,value,unit\nork-01,ki,1,nM\n").unwrap();
    assert!((m[0].dg - (-12.278_223)).abs() < 1e-5, "{}", m[0].dg);
    assert_eq!(m[0].kind, MeasuredKind::Ki);
}

#[test]
fn every_concentration_unit_agrees() {
    // The same constant written six ways gives the same ΔG.
    let text = "# invented values\nligand,kind,value,unit\na,kd,2500000,pM\nb,kd,2500,nM\nc,kd,2.5,uM\nd,kd,2.5,µM\ne,kd,0.0025,mM\nf,kd,0.0000025,M\n";
    let m = parse(text).unwrap();
    assert_eq!(m.len(), 6);
    for x in &m[1..] {
        assert!((x.dg - m[0].dg).abs() < 1e-9, "{} vs {}", x.dg, m[0].dg);
    }
    // 2.5 µM: RT ln(2.5e-6) / 4.184 = 0.5924849 × (−12.899220) = −7.642594 kcal/mol.
    assert!((m[0].dg - (-7.642_594)).abs() < 1e-5, "{}", m[0].dg);
}

#[test]
fn dg_rows_are_converted_between_energy_units() {
    let m = parse_measured(
        "ligand,kind,value,unit\nork-01,dg,-8.0,kcal/mol\nork-02,dg,-33.472,kJ/mol\n",
        "x",
        T,
        EnergyUnit::KjPerMol,
    )
    .unwrap();
    assert!((m[0].dg - (-33.472)).abs() < 1e-12);
    assert!((m[1].dg - (-33.472)).abs() < 1e-12);
}

#[test]
fn comments_anywhere_column_order_free_and_ic50_marked() {
    let text = "# first line says these are invented\n# more\nunit,value,kind,ligand\n# between rows\nnM,420,ic50,ork-05\nkcal/mol,-9.1,dg,ork-06\n";
    let m = parse(text).unwrap();
    assert_eq!(m.len(), 2);
    assert_eq!(m[0].ligand, "ork-05");
    assert_eq!(m[0].kind, MeasuredKind::Ic50);
    assert_eq!(m[0].line, 5);
    assert!((m[1].dg - (-9.1)).abs() < 1e-12);
    assert!(IC50_NOTE.contains("approximate"));
}

#[test]
fn errors_say_where_and_what() {
    let e = message("ligand,kind,value,unit\nork-01,kx,1,nM\n");
    assert!(
        e.starts_with("measured.csv:2:") && e.contains("kx") && e.contains("ic50"),
        "{e}"
    );
    let e = message("ligand,kind,value,unit\nork-01,ki,1,nanomolar\n");
    assert!(
        e.contains(":2:") && e.contains("nanomolar") && e.contains("nM"),
        "{e}"
    );
    let e = message("ligand,kind,value,unit\nork-01,dg,-8,kT\n");
    assert!(e.contains("kcal/mol or kJ/mol"), "{e}");
    let e = message("ligand,kind,value,unit\nork-01,ki,-3,nM\n");
    assert!(e.contains("positive"), "{e}");
    let e = message("ligand,kind,value,unit\nork-01,ki,abc,nM\n");
    assert!(e.contains("'abc' is not a number"), "{e}");
    let e = message("ligand,kind,value,unit\nork-01,ki,1,nM\n# c\nork-01,dg,-8,kcal/mol\n");
    assert!(e.contains(":4:") && e.contains("line 2"), "{e}");
    let e = message("name,kind,value,unit\nork-01,ki,1,nM\n");
    assert!(
        e.contains(":1:") && e.contains("ligand,kind,value,unit"),
        "{e}"
    );
    let e = message("ligand,kind,value,unit\nork-01,ki,,nM\n");
    assert!(e.contains("value column is empty"), "{e}");
}

#[test]
fn missing_file_is_an_error_naming_it() {
    let err = read_measured(
        std::path::Path::new("/nonexistent/measured.csv"),
        T,
        EnergyUnit::KcalPerMol,
    )
    .unwrap_err();
    assert!(err.to_string().contains("/nonexistent/measured.csv"));
}

#[test]
fn reads_the_demo_measurements() {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data/measured.csv");
    let m = read_measured(&path, T, EnergyUnit::KcalPerMol).unwrap();
    assert_eq!(m.len(), 8);
    assert_eq!(m[0].ligand, "ork-01");
    assert_eq!(m[0].line, 6, "four comment lines and the header come first");
    assert!(m.iter().any(|x| x.kind == MeasuredKind::Ki));
    // The file says its values scatter around −9 kcal/mol.
    let mean = m.iter().map(|x| x.dg).sum::<f64>() / 8.0;
    assert!((mean - (-9.0)).abs() < 1.0, "{mean}");
}

/// A minimal absolute campaign in a temporary folder; `extra` is appended to the
/// top level and `restraint` is the bound leg's restraint mapping.
pub(crate) fn absolute_campaign(extra: &str, restraint: &str) -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir(dir.path().join("templates")).unwrap();
    std::fs::write(
        dir.path().join("templates/w.sh.tera"),
        "echo {{ ligand.id }}\n",
    )
    .unwrap();
    std::fs::write(
        dir.path().join("campaign.yaml"),
        format!(
            r#"campaign: abs
kind: absolute
templates: templates
ligands: [ork-01, ork-02]
legs:
  bound:
    sign: -1
    restraint: {restraint}
    lambdas: {{ count: 3, spacing: linear }}
  free:
    sign: 1
    lambdas: {{ count: 3, spacing: linear }}
stages:
  - {{ name: run, per: window, template: w.sh.tera }}
{extra}"#
        ),
    )
    .unwrap();
    dir
}

/// A restraint that passes every check.
pub(crate) const GOOD_RESTRAINT: &str = "{ kind: boresch, r0: 5.0, theta_a: 90, theta_b: 60, k_r: 10, k_theta_a: 10, k_theta_b: 10, k_phi_a: 10, k_phi_b: 10, k_phi_c: 10 }";

fn check(dir: &std::path::Path) -> std::process::Output {
    assert_cmd::Command::cargo_bin("legwork")
        .unwrap()
        .arg("check")
        .arg(dir.join("campaign.yaml"))
        .output()
        .unwrap()
}

#[test]
fn check_reads_the_experiment_file_and_refuses_a_bad_row_with_exit_2() {
    // A dg row in nM is a unit error: `check` must find it (exit 2, file and
    // line, a hint), before anything runs.
    let dir = absolute_campaign("experiment: measured.csv\n", GOOD_RESTRAINT);
    std::fs::write(
        dir.path().join("measured.csv"),
        "# invented values\nligand,kind,value,unit\nork-01,ki,12,nM\nork-02,dg,-9.5,nM\n",
    )
    .unwrap();
    let out = check(dir.path());
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("measured.csv:4"), "{err}");
    assert!(err.contains("unit 'nM' for a dg"), "{err}");
    assert!(err.contains("hint:"), "{err}");

    // Fixed, the campaign checks; a measured ligand outside the campaign is a warning.
    std::fs::write(
        dir.path().join("measured.csv"),
        "ligand,kind,value,unit\nork-01,ki,12,nM\nork-02,dg,-9.5,kcal/mol\nork-99,kd,3,uM\n",
    )
    .unwrap();
    let out = check(dir.path());
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{err}");
    assert!(
        err.contains("not in the campaign") && err.contains("ork-99"),
        "{err}"
    );
}
