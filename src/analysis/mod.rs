//! From finished leg samples to results: estimates → legs → edges → network →
//! statistics. Everything the report shows is computed here, once; `collect`
//! only reads (and caches) window outputs and `report` only formats the
//! [`Results`] it is given.
//!
//! - [`analyse_campaign`] is the whole pipeline for a loaded campaign: which leg
//!   replicas are finished, their samples (read by [`crate::collect`]), their
//!   estimates ([`crate::estimate`]), and then [`assemble`].
//! - [`LegReplica::from_estimate`] turns one leg replica's estimate into its
//!   entry (campaign unit, the headline estimator, per-window ⟨dU/dλ⟩, the TI
//!   value the ⟨dU/dλ⟩ plot shows).
//! - [`assemble`] closes every cycle ([`crate::cycle`]), solves the network
//!   ([`crate::network`]), compares with experiment and gathers the warnings.

mod assemble;
mod info;
mod leg;
mod lenient;
mod pipeline;
mod results;

pub use assemble::{assemble, AssembleError, MIN_OVERLAP};
pub use info::{leg_spec, CampaignInfo};
pub use leg::method_name;
pub use pipeline::{analyse_campaign, analyse_campaign_from, AnalysisError, Counts};
pub use results::{
    Convergence, LeftOut, LegReplica, MethodValue, MissingStatus, MissingWork, NoteKind, Results,
    WindowSummary, WorkNote, RESULTS_SCHEMA,
};
