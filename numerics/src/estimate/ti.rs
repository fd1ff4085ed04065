//! Thermodynamic integration (Kirkwood 1935, J. Chem. Phys. 3, 300) of per-window
//! mean dU/dλ over λ, by the trapezoid rule and by a natural cubic spline, with the
//! standard error propagated from each window's standard error of the mean. Both
//! rules are linear in the means, I = Σ c_i y_i, so σ² = Σ c_i² s_i².

/// Integration weights of the trapezoid rule on the nodes `x` (any order; zero-length
/// steps contribute nothing).
///
/// # Examples
///
/// ```
/// use legwork_numerics::estimate::ti::trapezoid_weights;
/// assert_eq!(trapezoid_weights(&[0.0, 0.5, 1.0]), vec![0.25, 0.5, 0.25]);
/// ```
pub fn trapezoid_weights(x: &[f64]) -> Vec<f64> {
    let mut c = vec![0.0; x.len()];
    for i in 0..x.len().saturating_sub(1) {
        let h = x[i + 1] - x[i];
        c[i] += h / 2.0;
        c[i + 1] += h / 2.0;
    }
    c
}

/// Integration weights of the natural cubic spline (second derivative zero at both
/// ends) through nodes `x`, which must be strictly monotone. Two nodes give the
/// trapezoid rule; one gives zero.
///
/// # Examples
///
/// The rule integrates a straight line exactly:
///
/// ```
/// use legwork_numerics::estimate::ti::natural_spline_weights;
/// let x = [0.0, 0.2, 0.5, 1.0];
/// let w = natural_spline_weights(&x);
/// let integral: f64 = w.iter().zip(&x).map(|(w, x)| w * (3.0 * x + 1.0)).sum();
/// assert!((integral - 2.5).abs() < 1e-12);
/// ```
pub fn natural_spline_weights(x: &[f64]) -> Vec<f64> {
    let n = x.len();
    if n < 3 {
        return trapezoid_weights(x);
    }
    (0..n)
        .map(|j| {
            let mut y = vec![0.0; n];
            y[j] = 1.0;
            natural_spline_integral(x, &y)
        })
        .collect()
}

/// ∫ of the natural cubic spline through (x_i, y_i) from x_0 to x_{n−1}.
fn natural_spline_integral(x: &[f64], y: &[f64]) -> f64 {
    let n = x.len();
    let h: Vec<f64> = (0..n - 1).map(|i| x[i + 1] - x[i]).collect();
    // Tridiagonal system for the interior second derivatives M_1..M_{n-2}
    // (M_0 = M_{n-1} = 0), solved by the Thomas algorithm.
    let m = n - 2;
    let mut diag = vec![0.0; m];
    let mut rhs = vec![0.0; m];
    let mut sub = vec![0.0; m];
    let mut sup = vec![0.0; m];
    for r in 0..m {
        let i = r + 1;
        sub[r] = h[i - 1];
        diag[r] = 2.0 * (h[i - 1] + h[i]);
        sup[r] = h[i];
        rhs[r] = 6.0 * ((y[i + 1] - y[i]) / h[i] - (y[i] - y[i - 1]) / h[i - 1]);
    }
    for r in 1..m {
        let w = sub[r] / diag[r - 1];
        diag[r] -= w * sup[r - 1];
        rhs[r] -= w * rhs[r - 1];
    }
    let mut mm = vec![0.0; n];
    for r in (0..m).rev() {
        let next = if r + 1 < m { mm[r + 2] } else { 0.0 };
        mm[r + 1] = (rhs[r] - sup[r] * next) / diag[r];
    }
    (0..n - 1)
        .map(|i| h[i] * (y[i] + y[i + 1]) / 2.0 - h[i].powi(3) * (mm[i] + mm[i + 1]) / 24.0)
        .sum()
}

/// Applies integration weights: (Σ c_i y_i, sqrt(Σ c_i² s_i²)).
///
/// # Examples
///
/// ```
/// use legwork_numerics::estimate::ti::integrate;
/// let (v, s) = integrate(&[0.5, 0.5], &[1.0, 3.0], &[0.3, 0.4]);
/// assert!((v - 2.0).abs() < 1e-12 && (s - 0.25).abs() < 1e-12);
/// ```
pub fn integrate(c: &[f64], y: &[f64], sem: &[f64]) -> (f64, f64) {
    let v = c.iter().zip(y).map(|(c, y)| c * y).sum();
    let s2: f64 = c.iter().zip(sem).map(|(c, s)| c * c * s * s).sum();
    (v, s2.sqrt())
}

/// Weights over all states for one λ component's path `x` (λ of that component at
/// every state, in state order): the path is cut into runs of strictly changing λ
/// (a component held fixed over some states contributes nothing there), and each
/// run is integrated with `rule`.
///
/// # Examples
///
/// A component that moves over the first two states and is then held:
///
/// ```
/// use legwork_numerics::estimate::ti::path_weights;
/// assert_eq!(path_weights(&[0.0, 1.0, 1.0], false), vec![0.5, 0.5, 0.0]);
/// ```
pub fn path_weights(x: &[f64], spline: bool) -> Vec<f64> {
    let n = x.len();
    let mut c = vec![0.0; n];
    let mut start = 0;
    while start + 1 < n {
        if x[start + 1] == x[start] {
            start += 1;
            continue;
        }
        let up = x[start + 1] > x[start];
        let mut end = start + 1;
        while end + 1 < n && ((x[end + 1] > x[end]) == up) && x[end + 1] != x[end] {
            end += 1;
        }
        let seg = &x[start..=end];
        let w = if !spline {
            trapezoid_weights(seg)
        } else if up {
            natural_spline_weights(seg)
        } else {
            // A decreasing run: the spline through reversed nodes, integral negated
            // (∫_a^b = −∫_b^a).
            let rev: Vec<f64> = seg.iter().rev().copied().collect();
            let mut w = natural_spline_weights(&rev);
            w.reverse();
            w.iter().map(|v| -v).collect()
        };
        for (i, wi) in w.into_iter().enumerate() {
            c[start + i] += wi;
        }
        start = end;
    }
    c
}
