//! `legwork check`.

use crate::cli::Global;
use std::path::PathBuf;

/// Options of `legwork check`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
}

/// Runs `legwork check`.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    anyhow::bail!("legwork check is not built yet ({})", args.file.display())
}
