//! Experimental design (`legwork_numerics::design`, `legwork propose`): λ
//! schedules from the thermodynamic length, A-optimal frame allocation, and edge
//! lists chosen by expected variance, each checked against a closed form or
//! scipy.

use crate::estimate_support::{normal, rng, write_table};
use crate::reference_support::python;
use legwork::collect::{LegSamples, WindowSamples};
use legwork::estimate::{estimate_leg, EstimateOptions, Method};
use legwork_numerics::design::allocate::{
    allocate, uniform, AllocationProblem, Network, Objective, WindowVariance,
};
use legwork_numerics::design::edges::{
    extra_edges, minimum_spanning_tree, propose_edges, tree_plus_random, Candidates, EdgeRules,
};
use legwork_numerics::design::length::{
    predicted_adjacent_overlap, propose_schedule, LengthProfile, LengthSource, ScheduleRequest,
};
use legwork_numerics::design::{laplacian_pinv, sum_of_variances};
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use serde_json::json;
use std::collections::VecDeque;

// ---------------------------------------------------------------------------
// The analytic case: harmonic states with linearly interpolated stiffness.
//
// u_λ(x) = ½ k_λ |x|² (reduced), k_λ = (1 − λ) k_A + λ k_B, x ∈ ℝ^d. In state λ,
// k_λ|x|² is χ²_d (mean d, variance 2d), and du/dλ = ½ (k_B − k_A)|x|², so
//   ⟨δ(du/dλ)²⟩_λ = (k_B − k_A)² / (4 k_λ²) · 2d = (d/2) (Δk / k_λ)²,
// the thermodynamic length density is sqrt(d/2) |Δk| / k_λ, and
//   ℓ(λ) = sqrt(d/2) ln(k_λ / k_A),   L = sqrt(d/2) ln(k_B / k_A).
// Equal length per step means k at the states is geometric:
//   λ_t = k_A ((k_B/k_A)^{t/(K−1)} − 1) / (k_B − k_A).
// (Derived here from the χ² moments; the length itself is that of Shenfeld, Xu,
// Eastwood, Dror & Shaw 2009, Phys. Rev. E 80, 046705.)
// ---------------------------------------------------------------------------

const KA: f64 = 1.0;
const KB: f64 = 20.0;
const DIM: usize = 3;

fn k_at(l: f64) -> f64 {
    (1.0 - l) * KA + l * KB
}

fn exact_variance(l: f64) -> f64 {
    DIM as f64 / 2.0 * ((KB - KA) / k_at(l)).powi(2)
}

fn exact_total() -> f64 {
    (DIM as f64 / 2.0).sqrt() * (KB / KA).ln()
}

fn exact_schedule(k: usize) -> Vec<f64> {
    (0..k)
        .map(|t| KA * ((KB / KA).powf(t as f64 / (k - 1) as f64) - 1.0) / (KB - KA))
        .collect()
}

fn uniform_lambdas(k: usize) -> Vec<f64> {
    (0..k).map(|i| i as f64 / (k - 1) as f64).collect()
}

/// A leg of the stiffness path sampled exactly (independent draws).
fn stiffness_leg(r: &mut ChaCha8Rng, lambdas: &[f64], frames: usize) -> LegSamples {
    let windows = (0..lambdas.len())
        .map(|s| {
            let sd = 1.0 / k_at(lambdas[s]).sqrt();
            let mut red = Vec::with_capacity(frames * lambdas.len());
            let mut dudl = Vec::with_capacity(frames);
            for _ in 0..frames {
                let r2: f64 = (0..DIM).map(|_| (sd * normal(r)).powi(2)).sum();
                red.extend(lambdas.iter().map(|&l| 0.5 * k_at(l) * r2));
                dudl.push(0.5 * (KB - KA) * r2);
            }
            WindowSamples::from_reduced(s, 298.15, lambdas.to_vec(), red, dudl)
        })
        .collect();
    LegSamples::from_windows(windows)
}

fn no_equilibration() -> EstimateOptions {
    EstimateOptions {
        methods: vec![Method::Mbar],
        equilibration: legwork::estimate::Equilibration::None,
        subsample: legwork::estimate::Subsample::None,
        ..Default::default()
    }
}

#[test]
fn exact_variances_give_the_closed_form_length_and_schedule() {
    let err = |nodes: usize| {
        let lam = uniform_lambdas(nodes);
        let var: Vec<f64> = lam.iter().map(|&l| exact_variance(l)).collect();
        let p = LengthProfile::from_dudl_variance(&lam, &var).unwrap();
        let s = propose_schedule(
            &p,
            &ScheduleRequest {
                windows: Some(12),
                ..Default::default()
            },
        )
        .unwrap();
        let lam_err = s
            .lambdas
            .iter()
            .zip(exact_schedule(12))
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        ((p.total() - exact_total()).abs() / exact_total(), lam_err)
    };
    let (len_coarse, lam_coarse) = err(101);
    let (len_fine, lam_fine) = err(401);
    // The trapezoid rule of the density converges as h²: four times the nodes,
    // about a sixteenth of the error (asserted: at least ten times smaller).
    assert!(len_fine < 2e-4, "length error {len_fine}");
    assert!(len_fine * 10.0 < len_coarse, "{len_fine} vs {len_coarse}");
    assert!(lam_fine < 2e-4, "schedule error {lam_fine}");
    assert!(lam_fine * 8.0 < lam_coarse, "{lam_fine} vs {lam_coarse}");
}

