//! Exponential averaging (Zwanzig 1954, J. Chem. Phys. 22, 1420).

use super::error::EstimateError;
use super::fastexp::exp_nonpos;

/// Reduced free-energy difference ΔF = −ln ⟨e^{−w}⟩ from work values
/// w = u_target − u_sampled over samples of the sampled state, and its standard
/// error by the delta method, σ² = Var(e^{−w}) / (N ⟨e^{−w}⟩²). Computed with a
/// log-sum-exp shift so large works do not overflow.
///
/// # Errors
///
/// [`EstimateError::Insufficient`] with fewer than 2 works.
///
/// # Examples
///
/// ```
/// use legwork_numerics::estimate::exp::exp_average;
/// // the same work on every sample: ΔF is that work, with no spread
/// let (df, sigma) = exp_average(&[2.5; 20]).unwrap();
/// assert!((df - 2.5).abs() < 1e-12 && sigma.abs() < 1e-12);
/// ```
pub fn exp_average(w: &[f64]) -> Result<(f64, f64), EstimateError> {
    let n = w.len();
    if n < 2 {
        return Err(EstimateError::Insufficient(format!(
            "EXP needs at least 2 samples, got {n}"
        )));
    }
    let m = w.iter().map(|v| -v).fold(f64::NEG_INFINITY, f64::max);
    let e: Vec<f64> = w.iter().map(|v| exp_nonpos(-v - m)).collect();
    let mean = e.iter().sum::<f64>() / n as f64;
    let var = e.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / (n - 1) as f64;
    let df = -(m + mean.ln());
    let sigma = (var / n as f64).sqrt() / mean;
    Ok((df, sigma))
}
