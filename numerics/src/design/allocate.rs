//! Where additional frames reduce the ligands' variance the most.
//!
//! Each window w adds a_w / N_w to the variance of its group g(w) (an edge, or a
//! leg), N_w its frames: for TI, σ² = Σ c_w² SEM_w² with SEM_w² ∝ 1/N_w (Kirkwood
//! 1935, J. Chem. Phys. 3, 300; the error propagation of any estimator linear in
//! the window means), so a_w = c_w² SEM_w² N_w. A network turns the groups'
//! variances v_g into the ligands' covariance (AᵀWA)⁺ with W = diag(1/v_g)
//! (weighted least squares; see [`super::laplacian_pinv`]).
//!
//! [`allocate`] spends a budget Σ c_w ΔN_w ≤ B (c_w the cost of one frame of w)
//! to minimise either the sum of the ligands' variances (A-optimal; Xu 2019,
//! J. Chem. Inf. Model. 59, 4720) or the largest ligand σ (through the p-norm of
//! the variances, p = 32, a smooth stand-in for the maximum). Both objectives are
//! convex in N. The optimum satisfies the Karush–Kuhn–Tucker conditions
//! N_w = max(N⁰_w, sqrt(G_g a_w / (μ c_w))), with G_g = ∂F/∂v_g and μ the budget's
//! Lagrange multiplier; the solver iterates that water-filling with G held at the
//! current point, damped and accepted only when the objective falls. For
//! independent windows (G constant) it is the classic N_w ∝ sqrt(a_w / c_w)
//! (Neyman allocation; Neyman 1934, J. R. Stat. Soc. 97, 558) in one step.

use super::graph::{check_edges, laplacian_pinv};
use super::DesignError;
use serde::{Deserialize, Serialize};

/// One window's share of its group's variance.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct WindowVariance {
    /// The group (edge or leg) whose variance this window adds to.
    pub group: usize,
    /// Variance × frames: the window adds `a / frames` to its group's variance.
    pub a: f64,
    /// Frames it has now (> 0).
    pub frames: f64,
    /// Cost of one more frame (> 0), in the budget's unit.
    pub cost: f64,
}

/// A network over the groups: group g is the edge `edges[g]` between two of
/// `ligands` ligands.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Network {
    /// Number of ligands.
    pub ligands: usize,
    /// The ligands (0-based) each group's edge joins.
    pub edges: Vec<(usize, usize)>,
}

/// What to minimise.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Objective {
    /// The sum of the ligands' variances (A-optimal); without a network, of the groups'.
    SumOfVariances,
    /// The largest ligand σ; without a network, the largest group σ.
    LargestSigma,
}

/// The windows, their groups, and optionally the network over the groups.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AllocationProblem {
    /// Every window that can be extended.
    pub windows: Vec<WindowVariance>,
    /// Number of groups.
    pub groups: usize,
    /// The network, when the groups are its edges.
    pub network: Option<Network>,
}

/// An allocation and what it is predicted to do.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Allocation {
    /// Additional frames per window (continuous; round as the engine needs).
    pub extra: Vec<f64>,
    /// Budget spent, Σ cost × extra.
    pub spent: f64,
    /// Each group's variance now and after.
    pub group_variance_before: Vec<f64>,
    /// See `group_variance_before`.
    pub group_variance_after: Vec<f64>,
    /// Each ligand's variance (series-mean gauge) now and after; empty without a network.
    pub ligand_variance_before: Vec<f64>,
    /// See `ligand_variance_before`.
    pub ligand_variance_after: Vec<f64>,
    /// The objective now and after: a sum of variances, or the largest σ.
    pub objective_before: f64,
    /// See `objective_before`.
    pub objective_after: f64,
    /// Iterations of the solver.
    pub iterations: usize,
}

const P_NORM: f64 = 32.0;

impl AllocationProblem {
    fn check(&self) -> Result<(), DesignError> {
        if self.windows.is_empty() {
            return Err(DesignError::Input(
                "no windows to allocate frames to".into(),
            ));
        }
        for (i, w) in self.windows.iter().enumerate() {
            if w.group >= self.groups {
                return Err(DesignError::Input(format!(
                    "window {i} is in group {} of {}",
                    w.group, self.groups
                )));
            }
            if !(w.a.is_finite() && w.a >= 0.0) {
                return Err(DesignError::Input(format!(
                    "window {i}: variance × frames is {}; it must be finite and ≥ 0",
                    w.a
                )));
            }
            if !(w.frames.is_finite() && w.frames > 0.0) {
                return Err(DesignError::Input(format!(
                    "window {i} has {} frames; a window to extend needs frames already (run a pilot first)",
                    w.frames
                )));
            }
            if !(w.cost.is_finite() && w.cost > 0.0) {
                return Err(DesignError::Input(format!(
                    "window {i}: a frame costs {}; give a finite positive cost",
                    w.cost
                )));
            }
        }
        let v = self.group_variance(&self.windows.iter().map(|w| w.frames).collect::<Vec<_>>());
        if let Some(g) = v.iter().position(|&v| v <= 0.0) {
            return Err(DesignError::Input(format!(
                "group {g} has no variance to reduce (no window, or all contribute 0); a network edge needs a positive σ"
            )));
        }
        if let Some(net) = &self.network {
            if net.edges.len() != self.groups {
                return Err(DesignError::Input(format!(
                    "the network has {} edges for {} groups; give one edge per group",
                    net.edges.len(),
                    self.groups
                )));
            }
            let e: Vec<(usize, usize, f64)> = net
                .edges
                .iter()
                .zip(&v)
                .map(|(&(a, b), &v)| (a, b, v))
                .collect();
            check_edges(net.ligands, &e)?;
            laplacian_pinv(net.ligands, &e)?;
        }
        Ok(())
    }

