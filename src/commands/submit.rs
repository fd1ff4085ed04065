//! `legwork submit`.

use crate::cli::Global;
use std::path::PathBuf;

/// Options of `legwork submit`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
}

/// Runs `legwork submit`.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    anyhow::bail!("legwork submit is not built yet ({})", args.file.display())
}
