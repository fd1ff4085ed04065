//! Thermodynamic length along λ and λ schedules that equalize it.
//!
//! The thermodynamic length of a path λ ↦ u_λ (reduced potentials) is
//! L = ∫ sqrt(⟨δ(du/dλ)²⟩_λ) dλ, with ⟨δ(du/dλ)²⟩_λ the variance of du/dλ in
//! state λ (Shenfeld, Xu, Eastwood, Dror & Shaw 2009, Phys. Rev. E 80, 046705).
//! It is measured in units of thermal fluctuation: between two states a length
//! Δℓ apart, the reduced energy difference fluctuates by about Δℓ, and the
//! overlap of the two states depends on Δℓ alone to that order. So a schedule
//! whose neighbours are equally far apart in length spreads the difficulty evenly,
//! and the length per step predicts the overlap ([`predicted_adjacent_overlap`]).
//!
//! A profile is built from a pilot, either from the variance of du/dλ at each
//! window ([`LengthProfile::from_dudl_variance`]: the metric density at the
//! nodes, linear in between, so the length is the trapezoid rule of the density)
//! or from the spread of the reduced energy difference between neighbours
//! ([`LengthProfile::from_steps`]: a length per step, spread evenly over λ within
//! the step). [`LengthProfile::from_samples`] computes either from a leg's samples.

use super::DesignError;
use crate::estimate::dudl_series;
use crate::samples::LegSamples;
use serde::{Deserialize, Serialize};

/// Where a length profile's numbers came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LengthSource {
    /// The variance of du/dλ in each window (single-component legs).
    DudlVariance,
    /// The standard deviation of u_{k+1} − u_k in windows k and k + 1.
    NeighbourEnergy,
}

/// The thermodynamic length along a leg's λ path, as a function of primary λ.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LengthProfile {
    /// Primary λ of the pilot's states, strictly increasing.
    pub lambdas: Vec<f64>,
    /// Length from the first state to each state (kT-fluctuation units).
    pub cumulative: Vec<f64>,
    /// Metric density dℓ/dλ at the two ends of every interval: linear in between.
    pub segments: Vec<(f64, f64)>,
    /// What the profile was computed from.
    pub source: LengthSource,
}

impl LengthProfile {
    /// A profile from the variance of du/dλ (reduced, kT per unit λ, squared) at
    /// each of `lambdas`: density sqrt(variance), linear between nodes, so
    /// L = Σ h_i (d_i + d_{i+1})/2 (the trapezoid rule of Shenfeld et al. 2009).
    ///
    /// # Errors
    /// [`DesignError::Input`] when the lengths differ, there are fewer than two
    /// states, λ does not increase strictly, or a variance is negative or not finite.
    ///
    /// # Examples
    /// ```
    /// use legwork_numerics::design::length::LengthProfile;
    /// // A constant variance 4 over [0, 1]: density 2, length 2.
    /// let p = LengthProfile::from_dudl_variance(&[0.0, 0.5, 1.0], &[4.0, 4.0, 4.0]).unwrap();
    /// assert!((p.total() - 2.0).abs() < 1e-12);
    /// assert!((p.lambda_at(1.0) - 0.5).abs() < 1e-12);
    /// ```
    pub fn from_dudl_variance(lambdas: &[f64], variance: &[f64]) -> Result<Self, DesignError> {
        check_lambdas(lambdas)?;
        if variance.len() != lambdas.len() {
            return Err(DesignError::Input(format!(
                "{} variances for {} states; give one per state",
                variance.len(),
                lambdas.len()
            )));
        }
        if let Some((k, v)) = variance
            .iter()
            .enumerate()
            .find(|(_, v)| !(v.is_finite() && **v >= 0.0))
        {
            return Err(DesignError::Input(format!(
                "state {k}: the variance of du/dλ is {v}; it must be finite and ≥ 0"
            )));
        }
        let d: Vec<f64> = variance.iter().map(|v| v.sqrt()).collect();
        let segments = (0..d.len() - 1).map(|i| (d[i], d[i + 1])).collect();
        Ok(Self::build(lambdas, segments, LengthSource::DudlVariance))
    }

