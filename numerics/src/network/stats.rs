//! Predicted against measured: RMSE, MUE, Pearson R, R², Kendall τ, each with a
//! seeded bootstrap 95% interval.

use super::experiment::Measured;
use super::solve::{Anchor, LigandEstimate, NetworkResult};
use crate::cycle::EdgeResult;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// How many bootstrap resamples [`compare`] draws.
pub const BOOTSTRAP_RESAMPLES: usize = 2000;

/// A statistic and its bootstrap 95% interval (percentile method: the 2.5th and
/// 97.5th percentiles of the statistic over resamples of the pairs drawn with
/// replacement; Efron & Tibshirani 1993, from memory).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Interval {
    /// The statistic on the data as given.
    pub value: f64,
    /// Lower end of the 95% interval.
    pub low: f64,
    /// Upper end of the 95% interval.
    pub high: f64,
}

/// Agreement of predictions with measurements.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Stats {
    /// Number of (predicted, measured) pairs.
    pub n: usize,
    /// Root-mean-square error, in the unit of the inputs.
    pub rmse: Option<Interval>,
    /// Mean unsigned error.
    pub mue: Option<Interval>,
    /// Pearson correlation coefficient (needs n ≥ 3 and some spread).
    pub pearson_r: Option<Interval>,
    /// Square of Pearson R.
    pub r2: Option<Interval>,
    /// Kendall's τ_b (Kendall 1938, Biometrika 30, 81; ties handled as τ_b).
    pub kendall_tau: Option<Interval>,
    /// Bootstrap seed, so the intervals can be reproduced.
    pub seed: u64,
    /// Resamples drawn.
    pub resamples: usize,
}

/// Root-mean-square of pred − meas (`None` when empty; extra values of the
/// longer slice are ignored).
///
/// ```
/// use legwork_numerics::network::stats::rmse;
/// assert_eq!(rmse(&[1.0, 3.0], &[2.0, 2.0]), Some(1.0));
/// assert_eq!(rmse(&[], &[]), None);
/// ```
pub fn rmse(pred: &[f64], meas: &[f64]) -> Option<f64> {
    (!pred.is_empty()).then(|| {
        (pred
            .iter()
            .zip(meas)
            .map(|(p, m)| (p - m).powi(2))
            .sum::<f64>()
            / pred.len() as f64)
            .sqrt()
    })
}

/// Mean of |pred − meas| (`None` when empty; extra values of the longer slice
/// are ignored).
///
/// ```
/// use legwork_numerics::network::stats::mue;
/// assert_eq!(mue(&[1.0, 4.0], &[2.0, 2.0]), Some(1.5));
/// ```
pub fn mue(pred: &[f64], meas: &[f64]) -> Option<f64> {
    (!pred.is_empty()).then(|| {
        pred.iter()
            .zip(meas)
            .map(|(p, m)| (p - m).abs())
            .sum::<f64>()
            / pred.len() as f64
    })
}

/// Pearson's r; `None` for fewer than 2 pairs or no spread in either.
///
/// ```
/// use legwork_numerics::network::stats::pearson;
/// assert_eq!(pearson(&[1.0, 2.0, 3.0], &[2.0, 4.0, 6.0]), Some(1.0));
/// assert_eq!(pearson(&[1.0, 2.0, 3.0], &[5.0, 5.0, 5.0]), None);
/// ```
pub fn pearson(x: &[f64], y: &[f64]) -> Option<f64> {
    let n = x.len();
    if n < 2 {
        return None;
    }
    let mx = x.iter().sum::<f64>() / n as f64;
    let my = y.iter().sum::<f64>() / n as f64;
    let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
    for (a, b) in x.iter().zip(y) {
        sxy += (a - mx) * (b - my);
        sxx += (a - mx).powi(2);
        syy += (b - my).powi(2);
    }
    (sxx > 0.0 && syy > 0.0).then(|| (sxy / (sxx * syy).sqrt()).clamp(-1.0, 1.0))
}

