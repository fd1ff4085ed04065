//! `legwork man`: the man page in roff, on stdout (`legwork man > legwork.1`).

use crate::cli::{Cli, Global};
use clap::CommandFactory;

/// Options of `legwork man`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Prints the man page.
pub fn run(_args: Args, _global: &Global) -> anyhow::Result<()> {
    let man = clap_mangen::Man::new(Cli::command());
    man.render(&mut std::io::stdout())?;
    Ok(())
}
