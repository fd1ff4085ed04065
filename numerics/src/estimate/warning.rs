//! Warnings about one leg's estimate, as data: which window, pair or estimator,
//! the numbers (in kT, or kT per unit λ for dU/dλ), and a message in any energy
//! unit. The caller picks the unit and adds its own hints (which option or key to
//! change); nothing here names a command-line flag or a campaign key.

use super::options::Method;
use super::result::DeltaG;
use crate::units::EnergyUnit;
use serde::{Deserialize, Serialize};

/// The series of a window that a warning is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Series {
    /// The reduced energy differences that EXP, BAR and MBAR use.
    Energy,
    /// dU/dλ, which TI uses.
    Dudl,
}

impl Series {
    fn describe(self) -> &'static str {
        match self {
            Series::Energy => "the energy differences",
            Series::Dudl => "dU/dλ",
        }
    }
}

/// One problem found while estimating a leg. Energies are stored in kT; use
/// [`LegWarning::message`] to word it in a unit of your choice.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum LegWarning {
    /// Passed on from whoever built the samples (a truncated line and the like).
    Input {
        /// The message as given.
        message: String,
    },
    /// TI was asked for but the windows carry no dU/dλ.
    NoDudl,
    /// A window has fewer effectively uncorrelated samples than the minimum.
    FewSamples {
        /// 0-based state of the window.
        state: usize,
        /// Where its samples came from.
        source: String,
        /// Which series.
        series: Series,
        /// Samples used.
        samples: usize,
        /// Statistical inefficiency of the equilibrated part.
        inefficiency: f64,
        /// The minimum asked for.
        minimum: usize,
    },
    /// Every frame of a window is the same frame: the simulation did not move, or
    /// one frame was written over and over. Every estimator is marked unreliable.
    IdenticalFrames {
        /// 0-based state of the window.
        state: usize,
        /// Where its samples came from.
        source: String,
        /// Frames read.
        frames: usize,
    },
    /// The first and the last part of a window's used frames disagree: the window
    /// was still drifting.
    WindowDrift {
        /// 0-based state of the window.
        state: usize,
        /// Where its samples came from.
        source: String,
        /// Which series.
        series: Series,
        /// Mean ± standard error of the first third of the kept frames (kT, or kT
        /// per unit λ for dU/dλ).
        first: DeltaG,
        /// The same for the last third.
        last: DeltaG,
    },
    /// ΔG from the first half of every window differs from ΔG from the last half.
    LegDrift {
        /// The estimator compared.
        method: Method,
        /// From the first half of each window's used frames (kT).
        first: DeltaG,
        /// From the last half (kT).
        last: DeltaG,
    },
    /// Neighbouring states overlap little.
    PoorOverlap {
        /// Lower state.
        from: usize,
        /// Upper state.
        to: usize,
        /// Primary λ of the lower state.
        lambda_from: f64,
        /// Primary λ of the upper state.
        lambda_to: f64,
        /// min(O_ij, O_ji) of the overlap matrix.
        overlap: f64,
        /// The threshold of the warning.
        threshold: f64,
        /// Estimators marked unreliable because of it (empty when the overlap is
        /// poor but still enough for their error bars).
        unreliable: Vec<Method>,
    },
    /// One estimator disagrees with every other one.
    Outlier {
        /// The odd one out.
        method: Method,
        /// Its estimate (kT).
        value: DeltaG,
        /// The others (kT).
        others: Vec<(Method, DeltaG)>,
    },
    /// Pairs of estimators that disagree (when no single one is the odd one out).
    Disagree {
        /// The pairs and their estimates (kT).
        pairs: Vec<((Method, DeltaG), (Method, DeltaG))>,
    },
}

/// Two values are taken to disagree when they differ by more than this many of
/// their combined standard errors (common practice, no source).
pub const DISAGREE_SIGMAS: f64 = 2.0;

impl LegWarning {
    /// The state (window) the warning is about, if it is about one.
    pub fn state(&self) -> Option<usize> {
        match self {
            LegWarning::FewSamples { state, .. }
            | LegWarning::IdenticalFrames { state, .. }
            | LegWarning::WindowDrift { state, .. } => Some(*state),
            _ => None,
        }
    }