#[test]
fn a_pilot_of_samples_gives_the_closed_form_schedule_after_one_refinement() {
    let mut r = rng(161);
    let pilot = uniform_lambdas(11);
    let req = ScheduleRequest {
        windows: Some(12),
        ..Default::default()
    };
    let exact = exact_schedule(12);
    let dev = |l: &[f64]| {
        l.iter()
            .zip(&exact)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max)
    };
    for source in [LengthSource::DudlVariance, LengthSource::NeighbourEnergy] {
        let leg = stiffness_leg(&mut r, &pilot, 4000);
        let p1 = LengthProfile::from_samples(&leg, &[], Some(source)).unwrap();
        // The length from samples: the coarse uniform pilot overestimates the
        // steep start (trapezoid) or underestimates it (finite differences);
        // within 15 % either way.
        let rel = (p1.total() - exact_total()).abs() / exact_total();
        assert!(
            rel < 0.15,
            "{source:?}: length {} vs {}",
            p1.total(),
            exact_total()
        );
        let s1 = propose_schedule(&p1, &req).unwrap();
        assert!(
            dev(&s1.lambdas) < dev(&pilot[..].iter().copied().chain([1.0]).collect::<Vec<_>>())
        );
        // A second pilot on the proposed states: the schedule converges on the
        // closed form to sampling noise.
        let leg2 = stiffness_leg(&mut r, &s1.lambdas, 4000);
        let p2 = LengthProfile::from_samples(&leg2, &[], Some(source)).unwrap();
        let rel2 = (p2.total() - exact_total()).abs() / exact_total();
        assert!(
            rel2 < 0.03,
            "{source:?}: refined length {} vs {}",
            p2.total(),
            exact_total()
        );
        let s2 = propose_schedule(&p2, &req).unwrap();
        assert!(
            dev(&s2.lambdas) < 0.01,
            "{source:?}: {:?} vs {exact:?}",
            s2.lambdas
        );
    }
}

#[test]
fn predicted_overlap_matches_scipy_quadrature() {
    let cases = [
        json!({"positions": [0.0, 1.0], "counts": null}),
        json!({"positions": [0.0, 2.0, 4.0, 6.0, 8.0], "counts": null}),
        json!({"positions": [0.0, 0.5, 3.5, 4.0, 7.5], "counts": [1.0, 2.0, 1.0, 3.0, 1.0]}),
    ];
    for case in cases {
        let Some(out) = python("design_overlap.py", case.clone()) else {
            return;
        };
        let pos: Vec<f64> = serde_json::from_value(case["positions"].clone()).unwrap();
        let counts: Option<Vec<f64>> = serde_json::from_value(case["counts"].clone()).unwrap();
        let ours = predicted_adjacent_overlap(&pos, counts.as_deref());
        let theirs: Vec<f64> = serde_json::from_value(out["overlap"].clone()).unwrap();
        for (a, b) in ours.iter().zip(&theirs) {
            assert!((a - b).abs() < 1e-7, "{ours:?} vs scipy {theirs:?}");
        }
    }
}

#[test]
fn predicted_overlap_matches_mbar_where_the_model_is_exact() {
    // Unit-variance harmonic wells whose centre moves: u_k = (x − μ_k)²/2, a length
    // of exactly |μ_{k+1} − μ_k| per step. MBAR's overlap of many exact samples
    // must match the prediction (Klimovich, Shirts & Mobley 2015 define the
    // matrix; the limit is the integral the prediction evaluates).
    let mut r = rng(162);
    let mu = [0.0, 1.5, 3.5, 6.5, 8.0];
    let lam = uniform_lambdas(mu.len());
    let frames = 20000;
    let windows = (0..mu.len())
        .map(|s| {
            let mut red = Vec::with_capacity(frames * mu.len());
            for _ in 0..frames {
                let x = mu[s] + normal(&mut r);
                red.extend(mu.iter().map(|m| 0.5 * (x - m) * (x - m)));
            }
            WindowSamples::from_reduced(s, 298.15, lam.clone(), red, Vec::new())
        })
        .collect();
    let leg = LegSamples::from_windows(windows);
    let est = estimate_leg(&leg, &no_equilibration()).unwrap();
    let o = est.overlap.unwrap();
    let predicted = predicted_adjacent_overlap(&mu, None);
    for i in 0..mu.len() - 1 {
        let measured = o[i][i + 1].min(o[i + 1][i]);
        assert!(
            (measured - predicted[i]).abs() < 0.01,
            "pair {i}: MBAR {measured} vs predicted {}",
            predicted[i]
        );
    }
    // And the neighbour energy spread recovers the steps.
    let p = LengthProfile::from_samples(&leg, &[], Some(LengthSource::NeighbourEnergy)).unwrap();
    for (i, s) in p.steps(&lam).iter().enumerate() {
        let want = mu[i + 1] - mu[i];
        assert!((s - want).abs() < 0.03 * want, "step {i}: {s} vs {want}");
    }
}

