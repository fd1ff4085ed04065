//! Predicted against measured: RMSE, MUE, Pearson R, R², Kendall τ, each with a
//! seeded bootstrap 95% interval.

use super::experiment::Measured;
use super::solve::NetworkResult;
use crate::cycle::EdgeResult;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

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

/// Root-mean-square of pred − meas (`None` when empty).
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

/// Mean of |pred − meas| (`None` when empty).
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
pub fn compare(pred: &[f64], meas: &[f64], seed: u64) -> Stats {
    compare_with(pred, meas, seed, BOOTSTRAP_RESAMPLES)
}

/// Compares with a chosen number of bootstrap resamples. Pairs are resampled
/// together; a resample where a statistic is undefined (e.g. all values equal)
/// is left out of that statistic's interval.
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
    /// Network ΔG against measured ΔG, over ligands with a measurement.
    pub ligands: Stats,
    /// Each edge's own ΔΔG against measured ΔG(b) − ΔG(a), over edges with both ends measured.
    pub edges: Stats,
}

/// Builds the per-ligand and per-edge comparison. `ligand_dg` pairs ligand ids
/// with predicted ΔG (from the network, or from absolute cycles).
pub fn compare_all(
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
    }
}

impl NetworkResult {
    /// (ligand, ΔG) pairs, for [`compare_all`].
    pub fn ligand_dg(&self) -> Vec<(String, f64)> {
        self.ligands
            .iter()
            .map(|l| (l.ligand.clone(), l.dg))
            .collect()
    }
}
