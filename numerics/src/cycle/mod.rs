//! From legs to edges: signed legs, corrections, replicas combined. Pure numerics.
//!
//! An edge (or, in absolute and solvation campaigns, a ligand) is closed by summing
//! its legs with their signs, adding each leg's constant correction (negated on
//! the reverse of an edge run both ways, see [`EdgeDirection`]) and, for a
//! restrained leg, the standard-state correction of its Boresch restraint (by
//! quadrature, see [`BoreschRestraint::release`]). Replicas of a leg are combined
//! first (mean, with an uncertainty that has a per-replica part and a
//! between-replica part, see [`combine_replicas`]); the legs are then summed,
//! their variances added.

mod boresch;
mod edge;
mod quadrature;
mod replicas;
mod subject;

pub use boresch::{
    BoreschRestraint, RestraintError, RestraintParameter, RestraintRelease,
    ANALYTIC_TOLERANCE_KCAL, STANDARD_VOLUME_A3,
};
pub use edge::{
    combine_edge, combine_edge_directed, edge_directions, CampaignKind, CombinedLeg, Correction,
    CycleError, EdgeDirection, EdgeFlag, EdgeResult, LegSpec, LegValue, ReplicaValue,
};
pub use replicas::{combine_replicas, ReplicaCombination};
pub use subject::Subject;
