//! Experimental design: where the next compute should go.
//!
//! - [`length`]: the thermodynamic length along λ from a pilot (Shenfeld, Xu,
//!   Eastwood, Dror & Shaw 2009, Phys. Rev. E 80, 046705), the adjacent overlap a
//!   schedule is predicted to have, and λ schedules that equalize the length.
//! - [`allocate`]: a budget of additional frames spread over windows to minimise
//!   the sum of the ligands' variances (A-optimal; Xu 2019, J. Chem. Inf. Model.
//!   59, 4720) or the largest ligand σ.
//! - [`edges`]: an edge list chosen from a per-pair difficulty matrix by expected
//!   variance (A-optimal design by greedy selection and Fedorov exchange), and the
//!   few extra edges that cut the largest ligand σ the most.
//!
//! Every number here is a prediction from a model stated beside its function; a
//! proposal is a starting point to check, not a measurement.

pub mod allocate;
pub mod edges;
mod error;
mod graph;
pub mod length;

pub use error::DesignError;
pub use graph::{laplacian_pinv, sum_of_variances};