    /// Each group's variance with `frames[w]` frames in window w.
    pub fn group_variance(&self, frames: &[f64]) -> Vec<f64> {
        let mut v = vec![0.0; self.groups];
        for (w, &n) in self.windows.iter().zip(frames) {
            v[w.group] += w.a / n;
        }
        v
    }

    /// The ligands' variances (series-mean gauge) for group variances `v`; empty
    /// without a network.
    ///
    /// # Errors
    /// As [`laplacian_pinv`].
    pub fn ligand_variance(&self, v: &[f64]) -> Result<Vec<f64>, DesignError> {
        let Some(net) = &self.network else {
            return Ok(Vec::new());
        };
        let c = laplacian_pinv(net.ligands, &self.edge_list(v))?;
        Ok((0..net.ligands).map(|i| c[(i, i)]).collect())
    }

    fn edge_list(&self, v: &[f64]) -> Vec<(usize, usize, f64)> {
        let net = self.network.as_ref().expect("a network");
        net.edges
            .iter()
            .zip(v)
            .map(|(&(a, b), &v)| (a, b, v))
            .collect()
    }

    /// The objective with `frames[w]` frames in window w: the sum of variances,
    /// or the largest σ.
    ///
    /// # Errors
    /// As [`laplacian_pinv`].
    pub fn objective(&self, frames: &[f64], objective: Objective) -> Result<f64, DesignError> {
        let v = self.group_variance(frames);
        let target = if self.network.is_some() {
            self.ligand_variance(&v)?
        } else {
            v
        };
        Ok(match objective {
            Objective::SumOfVariances => target.iter().sum(),
            Objective::LargestSigma => target.iter().copied().fold(0.0, f64::max).sqrt(),
        })
    }

    /// The smooth objective the solver descends and ∂F/∂v_g for every group.
    fn surrogate(
        &self,
        frames: &[f64],
        objective: Objective,
    ) -> Result<(f64, Vec<f64>), DesignError> {
        let v = self.group_variance(frames);
        let p = match objective {
            Objective::SumOfVariances => 1.0,
            Objective::LargestSigma => P_NORM,
        };
        match &self.network {
            None => {
                let scale = v.iter().copied().fold(0.0, f64::max);
                let f = if p == 1.0 {
                    v.iter().sum()
                } else {
                    scale
                        * v.iter()
                            .map(|x| (x / scale).powf(p))
                            .sum::<f64>()
                            .powf(1.0 / p)
                };
                // ∂(Σ v^p)^{1/p}/∂v_g = (v_g / F)^{p−1}.
                let g = v
                    .iter()
                    .map(|&x| if p == 1.0 { 1.0 } else { (x / f).powf(p - 1.0) })
                    .collect();
                Ok((f, g))
            }
            Some(net) => {
                let c = laplacian_pinv(net.ligands, &self.edge_list(&v))?;
                let d: Vec<f64> = (0..net.ligands).map(|i| c[(i, i)]).collect();
                let scale = d.iter().copied().fold(0.0, f64::max);
                let (f, q): (f64, Vec<f64>) = if p == 1.0 {
                    (d.iter().sum(), vec![1.0; d.len()])
                } else {
                    let f = scale
                        * d.iter()
                            .map(|x| (x / scale).powf(p))
                            .sum::<f64>()
                            .powf(1.0 / p);
                    (f, d.iter().map(|&x| (x / f).powf(p - 1.0)).collect())
                };
                // ∂C_ii/∂w_g = −(C a_g)_i², ∂w_g/∂v_g = −1/v_g².
                let g = net
                    .edges
                    .iter()
                    .zip(&v)
                    .map(|(&(a, b), &vg)| {
                        let s: f64 = (0..net.ligands)
                            .map(|i| {
                                let y = c[(i, b)] - c[(i, a)];
                                q[i] * y * y
                            })
                            .sum();
                        s / (vg * vg)
                    })
                    .collect();
                Ok((f, g))
            }
        }
    }
}

