//! A synthetic but realistic set of results (fictional "Orrin kinase" ligands,
//! invented numbers), built through the library's own assembly so the report
//! tests render what a real campaign would produce. Shared by tests/report.rs and
//! tests/browser.rs; its own test checks the fixture survives summary.json.

#![allow(dead_code)]

use legwork::analysis::{
    assemble, CampaignInfo, Convergence, LegReplica, MethodValue, MissingStatus, MissingWork,
    Results, WindowSummary,
};
use legwork::collect::experiment::parse_measured;
use legwork::cycle::{CampaignKind, LegSpec};
use legwork::units::EnergyUnit;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::f64::consts::PI;

/// Invented "true" ΔG of the six fictional ligands, kcal/mol.
pub const TRUE_DG: [(&str, f64); 6] = [
    ("ork-01", -8.1),
    ("ork-02", -9.0),
    ("ork-03", -7.4),
    ("ork-04", -10.2),
    ("ork-05", -8.8),
    ("ork-06", -9.6),
];

/// Edges: a ring, a chord, and ork-02 → ork-01 run in reverse as well.
pub const EDGES: [(&str, &str); 8] = [
    ("ork-01", "ork-02"),
    ("ork-02", "ork-03"),
    ("ork-03", "ork-04"),
    ("ork-04", "ork-05"),
    ("ork-05", "ork-06"),
    ("ork-06", "ork-01"),
    ("ork-01", "ork-04"),
    ("ork-02", "ork-01"),
];

fn truth(id: &str) -> f64 {
    TRUE_DG.iter().find(|t| t.0 == id).unwrap().1
}

fn lambdas(k: usize) -> Vec<f64> {
    // Denser near the ends: λ = (1 − cos(π i/(K−1)))/2.
    (0..k)
        .map(|i| 0.5 * (1.0 - (PI * i as f64 / (k - 1) as f64).cos()))
        .collect()
}

fn leg(
    subject: &str,
    leg: &str,
    replica: u32,
    sign: f64,
    dg: f64,
    rng: &mut ChaCha8Rng,
) -> LegReplica {
    let k = 12;
    let sigma = 0.12 + 0.04 * rng.gen::<f64>();
    // The chord edge's legs have two λ components (charge, then van der Waals);
    // the others one. Either way ∫ cos(πλ) dλ = 0 keeps the TI area near dg.
    let components: &[(Option<&str>, f64)] = if subject == "ork-01+ork-04" {
        &[(Some("charge"), 0.3), (Some("vdw"), 0.7)]
    } else {
        &[(None, 1.0)]
    };
    let mut windows = Vec::new();
    for &(component, share) in components {
        for l in lambdas(k) {
            windows.push(WindowSummary {
                lambda: l,
                component: component.map(str::to_string),
                dudl_mean: share * dg
                    + 9.0 * share * (PI * l).cos()
                    + 0.3 * (rng.gen::<f64>() - 0.5),
                dudl_sem: 0.2 + 0.3 * rng.gen::<f64>(),
                frames: Some(2000),
                discarded: Some(rng.gen_range(20..200)),
                inefficiency: Some(3.0 + 4.0 * rng.gen::<f64>()),
            });
        }
    }
    let mut overlap = vec![vec![0.0; k]; k];
    for (i, row) in overlap.iter_mut().enumerate() {
        let raw: Vec<f64> = (0..k)
            .map(|j| (-1.3 * (i as f64 - j as f64).abs()).exp())
            .collect();
        let s: f64 = raw.iter().sum();
        for (j, v) in raw.into_iter().enumerate() {
            row[j] = v / s;
        }
    }
    let min_adj = (0..k - 1)
        .map(|i| overlap[i][i + 1])
        .fold(f64::INFINITY, f64::min);
    let fractions: Vec<f64> = (1..=10).map(|i| i as f64 / 10.0).collect();
    let drift = 0.5 * (rng.gen::<f64>() - 0.5);
    let convergence = Convergence {
        forward: fractions
            .iter()
            .map(|f| dg + drift * (-4.0 * f).exp() / (-4.0f64).exp() * 0.02 + 0.4 * (1.0 - f))
            .collect(),
        forward_sigma: fractions.iter().map(|f| sigma / f.sqrt()).collect(),
        reverse: fractions.iter().map(|f| dg - 0.25 * (1.0 - f)).collect(),
        reverse_sigma: fractions.iter().map(|f| sigma / f.sqrt()).collect(),
        fractions,
    };
    let methods: Vec<MethodValue> = [("ti", 0.05), ("bar", 0.01), ("mbar", 0.0)]
        .iter()
        .map(|(m, off)| MethodValue {
            method: m.to_string(),
            dg: dg + off,
            sigma,
        })
        .collect();
    let ti = methods.iter().find(|m| m.method == "ti").cloned();
    LegReplica {
        subject: subject.to_string(),
        leg: leg.to_string(),
        replica,
        sign,
        dg,
        sigma,
        methods,
        overlap,
        min_adjacent_overlap: Some(min_adj),
        windows,
        ti,
        convergence: Some(convergence),
        warnings: if replica == 3 && subject == "ork-03+ork-04" {
            vec!["window 11: equilibration detection kept only 180 of 2000 frames".to_string()]
        } else {
            Vec::new()
        },
    }
}

