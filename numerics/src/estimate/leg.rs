//! One leg from its windows: equilibration and decorrelation per window, every
//! estimator asked for, overlap, convergence, reliability and warnings.

use super::bar::{bar, bar_influence, bar_solve};
use super::checks;
use super::correlation::{
    at_start, detect_equilibration, statistical_inefficiency, subsample, Equilibrated,
};
use super::error::EstimateError;
use super::exp::exp_average;
use super::mbar::{solve, MbarBlock, MbarSettings, MbarSolution};
use super::options::{Equilibration, EstimateOptions, Method, Subsample};
use super::result::*;
use super::ti::path_weights;
use super::warning::LegWarning;
use crate::samples::{LegSamples, WindowSamples};
use rayon::prelude::*;
use std::collections::BTreeMap;
use std::time::Instant;

/// The series whose correlation decides equilibration and subsampling for the
/// energy-based estimators (EXP, BAR, MBAR): the reduced energy difference between
/// the two neighbours of the sampled state, u_{k+1} − u_{k−1} (one-sided at the ends;
/// the sampled reduced potential for a one-state leg).
///
/// # Examples
///
/// ```
/// use legwork_numerics::estimate::energy_series;
/// use legwork_numerics::samples::WindowSamples;
/// // state 1 of three, two frames: u_2 − u_0 per frame
/// let w = WindowSamples::from_reduced(1, 300.0, vec![0.0, 0.5, 1.0],
///     vec![1.0, 2.0, 4.0, 0.0, 0.0, 3.0], Vec::new());
/// assert_eq!(energy_series(&w), vec![3.0, 3.0]);
/// ```
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
///
/// # Panics
///
/// When the window has no dU/dλ (check [`WindowSamples::has_dudl`] first).
///
/// # Examples
///
/// ```
/// use legwork_numerics::estimate::dudl_series;
/// use legwork_numerics::samples::WindowSamples;
/// let w = WindowSamples::from_reduced(0, 300.0, vec![0.0, 1.0],
///     vec![0.0; 4], vec![1.5, -0.5]);
/// assert_eq!(dudl_series(&w), vec![1.5, -0.5]);
/// ```
pub fn dudl_series(w: &WindowSamples) -> Vec<f64> {
    let c = w.components.len();
    assert!(
        w.dudl.len() == w.frames * c,
        "dudl_series needs dU/dλ for every frame and component"
    );
    (0..w.frames)
        .map(|n| (0..c).map(|j| w.dudl_at(n, j)).sum())
        .collect()
}

/// A window's equilibration, the frames used and what correlation is left in
/// them.
pub(super) struct Selection {
    pub(super) eq: Equilibrated,
    pub(super) rows: Vec<usize>,
    /// The residual statistical inefficiency of the used frames.
    pub(super) residual: f64,
    /// The series the selection was made on (for the drift check).
    pub(super) series: Vec<f64>,
}

