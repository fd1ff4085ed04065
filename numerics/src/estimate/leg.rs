//! One leg from its windows: equilibration and decorrelation per window, every
//! estimator asked for, overlap, convergence and warnings.

use super::bar::{bar, bar_influence, bar_solve};
use super::correlation::{
    at_start, detect_equilibration, statistical_inefficiency, subsample, Equilibrated,
};
use super::error::EstimateError;
use super::exp::exp_average;
use super::mbar::{solve, MbarBlock, MbarSettings, MbarSolution};
use super::options::{Equilibration, EstimateOptions, Method, Subsample};
use super::result::*;
use super::ti::{integrate, path_weights};
use crate::samples::{LegSamples, WindowSamples};
use rayon::prelude::*;
use std::collections::BTreeMap;
use std::time::Instant;

/// The series whose correlation decides equilibration and subsampling for the
/// energy-based estimators (EXP, BAR, MBAR): the reduced energy difference between
/// the two neighbours of the sampled state, u_{k+1} − u_{k−1} (one-sided at the ends;
/// the sampled reduced potential for a one-state leg).
pub fn energy_series(w: &WindowSamples) -> Vec<f64> {
    energy_sweep(w, false).0
}

/// The energy series and, when asked, the works towards the two neighbouring
/// states (u_{k−1} − u_k, u_{k+1} − u_k over every frame; empty at the ends), read
/// in the same sweep over the frames.
fn energy_sweep(w: &WindowSamples, neighbours: bool) -> (Vec<f64>, [Vec<f64>; 2]) {
    let k = w.state;
    let below = k.checked_sub(1);
    let above = (k + 1 < w.n_states).then_some(k + 1);
    let (lo, hi) = match (below, above) {
        (Some(a), Some(b)) => (a, b),
        (None, Some(b)) => (k, b),
        (Some(a), None) => (a, k),
        (None, None) => (k, k),
    };
    let cap = |side: Option<usize>| {
        if neighbours && side.is_some() {
            w.frames
        } else {
            0
        }
    };
    let mut down = Vec::with_capacity(cap(below));
    let mut up = Vec::with_capacity(cap(above));
    let series = (0..w.frames)
        .map(|n| {
            let r = w.row(n);
            if neighbours {
                if let Some(a) = below {
                    down.push(r[a] - r[k]);
                }
                if let Some(b) = above {
                    up.push(r[b] - r[k]);
                }
            }
            if lo == hi {
                r[k]
            } else {
                r[hi] - r[lo]
            }
        })
        .collect();
    (series, [down, up])
}

/// The series for TI: dU/dλ summed over components.
pub fn dudl_series(w: &WindowSamples) -> Vec<f64> {
    let c = w.components.len();
    (0..w.frames)
        .map(|n| (0..c).map(|j| w.dudl_at(n, j)).sum())
        .collect()
}

/// Equilibration and decorrelation of one series under the options.
fn select(
    series: &[f64],
    opts: &EstimateOptions,
    label: &str,
) -> Result<(Equilibrated, Vec<usize>, f64), EstimateError> {
    let n = series.len();
    let eq = match opts.equilibration {
        Equilibration::Auto => detect_equilibration(series),
        Equilibration::None => at_start(series, 0),
        Equilibration::Frames(t) => {
            let t = t as usize;
            if t + 2 > n {
                return Err(EstimateError::Insufficient(format!(
                    "{label}: discarding {t} equilibration frames leaves fewer than 2 of its {n}; lower --equilibration"
                )));
            }
            at_start(series, t)
        }
    };
    let rows = match opts.subsample {
        Subsample::Auto => subsample(eq.start, n, eq.inefficiency),
        Subsample::None => (eq.start..n).collect(),
    };
    // What correlation is left in the frames used (all of it without subsampling;
    // φ^g between kept frames of an AR(1)-like series with it): every σ is scaled by
    // it, so error bars stay honest either way.
    let kept: Vec<f64> = rows.iter().map(|&r| series[r]).collect();
    let residual = statistical_inefficiency(&kept);
    Ok((eq, rows, residual))
}

