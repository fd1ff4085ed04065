//! `legwork rerun`: run finished tasks again on purpose — the outdated ones, or
//! any selection — each once more (attempt + 1), its previous output moved to
//! `previous/attempt-N/` in its directory first, never deleted.

use super::status::{state_exit, with_loaded, SelectArgs};
use crate::cli::Global;
use crate::exit::Exit;
use std::path::PathBuf;

/// Options of `legwork rerun`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
    /// The campaign's tree is here instead of the file's `root:`.
    #[arg(long, value_name = "DIR")]
    pub root: Option<PathBuf>,
    /// Only the done tasks whose script has changed since they ran (see
    /// `legwork status`).
    #[arg(long)]
    pub outdated: bool,
    /// Which done tasks (with `--outdated`, which of the outdated ones).
    #[command(flatten)]
    pub select: SelectArgs,
    /// Seconds to wait for another legwork holding the campaign's lock.
    #[arg(long, default_value_t = 10.0)]
    pub lock_wait: f64,
}

/// Runs `legwork rerun`.
pub fn run(args: Args, global: &Global) -> anyhow::Result<()> {
    let sel = args.select.selection();
    if !args.outdated && sel.is_everything() {
        return Err(Exit::bad_input(
            "legwork rerun: say which finished tasks to run again\n  hint: `--outdated` for those whose script changed, or a selection such as `--edge A+B`, `--leg NAME`, `--window 3` (the same options as `resume`)",
        )
        .into());
    }
    let loaded = super::watch::load(&args.file, args.root.clone())?;
    let campaign = loaded.campaign.clone();
    with_loaded(loaded, args.lock_wait, global, |c| {
        let stale = if args.outdated {
            Some(super::life::outdated(&campaign, c.state))
        } else {
            None
        };
        let only = stale.as_ref().map(|s| move |ti: usize| s.contains(&ti));
        let only_ref: Option<&dyn Fn(usize) -> bool> = only.as_ref().map(|f| f as _);
        let r = crate::state::life::rerun(c.state, c.sched.as_mut(), &c.ctx, &sel, only_ref)
            .map_err(state_exit)?;
        if r.tasks.is_empty() {
            return Err(Exit::incomplete(format!(
                "no finished task matches{}; nothing was resubmitted\n  hint: `legwork status {}` lists what is done and what is outdated",
                if args.outdated { " and is outdated" } else { "" },
                args.file.display()
            ))
            .into());
        }
        if !global.quiet {
            println!(
                "running {} finished tasks again (previous outputs kept in each task's previous/attempt-N/, e.g. {}); submitted {} tasks in {} jobs",
                r.tasks.len(),
                r.kept[0].display(),
                r.submitted.tasks,
                r.submitted.submissions
            );
        }
        Ok(())
    })
}