/// Equilibration and decorrelation of one series under the options.
fn select(
    series: Vec<f64>,
    opts: &EstimateOptions,
    label: &str,
) -> Result<Selection, EstimateError> {
    let n = series.len();
    let eq = match opts.equilibration {
        Equilibration::Auto => detect_equilibration(&series),
        Equilibration::None => at_start(&series, 0),
        Equilibration::Frames(t) => {
            let t = usize::try_from(t).unwrap_or(usize::MAX);
            if t.saturating_add(2) > n {
                return Err(EstimateError::Insufficient(format!(
                    "{label}: discarding {t} equilibration frames leaves fewer than 2 of its {n}; discard fewer"
                )));
            }
            at_start(&series, t)
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
    Ok(Selection {
        eq,
        rows,
        residual,
        series,
    })
}

/// The name of a window in messages.
pub(super) fn label(w: &WindowSamples) -> String {
    format!("window of state {} ({})", w.state, w.source.display())
}

/// Estimates one leg: G(last state) − G(first state) by every method in `opts`,
/// in kT, with MBAR's free energies, covariance and overlap, per-window
/// diagnostics, convergence series, the estimates that cannot be trusted and
/// warnings (one per problem).
///
/// MBAR always runs (it gives the overlap matrix), but is reported only when
/// asked for. TI is skipped, with a warning, when the windows have no dU/dλ.
///
/// # Errors
///
/// [`EstimateError::Insufficient`] when the leg has fewer than 2 states or not one
/// window per state, a fixed equilibration leaves fewer than 2 frames, or an
/// estimator has too few samples; [`EstimateError::NotConverged`] when MBAR does
/// not converge.
///
/// # Examples
///
/// Two harmonic states u_j(x) = (x − c_j)²/2 with c = 0 and 1 have equal free
/// energies:
///
/// ```
/// use legwork_numerics::estimate::{estimate_leg, EstimateOptions, Method};
/// use legwork_numerics::samples::{LegSamples, WindowSamples};
/// // independent standard normal draws (xorshift and Box–Muller)
/// let mut state = 0x9e37_79b9_7f4a_7c15u64;
/// let mut unif = move || {
///     state ^= state << 13;
///     state ^= state >> 7;
///     state ^= state << 17;
///     ((state >> 11) as f64 + 0.5) / (1u64 << 53) as f64
/// };
/// let mut normal = move || (-2.0 * unif().ln()).sqrt() * (std::f64::consts::TAU * unif()).cos();
/// let lambdas = vec![0.0, 1.0];
/// let mut window = |state: usize, centre: f64| {
///     let u = (0..2000)
///         .flat_map(|_| {
///             let x = centre + normal();
///             [0.5 * x * x, 0.5 * (x - 1.0) * (x - 1.0)]
///         })
///         .collect();
///     WindowSamples::from_reduced(state, 300.0, lambdas.clone(), u, Vec::new())
/// };
/// let leg = LegSamples::from_windows(vec![window(0, 0.0), window(1, 1.0)]);
/// let opts = EstimateOptions {
///     methods: vec![Method::Mbar, Method::Bar],
///     ..Default::default()
/// };
/// let est = estimate_leg(&leg, &opts).unwrap();
/// let mbar = est.estimates[&Method::Mbar];
/// assert!(mbar.delta_g.abs() < 4.0 * mbar.sigma, "{mbar:?}");
/// assert!(est.is_reliable(Method::Mbar));
/// assert!(est.warning_details.is_empty(), "{:?}", est.warnings);
/// ```
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
    let mut notes: Vec<LegWarning> = leg
        .warnings
        .iter()
        .map(|m| LegWarning::Input { message: m.clone() })
        .collect();
    let methods = methods_for(leg, opts, &mut notes);
    let want_ti = methods.iter().any(|m| m.uses_dudl());
    let need_start = !methods.contains(&Method::Bar);
    let (energy, neighbours) = select_energy(leg, opts, need_start)?;
    let ti_sel = if want_ti {
        Some(select_ti(leg, opts)?)
    } else {
        None
    };
    let frames = Frames::new(&energy, ti_sel.as_deref());
    let subset = frames.subset();
    let windows = diagnostics(leg, &energy, ti_sel.as_deref());
    let identical = checks::windows(leg, opts, &windows, &energy, ti_sel.as_deref(), &mut notes);

    let direct = direct_estimates(leg, &methods, &subset)?;
    let t0 = Instant::now();
    let sol = run_mbar(leg, &subset, direct.bar.as_deref(), neighbours)?;
    let solve_seconds = t0.elapsed().as_secs_f64();
    let Direct {
        mut estimates,
        mut pairs,
        ti_points,
        ..
    } = direct;
    if methods.contains(&Method::Mbar) {
        add_mbar(&sol, &mut estimates, &mut pairs);
    }
    let overlap: Vec<Vec<f64>> = (0..k)
        .map(|i| sol.overlap[i * k..(i + 1) * k].to_vec())
        .collect();
    let unreliable = checks::reliability(leg, opts, &overlap, &identical, &estimates, &mut notes);
    notes.extend(checks::disagreements(&estimates, &unreliable));

    let method = methods.first().copied().unwrap_or(Method::Mbar);
    let convergence = if opts.convergence {
        Some(convergence(leg, method, &subset, &sol)?)
    } else {
        None
    };
    let halves = match &convergence {
        Some(c) => c
            .points
            .iter()
            .find(|p| p.fraction == 0.5)
            .map(|p| (p.forward, p.reverse)),
        None => Some(halves(leg, method, &subset, &sol)?),
    };
    if let Some((first, last)) = halves {
        notes.extend(checks::leg_drift(method, first, last, opts.drift_sigmas));
    }

    let warnings = notes
        .iter()
        .map(|w| w.message(crate::units::EnergyUnit::Kt, leg.temperature_k))
        .collect();
    Ok(LegEstimate {
        n_states: k,
        temperature_k: leg.temperature_k,
        lambdas: leg.lambdas.clone(),
        estimates,
        min_adjacent_overlap: sol.min_adjacent_overlap(),
        mbar: Some(mbar_details(&sol, solve_seconds)),
        overlap: Some(overlap),
        windows,
        ti_points,
        pairs,
        convergence,
        warnings,
        warning_details: notes,
        unreliable,
    })
}

/// The methods to run, in table order; TI dropped (with a warning) when the
/// windows have no dU/dλ.
fn methods_for(
    leg: &LegSamples,
    opts: &EstimateOptions,
    notes: &mut Vec<LegWarning>,
) -> Vec<Method> {
    let has_dudl = leg.windows.iter().all(|w| w.has_dudl());
    let mut methods: Vec<Method> = Method::ALL
        .into_iter()
        .filter(|m| opts.methods.contains(m))
        .collect();
    if !has_dudl && methods.iter().any(|m| m.uses_dudl()) {
        notes.push(LegWarning::NoDudl);
        methods.retain(|m| !m.uses_dudl());
    }
    methods
}

/// The works towards each window's neighbours, kept when MBAR needs a BAR start.
type Neighbours = Vec<[Vec<f64>; 2]>;

/// Every window's selection on its energy series. Without BAR, MBAR starts from
/// BAR solved loosely on works gathered while the energy series is read (one sweep
/// over each window's frames, not two).
fn select_energy(
    leg: &LegSamples,
    opts: &EstimateOptions,
    need_start: bool,
) -> Result<(Vec<Selection>, Neighbours), EstimateError> {
    let swept: Vec<(Selection, [Vec<f64>; 2])> = leg
        .windows
        .par_iter()
        .map(|w| {
            let (series, nb) = energy_sweep(w, need_start);
            Ok((select(series, opts, &label(w))?, nb))
        })
        .collect::<Result<_, EstimateError>>()?;
    Ok(swept.into_iter().unzip())
}

/// Every window's selection on its dU/dλ series.
fn select_ti(leg: &LegSamples, opts: &EstimateOptions) -> Result<Vec<Selection>, EstimateError> {
    leg.windows
        .par_iter()
        .map(|w| select(dudl_series(w), opts, &label(w)))
        .collect()
}

/// The frames every estimator uses and their residual inefficiencies.
struct Frames<'a> {
    used: Vec<&'a [usize]>,
    g: Vec<f64>,
    ti_used: Option<Vec<&'a [usize]>>,
    ti_g: Option<Vec<f64>>,
}