    /// A profile from a length per step between neighbouring states (`steps[i]`
    /// between `lambdas[i]` and `lambdas[i + 1]`), spread evenly over λ within
    /// each step.
    ///
    /// # Errors
    /// [`DesignError::Input`] for a wrong count, λ not strictly increasing, or a
    /// negative or non-finite step.
    ///
    /// # Examples
    /// ```
    /// use legwork_numerics::design::length::LengthProfile;
    /// let p = LengthProfile::from_steps(&[0.0, 0.5, 1.0], &[1.0, 3.0]).unwrap();
    /// assert_eq!(p.total(), 4.0);
    /// // Half the length is reached a third of the way into the second step.
    /// assert!((p.lambda_at(2.0) - (0.5 + 0.5 / 3.0)).abs() < 1e-12);
    /// ```
    pub fn from_steps(lambdas: &[f64], steps: &[f64]) -> Result<Self, DesignError> {
        check_lambdas(lambdas)?;
        if steps.len() + 1 != lambdas.len() {
            return Err(DesignError::Input(format!(
                "{} steps for {} states; give one per neighbouring pair",
                steps.len(),
                lambdas.len()
            )));
        }
        if let Some((k, s)) = steps
            .iter()
            .enumerate()
            .find(|(_, s)| !(s.is_finite() && **s >= 0.0))
        {
            return Err(DesignError::Input(format!(
                "step {k}: length {s}; it must be finite and ≥ 0"
            )));
        }
        let segments = steps
            .iter()
            .zip(lambdas.windows(2))
            .map(|(s, w)| {
                let d = s / (w[1] - w[0]);
                (d, d)
            })
            .collect();
        Ok(Self::build(
            lambdas,
            segments,
            LengthSource::NeighbourEnergy,
        ))
    }

    /// A profile from a leg's samples. `discard[k]` frames are skipped at the start
    /// of window k (its equilibration; an empty slice skips none). `source`: `None`
    /// picks du/dλ variance when the leg has one λ component and every window has
    /// du/dλ, else the neighbour energy spread.
    ///
    /// With [`LengthSource::NeighbourEnergy`] the step between states k and k + 1
    /// is the mean of the standard deviations of u_{k+1} − u_k over the frames of
    /// window k and over those of window k + 1 (both equal the length to first
    /// order in the step).
    ///
    /// # Errors
    /// [`DesignError::Input`] when a window has fewer than 2 frames left, du/dλ is
    /// asked for but missing or the leg has several λ components, or λ does not
    /// increase strictly.
    ///
    /// # Examples
    /// ```
    /// use legwork_numerics::design::length::{LengthProfile, LengthSource};
    /// use legwork_numerics::samples::{LegSamples, WindowSamples};
    /// // Two states u_j(x) = x²/2 · k_j sampled at two frames each.
    /// let lam = vec![0.0, 1.0];
    /// let k = [1.0, 2.0];
    /// let w = |s: usize, xs: &[f64]| {
    ///     let red = xs.iter().flat_map(|x| k.map(|kj| 0.5 * kj * x * x)).collect();
    ///     let dudl = xs.iter().map(|x| 0.5 * (k[1] - k[0]) * x * x).collect();
    ///     WindowSamples::from_reduced(s, 300.0, lam.clone(), red, dudl)
    /// };
    /// let leg = LegSamples::from_windows(vec![w(0, &[0.5, 1.5]), w(1, &[0.2, 1.0])]);
    /// let p = LengthProfile::from_samples(&leg, &[], None).unwrap();
    /// assert_eq!(p.source, LengthSource::DudlVariance);
    /// assert!(p.total() > 0.0);
    /// ```
    pub fn from_samples(
        leg: &LegSamples,
        discard: &[usize],
        source: Option<LengthSource>,
    ) -> Result<Self, DesignError> {
        let k = leg.n_states();
        if k < 2 || leg.windows.len() != k {
            return Err(DesignError::Input(format!(
                "a leg needs at least 2 states with one window each; got {k} states and {} windows",
                leg.windows.len()
            )));
        }
        let single = leg.components.len() == 1;
        let has_dudl = leg.windows.iter().all(|w| w.has_dudl());
        let source = source.unwrap_or(if single && has_dudl {
            LengthSource::DudlVariance
        } else {
            LengthSource::NeighbourEnergy
        });
        let skip = |i: usize| discard.get(i).copied().unwrap_or(0);
        for (i, w) in leg.windows.iter().enumerate() {
            if w.frames < skip(i) + 2 {
                return Err(DesignError::Input(format!(
                    "window of state {i} ({}): {} frames, {} discarded; a spread needs at least 2 frames, so run the pilot longer",
                    w.source.display(),
                    w.frames,
                    skip(i)
                )));
            }
        }
        match source {
            LengthSource::DudlVariance => {
                if !single {
                    return Err(DesignError::Input(format!(
                        "the leg has {} λ components; the du/dλ variance gives a length along one λ only, so use the neighbour energy spread",
                        leg.components.len()
                    )));
                }
                if !has_dudl {
                    return Err(DesignError::Input(
                        "the windows have no du/dλ column; use the neighbour energy spread or configure reader.columns.dudl".into(),
                    ));
                }
                let var: Vec<f64> = leg
                    .windows
                    .iter()
                    .enumerate()
                    .map(|(i, w)| variance(&dudl_series(w)[skip(i)..]))
                    .collect();
                Self::from_dudl_variance(&leg.lambdas, &var)
            }
            LengthSource::NeighbourEnergy => {
                let sd = |i: usize, j: usize| -> f64 {
                    let w = &leg.windows[i];
                    let d: Vec<f64> = (skip(i)..w.frames)
                        .map(|n| {
                            let r = w.row(n);
                            r[j + 1] - r[j]
                        })
                        .collect();
                    variance(&d).sqrt()
                };
                let steps: Vec<f64> = (0..k - 1)
                    .map(|j| 0.5 * (sd(j, j) + sd(j + 1, j)))
                    .collect();
                Self::from_steps(&leg.lambdas, &steps)
            }
        }
    }

