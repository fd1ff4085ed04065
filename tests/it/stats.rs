//! Agreement statistics against scipy.stats, and the seeded bootstrap.

use legwork::network::stats::{compare, compare_with, kendall_tau, mue, pearson, rmse};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde_json::json;

/// Runs a reference script with LEGWORK_PYTHON; `None` (after a loud SKIPPED
/// line) when it is not set.
use crate::reference_support::python;

fn cases() -> Vec<(Vec<f64>, Vec<f64>)> {
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    let mut out = Vec::new();
    for n in [5, 12, 40] {
        let meas: Vec<f64> = (0..n).map(|_| -12.0 + 5.0 * rng.gen::<f64>()).collect();
        let pred: Vec<f64> = meas
            .iter()
            .map(|m| m + 1.2 * (rng.gen::<f64>() - 0.5))
            .collect();
        out.push((pred, meas));
    }
    // Ties in both variables (values rounded to 0.5) exercise Kendall's τ_b.
    let meas: Vec<f64> = (0..20)
        .map(|_| ((-12.0 + 5.0 * rng.gen::<f64>()) * 2.0).round() / 2.0)
        .collect();
    let pred: Vec<f64> = meas
        .iter()
        .map(|m| ((m + 1.5 * (rng.gen::<f64>() - 0.5)) * 2.0).round() / 2.0)
        .collect();
    out.push((pred, meas));
    out
}

#[test]
fn pearson_kendall_rmse_mue_match_scipy() {
    // Reference: scipy.stats.pearsonr, scipy.stats.kendalltau (τ_b; Kendall 1938,
    // Biometrika 30, 81) and numpy (tests/python/stats_scipy.py).
    let cases = cases();
    let input = json!({ "cases": cases.iter().map(|(p, m)| json!({"pred": p, "meas": m})).collect::<Vec<_>>() });
    let Some(out) = python("stats_scipy.py", input) else {
        return;
    };
    for ((p, m), r) in cases.iter().zip(out["results"].as_array().unwrap()) {
        let close = |a: f64, key: &str| {
            let b = r[key].as_f64().unwrap();
            assert!(
                (a - b).abs() < 1e-10,
                "{key}: {a} vs scipy {b} (n = {})",
                p.len()
            );
        };
        close(pearson(p, m).unwrap(), "pearson");
        close(kendall_tau(p, m).unwrap(), "kendall");
        close(rmse(p, m).unwrap(), "rmse");
        close(mue(p, m).unwrap(), "mue");
    }
}

#[test]
fn kendall_tau_by_hand() {
    // Kendall 1938: x = 1..5, y = 1 3 2 5 4 → 10 pairs, 2 discordant (2–3, 4–5),
    // τ = (8 − 2)/10 = 0.6.
    let x = [1.0, 2.0, 3.0, 4.0, 5.0];
    let y = [1.0, 3.0, 2.0, 5.0, 4.0];
    assert!((kendall_tau(&x, &y).unwrap() - 0.6).abs() < 1e-12);
    assert!(kendall_tau(&x, &[2.0; 5]).is_none());
    assert!(pearson(&x, &[2.0; 5]).is_none());
}

#[test]
fn perfect_predictions() {
    let m = [-9.0, -8.0, -10.5, -7.2, -8.8];
    let s = compare(&m, &m, 1);
    assert_eq!(s.rmse.unwrap().value, 0.0);
    assert_eq!(s.mue.unwrap().value, 0.0);
    assert!((s.pearson_r.unwrap().value - 1.0).abs() < 1e-12);
    assert!((s.r2.unwrap().value - 1.0).abs() < 1e-12);
    assert!((s.kendall_tau.unwrap().value - 1.0).abs() < 1e-12);
}

#[test]
fn bootstrap_intervals_are_seeded_and_bracket_the_estimate() {
    let (p, m) = cases().remove(2);
    let a = compare_with(&p, &m, 42, 500);
    let b = compare_with(&p, &m, 42, 500);
    let c = compare_with(&p, &m, 43, 500);
    assert_eq!(a, b, "same seed, same intervals");
    assert_ne!(a.rmse, c.rmse, "another seed draws other resamples");
    for i in [a.rmse, a.mue, a.pearson_r, a.r2, a.kendall_tau] {
        let i = i.unwrap();
        assert!(i.low < i.high, "{i:?}");
        // The percentile interval of a smooth statistic contains its point value
        // for a sample this size.
        assert!(i.low <= i.value && i.value <= i.high, "{i:?}");
    }
    assert_eq!(a.n, 40);
    assert_eq!(a.resamples, 500);
}

#[test]
fn small_samples_leave_correlations_undefined() {
    let s = compare(&[1.0, 2.0], &[1.5, 2.5], 1);
    assert_eq!(s.n, 2);
    assert!((s.rmse.unwrap().value - 0.5).abs() < 1e-12);
    assert!(s.pearson_r.is_none() && s.kendall_tau.is_none() && s.r2.is_none());
    let empty = compare(&[], &[], 1);
    assert!(empty.rmse.is_none());
}

#[test]
fn per_ligand_statistics_leave_out_anchored_ligands_and_match_scipy_on_the_rest() {
    // Reference: scipy.stats.pearsonr / kendalltau and numpy RMSE/MUE
    // (tests/python/stats_scipy.py) on the pairs that remain once the ligand
    // whose ΔG is fixed by its own measurement (the only measured ligand of
    // its part of the network) is left out.
    use legwork::network::stats::compare_estimates;
    use legwork::network::{solve, Measured, MeasuredKind, NetworkEdge};
    let edge = |a: &str, b: &str, ddg| NetworkEdge {
        a: a.into(),
        b: b.into(),
        ddg,
        sigma: 0.25,
    };
    let meas = |l: &str, dg| Measured {
        ligand: l.into(),
        dg,
        kind: MeasuredKind::Dg,
        value: dg,
        unit: "kcal/mol".into(),
        line: 0,
    };
    let edges = [
        edge("p1", "p2", -0.7),
        edge("p2", "p3", 0.9),
        edge("p3", "p4", -1.4),
        edge("p4", "p5", 0.6),
        edge("p1", "p5", -0.2),
        edge("q1", "q2", 0.8),
    ];
    let measured = [
        meas("p1", -8.1),
        meas("p2", -9.0),
        meas("p3", -7.9),
        meas("p4", -9.6),
        meas("p5", -8.6),
        meas("q1", -6.5),
    ];
    let fit = solve(&edges, &measured, None).unwrap();
    let c = compare_estimates(&fit.ligands, &[], &measured, 9);
    assert_eq!(c.anchored, ["q1"]);
    assert_eq!(c.ligands.n, 5);
    let (p, m): (Vec<f64>, Vec<f64>) = fit
        .ligands
        .iter()
        .filter(|l| l.ligand.starts_with('p'))
        .map(|l| (l.dg, l.measured.unwrap()))
        .unzip();
    let Some(out) = python(
        "stats_scipy.py",
        json!({ "cases": [{"pred": p, "meas": m}] }),
    ) else {
        return;
    };
    let r = &out["results"][0];
    let close = |a: f64, key: &str| {
        let b = r[key].as_f64().unwrap();
        assert!((a - b).abs() < 1e-10, "{key}: {a} vs scipy {b}");
    };
    close(c.ligands.rmse.unwrap().value, "rmse");
    close(c.ligands.mue.unwrap().value, "mue");
    close(c.ligands.pearson_r.unwrap().value, "pearson");
    close(c.ligands.kendall_tau.unwrap().value, "kendall");
}
