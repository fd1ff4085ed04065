//! `legwork extend`: ask finished windows of the analysed stage for more
//! frames (`--by N` more, or `--to N` in all). They become *short* and continue
//! from their checkpoints, one more attempt each; their current output is
//! copied to `previous/attempt-N/` first, and `collect` uses it until they
//! finish. The targets are kept in `.legwork/extensions.json` and only ever
//! raise what the campaign file asks.

use super::status::{state_exit, with_loaded, SelectArgs};
use crate::cli::Global;
use crate::exit::Exit;
use crate::state::TaskState;
use std::collections::BTreeMap;
use std::path::PathBuf;

/// Options of `legwork extend`.
#[derive(Debug, clap::Args)]
#[command(group(clap::ArgGroup::new("amount").required(true).args(["by", "to"])))]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
    /// The campaign's tree is here instead of the file's `root:`.
    #[arg(long, value_name = "DIR")]
    pub root: Option<PathBuf>,
    /// This many frames more than each window must hold now.
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u64).range(1..))]
    pub by: Option<u64>,
    /// This many frames in all (windows that already must hold as many are left alone).
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u64).range(1..))]
    pub to: Option<u64>,
    /// Which windows (default: every finished window of the analysed stage).
    #[command(flatten)]
    pub select: SelectArgs,
    /// Seconds to wait for another legwork holding the campaign's lock.
    #[arg(long, default_value_t = 10.0)]
    pub lock_wait: f64,
}

/// Runs `legwork extend`.
pub fn run(args: Args, global: &Global) -> anyhow::Result<()> {
    let loaded = super::watch::load(&args.file, args.root.clone())?;
    let Some(stage) = loaded.plan.analysed_stage.clone() else {
        return Err(Exit::bad_input(format!(
            "{}: the campaign has no per-window stage with an output to extend\n  hint: give a per-window stage `output:` and `frames:`",
            args.file.display()
        ))
        .into());
    };
    let mut sel = args.select.selection();
    sel.stages = vec![stage.clone()];
    with_loaded(loaded, args.lock_wait, global, |c| {
        crate::state::poll(c.state, c.sched.as_mut(), &c.ctx).map_err(state_exit)?;
        let plan = c.state.plan();
        let mut targets = BTreeMap::new();
        for (ti, t) in plan.tasks.iter().enumerate() {
            if c.state.state(ti) != TaskState::Done || !sel.matches(t, TaskState::Done) {
                continue;
            }
            let now = t.frames.unwrap_or(0);
            let want = match (args.by, args.to) {
                (Some(n), _) => now.saturating_add(n),
                (None, Some(n)) => n,
                (None, None) => unreachable!("clap requires one"),
            };
            if want > now {
                targets.insert(t.id.clone(), want);
            }
        }
        if targets.is_empty() {
            return Err(Exit::incomplete(format!(
                "no finished window of stage {stage} in the selection needs more frames; nothing was resubmitted\n  hint: `legwork status {}` shows what is done; `--to N` must exceed the frames asked now",
                args.file.display()
            ))
            .into());
        }
        crate::state::life::set_targets(c.state, &targets).map_err(state_exit)?;
        let r = crate::state::life::extend_short(c.state, c.sched.as_mut(), &c.ctx, &sel, true)
            .map_err(state_exit)?;
        if !global.quiet {
            println!(
                "extending {} windows ({} from a checkpoint; their current output copied to previous/attempt-N/ and used by collect until they finish); submitted {} tasks in {} jobs",
                r.tasks.len(),
                r.restarted,
                r.submitted.tasks,
                r.submitted.submissions
            );
        }
        Ok(())
    })
}
