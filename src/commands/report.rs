//! `legwork report`: re-render the tables and the HTML report from
//! results/summary.json, without recomputing anything.

use crate::campaign::{self, LoadOptions};
use crate::cli::Global;
use crate::exit::Exit;
use crate::report::{self, ReportError};
use std::path::{Path, PathBuf};

/// Options of `legwork report`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file (or its root folder, or a results/summary.json).
    pub file: PathBuf,
    /// The campaign's tree is here instead of the file's `root:`.
    #[arg(long, value_name = "DIR")]
    pub root: Option<PathBuf>,
}

/// The campaign root that holds results/summary.json, from what the user named.
fn root_of(args: &Args) -> anyhow::Result<PathBuf> {
    if let Some(r) = &args.root {
        return Ok(r.clone());
    }
    let f = &args.file;
    if f.is_dir() {
        // The root itself, or its results/ folder.
        if f.join("summary.json").is_file() && !report::summary_path(f).is_file() {
            return Ok(f.parent().map(Path::to_path_buf).unwrap_or_default());
        }
        return Ok(f.clone());
    }
    if f.extension().is_some_and(|e| e == "json") {
        let root = f.parent().and_then(Path::parent).ok_or_else(|| {
            Exit::bad_input(format!(
                "{}: expected a summary.json inside a campaign's results/ folder",
                f.display()
            ))
        })?;
        return Ok(root.to_path_buf());
    }
    let loaded =
        campaign::load(f, &LoadOptions::default()).map_err(|e| Exit::bad_input(e.to_string()))?;
    Ok(loaded.campaign.root)
}

/// Runs `legwork report`.
pub fn run(args: Args, global: &Global) -> anyhow::Result<()> {
    let root = root_of(&args)?;
    let results = report::load(&root).map_err(|e| match e {
        ReportError::Read { .. } => Exit::incomplete(format!(
            "{e}\n(no results yet for the campaign at {})",
            root.display()
        )),
        other => Exit::bad_input(other.to_string()),
    })?;
    let written = report::write_all_locked(&root, &results, std::time::Duration::from_secs(60))?;
    if !global.quiet {
        let stdout = std::io::stdout();
        let mut out = stdout.lock();
        report::print_summary(&results, &mut out)?;
        use std::io::Write;
        writeln!(
            out,
            "\nTables in {}\nReport: {}",
            written.results_dir.display(),
            written.html.display()
        )?;
    }
    Ok(())
}
