//! The network: weighted least squares per-ligand ΔG, cycle closure, statistics
//! against experiment. Pure numerics: values in, values out.

mod experiment;
mod solve;
pub mod stats;
mod topology;

pub use experiment::{dg_from_constant_kj, molar_factor, Measured, MeasuredKind};
pub use solve::{
    annotate_edges, solve, Anchor, EdgeFit, LigandEstimate, NetworkEdge, NetworkError,
    NetworkResult, Offset,
};
pub use topology::{CycleClosure, Hysteresis};
