//! Generators shared by the estimator tests: harmonic legs with exactly known free
//! energies, AR(1) series, and window tables on disk.

#![allow(dead_code)]

/// The calibration scenarios shared with the calibration benchmark.
#[path = "../../../numerics/examples/calibration/scenarios.rs"]
pub mod scenarios;

use legwork::collect::{LegSamples, WindowSamples};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use std::io::Write;
use std::path::{Path, PathBuf};

/// A seeded generator.
pub fn rng(seed: u64) -> ChaCha8Rng {
    ChaCha8Rng::seed_from_u64(seed)
}

/// Standard normal draw.
pub fn normal(r: &mut ChaCha8Rng) -> f64 {
    StandardNormal.sample(r)
}

/// Exact reduced free energies of 1-D harmonic states U_j = k_j/2 (x − c_j)² (kT):
/// f_j = −½ ln(2π/k_j), from the textbook Gaussian partition function (the test
/// system of Shirts & Chodera 2008, J. Chem. Phys. 129, 124105, Sec. V A).
pub fn harmonic_f(ks: &[f64]) -> Vec<f64> {
    ks.iter()
        .map(|k| -0.5 * (2.0 * std::f64::consts::PI / k).ln())
        .collect()
}

/// A stationary AR(1) series with mean `c`, standard deviation `s` and lag-1
/// correlation `phi` (phi = 0: independent draws).
pub fn ar1(r: &mut ChaCha8Rng, n: usize, c: f64, s: f64, phi: f64) -> Vec<f64> {
    let mut x = Vec::with_capacity(n);
    let mut v = normal(r);
    let q = (1.0 - phi * phi).sqrt();
    for _ in 0..n {
        x.push(c + s * v);
        v = phi * v + q * normal(r);
    }
    x
}

/// A harmonic leg: window j samples state j (AR(1) with correlation `phi`);
/// every frame is evaluated at every state. dU/dλ is left out.
pub fn harmonic_leg(r: &mut ChaCha8Rng, ks: &[f64], cs: &[f64], n: usize, phi: f64) -> LegSamples {
    let k = ks.len();
    let lambdas: Vec<f64> = (0..k).map(|i| i as f64 / (k - 1) as f64).collect();
    let windows = (0..k)
        .map(|j| {
            let x = ar1(r, n, cs[j], 1.0 / ks[j].sqrt(), phi);
            let mut u = Vec::with_capacity(n * k);
            for xn in &x {
                for i in 0..k {
                    u.push(0.5 * ks[i] * (xn - cs[i]).powi(2));
                }
            }
            WindowSamples::from_reduced(j, 298.15, lambdas.clone(), u, Vec::new())
        })
        .collect();
    LegSamples::from_windows(windows)
}

/// Writes a window table (README: *The window table*) with the given energy unit; `rows`
/// holds (dudl, energies at every state).
pub fn write_table(
    path: &Path,
    state: usize,
    lambdas: &[f64],
    unit: &str,
    t: f64,
    rows: &[(f64, Vec<f64>)],
) {
    let mut f = std::io::BufWriter::new(std::fs::File::create(path).unwrap());
    writeln!(
        f,
        "# legwork window table 1\n# temperature_K: {t}\n# energy_unit: {unit}\n# state: {state}"
    )
    .unwrap();
    let l: Vec<String> = lambdas.iter().map(|v| v.to_string()).collect();
    writeln!(f, "# lambdas: {}", l.join(" ")).unwrap();
    let h: Vec<String> = (0..lambdas.len()).map(|j| format!("u{j}")).collect();
    writeln!(f, "time\tdudl\t{}", h.join("\t")).unwrap();
    for (n, (d, u)) in rows.iter().enumerate() {
        let us: Vec<String> = u.iter().map(|v| format!("{v:.17e}")).collect();
        writeln!(f, "{}\t{d:.17e}\t{}", n as f64 * 0.5, us.join("\t")).unwrap();
    }
}

/// Writes a harmonic leg as window tables in `dir` (energies in kT, dU/dλ of the
/// linear path between neighbours), returns the paths.
pub fn write_harmonic(
    dir: &Path,
    r: &mut ChaCha8Rng,
    ks: &[f64],
    cs: &[f64],
    n: usize,
) -> Vec<PathBuf> {
    let leg = harmonic_leg(r, ks, cs, n, 0.0);
    let k = ks.len();
    leg.windows
        .iter()
        .map(|w| {
            let rows: Vec<(f64, Vec<f64>)> = (0..w.frames)
                .map(|i| {
                    let row = w.row(i).to_vec();
                    let nb = (w.state + 1).min(k - 1);
                    (row[nb] - row[w.state], row)
                })
                .collect();
            let p = dir.join(format!("win{:02}.tsv", w.state));
            write_table(&p, w.state, &leg.lambdas, "kT", 298.15, &rows);
            p
        })
        .collect()
}

/// The Python interpreter for reference checks, or None after a loud notice.
pub fn python(test: &str) -> Option<PathBuf> {
    match std::env::var_os("LEGWORK_PYTHON") {
        Some(p) => Some(PathBuf::from(p)),
        None => {
            skipped(&format!("{test} needs numpy/scipy (set LEGWORK_PYTHON)"));
            None
        }
    }
}

pub use crate::skip::skipped;