impl<'a> Frames<'a> {
    fn new(energy: &'a [Selection], ti: Option<&'a [Selection]>) -> Self {
        Frames {
            used: energy.iter().map(|e| e.rows.as_slice()).collect(),
            g: energy.iter().map(|e| e.residual).collect(),
            ti_used: ti.map(|s| s.iter().map(|e| e.rows.as_slice()).collect()),
            ti_g: ti.map(|s| s.iter().map(|e| e.residual).collect()),
        }
    }
    fn subset(&self) -> Subset<'_> {
        Subset {
            used: &self.used,
            g: &self.g,
            ti_used: self.ti_used.as_deref(),
            ti_g: self.ti_g.as_deref(),
        }
    }
}

fn diagnostics(
    leg: &LegSamples,
    energy: &[Selection],
    ti: Option<&[Selection]>,
) -> Vec<WindowDiagnostics> {
    leg.windows
        .iter()
        .enumerate()
        .map(|(i, w)| WindowDiagnostics {
            state: w.state,
            frames: w.frames,
            equilibration_frames: energy[i].eq.start,
            inefficiency: energy[i].eq.inefficiency,
            used: energy[i].rows.len(),
            ti_equilibration_frames: ti.map(|s| s[i].eq.start),
            ti_inefficiency: ti.map(|s| s[i].eq.inefficiency),
            ti_used: ti.map(|s| s[i].rows.len()),
        })
        .collect()
}

/// The estimates made without MBAR, per pair where the method has pairs.
struct Direct {
    estimates: BTreeMap<Method, DeltaG>,
    pairs: Vec<PairEstimate>,
    ti_points: Vec<TiPoint>,
    bar: Option<Vec<DeltaG>>,
}

