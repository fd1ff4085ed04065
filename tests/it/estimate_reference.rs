//! The estimators against answers from outside the project: analytic free energies,
//! Gaussian work distributions, the AR(1) inefficiency, scipy's quadrature, and an
//! independent numpy MBAR.

use crate::estimate_support::*;
use legwork::collect::{read_leg, LegSamples, ReaderConfig, WindowSamples};
use legwork::estimate::correlation::{detect_equilibration, statistical_inefficiency};
use legwork::estimate::exp::exp_average;
use legwork::estimate::{estimate_leg, Equilibration, EstimateOptions, Method, Subsample};
use std::process::Command;

fn plain(methods: &[Method]) -> EstimateOptions {
    EstimateOptions {
        methods: methods.to_vec(),
        equilibration: Equilibration::None,
        subsample: Subsample::None,
        convergence: false,
        ..Default::default()
    }
}

#[test]
fn harmonic_oscillators_match_the_analytic_free_energies() {
    // Shirts & Chodera 2008 (J. Chem. Phys. 129, 124105, Sec. V A): harmonic
    // oscillators, whose free energies follow from the Gaussian partition function.
    let ks = [1.0, 1.6, 2.4, 3.3, 4.5];
    let cs = [0.0, 0.3, 0.6, 0.9, 1.2];
    let leg = harmonic_leg(&mut rng(11), &ks, &cs, 3000, 0.0);
    let est = estimate_leg(
        &leg,
        &plain(&[
            Method::Mbar,
            Method::Bar,
            Method::ExpForward,
            Method::ExpReverse,
        ]),
    )
    .unwrap();
    let f = harmonic_f(&ks);
    let truth = f[4] - f[0];
    for (m, d) in &est.estimates {
        assert!(d.sigma > 0.0 && d.sigma < 0.2, "{m}: σ = {}", d.sigma);
        assert!(
            (d.delta_g - truth).abs() < 4.0 * d.sigma,
            "{m}: {} vs exact {truth} (σ {})",
            d.delta_g,
            d.sigma
        );
    }
    let mbar = est.mbar.as_ref().unwrap();
    for j in 1..5 {
        let err = mbar.f[j] - (f[j] - f[0]);
        assert!(
            err.abs() < 4.0 * mbar.sigma_f[j],
            "state {j}: error {err}, σ {}",
            mbar.sigma_f[j]
        );
    }
    let mid = est.mbar_difference(1, 3).unwrap();
    assert!(
        (mid.delta_g - (f[3] - f[1])).abs() < 4.0 * mid.sigma,
        "{mid:?}"
    );
    // Overlap matrix rows sum to 1 (Shirts & Chodera 2008 / its definition O = WᵀWN).
    for row in est.overlap.as_ref().unwrap() {
        assert!((row.iter().sum::<f64>() - 1.0).abs() < 1e-10);
    }
    assert!(est.min_adjacent_overlap.unwrap() > 0.03);
}

/// A two-state leg whose forward and reverse works are Gaussian with the Crooks
/// relation: w_F ~ N(ΔF + s²/2, s²), w_R ~ N(−ΔF + s²/2, s²).
fn gaussian_work_leg(df: f64, s: f64, n: usize, seed: u64) -> LegSamples {
    let mut r = rng(seed);
    let lam = vec![0.0, 1.0];
    let mut w0 = Vec::new();
    let mut w1 = Vec::new();
    for _ in 0..n {
        w0.extend([0.0, df + s * s / 2.0 + s * normal(&mut r)]);
        w1.extend([-df + s * s / 2.0 + s * normal(&mut r), 0.0]);
    }
    LegSamples::from_windows(vec![
        WindowSamples::from_reduced(0, 300.0, lam.clone(), w0, Vec::new()),
        WindowSamples::from_reduced(1, 300.0, lam, w1, Vec::new()),
    ])
}

