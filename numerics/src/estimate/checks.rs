//! The checks on one leg's estimate: windows with too few samples, identical
//! frames or drift; overlap too poor for the error bars; estimators that
//! disagree; a leg whose two halves disagree. One warning per problem.

use super::correlation::statistical_inefficiency;
use super::leg::Selection;
use super::options::{EstimateOptions, Method};
use super::result::{DeltaG, WindowDiagnostics};
use super::warning::{LegWarning, Series, DISAGREE_SIGMAS};
use crate::samples::{LegSamples, WindowSamples};
use std::collections::{BTreeMap, BTreeSet};

/// The per-window checks; returns the states whose frames are all identical.
pub(super) fn windows(
    leg: &LegSamples,
    opts: &EstimateOptions,
    diag: &[WindowDiagnostics],
    energy: &[Selection],
    ti: Option<&[Selection]>,
    notes: &mut Vec<LegWarning>,
) -> Vec<usize> {
    let mut identical = Vec::new();
    for (i, (w, d)) in leg.windows.iter().zip(diag).enumerate() {
        let source = w.source.display().to_string();
        if identical_frames(w) {
            identical.push(w.state);
            notes.push(LegWarning::IdenticalFrames {
                state: w.state,
                source,
                frames: w.frames,
            });
            continue;
        }
        let few = |samples: usize, inefficiency: f64, series: Series| LegWarning::FewSamples {
            state: w.state,
            source: source.clone(),
            series,
            samples,
            inefficiency,
            minimum: opts.min_uncorrelated,
        };
        // One warning per problem: a window short of samples (or drifting) in both
        // series is named once, for the energy differences.
        if d.used < opts.min_uncorrelated {
            notes.push(few(d.used, d.inefficiency, Series::Energy));
        } else if let (Some(n), Some(g)) = (d.ti_used, d.ti_inefficiency) {
            if n < opts.min_uncorrelated {
                notes.push(few(n, g, Series::Dudl));
            }
        }
        let mut sel = vec![(Series::Energy, &energy[i])];
        if let Some(t) = ti {
            sel.push((Series::Dudl, &t[i]));
        }
        if let Some((series, (first, last))) = sel
            .into_iter()
            .find_map(|(series, s)| drift(s, opts.drift_sigmas).map(|d| (series, d)))
        {
            notes.push(LegWarning::WindowDrift {
                state: w.state,
                source: source.clone(),
                series,
                first,
                last,
            });
        }
    }
    identical
}

/// Whether every frame of a window is the same frame: the same reduced energy
/// differences (rows are defined up to a constant) and the same dU/dλ. A window
/// whose states are all identical to each other (every difference zero) and that
/// has no varying dU/dλ is not flagged: there is nothing to sample.
fn identical_frames(w: &WindowSamples) -> bool {
    if w.frames < 2 {
        return false;
    }
    let k = w.state;
    let r0 = w.row(0);
    let c = w.components.len();
    let d0 = if w.has_dudl() { &w.dudl[..c] } else { &[][..] };
    let informative = r0.iter().any(|v| v - r0[k] != 0.0) || d0.iter().any(|v| *v != 0.0);
    if !informative {
        return false;
    }
    (1..w.frames).all(|n| {
        let r = w.row(n);
        let same_u = r.iter().zip(r0).all(|(a, b)| a - r[k] == b - r0[k]);
        let same_d = !w.has_dudl() || w.dudl[n * c..(n + 1) * c] == *d0;
        same_u && same_d
    })
}

/// Mean ± standard error of the first and last third of a window's kept frames
/// (after equilibration, before subsampling: a trend inflates the statistical
/// inefficiency of the whole, and subsampling by it would leave too few frames to
/// compare), when they differ by more than `sigmas` combined standard errors. Each
/// third's standard error carries its own statistical inefficiency.
fn drift(s: &Selection, sigmas: f64) -> Option<(DeltaG, DeltaG)> {
    let x = &s.series[s.eq.start.min(s.series.len())..];
    let third = x.len() / 3;
    if third < 8 {
        return None;
    }
    let part = |p: &[f64]| {
        let n = p.len() as f64;
        let m = p.iter().sum::<f64>() / n;
        let v = p.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (n - 1.0);
        DeltaG {
            delta_g: m,
            sigma: (v * statistical_inefficiency(p) / n).sqrt(),
        }
    };
    let (a, b) = (part(&x[..third]), part(&x[x.len() - third..]));
    disagree(a, b, sigmas).then_some((a, b))
}