/// A window's equilibration, the frames used and their residual inefficiency.
type Selection = (Equilibrated, Vec<usize>, f64);

fn label(w: &WindowSamples) -> String {
    format!("window of state {} ({})", w.state, w.source.display())
}

/// Estimates one leg: G(last state) − G(first state) by every method in `opts`,
/// in kT, with MBAR's free energies, covariance and overlap, per-window
/// diagnostics, convergence series and warnings.
pub fn estimate_leg(
    leg: &LegSamples,
    opts: &EstimateOptions,
) -> Result<LegEstimate, EstimateError> {
    let k = leg.n_states();
    if k < 2 || leg.windows.len() != k {
        return Err(EstimateError::Insufficient(format!(
            "a leg needs at least 2 states with one window each; got {k} states and {} windows",
            leg.windows.len()
        )));
    }
    let mut warnings = leg.warnings.clone();
    let has_dudl = leg.windows.iter().all(|w| w.has_dudl());
    let mut methods: Vec<Method> = Method::ALL
        .into_iter()
        .filter(|m| opts.methods.contains(m))
        .collect();
    if !has_dudl && methods.iter().any(|m| m.uses_dudl()) {
        warnings.push("TI skipped: the window files have no dU/dλ column; configure one in reader.columns.dudl".into());
        methods.retain(|m| !m.uses_dudl());
    }
    let want_ti = methods.iter().any(|m| m.uses_dudl());

    // Without BAR, MBAR starts from BAR solved loosely on works gathered while the
    // energy series is read (one sweep over each window's frames, not two).
    let need_start = !methods.contains(&Method::Bar);
    let swept: Vec<(Selection, [Vec<f64>; 2])> = leg
        .windows
        .par_iter()
        .map(|w| {
            let (series, nb) = energy_sweep(w, need_start);
            Ok((select(&series, opts, &label(w))?, nb))
        })
        .collect::<Result<_, EstimateError>>()?;
    let (energy, neighbours): (Vec<Selection>, Vec<[Vec<f64>; 2]>) = swept.into_iter().unzip();
    let ti_sel: Option<Vec<(Equilibrated, Vec<usize>, f64)>> = if want_ti {
        Some(
            leg.windows
                .par_iter()
                .map(|w| select(&dudl_series(w), opts, &label(w)))
                .collect::<Result<_, _>>()?,
        )
    } else {
        None
    };
    let used: Vec<&[usize]> = energy.iter().map(|e| e.1.as_slice()).collect();
    let ti_used: Option<Vec<&[usize]>> = ti_sel
        .as_ref()
        .map(|s| s.iter().map(|e| e.1.as_slice()).collect());
    let ti_g: Option<Vec<f64>> = ti_sel.as_ref().map(|s| s.iter().map(|e| e.2).collect());
    let resid: Vec<f64> = energy.iter().map(|e| e.2).collect();

    let windows: Vec<WindowDiagnostics> = leg
        .windows
        .iter()
        .enumerate()
        .map(|(i, w)| WindowDiagnostics {
            state: w.state,
            frames: w.frames,
            equilibration_frames: energy[i].0.start,
            inefficiency: energy[i].0.inefficiency,
            used: energy[i].1.len(),
            ti_equilibration_frames: ti_sel.as_ref().map(|s| s[i].0.start),
            ti_inefficiency: ti_sel.as_ref().map(|s| s[i].0.inefficiency),
            ti_used: ti_sel.as_ref().map(|s| s[i].1.len()),
        })
        .collect();
    for (w, d) in leg.windows.iter().zip(&windows) {
        let few = |n: usize, g: f64, what: &str| {
            format!(
                "{}: only {n} uncorrelated samples of {what} (statistical inefficiency {g:.1}, fewer than {}); run the window longer",
                label(w), opts.min_uncorrelated
            )
        };
        if d.used < opts.min_uncorrelated {
            warnings.push(few(d.used, d.inefficiency, "the energy differences"));
        }
        if let (Some(n), Some(g)) = (d.ti_used, d.ti_inefficiency) {
            if n < opts.min_uncorrelated {
                warnings.push(few(n, g, "dU/dλ"));
            }
        }
    }

    let mut estimates = BTreeMap::new();
    let mut pairs: Vec<PairEstimate> = (0..k - 1)
        .map(|i| PairEstimate {
            from: i,
            to: i + 1,
            estimates: BTreeMap::new(),
        })
        .collect();
    let mut ti_points = Vec::new();

    let bar_pairs = if methods.contains(&Method::Bar) {
        Some(bar_pairs(leg, &used, &resid)?)
    } else {
        None
    };
    for m in &methods {
        let est = match m {
            Method::Ti | Method::TiSpline => {
                let (d, pts) = ti(
                    leg,
                    ti_used.as_ref().expect("selected"),
                    ti_g.as_ref().expect("selected"),
                    *m == Method::TiSpline,
                );
                if ti_points.is_empty() {
                    ti_points = pts;
                }
                d
            }
            Method::ExpForward | Method::ExpReverse => {
                // EXP is never needed by another method: its failure costs only
                // its own value, with a warning (the headline check is the caller's).
                let per = match exp_pairs(leg, &used, &resid, *m == Method::ExpForward) {
                    Ok(per) => per,
                    Err(e) => {
                        warnings.push(format!("{m} skipped: {e}"));
                        continue;
                    }
                };
                for (p, d) in pairs.iter_mut().zip(&per) {
                    p.estimates.insert(*m, *d);
                }
                sum(&per)
            }
            Method::Bar => {
                let per = bar_pairs.as_ref().expect("computed");
                for (p, d) in pairs.iter_mut().zip(per) {
                    p.estimates.insert(Method::Bar, *d);
                }
                bar_total(leg, &used, &resid, per)
            }
            Method::Mbar => continue,
        };
        estimates.insert(*m, est);
    }

    // MBAR always runs: it gives the overlap matrix even when not asked for.
    let t0 = Instant::now();
    // MBAR starts from the running sum of BAR over adjacent pairs (loosely
    // converged when BAR itself was not asked for): near the solution, Newton
    // needs two or three passes over the samples.
    let steps: Vec<f64> = match &bar_pairs {
        Some(p) => p.iter().map(|d| d.delta_g).collect(),
        None => (0..k - 1)
            .into_par_iter()
            .map(|i| {
                let pick = |w: &[f64], rows: &[usize]| -> Vec<f64> {
                    rows.iter().map(|&n| w[n]).collect()
                };
                let wf = pick(&neighbours[i][1], used[i]);
                let wr = pick(&neighbours[i + 1][0], used[i + 1]);
                bar_solve(&wf, &wr, 1e-7).unwrap_or(0.0)
            })
            .collect(),
    };
    drop(neighbours);
    let mut start = vec![0.0];
    for d in steps {
        start.push(start.last().expect("non-empty") + d);
    }
    let init = Some(start);
    let sol = mbar(leg, &used, &resid, init)?;
    let solve_seconds = t0.elapsed().as_secs_f64();
    let (d, s) = sol.difference(0, k - 1);
    if methods.contains(&Method::Mbar) {
        estimates.insert(
            Method::Mbar,
            DeltaG {
                delta_g: d,
                sigma: s,
            },
        );
        for p in pairs.iter_mut() {
            let (d, s) = sol.difference(p.from, p.to);
            p.estimates.insert(
                Method::Mbar,
                DeltaG {
                    delta_g: d,
                    sigma: s,
                },
            );
        }
    }
    let overlap: Vec<Vec<f64>> = (0..k)
        .map(|i| sol.overlap[i * k..(i + 1) * k].to_vec())
        .collect();
    let min_adjacent_overlap = sol.min_adjacent_overlap();
    for i in 0..k - 1 {
        let o = overlap[i][i + 1].min(overlap[i + 1][i]);
        if o < opts.min_overlap {
            warnings.push(format!(
                "states {i} and {} (λ {} → {}) overlap only {o:.3} (below {}, common practice): add a window between them or sample both longer",
                i + 1, leg.lambdas[i], leg.lambdas[i + 1], opts.min_overlap
            ));
        }
    }
    let names: Vec<&Method> = estimates.keys().collect();
    for (a, ma) in names.iter().enumerate() {
        for mb in &names[a + 1..] {
            let (x, y) = (estimates[*ma], estimates[*mb]);
            let combined = (x.sigma * x.sigma + y.sigma * y.sigma).sqrt();
            if (x.delta_g - y.delta_g).abs() > 2.0 * combined {
                warnings.push(format!(
                    "{ma} and {mb} disagree: {:.3} vs {:.3} kT, more than twice their combined σ ({combined:.3} kT); check the overlap, equilibration and λ spacing (TI also needs enough windows where dU/dλ curves)",
                    x.delta_g, y.delta_g
                ));
            }
        }
    }

    // The convergence series is a diagnostic: a subset that cannot be estimated
    // is a warning, never a failed leg.
    let convergence = if opts.convergence {
        let method = methods.first().copied().unwrap_or(Method::Mbar);
        match convergence(
            leg,
            method,
            &used,
            &resid,
            ti_used.as_deref(),
            ti_g.as_deref(),
            &sol,
        ) {
            Ok(c) => Some(c),
            Err(e) => {
                warnings.push(format!(
                    "convergence series skipped: a part of the data could not be estimated ({e})"
                ));
                None
            }
        }
    } else {
        None
    };

    let sigma_f = (0..k).map(|j| sol.difference(0, j).1).collect();
    let covariance = (0..k)
        .map(|i| sol.covariance[i * k..(i + 1) * k].to_vec())
        .collect();
    Ok(LegEstimate {
        n_states: k,
        temperature_k: leg.temperature_k,
        lambdas: leg.lambdas.clone(),
        estimates,
        mbar: Some(MbarDetails {
            f: sol.f.clone(),
            sigma_f,
            covariance,
            iterations: sol.iterations,
            solve_seconds,
        }),
        overlap: Some(overlap),
        min_adjacent_overlap,
        windows,
        ti_points,
        pairs,
        convergence,
        warnings,
    })
}