#[test]
fn the_fewest_windows_clear_the_overlap_threshold_when_sampled() {
    let mut r = rng(163);
    let pilot = uniform_lambdas(6);
    let leg = stiffness_leg(&mut r, &pilot, 3000);
    let before = estimate_leg(&leg, &no_equilibration()).unwrap();
    let p = LengthProfile::from_samples(&leg, &[], None).unwrap();
    let req = ScheduleRequest {
        min_overlap: 0.1,
        ..Default::default()
    };
    let s = propose_schedule(&p, &req).unwrap();
    let k = s.lambdas.len();
    assert!(s.meets_min_overlap && s.fewest_windows == Some(k));
    // One state fewer would not clear the threshold (by the same model).
    let fewer = propose_schedule(
        &p,
        &ScheduleRequest {
            windows: Some(k - 1),
            ..req.clone()
        },
    )
    .unwrap();
    assert!(!fewer.meets_min_overlap);
    // Run the proposal: its measured MBAR overlap clears the threshold (within
    // the model's and the sampling's error, 0.02), and is better balanced than
    // the pilot's uniform spacing.
    let run = stiffness_leg(&mut r, &s.lambdas, 3000);
    let after = estimate_leg(&run, &no_equilibration()).unwrap();
    let adj = |e: &legwork::estimate::LegEstimate| -> Vec<f64> {
        let o = e.overlap.as_ref().unwrap();
        (0..o.len() - 1)
            .map(|i| o[i][i + 1].min(o[i + 1][i]))
            .collect()
    };
    let measured = adj(&after);
    let min = measured.iter().copied().fold(1.0, f64::min);
    assert!(min > req.min_overlap - 0.02, "measured {measured:?}");
    let spread =
        |v: &[f64]| v.iter().copied().fold(0.0, f64::max) / v.iter().copied().fold(1.0, f64::min);
    assert!(spread(&measured) < spread(&adj(&before)));
}

// ---------------------------------------------------------------------------
// Allocation.
// ---------------------------------------------------------------------------

#[test]
fn independent_windows_get_the_lagrange_optimum() {
    // σ² = Σ a_i / N_i with cost Σ c_i N_i = C fixed: the Lagrange condition
    // a_i / N_i² = μ c_i gives N_i = C sqrt(a_i / c_i) / Σ_j sqrt(a_j c_j)
    // (Neyman allocation; Neyman 1934, J. R. Stat. Soc. 97, 558).
    let mut r = rng(164);
    let windows: Vec<WindowVariance> = (0..7)
        .map(|_| WindowVariance {
            group: 0,
            a: r.gen_range(0.1..5.0),
            frames: 1.0,
            cost: r.gen_range(0.5..3.0),
        })
        .collect();
    let p = AllocationProblem {
        windows: windows.clone(),
        groups: 1,
        network: None,
    };
    let budget = 5000.0;
    let out = allocate(&p, budget, Objective::SumOfVariances).unwrap();
    let total: f64 = budget + windows.iter().map(|w| w.cost * w.frames).sum::<f64>();
    let norm: f64 = windows.iter().map(|w| (w.a * w.cost).sqrt()).sum();
    for (w, e) in windows.iter().zip(&out.extra) {
        let want = total * (w.a / w.cost).sqrt() / norm;
        assert!(
            ((w.frames + e) - want).abs() < 1e-6 * want,
            "{} vs {want}",
            w.frames + e
        );
    }
    assert!((out.spent - budget).abs() < 1e-6 * budget);
    let closed = norm * norm / total; // Σ a_i / N_i at the optimum
    assert!((out.objective_after - closed).abs() < 1e-9 * closed);
}

#[test]
fn windows_already_sampled_enough_get_nothing() {
    // The Karush–Kuhn–Tucker form: N_i = max(N⁰_i, sqrt(a_i / (μ c_i))).
    let w = |a, frames| WindowVariance {
        group: 0,
        a,
        frames,
        cost: 1.0,
    };
    let p = AllocationProblem {
        windows: vec![w(1.0, 1000.0), w(1.0, 10.0), w(4.0, 10.0)],
        groups: 1,
        network: None,
    };
    let out = allocate(&p, 290.0, Objective::SumOfVariances).unwrap();
    assert_eq!(out.extra[0], 0.0);
    // The rest: N ∝ sqrt(a) over 310 frames, 1 : 2.
    assert!((10.0 + out.extra[1] - 310.0 / 3.0).abs() < 1e-6);
    assert!((10.0 + out.extra[2] - 620.0 / 3.0).abs() < 1e-6);
}