/// Whether two estimates differ by more than `sigmas` combined standard errors
/// (and by more than rounding: two values that are both exact, σ = 0, and equal
/// to rounding do not disagree).
fn disagree(a: DeltaG, b: DeltaG, sigmas: f64) -> bool {
    let d = (a.delta_g - b.delta_g).abs();
    let combined = a.sigma.hypot(b.sigma);
    let rounding = 1e-9 * a.delta_g.abs().max(b.delta_g.abs()).max(1.0);
    d > sigmas * combined && d > rounding
}

/// The estimators whose error bars cannot be trusted, and the overlap warnings.
pub(super) fn reliability(
    leg: &LegSamples,
    opts: &EstimateOptions,
    overlap: &[Vec<f64>],
    identical: &[usize],
    estimates: &BTreeMap<Method, DeltaG>,
    notes: &mut Vec<LegWarning>,
) -> BTreeMap<Method, String> {
    let mut unreliable = BTreeMap::new();
    let by_overlap: Vec<Method> = estimates
        .keys()
        .copied()
        .filter(|m| !m.uses_dudl())
        .collect();
    for i in 0..overlap.len() - 1 {
        let o = overlap[i][i + 1].min(overlap[i + 1][i]);
        if o >= opts.min_overlap {
            continue;
        }
        let marked = if o < opts.unreliable_overlap {
            by_overlap.clone()
        } else {
            Vec::new()
        };
        for m in &marked {
            unreliable.entry(*m).or_insert_with(|| {
                format!(
                    "states {i} and {} overlap only {o:.1e}, too little for an asymptotic error bar",
                    i + 1
                )
            });
        }
        notes.push(LegWarning::PoorOverlap {
            from: i,
            to: i + 1,
            lambda_from: leg.lambdas[i],
            lambda_to: leg.lambdas[i + 1],
            overlap: o,
            threshold: opts.min_overlap,
            unreliable: marked,
        });
    }
    if let Some(&s) = identical.first() {
        for m in estimates.keys() {
            unreliable.insert(
                *m,
                format!("every frame of the window of state {s} is the same frame"),
            );
        }
    }
    for (m, d) in estimates {
        if !(d.delta_g.is_finite() && d.sigma.is_finite()) {
            unreliable.insert(*m, "the estimate or its error bar is not finite".into());
        }
    }
    unreliable
}

/// One warning per estimator that disagrees with every other one, then one for
/// whatever disagreement is left; unreliable estimators (already warned about)
/// are left out.
pub(super) fn disagreements(
    estimates: &BTreeMap<Method, DeltaG>,
    unreliable: &BTreeMap<Method, String>,
) -> Vec<LegWarning> {
    let mut live: BTreeSet<Method> = estimates
        .keys()
        .copied()
        .filter(|m| !unreliable.contains_key(m))
        .collect();
    let clash = |a: Method, b: Method| disagree(estimates[&a], estimates[&b], DISAGREE_SIGMAS);
    let mut out = Vec::new();
    while live.len() >= 3 {
        let odd = live
            .iter()
            .copied()
            .find(|&m| live.iter().all(|&o| o == m || clash(m, o)));
        let Some(m) = odd else { break };
        live.remove(&m);
        out.push(LegWarning::Outlier {
            method: m,
            value: estimates[&m],
            others: live.iter().map(|o| (*o, estimates[o])).collect(),
        });
    }
    let v: Vec<Method> = live.into_iter().collect();
    let mut pairs = Vec::new();
    for (i, &a) in v.iter().enumerate() {
        for &b in &v[i + 1..] {
            if clash(a, b) {
                pairs.push(((a, estimates[&a]), (b, estimates[&b])));
            }
        }
    }
    if !pairs.is_empty() {
        out.push(LegWarning::Disagree { pairs });
    }
    out
}

/// The leg's drift check: ΔG from the first and from the last half of every
/// window.
pub(super) fn leg_drift(
    method: Method,
    first: DeltaG,
    last: DeltaG,
    sigmas: f64,
) -> Option<LegWarning> {
    disagree(first, last, sigmas).then_some(LegWarning::LegDrift {
        method,
        first,
        last,
    })
}
