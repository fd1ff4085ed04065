//! The `analysis:` section of a campaign file and the options of `legwork estimate`.

use serde::{Deserialize, Serialize};

/// An estimator.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Method {
    /// Thermodynamic integration, trapezoid rule.
    Ti,
    /// Thermodynamic integration, natural cubic spline.
    TiSpline,
    /// Exponential averaging, forward.
    ExpForward,
    /// Exponential averaging, reverse.
    ExpReverse,
    /// Bennett acceptance ratio.
    Bar,
    /// Multistate Bennett acceptance ratio.
    Mbar,
}

/// How many initial frames of each window to discard.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Equilibration {
    /// Automated detection (maximise effectively uncorrelated samples).
    #[default]
    Auto,
    /// Keep every frame.
    None,
    /// Discard exactly this many frames.
    Frames(u64),
}

/// Whether to keep only an uncorrelated subsample.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Subsample {
    /// Subsample by the statistical inefficiency.
    #[default]
    Auto,
    /// Keep every frame.
    None,
}

/// The `analysis:` section.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AnalysisOptions {
    /// The headline estimator used for edges and the network.
    #[serde(default = "default_estimator")]
    pub estimator: Method,
    /// Equilibration handling.
    #[serde(default)]
    pub equilibration: Equilibration,
    /// Subsampling.
    #[serde(default)]
    pub subsample: Subsample,
    /// The stage whose output is analysed; default the last per-window stage.
    #[serde(default)]
    pub stage: Option<String>,
}

impl Default for AnalysisOptions {
    fn default() -> Self {
        AnalysisOptions {
            estimator: Method::Mbar,
            equilibration: Equilibration::Auto,
            subsample: Subsample::Auto,
            stage: None,
        }
    }
}

fn default_estimator() -> Method {
    Method::Mbar
}

impl std::str::FromStr for Equilibration {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s.trim() {
            "auto" => Ok(Equilibration::Auto),
            "none" => Ok(Equilibration::None),
            n => n.parse::<u64>().map(Equilibration::Frames).map_err(|_| {
                format!("equilibration must be auto, none or a number of frames, not '{n}'")
            }),
        }
    }
}

impl Serialize for Equilibration {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        match self {
            Equilibration::Auto => s.serialize_str("auto"),
            Equilibration::None => s.serialize_str("none"),
            Equilibration::Frames(n) => s.serialize_u64(*n),
        }
    }
}

impl<'de> Deserialize<'de> for Equilibration {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        #[derive(Deserialize)]
        #[serde(untagged)]
        enum Raw {
            N(u64),
            S(String),
        }
        match Raw::deserialize(d)? {
            Raw::N(n) => Ok(Equilibration::Frames(n)),
            Raw::S(s) => s.parse().map_err(serde::de::Error::custom),
        }
    }
}

impl Method {
    /// Every method, in the order tables list them.
    pub const ALL: [Method; 6] = [
        Method::Mbar,
        Method::Bar,
        Method::Ti,
        Method::TiSpline,
        Method::ExpForward,
        Method::ExpReverse,
    ];

    /// The name used on the command line and in JSON.
    pub fn as_str(self) -> &'static str {
        match self {
            Method::Ti => "ti",
            Method::TiSpline => "ti_spline",
            Method::ExpForward => "exp_forward",
            Method::ExpReverse => "exp_reverse",
            Method::Bar => "bar",
            Method::Mbar => "mbar",
        }
    }

    /// Whether the method uses dU/dλ (else the reduced energies).
    pub fn uses_dudl(self) -> bool {
        matches!(self, Method::Ti | Method::TiSpline)
    }
}

impl std::fmt::Display for Method {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

impl std::str::FromStr for Method {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Method::ALL
            .into_iter()
            .find(|m| m.as_str() == s.trim())
            .ok_or_else(|| {
                format!("unknown method '{s}': use ti, ti_spline, exp_forward, exp_reverse, bar, mbar or all")
            })
    }
}

/// Everything [`crate::estimate::estimate_leg`] needs to know.
#[derive(Debug, Clone, PartialEq)]
pub struct EstimateOptions {
    /// The estimators to run.
    pub methods: Vec<Method>,
    /// Equilibration handling.
    pub equilibration: Equilibration,
    /// Subsampling.
    pub subsample: Subsample,
    /// Whether to compute forward/reverse convergence series.
    pub convergence: bool,
    /// Fewer uncorrelated samples than this in a window draws a warning (common
    /// practice, no source).
    pub min_uncorrelated: usize,
    /// An adjacent overlap below this draws a warning (0.03: common practice, no source).
    pub min_overlap: f64,
    /// An adjacent overlap below this marks MBAR, BAR and EXP unreliable: their
    /// asymptotic error bars no longer describe the error (1e-3: our choice, set
    /// where the poor-overlap calibration in tests/it/estimate_calibration.rs shows
    /// reported σ falling behind the error; no published source).
    pub unreliable_overlap: f64,
    /// A window or leg whose first and last parts differ by more than this many
    /// combined standard errors draws a drift warning (3: common practice, no
    /// source; a two-sided normal tail of 0.27 % per comparison).
    pub drift_sigmas: f64,
}

impl Default for EstimateOptions {
    fn default() -> Self {
        EstimateOptions {
            methods: Method::ALL.to_vec(),
            equilibration: Equilibration::Auto,
            subsample: Subsample::Auto,
            convergence: true,
            min_uncorrelated: 50,
            min_overlap: 0.03,
            unreliable_overlap: 1e-3,
            drift_sigmas: 3.0,
        }
    }
}

impl EstimateOptions {
    /// Every method, with the campaign's equilibration and subsampling.
    pub fn from_analysis(a: &AnalysisOptions) -> Self {
        EstimateOptions {
            equilibration: a.equilibration,
            subsample: a.subsample,
            ..Default::default()
        }
    }
}
