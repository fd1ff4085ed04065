//! The numeric core of legwork: samples in, values out.
//!
//! - [`estimate`]: free-energy estimators for one leg (TI, EXP, BAR, MBAR), the
//!   overlap matrix, statistical inefficiency, equilibration detection and
//!   decorrelation.
//! - [`cycle`]: a leg's replicas combined, an edge's signed legs and corrections.
//! - [`network`]: per-ligand ΔG by weighted least squares, cycle closure and the
//!   statistics against measured values.
//! - [`design`]: where the next compute should go: λ schedules from the
//!   thermodynamic length, A-optimal allocation of frames, edges chosen by
//!   expected variance (predictions, not measurements).
//! - [`units`]: energy units and the gas constant.
//! - [`samples`]: the per-window and per-leg samples the estimators take.
//!
//! Nothing here reads or writes files, knows of campaigns, plans or schedulers, or
//! speaks of the command line; the compiler keeps it so (this crate depends on
//! none of them).

#![warn(missing_docs)]

pub mod cycle;
pub mod design;
pub mod estimate;
pub mod network;
pub mod samples;
pub mod units;
