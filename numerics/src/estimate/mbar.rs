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
    /// Passes over the samples (each one sweep computing weights; a measure of the
    /// solve's cost that does not depend on the machine).
    pub passes: usize,
    /// Final max |gradient| / N.
    pub gradient: f64,
}

impl MbarSolution {
    /// Number of states.
    pub fn n_states(&self) -> usize {
        self.f.len()
    }
    /// f_j − f_i and its standard error sqrt(Θ_ii + Θ_jj − 2Θ_ij).
    ///
    /// # Panics
    ///
    /// When `i` or `j` is not a state.
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
    /// Σ_n p_n p_nᵀ, `K × K` row-major, only when asked for.
    gram: Vec<f64>,
}

/// A Newton step below this in every reduced free energy is taken to be the last:
/// the covariance and overlap at the point before it differ from those at the
/// solution by about this much relative, far below the precision of an error bar
/// (whose own statistical uncertainty is of order 1/√N).
const FINAL_STEP: f64 = 1e-5;

/// Samples per work item: the weights of one chunk (CHUNK × K) stay in cache for
/// the Gram update.
const CHUNK: usize = 512;

/// Σ_n (m_n + ln s_n) with one ln per 8 samples, of the product of their sums
/// (each s_n lies in [1, K], so the product cannot overflow for any realistic K).
pub(super) struct LogSum {
    total: f64,
    prod: f64,
    nprod: usize,
}

impl LogSum {
    fn new() -> Self {
        LogSum {
            total: 0.0,
            prod: 1.0,
            nprod: 0,
        }
    }
    #[inline(always)]
    pub(super) fn add(&mut self, m: f64, s: f64) {
        self.total += m;
        self.prod *= s;
        self.nprod += 1;
        if self.nprod == 8 {
            self.total += self.prod.ln();
            self.prod = 1.0;
            self.nprod = 0;
        }
    }
    fn finish(&mut self) -> f64 {
        self.total += self.prod.ln();
        self.prod = 1.0;
        self.nprod = 0;
        self.total
    }
}

/// One chunk of samples: the frames `rows` of `u` (`frames × k`, row-major) and
/// c_j = f_j + ln N_j, padded to `kp` (K rounded up to a multiple of 4) with −∞.
pub(super) struct ChunkIn<'a> {
    pub(super) u: &'a [f64],
    pub(super) rows: &'a [usize],
    pub(super) k: usize,
    pub(super) kp: usize,
    pub(super) c: &'a [f64],
}

/// Per-thread sums (`colsum` is `kp` wide) and the weights of the current chunk
/// (`buf`, row stride `kp`).
pub(super) struct Sums {
    pub(super) lse: LogSum,
    pub(super) colsum: Vec<f64>,
    pub(super) buf: Vec<f64>,
}

struct Acc {
    sums: Sums,
    gram: Option<DMatrix<f64>>,
}

/// The weights of one chunk without SIMD.
fn weights_scalar(input: &ChunkIn, out: &mut Sums) {
    let ChunkIn { u, rows, k, kp, c } = *input;
    for (i, &r) in rows.iter().enumerate() {
        let urow = &u[r * k..(r + 1) * k];
        let row = &mut out.buf[i * kp..i * kp + k];
        for ((o, cj), uj) in row.iter_mut().zip(c).zip(urow) {
            *o = cj - uj;
        }
        let m = row.iter().fold(f64::NEG_INFINITY, |a, &b| a.max(b));
        let mut s = 0.0;
        for o in row.iter_mut() {
            *o = exp_nonpos(*o - m);
            s += *o;
        }
        out.lse.add(m, s);
        let inv = 1.0 / s;
        for (cs, v) in out.colsum.iter_mut().zip(row.iter_mut()) {
            *v *= inv;
            *cs += *v;
        }
    }
}

