//! Statistical inefficiency, automated equilibration detection and uncorrelated
//! subsampling of one time series.

/// Statistical inefficiency g = 1 + 2 Σ_{t≥1} ρ_t of a series (Chodera 2016, J.
/// Chem. Theory Comput. 12, 1799, Eq. 6), with ρ_t = (1 − t/N) C(t)/C(0) the
/// normalised autocovariance, the sum cut by Geyer's initial positive sequence
/// (Geyer 1992, Statist. Sci. 7, 473, Sec. 3.3): the lags are taken in pairs
/// Γ_m = ρ_{2m} + ρ_{2m+1} (ρ_0 = 1), which are positive for a reversible chain,
/// and the sum g = −1 + 2 Σ_m Γ_m stops before the first pair that is not. Cutting
/// at the first single ρ_t ≤ 0 instead stops early on a noisy tail and makes g,
/// and every error bar scaled by it, too small. Never below 1; 1 for constant or
/// very short series.
///
/// # Examples
///
/// A constant series has no correlation to measure; a slowly varying one is
/// strongly correlated:
///
/// ```
/// use legwork_numerics::estimate::correlation::statistical_inefficiency;
/// assert_eq!(statistical_inefficiency(&[2.0; 100]), 1.0);
/// // a slowly varying series is strongly correlated
/// let y: Vec<f64> = (0..1000).map(|i| (i as f64 / 50.0).sin()).collect();
/// assert!(statistical_inefficiency(&y) > 10.0);
/// ```
pub fn statistical_inefficiency(x: &[f64]) -> f64 {
    let n = x.len();
    if n < 3 {
        return 1.0;
    }
    let mean = x.iter().sum::<f64>() / n as f64;
    let d: Vec<f64> = x.iter().map(|v| v - mean).collect();
    let c0 = dot(&d, &d) / n as f64;
    if c0 <= 0.0 || !c0.is_finite() {
        return 1.0;
    }
    let mut seq = PositivePairs::new();
    for t in 1..n - 1 {
        let ct = dot(&d[..n - t], &d[t..]) / ((n - t) as f64 * c0);
        if !seq.push(t, ct * (1.0 - t as f64 / n as f64)) {
            break;
        }
    }
    seq.inefficiency(n)
}

/// Geyer's initial positive sequence, fed one lag at a time.
#[derive(Debug, Clone, Copy)]
struct PositivePairs {
    /// −1 + 2 Σ of the pairs accepted so far.
    g: f64,
    /// ρ at the even lag waiting for its partner.
    pending: f64,
    /// The last lag summed.
    last: usize,
}

impl PositivePairs {
    fn new() -> Self {
        PositivePairs {
            g: -1.0,
            pending: 1.0,
            last: 0,
        }
    }
    /// Adds ρ_t (lags in order from 1); false once the sum has stopped.
    #[inline]
    fn push(&mut self, t: usize, rho: f64) -> bool {
        if t % 2 == 0 {
            self.pending = rho;
            return true;
        }
        let pair = self.pending + rho;
        if pair <= 0.0 {
            return false;
        }
        self.g += 2.0 * pair;
        self.last = t;
        true
    }
    /// The inefficiency of a series of `n` values, corrected for the bias that
    /// taking out the sample mean puts into every autocovariance: to first order
    /// E[Ĉ(t)] = C(t) − C(0) g/N at every lag (the classic result for the sample
    /// autocovariance, e.g. Priestley 1981, Sec. 5.3; from memory), so a sum over
    /// lags 1…T comes out low by about (2T + 1 − g)/N relative, which is solved
    /// for g: g = ĝ / (1 − (2T + 1 − ĝ)/N). Without it a strongly correlated
    /// window's g, and so its error bar, is a few per cent small. The correction
    /// is first order, so it is capped at 20 % (a series whose cut-off lag is a
    /// tenth of its length has no reliable g anyway).
    fn inefficiency(&self, n: usize) -> f64 {
        let g = self.g.max(1.0);
        let shrink = (2.0 * self.last as f64 + 1.0 - g) / n as f64;
        (g / (1.0 - shrink.clamp(0.0, 0.2))).max(1.0)
    }
}

/// A dot product with independent partial sums so the compiler can vectorise it.
fn dot(a: &[f64], b: &[f64]) -> f64 {
    let mut acc = [0.0f64; 8];
    let ca = a.chunks_exact(8);
    let cb = b.chunks_exact(8);
    let (ra, rb) = (ca.remainder(), cb.remainder());
    for (x, y) in ca.zip(cb) {
        for i in 0..8 {
            acc[i] += x[i] * y[i];
        }
    }
    let mut s: f64 = acc.iter().sum();
    for (x, y) in ra.iter().zip(rb) {
        s += x * y;
    }
    s
}