/// A chain of 4 ligands, 3 edges of 2 windows each.
fn chain_problem() -> AllocationProblem {
    let a = [[0.4, 2.0], [1.0, 1.0], [3.0, 0.2]];
    let cost = [[1.0, 1.0], [2.0, 2.0], [1.0, 4.0]];
    let mut windows = Vec::new();
    for g in 0..3 {
        for k in 0..2 {
            windows.push(WindowVariance {
                group: g,
                a: a[g][k],
                frames: 20.0,
                cost: cost[g][k],
            });
        }
    }
    AllocationProblem {
        windows,
        groups: 3,
        network: Some(Network {
            ligands: 4,
            edges: vec![(0, 1), (1, 2), (2, 3)],
        }),
    }
}

#[test]
fn a_tree_network_has_a_closed_form_optimum_and_beats_uniform() {
    // On a tree, Σ_{i<j} Var(G_j − G_i) = Σ_e v_e n_e (n − n_e) (each edge lies on
    // the path of n_e (n − n_e) pairs), and the sum of variances in the
    // series-mean gauge is that over n (Klein & Randić 1993, J. Math. Chem. 12,
    // 81). The objective is linear in the v_e, so the optimum is Neyman's with
    // a_w weighted by κ_e = n_e (n − n_e) / n.
    let p = chain_problem();
    let kappa = [3.0 / 4.0, 4.0 / 4.0, 3.0 / 4.0];
    let budget = 3000.0;
    let out = allocate(&p, budget, Objective::SumOfVariances).unwrap();
    let total: f64 = budget + p.windows.iter().map(|w| w.cost * w.frames).sum::<f64>();
    let norm: f64 = p
        .windows
        .iter()
        .map(|w| (kappa[w.group] * w.a * w.cost).sqrt())
        .sum();
    for (w, e) in p.windows.iter().zip(&out.extra) {
        let want = total * (kappa[w.group] * w.a / w.cost).sqrt() / norm;
        assert!(
            ((w.frames + e) - want).abs() < 1e-5 * want,
            "{} vs {want}",
            w.frames + e
        );
    }
    let exact_opt = norm * norm / total;
    assert!((out.objective_after - exact_opt).abs() < 1e-8 * exact_opt);
    // The uniform plan's objective, by the same closed form.
    let u = uniform(&p, budget);
    let mut v = [0.0; 3];
    for (w, e) in p.windows.iter().zip(&u) {
        v[w.group] += w.a / (w.frames + e);
    }
    let uni: f64 = v.iter().zip(kappa).map(|(v, k)| v * k).sum();
    assert!(
        exact_opt < 0.9 * uni,
        "optimum {exact_opt} vs uniform {uni}"
    );
}

#[test]
fn a_network_with_cycles_matches_scipy_and_beats_uniform() {
    let mut r = rng(165);
    let edges = vec![(0, 1), (1, 2), (2, 0), (2, 3), (3, 4), (4, 2), (0, 4)];
    let mut windows = Vec::new();
    for g in 0..edges.len() {
        for _ in 0..3 {
            windows.push(WindowVariance {
                group: g,
                a: r.gen_range(0.05..4.0),
                frames: r.gen_range(10.0..60.0),
                cost: r.gen_range(0.5..2.0),
            });
        }
    }
    let p = AllocationProblem {
        windows: windows.clone(),
        groups: edges.len(),
        network: Some(Network {
            ligands: 5,
            edges: edges.clone(),
        }),
    };
    let budget = 2000.0;
    let out = allocate(&p, budget, Objective::SumOfVariances).unwrap();
    let u = uniform(&p, budget);
    let frames_u: Vec<f64> = windows.iter().zip(&u).map(|(w, e)| w.frames + e).collect();
    let uni = p.objective(&frames_u, Objective::SumOfVariances).unwrap();
    assert!(
        out.objective_after < uni,
        "{} vs {uni}",
        out.objective_after
    );
    let Some(sp) = python(
        "design_allocate.py",
        json!({
            "ligands": 5,
            "edges": edges,
            "windows": windows.iter().map(|w| json!([w.group, w.a, w.frames, w.cost])).collect::<Vec<_>>(),
            "budget": budget,
        }),
    ) else {
        return;
    };
    let theirs = sp["objective"].as_f64().unwrap();
    assert!((sp["uniform"].as_f64().unwrap() - uni).abs() < 1e-9 * uni);
    // Ours is at least as good as SLSQP's, and the allocations agree.
    assert!(
        out.objective_after <= theirs * (1.0 + 1e-7),
        "{} vs scipy {theirs}",
        out.objective_after
    );
    assert!((out.objective_after - theirs).abs() < 1e-5 * theirs);
    let x: Vec<f64> = serde_json::from_value(sp["extra"].clone()).unwrap();
    for (a, b) in out.extra.iter().zip(&x) {
        assert!(
            (a - b).abs() < 2e-2 * (1.0 + b.abs()),
            "{:?} vs scipy {x:?}",
            out.extra
        );
    }
}

