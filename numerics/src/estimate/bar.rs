//! The Bennett acceptance ratio (Bennett 1976, J. Comput. Phys. 22, 245) for one
//! pair of states.

use super::error::EstimateError;
use super::fastexp::exp_nonpos;

/// Fermi function 1/(1 + e^x), written to stay finite for any x (and without a
/// branch, so loops over it vectorise).
#[inline(always)]
fn fermi(x: f64) -> f64 {
    let e = exp_nonpos(-x.abs());
    let num = if x > 0.0 { e } else { 1.0 };
    num / (1.0 + e)
}

/// (Σ f(w + shift), Σ f(1 − f)) over `w`, with f the Fermi function: eight lanes
/// of partial sums so the loop runs in vector registers.
#[inline(always)]
fn fermi_sums_body(w: &[f64], shift: f64) -> (f64, f64) {
    const L: usize = 8;
    let (mut s, mut d) = ([0.0f64; L], [0.0f64; L]);
    let mut it = w.chunks_exact(L);
    for c in &mut it {
        for l in 0..L {
            let p = fermi(c[l] + shift);
            s[l] += p;
            d[l] += p * (1.0 - p);
        }
    }
    for (l, &x) in it.remainder().iter().enumerate() {
        let p = fermi(x + shift);
        s[l] += p;
        d[l] += p * (1.0 - p);
    }
    let tree = |v: [f64; L]| ((v[0] + v[1]) + (v[2] + v[3])) + ((v[4] + v[5]) + (v[6] + v[7]));
    (tree(s), tree(d))
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn fermi_sums_avx2(w: &[f64], shift: f64) -> (f64, f64) {
    fermi_sums_body(w, shift)
}

fn fermi_sums(w: &[f64], shift: f64) -> (f64, f64) {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the CPU supports AVX2, checked just above.
            return unsafe { fermi_sums_avx2(w, shift) };
        }
    }
    fermi_sums_body(w, shift)
}

/// 1/(2 + 2 cosh x) = f(x)(1 − f(x)) = e^{−|x|}/(1 + e^{−|x|})², without overflow.
#[inline]
fn sech2_quarter(x: f64) -> f64 {
    let e = exp_nonpos(-x.abs());
    e / ((1.0 + e) * (1.0 + e))
}

/// Reduced ΔF = f_1 − f_0 from forward works `wf` = u_1 − u_0 on samples of state 0
/// and reverse works `wr` = u_0 − u_1 on samples of state 1: the root of Bennett's
/// self-consistent equation Σ_F f(M + w_F − ΔF) = Σ_R f(−M + w_R + ΔF) with
/// M = ln(n_F/n_R), by safeguarded Newton on a bracket; and its asymptotic standard
/// error (Shirts et al. 2003, Phys. Rev. Lett. 91, 140601, Eq. 10, the
/// maximum-likelihood form of Bennett's variance).
///
/// # Errors
///
/// [`EstimateError::Insufficient`] with fewer than 2 works in either direction;
/// [`EstimateError::NotConverged`] when Bennett's equation has no root in reach.
///
/// # Examples
///
/// Works from two identical states are zero: ΔF = 0.
///
/// ```
/// use legwork_numerics::estimate::bar::bar;
/// let (df, sigma) = bar(&[0.0; 10], &[0.0; 10]).unwrap();
/// assert!(df.abs() < 1e-12 && sigma >= 0.0);
/// ```
pub fn bar(wf: &[f64], wr: &[f64]) -> Result<(f64, f64), EstimateError> {
    let x = bar_solve(wf, wr, 1e-13)?;
    Ok((x, bar_sigma(wf, wr, x)))
}

