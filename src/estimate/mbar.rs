//! The multistate Bennett acceptance ratio (Shirts & Chodera 2008, J. Chem. Phys.
//! 129, 124105): the free energies of every state, their asymptotic covariance and
//! the overlap matrix.
//!
//! The free energies minimise the convex function
//! F(f) = Σ_n ln Σ_k N_k e^{f_k − u_k(x_n)} − Σ_k N_k f_k
//! (f_0 fixed at 0), whose gradient is Σ_n p_nk − N_k and whose Hessian is
//! diag(Σ_n p_nk) − Σ_n p_n p_nᵀ, with p_nk the normalised weight of state k for
//! sample n. Newton's method with a backtracking line search, every sum in the log
//! domain; the Hessian is kept while it keeps the gradient falling fast (it changes
//! little near the solution), so most iterations cost one pass over the samples.

use super::error::EstimateError;
use super::fastexp::exp_nonpos;
use nalgebra::{DMatrix, DVector, SymmetricEigen};
use rayon::prelude::*;

/// The samples drawn from one state: rows of a `frames × K` row-major matrix of
/// reduced potentials, the used frames listed in `rows`.
#[derive(Debug, Clone, Copy)]
pub struct MbarBlock<'a> {
    /// The state the frames were sampled from.
    pub state: usize,
    /// Reduced potentials, `frames × K`, row-major.
    pub u: &'a [f64],
    /// The frames used.
    pub rows: &'a [usize],
}

/// Solver settings.
#[derive(Debug, Clone, PartialEq)]
pub struct MbarSettings {
    /// Converged when max_k |∂F/∂f_k| / N falls below this.
    pub tolerance: f64,
    /// Iteration limit.
    pub max_iterations: usize,
    /// Starting free energies (e.g. from BAR); zeros when absent.
    pub initial: Option<Vec<f64>>,
}

impl Default for MbarSettings {
    fn default() -> Self {
        MbarSettings {
            tolerance: 1e-12,
            max_iterations: 100,
            initial: None,
        }
    }
}

/// The MBAR solution.
#[derive(Debug, Clone, PartialEq)]
pub struct MbarSolution {
    /// Reduced free energy of every state, f_0 = 0.
    pub f: Vec<f64>,
    /// Asymptotic covariance Θ of the free energies, `K × K` row-major.
    pub covariance: Vec<f64>,
    /// Overlap matrix O = Wᵀ W N, `K × K` row-major (rows sum to 1).
    pub overlap: Vec<f64>,
    /// Newton iterations taken.
    pub iterations: usize,
    /// Final max |gradient| / N.
    pub gradient: f64,
}

impl MbarSolution {
    /// Number of states.
    pub fn n_states(&self) -> usize {
        self.f.len()
    }
    /// f_j − f_i and its standard error sqrt(Θ_ii + Θ_jj − 2Θ_ij).
    pub fn difference(&self, i: usize, j: usize) -> (f64, f64) {
        let k = self.n_states();
        let t = |a: usize, b: usize| self.covariance[a * k + b];
        let var = t(i, i) + t(j, j) - 2.0 * t(i, j);
        (self.f[j] - self.f[i], var.max(0.0).sqrt())
    }
    /// The smallest overlap between neighbouring states, min_i min(O_{i,i+1}, O_{i+1,i}).
    pub fn min_adjacent_overlap(&self) -> Option<f64> {
        let k = self.n_states();
        (0..k.saturating_sub(1))
            .map(|i| self.overlap[i * k + i + 1].min(self.overlap[(i + 1) * k + i]))
            .reduce(f64::min)
    }
}

/// Sums over samples from one pass.
struct Pass {
    objective: f64,
    colsum: Vec<f64>,
    /// Σ_n p_n p_nᵀ (upper triangle filled), only when asked for.
    gram: Vec<f64>,
}

const CHUNK: usize = 2048;

