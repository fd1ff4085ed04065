//! `legwork resume`.

use crate::cli::Global;
use std::path::PathBuf;

/// Options of `legwork resume`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
}

/// Runs `legwork resume`.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    anyhow::bail!("legwork resume is not built yet ({})", args.file.display())
}