#[test]
fn the_largest_sigma_objective_approaches_the_minimax_optimum() {
    // Independent groups, one window each: the minimax optimum equalises the
    // variances, a_g / N_g = t with Σ c_g (N_g − N⁰_g) = B, so
    // t = Σ c_g a_g / (B + Σ c_g N⁰_g) (when no N⁰ binds).
    let a = [1.0, 3.0, 0.5, 2.0];
    let c = [1.0, 2.0, 1.0, 0.5];
    let windows: Vec<WindowVariance> = (0..4)
        .map(|g| WindowVariance {
            group: g,
            a: a[g],
            frames: 5.0,
            cost: c[g],
        })
        .collect();
    let p = AllocationProblem {
        windows,
        groups: 4,
        network: None,
    };
    let budget = 1000.0;
    let out = allocate(&p, budget, Objective::LargestSigma).unwrap();
    let t: f64 = (0..4).map(|g| c[g] * a[g]).sum::<f64>() / (budget + 5.0 * c.iter().sum::<f64>());
    let best = t.sqrt();
    assert!(out.objective_after >= best * (1.0 - 1e-9));
    assert!(
        out.objective_after < best * 1.03,
        "{} vs minimax {best}",
        out.objective_after
    );
    let sum = allocate(&p, budget, Objective::SumOfVariances).unwrap();
    let sum_frames: Vec<f64> = sum.extra.iter().map(|e| e + 5.0).collect();
    assert!(out.objective_after < p.objective(&sum_frames, Objective::LargestSigma).unwrap());
}

#[test]
fn bad_allocation_input_is_refused_with_a_reason() {
    let p = AllocationProblem {
        windows: vec![WindowVariance {
            group: 0,
            a: 1.0,
            frames: 0.0,
            cost: 1.0,
        }],
        groups: 1,
        network: None,
    };
    let e = allocate(&p, 10.0, Objective::SumOfVariances)
        .unwrap_err()
        .to_string();
    assert!(e.contains("0 frames") && e.contains("pilot"), "{e}");
    let mut q = chain_problem();
    q.network.as_mut().unwrap().edges = vec![(0, 1), (1, 0), (2, 3)];
    let e = allocate(&q, 10.0, Objective::SumOfVariances)
        .unwrap_err()
        .to_string();
    assert!(e.contains("do not connect"), "{e}");
}

// ---------------------------------------------------------------------------
// Edges.
// ---------------------------------------------------------------------------

/// An invented series: ligands at random points of a plane (a stand-in for a
/// chemical similarity space); a pair is allowed when the points are within
/// `reach`, with expected variance 0.02 + 0.25 d² (kcal/mol)² (harder the
/// further apart; invented).
fn invented_scores(n: usize, seed: u64) -> Candidates {
    let mut r = rng(seed);
    loop {
        let pts: Vec<(f64, f64)> = (0..n)
            .map(|_| (r.gen::<f64>() * 4.0, r.gen::<f64>() * 4.0))
            .collect();
        let mut c = Candidates::new(n);
        for a in 0..n {
            for b in a + 1..n {
                let d2 = (pts[a].0 - pts[b].0).powi(2) + (pts[a].1 - pts[b].1).powi(2);
                if d2 < 2.2 * 2.2 {
                    c.allow(a, b, 0.02 + 0.25 * d2).unwrap();
                }
            }
        }
        // Every ligand needs two allowed partners to be on a cycle at all.
        let partners = |a: usize| (0..n).filter(|&b| b != a && c.get(a, b).is_some()).count();
        if minimum_spanning_tree(&c).is_ok() && (0..n).all(|a| partners(a) >= 2) {
            return c;
        }
    }
}

fn hops(n: usize, edges: &[(usize, usize)]) -> Vec<Vec<Option<usize>>> {
    let mut adj = vec![Vec::new(); n];
    for &(a, b) in edges {
        adj[a].push(b);
        adj[b].push(a);
    }
    (0..n)
        .map(|s| {
            let mut d = vec![None; n];
            d[s] = Some(0);
            let mut q = VecDeque::from([s]);
            while let Some(u) = q.pop_front() {
                for &v in &adj[u] {
                    if d[v].is_none() {
                        d[v] = Some(d[u].unwrap() + 1);
                        q.push_back(v);
                    }
                }
            }
            d
        })
        .collect()
}

