//! Free-energy estimators (TI, EXP, BAR, MBAR), overlap, equilibration and decorrelation. Pure numerics.

pub mod options;

pub use options::{AnalysisOptions, Method};