fn sum(per: &[DeltaG]) -> DeltaG {
    DeltaG {
        delta_g: per.iter().map(|d| d.delta_g).sum(),
        sigma: per.iter().map(|d| d.sigma * d.sigma).sum::<f64>().sqrt(),
    }
}

fn works(w: &WindowSamples, rows: &[usize], to: usize) -> Vec<f64> {
    rows.iter()
        .map(|&n| {
            let r = w.row(n);
            r[to] - r[w.state]
        })
        .collect()
}

fn pair_err(i: usize, e: EstimateError) -> EstimateError {
    match e {
        EstimateError::Insufficient(m) => {
            EstimateError::Insufficient(format!("states {i} and {}: {m}", i + 1))
        }
        EstimateError::NotConverged(m) => {
            EstimateError::NotConverged(format!("states {i} and {}: {m}", i + 1))
        }
    }
}

/// EXP per adjacent pair; each σ² scaled by the residual inefficiency `g` of the
/// window that supplied the samples.
fn exp_pairs(
    leg: &LegSamples,
    used: &[&[usize]],
    g: &[f64],
    forward: bool,
) -> Result<Vec<DeltaG>, EstimateError> {
    (0..leg.n_states() - 1)
        .map(|i| {
            let (src, to, sign) = if forward {
                (i, i + 1, 1.0)
            } else {
                (i + 1, i, -1.0)
            };
            exp_average(&works(&leg.windows[src], used[src], to))
                .map(|(d, s)| DeltaG {
                    delta_g: sign * d,
                    sigma: s * g[src].sqrt(),
                })
                .map_err(|e| pair_err(i, e))
        })
        .collect()
}