/// Kendall's τ_b: (concordant − discordant) / √((n₀ − n₁)(n₀ − n₂)), with n₀ the
/// number of pairs and n₁, n₂ the pairs tied in x and in y. O(n²), fine for the
/// series sizes legwork sees. `None` when either variable is constant.
///
/// ```
/// use legwork_numerics::network::stats::kendall_tau;
/// // 3 pairs: (1,2) concordant, (1,3) concordant, (2,3) discordant → (2 − 1)/3.
/// let t = kendall_tau(&[1.0, 2.0, 3.0], &[1.0, 3.0, 2.0]).unwrap();
/// assert!((t - 1.0 / 3.0).abs() < 1e-12);
/// ```
pub fn kendall_tau(x: &[f64], y: &[f64]) -> Option<f64> {
    let n = x.len();
    let (mut s, mut tx, mut ty, mut n0) = (0i64, 0i64, 0i64, 0i64);
    for i in 0..n {
        for j in i + 1..n {
            n0 += 1;
            let dx = x[i] - x[j];
            let dy = y[i] - y[j];
            if dx == 0.0 {
                tx += 1;
            }
            if dy == 0.0 {
                ty += 1;
            }
            if dx != 0.0 && dy != 0.0 {
                s += if (dx > 0.0) == (dy > 0.0) { 1 } else { -1 };
            }
        }
    }
    let denom = (((n0 - tx) * (n0 - ty)) as f64).sqrt();
    (denom > 0.0).then(|| s as f64 / denom)
}

/// Compares predictions with measurements ([`BOOTSTRAP_RESAMPLES`] resamples).
///
/// # Panics
///
/// When `pred` and `meas` differ in length.
///
/// ```
/// use legwork_numerics::network::stats::compare;
/// let s = compare(&[-8.0, -9.2, -7.1], &[-8.4, -9.0, -7.5], 1);
/// assert_eq!(s.n, 3);
/// let rmse = s.rmse.unwrap();
/// assert!(rmse.low <= rmse.value && rmse.value <= rmse.high);
/// ```
pub fn compare(pred: &[f64], meas: &[f64], seed: u64) -> Stats {
    compare_with(pred, meas, seed, BOOTSTRAP_RESAMPLES)
}

/// Compares with a chosen number of bootstrap resamples. Pairs are resampled
/// together; a resample where a statistic is undefined (e.g. all values equal)
/// is left out of that statistic's interval.
///
/// # Panics
///
/// When `pred` and `meas` differ in length.
///
/// ```
/// use legwork_numerics::network::stats::compare_with;
/// let a = compare_with(&[1.0, 2.0, 3.5], &[1.1, 2.3, 3.0], 42, 200);
/// let b = compare_with(&[1.0, 2.0, 3.5], &[1.1, 2.3, 3.0], 42, 200);
/// assert_eq!(a, b); // seeded
/// assert_eq!(a.resamples, 200);
/// ```
pub fn compare_with(pred: &[f64], meas: &[f64], seed: u64, resamples: usize) -> Stats {
    assert_eq!(pred.len(), meas.len(), "pred and meas must pair up");
    let n = pred.len();
    type Stat = fn(&[f64], &[f64]) -> Option<f64>;
    let r2: Stat = |x, y| pearson(x, y).map(|r| r * r);
    // (statistic, fewest pairs for which it means anything)
    let stats: [(Stat, usize); 5] = [(rmse, 1), (mue, 1), (pearson, 3), (r2, 3), (kendall_tau, 3)];
    let point: Vec<Option<f64>> = stats
        .iter()
        .map(|(f, least)| if n < *least { None } else { f(pred, meas) })
        .collect();
    let mut samples: Vec<Vec<f64>> = vec![Vec::with_capacity(resamples); stats.len()];
    if n > 0 {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let (mut bp, mut bm) = (vec![0.0; n], vec![0.0; n]);
        for _ in 0..resamples {
            for k in 0..n {
                let i = rng.gen_range(0..n);
                bp[k] = pred[i];
                bm[k] = meas[i];
            }
            for (s, (f, _)) in stats.iter().enumerate() {
                if let Some(v) = f(&bp, &bm) {
                    samples[s].push(v);
                }
            }
        }
    }
    let mut out = point.iter().zip(samples.iter_mut()).map(|(p, s)| {
        p.map(|value| {
            s.sort_by(f64::total_cmp);
            Interval {
                value,
                low: quantile(s, 0.025).unwrap_or(value),
                high: quantile(s, 0.975).unwrap_or(value),
            }
        })
    });
    Stats {
        n,
        rmse: out.next().flatten(),
        mue: out.next().flatten(),
        pearson_r: out.next().flatten(),
        r2: out.next().flatten(),
        kendall_tau: out.next().flatten(),
        seed,
        resamples,
    }
}

