//! Free-energy estimators (TI, EXP, BAR, MBAR), overlap, equilibration and
//! decorrelation. Pure numerics: slices and samples in, values out, no I/O.

pub mod bar;
mod checks;
pub mod correlation;
mod error;
pub mod exp;
mod fastexp;
mod leg;
pub mod mbar;
#[cfg(target_arch = "x86_64")]
mod mbar_avx2;
pub mod options;
mod result;
pub mod ti;
mod warning;

pub use error::EstimateError;
pub use leg::{dudl_series, energy_series, estimate_leg};
pub use options::{AnalysisOptions, Equilibration, EstimateOptions, Method, Subsample};
pub use result::{
    Convergence, ConvergencePoint, DeltaG, LegEstimate, MbarDetails, PairEstimate, TiPoint,
    WindowDiagnostics,
};
pub use warning::{LegWarning, Series, DISAGREE_SIGMAS};
