//! `legwork estimate FILE...`: the JSON shape, units, the table, and exit code 2
//! with file:line:column for bad input.

use crate::estimate_support::*;
use assert_cmd::Command;

fn legwork() -> Command {
    Command::cargo_bin("legwork").unwrap()
}

#[test]
fn json_has_the_documented_shape_and_units() {
    let d = tempfile::tempdir().unwrap();
    let ks = [1.0, 1.5, 2.2, 3.0];
    let cs = [0.0, 0.4, 0.8, 1.2];
    let mut files = write_harmonic(d.path(), &mut rng(3), &ks, &cs, 600);
    files.reverse();
    let out = legwork()
        .arg("estimate")
        .arg("--json")
        .args(&files)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(doc["unit"], "kcal/mol");
    assert_eq!(doc["temperature_K"], 298.15);
    assert_eq!(doc["states"], 4);
    for m in [
        "mbar",
        "bar",
        "ti",
        "ti_spline",
        "exp_forward",
        "exp_reverse",
    ] {
        assert!(
            doc["estimates"][m]["delta_g"].is_f64() && doc["estimates"][m]["sigma"].is_f64(),
            "{m}"
        );
    }
    assert_eq!(doc["overlap"].as_array().unwrap().len(), 4);
    assert!(doc["min_adjacent_overlap"].as_f64().unwrap() > 0.0);
    let w = &doc["windows"][2];
    assert_eq!(w["state"], 2);
    assert_eq!(w["frames"], 600);
    for key in ["equilibration_frames", "inefficiency", "used"] {
        assert!(w[key].is_number(), "{key}");
    }
    assert!(doc["warnings"].is_array());

    // kT → kcal/mol is RT with R from CODATA 2018 and the thermochemical calorie.
    let kt = legwork()
        .args(["estimate", "--json", "--unit", "kT", "--method", "mbar,bar"])
        .args(&files)
        .output()
        .unwrap();
    let kt: serde_json::Value = serde_json::from_slice(&kt.stdout).unwrap();
    assert!(kt["estimates"].get("ti").is_none());
    let rt_kcal = 8.314_462_618e-3 * 298.15 / 4.184;
    let a = doc["estimates"]["mbar"]["delta_g"].as_f64().unwrap();
    let b = kt["estimates"]["mbar"]["delta_g"].as_f64().unwrap();
    assert!((a - b * rt_kcal).abs() < 1e-12, "{a} vs {b}");
    // The generator's exact answer: ½ ln(k_3/k_0) kT (Gaussian partition function).
    let exact = 0.5 * (ks[3] / ks[0]).ln();
    let s = kt["estimates"]["mbar"]["sigma"].as_f64().unwrap();
    assert!((b - exact).abs() < 4.0 * s, "{b} vs {exact} ± {s}");
}

#[test]
fn table_lists_methods_windows_and_convergence() {
    let d = tempfile::tempdir().unwrap();
    let files = write_harmonic(
        d.path(),
        &mut rng(4),
        &[1.0, 2.0, 3.0],
        &[0.0, 0.3, 0.6],
        300,
    );
    let out = legwork()
        .args([
            "estimate",
            "--convergence",
            "--equilibration",
            "10",
            "--subsample",
            "none",
        ])
        .args(&files)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    for needle in [
        "mbar",
        "ti_spline",
        "exp_reverse",
        "inefficiency",
        "convergence (mbar)",
        "smallest overlap",
    ] {
        assert!(text.contains(needle), "missing {needle} in\n{text}");
    }
    // Overlaps are spelled with their leading zero (or in scientific notation).
    let line = text
        .lines()
        .find(|l| l.contains("smallest overlap"))
        .unwrap();
    let value = line.rsplit(' ').next().unwrap();
    assert!(
        value.parse::<f64>().is_ok() && !value.starts_with('.'),
        "{line}"
    );
    assert!(
        text.lines()
            .any(|l| l.trim_start().starts_with("2 ") && l.contains(" 10 ")),
        "{text}"
    );
}

#[test]
fn bad_input_exits_2_with_where_and_how() {
    let d = tempfile::tempdir().unwrap();
    let files = write_harmonic(d.path(), &mut rng(5), &[1.0, 2.0], &[0.0, 0.3], 20);
    let text = std::fs::read_to_string(&files[1]).unwrap();
    let broken = text.replacen("\n1\t", "\n1\tinf", 1);
    std::fs::write(&files[1], broken).unwrap();
    let out = legwork().arg("estimate").args(&files).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("win01.tsv:") && err.contains("column 'dudl'") && err.contains("not finite"),
        "{err}"
    );

    let out = legwork()
        .args(["estimate", "--method", "magic"])
        .args(&files)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("unknown method 'magic'"));

    let out = legwork().arg("estimate").arg(&files[0]).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("no window sampled state(s) [1]"));
}
