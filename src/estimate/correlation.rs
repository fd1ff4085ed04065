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
/// three quarters of the series; a stride keeps the cost at O(candidates × N × τ).
const CANDIDATES: usize = 50;

/// Automated equilibration detection (Chodera 2016, J. Chem. Theory Comput. 12,
/// 1799): the start t0 that maximises the number of effectively uncorrelated
/// samples (N − t0)/g(t0), over evenly spaced candidate starts.
pub fn detect_equilibration(x: &[f64]) -> Equilibrated {
    let n = x.len();
    let last = n * 3 / 4;
    let stride = (last / CANDIDATES).max(1);
    let mut best = at_start(x, 0);
    let mut t0 = stride;
    while t0 < last {
        let e = at_start(x, t0);
        if e.effective > best.effective {
            best = e;
        }
        t0 += stride;
    }
    best
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