/// One chunk of samples: weights, log-sum-exp, column sums, and (when asked) the
/// Gram matrix Σ p pᵀ through one matrix product per chunk.
fn chunk(input: &ChunkIn, acc: &mut Acc) {
    let (k, kp, r) = (input.k, input.kp, input.rows.len());
    if acc.sums.buf.len() < r * kp {
        acc.sums.buf.resize(r * kp, 0.0);
    }
    let mut done = false;
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") && std::arch::is_x86_feature_detected!("fma")
        {
            // SAFETY: the CPU supports AVX2 and FMA (checked just above); `pass` builds
            // the input as `weights` requires (c and colsum kp wide with c[k..] = −∞,
            // buf resized just above, row indices checked against u).
            unsafe { super::mbar_avx2::weights(input, &mut acc.sums) };
            done = true;
        }
    }
    if !done {
        weights_scalar(input, &mut acc.sums);
    }
    if let Some(g) = acc.gram.as_mut() {
        let p = &acc.sums.buf[..r * kp];
        // The chunk's weights read as K × r (column = sample) and as its transpose.
        let a = nalgebra::DMatrixView::from_slice_with_strides(p, k, r, 1, kp);
        let at = nalgebra::DMatrixView::from_slice_with_strides(p, r, k, kp, 1);
        g.gemm(1.0, &a, &at, 1.0);
    }
}

fn pass(blocks: &[MbarBlock], k: usize, c: &[f64], gram: bool) -> Pass {
    let kp = k.div_ceil(4) * 4;
    let mut cpad = c.to_vec();
    cpad.resize(kp, f64::NEG_INFINITY);
    for blk in blocks {
        assert!(
            blk.rows.iter().all(|&r| (r + 1) * k <= blk.u.len()),
            "MBAR block rows lie inside its reduced potentials"
        );
    }
    let mut work: Vec<(usize, usize, usize)> = Vec::new();
    for (b, blk) in blocks.iter().enumerate() {
        let mut s = 0;
        while s < blk.rows.len() {
            let e = (s + CHUNK).min(blk.rows.len());
            work.push((b, s, e));
            s = e;
        }
    }
    let empty = || Acc {
        sums: Sums {
            lse: LogSum::new(),
            colsum: vec![0.0; kp],
            buf: Vec::new(),
        },
        gram: gram.then(|| DMatrix::zeros(k, k)),
    };
    let acc = work
        .par_iter()
        .fold(empty, |mut acc, &(b, s, e)| {
            let blk = &blocks[b];
            let input = ChunkIn {
                u: blk.u,
                rows: &blk.rows[s..e],
                k,
                kp,
                c: &cpad,
            };
            chunk(&input, &mut acc);
            acc
        })
        .map(|mut a| {
            a.sums.lse.finish();
            a
        })
        .reduce(empty, |mut a, b| {
            a.sums.lse.total += b.sums.lse.total;
            for (x, y) in a.sums.colsum.iter_mut().zip(&b.sums.colsum) {
                *x += y;
            }
            if let (Some(x), Some(y)) = (a.gram.as_mut(), b.gram.as_ref()) {
                *x += y;
            }
            a
        });
    let mut colsum = acc.sums.colsum;
    colsum.truncate(k);
    Pass {
        objective: acc.sums.lse.total,
        colsum,
        gram: acc
            .gram
            .map(|g| (0..k * k).map(|i| g[(i / k, i % k)]).collect())
            .unwrap_or_default(),
    }
}

/// Solves the MBAR equations for `k` states from the samples in `blocks`.
///
/// The Newton iteration starts from `settings.initial` (zeros when absent) and stops
/// when max_k |∂F/∂f_k| / N falls below `settings.tolerance`; the covariance and
/// overlap are evaluated at the solution.
///
/// # Errors
///
/// [`EstimateError::Insufficient`] when a state has no samples;
/// [`EstimateError::NotConverged`] when the iteration limit is reached, the line
/// search fails or the Hessian is singular (states that share no weight at all).
///
/// # Panics
///
/// When `settings.initial` does not hold one value per state, or a block lists a
/// frame outside its reduced potentials.
///
/// # Examples
///
/// Two identical states (every frame has the same reduced potential at both)
/// have equal free energies:
///
/// ```
/// use legwork_numerics::estimate::mbar::{solve, MbarBlock, MbarSettings};
/// // 3 frames sampled from state 0 and 3 from state 1, each `frames × 2`.
/// let u0 = [0.1, 0.1, 0.5, 0.5, 0.9, 0.9];
/// let u1 = [0.2, 0.2, 0.4, 0.4, 0.8, 0.8];
/// let rows = [0, 1, 2];
/// let blocks = [
///     MbarBlock { state: 0, u: &u0, rows: &rows },
///     MbarBlock { state: 1, u: &u1, rows: &rows },
/// ];
/// let sol = solve(&blocks, 2, &MbarSettings::default()).unwrap();
/// assert!(sol.f[1].abs() < 1e-12);
/// assert!(sol.passes >= 1);
/// ```
pub fn solve(
    blocks: &[MbarBlock],
    k: usize,
    settings: &MbarSettings,
) -> Result<MbarSolution, EstimateError> {
    let problem = Problem::new(blocks, k)?;
    let mut f = settings.initial.clone().unwrap_or_else(|| vec![0.0; k]);
    assert_eq!(f.len(), k, "initial free energies: one per state");
    let f0 = f[0];
    f.iter_mut().for_each(|x| *x -= f0);
    if k == 1 {
        return Ok(MbarSolution {
            f,
            covariance: vec![0.0],
            overlap: vec![1.0],
            iterations: 0,
            passes: 0,
            gradient: 0.0,
        });
    }
    let newton = problem.newton(f, settings)?;
    let (covariance, overlap) = problem.covariance_and_overlap(&newton.gram_pass);
    Ok(MbarSolution {
        f: newton.f,
        covariance,
        overlap,
        iterations: newton.iterations,
        passes: problem.passes.get(),
        gradient: newton.gradient,
    })
}

