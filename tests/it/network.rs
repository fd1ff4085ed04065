//! The network: weighted least squares, offsets, cycle closure, hysteresis, flags.

use legwork::network::stats::{compare_all, compare_estimates, rmse};
use legwork::network::{solve, Anchor, Measured, MeasuredKind, NetworkEdge, NetworkError, Offset};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde_json::json;

/// Runs a reference script with LEGWORK_PYTHON; `None` (after a loud SKIPPED
/// line) when it is not set.
use crate::reference_support::python;

fn id(i: usize) -> String {
    format!("ork-{:02}", i + 1)
}

fn e(a: usize, b: usize, ddg: f64, sigma: f64) -> NetworkEdge {
    NetworkEdge {
        a: id(a),
        b: id(b),
        ddg,
        sigma,
    }
}

fn measured(i: usize, dg: f64) -> Measured {
    Measured {
        ligand: id(i),
        dg,
        kind: MeasuredKind::Dg,
        value: dg,
        unit: "kcal/mol".into(),
        line: 0,
    }
}

/// A random connected network: a random spanning tree plus extra edges, with
/// ddg = truth difference + noise and random σ.
fn random_network(n: usize, extra: usize, seed: u64) -> (Vec<f64>, Vec<NetworkEdge>) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let truth: Vec<f64> = (0..n).map(|_| -10.0 + 4.0 * rng.gen::<f64>()).collect();
    let mut edges = Vec::new();
    let mut add = |a: usize, b: usize, rng: &mut ChaCha8Rng| {
        let s = 0.1 + 0.4 * rng.gen::<f64>();
        let noise = s * (rng.gen::<f64>() - 0.5) * 2.0;
        edges.push(e(a, b, truth[b] - truth[a] + noise, s));
    };
    for b in 1..n {
        let a = rng.gen_range(0..b);
        add(a, b, &mut rng);
    }
    for _ in 0..extra {
        let a = rng.gen_range(0..n);
        let b = (a + rng.gen_range(1..n)) % n;
        add(a, b, &mut rng);
    }
    (truth, edges)
}

#[test]
fn weighted_solve_matches_numpy_lstsq() {
    // Reference: numpy.linalg.lstsq on the design scaled by 1/σ (minimum-norm
    // solution = series-mean gauge) and pinv(AᵀWA) for the covariance
    // (tests/python/network_lstsq.py).
    let (_, edges) = random_network(12, 14, 11);
    let fit = solve(&edges, &[], None).unwrap();
    assert_eq!(fit.offsets, vec![Offset::SeriesMean]);
    // Ligand order is first appearance; map back to indices for numpy.
    let index = |name: &str| fit.ligands.iter().position(|l| l.ligand == name).unwrap();
    let input = json!({
        "n": fit.ligands.len(),
        "edges": edges.iter().map(|x| json!([index(&x.a), index(&x.b), x.ddg, x.sigma])).collect::<Vec<_>>(),
    });
    let Some(out) = python("network_lstsq.py", input) else {
        return;
    };
    let g: Vec<f64> = serde_json::from_value(out["g"].clone()).unwrap();
    let cov: Vec<Vec<f64>> = serde_json::from_value(out["cov"].clone()).unwrap();
    for (i, l) in fit.ligands.iter().enumerate() {
        assert!(
            (l.dg - g[i]).abs() < 1e-9,
            "{}: {} vs numpy {}",
            l.ligand,
            l.dg,
            g[i]
        );
        assert!((l.sigma - cov[i][i].sqrt()).abs() < 1e-9);
        for (mine, theirs) in fit.covariance[i].iter().zip(&cov[i]) {
            assert!((mine - theirs).abs() < 1e-9);
        }
    }
}

#[test]
fn consistent_network_closes_exactly_and_recovers_the_truth() {
    // Analytic: exact differences around any cycle sum to zero (G is a state
    // function) and the least-squares fit reproduces them with zero residuals.
    let truth = [-8.0, -9.5, -7.25, -10.0, -8.75, -9.0];
    let pairs = [
        (0, 1),
        (1, 2),
        (2, 3),
        (3, 0),
        (0, 2),
        (3, 4),
        (4, 5),
        (5, 3),
        (1, 4),
    ];
    let edges: Vec<NetworkEdge> = pairs
        .iter()
        .enumerate()
        .map(|(k, &(a, b))| e(a, b, truth[b] - truth[a], 0.1 + 0.05 * k as f64))
        .collect();
    let fit = solve(&edges, &[], Some("ork-01")).unwrap();
    // Cycle basis size = edges − ligands + components.
    assert_eq!(fit.cycles.len(), pairs.len() - truth.len() + 1);
    for c in &fit.cycles {
        assert!(c.closure.abs() < 1e-12, "{:?}", c);
        assert!(!c.flagged);
        assert!(c.ligands.len() >= 3);
    }
    assert!(fit.chi2 < 1e-20);
    assert_eq!(fit.dof, pairs.len() - truth.len() + 1);
    for f in &fit.edges {
        assert!(f.residual.abs() < 1e-12 && !f.flagged);
    }
    // Reference ligand at 0, others at their true difference from it.
    assert_eq!(
        fit.offsets,
        vec![Offset::Reference {
            ligand: "ork-01".into()
        }]
    );
    for l in &fit.ligands {
        let i: usize = l.ligand[4..].parse::<usize>().unwrap() - 1;
        assert!((l.dg - (truth[i] - truth[0])).abs() < 1e-12);
    }
    assert!(
        fit.ligands[0].sigma.abs() < 1e-12,
        "the reference has no uncertainty"
    );
}

