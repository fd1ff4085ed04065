//! The network: weighted least squares per-ligand ΔG, cycle closure, statistics
//! against experiment. Pure numerics, except [`experiment`], which reads the
//! measured-affinities CSV.

pub mod experiment;
mod solve;
pub mod stats;
mod topology;

pub use experiment::{Measured, MeasuredKind};
pub use solve::{
    annotate_edges, solve, EdgeFit, LigandEstimate, NetworkEdge, NetworkError, NetworkResult,
    Offset,
};
pub use topology::{CycleClosure, Hysteresis};