/// The samples of an MBAR problem with their counts, and the passes made over them.
struct Problem<'a> {
    blocks: &'a [MbarBlock<'a>],
    k: usize,
    counts: Vec<f64>,
    log_n: Vec<f64>,
    n_total: f64,
    passes: std::cell::Cell<usize>,
}

/// Where the Newton iteration stopped, with the last pass that has a Gram matrix.
struct Newton {
    f: Vec<f64>,
    iterations: usize,
    gradient: f64,
    gram_pass: Pass,
}

impl<'a> Problem<'a> {
    fn new(blocks: &'a [MbarBlock<'a>], k: usize) -> Result<Self, EstimateError> {
        let mut counts = vec![0.0f64; k];
        for b in blocks {
            counts[b.state] += b.rows.len() as f64;
        }
        if let Some(s) = counts.iter().position(|&n| n == 0.0) {
            return Err(EstimateError::Insufficient(format!(
                "MBAR: state {s} has no samples; every state needs a window with samples"
            )));
        }
        Ok(Problem {
            blocks,
            k,
            n_total: counts.iter().sum(),
            log_n: counts.iter().map(|n| n.ln()).collect(),
            counts,
            passes: std::cell::Cell::new(0),
        })
    }

    /// One pass at free energies `f`.
    fn pass_at(&self, f: &[f64], gram: bool) -> Pass {
        self.passes.set(self.passes.get() + 1);
        let c: Vec<f64> = f.iter().zip(&self.log_n).map(|(a, b)| a + b).collect();
        pass(self.blocks, self.k, &c, gram)
    }

    fn gradient(&self, p: &Pass) -> Vec<f64> {
        p.colsum
            .iter()
            .zip(&self.counts)
            .map(|(a, b)| a - b)
            .collect()
    }

    fn norm(&self, g: &[f64]) -> f64 {
        g.iter().fold(0.0f64, |m, v| m.max(v.abs())) / self.n_total
    }

    /// Newton's method from `f` (f_0 = 0) to the tolerance.
    ///
    /// Every step is a full Newton step, so the pass at each new point computes the
    /// Gram matrix (one small matrix product per chunk of samples) for the next
    /// step. The exception is a step below FINAL_STEP in every f: its pass is
    /// expected to show convergence, so it skips the Gram matrix, and the
    /// covariance and overlap come from the pass before it. When that pass does not
    /// converge after all, the Gram matrix is computed at that point before the
    /// next step.
    fn newton(&self, mut f: Vec<f64>, settings: &MbarSettings) -> Result<Newton, EstimateError> {
        let mut cur = self.pass_at(&f, true);
        // The pass with a Gram matrix that `cur` replaced when `cur` has none.
        let mut gram_pass: Option<Pass> = None;
        let mut g = self.gradient(&cur);
        let mut iterations = 0;
        let mut last_norm = self.norm(&g);
        while last_norm >= settings.tolerance {
            if iterations >= settings.max_iterations {
                return Err(EstimateError::NotConverged(format!(
                    "MBAR did not converge in {} iterations (max |gradient|/N = {last_norm:.3e}); the states may not overlap",
                    settings.max_iterations
                )));
            }
            iterations += 1;
            if cur.gram.is_empty() {
                cur = self.pass_at(&f, true);
                gram_pass = None;
            }
            let Some((trial, p, gt)) = self.line_search(&f, &cur, &g, last_norm)? else {
                break;
            };
            let norm = self.norm(&gt);
            // Below 1e-8 a step that no longer lowers the gradient has hit rounding noise.
            if norm >= last_norm && last_norm < 1e-8 {
                break;
            }
            f = trial;
            let replaced = std::mem::replace(&mut cur, p);
            if cur.gram.is_empty() {
                gram_pass = Some(replaced);
            }
            g = gt;
            last_norm = norm;
        }
        let gram_pass = if cur.gram.is_empty() {
            gram_pass.expect("a pass without the Gram matrix follows one with it")
        } else {
            cur
        };
        Ok(Newton {
            f,
            iterations,
            gradient: last_norm,
            gram_pass,
        })
    }

    /// The Newton step from `f` (where `cur` is the pass, with its Gram matrix, and
    /// `g` the gradient) with backtracking: the accepted point, its pass and its
    /// gradient; `None` when no step helps but the gradient is already at rounding
    /// level.
    #[allow(clippy::type_complexity)]
    fn line_search(
        &self,
        f: &[f64],
        cur: &Pass,
        g: &[f64],
        last_norm: f64,
    ) -> Result<Option<(Vec<f64>, Pass, Vec<f64>)>, EstimateError> {
        let k = self.k;
        let chol = reduced_hessian(cur, k)?;
        let rhs = DVector::from_iterator(k - 1, g[1..].iter().map(|v| -v));
        let step = chol.solve(&rhs);
        let last_step = step.amax() <= FINAL_STEP;
        let mut t = 1.0;
        for _ in 0..40 {
            let mut trial = f.to_vec();
            for j in 1..k {
                trial[j] += t * step[j - 1];
            }
            let p = self.pass_at(&trial, !last_step);
            let gt = self.gradient(&p);
            let slack = 1e-12 * cur.objective.abs().max(1.0);
            if p.objective <= cur.objective + slack || self.norm(&gt) < last_norm {
                return Ok(Some((trial, p, gt)));
            }
            t *= 0.5;
        }
        if last_norm < 1e-8 {
            return Ok(None);
        }
        Err(EstimateError::NotConverged(format!(
            "MBAR line search failed (max |gradient|/N = {last_norm:.3e}); the states may not overlap"
        )))
    }

    /// Θ and the overlap matrix from a pass's Gram matrix.
    fn covariance_and_overlap(&self, fin: &Pass) -> (Vec<f64>, Vec<f64>) {
        let (k, counts) = (self.k, &self.counts);
        let gram = full_gram(&fin.gram, k);
        // W_nk = p_nk / N_k, so G = Wᵀ W = N⁻¹ (Σ p pᵀ) N⁻¹.
        let gmat = DMatrix::from_fn(k, k, |a, b| gram[a * k + b] / (counts[a] * counts[b]));
        let covariance = covariance(&gmat, counts);
        let overlap: Vec<f64> = (0..k * k)
            .map(|i| gmat[(i / k, i % k)] * counts[i % k])
            .collect();
        (covariance, overlap)
    }
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

