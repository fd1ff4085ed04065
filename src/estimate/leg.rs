//! One leg from its windows: equilibration and decorrelation per window, every
//! estimator asked for, overlap, convergence and warnings.

use super::bar::bar;
use super::correlation::{at_start, detect_equilibration, subsample, Equilibrated};
use super::error::EstimateError;
use super::exp::exp_average;
use super::mbar::{solve, MbarBlock, MbarSettings, MbarSolution};
use super::options::{Equilibration, EstimateOptions, Method, Subsample};
use super::result::*;
use super::ti::{integrate, path_weights};
use crate::collect::{LegSamples, WindowSamples};
use rayon::prelude::*;
use std::collections::BTreeMap;
use std::time::Instant;

/// The series whose correlation decides equilibration and subsampling for the
/// energy-based estimators (EXP, BAR, MBAR): the reduced energy difference between
/// the two neighbours of the sampled state, u_{k+1} − u_{k−1} (one-sided at the ends;
/// the sampled reduced potential for a one-state leg).
pub fn energy_series(w: &WindowSamples) -> Vec<f64> {
    let k = w.state;
    let (lo, hi) = match (k.checked_sub(1), (k + 1 < w.n_states).then_some(k + 1)) {
        (Some(a), Some(b)) => (a, b),
        (None, Some(b)) => (k, b),
        (Some(a), None) => (a, k),
        (None, None) => (k, k),
    };
    (0..w.frames)
        .map(|n| {
            let r = w.row(n);
            if lo == hi {
                r[k]
            } else {
                r[hi] - r[lo]
            }
        })
        .collect()
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
) -> Result<(Equilibrated, Vec<usize>), EstimateError> {
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
    Ok((eq, rows))
}

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

    let energy: Vec<(Equilibrated, Vec<usize>)> = leg
        .windows
        .par_iter()
        .map(|w| select(&energy_series(w), opts, &label(w)))
        .collect::<Result<_, _>>()?;
    let ti_sel: Option<Vec<(Equilibrated, Vec<usize>)>> = if want_ti {
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
    let ti_g: Option<Vec<f64>> = ti_sel
        .as_ref()
        .map(|s| s.iter().map(|e| e.0.inefficiency).collect());

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

    let want_bar = methods.contains(&Method::Bar) || methods.contains(&Method::Mbar);
    let bar_pairs = if want_bar {
        Some(bar_pairs(leg, &used)?)
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
                    opts.subsample,
                );
                if ti_points.is_empty() {
                    ti_points = pts;
                }
                d
            }
            Method::ExpForward | Method::ExpReverse => {
                let per = exp_pairs(leg, &used, *m == Method::ExpForward)?;
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
                sum(per)
            }
            Method::Mbar => continue,
        };
        estimates.insert(*m, est);
    }

    // MBAR always runs: it gives the overlap matrix even when not asked for.
    let t0 = Instant::now();
    let init = bar_pairs.as_ref().map(|p| {
        let mut f = vec![0.0];
        for d in p {
            f.push(f.last().expect("non-empty") + d.delta_g);
        }
        f
    });
    let sol = mbar(leg, &used, init)?;
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

    let convergence = if opts.convergence {
        let method = methods.first().copied().unwrap_or(Method::Mbar);
        Some(convergence(
            leg,
            method,
            &used,
            ti_used.as_deref(),
            ti_g.as_deref(),
            &sol,
            opts.subsample,
        )?)
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

fn exp_pairs(
    leg: &LegSamples,
    used: &[&[usize]],
    forward: bool,
) -> Result<Vec<DeltaG>, EstimateError> {
    (0..leg.n_states() - 1)
        .map(|i| {
            let r = if forward {
                exp_average(&works(&leg.windows[i], used[i], i + 1)).map(|(d, s)| (d, s))
            } else {
                exp_average(&works(&leg.windows[i + 1], used[i + 1], i)).map(|(d, s)| (-d, s))
            };
            r.map(|(d, s)| DeltaG {
                delta_g: d,
                sigma: s,
            })
            .map_err(|e| pair_err(i, e))
        })
        .collect()
}

fn bar_pairs(leg: &LegSamples, used: &[&[usize]]) -> Result<Vec<DeltaG>, EstimateError> {
    (0..leg.n_states() - 1)
        .into_par_iter()
        .map(|i| {
            let wf = works(&leg.windows[i], used[i], i + 1);
            let wr = works(&leg.windows[i + 1], used[i + 1], i);
            bar(&wf, &wr)
                .map(|(d, s)| DeltaG {
                    delta_g: d,
                    sigma: s,
                })
                .map_err(|e| pair_err(i, e))
        })
        .collect()
}

fn mbar(
    leg: &LegSamples,
    used: &[&[usize]],
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
    solve(
        &blocks,
        leg.n_states(),
        &MbarSettings {
            initial,
            ..Default::default()
        },
    )
}

fn ti(
    leg: &LegSamples,
    used: &[&[usize]],
    g: &[f64],
    spline: bool,
    sub: Subsample,
) -> (DeltaG, Vec<TiPoint>) {
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
            // Kept frames that were not subsampled are correlated: scale by g.
            let gi = if sub == Subsample::None { g[i] } else { 1.0 };
            let s = (v * gi / n).sqrt();
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
        let wts = path_weights(x, spline);
        let (v, s) = integrate(&wts, &mean, &sem);
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

fn method_on(
    leg: &LegSamples,
    method: Method,
    used: &[&[usize]],
    ti_used: Option<&[&[usize]]>,
    ti_g: Option<&[f64]>,
    warm: &[f64],
    sub: Subsample,
) -> Result<DeltaG, EstimateError> {
    let k = leg.n_states();
    Ok(match method {
        Method::Ti | Method::TiSpline => {
            ti(
                leg,
                ti_used.expect("TI selected"),
                ti_g.expect("TI selected"),
                method == Method::TiSpline,
                sub,
            )
            .0
        }
        Method::ExpForward | Method::ExpReverse => {
            sum(&exp_pairs(leg, used, method == Method::ExpForward)?)
        }
        Method::Bar => sum(&bar_pairs(leg, used)?),
        Method::Mbar => {
            let s = mbar(leg, used, Some(warm.to_vec()))?;
            let (d, e) = s.difference(0, k - 1);
            DeltaG {
                delta_g: d,
                sigma: e,
            }
        }
    })
}

/// ΔG from the first and the last 10 %, 20 %, … 100 % of each window's used frames.
fn convergence(
    leg: &LegSamples,
    method: Method,
    used: &[&[usize]],
    ti_used: Option<&[&[usize]]>,
    ti_g: Option<&[f64]>,
    sol: &MbarSolution,
    sub: Subsample,
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
            pair[slot] = method_on(leg, method, &ur, tr.as_deref(), ti_g, &sol.f, sub)?;
        }
        points.push(ConvergencePoint {
            fraction: frac,
            forward: pair[0],
            reverse: pair[1],
        });
    }
    Ok(Convergence { method, points })
}
