//! Sampling by the exact discretisation of the Ornstein–Uhlenbeck process.
//!
//! Overdamped Langevin dynamics in a harmonic well of stiffness k_λ centred at m_λ is
//! the Ornstein–Uhlenbeck process; over one frame its transition is exactly
//!
//! x' = m + φ(x − m) + σ √(1 − φ²) ξ,  ξ ~ N(0, I),  σ² = kT/k_λ,
//!
//! with φ = exp(−Δt/τ) the per-frame correlation. In equilibrium every coordinate is an
//! AR(1) series with autocorrelation φ^t, whose statistical inefficiency is the
//! textbook g = (1 + φ)/(1 − φ). A function quadratic in x (such as dU/dλ when
//! k_A ≠ k_B) mixes that with the (1 + φ²)/(1 − φ²) of its quadratic part.

use rand::Rng;
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;

/// The AR(1) sampler of one λ state.
#[derive(Debug, Clone)]
pub struct Ar1Sampler {
    center: f64,
    phi: f64,
    noise: f64,
    /// the current configuration (Å)
    pub position: Vec<f64>,
    /// the random stream; its word position goes into the checkpoint
    pub rng: ChaCha8Rng,
}

impl Ar1Sampler {
    /// A sampler around `center` (first axis) with per-coordinate width `sigma`,
    /// correlation `phi` per frame, starting at `position`.
    pub fn new(center: f64, sigma: f64, phi: f64, position: Vec<f64>, rng: ChaCha8Rng) -> Self {
        Ar1Sampler {
            center,
            phi,
            noise: sigma * (1.0 - phi * phi).sqrt(),
            position,
            rng,
        }
    }

    /// Advances one frame.
    #[inline]
    pub fn step(&mut self) {
        for (i, x) in self.position.iter_mut().enumerate() {
            let m = if i == 0 { self.center } else { 0.0 };
            let xi: f64 = self.rng.sample(StandardNormal);
            *x = m + self.phi * (*x - m) + self.noise * xi;
        }
    }
}