/// The Hessian of F in f_1 … f_{K−1}, factored. Where states share (almost) no
/// weight the Hessian is singular to rounding in that direction; it is then
/// damped (Levenberg–Marquardt: H + μ I, μ growing from 1e-12 of its largest
/// diagonal element), so the step in the undetermined direction is small and the
/// free energies keep their start there. The covariance then reports that
/// direction's huge variance.
fn reduced_hessian(
    p: &Pass,
    k: usize,
) -> Result<nalgebra::Cholesky<f64, nalgebra::Dyn>, EstimateError> {
    let gram = full_gram(&p.gram, k);
    let h = DMatrix::from_fn(k - 1, k - 1, |a, b| {
        let (a, b) = (a + 1, b + 1);
        let d = if a == b { p.colsum[a] } else { 0.0 };
        d - gram[a * k + b]
    });
    if let Some(c) = nalgebra::Cholesky::new(h.clone()) {
        return Ok(c);
    }
    let top = h.diagonal().amax().max(1.0);
    let mut mu = 1e-12 * top;
    while mu <= top {
        let damped = &h + DMatrix::<f64>::identity(k - 1, k - 1) * mu;
        if let Some(c) = nalgebra::Cholesky::new(damped) {
            return Ok(c);
        }
        mu *= 100.0;
    }
    Err(EstimateError::NotConverged(
        "MBAR: the Hessian is not positive definite even when damped (the samples' weights are not finite)".into(),
    ))
}

