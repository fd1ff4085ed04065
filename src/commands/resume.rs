//! `legwork resume`: resubmit failed and lost tasks (up to
//! `scheduler.max_attempts`), restarting from checkpoints and with a longer
//! walltime after a walltime kill; never touches queued or running tasks.

use super::status::{state_exit, with_campaign, SelectArgs};
use crate::cli::Global;
use crate::exit::Exit;
use crate::state::{CampaignState, Context, Selection, TaskState};
use std::path::PathBuf;

/// Options of `legwork resume`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
    /// The campaign's tree is here instead of the file's `root:`.
    #[arg(long, value_name = "DIR")]
    pub root: Option<PathBuf>,
    /// Which tasks (default: every failed and lost one; add `--state cancelled`
    /// to rerun cancelled ones too).
    #[command(flatten)]
    pub select: SelectArgs,
    /// Allow this many attempts beyond those the selected tasks already used
    /// (at least scheduler.max_attempts), for tasks that used them all (after
    /// fixing what made them fail).
    #[arg(long, value_name = "N", default_value_t = 0)]
    pub extra_attempts: u32,
    /// Seconds to wait for another legwork holding the campaign's lock.
    #[arg(long, default_value_t = 10.0)]
    pub lock_wait: f64,
}

/// Runs `legwork resume`.
pub fn run(args: Args, global: &Global) -> anyhow::Result<()> {
    with_campaign(&args.file, args.root.clone(), args.lock_wait, global, |c| {
        let sel = args.select.selection();
        let mut config = c.ctx.config.clone();
        config.max_attempts =
            attempt_limit(c.state, &sel, config.max_attempts, args.extra_attempts);
        let ctx = Context {
            config: &config,
            batch_template: c.ctx.batch_template.clone(),
            ..c.ctx
        };
        // Short windows (asked for more frames) continue from their checkpoints;
        // resume submits them with the rest.
        let short = crate::state::life::extend_short(c.state, c.sched.as_mut(), &ctx, &sel, false)
            .map_err(state_exit)?;
        let r = crate::state::resume(c.state, c.sched.as_mut(), &ctx, &sel).map_err(state_exit)?;
        if !global.quiet && !short.tasks.is_empty() {
            println!(
                "extending {} short windows ({} from a checkpoint; their current output kept in previous/attempt-N/)",
                short.tasks.len(),
                short.restarted
            );
        }
        let v = &r.revalidated;
        if !global.quiet && v.now_done.len() + v.still_unreadable.len() + v.now_short.len() > 0 {
            println!(
                "re-read {} unreadable outputs without running anything: {} now read (done), {} still unreadable, {} read but short (resubmitted)",
                v.now_done.len() + v.still_unreadable.len() + v.now_short.len(),
                v.now_done.len(),
                v.still_unreadable.len(),
                v.now_short.len()
            );
        }
        if !v.still_unreadable.is_empty() {
            eprintln!(
                "{} tasks' output still does not read (first: {}); `legwork status FILE` shows why; fix the reader, then `legwork resume FILE` again",
                v.still_unreadable.len(),
                v.still_unreadable[0]
            );
        }
        if !global.quiet {
            println!(
                "resubmitting {} tasks ({} from a checkpoint, {} with a longer walltime); submitted {} tasks in {} jobs",
                r.requeued.len(),
                r.restarted,
                r.walltime_raised,
                r.submitted.tasks,
                r.submitted.submissions
            );
            if r.submitted.held_back > 0 {
                println!(
                    "{} more wait for room under scheduler.max_queued; `legwork watch FILE` submits them as the queue drains",
                    r.submitted.held_back
                );
            }
        }
        if !r.exhausted.is_empty() {
            let shown: Vec<&str> = r.exhausted.iter().take(5).map(String::as_str).collect();
            let msg = format!(
                "{} tasks used all {} attempts (scheduler.max_attempts) and were not resubmitted: {}{}; `legwork status FILE` shows why; after fixing the cause, `legwork resume FILE --extra-attempts N` allows N more",
                r.exhausted.len(),
                config.max_attempts,
                shown.join(", "),
                if r.exhausted.len() > 5 { ", …" } else { "" }
            );
            if r.requeued.is_empty() {
                return Err(Exit::incomplete(msg).into());
            }
            eprintln!("{msg}");
        }
        Ok(())
    })
}

/// The attempt limit of this resume: `max_attempts`, or with `extra` > 0 the
/// most attempts any selected resumable task has used (at least `max_attempts`)
/// plus `extra`, so that `--extra-attempts N` grants N attempts beyond those
/// already used, also after an earlier `--extra-attempts`. One resume submits at
/// most one attempt per task, so a limit above a task's own count never lets
/// it run twice.
fn attempt_limit(state: &CampaignState, sel: &Selection, max_attempts: u32, extra: u32) -> u32 {
    if extra == 0 {
        return max_attempts;
    }
    let used = (0..state.plan().tasks.len())
        .filter(|&i| {
            let st = state.state(i);
            matches!(
                st,
                TaskState::Failed | TaskState::Lost | TaskState::Cancelled
            ) && sel.matches(&state.plan().tasks[i], st)
        })
        .map(|i| state.record(i).attempt)
        .max()
        .unwrap_or(0);
    used.max(max_attempts).saturating_add(extra)
}
