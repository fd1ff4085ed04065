//! `legwork watch`.

use crate::cli::Global;
use std::path::PathBuf;

/// Options of `legwork watch`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
}

/// Runs `legwork watch`.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    anyhow::bail!("legwork watch is not built yet ({})", args.file.display())
}