#[test]
fn gaussian_works_give_the_exact_exp_and_bar_answers() {
    // For Gaussian work, −ln⟨e^{−w}⟩ = μ − s²/2 exactly (Zwanzig 1954, J. Chem. Phys.
    // 22, 1420, second-order cumulant, exact for a Gaussian); Bennett's estimator
    // (Bennett 1976) is consistent for Crooks-related work distributions.
    let (df, s) = (1.7, 1.2);
    let leg = gaussian_work_leg(df, s, 20000, 5);
    let est = estimate_leg(
        &leg,
        &plain(
            &Method::ALL[..2]
                .iter()
                .chain(&Method::ALL[4..])
                .copied()
                .collect::<Vec<_>>(),
        ),
    )
    .unwrap();
    for m in [
        Method::Bar,
        Method::ExpForward,
        Method::ExpReverse,
        Method::Mbar,
    ] {
        let d = est.estimates[&m];
        assert!(
            (d.delta_g - df).abs() < 4.0 * d.sigma,
            "{m}: {} vs {df} (σ {})",
            d.delta_g,
            d.sigma
        );
    }
    // Two-state MBAR solves Bennett's equation and has Bennett's asymptotic variance
    // (Shirts & Chodera 2008, Sec. II C).
    let (b, m) = (est.estimates[&Method::Bar], est.estimates[&Method::Mbar]);
    assert!(
        (b.delta_g - m.delta_g).abs() < 1e-9,
        "{} vs {}",
        b.delta_g,
        m.delta_g
    );
    assert!(
        (b.sigma / m.sigma - 1.0).abs() < 1e-6,
        "{} vs {}",
        b.sigma,
        m.sigma
    );
    // The EXP σ is the delta-method one: check it against the spread over replicates.
    let mut r = rng(8);
    let runs: Vec<f64> = (0..300)
        .map(|_| {
            let w: Vec<f64> = (0..400).map(|_| 0.5 + 0.5 * normal(&mut r)).collect();
            exp_average(&w).unwrap().0
        })
        .collect();
    let mean = runs.iter().sum::<f64>() / runs.len() as f64;
    let sd =
        (runs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (runs.len() - 1) as f64).sqrt();
    let w: Vec<f64> = (0..400).map(|_| 0.5 + 0.5 * normal(&mut r)).collect();
    let sigma = exp_average(&w).unwrap().1;
    assert!((sigma / sd - 1.0).abs() < 0.25, "σ {sigma} vs spread {sd}");
    assert!(
        (mean - (0.5 - 0.125)).abs() < 3.0 * sd / (runs.len() as f64).sqrt() + 2e-3,
        "{mean}"
    );
}

#[test]
fn ar1_inefficiency_matches_the_closed_form() {
    // For an AR(1) process with lag-1 correlation φ, C(t) = φ^t and
    // g = 1 + 2Σφ^t = (1 + φ)/(1 − φ) (textbook; e.g. Chodera 2016, J. Chem. Theory
    // Comput. 12, 1799, on the integrated autocorrelation time).
    for (phi, seed) in [(0.0, 1), (0.5, 2), (0.8, 3)] {
        let x = ar1(&mut rng(seed), 200_000, 0.0, 1.0, phi);
        let g = statistical_inefficiency(&x);
        let want = (1.0 + phi) / (1.0 - phi);
        assert!(
            (g / want - 1.0).abs() < 0.1,
            "φ = {phi}: g = {g}, want {want}"
        );
    }
}

#[test]
fn equilibration_detection_discards_the_transient() {
    // Chodera 2016 (J. Chem. Theory Comput. 12, 1799): the start that maximises the
    // effective sample size lies past an initial relaxation.
    let noise = ar1(&mut rng(4), 20_000, 0.0, 1.0, 0.5);
    let x: Vec<f64> = noise
        .iter()
        .enumerate()
        .map(|(t, v)| v + 10.0 * (-(t as f64) / 200.0).exp())
        .collect();
    let e = detect_equilibration(&x);
    assert!(e.start >= 600 && e.start <= 4000, "start {}", e.start);
    let g = (1.0 + 0.5) / (1.0 - 0.5);
    assert!(
        (e.inefficiency / g - 1.0).abs() < 0.25,
        "g {}",
        e.inefficiency
    );
    let stationary = detect_equilibration(&noise);
    assert!(
        stationary.start <= 3000,
        "stationary data kept from {}",
        stationary.start
    );
}

