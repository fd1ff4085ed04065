//! Riding out a scheduler outage. A controller restart (Slurm's slurmctld, a
//! PBS server failover) makes every query fail for a minute or more; a
//! multi-day `watch` must wait it out rather than end. A query that fails
//! transiently (timed out, controller unreachable or busy: see
//! `RunError::is_transient`) is tried again with capped exponential back-off
//! until `scheduler.outage_wait_seconds` have passed on the context's clock;
//! only a failure that lasts longer, or one that is not transient, is returned.

use super::Context;
use crate::scheduler::SchedulerError;
use std::time::Duration;

/// The first wait after a failed query (the runner has already retried it for a
/// few seconds).
const FIRST_WAIT_S: u64 = 30;
/// The longest wait between two tries (common practice, no source: a couple of
/// minutes keeps the load on a recovering controller low and notices its return
/// soon enough).
const MAX_WAIT_S: u64 = 120;

/// Whether an error may be a passing outage.
pub fn transient(e: &SchedulerError) -> bool {
    matches!(e, SchedulerError::Run(r) if r.is_transient())
}

/// Runs `f` (`what` names it in the notices) until it succeeds, fails for a
/// reason that is not an outage, or the outage has lasted
/// `scheduler.outage_wait_seconds`.
pub fn patiently<T>(
    ctx: &Context,
    what: &str,
    mut f: impl FnMut() -> Result<T, SchedulerError>,
) -> Result<T, SchedulerError> {
    let limit = ctx.config.outage_wait_seconds;
    let began = ctx.clock.now();
    let mut wait = FIRST_WAIT_S;
    let mut waited = false;
    loop {
        match f() {
            Ok(v) => {
                if waited {
                    let s = (ctx.clock.now() - began).num_seconds().max(0);
                    tracing::warn!("the scheduler answers again ({what}) after {s} s");
                }
                return Ok(v);
            }
            Err(e) if transient(&e) => {
                let so_far = (ctx.clock.now() - began).num_seconds().max(0) as u64;
                if so_far >= limit {
                    tracing::warn!("the scheduler has not answered ({what}) for {so_far} s (scheduler.outage_wait_seconds = {limit}); giving up");
                    return Err(e);
                }
                let w = wait.min(limit - so_far).max(1);
                tracing::warn!(
                    "waiting for the scheduler: {what} failed ({e}); trying again in {w} s ({so_far} s of at most {limit} s so far, scheduler.outage_wait_seconds)"
                );
                waited = true;
                ctx.clock.sleep(Duration::from_secs(w));
                if super::interrupt::interrupted() {
                    return Err(e);
                }
                wait = (wait * 2).min(MAX_WAIT_S);
            }
            Err(e) => return Err(e),
        }
    }
}