/// BAR per adjacent pair; σ² scaled by the two windows' residual inefficiencies,
/// weighted by their sample counts.
fn bar_pairs(leg: &LegSamples, used: &[&[usize]], g: &[f64]) -> Result<Vec<DeltaG>, EstimateError> {
    (0..leg.n_states() - 1)
        .into_par_iter()
        .map(|i| {
            let wf = works(&leg.windows[i], used[i], i + 1);
            let wr = works(&leg.windows[i + 1], used[i + 1], i);
            let (a, b) = (wf.len() as f64, wr.len() as f64);
            let scale = ((a * g[i] + b * g[i + 1]) / (a + b)).sqrt();
            bar(&wf, &wr)
                .map(|(d, s)| DeltaG {
                    delta_g: d,
                    sigma: s * scale,
                })
                .map_err(|e| pair_err(i, e))
        })
        .collect()
}

/// The BAR sum over adjacent pairs. Its variance adds, to each pair's asymptotic
/// variance, twice the covariance of neighbouring pairs, which share a window: from
/// window i, Cov = g_i n_i · cov(ψ_R of pair (i−1, i), ψ_F of pair (i, i+1)) with ψ
/// the samples' influences ([`bar_influence`]). Without it the sum's σ is too small
/// whenever a window's works towards its two neighbours are correlated.
fn bar_total(leg: &LegSamples, used: &[&[usize]], g: &[f64], per: &[DeltaG]) -> DeltaG {
    let k = leg.n_states();
    let infl: Vec<(Vec<f64>, Vec<f64>)> = (0..k - 1)
        .into_par_iter()
        .map(|i| {
            let wf = works(&leg.windows[i], used[i], i + 1);
            let wr = works(&leg.windows[i + 1], used[i + 1], i);
            bar_influence(&wf, &wr, per[i].delta_g)
        })
        .collect();
    let mut var: f64 = per.iter().map(|d| d.sigma * d.sigma).sum();
    for i in 1..k - 1 {
        let (a, b) = (&infl[i - 1].1, &infl[i].0);
        let n = a.len() as f64;
        let (ma, mb) = (a.iter().sum::<f64>() / n, b.iter().sum::<f64>() / n);
        let cov = a
            .iter()
            .zip(b)
            .map(|(x, y)| (x - ma) * (y - mb))
            .sum::<f64>()
            / (n - 1.0).max(1.0);
        var += 2.0 * g[i] * n * cov;
    }
    DeltaG {
        delta_g: per.iter().map(|d| d.delta_g).sum(),
        sigma: var.max(0.0).sqrt(),
    }
}