fn direct_estimates(
    leg: &LegSamples,
    methods: &[Method],
    s: &Subset,
) -> Result<Direct, EstimateError> {
    let k = leg.n_states();
    let mut out = Direct {
        estimates: BTreeMap::new(),
        pairs: (0..k - 1)
            .map(|i| PairEstimate {
                from: i,
                to: i + 1,
                estimates: BTreeMap::new(),
            })
            .collect(),
        ti_points: Vec::new(),
        bar: None,
    };
    if methods.contains(&Method::Bar) {
        out.bar = Some(bar_pairs(leg, s.used, s.g)?);
    }
    for m in methods {
        let est = match m {
            Method::Ti | Method::TiSpline => {
                let (d, pts) = ti(
                    leg,
                    s.ti_used.expect("selected"),
                    s.ti_g.expect("selected"),
                    *m == Method::TiSpline,
                );
                if out.ti_points.is_empty() {
                    out.ti_points = pts;
                }
                d
            }
            Method::ExpForward | Method::ExpReverse => {
                let per = exp_pairs(leg, s.used, s.g, *m == Method::ExpForward)?;
                for (p, d) in out.pairs.iter_mut().zip(&per) {
                    p.estimates.insert(*m, *d);
                }
                sum(&per)
            }
            Method::Bar => {
                let per = out.bar.as_ref().expect("computed");
                for (p, d) in out.pairs.iter_mut().zip(per) {
                    p.estimates.insert(Method::Bar, *d);
                }
                bar_total(leg, s.used, s.g, per)
            }
            Method::Mbar => continue,
        };
        out.estimates.insert(*m, est);
    }
    Ok(out)
}

/// MBAR from the running sum of BAR over adjacent pairs (loosely converged when BAR
/// itself was not asked for): near the solution, Newton needs two or three passes
/// over the samples.
fn run_mbar(
    leg: &LegSamples,
    s: &Subset,
    bar: Option<&[DeltaG]>,
    neighbours: Neighbours,
) -> Result<MbarSolution, EstimateError> {
    let k = leg.n_states();
    let steps: Vec<f64> = match bar {
        Some(p) => p.iter().map(|d| d.delta_g).collect(),
        None => (0..k - 1)
            .into_par_iter()
            .map(|i| {
                let pick = |w: &[f64], rows: &[usize]| -> Vec<f64> {
                    rows.iter().map(|&n| w[n]).collect()
                };
                let wf = pick(&neighbours[i][1], s.used[i]);
                let wr = pick(&neighbours[i + 1][0], s.used[i + 1]);
                bar_solve(&wf, &wr, 1e-7).unwrap_or(0.0)
            })
            .collect(),
    };
    drop(neighbours);
    let mut start = vec![0.0];
    for d in steps {
        start.push(start.last().expect("non-empty") + d);
    }
    mbar(leg, s.used, s.g, Some(start))
}

fn add_mbar(
    sol: &MbarSolution,
    estimates: &mut BTreeMap<Method, DeltaG>,
    pairs: &mut [PairEstimate],
) {
    let dg = |i, j| {
        let (d, s) = sol.difference(i, j);
        DeltaG {
            delta_g: d,
            sigma: s,
        }
    };
    estimates.insert(Method::Mbar, dg(0, sol.n_states() - 1));
    for p in pairs.iter_mut() {
        p.estimates.insert(Method::Mbar, dg(p.from, p.to));
    }
}

