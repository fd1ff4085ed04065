//! `legwork status`.

use crate::cli::Global;
use std::path::PathBuf;

/// Options of `legwork status`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
}

/// Runs `legwork status`.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    anyhow::bail!("legwork status is not built yet ({})", args.file.display())
}
