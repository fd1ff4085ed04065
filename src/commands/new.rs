//! `legwork new`.

use crate::cli::Global;
use std::path::PathBuf;

/// Options of `legwork new`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
}

/// Runs `legwork new`.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    anyhow::bail!("legwork new is not built yet ({})", args.file.display())
}
