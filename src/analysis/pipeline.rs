//! The campaign pipeline: every leg replica whose windows are all done is read
//! (by [`crate::collect::gather`]), estimated, turned into a [`LegReplica`] and
//! handed to [`assemble`]; every other one is listed as missing. A leg replica
//! whose reading or estimate fails is listed as failed, with the reason, and
//! never stops the others: everything else is computed from what is there.

use super::assemble::{assemble, AssembleError};
use super::info::CampaignInfo;
use super::results::{LegReplica, MissingStatus, MissingWork, Results};
use crate::campaign::Campaign;
use crate::collect::cache::ParseCache;
use crate::collect::experiment::{read_measured, ExperimentError};
use crate::collect::gather::{read_window_set, ReadCounts};
use crate::collect::ReadError;
use crate::estimate::{estimate_leg, EstimateError, EstimateOptions};
use crate::plan::{Plan, TaskIndex, WindowSet};
use rayon::prelude::*;
use std::path::PathBuf;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Mutex;

/// Why a campaign could not be analysed.
#[derive(Debug, thiserror::Error)]
pub enum AnalysisError {
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
    /// The headline estimator gave no value for a leg.
    #[error("{what}: the headline estimator {method} gave no estimate; see the warnings of `legwork estimate` on its windows")]
    NoHeadline {
        /// which leg replica
        what: String,
        /// the headline estimator's name
        method: String,
    },
    /// The measured affinities could not be read.
    #[error(transparent)]
    Experiment(#[from] ExperimentError),
    /// Cycles or network could not be assembled.
    #[error(transparent)]
    Assemble(#[from] AssembleError),
}

/// What an analysis did, besides its results.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Counts {
    /// Leg replicas estimated.
    pub legs: usize,
    /// Leg replicas not finished.
    pub missing: usize,
    /// Leg replicas finished whose reading or estimate failed.
    pub failed: usize,
    /// Window files parsed from text.
    pub parsed: usize,
    /// Window files taken from the parse cache.
    pub cached: usize,
}

/// Analyses every finished leg replica of `campaign` (`done(i)`: task i is
/// done) into results. `progress` is called after each leg replica with
/// (finished, total).
///
/// A leg replica that cannot be read or estimated is listed in
/// [`Results::missing`] as failed, with the reason; the rest goes on.
///
/// # Errors
///
/// No stage to analyse, an unreadable experiment file, or a relative
/// campaign's subject that is not `a+b`.
pub fn analyse_campaign(
    campaign: &Campaign,
    plan: &Plan,
    done: &(dyn Fn(TaskIndex) -> bool + Sync),
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<(Results, Counts), AnalysisError> {
    let dir_of = |t: TaskIndex| campaign.root.join(&plan.tasks[t].dir);
    analyse_campaign_from(campaign, plan, done, &dir_of, progress)
}

/// As [`analyse_campaign`], reading each window's output from the folder
/// `dir_of(task)` gives (its task directory, or where an earlier attempt's
/// output is kept while the task runs again).
///
/// # Errors
///
/// As [`analyse_campaign`].
pub fn analyse_campaign_from(
    campaign: &Campaign,
    plan: &Plan,
    done: &(dyn Fn(TaskIndex) -> bool + Sync),
    dir_of: &(dyn Fn(TaskIndex) -> PathBuf + Sync),
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<(Results, Counts), AnalysisError> {
    let output = analysed_output(campaign)?;
    let (ready, waiting): (Vec<&WindowSet>, Vec<&WindowSet>) = plan
        .windows
        .iter()
        .partition(|set| set.tasks.iter().all(|&t| done(t)));
    let mut missing: Vec<MissingWork> = waiting.iter().map(|set| missing_work(set, done)).collect();
    let cache = ParseCache::for_campaign(campaign, plan);
    let opts = EstimateOptions::from_analysis(&campaign.analysis);
    let read = Mutex::new(ReadCounts::default());
    let finished = AtomicUsize::new(0);
    let outcomes: Vec<Result<LegReplica, MissingWork>> = ready
        .par_iter()
        .map(|set| {
            let paths: Vec<PathBuf> = set.tasks.iter().map(|&t| dir_of(t).join(&output)).collect();
            let outcome = analyse_leg_replica(campaign, set, &cache, &paths, &opts);
            progress(finished.fetch_add(1, Ordering::Relaxed) + 1, ready.len());
            match outcome {
                Ok((entry, counts)) => {
                    *read.lock().expect("no panic while counting") += counts;
                    Ok(entry)
                }
                Err(e) => {
                    tracing::warn!("{e}");
                    Err(failed_work(set, &e))
                }
            }
        })
        .collect();
    let mut legs = Vec::with_capacity(outcomes.len());
    let mut failed = 0;
    for o in outcomes {
        match o {
            Ok(entry) => legs.push(entry),
            Err(m) => {
                failed += 1;
                missing.push(m);
            }
        }
    }
    let measured = match &campaign.experiment {
        Some(p) => read_measured(p, campaign.temperature_k, campaign.unit)?,
        None => Vec::new(),
    };
    let read = read.into_inner().expect("no panic while counting");
    let counts = Counts {
        legs: legs.len(),
        missing: missing.len() - failed,
        failed,
        parsed: read.parsed,
        cached: read.cached,
    };
    let info = CampaignInfo::from_campaign(campaign);
    let results = assemble(&info, legs, measured, missing)?;
    Ok((results, counts))
}

/// The file every window of the analysed stage writes.
fn analysed_output(campaign: &Campaign) -> Result<PathBuf, AnalysisError> {
    let stage = campaign.analysed_stage().ok_or_else(|| {
        AnalysisError::NoOutput(format!(
            "{}: campaign '{}' has no per-window stage to analyse; add one with `per: window` and `output:`",
            campaign.file.display(),
            campaign.name
        ))
    })?;
    stage.output.clone().map(PathBuf::from).ok_or_else(|| {
        AnalysisError::NoOutput(format!(
            "{}: stage '{}' has no `output:`, so legwork does not know which file to read; add e.g. `output: window.tsv`",
            campaign.file.display(),
            stage.name
        ))
    })
}

/// A leg replica with unfinished windows, as the results list it.
fn missing_work(set: &WindowSet, done: &(dyn Fn(TaskIndex) -> bool + Sync)) -> MissingWork {
    let finished = set.tasks.iter().filter(|&&t| done(t)).count();
    MissingWork {
        subject: set.subject.id(),
        leg: set.leg.clone(),
        replica: set.replica,
        windows_done: finished,
        windows_total: set.tasks.len(),
        status: MissingStatus::Unfinished,
        note: format!("{} of {} windows done", finished, set.tasks.len()),
    }
}

/// A finished leg replica whose reading or estimate failed, with the reason
/// (the error without the leg replica's name, which the entry already has).
fn failed_work(set: &WindowSet, e: &AnalysisError) -> MissingWork {
    let note = match e {
        AnalysisError::Read { source, .. } => format!("its windows could not be read: {source}"),
        AnalysisError::Estimate { source, .. } => format!("its estimate failed: {source}"),
        other => other.to_string(),
    };
    MissingWork {
        subject: set.subject.id(),
        leg: set.leg.clone(),
        replica: set.replica,
        windows_done: set.tasks.len(),
        windows_total: set.tasks.len(),
        status: MissingStatus::Failed,
        note,
    }
}

/// One finished leg replica: its windows read, estimated, and turned into its
/// entry (the reader's warnings first, then the estimator's).
fn analyse_leg_replica(
    campaign: &Campaign,
    set: &WindowSet,
    cache: &ParseCache,
    paths: &[PathBuf],
    opts: &EstimateOptions,
) -> Result<(LegReplica, ReadCounts), AnalysisError> {
    let what = format!("{}/{}/r{}", set.subject.id(), set.leg, set.replica);
    let (samples, counts) =
        read_window_set(cache, paths).map_err(|source| AnalysisError::Read {
            what: what.clone(),
            source,
        })?;
    let est = estimate_leg(&samples, opts).map_err(|source| AnalysisError::Estimate {
        what: what.clone(),
        source,
    })?;
    let leg = campaign
        .leg(&set.leg)
        .expect("the plan's legs come from the campaign");
    let headline = campaign.analysis.estimator;
    let mut entry = LegReplica::from_estimate(
        &set.subject.id(),
        &set.leg,
        set.replica,
        f64::from(leg.sign),
        &est,
        headline,
        campaign.unit,
    )
    .ok_or_else(|| AnalysisError::NoHeadline {
        what,
        method: headline.as_str().to_string(),
    })?;
    let mut warnings = samples.warnings;
    warnings.append(&mut entry.warnings);
    entry.warnings = warnings;
    Ok((entry, counts))
}