    /// The warning worded with its energies in `unit` (kT values converted at
    /// `temperature_k`): what is wrong, where, and what to do.
    ///
    /// # Examples
    ///
    /// ```
    /// use legwork_numerics::estimate::{DeltaG, LegWarning, Method};
    /// use legwork_numerics::units::EnergyUnit;
    /// let w = LegWarning::LegDrift {
    ///     method: Method::Mbar,
    ///     first: DeltaG { delta_g: 2.0, sigma: 0.1 },
    ///     last: DeltaG { delta_g: 1.0, sigma: 0.1 },
    /// };
    /// let kt = w.message(EnergyUnit::Kt, 300.0);
    /// assert!(kt.contains("2.000 ± 0.100 kT"), "{kt}");
    /// let kcal = w.message(EnergyUnit::KcalPerMol, 300.0);
    /// assert!(kcal.contains("kcal/mol"), "{kcal}");
    /// ```
    pub fn message(&self, unit: EnergyUnit, temperature_k: f64) -> String {
        let f = EnergyUnit::Kt.factor_to(unit, temperature_k);
        let u = unit.as_str();
        let pm = |d: &DeltaG| format!("{:.3} ± {:.3} {u}", d.delta_g * f, d.sigma * f);
        match self {
            LegWarning::Input { message } => message.clone(),
            LegWarning::NoDudl => {
                "TI skipped: the windows have no dU/dλ samples".to_string()
            }
            LegWarning::FewSamples {
                state,
                source,
                series,
                samples,
                inefficiency,
                minimum,
            } => format!(
                "window of state {state} ({source}): only {samples} uncorrelated samples of {} (statistical inefficiency {inefficiency:.1}, fewer than {minimum}); run the window longer",
                series.describe()
            ),
            LegWarning::IdenticalFrames {
                state,
                source,
                frames,
            } => format!(
                "window of state {state} ({source}): all {frames} frames are identical, so it carries no sampling and no error bar; every estimate of this leg is unreliable. Check that the simulation moved and that its output was written frame by frame, then run the window again"
            ),
            LegWarning::WindowDrift {
                state,
                source,
                series,
                first,
                last,
            } => {
                let per = if *series == Series::Dudl { " per unit λ" } else { "" };
                format!(
                    "window of state {state} ({source}): {} drift: mean {}{per} over the first third of the kept frames, {}{per} over the last third; the window is not at equilibrium: discard more of its start or run it longer",
                    series.describe(),
                    pm(first),
                    pm(last)
                )
            }
            LegWarning::LegDrift {
                method,
                first,
                last,
            } => format!(
                "{method} drifts: {} from the first half of every window, {} from the last half; the windows are not at equilibrium: discard more of their start or run them longer",
                pm(first),
                pm(last)
            ),
            LegWarning::PoorOverlap { .. } => self.overlap_message(),
            LegWarning::Outlier { .. } | LegWarning::Disagree { .. } => {
                self.disagreement_message(&pm)
            }
        }
    }

    fn overlap_message(&self) -> String {
        let LegWarning::PoorOverlap {
            from,
            to,
            lambda_from,
            lambda_to,
            overlap,
            threshold,
            unreliable,
        } = self
        else {
            unreachable!("called for PoorOverlap only")
        };
        let mut s = format!(
            "states {from} and {to} (λ {lambda_from} → {lambda_to}) overlap only {} (below {threshold}, common practice)",
            fmt_overlap(*overlap)
        );
        if !unreliable.is_empty() {
            let names: Vec<&str> = unreliable.iter().map(|m| m.as_str()).collect();
            s.push_str(&format!(
                "; too little for the error bars of {}, which are marked unreliable",
                names.join(", ")
            ));
        }
        s.push_str(": add a window between them or sample both longer");
        s
    }

    fn disagreement_message(&self, pm: &dyn Fn(&DeltaG) -> String) -> String {
        match self {
            LegWarning::Outlier {
                method,
                value,
                others,
            } => {
                let o: Vec<String> = others
                    .iter()
                    .map(|(m, d)| format!("{m} {}", pm(d)))
                    .collect();
                format!(
                    "{method} ({}) disagrees with every other estimator ({}) by more than {DISAGREE_SIGMAS} combined σ; {}",
                    pm(value),
                    o.join(", "),
                    advice(*method)
                )
            }
            LegWarning::Disagree { pairs } => {
                let p: Vec<String> = pairs
                    .iter()
                    .map(|((a, x), (b, y))| format!("{a} {} vs {b} {}", pm(x), pm(y)))
                    .collect();
                format!(
                    "estimators disagree by more than {DISAGREE_SIGMAS} combined σ: {}; check the overlap, the equilibration and the λ spacing",
                    p.join("; ")
                )
            }
            _ => unreachable!("called for Outlier and Disagree only"),
        }
    }
}

fn fmt_overlap(o: f64) -> String {
    if o >= 1e-3 {
        format!("{o:.3}")
    } else {
        format!("{o:.1e}")
    }
}

fn advice(m: Method) -> &'static str {
    match m {
        Method::Ti | Method::TiSpline => {
            "TI needs more windows where dU/dλ curves; prefer the others"
        }
        Method::ExpForward | Method::ExpReverse => {
            "one-sided exponential averaging is biased where the states overlap little; prefer BAR or MBAR"
        }
        Method::Bar | Method::Mbar => "check the overlap and the equilibration",
    }
}