/// Where a window's equilibrated part starts and how correlated it is.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Equilibrated {
    /// Frames discarded at the start.
    pub start: usize,
    /// Statistical inefficiency of the rest.
    pub inefficiency: f64,
    /// Effectively uncorrelated samples, (N − start)/g.
    pub effective: f64,
}

/// Candidate starts tried by [`detect_equilibration`]: evenly spaced over the first
/// three quarters of the series.
const CANDIDATES: usize = 50;

/// Automated equilibration detection after Chodera 2016 (J. Chem. Theory Comput.
/// 12, 1799), over evenly spaced candidate starts t0 in the first three quarters
/// of the series.
///
/// Chodera's rule picks the t0 that maximises the effectively uncorrelated samples
/// (N − t0)/g(t0). Two changes, both measured on generated legs with exact answers
/// (tests/it/estimate_calibration.rs, benches/bench-calibration.sh): each
/// candidate's own variance s²(t0) is taken in, so the start minimises the squared
/// standard error of the mean g s²/(N − t0) (a relaxing mean inflates s² as well
/// as g; the idea of White 1997's MSER truncation rule, Simulation 69, 323, from
/// memory); and the start is then moved one candidate further, a margin against
/// the tail of a slow transient that is already below the noise (our choice, no
/// published source: with a mean relaxing over 5 % of the run it halves the bias
/// left, and costs 1.5 % of a stationary window's frames).
///
/// Every candidate's g comes out of one sweep per lag over the whole series: the
/// lagged products are summed once per stretch between neighbouring candidates and
/// accumulated from the end, and each candidate's own mean is taken out
/// afterwards, so the cost is O(N × the longest cut-off lag) rather than
/// O(candidates × N × lag). The result is [`at_start`] at the chosen start.
///
/// # Examples
///
/// A series that starts far from its mean and relaxes loses its start:
///
/// ```
/// use legwork_numerics::estimate::correlation::detect_equilibration;
/// let x: Vec<f64> = (0..4000)
///     .map(|t| 20.0 * (-(t as f64) / 100.0).exp() + ((t * 7919) % 13) as f64 / 13.0)
///     .collect();
/// let e = detect_equilibration(&x);
/// assert!(e.start >= 300, "start {}", e.start);
/// assert!(e.effective > 0.0);
/// ```
pub fn detect_equilibration(x: &[f64]) -> Equilibrated {
    let n = x.len();
    let last = n * 3 / 4;
    let stride = (last / CANDIDATES).max(1);
    let mut starts = vec![0usize];
    while starts.last().expect("non-empty") + stride < last {
        starts.push(starts.last().expect("non-empty") + stride);
    }
    if n < 3 || starts.len() == 1 {
        return at_start(x, 0);
    }
    let g = inefficiencies_from(x, &starts);
    // Σ (x − x̄) and Σ (x − x̄)² from each frame to the end, for each candidate's
    // variance.
    let mean = x.iter().sum::<f64>() / n as f64;
    let mut s1 = vec![0.0; n + 1];
    let mut s2 = vec![0.0; n + 1];
    for i in (0..n).rev() {
        let z = x[i] - mean;
        s1[i] = s1[i + 1] + z;
        s2[i] = s2[i + 1] + z * z;
    }
    // g s² / (N − t0): the squared standard error of the mean from t0 on.
    let se2 = |c: usize| {
        let l = (n - starts[c]) as f64;
        let var = s2[starts[c]] / l - (s1[starts[c]] / l).powi(2);
        g[c] * var / l
    };
    let mut best = 0;
    for c in 1..starts.len() {
        if se2(c) < se2(best) {
            best = c;
        }
    }
    if best > 0 {
        best = (best + 1).min(starts.len() - 1);
    }
    at_start(x, starts[best])
}