/// The water-filling step: frames N_w = max(N⁰_w, sqrt(G a_w / (μ c_w))) with μ
/// set by bisection so that the budget is spent exactly.
fn water_fill(p: &AllocationProblem, g: &[f64], budget: f64) -> Vec<f64> {
    let amount = |mu: f64| -> (Vec<f64>, f64) {
        let n: Vec<f64> = p
            .windows
            .iter()
            .map(|w| w.frames.max((g[w.group] * w.a / (mu * w.cost)).sqrt()))
            .collect();
        let spent = p
            .windows
            .iter()
            .zip(&n)
            .map(|(w, n)| w.cost * (n - w.frames))
            .sum();
        (n, spent)
    };
    // Bracket μ on a log scale: spending falls as μ grows.
    let (mut lo, mut hi) = (-300.0f64, 300.0f64);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if amount(mid.exp2()).1 > budget {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let (mut n, spent) = amount(hi.exp2());
    // Scale the remainder so the budget is met to rounding.
    if spent > 0.0 {
        let f = budget / spent;
        for (x, w) in n.iter_mut().zip(&p.windows) {
            *x = w.frames + (*x - w.frames) * f;
        }
    }
    n
}

/// Spreads `budget` (in the windows' cost unit) over the windows to minimise the
/// objective (see the module's documentation for the model and the method).
///
/// # Errors
/// [`DesignError::Input`] for a negative budget or windows that do not fit (a
/// group out of range, frames or cost not positive, a group with no variance, a
/// network with a different number of edges); [`DesignError::Infeasible`] for a
/// disconnected network.
///
/// # Examples
/// ```
/// use legwork_numerics::design::allocate::{allocate, AllocationProblem, Objective, WindowVariance};
/// // Two independent windows of one leg, a = 4 and 1, same cost: the optimum has
/// // N ∝ sqrt(a), i.e. 2 : 1 of the 300 frames in all.
/// let w = |a| WindowVariance { group: 0, a, frames: 50.0, cost: 1.0 };
/// let p = AllocationProblem { windows: vec![w(4.0), w(1.0)], groups: 1, network: None };
/// let r = allocate(&p, 200.0, Objective::SumOfVariances).unwrap();
/// assert!((50.0 + r.extra[0] - 200.0).abs() < 1e-6);
/// assert!((50.0 + r.extra[1] - 100.0).abs() < 1e-6);
/// ```
pub fn allocate(
    problem: &AllocationProblem,
    budget: f64,
    objective: Objective,
) -> Result<Allocation, DesignError> {
    if !(budget.is_finite() && budget >= 0.0) {
        return Err(DesignError::Input(format!(
            "a budget of {budget}: give a finite amount ≥ 0"
        )));
    }
    problem.check()?;
    let n0: Vec<f64> = problem.windows.iter().map(|w| w.frames).collect();
    let mut n = n0.clone();
    let mut iterations = 0;
    if budget > 0.0 {
        // Start from the uniform allocation, which spends the budget.
        n = uniform(problem, budget)
            .iter()
            .zip(&n0)
            .map(|(e, f)| e + f)
            .collect();
        let (mut f, mut g) = problem.surrogate(&n, objective)?;
        let mut step = 1.0;
        while iterations < 5000 {
            iterations += 1;
            let target = water_fill(problem, &g, budget);
            let trial: Vec<f64> = n
                .iter()
                .zip(&target)
                .map(|(x, t)| x + step * (t - x))
                .collect();
            let (ft, gt) = problem.surrogate(&trial, objective)?;
            if ft <= f {
                let gain = (f - ft) / f.abs().max(f64::MIN_POSITIVE);
                let moved = n
                    .iter()
                    .zip(&trial)
                    .map(|(a, b)| (a - b).abs() / a)
                    .fold(0.0, f64::max);
                n = trial;
                f = ft;
                g = gt;
                step = (step * 1.5).min(1.0);
                if gain < 1e-13 && moved < 1e-9 {
                    break;
                }
            } else {
                step *= 0.5;
                if step < 1e-6 {
                    break;
                }
            }
        }
    }
    let extra: Vec<f64> = n.iter().zip(&n0).map(|(a, b)| (a - b).max(0.0)).collect();
    let vb = problem.group_variance(&n0);
    let va = problem.group_variance(&n);
    Ok(Allocation {
        spent: problem
            .windows
            .iter()
            .zip(&extra)
            .map(|(w, e)| w.cost * e)
            .sum(),
        ligand_variance_before: problem.ligand_variance(&vb)?,
        ligand_variance_after: problem.ligand_variance(&va)?,
        group_variance_before: vb,
        group_variance_after: va,
        objective_before: problem.objective(&n0, objective)?,
        objective_after: problem.objective(&n, objective)?,
        extra,
        iterations,
    })
}

/// The uniform allocation of `budget`: the same number of additional frames in
/// every window, B / Σ c_w each (the baseline a proposal is compared with).
///
/// # Examples
/// ```
/// use legwork_numerics::design::allocate::{uniform, AllocationProblem, WindowVariance};
/// let w = |cost| WindowVariance { group: 0, a: 1.0, frames: 10.0, cost };
/// let p = AllocationProblem { windows: vec![w(1.0), w(3.0)], groups: 1, network: None };
/// assert_eq!(uniform(&p, 40.0), vec![10.0, 10.0]);
/// ```
pub fn uniform(problem: &AllocationProblem, budget: f64) -> Vec<f64> {
    let per: f64 = problem.windows.iter().map(|w| w.cost).sum();
    vec![budget / per; problem.windows.len()]
}