/// Linear-interpolation quantile of sorted data.
fn quantile(sorted: &[f64], q: f64) -> Option<f64> {
    if sorted.is_empty() {
        return None;
    }
    let pos = q * (sorted.len() - 1) as f64;
    let lo = pos.floor() as usize;
    let hi = pos.ceil() as usize;
    Some(sorted[lo] + (sorted[hi] - sorted[lo]) * (pos - lo as f64))
}

/// Per-ligand and per-edge comparison with experiment.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Comparison {
    /// Network ΔG against measured ΔG, over measured ligands that are not
    /// anchored (`ligands.n` says how many).
    pub ligands: Stats,
    /// Each edge's own ΔΔG against measured ΔG(b) − ΔG(a), over edges with both
    /// ends measured (`edges.n` says how many).
    pub edges: Stats,
    /// Measured ligands left out of `ligands` because their ΔG is fixed by their
    /// own measurement (the only measured ligand of their connected part).
    #[serde(default)]
    pub anchored: Vec<String>,
}

/// Builds the per-ligand and per-edge comparison from the network's (or the
/// absolute cycles') per-ligand estimates: ligands with an [`Anchor`] of kind
/// [`Anchor::Measured`] are left out of the per-ligand statistics and listed in
/// [`Comparison::anchored`]. Per-ligand statistics use seed `seed`, per-edge
/// ones `seed + 1`.
///
/// # Panics
///
/// Never (the pairs are built here, so they always match up).
///
/// ```
/// use legwork_numerics::network::stats::compare_estimates;
/// use legwork_numerics::network::{solve, Measured, MeasuredKind, NetworkEdge};
/// let e = |a: &str, b: &str, ddg| NetworkEdge { a: a.into(), b: b.into(), ddg, sigma: 0.2 };
/// let m = |l: &str, dg| Measured {
///     ligand: l.into(), dg, kind: MeasuredKind::Dg, value: dg, unit: "kcal/mol".into(), line: 2,
/// };
/// // Two parts: {x, y, z} with two measurements, {u, v} with one (u is anchored).
/// let measured = [m("x", -8.0), m("y", -9.1), m("u", -7.0)];
/// let fit = solve(&[e("x", "y", -1.0), e("y", "z", 0.5), e("u", "v", -0.4)], &measured, None)?;
/// let c = compare_estimates(&fit.ligands, &[], &measured, 7);
/// assert_eq!(c.ligands.n, 2);
/// assert_eq!(c.anchored, ["u"]);
/// # Ok::<(), legwork_numerics::network::NetworkError>(())
/// ```
pub fn compare_estimates(
    ligands: &[LigandEstimate],
    edges: &[EdgeResult],
    measured: &[Measured],
    seed: u64,
) -> Comparison {
    let anchored: Vec<String> = ligands
        .iter()
        .filter(|l| l.anchor == Some(Anchor::Measured))
        .filter(|l| measured.iter().any(|m| m.ligand == l.ligand))
        .map(|l| l.ligand.clone())
        .collect();
    let pairs: Vec<(String, f64)> = ligands
        .iter()
        .filter(|l| !anchored.contains(&l.ligand))
        .map(|l| (l.ligand.clone(), l.dg))
        .collect();
    let mut c = compare_pairs(&pairs, edges, measured, seed);
    c.anchored = anchored;
    c
}

