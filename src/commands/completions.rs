//! `legwork completions SHELL`: a completion script for the shell, on stdout.

use crate::cli::{Cli, Global};
use clap::CommandFactory;

/// Options of `legwork completions`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The shell to complete for.
    #[arg(value_enum)]
    pub shell: clap_complete::Shell,
}

/// Prints the completion script.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    let mut cmd = Cli::command();
    clap_complete::generate(args.shell, &mut cmd, "legwork", &mut std::io::stdout());
    Ok(())
}