#[test]
fn measured_mean_sets_the_offset() {
    let (_, edges) = random_network(8, 6, 3);
    let meas = [measured(1, -9.0), measured(4, -7.0), measured(6, -8.5)];
    let fit = solve(&edges, &meas, Some("ork-01")).unwrap();
    assert_eq!(fit.offsets, vec![Offset::Measured { count: 3 }]);
    let get = |i: usize| fit.ligands.iter().find(|l| l.ligand == id(i)).unwrap();
    let mean = (get(1).dg + get(4).dg + get(6).dg) / 3.0;
    assert!((mean - (-8.5 / 3.0 - 16.0 / 3.0)).abs() < 1e-12);
    assert_eq!(get(4).measured, Some(-7.0));
    // Differences do not depend on the gauge.
    let free = solve(&edges, &[], None).unwrap();
    let getf = |i: usize| free.ligands.iter().find(|l| l.ligand == id(i)).unwrap();
    assert!(((get(2).dg - get(5).dg) - (getf(2).dg - getf(5).dg)).abs() < 1e-12);
    // Covariance after the offset: Var(mean of measured ligands) = cᵀ Σ c = 0.
    let idx: Vec<usize> = [1, 4, 6]
        .iter()
        .map(|&i| fit.ligands.iter().position(|l| l.ligand == id(i)).unwrap())
        .collect();
    let var: f64 = idx
        .iter()
        .flat_map(|&i| idx.iter().map(move |&j| (i, j)))
        .map(|(i, j)| fit.covariance[i][j] / 9.0)
        .sum();
    assert!(var.abs() < 1e-12, "{var}");
}

#[test]
fn inconsistent_edge_is_flagged_and_its_cycle_does_not_close() {
    // Triangle with one edge 2 kcal/mol off: the closure is 2 and, with σ = 0.1
    // everywhere, far beyond 2σ = 0.35.
    let edges = [
        e(0, 1, 1.0, 0.1),
        e(1, 2, 1.0, 0.1),
        e(0, 2, 4.0, 0.1),
        e(2, 3, 0.5, 0.1),
    ];
    let fit = solve(&edges, &[], None).unwrap();
    assert_eq!(fit.cycles.len(), 1);
    let c = &fit.cycles[0];
    assert!((c.closure.abs() - 2.0).abs() < 1e-12, "{c:?}");
    assert!((c.sigma - (0.03f64).sqrt()).abs() < 1e-12);
    assert!(c.flagged);
    // Equal weights spread the 2.0 misfit evenly: each triangle edge is off by 2/3.
    for f in &fit.edges[..3] {
        assert!((f.residual.abs() - 2.0 / 3.0).abs() < 1e-9);
        assert!(f.flagged);
    }
    // A bridge edge is fitted exactly.
    assert!(fit.edges[3].residual.abs() < 1e-12 && !fit.edges[3].flagged);
}

#[test]
fn edges_run_both_ways_give_hysteresis() {
    let edges = [
        e(0, 1, 1.0, 0.1),
        e(1, 0, -0.8, 0.1),
        e(1, 2, 0.3, 0.1),
        e(2, 1, -0.9, 0.1),
    ];
    let fit = solve(&edges, &[], None).unwrap();
    assert_eq!(fit.hysteresis.len(), 2);
    let h = &fit.hysteresis[0];
    assert_eq!((h.a.as_str(), h.b.as_str()), ("ork-01", "ork-02"));
    assert!((h.forward - 1.0).abs() < 1e-12 && (h.reverse + 0.8).abs() < 1e-12);
    assert!((h.hysteresis - 0.2).abs() < 1e-12);
    assert!((h.sigma - 0.02f64.sqrt()).abs() < 1e-12);
    assert!(!h.flagged);
    let h = &fit.hysteresis[1];
    assert!((h.hysteresis - (-0.6)).abs() < 1e-12 && h.flagged);
    // Parallel edges are merged before the cycle basis: no spurious 2-cycles.
    assert!(fit.cycles.is_empty());
}

