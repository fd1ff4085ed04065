//! `legwork run`.

use crate::cli::Global;
use std::path::PathBuf;

/// Options of `legwork run`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
}

/// Runs `legwork run`.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    anyhow::bail!("legwork run is not built yet ({})", args.file.display())
}