    fn build(lambdas: &[f64], segments: Vec<(f64, f64)>, source: LengthSource) -> Self {
        let mut cumulative = vec![0.0];
        for (w, (a, b)) in lambdas.windows(2).zip(&segments) {
            let last = *cumulative.last().expect("non-empty");
            cumulative.push(last + (w[1] - w[0]) * (a + b) / 2.0);
        }
        LengthProfile {
            lambdas: lambdas.to_vec(),
            cumulative,
            segments,
            source,
        }
    }

    /// The total length L from the first state to the last.
    pub fn total(&self) -> f64 {
        *self.cumulative.last().expect("at least two states")
    }

    /// The length from the first state to primary λ `x` (clamped to the path).
    pub fn length_at(&self, x: f64) -> f64 {
        let lam = &self.lambdas;
        let x = x.clamp(lam[0], lam[lam.len() - 1]);
        let i = lam.partition_point(|&l| l <= x).clamp(1, lam.len() - 1) - 1;
        let h = lam[i + 1] - lam[i];
        let t = (x - lam[i]) / h;
        let (a, b) = self.segments[i];
        self.cumulative[i] + h * (a * t + (b - a) * t * t / 2.0)
    }

    /// The primary λ at which the length from the first state reaches `l`
    /// (clamped to [0, L]); the inverse of [`LengthProfile::length_at`], solving
    /// the quadratic of the linear density within the interval.
    pub fn lambda_at(&self, l: f64) -> f64 {
        let lam = &self.lambdas;
        let n = lam.len();
        let l = l.clamp(0.0, self.total());
        // The first interval whose end reaches l.
        let i = self.cumulative[1..].partition_point(|&c| c < l).min(n - 2);
        let h = lam[i + 1] - lam[i];
        let (a, b) = self.segments[i];
        let seg = self.cumulative[i + 1] - self.cumulative[i];
        if seg <= 0.0 {
            return lam[i];
        }
        let r = ((l - self.cumulative[i]) / h).max(0.0);
        // (b − a)/2 t² + a t = r, in the form that is stable for b ≈ a.
        let disc = (a * a + 2.0 * (b - a) * r).max(0.0);
        let t = if a + disc.sqrt() > 0.0 {
            2.0 * r / (a + disc.sqrt())
        } else {
            0.0
        };
        lam[i] + h * t.clamp(0.0, 1.0)
    }

