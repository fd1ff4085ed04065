//! `legwork expand`.

use crate::cli::Global;
use std::path::PathBuf;

/// Options of `legwork expand`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
}

/// Runs `legwork expand`.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    anyhow::bail!("legwork expand is not built yet ({})", args.file.display())
}