/// A ligand lies on a cycle when some edge at it can be removed with its two
/// ends still connected (checked by brute force, independently of the designer).
fn on_some_cycle(n: usize, edges: &[(usize, usize)], ligand: usize) -> bool {
    edges.iter().enumerate().any(|(k, &(a, b))| {
        if a != ligand && b != ligand {
            return false;
        }
        let rest: Vec<(usize, usize)> = edges
            .iter()
            .enumerate()
            .filter(|&(j, _)| j != k)
            .map(|(_, &e)| e)
            .collect();
        hops(n, &rest)[a][b].is_some()
    })
}

#[test]
fn proposed_networks_beat_a_spanning_tree_with_random_extra_edges() {
    // The target: on 20–50 invented ligands, the expected sum of ligand
    // variances is at most that of a minimum spanning tree plus the same number
    // of extra edges added at random (averaged over seeds), and every ligand is
    // on a cycle.
    for (n, seed) in [(20usize, 1u64), (35, 2), (50, 3)] {
        let c = invented_scores(n, 1600 + seed);
        let rules = EdgeRules {
            edges: (3 * n).div_ceil(2),
            max_path: 6,
            every_ligand_in_cycle: true,
        };
        let p = propose_edges(&c, &rules).unwrap();
        assert_eq!(p.edges.len(), rules.edges);
        let mut uniq = p.edges.clone();
        uniq.sort();
        uniq.dedup();
        assert_eq!(uniq.len(), p.edges.len(), "no pair twice");
        assert!(
            p.edges.iter().all(|&(a, b)| c.get(a, b).is_some()),
            "only allowed pairs"
        );
        for l in 0..n {
            assert!(
                on_some_cycle(n, &p.edges, l),
                "n = {n}: ligand {l} on no cycle"
            );
        }
        let d = hops(n, &p.edges);
        let longest = d
            .iter()
            .flatten()
            .map(|x| x.expect("connected"))
            .max()
            .unwrap();
        assert!(longest <= rules.max_path && longest == p.diameter);
        let with_var = |e: &[(usize, usize)]| -> Vec<(usize, usize, f64)> {
            e.iter()
                .map(|&(a, b)| (a, b, c.get(a, b).unwrap()))
                .collect()
        };
        let ours = sum_of_variances(n, &with_var(&p.edges)).unwrap();
        assert!((ours - p.sum_of_variances).abs() < 1e-9 * ours);
        let extra = rules.edges - (n - 1);
        let seeds = 20;
        let random: f64 = (0..seeds)
            .map(|s| {
                sum_of_variances(n, &with_var(&tree_plus_random(&c, extra, s).unwrap())).unwrap()
            })
            .sum::<f64>()
            / seeds as f64;
        let tree = sum_of_variances(n, &with_var(&minimum_spanning_tree(&c).unwrap())).unwrap();
        eprintln!(
            "n = {n}, {} edges: proposed {ours:.4}, tree + random {random:.4} (mean of {seeds}), tree alone {tree:.4}; {} exchanges",
            rules.edges, p.exchanges
        );
        assert!(ours <= random, "n = {n}: {ours} vs {random}");
        assert!(ours < tree);
    }
}

#[test]
fn the_sum_of_variances_is_numpys_pseudo_inverse() {
    let c = invented_scores(12, 1700);
    let p = propose_edges(
        &c,
        &EdgeRules {
            edges: 18,
            max_path: 5,
            every_ligand_in_cycle: true,
        },
    )
    .unwrap();
    let edges: Vec<_> = p
        .edges
        .iter()
        .map(|&(a, b)| json!([a, b, 0.0, c.get(a, b).unwrap().sqrt()]))
        .collect();
    let Some(out) = python("network_lstsq.py", json!({"n": 12, "edges": edges})) else {
        return;
    };
    let cov: Vec<Vec<f64>> = serde_json::from_value(out["cov"].clone()).unwrap();
    let ours = laplacian_pinv(
        12,
        &p.edges
            .iter()
            .map(|&(a, b)| (a, b, c.get(a, b).unwrap()))
            .collect::<Vec<_>>(),
    )
    .unwrap();
    for i in 0..12 {
        for j in 0..12 {
            assert!((ours[(i, j)] - cov[i][j]).abs() < 1e-9, "({i}, {j})");
        }
    }
}

#[test]
fn extra_edges_after_a_run_are_the_best_single_additions() {
    // The first suggestion must be the allowed pair whose addition gives the
    // smallest largest σ, found here by refitting every candidate in full.
    let c = invented_scores(15, 1800);
    let tree = minimum_spanning_tree(&c).unwrap();
    let mut r = rng(181);
    // "Measured" edge variances: the expected ones, scattered by a factor.
    let current: Vec<(usize, usize, f64)> = tree
        .iter()
        .map(|&(a, b)| (a, b, c.get(a, b).unwrap() * r.gen_range(0.5..2.0)))
        .collect();
    let sug = extra_edges(&current, &c, 3).unwrap();
    assert_eq!(sug.len(), 3);
    let largest = |e: &[(usize, usize, f64)]| {
        let m = laplacian_pinv(15, e).unwrap();
        (0..15).map(|i| m[(i, i)]).fold(0.0, f64::max).sqrt()
    };
    let mut best = (f64::INFINITY, (0, 0));
    for (a, b, v) in c.pairs() {
        if tree.contains(&(a, b)) {
            continue;
        }
        let mut e = current.clone();
        e.push((a, b, v));
        let s = largest(&e);
        if s < best.0 {
            best = (s, (a, b));
        }
    }
    assert_eq!((sug[0].a, sug[0].b), best.1);
    assert!((sug[0].largest_sigma_after - best.0).abs() < 1e-9);
    assert!(sug[2].largest_sigma_after <= sug[1].largest_sigma_after);
    assert!(sug[1].largest_sigma_after <= sug[0].largest_sigma_after);
}