    /// The length of each step of the schedule `lambdas` (primary λ, increasing).
    pub fn steps(&self, lambdas: &[f64]) -> Vec<f64> {
        lambdas
            .windows(2)
            .map(|w| self.length_at(w[1]) - self.length_at(w[0]))
            .collect()
    }
}

fn check_lambdas(lambdas: &[f64]) -> Result<(), DesignError> {
    if lambdas.len() < 2 {
        return Err(DesignError::Input(format!(
            "a λ path needs at least 2 states, not {}",
            lambdas.len()
        )));
    }
    if let Some(i) = (0..lambdas.len() - 1)
        .find(|&i| lambdas[i + 1] <= lambdas[i] || lambdas[i + 1].is_nan() || lambdas[i].is_nan())
    {
        return Err(DesignError::Input(format!(
            "λ must increase strictly: state {} has λ {} after {}",
            i + 1,
            lambdas[i + 1],
            lambdas[i]
        )));
    }
    Ok(())
}

/// Sample variance (n − 1 denominator).
fn variance(x: &[f64]) -> f64 {
    let n = x.len() as f64;
    let m = x.iter().sum::<f64>() / n;
    x.iter().map(|v| (v - m) * (v - m)).sum::<f64>() / (n - 1.0)
}

/// The adjacent overlap a schedule is predicted to have, from the positions of
/// its states along the thermodynamic length (`positions`, non-decreasing) and,
/// optionally, the frames of every state (`counts`; equal when `None`).
///
/// The model (ours; an approximation): each state is a unit-variance Gaussian
/// placed at its length coordinate, p_k = N(ℓ_k, 1) on one axis. Then the reduced
/// energy difference between two states a length s apart is Gaussian with
/// variance s² in either state, as it is for a harmonic well whose centre moves
/// (where the model is exact) and, to first order in the step, for any path. The
/// overlap is MBAR's overlap matrix in the limit of many samples,
/// O_ij = N_j ∫ p_i p_j / Σ_k N_k p_k dx (Klimovich, Shirts & Mobley 2015,
/// J. Comput.-Aided Mol. Des. 29, 397), evaluated by Simpson's rule on a fine grid;
/// the value returned for each neighbouring pair is min(O_{i,i+1}, O_{i+1,i}).
/// Where the real distributions are skewed (large steps of a stiffness change)
/// the real overlap can differ from the prediction: treat it as an estimate.
///
/// # Panics
/// When `counts` is given with a length other than `positions`.
///
/// # Examples
/// ```
/// use legwork_numerics::design::length::predicted_adjacent_overlap;
/// // Two coinciding states share everything: 1/2 each.
/// let o = predicted_adjacent_overlap(&[0.0, 0.0], None);
/// assert!((o[0] - 0.5).abs() < 1e-9);
/// // Further apart, less.
/// let far = predicted_adjacent_overlap(&[0.0, 3.0], None);
/// assert!(far[0] < 0.1 && far[0] > 0.0);
/// ```
pub fn predicted_adjacent_overlap(positions: &[f64], counts: Option<&[f64]>) -> Vec<f64> {
    let k = positions.len();
    if let Some(c) = counts {
        assert_eq!(c.len(), k, "one count per state");
    }
    let n = |i: usize| counts.map_or(1.0, |c| c[i]);
    const REACH: f64 = 12.0;
    (0..k.saturating_sub(1))
        .map(|i| {
            let (lo, hi) = (positions[i] - REACH, positions[i + 1] + REACH);
            // States close enough to matter in the denominator.
            let first = positions.partition_point(|&p| p < lo - REACH);
            let last = positions.partition_point(|&p| p <= hi + REACH);
            let steps = 4000usize;
            let h = (hi - lo) / steps as f64;
            let mut sum = 0.0;
            for s in 0..=steps {
                let x = lo + h * s as f64;
                let e = |p: f64| -0.5 * (x - p) * (x - p);
                let (ei, ej) = (e(positions[i]), e(positions[i + 1]));
                let m = (first..last)
                    .map(|q| e(positions[q]))
                    .fold(f64::MIN, f64::max);
                let denom: f64 = (first..last)
                    .map(|q| n(q) * (e(positions[q]) - m).exp())
                    .sum();
                let v = (ei + ej - m).exp() / denom / (2.0 * std::f64::consts::PI).sqrt();
                let wgt = if s == 0 || s == steps {
                    1.0
                } else if s % 2 == 1 {
                    4.0
                } else {
                    2.0
                };
                sum += wgt * v;
            }
            let integral = sum * h / 3.0;
            (n(i + 1) * integral).min(n(i) * integral)
        })
        .collect()
}

