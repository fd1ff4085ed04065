//! `legwork estimate`.

use crate::cli::Global;
use std::path::PathBuf;

/// Options of `legwork estimate`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
}

/// Runs `legwork estimate`.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    anyhow::bail!(
        "legwork estimate is not built yet ({})",
        args.file.display()
    )
}
