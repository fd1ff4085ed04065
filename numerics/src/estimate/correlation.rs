//! Statistical inefficiency, automated equilibration detection and uncorrelated
//! subsampling of one time series.

/// Statistical inefficiency g = 1 + 2 Σ_{t≥1} (1 − t/N) C(t)/C(0) of a series, the
/// sum cut off where the normalised autocorrelation C(t) first drops to zero or
/// below (the usual cut-off; Chodera 2016, J. Chem. Theory Comput. 12, 1799,
/// Eq. 6). Never below 1; 1 for constant or very short series.
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
    let mut g = 1.0;
    for t in 1..n - 1 {
        let ct = dot(&d[..n - t], &d[t..]) / ((n - t) as f64 * c0);
        if ct <= 0.0 {
            break;
        }
        g += 2.0 * ct * (1.0 - t as f64 / n as f64);
    }
    g.max(1.0)
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

/// Automated equilibration detection (Chodera 2016, J. Chem. Theory Comput. 12,
/// 1799): the start t0 that maximises the number of effectively uncorrelated
/// samples (N − t0)/g(t0), over evenly spaced candidate starts.
///
/// Every candidate's g comes out of one sweep per lag over the whole series: the
/// lagged products are summed once per stretch between neighbouring candidates and
/// accumulated from the end, and each candidate's own mean is taken out
/// afterwards, so the cost is O(N × the longest cut-off lag) rather than
/// O(candidates × N × lag). The result is [`at_start`] at the chosen start.
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
    let mut best = 0;
    for c in 1..starts.len() {
        let eff = |c: usize| (n - starts[c]) as f64 / g[c];
        if eff(c) > eff(best) {
            best = c;
        }
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
    let mut g = vec![1.0; nc];
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
            if ct <= 0.0 {
                active[c] = false;
            } else {
                g[c] += 2.0 * ct * (1.0 - t as f64 / len as f64);
            }
        }
        t += 1;
    }
    g.iter().map(|v| v.max(1.0)).collect()
}

/// The statistics of the series from frame `start` on.
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