/// What to propose.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScheduleRequest {
    /// Number of states; `None` asks for the fewest that clear `min_overlap`.
    pub windows: Option<usize>,
    /// The smallest adjacent overlap wanted (0.03 is common practice, no source).
    pub min_overlap: f64,
    /// The proposal aims at a predicted overlap of `margin × min_overlap` (≥ 1).
    /// The model is optimistic for large steps of skewed energy distributions:
    /// on the demo's hardest legs, schedules proposed with no margin measured
    /// 0.66–0.86 of their predicted smallest overlap, hence the default of 2 (ours).
    pub margin: f64,
    /// The most states the search for the fewest will try.
    pub max_windows: usize,
}

impl Default for ScheduleRequest {
    fn default() -> Self {
        ScheduleRequest {
            windows: None,
            min_overlap: 0.03,
            margin: 2.0,
            max_windows: 256,
        }
    }
}

/// A proposed λ schedule.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScheduleProposal {
    /// Primary λ of every proposed state, from 0 to 1.
    pub lambdas: Vec<f64>,
    /// Thermodynamic length of every step (all equal: L / (K − 1)).
    pub step_length: f64,
    /// Total length L of the path.
    pub total_length: f64,
    /// Predicted overlap of every neighbouring pair, equal frames per state.
    pub predicted_adjacent_overlap: Vec<f64>,
    /// Whether every predicted adjacent overlap clears the requested minimum
    /// times the margin.
    pub meets_min_overlap: bool,
    /// The fewest states whose equalized schedule clears the minimum times the
    /// margin (`None` when more than `max_windows` would be needed).
    pub fewest_windows: Option<usize>,
}

impl ScheduleProposal {
    /// The smallest predicted adjacent overlap.
    pub fn min_predicted_overlap(&self) -> f64 {
        self.predicted_adjacent_overlap
            .iter()
            .copied()
            .fold(f64::INFINITY, f64::min)
    }
}