/// Θ = Wᵀ (I − W N Wᵀ)⁺ W (Shirts & Chodera 2008, Eq. D6), evaluated through the
/// K × K Gram matrix G = WᵀW = V Σ² Vᵀ: Θ = V Σ M⁺ Σ Vᵀ with M = I − Σ Vᵀ N V Σ.
///
/// M has exactly one null direction that the estimator cannot see (a common shift
/// of every f): y₀ = Σ Vᵀ n with n the sample counts, since W n = 1 and Wᵀ 1 = 1
/// at the solution. The pseudo-inverse removes that direction and only that one,
/// M⁺ = (M + ŷ₀ŷ₀ᵀ)⁻¹ − ŷ₀ŷ₀ᵀ, so a direction that the samples determine weakly
/// (states that barely overlap: a tiny eigenvalue of M) keeps its large variance
/// instead of being cut away with a relative eigenvalue threshold. An eigenvalue
/// that is zero to rounding (states that share no weight at all) is floored at
/// [`NULL_EIGENVALUE`], which leaves a variance of order 1/ε: no error bar, a
/// signal that the leg cannot be estimated.
fn covariance(g: &DMatrix<f64>, counts: &[f64]) -> Vec<f64> {
    let k = g.nrows();
    let eig = SymmetricEigen::new(g.clone());
    let v = eig.eigenvectors;
    let sigma = DVector::from_iterator(k, eig.eigenvalues.iter().map(|l| l.max(0.0).sqrt()));
    let s = DMatrix::from_diagonal(&sigma);
    let n = DMatrix::from_diagonal(&DVector::from_column_slice(counts));
    let a = &s * v.transpose() * &n * &v * &s;
    let mut y0 = &s * v.transpose() * DVector::from_column_slice(counts);
    let norm = y0.norm();
    let null = if norm > 0.0 && norm.is_finite() {
        y0 /= norm;
        &y0 * y0.transpose()
    } else {
        DMatrix::zeros(k, k)
    };
    let m = DMatrix::<f64>::identity(k, k) - a + &null;
    let me = SymmetricEigen::new(m);
    let inv_diag = DVector::from_iterator(
        k,
        me.eigenvalues
            .iter()
            .map(|&l| 1.0 / l.abs().max(NULL_EIGENVALUE)),
    );
    let pinv =
        &me.eigenvectors * DMatrix::from_diagonal(&inv_diag) * me.eigenvectors.transpose() - null;
    let theta = &v * &s * pinv * &s * v.transpose();
    (0..k * k).map(|i| theta[(i / k, i % k)]).collect()
}

/// The smallest eigenvalue of the deflated M in [`covariance`] taken as nonzero: M's
/// entries are O(1) and computed to about 1e-16 each, so an eigenvalue below this
/// is not resolved from zero.
const NULL_EIGENVALUE: f64 = 1e-13;

#[cfg(test)]
mod tests {
    use super::*;