#[test]
fn ti_quadrature_matches_scipy() {
    let Some(py) = python("ti_quadrature_matches_scipy") else {
        return;
    };
    // An uneven λ grid and a curved dU/dλ, so trapezoid and spline differ.
    let lam: Vec<f64> = vec![0.0, 0.05, 0.15, 0.3, 0.5, 0.7, 0.85, 0.95, 1.0];
    let k = lam.len();
    let mut r = rng(21);
    let windows = (0..k)
        .map(|j| {
            let n = 400 + 37 * j;
            let mean = 10.0 * (3.0 * lam[j]).sin() - 4.0 * lam[j];
            let dudl: Vec<f64> = (0..n)
                .map(|_| mean + (1.0 + lam[j]) * normal(&mut r))
                .collect();
            WindowSamples::from_reduced(j, 300.0, lam.clone(), vec![0.0; n * k], dudl)
        })
        .collect();
    let leg = LegSamples::from_windows(windows);
    let est = estimate_leg(&leg, &plain(&[Method::Ti, Method::TiSpline])).unwrap();
    let y: Vec<f64> = est.ti_points.iter().map(|p| p.mean).collect();
    let s: Vec<f64> = est.ti_points.iter().map(|p| p.sem).collect();
    let frames: Vec<Vec<Vec<f64>>> = leg
        .windows
        .iter()
        .map(|w| w.dudl.iter().map(|v| vec![*v]).collect())
        .collect();
    let doc = serde_json::json!({
        "segments": [{"x": lam, "y": y, "sem": s, "states": (0..k).collect::<Vec<_>>(), "component": 0}],
        "frames": frames,
    });
    let out = scipy_ti(&py, &doc);
    for (m, key) in [(Method::Ti, "trapezoid"), (Method::TiSpline, "spline")] {
        let d = est.estimates[&m];
        assert!(
            (d.delta_g - out[key]["value"].as_f64().unwrap()).abs() < 1e-10,
            "{m}: {} vs {}",
            d.delta_g,
            out[key]
        );
        assert!(
            (d.sigma - out[key]["sigma"].as_f64().unwrap()).abs() < 1e-10,
            "{m} σ: {} vs {}",
            d.sigma,
            out[key]
        );
    }
}

#[test]
fn multi_component_ti_integrates_each_component_over_its_own_path() {
    let Some(py) = python("multi_component_ti_integrates_each_component_over_its_own_path") else {
        return;
    };
    // restraint 0 → 1 over states 0..3, then held; vdw held at 0, then 0 → 1 over 3..7.
    let restraint = vec![0.0, 0.2, 0.6, 1.0, 1.0, 1.0, 1.0, 1.0];
    let vdw: Vec<f64> = vec![0.0, 0.0, 0.0, 0.0, 0.1, 0.4, 0.8, 1.0];
    let k = restraint.len();
    let mut r = rng(31);
    let windows: Vec<WindowSamples> = (0..k)
        .map(|j| {
            let n = 300;
            let mut dudl = Vec::with_capacity(2 * n);
            for _ in 0..n {
                dudl.push(5.0 * restraint[j] * restraint[j] + 0.3 * normal(&mut r));
                dudl.push(-8.0 + 12.0 * vdw[j].powi(3) + 0.5 * normal(&mut r));
            }
            let mut w = WindowSamples::from_reduced(
                j,
                300.0,
                (0..k).map(|i| i as f64 / 7.0).collect(),
                vec![0.0; n * k],
                Vec::new(),
            );
            w.components = vec!["restraint".into(), "vdw".into()];
            w.component_lambdas = vec![restraint.clone(), vdw.clone()];
            w.dudl = dudl;
            w
        })
        .collect();
    let leg = LegSamples::from_windows(windows);
    let est = estimate_leg(&leg, &plain(&[Method::Ti, Method::TiSpline])).unwrap();
    let pick = |comp: &str, range: std::ops::RangeInclusive<usize>, x: &[f64]| {
        let pts: Vec<_> = est
            .ti_points
            .iter()
            .filter(|p| p.component == comp && range.contains(&p.state))
            .collect();
        serde_json::json!({
            "x": range.clone().map(|i| x[i]).collect::<Vec<_>>(),
            "y": pts.iter().map(|p| p.mean).collect::<Vec<_>>(),
            "sem": pts.iter().map(|p| p.sem).collect::<Vec<_>>(),
            "states": range.clone().collect::<Vec<_>>(),
            "component": if comp == "restraint" { 0 } else { 1 },
        })
    };
    let frames: Vec<Vec<Vec<f64>>> = leg
        .windows
        .iter()
        .map(|w| w.dudl.chunks(2).map(|c| c.to_vec()).collect())
        .collect();
    let doc = serde_json::json!({
        "segments": [pick("restraint", 0..=3, &restraint), pick("vdw", 3..=7, &vdw)],
        "frames": frames,
    });
    let out = scipy_ti(&py, &doc);
    for (m, key) in [(Method::Ti, "trapezoid"), (Method::TiSpline, "spline")] {
        let d = est.estimates[&m];
        assert!(
            (d.delta_g - out[key]["value"].as_f64().unwrap()).abs() < 1e-10,
            "{m}: {} vs {}",
            d.delta_g,
            out[key]
        );
        assert!(
            (d.sigma - out[key]["sigma"].as_f64().unwrap()).abs() < 1e-10,
            "{m} σ"
        );
    }
}