/// Builds the per-ligand and per-edge comparison from (ligand, predicted ΔG)
/// pairs. Anchored ligands are found from `edges`: in a relative network, a
/// connected part (over the edges with a second ligand) with exactly one
/// measured ligand has that ligand's ΔG fixed to its measurement by the
/// network's offset ([`crate::network::solve`]), so it is left out of the
/// per-ligand statistics and listed in [`Comparison::anchored`]. Prefer
/// [`compare_estimates`] when the [`LigandEstimate`]s are at hand: it uses the
/// network's own anchors, which also hold when some edges were left out of the
/// fit.
///
/// # Panics
///
/// Never.
///
/// ```
/// use legwork_numerics::network::stats::compare_all;
/// use legwork_numerics::network::{Measured, MeasuredKind};
/// let m = |l: &str, dg| Measured {
///     ligand: l.into(), dg, kind: MeasuredKind::Dg, value: dg, unit: "kcal/mol".into(), line: 2,
/// };
/// // Absolute cycles (no edges between ligands): nothing is anchored.
/// let pred = [("x".to_string(), -8.2), ("y".to_string(), -9.0)];
/// let c = compare_all(&pred, &[], &[m("x", -8.0), m("y", -9.5)], 1);
/// assert_eq!(c.ligands.n, 2);
/// assert!(c.anchored.is_empty());
/// ```
pub fn compare_all(
    ligand_dg: &[(String, f64)],
    edges: &[EdgeResult],
    measured: &[Measured],
    seed: u64,
) -> Comparison {
    let anchored = anchored_by_edges(edges, measured);
    let pairs: Vec<(String, f64)> = ligand_dg
        .iter()
        .filter(|(id, _)| !anchored.contains(id))
        .cloned()
        .collect();
    let mut c = compare_pairs(&pairs, edges, measured, seed);
    c.anchored = anchored
        .into_iter()
        .filter(|a| ligand_dg.iter().any(|(id, _)| id == a))
        .collect();
    c
}

/// The measured ligands that are the only measured ligand of their connected
/// part of the relative network formed by `edges`.
fn anchored_by_edges<'a>(edges: &'a [EdgeResult], measured: &[Measured]) -> Vec<String> {
    let mut part: BTreeMap<&'a str, usize> = BTreeMap::new();
    let mut parent: Vec<usize> = Vec::new();
    fn find(p: &mut [usize], mut x: usize) -> usize {
        while p[x] != x {
            p[x] = p[p[x]];
            x = p[x];
        }
        x
    }
    for e in edges {
        let Some(b) = e.ligand_b.as_deref() else {
            continue;
        };
        let mut id = |l: &'a str| -> usize {
            *part.entry(l).or_insert_with(|| {
                parent.push(parent.len());
                parent.len() - 1
            })
        };
        let (x, y) = (id(e.ligand_a.as_str()), id(b));
        let (rx, ry) = (find(&mut parent, x), find(&mut parent, y));
        parent[rx.max(ry)] = rx.min(ry);
    }
    let mut count: BTreeMap<usize, Vec<&str>> = BTreeMap::new();
    for m in measured {
        if let Some(&i) = part.get(m.ligand.as_str()) {
            count
                .entry(find(&mut parent, i))
                .or_default()
                .push(m.ligand.as_str());
        }
    }
    count
        .into_values()
        .filter(|v| v.len() == 1)
        .map(|v| v[0].to_string())
        .collect()
}

/// The comparison over the given pairs (no anchors).
fn compare_pairs(
    ligand_dg: &[(String, f64)],
    edges: &[EdgeResult],
    measured: &[Measured],
    seed: u64,
) -> Comparison {
    let m = |id: &str| measured.iter().find(|m| m.ligand == id).map(|m| m.dg);
    let (lp, lm): (Vec<f64>, Vec<f64>) = ligand_dg
        .iter()
        .filter_map(|(id, g)| m(id).map(|v| (*g, v)))
        .unzip();
    let (ep, em): (Vec<f64>, Vec<f64>) = edges
        .iter()
        .filter_map(|e| {
            let b = e.ligand_b.as_deref()?;
            Some((e.ddg, m(b)? - m(&e.ligand_a)?))
        })
        .unzip();
    Comparison {
        ligands: compare(&lp, &lm, seed),
        edges: compare(&ep, &em, seed.wrapping_add(1)),
        anchored: Vec::new(),
    }
}

impl NetworkResult {
    /// (ligand, ΔG) pairs, for [`compare_all`].
    ///
    /// ```
    /// use legwork_numerics::network::{solve, NetworkEdge};
    /// let e = NetworkEdge { a: "x".into(), b: "y".into(), ddg: 1.5, sigma: 0.2 };
    /// let fit = solve(&[e], &[], Some("x"))?;
    /// let g = fit.ligand_dg();
    /// assert_eq!((g[0].0.as_str(), g[1].0.as_str()), ("x", "y"));
    /// assert!(g[0].1 == 0.0 && (g[1].1 - 1.5).abs() < 1e-12);
    /// # Ok::<(), legwork_numerics::network::NetworkError>(())
    /// ```
    pub fn ligand_dg(&self) -> Vec<(String, f64)> {
        self.ligands
            .iter()
            .map(|l| (l.ligand.clone(), l.dg))
            .collect()
    }
}