#[test]
fn impossible_rules_are_reported_with_the_edges_they_need() {
    // A star: the centre's partners have no other allowed pair, so no cycle.
    let mut c = Candidates::new(4);
    for b in 1..4 {
        c.allow(0, b, 1.0).unwrap();
    }
    let e = propose_edges(
        &c,
        &EdgeRules {
            edges: 3,
            max_path: 4,
            every_ligand_in_cycle: true,
        },
    )
    .unwrap_err()
    .to_string();
    assert!(e.contains("not on a cycle"), "{e}");
    // A ring needs n edges; asking for fewer says how many.
    let mut ring = Candidates::new(6);
    for a in 0..6 {
        ring.allow(a, (a + 1) % 6, 1.0).unwrap();
    }
    let e = propose_edges(
        &ring,
        &EdgeRules {
            edges: 5,
            max_path: 5,
            every_ligand_in_cycle: true,
        },
    )
    .unwrap_err()
    .to_string();
    assert!(e.contains("took 6 edges"), "{e}");
}

// ---------------------------------------------------------------------------
// The tool side: `legwork propose`.
// ---------------------------------------------------------------------------

fn legwork() -> assert_cmd::Command {
    assert_cmd::Command::cargo_bin("legwork").unwrap()
}

/// The stiffness leg written as window tables (energies in kT).
fn write_stiffness_tables(
    dir: &std::path::Path,
    r: &mut ChaCha8Rng,
    lambdas: &[f64],
    frames: usize,
) -> Vec<std::path::PathBuf> {
    let leg = stiffness_leg(r, lambdas, frames);
    leg.windows
        .iter()
        .map(|w| {
            let rows: Vec<(f64, Vec<f64>)> = (0..w.frames)
                .map(|i| (w.dudl[i], w.row(i).to_vec()))
                .collect();
            let p = dir.join(format!("w{:02}.tsv", w.state));
            write_table(&p, w.state, lambdas, "kT", 298.15, &rows);
            p
        })
        .collect()
}

#[test]
fn propose_lambdas_reads_a_pilot_and_prints_before_and_after() {
    let d = tempfile::tempdir().unwrap();
    let files = write_stiffness_tables(d.path(), &mut rng(190), &uniform_lambdas(11), 3000);
    let out = legwork()
        .args(["propose", "lambdas", "--json", "--windows", "12"])
        .args(&files)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(doc["source"], "dudl_variance");
    let total = doc["total_length"].as_f64().unwrap();
    assert!(
        (total - exact_total()).abs() < 0.15 * exact_total(),
        "{total}"
    );
    let lam: Vec<f64> = serde_json::from_value(doc["proposal"]["lambdas"].clone()).unwrap();
    assert_eq!(lam.len(), 12);
    assert_eq!((lam[0], lam[11]), (0.0, 1.0));
    // Denser where the stiffness changes fastest (near λ = 0), as the closed form.
    assert!(lam[1] < 0.05 && lam[1] > 0.0, "{lam:?}");
    let measured = doc["pilot"]["measured_adjacent_overlap"]
        .as_array()
        .unwrap();
    assert_eq!(measured.len(), 10);
    assert!(doc["caution"]
        .as_str()
        .unwrap()
        .contains("not measurements"));
    // The table says the same in words, and gives a line to paste.
    let text = legwork()
        .args(["propose", "lambdas"])
        .args(&files)
        .output()
        .unwrap();
    let t = String::from_utf8_lossy(&text.stdout);
    assert!(
        t.contains("thermodynamic length") && t.contains("lambdas: [0.0000,"),
        "{t}"
    );
    assert!(t.contains("not measurements"));
    // A bad request: exit 2 with the reason.
    let bad = legwork()
        .args(["propose", "lambdas", "--min-overlap", "0.7"])
        .args(&files)
        .output()
        .unwrap();
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("between 0 and 0.5"));
}

