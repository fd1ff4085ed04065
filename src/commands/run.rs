//! `legwork run`: check → expand → submit → watch (resuming failed and lost
//! tasks while attempts remain) → collect → report, in one go on the campaign's
//! scheduler. Safe to run again: finished tasks are kept, unchanged scripts are
//! not rewritten, and a rerun picks up where the last one stopped.

use super::collect::{collect_with_state, print_outcome};
use super::status::{state_exit, table, with_loaded};
use crate::campaign::Campaign;
use crate::cli::Global;
use crate::exit::Exit;
use crate::report;
use crate::scheduler::{Scheduler, SchedulerKind};
use crate::state::{self, interrupt, CampaignState, Context, Selection, Summary, TaskState};
use std::path::PathBuf;
use std::sync::atomic::AtomicBool;
use std::time::Duration;

/// Options of `legwork run`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
    /// Put the tree here instead of the file's `root:`.
    #[arg(long, value_name = "DIR")]
    pub root: Option<PathBuf>,
    /// Stop when tasks fail instead of resubmitting them (up to
    /// scheduler.max_attempts) before collecting.
    #[arg(long)]
    pub no_resume: bool,
    /// Seconds between polls (default: the campaign's scheduler.poll_seconds).
    #[arg(long)]
    pub interval: Option<f64>,
    /// Seconds to wait for another legwork holding the campaign's lock.
    #[arg(long, default_value_t = 10.0)]
    pub lock_wait: f64,
    /// Off a terminal, print a progress record at most every this many seconds
    /// (when something changed). On a terminal, bars are drawn instead.
    #[arg(long, value_name = "SECONDS", default_value_t = super::progress::DEFAULT_EVERY_S)]
    pub progress_every: f64,
}

/// Runs `legwork run`.
pub fn run(args: Args, global: &Global) -> anyhow::Result<()> {
    let stop = interrupt::install();
    let loaded = super::watch::load(&args.file, args.root.clone())?;
    super::expand::lay_out(&loaded.campaign, &loaded.plan, false, false, global)?;
    let campaign = loaded.campaign.clone();
    with_loaded(loaded, args.lock_wait, global, |c| {
        drive(
            &args,
            &campaign,
            c.state,
            c.sched.as_mut(),
            &c.ctx,
            stop,
            global,
        )
    })
}

/// Watches, resumes while attempts remain, collects and reports.
fn drive(
    args: &Args,
    campaign: &Campaign,
    state: &mut CampaignState,
    sched: &mut dyn Scheduler,
    ctx: &Context,
    stop: &AtomicBool,
    global: &Global,
) -> anyhow::Result<()> {
    let interval = Duration::from_secs_f64(
        args.interval
            .unwrap_or(campaign.scheduler.poll_seconds)
            .max(0.05),
    );
    let kind = sched.kind();
    if !global.quiet {
        eprintln!(
            "{}: {} tasks on the {} scheduler; tree {}",
            campaign.name,
            state.plan().tasks.len(),
            kind.display_name(),
            campaign.root.display()
        );
    }

    let bars = super::progress::Follow::new(
        global.quiet,
        Duration::from_secs_f64(args.progress_every.max(0.0)),
    )
    .with_costs(super::progress::cost_source(state.root(), state.plan()));
    // Windows asked for more frames since they ran continue from their
    // checkpoints (watch submits them); nothing else that is done runs again.
    let short = super::life::extend_short_for_run(state, sched, ctx)?;
    if short > 0 && !global.quiet {
        eprintln!(
            "{}: extending {short} short windows from their checkpoints",
            campaign.name
        );
    }
    bars.update(&state.summary());
    let summary = loop {
        let settled =
            state::watch_until_settled(state, sched, ctx, interval, stop, &mut |s| bars.update(s))
                .map_err(state_exit)?;
        if settled.interrupted {
            bars.finish();
            return Err(interrupted(state, sched, kind, args)?);
        }
        if settled.summary.all_done() || args.no_resume {
            break settled.summary;
        }
        let r = state::resume(state, sched, ctx, &Selection::all()).map_err(state_exit)?;
        if r.requeued.is_empty() {
            break Summary::with_limit(state, campaign.scheduler.max_attempts);
        }
        bars.resubmitted(r.requeued.len());
        tracing::info!(
            "resubmitted {} failed or lost tasks ({} from a checkpoint)",
            r.requeued.len(),
            r.restarted
        );
    };
    bars.finish();
    if !global.quiet && !summary.all_done() {
        eprint!("{}", table(&summary, kind, false));
    }

    let (results, counts) = collect_with_state(campaign, state, global)?;
    let written = report::write_all_locked(&campaign.root, &results, Duration::from_secs(60))?;
    print_outcome(&results, &counts, &written, global)?;
    if summary.all_done() {
        super::collect::incomplete(&campaign.name, &results, &counts, &target(args))
    } else {
        Err(Exit::incomplete(format!(
            "{} of {} tasks are not done ({} failed, {} lost, {} cancelled); the results above cover what finished. \
             See the reasons with `legwork status {file}`, then `legwork resume {file}` and `legwork collect {file}`",
            summary.total.total() - summary.total.done,
            summary.total.total(),
            summary.total.failed,
            summary.total.lost,
            summary.total.cancelled,
            file = target(args)
        ))
        .into())
    }
}

/// Ctrl-C: with the local executor the tasks stop and are recorded as cancelled;
/// on a cluster the jobs stay queued.
fn interrupted(
    state: &mut CampaignState,
    sched: &mut dyn Scheduler,
    kind: SchedulerKind,
    args: &Args,
) -> anyhow::Result<anyhow::Error> {
    let file = target(args);
    if kind.runs_here() {
        let r = state::cancel(
            state,
            sched,
            &Selection {
                states: vec![TaskState::Queued, TaskState::Running],
                ..Default::default()
            },
            "interrupted (Ctrl-C during legwork run)",
        )
        .map_err(state_exit)?;
        return Ok(Exit::interrupted(format!(
            "interrupted: stopped {} local tasks and recorded them as cancelled; `legwork resume {file} --state cancelled` runs them again, and `legwork run {file}` then carries on",
            r.live
        ))
        .into());
    }
    Ok(Exit::interrupted(format!(
        "interrupted: the jobs carry on in the queue; `legwork run {file}` (or `legwork watch {file}`) follows them again"
    ))
    .into())
}

/// The campaign as the user named it, to repeat in hints (with `--root` if given).
fn target(args: &Args) -> String {
    match &args.root {
        Some(r) => format!("{} --root {}", args.file.display(), r.display()),
        None => args.file.display().to_string(),
    }
}