/// The statistical inefficiency of `x[s..]` for every start `s` in `starts`
/// (increasing, the first 0), each as [`statistical_inefficiency`] defines it.
fn inefficiencies_from(x: &[f64], starts: &[usize]) -> Vec<f64> {
    let n = x.len();
    let nc = starts.len();
    // Centred on the whole series' mean, so the sums below stay well conditioned.
    let mean = x.iter().sum::<f64>() / n as f64;
    let z: Vec<f64> = x.iter().map(|v| v - mean).collect();
    // suffix[i] = Σ_{j ≥ i} z_j
    let mut suffix = vec![0.0; n + 1];
    for i in (0..n).rev() {
        suffix[i] = suffix[i + 1] + z[i];
    }
    let ends: Vec<usize> = starts[1..].iter().copied().chain([n]).collect();
    let mut seq = vec![PositivePairs::new(); nc];
    let mut m = vec![0.0; nc];
    let mut c0 = vec![0.0; nc];
    let mut active = vec![false; nc];
    let mut sq = 0.0;
    for c in (0..nc).rev() {
        sq += dot(&z[starts[c]..ends[c]], &z[starts[c]..ends[c]]);
        let len = (n - starts[c]) as f64;
        m[c] = suffix[starts[c]] / len;
        c0[c] = sq / len - m[c] * m[c];
        active[c] = n - starts[c] >= 3 && c0[c] > 0.0 && c0[c].is_finite();
    }
    let mut lagged = vec![0.0; nc];
    let mut t = 1;
    while let Some(first) = active.iter().position(|&a| a) {
        // P = Σ_{i ≥ s_c, i + t < n} z_i z_{i+t}, accumulated from the last stretch.
        let mut p = 0.0;
        for c in (first..nc).rev() {
            let hi = ends[c].min(n.saturating_sub(t));
            if hi > starts[c] {
                p += dot(&z[starts[c]..hi], &z[starts[c] + t..hi + t]);
            }
            lagged[c] = p;
        }
        for c in first..nc {
            if !active[c] {
                continue;
            }
            let len = n - starts[c];
            if t >= len - 1 {
                active[c] = false;
                continue;
            }
            let s = starts[c];
            let pairs = (len - t) as f64;
            // Σ (z_i − m)(z_{i+t} − m) over the pairs of the candidate's own series.
            let centred = lagged[c] - m[c] * (suffix[s] - suffix[n - t]) - m[c] * suffix[s + t]
                + pairs * m[c] * m[c];
            let ct = centred / (pairs * c0[c]);
            if !seq[c].push(t, ct * (1.0 - t as f64 / len as f64)) {
                active[c] = false;
            }
        }
        t += 1;
    }
    seq.iter()
        .zip(starts)
        .map(|(s, &st)| s.inefficiency(n - st))
        .collect()
}

/// The statistics of the series from frame `start` on.
///
/// # Examples
///
/// ```
/// use legwork_numerics::estimate::correlation::at_start;
/// let e = at_start(&[5.0, 1.0, 1.0, 1.0], 1);
/// assert_eq!((e.start, e.inefficiency, e.effective), (1, 1.0, 3.0));
/// ```
pub fn at_start(x: &[f64], start: usize) -> Equilibrated {
    let rest = &x[start.min(x.len())..];
    let g = statistical_inefficiency(rest);
    Equilibrated {
        start,
        inefficiency: g,
        effective: rest.len() as f64 / g,
    }
}

/// Indices of an uncorrelated subsample of frames `start..n` with inefficiency `g`:
/// every ⌈g⌉-th frame in effect (frame start + ⌊i·g⌋ for i = 0, 1, …).
///
/// # Examples
///
/// ```
/// use legwork_numerics::estimate::correlation::subsample;
/// assert_eq!(subsample(10, 20, 2.5), vec![10, 12, 15, 17]);
/// ```
pub fn subsample(start: usize, n: usize, g: f64) -> Vec<usize> {
    let g = g.max(1.0);
    let mut out = Vec::with_capacity(((n.saturating_sub(start)) as f64 / g) as usize + 1);
    let mut i = 0usize;
    loop {
        let idx = start + (i as f64 * g).floor() as usize;
        if idx >= n {
            break;
        }
        if out.last() != Some(&idx) {
            out.push(idx);
        }
        i += 1;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The one-sweep inefficiencies against [`statistical_inefficiency`] of each
    /// candidate's series on its own (the definition, candidate by candidate).
    #[test]
    fn every_candidate_matches_the_direct_inefficiency() {
        let mut state = 0x2545_f491_4f6c_dd1du64;
        let mut unif = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5
        };
        for (n, phi, offset) in [
            (5000usize, 0.0, 0.0),
            (5000, 0.9, 30.0),
            (777, 0.5, -4.0),
            (40, 0.3, 1.0),
            (4, 0.0, 0.0),
        ] {
            let mut x = Vec::with_capacity(n);
            let mut v = 0.0;
            for t in 0..n {
                v = phi * v + unif();
                // a transient at the start, as a series that is still relaxing
                x.push(offset + v + 5.0 * (-(t as f64) / 100.0).exp());
            }
            let last = n * 3 / 4;
            let stride = (last / CANDIDATES).max(1);
            let starts: Vec<usize> = (0..)
                .map(|c| c * stride)
                .take_while(|&s| s == 0 || s < last)
                .collect();
            let fast = inefficiencies_from(&x, &starts);
            for (c, &s) in starts.iter().enumerate() {
                let direct = statistical_inefficiency(&x[s..]);
                assert!(
                    (fast[c] - direct).abs() <= 1e-9 * direct,
                    "n={n} φ={phi} start {s}: {} vs {direct}",
                    fast[c]
                );
            }
        }
    }
}