/// The campaign description the fixture assembles with.
pub fn info() -> CampaignInfo {
    CampaignInfo {
        name: "orrin-fixture".into(),
        kind: CampaignKind::Relative,
        unit: EnergyUnit::KcalPerMol,
        temperature_k: 298.15,
        estimator: "mbar".into(),
        legs: vec![
            LegSpec {
                name: "complex".into(),
                sign: 1.0,
                correction: 0.0,
                restraint: None,
            },
            LegSpec {
                name: "solvent".into(),
                sign: -1.0,
                correction: 0.0,
                restraint: None,
            },
        ],
        reference: None,
        seed: 7,
    }
}

/// Invented measurements (one given as an IC50 to exercise that path).
pub const MEASURED_CSV: &str = "# invented values for a fictional target\nligand,kind,value,unit\nork-01,dg,-8.3,kcal/mol\nork-02,ki,0.35,uM\nork-03,kd,3.1,uM\n# a comment in the middle\nork-04,dg,-10.0,kcal/mol\nork-05,ic50,420,nM\nork-06,dg,-9.9,kcal/mol\n";

/// Builds the fixture results.
pub fn results() -> Results {
    let mut rng = ChaCha8Rng::seed_from_u64(20261201);
    let mut legs = Vec::new();
    for (a, b) in EDGES {
        let subject = format!("{a}+{b}");
        let ddg = truth(b) - truth(a);
        let solvent = 2.0 + 3.0 * rng.gen::<f64>();
        // One edge carries a systematic error so the report has something to flag.
        let bias = if a == "ork-05" { 1.4 } else { 0.0 };
        let replicas = if a == "ork-06" { 2 } else { 3 };
        for r in 1..=replicas {
            let noise = |rng: &mut ChaCha8Rng| 0.15 * (rng.gen::<f64>() - 0.5) * 2.0;
            let c = solvent + ddg + bias + noise(&mut rng);
            let s = solvent + noise(&mut rng);
            legs.push(leg(&subject, "complex", r, 1.0, c, &mut rng));
            legs.push(leg(&subject, "solvent", r, -1.0, s, &mut rng));
        }
    }
    let measured = parse_measured(MEASURED_CSV, "fixture", 298.15, EnergyUnit::KcalPerMol).unwrap();
    let missing = vec![MissingWork {
        subject: "ork-06+ork-01".into(),
        leg: "complex".into(),
        replica: 3,
        windows_done: 9,
        windows_total: 12,
        status: MissingStatus::Unfinished,
        note: "3 windows failed twice".into(),
    }];
    assemble(&info(), legs, measured, missing).unwrap()
}

#[test]
fn fixture_round_trips_through_summary_json() {
    let r = results();
    let text = serde_json::to_string(&r).unwrap();
    let back: Results = serde_json::from_str(&text).unwrap();
    // serde_json parses floats to within an ulp, not always exactly, so compare
    // the numbers the report shows with a tolerance.
    let close = |x: f64, y: f64| (x - y).abs() <= 1e-12 * (1.0 + x.abs());
    assert_eq!(back.legs.len(), r.legs.len());
    for (a, b) in back.edges.iter().zip(&r.edges) {
        assert_eq!(a.subject, b.subject);
        assert!(close(a.ddg, b.ddg) && close(a.sigma, b.sigma));
        assert_eq!(a.flags, b.flags);
    }
    for (a, b) in back.ligands.iter().zip(&r.ligands) {
        assert!(close(a.dg, b.dg) && close(a.sigma, b.sigma));
    }
    assert_eq!(back.warnings, r.warnings);
    assert_eq!(r.edges.len(), EDGES.len());
    assert_eq!(r.ligands.len(), TRUE_DG.len());
}
