//! Injected failures, for testing how legwork tracks and resumes broken tasks.
//!
//! Faults decide only *when* a run stops, never *what* it writes: a run that
//! completes writes the same bytes whether or not faults were asked for, so a faulty
//! campaign resumed to completion gives the same outputs as a clean one.
//!
//! The deterministic faults (fail after N frames, truncate, signal) fire on attempts
//! up to [`Faults::attempts`] (default 1), so by default the rerun that `resume`
//! submits succeeds. The random failure is drawn from (seed, attempt) on every attempt;
//! the hang fires only on the attempt it names.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Which faults to inject.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Faults {
    /// exit non-zero once this process has written this many frames
    pub fail_after: Option<u64>,
    /// fail with this probability, decided from (seed, attempt), at a frame drawn from the same stream
    pub fail_probability: f64,
    /// on this attempt, stop half-way and sleep until killed (a walltime overrun)
    pub hang_attempt: Option<u32>,
    /// write only the first half of the last line, skip the final checkpoint, exit 0
    pub truncate: bool,
    /// half-way through, kill the process with this signal number
    pub signal: Option<i32>,
    /// the deterministic faults fire on attempts 1..=attempts
    pub attempts: u32,
}

/// What a run does when a fault fires.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FaultAction {
    /// exit with status 1
    Fail,
    /// sleep forever
    Hang,
    /// raise this signal
    Signal(i32),
}

/// The faults resolved for one attempt.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct FaultPlan {
    /// stop after this many frames written by this process, then act
    pub stop: Option<(u64, FaultAction)>,
    /// write a truncated last line
    pub truncate_last: bool,
}

impl Faults {
    /// True when no fault is asked for.
    pub fn is_none(&self) -> bool {
        self.fail_after.is_none()
            && self.fail_probability <= 0.0
            && self.hang_attempt.is_none()
            && !self.truncate
            && self.signal.is_none()
    }

    /// Resolves the faults for `attempt` of a run seeded `seed` that has `remaining`
    /// frames left to write. The earliest stop wins; a finished window gets no faults.
    pub fn plan(&self, seed: u64, attempt: u32, remaining: u64) -> FaultPlan {
        if remaining == 0 {
            // A finished window has nothing left to break.
            return FaultPlan::default();
        }
        let deterministic = attempt <= self.attempts;
        let half = remaining / 2;
        let mut stops: Vec<(u64, FaultAction)> = Vec::new();
        if deterministic {
            if let Some(n) = self.fail_after {
                stops.push((n.min(remaining), FaultAction::Fail));
            }
            if let Some(sig) = self.signal {
                stops.push((half, FaultAction::Signal(sig)));
            }
        }
        if self.fail_probability > 0.0 {
            // A stream of its own (stream = attempt ≥ 1; sampling uses stream 0), so
            // the decision never touches the sampled configurations.
            let mut rng = ChaCha8Rng::seed_from_u64(seed);
            rng.set_stream(u64::from(attempt));
            let u: f64 = rng.gen();
            let at: f64 = rng.gen();
            if u < self.fail_probability {
                stops.push(((at * remaining as f64) as u64, FaultAction::Fail));
            }
        }
        if self.hang_attempt == Some(attempt) {
            stops.push((half, FaultAction::Hang));
        }
        FaultPlan {
            stop: stops.into_iter().min_by_key(|s| s.0),
            truncate_last: deterministic && self.truncate,
        }
    }
}
