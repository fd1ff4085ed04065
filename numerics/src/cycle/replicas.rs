//! Combining independent replicas of one quantity.

use serde::{Deserialize, Serialize};

/// The mean of n replicas and the two parts of its uncertainty.
///
/// With replica values xᵢ and their own standard errors σᵢ:
///
/// - mean = (1/n) Σ xᵢ
/// - `sigma_replicas` (per-replica part) = √(Σ σᵢ²) / n, the standard error of the
///   mean if every σᵢ were right;
/// - `sigma_spread` (between-replica part) = s / √n with
///   s² = Σ (xᵢ − mean)² / (n − 1), the standard error of the mean from the
///   scatter of the replicas (0 for a single replica, which is flagged);
/// - `sigma` = √(sigma_replicas² + sigma_spread²).
///
/// Adding the parts in quadrature is deliberately conservative (common practice,
/// no single source): when the per-replica σᵢ are right it overstates the error
/// by at most √2, and when replicas disagree by more than their σᵢ (different
/// metastable states, poor sampling) the spread dominates instead of being hidden.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ReplicaCombination {
    /// Mean over replicas.
    pub mean: f64,
    /// Total uncertainty: √(sigma_replicas² + sigma_spread²).
    pub sigma: f64,
    /// Part from the replicas' own standard errors.
    pub sigma_replicas: f64,
    /// Part from the spread between replicas.
    pub sigma_spread: f64,
    /// How many replicas.
    pub n: usize,
}

/// Combines replicas given as (value, σ) pairs; `None` when there are none.
///
/// ```
/// use legwork_numerics::cycle::combine_replicas;
/// let c = combine_replicas(&[(1.0, 0.1), (1.2, 0.2), (1.4, 0.1)]).unwrap();
/// assert!((c.mean - 1.2).abs() < 1e-12);
/// assert!((c.sigma - 0.02f64.sqrt()).abs() < 1e-12);
/// assert!(combine_replicas(&[]).is_none());
/// ```
pub fn combine_replicas(values: &[(f64, f64)]) -> Option<ReplicaCombination> {
    let n = values.len();
    if n == 0 {
        return None;
    }
    let nf = n as f64;
    let mean = values.iter().map(|v| v.0).sum::<f64>() / nf;
    let sigma_replicas = values.iter().map(|v| v.1 * v.1).sum::<f64>().sqrt() / nf;
    let sigma_spread = if n > 1 {
        let s2 = values.iter().map(|v| (v.0 - mean).powi(2)).sum::<f64>() / (nf - 1.0);
        (s2 / nf).sqrt()
    } else {
        0.0
    };
    Some(ReplicaCombination {
        mean,
        sigma: sigma_replicas.hypot(sigma_spread),
        sigma_replicas,
        sigma_spread,
        n,
    })
}