    /// The covariance and overlap reported after a last step that skipped the Gram
    /// matrix agree with those evaluated at the solution itself (the definition,
    /// Shirts & Chodera 2008, Eq. D6, at the final free energies).
    #[test]
    fn covariance_after_the_last_step_is_the_one_at_the_solution() {
        let k = 6;
        let frames = 4000;
        let mut state = 0x853c_49e6_748f_ea9bu64;
        let mut unif = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            ((state >> 11) as f64 + 0.5) / (1u64 << 53) as f64
        };
        // Harmonic states u_j(x) = κ_j (x − μ_j)² / 2, sampled exactly.
        let kappa: Vec<f64> = (0..k).map(|j| 1.0 + 0.4 * j as f64).collect();
        let mu: Vec<f64> = (0..k).map(|j| 0.3 * j as f64).collect();
        let mut u = Vec::new();
        for s in 0..k {
            let mut w = Vec::with_capacity(frames * k);
            for _ in 0..frames {
                let z = (-2.0 * unif().ln()).sqrt() * (std::f64::consts::TAU * unif()).cos();
                let x = mu[s] + z / kappa[s].sqrt();
                w.extend((0..k).map(|j| 0.5 * kappa[j] * (x - mu[j]).powi(2)));
            }
            u.push(w);
        }
        let rows: Vec<usize> = (0..frames).collect();
        let blocks: Vec<MbarBlock> = (0..k)
            .map(|s| MbarBlock {
                state: s,
                u: &u[s],
                rows: &rows,
            })
            .collect();
        let sol = solve(&blocks, k, &MbarSettings::default()).unwrap();
        let counts = vec![frames as f64; k];
        let c: Vec<f64> = sol.f.iter().map(|f| f + (frames as f64).ln()).collect();
        let at = pass(&blocks, k, &c, true);
        let gram = full_gram(&at.gram, k);
        let gmat = DMatrix::from_fn(k, k, |a, b| gram[a * k + b] / (counts[a] * counts[b]));
        let want = covariance(&gmat, &counts);
        for (got, want) in sol.covariance.iter().zip(&want) {
            assert!(
                (got - want).abs() <= 1e-4 * want.abs().max(1e-6),
                "{got} vs {want}"
            );
        }
        let (_, sigma) = sol.difference(0, k - 1);
        let var = want[0] + want[k * k - 1] - 2.0 * want[k - 1];
        assert!((sigma / var.sqrt() - 1.0).abs() < 1e-4);
        for (i, o) in sol.overlap.iter().enumerate() {
            let exact = gmat[(i / k, i % k)] * counts[i % k];
            assert!((o - exact).abs() < 1e-4 * exact.max(1e-6));
        }
    }

    /// Both kernels against the definition of the MBAR weights (Shirts & Chodera
    /// 2008, Eq. 9), p_nk = e^{c_k − u_nk} / Σ_j e^{c_j − u_nj}, with std's exp.
    #[test]
    fn kernels_match_the_definition() {
        for k in [1usize, 3, 4, 7, 30] {
            let frames = 40;
            let u: Vec<f64> = (0..frames * k)
                .map(|i| ((i * 7919) % 1000) as f64 * 0.05)
                .collect();
            let rows: Vec<usize> = (0..frames).step_by(3).collect();
            let kp = k.div_ceil(4) * 4;
            let mut c: Vec<f64> = (0..k).map(|j| 0.3 * j as f64).collect();
            c.resize(kp, f64::NEG_INFINITY);
            let input = ChunkIn {
                u: &u,
                rows: &rows,
                k,
                kp,
                c: &c,
            };
            let fresh = || Sums {
                lse: LogSum::new(),
                colsum: vec![0.0; kp],
                buf: vec![0.0; rows.len() * kp],
            };
            let mut outs = vec![fresh()];
            weights_scalar(&input, &mut outs[0]);
            #[cfg(target_arch = "x86_64")]
            if std::arch::is_x86_feature_detected!("avx2")
                && std::arch::is_x86_feature_detected!("fma")
            {
                let mut o = fresh();
                // SAFETY: features checked above; input built as `weights` requires.
                unsafe { crate::estimate::mbar_avx2::weights(&input, &mut o) };
                outs.push(o);
            }
            let mut lse = 0.0;
            let mut colsum = vec![0.0; k];
            for (i, &r) in rows.iter().enumerate() {
                let a: Vec<f64> = (0..k).map(|j| c[j] - u[r * k + j]).collect();
                let s: f64 = a.iter().map(|x| x.exp()).sum();
                lse += s.ln();
                for j in 0..k {
                    let p = a[j].exp() / s;
                    colsum[j] += p;
                    for o in &outs {
                        assert!((o.buf[i * kp + j] - p).abs() <= 1e-12 * p, "k={k} j={j}");
                    }
                }
            }
            for o in &mut outs {
                let got = o.lse.finish();
                assert!((got - lse).abs() < 1e-12 * lse.abs().max(1.0), "k={k}");
                for (j, (got, want)) in o.colsum.iter().zip(&colsum).enumerate() {
                    assert!((got - want).abs() < 1e-12, "k={k} j={j}");
                }
            }
        }
    }
}
