//! `legwork collect`.

use crate::cli::Global;
use std::path::PathBuf;

/// Options of `legwork collect`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
}

/// Runs `legwork collect`.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    anyhow::bail!("legwork collect is not built yet ({})", args.file.display())
}
