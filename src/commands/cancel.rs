//! `legwork cancel`.

use crate::cli::Global;
use std::path::PathBuf;

/// Options of `legwork cancel`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
}

/// Runs `legwork cancel`.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    anyhow::bail!("legwork cancel is not built yet ({})", args.file.display())
}
