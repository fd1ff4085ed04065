//! Honest error bars: over many independent replicates of a harmonic leg with an
//! exactly known ΔG, |error| ≤ 2σ should hold about 95 % of the time (a normal
//! error's two-sided 2σ coverage is 95.45 %); we require 90–99 % over 200
//! replicates, for MBAR and BAR, with independent and with correlated samples
//! (decorrelation on). The leg is the harmonic-oscillator system of Shirts &
//! Chodera 2008 (J. Chem. Phys. 129, 124105), free energies from the Gaussian
//! partition function.

use crate::estimate_support::*;
use legwork::estimate::{estimate_leg, Equilibration, EstimateOptions, Method, Subsample};

const REPLICATES: usize = 200;

fn coverage(n: usize, phi: f64, seed: u64, equilibration: Equilibration) -> [(Method, f64); 2] {
    let ks = [1.0, 1.5, 2.2, 3.0];
    let cs = [0.0, 0.4, 0.8, 1.2];
    let f = harmonic_f(&ks);
    let truth = f[3] - f[0];
    let opts = EstimateOptions {
        methods: vec![Method::Mbar, Method::Bar],
        equilibration,
        subsample: Subsample::Auto,
        convergence: false,
        ..Default::default()
    };
    let mut r = rng(seed);
    let mut hits = [0usize; 2];
    for _ in 0..REPLICATES {
        let leg = harmonic_leg(&mut r, &ks, &cs, n, phi);
        let est = estimate_leg(&leg, &opts).unwrap();
        for (i, m) in [Method::Mbar, Method::Bar].into_iter().enumerate() {
            let d = est.estimates[&m];
            if (d.delta_g - truth).abs() <= 2.0 * d.sigma {
                hits[i] += 1;
            }
        }
    }
    let frac = |h: usize| h as f64 / REPLICATES as f64;
    [(Method::Mbar, frac(hits[0])), (Method::Bar, frac(hits[1]))]
}

fn check(label: &str, got: [(Method, f64); 2]) {
    for (m, c) in got {
        eprintln!(
            "{label}: {m} |error| ≤ 2σ in {:.1} % of {REPLICATES} replicates",
            100.0 * c
        );
        assert!((0.90..=0.99).contains(&c), "{label}: {m} coverage {c}");
    }
}

#[test]
fn error_bars_cover_with_independent_samples() {
    check("independent", coverage(300, 0.0, 101, Equilibration::Auto));
}

#[test]
fn error_bars_cover_with_correlated_samples_after_decorrelation() {
    // AR(1) with φ = 0.8: statistical inefficiency (1 + φ)/(1 − φ) = 9.
    check("correlated", coverage(2000, 0.8, 202, Equilibration::Auto));
}