fn pass(blocks: &[MbarBlock], k: usize, c: &[f64], gram: bool) -> Pass {
    let mut work: Vec<(usize, usize, usize)> = Vec::new();
    for (b, blk) in blocks.iter().enumerate() {
        let mut s = 0;
        while s < blk.rows.len() {
            let e = (s + CHUNK).min(blk.rows.len());
            work.push((b, s, e));
            s = e;
        }
    }
    let empty = || Pass {
        objective: 0.0,
        colsum: vec![0.0; k],
        gram: if gram { vec![0.0; k * k] } else { Vec::new() },
    };
    work.par_iter()
        .fold(empty, |mut acc, &(b, s, e)| {
            let blk = &blocks[b];
            let mut buf = vec![0.0f64; k];
            for &r in &blk.rows[s..e] {
                let u = &blk.u[r * k..(r + 1) * k];
                let mut m = f64::NEG_INFINITY;
                for j in 0..k {
                    let v = c[j] - u[j];
                    buf[j] = v;
                    m = if v > m { v } else { m };
                }
                let mut sum = [0.0f64; 4];
                for (j, v) in buf.iter_mut().enumerate() {
                    let x = exp_nonpos(*v - m);
                    *v = x;
                    sum[j & 3] += x;
                }
                let s = (sum[0] + sum[1]) + (sum[2] + sum[3]);
                acc.objective += m + s.ln();
                let inv = 1.0 / s;
                for (cs, v) in acc.colsum.iter_mut().zip(buf.iter_mut()) {
                    *v *= inv;
                    *cs += *v;
                }
                if gram {
                    for a in 0..k {
                        let pa = buf[a];
                        let row = &mut acc.gram[a * k + a..(a + 1) * k];
                        for (g, pb) in row.iter_mut().zip(&buf[a..]) {
                            *g += pa * pb;
                        }
                    }
                }
            }
            acc
        })
        .reduce(empty, |mut a, b| {
            a.objective += b.objective;
            for (x, y) in a.colsum.iter_mut().zip(&b.colsum) {
                *x += y;
            }
            for (x, y) in a.gram.iter_mut().zip(&b.gram) {
                *x += y;
            }
            a
        })
}

/// Solves the MBAR equations for `k` states from the samples in `blocks`.
/// Every state must have at least one sample.
pub fn solve(blocks: &[MbarBlock], k: usize, settings: &MbarSettings) -> Result<MbarSolution, EstimateError> {
    let mut counts = vec![0.0f64; k];
    for b in blocks {
        counts[b.state] += b.rows.len() as f64;
    }
    if let Some(s) = counts.iter().position(|&n| n == 0.0) {
        return Err(EstimateError::Insufficient(format!(
            "MBAR: state {s} has no samples; every state needs a window with samples"
        )));
    }
    let n_total: f64 = counts.iter().sum();
    let log_n: Vec<f64> = counts.iter().map(|n| n.ln()).collect();
    let mut f = settings.initial.clone().unwrap_or_else(|| vec![0.0; k]);
    assert_eq!(f.len(), k, "initial free energies: one per state");
    let f0 = f[0];
    f.iter_mut().for_each(|x| *x -= f0);
    if k == 1 {
        return Ok(MbarSolution { f, covariance: vec![0.0], overlap: vec![1.0], iterations: 0, gradient: 0.0 });
    }
    let shift = |f: &[f64]| -> Vec<f64> { f.iter().zip(&log_n).map(|(a, b)| a + b).collect() };
    let grad_of = |p: &Pass| -> Vec<f64> { p.colsum.iter().zip(&counts).map(|(a, b)| a - b).collect() };
    let gnorm = |g: &[f64]| g.iter().fold(0.0f64, |m, v| m.max(v.abs())) / n_total;

    let mut cur = pass(blocks, k, &shift(&f), true);
    let mut g = grad_of(&cur);
    let mut chol: Option<nalgebra::Cholesky<f64, nalgebra::Dyn>> = None;
    let mut need_hessian = true;
    let mut iterations = 0;
    let mut last_norm = gnorm(&g);
    while last_norm >= settings.tolerance {
        if iterations >= settings.max_iterations {
            return Err(EstimateError::NotConverged(format!(
                "MBAR did not converge in {} iterations (max |gradient|/N = {last_norm:.3e}); the states may not overlap",
                settings.max_iterations
            )));
        }
        iterations += 1;
        if need_hessian || chol.is_none() {
            if cur.gram.is_empty() {
                cur = pass(blocks, k, &shift(&f), true);
                g = grad_of(&cur);
            }
            chol = Some(reduced_hessian(&cur, k)?);
        }
        let rhs = DVector::from_iterator(k - 1, g[1..].iter().map(|v| -v));
        let step = chol.as_ref().expect("factored above").solve(&rhs);
        let mut t = 1.0;
        let mut accepted = None;
        for _ in 0..40 {
            let mut trial = f.clone();
            for j in 1..k {
                trial[j] += t * step[j - 1];
            }
            let p = pass(blocks, k, &shift(&trial), false);
            let gt = grad_of(&p);
            let slack = 1e-12 * cur.objective.abs().max(1.0);
            if p.objective <= cur.objective + slack || gnorm(&gt) < last_norm {
                accepted = Some((trial, p, gt));
                break;
            }
            t *= 0.5;
        }
        let Some((trial, p, gt)) = accepted else {
            if last_norm < 1e-8 {
                break;
            }
            return Err(EstimateError::NotConverged(format!(
                "MBAR line search failed (max |gradient|/N = {last_norm:.3e}); the states may not overlap"
            )));
        };
        let norm = gnorm(&gt);
        // Keep the factored Hessian while it cuts the gradient at least tenfold per
        // step; otherwise refresh it.
        need_hessian = t < 1.0 || norm > 0.1 * last_norm;
        if norm >= last_norm && last_norm < 1e-8 {
            break;
        }
        f = trial;
        cur = p;
        g = gt;
        last_norm = norm;
    }
    // One pass with the Gram matrix at the solution for the covariance and overlap.
    let fin = pass(blocks, k, &shift(&f), true);
    let gram = full_gram(&fin.gram, k);
    // W_nk = p_nk / N_k, so G = Wᵀ W = N⁻¹ (Σ p pᵀ) N⁻¹.
    let gmat = DMatrix::from_fn(k, k, |a, b| gram[a * k + b] / (counts[a] * counts[b]));
    let covariance = covariance(&gmat, &counts);
    let overlap: Vec<f64> = (0..k * k).map(|i| gmat[(i / k, i % k)] * counts[i % k]).collect();
    Ok(MbarSolution {
        f,
        covariance,
        overlap,
        iterations,
        gradient: last_norm,
    })
}

