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
    #[arg(required_unless_present = "local_executor")]
    pub file: Option<PathBuf>,
    /// The campaign's tree is here instead of the file's `root:`.
    #[arg(long, value_name = "DIR")]
    pub root: Option<PathBuf>,
    /// Seconds to wait for another legwork holding the campaign's lock.
    #[arg(long, default_value_t = 10.0)]
    pub lock_wait: f64,
    /// Internal: run the local executor for the campaign rooted here (started by
    /// legwork itself, detached).
    #[arg(long, hide = true, value_name = "ROOT")]
    pub local_executor: Option<PathBuf>,
    /// Internal: the local executor's concurrency.
    #[arg(long, hide = true, requires = "local_executor")]
    pub max_parallel: Option<usize>,
}

/// Runs `legwork submit`.
pub fn run(args: Args, global: &Global) -> anyhow::Result<()> {
    if let Some(root) = &args.local_executor {
        let n = args.max_parallel.unwrap_or_else(|| {
            std::thread::available_parallelism()
                .map(|n| n.get())
                .unwrap_or(1)
        });
        crate::scheduler::local_executor::run(root, n)?;
        return Ok(());
    }
    let file = args.file.expect("clap requires it");
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
