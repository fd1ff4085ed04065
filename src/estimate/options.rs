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