fn full_gram(upper: &[f64], k: usize) -> Vec<f64> {
    let mut g = upper.to_vec();
    for a in 0..k {
        for b in 0..a {
            g[a * k + b] = g[b * k + a];
        }
    }
    g
}

fn reduced_hessian(p: &Pass, k: usize) -> Result<nalgebra::Cholesky<f64, nalgebra::Dyn>, EstimateError> {
    let gram = full_gram(&p.gram, k);
    let h = DMatrix::from_fn(k - 1, k - 1, |a, b| {
        let (a, b) = (a + 1, b + 1);
        let d = if a == b { p.colsum[a] } else { 0.0 };
        d - gram[a * k + b]
    });
    nalgebra::Cholesky::new(h).ok_or_else(|| {
        EstimateError::NotConverged(
            "MBAR: the Hessian is singular (some states share no samples' weight: they do not overlap)".into(),
        )
    })
}

/// Θ = Wᵀ (I − W N Wᵀ)⁺ W (Shirts & Chodera 2008, Eq. D6), evaluated through the
/// K × K Gram matrix G = WᵀW = V Σ² Vᵀ: Θ = V Σ (I − Σ Vᵀ N V Σ)⁺ Σ Vᵀ, the
/// pseudo-inverse taking care of the rank deficiency (F is blind to a common shift).
fn covariance(g: &DMatrix<f64>, counts: &[f64]) -> Vec<f64> {
    let k = g.nrows();
    let eig = SymmetricEigen::new(g.clone());
    let v = eig.eigenvectors;
    let sigma = DVector::from_iterator(k, eig.eigenvalues.iter().map(|l| l.max(0.0).sqrt()));
    let s = DMatrix::from_diagonal(&sigma);
    let n = DMatrix::from_diagonal(&DVector::from_column_slice(counts));
    let a = &s * v.transpose() * &n * &v * &s;
    let m = DMatrix::<f64>::identity(k, k) - a;
    let me = SymmetricEigen::new(m);
    let biggest = me.eigenvalues.iter().fold(0.0f64, |x, l| x.max(l.abs()));
    let cut = biggest * 1e-10;
    let inv_diag = DVector::from_iterator(k, me.eigenvalues.iter().map(|&l| if l.abs() > cut { 1.0 / l } else { 0.0 }));
    let pinv = &me.eigenvectors * DMatrix::from_diagonal(&inv_diag) * me.eigenvectors.transpose();
    let theta = &v * &s * pinv * &s * v.transpose();
    (0..k * k).map(|i| theta[(i / k, i % k)]).collect()
}