/// Proposes a schedule that equalizes the thermodynamic length per step: state t
/// of K sits where the length reaches t·L/(K − 1) (Shenfeld et al. 2009: equal
/// length per step minimises the total variance among schedules of K states,
/// to the order of their analysis). With `request.windows` unset, K is the fewest
/// states whose predicted adjacent overlap ([`predicted_adjacent_overlap`],
/// equal frames per state) is at least `request.margin × request.min_overlap`
/// everywhere.
///
/// # Errors
/// [`DesignError::Input`] for fewer than 2 windows, a margin below 1 or a
/// minimum overlap (times the margin) outside (0, 0.5); [`DesignError::Infeasible`] when no K up to `max_windows` clears the
/// minimum and no K was given.
///
/// # Examples
/// ```
/// use legwork_numerics::design::length::{propose_schedule, LengthProfile, ScheduleRequest};
/// let p = LengthProfile::from_steps(&[0.0, 0.5, 1.0], &[1.0, 3.0]).unwrap();
/// let req = ScheduleRequest { windows: Some(5), ..Default::default() };
/// let s = propose_schedule(&p, &req).unwrap();
/// assert_eq!(s.lambdas.len(), 5);
/// assert!((s.step_length - 1.0).abs() < 1e-12);
/// assert!((s.lambdas[1] - 0.5).abs() < 1e-12); // the first unit of length ends at 0.5
/// ```
pub fn propose_schedule(
    profile: &LengthProfile,
    request: &ScheduleRequest,
) -> Result<ScheduleProposal, DesignError> {
    if !(request.margin.is_finite() && request.margin >= 1.0) {
        return Err(DesignError::Input(format!(
            "a margin of {} : give a factor of 1 or more",
            request.margin
        )));
    }
    let min = request.min_overlap * request.margin;
    if !(min > 0.0 && min < 0.5) {
        return Err(DesignError::Input(format!(
            "a minimum adjacent overlap of {} (times the margin {}) cannot be met; give a value between 0 and 0.5 (0.03 is common practice)",
            request.min_overlap, request.margin
        )));
    }
    if let Some(k) = request.windows {
        if k < 2 {
            return Err(DesignError::Input(format!(
                "a schedule needs at least 2 states, not {k}"
            )));
        }
    }
    let total = profile.total();
    let even = |k: usize| -> Vec<f64> {
        let s = total / (k - 1) as f64;
        (0..k).map(|t| s * t as f64).collect()
    };
    let min_of = |o: &[f64]| o.iter().copied().fold(f64::INFINITY, f64::min);
    // Equal steps: the smallest overlap is that of the chain's middle, monotone in K.
    let fewest = (2..=request.max_windows.max(2))
        .find(|&k| min_of(&predicted_adjacent_overlap(&even(k), None)) >= min);
    let k = match (request.windows, fewest) {
        (Some(k), _) => k,
        (None, Some(k)) => k,
        (None, None) => {
            return Err(DesignError::Infeasible(format!(
                "the path is {total:.1} kT-fluctuation units long: even {} equally spaced states are predicted to overlap less than {min}; split the path (more λ components) or allow more states",
                request.max_windows
            )))
        }
    };
    let positions = even(k);
    let mut lambdas: Vec<f64> = positions.iter().map(|&l| profile.lambda_at(l)).collect();
    let (first, last) = (
        profile.lambdas[0],
        profile.lambdas[profile.lambdas.len() - 1],
    );
    lambdas[0] = first;
    lambdas[k - 1] = last;
    for i in 1..k {
        // A flat stretch of the profile can give equal λ; keep them strictly apart.
        if lambdas[i] <= lambdas[i - 1] {
            lambdas[i] = lambdas[i - 1] + (last - lambdas[i - 1]) / (k - i) as f64;
        }
    }
    let predicted = predicted_adjacent_overlap(&positions, None);
    Ok(ScheduleProposal {
        lambdas,
        step_length: total / (k - 1) as f64,
        total_length: total,
        meets_min_overlap: min_of(&predicted) >= min,
        predicted_adjacent_overlap: predicted,
        fewest_windows: fewest,
    })
}

/// For a leg with several λ components: each component's value at new primary λ
/// `new_primary`, interpolated linearly between the pilot's states (whose primary
/// λ are `pilot_primary`; `component_lambdas[c][k]` is component c at pilot state
/// k). With one component whose values equal the primary λ this is the identity.
///
/// # Panics
/// When a component's list is not as long as `pilot_primary`.
///
/// # Examples
/// ```
/// use legwork_numerics::design::length::interpolate_components;
/// let comps = vec![vec![0.0, 1.0, 1.0], vec![0.0, 0.0, 1.0]];
/// let v = interpolate_components(&[0.0, 0.5, 1.0], &comps, &[0.0, 0.25, 0.75, 1.0]);
/// assert_eq!(v, vec![vec![0.0, 0.5, 1.0, 1.0], vec![0.0, 0.0, 0.5, 1.0]]);
/// ```
pub fn interpolate_components(
    pilot_primary: &[f64],
    component_lambdas: &[Vec<f64>],
    new_primary: &[f64],
) -> Vec<Vec<f64>> {
    component_lambdas
        .iter()
        .map(|c| {
            assert_eq!(c.len(), pilot_primary.len(), "one value per pilot state");
            new_primary
                .iter()
                .map(|&x| {
                    let n = pilot_primary.len();
                    let i = pilot_primary.partition_point(|&p| p <= x).clamp(1, n - 1) - 1;
                    let t = ((x - pilot_primary[i]) / (pilot_primary[i + 1] - pilot_primary[i]))
                        .clamp(0.0, 1.0);
                    c[i] + t * (c[i + 1] - c[i])
                })
                .collect()
        })
        .collect()
}