/// MBAR on the used frames. Θ is scaled by the sample-weighted mean residual
/// inefficiency (exact when every window has the same one, an approximation
/// otherwise).
fn mbar(
    leg: &LegSamples,
    used: &[&[usize]],
    g: &[f64],
    initial: Option<Vec<f64>>,
) -> Result<MbarSolution, EstimateError> {
    let blocks: Vec<MbarBlock> = leg
        .windows
        .iter()
        .zip(used)
        .map(|(w, rows)| MbarBlock {
            state: w.state,
            u: &w.reduced,
            rows,
        })
        .collect();
    let mut sol = solve(
        &blocks,
        leg.n_states(),
        &MbarSettings {
            initial,
            ..Default::default()
        },
    )?;
    let n: f64 = used.iter().map(|r| r.len() as f64).sum();
    let gbar = used
        .iter()
        .zip(g)
        .map(|(r, g)| r.len() as f64 * g)
        .sum::<f64>()
        / n;
    sol.covariance.iter_mut().for_each(|c| *c *= gbar);
    Ok(sol)
}

/// TI from the used frames: each window's SEM is sqrt(g s²/n) with g the residual
/// inefficiency of its dU/dλ series.
fn ti(leg: &LegSamples, used: &[&[usize]], g: &[f64], spline: bool) -> (DeltaG, Vec<TiPoint>) {
    let mut total = 0.0;
    let mut var = 0.0;
    let mut points = Vec::new();
    for (c, name) in leg.components.iter().enumerate() {
        let x = &leg.component_lambdas[c];
        let mut mean = Vec::with_capacity(leg.n_states());
        let mut sem = Vec::with_capacity(leg.n_states());
        for (i, w) in leg.windows.iter().enumerate() {
            let rows = used[i];
            let n = rows.len() as f64;
            let m = rows.iter().map(|&r| w.dudl_at(r, c)).sum::<f64>() / n;
            let v = rows
                .iter()
                .map(|&r| (w.dudl_at(r, c) - m).powi(2))
                .sum::<f64>()
                / (n - 1.0).max(1.0);
            let s = (v * g[i] / n).sqrt();
            mean.push(m);
            sem.push(s);
            points.push(TiPoint {
                state: i,
                component: name.clone(),
                lambda: x[i],
                mean: m,
                sem: s,
            });
        }
        let (v, s) = integrate(&path_weights(x, spline), &mean, &sem);
        total += v;
        var += s * s;
    }
    (
        DeltaG {
            delta_g: total,
            sigma: var.sqrt(),
        },
        points,
    )
}