/// ΔF of Bennett's equation to a relative tolerance `tol`, without the variance (a
/// cheap starting point for MBAR needs no more than 1e-7).
///
/// # Errors
///
/// As [`bar`].
///
/// # Examples
///
/// ```
/// use legwork_numerics::estimate::bar::bar_solve;
/// // a constant work of 1 kT both ways (u_1 − u_0 = 1 everywhere): ΔF = 1
/// let df = bar_solve(&[1.0; 8], &[-1.0; 8], 1e-12).unwrap();
/// assert!((df - 1.0).abs() < 1e-9);
/// ```
pub fn bar_solve(wf: &[f64], wr: &[f64], tol: f64) -> Result<f64, EstimateError> {
    let (nf, nr) = (wf.len() as f64, wr.len() as f64);
    if wf.len() < 2 || wr.len() < 2 {
        return Err(EstimateError::Insufficient(format!(
            "BAR needs at least 2 samples from each state, got {} and {}",
            wf.len(),
            wr.len()
        )));
    }
    let m = (nf / nr).ln();
    // h(ΔF) is increasing in ΔF; h' > 0.
    let h = |df: f64| -> (f64, f64) {
        let (sf, vf) = fermi_sums(wf, m - df);
        let (sr, vr) = fermi_sums(wr, df - m);
        (sf - sr, vf + vr)
    };
    // Start between the two one-sided EXP estimates.
    let fwd = super::exp::exp_average(wf).map(|x| x.0).unwrap_or(0.0);
    let rev = super::exp::exp_average(wr).map(|x| -x.0).unwrap_or(0.0);
    let mut x = 0.5 * (fwd + rev);
    if !x.is_finite() {
        x = 0.0;
    }
    // Newton from the EXP start, steps capped at 4 kT; the bracket [lo, hi] is
    // learnt from the signs seen and bisected whenever Newton would leave it.
    let (mut lo, mut hi) = (f64::NEG_INFINITY, f64::INFINITY);
    let mut converged = false;
    for _ in 0..300 {
        let (v, d) = h(x);
        if v > 0.0 {
            hi = x;
        } else {
            lo = x;
        }
        let newton = if d > 0.0 { x - v / d } else { f64::NAN };
        let mut next = if newton.is_finite() {
            x + (newton - x).clamp(-4.0, 4.0)
        } else if v > 0.0 {
            x - 4.0
        } else {
            x + 4.0
        };
        if !(next > lo && next < hi) {
            next = if lo.is_finite() && hi.is_finite() {
                0.5 * (lo + hi)
            } else if v > 0.0 {
                x - 4.0
            } else {
                x + 4.0
            };
        }
        if (next - x).abs() < tol * (1.0 + x.abs()) || hi - lo < tol * (1.0 + x.abs()) {
            x = next;
            converged = true;
            break;
        }
        if x.abs() > 1e6 {
            break;
        }
        x = next;
    }
    if !converged {
        return Err(EstimateError::NotConverged(
            "BAR: the self-consistent iteration did not converge (do the two states overlap at all?)".into(),
        ));
    }
    Ok(x)
}

/// The asymptotic standard error of BAR's ΔF = `x` (see [`bar`]).
fn bar_sigma(wf: &[f64], wr: &[f64], x: f64) -> f64 {
    let (nf, nr) = (wf.len() as f64, wr.len() as f64);
    let m = (nf / nr).ln();
    let n = nf + nr;
    let mut acc = 0.0;
    for &w in wf {
        acc += sech2_quarter(m + w - x);
    }
    for &w in wr {
        acc += sech2_quarter(m - w - x);
    }
    let mean = acc / n;
    let mut var = (1.0 / mean - (n / nf + n / nr)) / n;
    if var.is_nan() || var <= 0.0 || var.is_infinite() {
        // Bennett's original form, which stays positive where the asymptotic one
        // fails (almost no overlap).
        let (mut f1, mut f2, mut r1, mut r2) = (0.0, 0.0, 0.0, 0.0);
        for &w in wf {
            let p = fermi(m + w - x);
            f1 += p;
            f2 += p * p;
        }
        for &w in wr {
            let p = fermi(-m + w + x);
            r1 += p;
            r2 += p * p;
        }
        let (f1, f2, r1, r2) = (f1 / nf, f2 / nf, r1 / nr, r2 / nr);
        var = (f2 / (f1 * f1) - 1.0) / nf + (r2 / (r1 * r1) - 1.0) / nr;
    }
    var.max(0.0).sqrt()
}

/// Each sample's first-order influence on the BAR estimate `df` of one pair (the
/// delta method applied to Bennett's equation): ΔF̂ − ΔF ≈ Σ_F ψ_F + Σ_R ψ_R with
/// ψ_F = (f_F − ⟨f_F⟩)/D, ψ_R = −(f_R − ⟨f_R⟩)/D and D = Σ f(1 − f) over all samples.
/// Adjacent pairs share a window; the covariance of their estimates is the
/// covariance of these influences over that window's samples.
///
/// # Examples
///
/// ```
/// use legwork_numerics::estimate::bar::bar_influence;
/// let (f, r) = bar_influence(&[0.1, -0.2, 0.3], &[0.0, 0.2], 0.0);
/// assert_eq!((f.len(), r.len()), (3, 2));
/// assert!(f.iter().sum::<f64>().abs() < 1e-12); // centred
/// ```
pub fn bar_influence(wf: &[f64], wr: &[f64], df: f64) -> (Vec<f64>, Vec<f64>) {
    let m = (wf.len() as f64 / wr.len() as f64).ln();
    let ff: Vec<f64> = wf.iter().map(|&w| fermi(m + w - df)).collect();
    let fr: Vec<f64> = wr.iter().map(|&w| fermi(-m + w + df)).collect();
    let d: f64 = ff.iter().chain(&fr).map(|p| p * (1.0 - p)).sum();
    let mf = ff.iter().sum::<f64>() / ff.len() as f64;
    let mr = fr.iter().sum::<f64>() / fr.len() as f64;
    (
        ff.iter().map(|p| (p - mf) / d).collect(),
        fr.iter().map(|p| -(p - mr) / d).collect(),
    )
}