fn mbar_details(sol: &MbarSolution, solve_seconds: f64) -> MbarDetails {
    let k = sol.n_states();
    MbarDetails {
        f: sol.f.clone(),
        sigma_f: (0..k).map(|j| sol.difference(0, j).1).collect(),
        covariance: (0..k)
            .map(|i| sol.covariance[i * k..(i + 1) * k].to_vec())
            .collect(),
        iterations: sol.iterations,
        passes: sol.passes,
        solve_seconds,
    }
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

/// TI from the used frames.
///
/// Both rules are linear in the window means, ΔG = Σ_i Σ_c w_ic ⟨y_c⟩_i, so the
/// estimate is a sum over windows of the mean of the per-frame total
/// z_n = Σ_c w_ic y_nc (y_c the dU/dλ of component c). Its variance is
/// Σ_i g_i s²(z)_i / n_i with g_i the residual inefficiency of z over the used
/// frames: the covariance between components sampled from the same frames is in
/// it, where summing each component's variance would drop it. The per-window
/// points carry each component's own standard error (`g_points`, the residual
/// inefficiency of the window's dU/dλ series).
fn ti(
    leg: &LegSamples,
    used: &[&[usize]],
    g_points: &[f64],
    spline: bool,
) -> (DeltaG, Vec<TiPoint>) {
    let weights: Vec<Vec<f64>> = leg
        .component_lambdas
        .iter()
        .map(|x| path_weights(x, spline))
        .collect();
    let mut total = 0.0;
    let mut var = 0.0;
    for (i, w) in leg.windows.iter().enumerate() {
        let z: Vec<f64> = used[i]
            .iter()
            .map(|&r| {
                (0..weights.len())
                    .map(|c| weights[c][i] * w.dudl_at(r, c))
                    .sum()
            })
            .collect();
        let (m, v) = mean_var(&z);
        total += m;
        var += v * statistical_inefficiency(&z) / z.len() as f64;
    }
    let points = ti_points(leg, used, g_points);
    (
        DeltaG {
            delta_g: total,
            sigma: var.sqrt(),
        },
        points,
    )
}

/// Mean and sample variance (n − 1) of a series (variance 0 below 2 values).
fn mean_var(x: &[f64]) -> (f64, f64) {
    let n = x.len() as f64;
    let m = x.iter().sum::<f64>() / n;
    let v = x.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (n - 1.0).max(1.0);
    (m, v)
}

/// Every window's mean dU/dλ per component, each with its standard error
/// sqrt(g s²/n).
fn ti_points(leg: &LegSamples, used: &[&[usize]], g: &[f64]) -> Vec<TiPoint> {
    let mut points = Vec::new();
    for (c, name) in leg.components.iter().enumerate() {
        for (i, w) in leg.windows.iter().enumerate() {
            let y: Vec<f64> = used[i].iter().map(|&r| w.dudl_at(r, c)).collect();
            let (m, v) = mean_var(&y);
            points.push(TiPoint {
                state: i,
                component: name.clone(),
                lambda: leg.component_lambdas[c][i],
                mean: m,
                sem: (v * g[i] / y.len() as f64).sqrt(),
            });
        }
    }
    points
}
/// The frames of each window (and their residual inefficiencies) an estimate is
/// made from.
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

/// `method` on the first (`head`) or the last `frac` of every window's used frames
/// (residual inefficiencies taken from the whole).
fn on_share(
    leg: &LegSamples,
    method: Method,
    s: &Subset,
    sol: &MbarSolution,
    frac: f64,
    head: bool,
) -> Result<DeltaG, EstimateError> {
    let share = |rows: &[usize]| -> Vec<usize> {
        let n = ((rows.len() as f64 * frac).ceil() as usize).clamp(2.min(rows.len()), rows.len());
        if head {
            rows[..n].to_vec()
        } else {
            rows[rows.len() - n..].to_vec()
        }
    };
    let u: Vec<Vec<usize>> = s.used.iter().map(|r| share(r)).collect();
    let ur: Vec<&[usize]> = u.iter().map(|v| v.as_slice()).collect();
    let t: Option<Vec<Vec<usize>>> = s.ti_used.map(|tu| tu.iter().map(|r| share(r)).collect());
    let tr: Option<Vec<&[usize]>> = t.as_ref().map(|t| t.iter().map(|v| v.as_slice()).collect());
    let part = Subset {
        used: &ur,
        g: s.g,
        ti_used: tr.as_deref(),
        ti_g: s.ti_g,
    };
    method_on(leg, method, &part, &sol.f)
}

/// ΔG from the first and the last 10 %, 20 %, … 100 % of each window's used frames.
fn convergence(
    leg: &LegSamples,
    method: Method,
    s: &Subset,
    sol: &MbarSolution,
) -> Result<Convergence, EstimateError> {
    let points = (1..=10)
        .map(|step| {
            let frac = step as f64 / 10.0;
            Ok(ConvergencePoint {
                fraction: frac,
                forward: on_share(leg, method, s, sol, frac, true)?,
                reverse: on_share(leg, method, s, sol, frac, false)?,
            })
        })
        .collect::<Result<_, EstimateError>>()?;
    Ok(Convergence { method, points })
}

/// ΔG from the first and from the last half of every window's used frames.
fn halves(
    leg: &LegSamples,
    method: Method,
    s: &Subset,
    sol: &MbarSolution,
) -> Result<(DeltaG, DeltaG), EstimateError> {
    Ok((
        on_share(leg, method, s, sol, 0.5, true)?,
        on_share(leg, method, s, sol, 0.5, false)?,
    ))
}