struct Subset<'a> {
    used: &'a [&'a [usize]],
    g: &'a [f64],
    ti_used: Option<&'a [&'a [usize]]>,
    ti_g: Option<&'a [f64]>,
}

fn method_on(
    leg: &LegSamples,
    method: Method,
    s: &Subset,
    warm: &[f64],
) -> Result<DeltaG, EstimateError> {
    let k = leg.n_states();
    Ok(match method {
        Method::Ti | Method::TiSpline => {
            ti(
                leg,
                s.ti_used.expect("TI selected"),
                s.ti_g.expect("TI selected"),
                method == Method::TiSpline,
            )
            .0
        }
        Method::ExpForward | Method::ExpReverse => {
            sum(&exp_pairs(leg, s.used, s.g, method == Method::ExpForward)?)
        }
        Method::Bar => bar_total(leg, s.used, s.g, &bar_pairs(leg, s.used, s.g)?),
        Method::Mbar => {
            let sol = mbar(leg, s.used, s.g, Some(warm.to_vec()))?;
            let (d, e) = sol.difference(0, k - 1);
            DeltaG {
                delta_g: d,
                sigma: e,
            }
        }
    })
}

/// ΔG from the first and the last 10 %, 20 %, … 100 % of each window's used frames
/// (residual inefficiencies taken from the whole).
#[allow(clippy::too_many_arguments)]
fn convergence(
    leg: &LegSamples,
    method: Method,
    used: &[&[usize]],
    g: &[f64],
    ti_used: Option<&[&[usize]]>,
    ti_g: Option<&[f64]>,
    sol: &MbarSolution,
) -> Result<Convergence, EstimateError> {
    let share = |rows: &[usize], frac: f64, head: bool| -> Vec<usize> {
        let n = ((rows.len() as f64 * frac).ceil() as usize).clamp(2.min(rows.len()), rows.len());
        if head {
            rows[..n].to_vec()
        } else {
            rows[rows.len() - n..].to_vec()
        }
    };
    let mut points = Vec::new();
    for step in 1..=10 {
        let frac = step as f64 / 10.0;
        let mut pair = [DeltaG {
            delta_g: 0.0,
            sigma: 0.0,
        }; 2];
        for (slot, head) in [true, false].into_iter().enumerate() {
            let u: Vec<Vec<usize>> = used.iter().map(|r| share(r, frac, head)).collect();
            let ur: Vec<&[usize]> = u.iter().map(|v| v.as_slice()).collect();
            let t: Option<Vec<Vec<usize>>> =
                ti_used.map(|tu| tu.iter().map(|r| share(r, frac, head)).collect());
            let tr: Option<Vec<&[usize]>> =
                t.as_ref().map(|t| t.iter().map(|v| v.as_slice()).collect());
            let subset = Subset {
                used: &ur,
                g,
                ti_used: tr.as_deref(),
                ti_g,
            };
            pair[slot] = method_on(leg, method, &subset, &sol.f)?;
        }
        points.push(ConvergencePoint {
            fraction: frac,
            forward: pair[0],
            reverse: pair[1],
        });
    }
    Ok(Convergence { method, points })
}
