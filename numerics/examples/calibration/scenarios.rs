//! Calibration scenarios for the leg estimators: generated legs whose free
//! energies are known exactly, estimated over many seeded replicates, with the
//! coverage of the reported error bars tallied. Shared by the calibration
//! benchmark (`benches/bench-calibration.sh`, many replicates) and the integration
//! tests (tests/it/estimate_calibration.rs, fewer).
//!
//! The legs are harmonic: state j has U_j(x) = κ/2 (x − c_j)² + a_j (kT), so its
//! reduced free energy is a_j − ½ ln(2π/κ) (the Gaussian partition function; the
//! harmonic test system of Shirts & Chodera 2008, J. Chem. Phys. 129, 124105) and
//! ΔG = a_last − a_0 exactly. Along λ the centre and the offset move linearly,
//! c(λ) = λ C and a(λ) = λ A, so dU/dλ = −κ C (x − c(λ)) + A has mean A at every λ
//! and TI's quadrature is exact: every error is statistical.

#![allow(dead_code)]

use legwork_numerics::estimate::{estimate_leg, EstimateOptions, LegEstimate, LegWarning, Method};
use legwork_numerics::samples::{LegSamples, WindowSamples};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

/// A generated leg.
#[derive(Debug, Clone)]
pub struct Spec {
    /// Number of states, λ evenly spaced on [0, 1].
    pub states: usize,
    /// Spring constant κ (kT per unit x²).
    pub kappa: f64,
    /// Total move of the centre C over the leg.
    pub centre: f64,
    /// Total offset A (the exact ΔG, kT).
    pub offset: f64,
    /// Frames per window.
    pub frames: usize,
    /// Lag-1 correlation of the AR(1) sampling (0: independent frames).
    pub phi: f64,
    /// A transient at the start of every window: x_n += amplitude σ_x e^{−n/τ},
    /// τ = `transient_share` × frames (amplitude 0: none).
    pub transient_amplitude: f64,
    /// τ as a share of the run.
    pub transient_share: f64,
    /// Two λ components moving together (restraint and vdw, say), each carrying
    /// half of C and A, with dU/dλ reported per component.
    pub two_components: bool,
}

impl Spec {
    /// Correlated sampling, good overlap: the everyday case.
    pub fn correlated() -> Spec {
        Spec {
            states: 5,
            kappa: 1.0,
            centre: 4.0,
            offset: 2.0,
            frames: 2000,
            phi: 0.9,
            transient_amplitude: 0.0,
            transient_share: 0.0,
            two_components: false,
        }
    }
    /// Three windows whose neighbours overlap below 1e-6.
    pub fn poor_overlap(phi: f64) -> Spec {
        Spec {
            states: 3,
            kappa: 1.0,
            centre: 20.0,
            offset: 4.0,
            frames: 1000,
            phi,
            ..Spec::correlated()
        }
    }
    /// Two λ components moving together.
    pub fn two_components() -> Spec {
        Spec {
            two_components: true,
            phi: 0.5,
            frames: 1000,
            ..Spec::correlated()
        }
    }
    /// A slow transient: the mean relaxes with τ = 5 % of the run.
    pub fn transient() -> Spec {
        Spec {
            transient_amplitude: 5.0,
            transient_share: 0.05,
            ..Spec::correlated()
        }
    }
}

/// A seeded generator.
pub fn rng(seed: u64) -> ChaCha8Rng {
    ChaCha8Rng::seed_from_u64(seed)
}

fn normal(r: &mut ChaCha8Rng) -> f64 {
    StandardNormal.sample(r)
}

/// One replicate of the leg; the exact ΔG is `spec.offset`.
pub fn leg(spec: &Spec, r: &mut ChaCha8Rng) -> LegSamples {
    let k = spec.states;
    let lambdas: Vec<f64> = (0..k).map(|i| i as f64 / (k - 1) as f64).collect();
    let sd = 1.0 / spec.kappa.sqrt();
    let q = (1.0 - spec.phi * spec.phi).sqrt();
    let tau = spec.transient_share * spec.frames as f64;
    let windows = (0..k)
        .map(|j| {
            let c = lambdas[j] * spec.centre;
            let mut v = normal(r);
            let mut u = Vec::with_capacity(spec.frames * k);
            let mut dudl = Vec::new();
            for n in 0..spec.frames {
                let mut x = c + sd * v;
                if spec.transient_amplitude != 0.0 {
                    x += spec.transient_amplitude * sd * (-(n as f64) / tau).exp();
                }
                v = spec.phi * v + q * normal(r);
                for l in &lambdas {
                    u.push(0.5 * spec.kappa * (x - l * spec.centre).powi(2) + l * spec.offset);
                }
                let total = -spec.kappa * spec.centre * (x - c) + spec.offset;
                if spec.two_components {
                    dudl.push(0.5 * total);
                    dudl.push(0.5 * total);
                } else {
                    dudl.push(total);
                }
            }
            let mut w = WindowSamples::from_reduced(j, 300.0, lambdas.clone(), u, Vec::new());
            if spec.two_components {
                w.components = vec!["restraint".into(), "vdw".into()];
                w.component_lambdas = vec![lambdas.clone(), lambdas.clone()];
            }
            w.dudl = dudl;
            w
        })
        .collect();
    LegSamples::from_windows(windows)
}

