//! `legwork report`.

use crate::cli::Global;
use std::path::PathBuf;

/// Options of `legwork report`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
}

/// Runs `legwork report`.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    anyhow::bail!("legwork report is not built yet ({})", args.file.display())
}