fn scipy_ti(py: &std::path::Path, doc: &serde_json::Value) -> serde_json::Value {
    let script = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/python/ti_scipy.py");
    let mut child = Command::new(py)
        .arg(script)
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    use std::io::Write;
    child
        .stdin
        .take()
        .unwrap()
        .write_all(doc.to_string().as_bytes())
        .unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(out.status.success(), "ti_scipy.py failed");
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn mbar_matches_the_numpy_reference_to_1e_8() {
    let Some(py) = python("mbar_matches_the_numpy_reference_to_1e_8") else {
        return;
    };
    let bench = std::path::Path::new("/work/shared/bench");
    let bench = std::env::var_os("LEGWORK_BENCH_DIR")
        .map(std::path::PathBuf::from)
        .unwrap_or(bench.to_path_buf());
    if !bench.join("mbar_numpy.py").exists() {
        skipped("mbar_matches_the_numpy_reference_to_1e_8 needs the bench anchors (set LEGWORK_BENCH_DIR)");
        return;
    }
    let d = tempfile::tempdir().unwrap();
    let ok = Command::new(&py)
        .arg(bench.join("harmonic_windows.py"))
        .args(["8", "3000", "7"])
        .arg(d.path())
        .status()
        .unwrap();
    assert!(ok.success());
    let mut files: Vec<_> = std::fs::read_dir(d.path())
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "tsv"))
        .collect();
    files.reverse();
    let leg = read_leg(&files, &ReaderConfig::default()).unwrap();
    let est = estimate_leg(&leg, &plain(&[Method::Mbar])).unwrap();
    let out = Command::new(&py)
        .arg(bench.join("mbar_numpy.py"))
        .args(&files)
        .output()
        .unwrap();
    assert!(out.status.success());
    let reference: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let ours = est.estimates[&Method::Mbar].delta_g;
    let theirs = reference["delta_f_kT"].as_f64().unwrap();
    assert!((ours - theirs).abs() < 1e-8, "{ours} vs {theirs}");
    let f = &est.mbar.as_ref().unwrap().f;
    for (j, v) in reference["f_kT"].as_array().unwrap().iter().enumerate() {
        assert!(
            (f[j] - v.as_f64().unwrap()).abs() < 1e-8,
            "state {j}: {} vs {v}",
            f[j]
        );
    }
    // And both near the exact answer the generator wrote (truth.json).
    let truth: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.path().join("truth.json")).unwrap()).unwrap();
    let exact = truth["delta_f"].as_f64().unwrap();
    assert!(
        (ours - exact).abs() < 4.0 * est.estimates[&Method::Mbar].sigma,
        "{ours} vs exact {exact}"
    );
}
