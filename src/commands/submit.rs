//! `legwork submit`: lay out the tree (idempotently), submit every ready task of the campaign to
//! its scheduler (within `scheduler.max_queued`) and return. With the local
//! executor, a detached executor process runs the tasks (see
//! [`crate::scheduler::local`]); `legwork watch` follows them and submits more as
//! the queue drains.

use crate::cli::Global;
use std::path::PathBuf;

/// Options of `legwork submit`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
    /// The campaign's tree is here instead of the file's `root:`.
    #[arg(long, value_name = "DIR")]
    pub root: Option<PathBuf>,
    /// Seconds to wait for another legwork holding the campaign's lock.
    #[arg(long, default_value_t = 10.0)]
    pub lock_wait: f64,
}

/// Options of the hidden `legwork local-executor` (started by the local
/// scheduler, detached).
#[derive(Debug, clap::Args)]
pub struct ExecutorArgs {
    /// The campaign root whose `.legwork/local/` queue to run.
    pub root: PathBuf,
    /// Tasks at once (default: the machine's cores).
    #[arg(long)]
    pub max_parallel: Option<usize>,
}

/// Runs the local executor until its queue is empty.
pub fn run_executor(args: ExecutorArgs) -> anyhow::Result<()> {
    let n = args.max_parallel.unwrap_or_else(|| {
        std::thread::available_parallelism()
            .map(|n| n.get())
            .unwrap_or(1)
    });
    crate::scheduler::local_executor::run(&args.root, n)?;
    Ok(())
}

/// Runs `legwork submit`.
pub fn run(args: Args, global: &Global) -> anyhow::Result<()> {
    let file = args.file;
    // The tree first (idempotent: unchanged scripts are left alone, hand-edited
    // ones protected), so `submit` works on a fresh campaign.
    let loaded = super::watch::load(&file, args.root.clone())?;
    super::expand::lay_out(&loaded.campaign, &loaded.plan, false, false, global)?;
    super::status::with_loaded(loaded, args.lock_wait, global, |c| {
        let s = crate::state::submit_ready(
            c.state,
            c.sched.as_mut(),
            &c.ctx,
            &crate::state::Selection::all(),
        )?;
        if !global.quiet {
            println!(
                "submitted {} tasks in {} jobs{}",
                s.tasks,
                s.submissions,
                if s.held_back > 0 {
                    format!("; {} more wait for room under scheduler.max_queued (run `legwork watch` to submit them as the queue drains)", s.held_back)
                } else {
                    String::new()
                }
            );
        }
        Ok(())
    })
}
