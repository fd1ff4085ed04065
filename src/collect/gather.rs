//! Collecting a campaign: every leg replica whose windows are all done is read
//! (through the [`ParseCache`]), estimated, and handed to the cycle and network
//! assembly; every other one is listed as missing.

use super::cache::{ParseCache, Source};
use super::{assemble, ReadError, WindowSamples};
use crate::campaign::Campaign;
use crate::collect::experiment::{read_measured, ExperimentError};
use crate::estimate::{estimate_leg, EstimateError, EstimateOptions};
use crate::plan::{Plan, TaskIndex, WindowSet};
use crate::report::{self, CampaignInfo, LegReplica, MissingWork, Results};
use rayon::prelude::*;
use std::path::PathBuf;
use std::sync::atomic::{AtomicUsize, Ordering};

/// Why a campaign could not be collected.
#[derive(Debug, thiserror::Error)]
pub enum CollectError {
    /// The campaign has no per-window stage with an `output:` to analyse.
    #[error("{0}")]
    NoOutput(String),
    /// A finished window could not be read.
    #[error("{what}: {source}")]
    Read {
        /// which leg replica
        what: String,
        /// the reader's error
        source: ReadError,
    },
    /// A leg could not be estimated.
    #[error("{what}: {source}")]
    Estimate {
        /// which leg replica
        what: String,
        /// the estimator's error
        source: EstimateError,
    },
    /// The measured affinities could not be read.
    #[error(transparent)]
    Experiment(#[from] ExperimentError),
    /// Cycles or network could not be assembled.
    #[error(transparent)]
    Assemble(#[from] report::AssembleError),
}

/// What a collect did, besides its results.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct CollectCounts {
    /// Leg replicas estimated.
    pub legs: usize,
    /// Leg replicas not finished.
    pub missing: usize,
    /// Window files parsed from text.
    pub parsed: usize,
    /// Window files taken from the parse cache.
    pub cached: usize,
}

/// Collects every finished leg replica of `campaign` (`done(i)`: task i is done)
/// into results. `progress` is called after each leg replica with (finished,
/// total).
pub fn collect_campaign(
    campaign: &Campaign,
    plan: &Plan,
    done: &(dyn Fn(TaskIndex) -> bool + Sync),
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<(Results, CollectCounts), CollectError> {
    let stage = campaign.analysed_stage().ok_or_else(|| {
        CollectError::NoOutput(format!(
            "{}: campaign '{}' has no per-window stage to analyse; add one with `per: window` and `output:`",
            campaign.file.display(),
            campaign.name
        ))
    })?;
    let output = stage.output.clone().ok_or_else(|| {
        CollectError::NoOutput(format!(
            "{}: stage '{}' has no `output:`, so legwork does not know which file to read; add e.g. `output: window.tsv`",
            campaign.file.display(),
            stage.name
        ))
    })?;
    let cache = ParseCache::for_campaign(campaign, plan);
    let opts = EstimateOptions::from_analysis(&campaign.analysis);
    let (ready, waiting): (Vec<&WindowSet>, Vec<&WindowSet>) = plan
        .windows
        .iter()
        .partition(|set| set.tasks.iter().all(|&t| done(t)));
    let missing: Vec<MissingWork> = waiting
        .iter()
        .map(|set| {
            let finished = set.tasks.iter().filter(|&&t| done(t)).count();
            MissingWork {
                subject: set.subject.id(),
                leg: set.leg.clone(),
                replica: set.replica,
                windows_done: finished,
                windows_total: set.tasks.len(),
                note: format!("{} of {} windows done", finished, set.tasks.len()),
            }
        })
        .collect();
    let parsed = AtomicUsize::new(0);
    let cached = AtomicUsize::new(0);
    let finished = AtomicUsize::new(0);
    let legs: Vec<LegReplica> = ready
        .par_iter()
        .map(|set| {
            let what = format!("{}/{}/r{}", set.subject.id(), set.leg, set.replica);
            let windows: Vec<WindowSamples> = set
                .tasks
                .iter()
                .map(|&t| {
                    let path: PathBuf = campaign.root.join(&plan.tasks[t].dir).join(&output);
                    let (w, source) = cache.read(&path)?;
                    match source {
                        Source::Cached => cached.fetch_add(1, Ordering::Relaxed),
                        Source::Parsed => parsed.fetch_add(1, Ordering::Relaxed),
                    };
                    Ok(w)
                })
                .collect::<Result<_, ReadError>>()
                .map_err(|source| CollectError::Read {
                    what: what.clone(),
                    source,
                })?;
            let samples = assemble(windows).map_err(|source| CollectError::Read {
                what: what.clone(),
                source,
            })?;
            let est = estimate_leg(&samples, &opts).map_err(|source| CollectError::Estimate {
                what: what.clone(),
                source,
            })?;
            let leg = campaign
                .leg(&set.leg)
                .expect("the plan's legs come from the campaign");
            let mut entry = LegReplica::from_estimate(
                &set.subject.id(),
                &set.leg,
                set.replica,
                f64::from(leg.sign),
                &est,
                campaign.analysis.estimator,
                campaign.unit,
            )
            .ok_or_else(|| CollectError::NoOutput(format!(
                "{what}: the headline estimator {} gave no estimate; see the warnings of `legwork estimate` on its windows",
                campaign.analysis.estimator.as_str()
            )))?;
            let mut warnings = samples.warnings;
            warnings.append(&mut entry.warnings);
            entry.warnings = warnings;
            progress(finished.fetch_add(1, Ordering::Relaxed) + 1, ready.len());
            Ok(entry)
        })
        .collect::<Result<_, CollectError>>()?;
    let measured = match &campaign.experiment {
        Some(p) => read_measured(p, campaign.temperature_k, campaign.unit)?,
        None => Vec::new(),
    };
    let counts = CollectCounts {
        legs: legs.len(),
        missing: missing.len(),
        parsed: parsed.into_inner(),
        cached: cached.into_inner(),
    };
    let info = CampaignInfo::from_campaign(campaign);
    let results = report::assemble(&info, legs, measured, missing)?;
    Ok((results, counts))
}