#[test]
fn disconnected_parts_get_their_own_offsets_and_a_warning() {
    let edges = [e(0, 1, 1.0, 0.1), e(2, 3, -1.0, 0.2)];
    let fit = solve(&edges, &[measured(0, -8.0)], None).unwrap();
    assert_eq!(fit.offsets.len(), 2);
    assert_eq!(fit.offsets[0], Offset::Measured { count: 1 });
    assert_eq!(fit.offsets[1], Offset::SeriesMean);
    assert!(fit.warnings.iter().any(|w| w.contains("disconnected")));
    assert!((fit.ligands[0].dg - (-8.0)).abs() < 1e-12);
    assert!((fit.ligands[1].dg - (-7.0)).abs() < 1e-12);
    assert!((fit.ligands[2].dg + fit.ligands[3].dg).abs() < 1e-12);
    assert_eq!(fit.covariance[0][2], 0.0);
}

#[test]
fn bad_inputs_are_errors() {
    assert_eq!(solve(&[], &[], None), Err(NetworkError::Empty));
    assert!(matches!(
        solve(&[e(0, 1, 1.0, 0.0)], &[], None),
        Err(NetworkError::BadSigma { .. })
    ));
    assert!(matches!(
        solve(&[e(0, 0, 1.0, 0.1)], &[], None),
        Err(NetworkError::SelfLoop { .. })
    ));
    let err = solve(&[e(0, 1, 1.0, 0.1)], &[], Some("ork-99")).unwrap_err();
    assert!(err.to_string().contains("ork-99"));
}

#[test]
fn residuals_satisfy_the_normal_equations() {
    // Least squares (Gauss): at the minimum, Aᵀ W r = 0, i.e. at every ligand
    // the weighted residuals of its edges cancel (in − out).
    for seed in 0..20 {
        let (_, edges) = random_network(9, 8, 100 + seed);
        let fit = solve(&edges, &[], None).unwrap();
        let mut net = std::collections::HashMap::<String, f64>::new();
        for f in &fit.edges {
            let w = 1.0 / (f.sigma * f.sigma);
            *net.entry(f.b.clone()).or_default() += w * f.residual;
            *net.entry(f.a.clone()).or_default() -= w * f.residual;
        }
        for (l, v) in net {
            assert!(v.abs() < 1e-8, "seed {seed}, {l}: {v}");
        }
        // χ² = Σ w r² and dof = E − N + 1 for a connected network.
        assert_eq!(fit.dof, edges.len() - 9 + 1);
    }
}

#[test]
fn exact_demo_edges_reproduce_the_exact_demo_ligands() {
    // The demo engine's analytic answers (demo-data/exact.csv per edge,
    // exact-ligands.csv per ligand relative to the series mean) form a perfectly
    // consistent network: the solve must return them, with zero closure.
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data");
    let mut edges = Vec::new();
    for rec in csv::Reader::from_path(root.join("exact.csv"))
        .unwrap()
        .records()
    {
        let rec = rec.unwrap();
        edges.push(NetworkEdge {
            a: rec[0].to_string(),
            b: rec[1].to_string(),
            ddg: rec[2].parse().unwrap(),
            sigma: 0.05,
        });
    }
    let fit = solve(&edges, &[], None).unwrap();
    assert_eq!(fit.cycles.len(), edges.len() - fit.ligands.len() + 1);
    for c in &fit.cycles {
        // exact.csv is printed to 6 decimals, so closures are zero to rounding.
        assert!(c.closure.abs() < 5e-6, "{c:?}");
    }
    let mut n = 0;
    for rec in csv::Reader::from_path(root.join("exact-ligands.csv"))
        .unwrap()
        .records()
    {
        let rec = rec.unwrap();
        let exact: f64 = rec[1].parse().unwrap();
        let l = fit.ligands.iter().find(|l| l.ligand == rec[0]).unwrap();
        assert!(
            (l.dg - exact).abs() < 5e-6,
            "{}: {} vs exact {exact}",
            l.ligand,
            l.dg
        );
        n += 1;
    }
    assert_eq!(n, fit.ligands.len());
}