/// What the replicates of one method showed.
#[derive(Debug, Clone, Default)]
pub struct Tally {
    /// Replicates.
    pub n: usize,
    /// |error| ≤ σ.
    pub within_1: usize,
    /// |error| ≤ 2σ.
    pub within_2: usize,
    /// Σ error/σ.
    pub sum_z: f64,
    /// Marked unreliable.
    pub unreliable: usize,
    /// Not marked unreliable and σ < |error| / 2.
    pub overconfident: usize,
    /// Largest |error|/σ among those not marked unreliable.
    pub worst_ratio: f64,
}

impl Tally {
    /// Share within 1σ.
    pub fn cover_1(&self) -> f64 {
        self.within_1 as f64 / self.n as f64
    }
    /// Share within 2σ.
    pub fn cover_2(&self) -> f64 {
        self.within_2 as f64 / self.n as f64
    }
    /// Mean error/σ.
    pub fn mean_z(&self) -> f64 {
        self.sum_z / self.n as f64
    }
}

/// The tallies of every method over `replicates`, and how many legs carried a
/// drift warning.
#[derive(Debug, Clone, Default)]
pub struct Outcome {
    /// Per method.
    pub tallies: Vec<(Method, Tally)>,
    /// Replicates with a window or leg drift warning.
    pub drift_warned: usize,
    /// Replicates.
    pub replicates: usize,
    /// Smallest adjacent overlap seen.
    pub min_overlap: f64,
    /// Largest adjacent overlap seen among the replicates' smallest.
    pub max_min_overlap: f64,
}

impl Outcome {
    /// The tally of one method.
    pub fn of(&self, m: Method) -> &Tally {
        &self
            .tallies
            .iter()
            .find(|(x, _)| *x == m)
            .expect("tallied")
            .1
    }
    /// Share of the replicates with a drift warning.
    pub fn drift_share(&self) -> f64 {
        self.drift_warned as f64 / self.replicates as f64
    }
}

/// Runs `replicates` legs of `spec` from `seed` under `opts`.
pub fn run(spec: &Spec, opts: &EstimateOptions, replicates: usize, seed: u64) -> Outcome {
    let mut r = rng(seed);
    let mut out = Outcome {
        replicates,
        min_overlap: f64::INFINITY,
        ..Default::default()
    };
    for _ in 0..replicates {
        let l = leg(spec, &mut r);
        let est = estimate_leg(&l, opts).expect("the generated leg estimates");
        tally(&est, spec.offset, &mut out);
    }
    out
}

fn tally(est: &LegEstimate, truth: f64, out: &mut Outcome) {
    if let Some(o) = est.min_adjacent_overlap {
        out.min_overlap = out.min_overlap.min(o);
        out.max_min_overlap = out.max_min_overlap.max(o);
    }
    if est.warning_details.iter().any(|w| {
        matches!(
            w,
            LegWarning::WindowDrift { .. } | LegWarning::LegDrift { .. }
        )
    }) {
        out.drift_warned += 1;
    }
    for (m, d) in &est.estimates {
        let pos = match out.tallies.iter().position(|(x, _)| x == m) {
            Some(p) => p,
            None => {
                out.tallies.push((*m, Tally::default()));
                out.tallies.len() - 1
            }
        };
        let t = &mut out.tallies[pos].1;
        let err = d.delta_g - truth;
        t.n += 1;
        t.within_1 += usize::from(err.abs() <= d.sigma);
        t.within_2 += usize::from(err.abs() <= 2.0 * d.sigma);
        t.sum_z += err / d.sigma;
        if !est.is_reliable(*m) {
            t.unreliable += 1;
        } else {
            if d.sigma < 0.5 * err.abs() {
                t.overconfident += 1;
            }
            t.worst_ratio = t.worst_ratio.max(err.abs() / d.sigma);
        }
    }
}

/// One line per method.
pub fn describe(label: &str, o: &Outcome) -> String {
    let mut s = format!(
        "{label}: {} replicates, drift warned in {:.1} %, smallest adjacent overlap {:.1e} to {:.1e}\n",
        o.replicates,
        100.0 * o.drift_share(),
        o.min_overlap,
        o.max_min_overlap
    );
    for (m, t) in &o.tallies {
        s.push_str(&format!(
            "  {:<12} 1σ {:5.1} %  2σ {:5.1} %  mean z {:+.2}  unreliable {:3}  σ < |err|/2 (reliable) {:3}  worst |err|/σ {:.1}\n",
            m.as_str(),
            100.0 * t.cover_1(),
            100.0 * t.cover_2(),
            t.mean_z(),
            t.unreliable,
            t.overconfident,
            t.worst_ratio
        ));
    }
    s
}
