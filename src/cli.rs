//! The command line: global options and one subcommand per verb. Each verb's own
//! options live beside its implementation in `src/commands/`.

use crate::commands;
use clap::{Parser, Subcommand};

/// Runs alchemical free-energy campaigns on batch clusters.
#[derive(Debug, Parser)]
#[command(
    name = "legwork",
    version,
    about,
    long_about = None,
    propagate_version = true,
    disable_help_subcommand = true
)]
pub struct Cli {
    /// Options every verb takes.
    #[command(flatten)]
    pub global: Global,
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// Options every verb takes.
#[derive(Debug, Clone, clap::Args)]
pub struct Global {
    /// More log output (-v: debug, -vv: trace). Logs go to standard error.
    #[arg(short, long, global = true, action = clap::ArgAction::Count)]
    pub verbose: u8,
    /// Only errors; no progress bars.
    #[arg(short, long, global = true, conflicts_with = "verbose")]
    pub quiet: bool,
}

/// The verbs.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Scaffold a new campaign folder from the built-in example.
    New(commands::new::Args),
    /// Validate a campaign file and summarise what it would run.
    Check(commands::check::Args),
    /// Lay out the campaign's tree of task directories and scripts.
    Expand(commands::expand::Args),
    /// Submit the campaign's ready tasks to its scheduler.
    Submit(commands::submit::Args),
    /// Show what every task is doing.
    Status(commands::status::Args),
    /// Follow the campaign until everything is done or nothing can progress.
    Watch(commands::watch::Args),
    /// Resubmit failed and lost tasks.
    Resume(commands::resume::Args),
    /// Cancel queued and running tasks.
    Cancel(commands::cancel::Args),
    /// Run finished tasks again on purpose (outdated ones, an edge, a leg, a window).
    Rerun(commands::rerun::Args),
    /// Ask finished windows for more frames; they continue from their checkpoints.
    Extend(commands::extend::Args),
    /// Read finished windows and estimate every leg, edge and ligand.
    Collect(commands::collect::Args),
    /// Render the tables and the HTML report from collected results.
    Report(commands::report::Args),
    /// Estimate one leg's free energy from its window tables.
    Estimate(commands::estimate::Args),
    /// Propose λ schedules, edges or extra sampling from pilots and results (predictions).
    Propose(commands::propose::Args),
    /// Run a leg's reader on sample output files and show what it understood.
    TryReader(commands::try_reader::Args),
    /// check, expand, submit, watch, collect and report in one go.
    Run(commands::run::Args),
    /// Print a shell completion script.
    Completions(commands::completions::Args),
    /// Print the man pages (roff): the main page, one verb's, or all into a folder.
    Man(commands::man::Args),
    /// Internal: the local executor for one campaign (started by legwork itself,
    /// detached; not for users).
    #[command(hide = true, name = "local-executor")]
    LocalExecutor(commands::submit::ExecutorArgs),
}