#[test]
fn one_measured_ligand_anchors_its_part_and_matches_numpy_with_that_gauge() {
    // Reference: numpy.linalg.lstsq with the measured ligand's column removed
    // and its value moved to the right-hand side; σ relative to it from the
    // inverse of the reduced normal matrix (tests/python/network_lstsq.py).
    let (_, edges) = random_network(9, 8, 23);
    let anchor = 4;
    let fit = solve(&edges, &[measured(anchor, -9.25)], None).unwrap();
    assert_eq!(fit.offsets, vec![Offset::Measured { count: 1 }]);
    let index = |name: &str| fit.ligands.iter().position(|l| l.ligand == name).unwrap();
    let k = index(&id(anchor));
    let input = json!({
        "n": fit.ligands.len(),
        "edges": edges.iter().map(|x| json!([index(&x.a), index(&x.b), x.ddg, x.sigma])).collect::<Vec<_>>(),
        "anchor": [k, -9.25],
    });
    // The anchor is marked, whatever numpy says.
    for (i, l) in fit.ligands.iter().enumerate() {
        let want = (i == k).then_some(Anchor::Measured);
        assert_eq!(l.anchor, want, "{}", l.ligand);
    }
    assert_eq!(fit.ligands[k].dg, -9.25);
    let Some(out) = python("network_lstsq.py", input) else {
        return;
    };
    let g: Vec<f64> = serde_json::from_value(out["g_anchor"].clone()).unwrap();
    let s: Vec<f64> = serde_json::from_value(out["sigma_anchor"].clone()).unwrap();
    for (i, l) in fit.ligands.iter().enumerate() {
        assert!(
            (l.dg - g[i]).abs() < 1e-9,
            "{}: {} vs {}",
            l.ligand,
            l.dg,
            g[i]
        );
        assert!(
            (l.sigma - s[i]).abs() < 1e-9,
            "{}: σ {} vs {}",
            l.ligand,
            l.sigma,
            s[i]
        );
    }
}

#[test]
fn a_ligand_fixed_by_its_own_measurement_is_not_scored_against_experiment() {
    // Two parts: {1..5} with three measured ligands, {6, 7} with one (ligand 6
    // is anchored: its ΔG equals its measurement by construction). The
    // per-ligand statistics must use the three, and say so.
    let edges = [
        e(0, 1, -0.8, 0.2),
        e(1, 2, 0.5, 0.2),
        e(2, 3, -0.3, 0.2),
        e(3, 4, 1.1, 0.2),
        e(0, 4, 0.4, 0.2),
        e(5, 6, -0.6, 0.3),
    ];
    let meas = [
        measured(0, -8.0),
        measured(2, -8.9),
        measured(4, -7.1),
        measured(5, -10.2),
    ];
    let fit = solve(&edges, &meas, None).unwrap();
    let anchored: Vec<&str> = fit
        .ligands
        .iter()
        .filter(|l| l.anchor.is_some())
        .map(|l| l.ligand.as_str())
        .collect();
    assert_eq!(anchored, ["ork-06"]);
    let c = compare_estimates(&fit.ligands, &[], &meas, 3);
    assert_eq!(c.ligands.n, 3);
    assert_eq!(c.anchored, ["ork-06"]);
    // RMSE over exactly the three scored ligands, by hand from the fit.
    let (p, m): (Vec<f64>, Vec<f64>) = [0, 2, 4]
        .iter()
        .map(|&i| {
            let l = fit.ligands.iter().find(|l| l.ligand == id(i)).unwrap();
            (l.dg, l.measured.unwrap())
        })
        .unzip();
    assert!((c.ligands.rmse.unwrap().value - rmse(&p, &m).unwrap()).abs() < 1e-12);
    // The pair form finds the same anchor from the edges.
    let results: Vec<legwork::cycle::EdgeResult> = edges
        .iter()
        .map(|x| edge_result(&x.a, &x.b, x.ddg, x.sigma))
        .collect();
    let c2 = compare_all(&fit.ligand_dg(), &results, &meas, 3);
    assert_eq!(c2.anchored, ["ork-06"]);
    assert_eq!(c2.ligands, c.ligands);
    // Edges with both ends measured: none cross; 0→4 is the only one.
    assert_eq!(c2.edges.n, 1);

    // A named reference ligand is an anchor too (σ = 0 by definition).
    let fit = solve(&edges[..5], &[], Some("ork-03")).unwrap();
    let r = fit.ligands.iter().find(|l| l.ligand == "ork-03").unwrap();
    assert_eq!((r.anchor, r.sigma), (Some(Anchor::Reference), 0.0));
    assert!(fit
        .ligands
        .iter()
        .filter(|l| l.anchor.is_none())
        .all(|l| l.sigma > 0.0));
}

/// An edge result with only the fields the statistics read.
fn edge_result(a: &str, b: &str, ddg: f64, sigma: f64) -> legwork::cycle::EdgeResult {
    use legwork::cycle::{combine_edge, LegSpec, LegValue, Subject};
    let leg = LegSpec {
        name: "l".into(),
        sign: 1.0,
        correction: 0.0,
        restraint: None,
    };
    let v = LegValue {
        leg: "l".into(),
        replica: 1,
        dg: ddg,
        sigma,
    };
    let s = Subject::Edge {
        a: a.into(),
        b: b.into(),
    };
    combine_edge(
        &s,
        &[leg],
        &[v],
        298.15,
        legwork::units::EnergyUnit::KcalPerMol,
    )
    .unwrap()
}
