//! `legwork cancel`: cancel queued and running tasks in the scheduler and keep
//! planned ones from being submitted; everything, or a selection.

use super::status::{state_exit, with_campaign, SelectArgs};
use crate::cli::Global;
use std::path::PathBuf;

/// Options of `legwork cancel`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
    /// The campaign's tree is here instead of the file's `root:`.
    #[arg(long, value_name = "DIR")]
    pub root: Option<PathBuf>,
    /// Which tasks (default: every queued, running and planned one).
    #[command(flatten)]
    pub select: SelectArgs,
    /// Seconds to wait for another legwork holding the campaign's lock.
    #[arg(long, default_value_t = 10.0)]
    pub lock_wait: f64,
}

/// Runs `legwork cancel`.
pub fn run(args: Args, global: &Global) -> anyhow::Result<()> {
    with_campaign(&args.file, args.root.clone(), args.lock_wait, global, |c| {
        let r = crate::state::cancel(
            c.state,
            c.sched.as_mut(),
            &args.select.selection(),
            "cancelled with legwork cancel",
        )
        .map_err(state_exit)?;
        if !global.quiet {
            println!(
                "cancelled {} queued or running tasks and {} planned ones; `legwork resume FILE --state cancelled` brings them back",
                r.live, r.planned
            );
        }
        Ok(())
    })
}