/// An invented difficulty matrix as CSV (upper triangle only).
fn write_scores(path: &std::path::Path, c: &Candidates, ids: &[String]) {
    let mut s = String::from("# invented difficulties\nid");
    for id in ids {
        s.push(',');
        s.push_str(id);
    }
    s.push('\n');
    for a in 0..ids.len() {
        s.push_str(&ids[a]);
        for b in 0..ids.len() {
            s.push(',');
            if b > a {
                if let Some(v) = c.get(a, b) {
                    s.push_str(&format!("{v}"));
                }
            }
        }
        s.push('\n');
    }
    std::fs::write(path, s).unwrap();
}

#[test]
fn propose_edges_writes_an_edge_csv_and_a_figure() {
    let d = tempfile::tempdir().unwrap();
    let n = 24;
    let c = invented_scores(n, 1900);
    let ids: Vec<String> = (0..n).map(|i| format!("ork-{:02}", i + 1)).collect();
    let scores = d.path().join("scores.csv");
    write_scores(&scores, &c, &ids);
    let (csv, svg) = (d.path().join("edges.csv"), d.path().join("net.svg"));
    let out = legwork()
        .args(["propose", "edges", "--json"])
        .arg(&scores)
        .arg("--out")
        .arg(&csv)
        .arg("--figure")
        .arg(&svg)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let text = std::fs::read_to_string(&csv).unwrap();
    let mut lines = text.lines();
    assert_eq!(lines.next(), Some("a,b"));
    let edges: Vec<(usize, usize)> = lines
        .map(|l| {
            let (a, b) = l.split_once(',').unwrap();
            let ix = |x: &str| ids.iter().position(|i| i == x).unwrap();
            (ix(a), ix(b))
        })
        .collect();
    assert_eq!(edges.len(), 36);
    assert!(edges.iter().all(|&(a, b)| c.get(a, b).is_some()));
    for l in 0..n {
        assert!(on_some_cycle(n, &edges, l), "ligand {l}");
    }
    let with_var: Vec<_> = edges
        .iter()
        .map(|&(a, b)| (a, b, c.get(a, b).unwrap()))
        .collect();
    let sum = sum_of_variances(n, &with_var).unwrap();
    let reported = doc["expected_sum_of_variances"].as_f64().unwrap();
    assert!((sum - reported).abs() < 1e-9 * sum);
    assert!(reported <= doc["baseline"]["tree_plus_random_mean"].as_f64().unwrap());
    let fig = std::fs::read_to_string(&svg).unwrap();
    assert!(
        fig.starts_with("<svg") && fig.matches("<circle").count() == n,
        "one dot per ligand"
    );
    // Existing outputs are not overwritten without --force.
    let again = legwork()
        .args(["propose", "edges"])
        .arg(&scores)
        .arg("--out")
        .arg(&csv)
        .output()
        .unwrap();
    assert_eq!(again.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&again.stderr).contains("--force"));
    // A bad cell names the file, the line and the pair.
    std::fs::write(&scores, "id,x,y,z\nx,,1,2\ny,,,oops\nz,,,\n").unwrap();
    let bad = legwork()
        .args(["propose", "edges"])
        .arg(&scores)
        .output()
        .unwrap();
    assert_eq!(bad.status.code(), Some(2));
    let e = String::from_utf8_lossy(&bad.stderr);
    assert!(
        e.contains("scores.csv:3") && e.contains("y+z") && e.contains("hint:"),
        "{e}"
    );
}

#[test]
fn propose_sampling_reads_collected_results() {
    let d = tempfile::tempdir().unwrap();
    let r = crate::report_fixture::results();
    legwork::report::write_all(d.path(), &r).unwrap();
    let out = legwork()
        .args(["propose", "sampling", "--json", "--budget", "20000"])
        .arg(d.path())
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let (before, after, uni) = (
        doc["before"].as_f64().unwrap(),
        doc["after"].as_f64().unwrap(),
        doc["uniform"].as_f64().unwrap(),
    );
    assert!(after < uni && uni < before, "{before} {after} {uni}");
    assert!((doc["spent"].as_f64().unwrap() - 20000.0).abs() < 1e-6 * 20000.0);
    // The model starts from the reported edge σ.
    for (e, got) in r.edges.iter().zip(doc["edges"].as_array().unwrap()) {
        assert_eq!(got["subject"], e.subject.as_str());
        assert!((got["sigma_before"].as_f64().unwrap() - e.sigma).abs() < 1e-9);
    }
    assert_eq!(doc["ligands"].as_array().unwrap().len(), 6);
    let extra: f64 = doc["windows"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w["extra_frames"].as_f64().unwrap())
        .sum();
    let n_windows = doc["windows"].as_array().unwrap().len() as f64;
    assert!(
        extra >= 20000.0 - 1e-6 && extra <= 20000.0 + n_windows,
        "{extra}"
    );
    // An unknown leg in --frame-cost is refused with the legs there are.
    let bad = legwork()
        .args([
            "propose",
            "sampling",
            "--budget",
            "10",
            "--frame-cost",
            "nope=1",
        ])
        .arg(d.path())
        .output()
        .unwrap();
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("hint: the legs are"));
}
