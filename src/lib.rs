//! legwork runs alchemical free-energy campaigns on batch clusters: one declarative
//! campaign file in; a tree of task scripts, scheduler jobs, tracked state, leg
//! free energies, edge ΔΔG and a reconciled network out.
//!
//! The numeric core ([`estimate`], [`cycle`], [`network`], [`units`]) is its own
//! crate, `legwork-numerics` (folder `numerics/`): it does no I/O and can be used as
//! a library alone. It is re-exported here under the same names.

#![warn(missing_docs)]

pub mod analysis;
pub mod campaign;
pub mod cli;
pub mod collect;
pub mod commands;
pub mod demo;
pub mod exit;
pub mod fsutil;
pub mod logging;
pub mod plan;
pub mod render;
pub mod report;
pub mod scheduler;
pub mod state;
pub mod text;

pub use legwork_numerics::{cycle, estimate, network, units};
