//! The estimator on the demo engine's window tables (correlated frames from a
//! displaced start), against the engine's analytic answer: a Gaussian-well system
//! whose free energies follow from the Gaussian partition function, the same
//! textbook result as the harmonic-oscillator test of Shirts & Chodera 2008.

use legwork::collect::{read_leg, ReaderConfig};
use legwork::estimate::{estimate_leg, EstimateOptions, Method};
use legwork::units::EnergyUnit;
use std::process::Command;

const ENGINE: &str = env!("CARGO_BIN_EXE_legwork-demo-engine");
const LAMBDAS: &str = "0,0.15,0.3,0.5,0.7,0.85,1";

fn engine(extra: &[&str]) -> std::process::Output {
    Command::new(ENGINE)
        .args(["run", "--a-offset", "0", "--a-k", "2", "--a-shift", "0"])
        .args([
            "--b-offset",
            "1.5",
            "--b-k",
            "3",
            "--b-shift",
            "0.5",
            "--lambdas",
            LAMBDAS,
        ])
        .args(extra)
        .output()
        .unwrap()
}

#[test]
fn demo_leg_matches_the_exact_free_energy() {
    let d = tempfile::tempdir().unwrap();
    let k = LAMBDAS.split(',').count();
    let mut files = Vec::new();
    for s in 0..k {
        let out = d.path().join(format!("w{s}.tsv"));
        let seed = (s + 11).to_string();
        let r = engine(&[
            "--state",
            &s.to_string(),
            "--frames",
            "3000",
            "--seed",
            &seed,
            "--output",
            out.to_str().unwrap(),
        ]);
        assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
        files.push(out);
    }
    let exact: serde_json::Value =
        serde_json::from_slice(&engine(&["--exact", "--json"]).stdout).unwrap();
    let exact = exact["delta_g"].as_f64().unwrap();
    let leg = read_leg(&files, &ReaderConfig::default()).unwrap();
    let est = estimate_leg(&leg, &EstimateOptions::default()).unwrap();
    for m in [
        Method::Mbar,
        Method::Bar,
        Method::Ti,
        Method::ExpForward,
        Method::ExpReverse,
    ] {
        let d = est.delta_g_in(m, EnergyUnit::KcalPerMol).unwrap();
        assert!(
            (d.delta_g - exact).abs() < 4.0 * d.sigma,
            "{m}: {} ± {} vs exact {exact}",
            d.delta_g,
            d.sigma
        );
    }
    // The engine's frames are AR(1)-correlated (φ = 0.9 by default, g = 19 for x;
    // the energy series is less correlated): the inefficiency must be found.
    assert!(
        est.windows
            .iter()
            .all(|w| w.inefficiency > 3.0 && w.used < w.frames / 3),
        "{:?}",
        est.windows
    );
    let conv = est.convergence.as_ref().unwrap();
    assert_eq!(conv.points.len(), 10);
    let last = conv.points.last().unwrap();
    assert!((last.forward.delta_g - est.estimates[&Method::Mbar].delta_g).abs() < 1e-9);
}

#[test]
fn a_truncated_demo_window_is_read_with_a_warning() {
    let d = tempfile::tempdir().unwrap();
    let out = d.path().join("w0.tsv");
    let r = engine(&[
        "--state",
        "0",
        "--frames",
        "200",
        "--fault-truncate",
        "--output",
        out.to_str().unwrap(),
    ]);
    assert!(r.status.success());
    let w = legwork::collect::read_window(&out, &ReaderConfig::default()).unwrap();
    assert!(w.frames < 200 && w.frames > 0, "{}", w.frames);
    assert!(
        w.warnings.iter().any(|m| m.contains("cut short")),
        "{:?}",
        w.warnings
    );
}
