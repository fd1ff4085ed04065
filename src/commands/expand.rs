//! `legwork expand`: lay out the campaign's tree of task directories and scripts.

use crate::cli::Global;
use crate::exit::Exit;
use crate::plan;
use crate::render::{self, RenderError, RenderOptions};
use std::io::IsTerminal;
use std::path::PathBuf;

/// Options of `legwork expand`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
    /// Put the tree here instead of the file's `root:`.
    #[arg(long, value_name = "DIR")]
    pub root: Option<PathBuf>,
    /// Say what would be written; write nothing.
    #[arg(long)]
    pub dry_run: bool,
    /// Overwrite task scripts edited by hand since legwork wrote them.
    #[arg(long)]
    pub force: bool,
}

/// Runs `legwork expand`.
pub fn run(args: Args, global: &Global) -> anyhow::Result<()> {
    let loaded = super::check::load_or_exit(&args.file, args.root, false)?;
    let c = &loaded.campaign;
    let p = plan::expand(c);
    let opts = RenderOptions {
        force: args.force,
        dry_run: args.dry_run,
        progress: !global.quiet && std::io::stderr().is_terminal(),
    };
    let report = match render::write_tree(c, &p, &opts) {
        Ok(r) => r,
        Err(
            e @ (RenderError::Templates(_) | RenderError::Template { .. } | RenderError::Escape(_)),
        ) => return Err(Exit::bad_input(format!("error: {e}\nnothing was written")).into()),
        Err(e) => return Err(e.into()),
    };
    let verb = if report.dry_run {
        "would write"
    } else {
        "wrote"
    };
    if !global.quiet {
        println!(
            "{}: {} {} task scripts, {} unchanged, {} protected, under {}",
            c.name,
            verb,
            report.written,
            report.unchanged,
            report.protected.len(),
            c.root.display()
        );
    }
    if !report.stale.is_empty() {
        eprintln!(
            "note: {} task script(s) written earlier belong to tasks the campaign no longer has; they were left in place, e.g. {}",
            report.stale.len(),
            c.root.join(&report.stale[0]).display()
        );
    }
    if !report.protected.is_empty() {
        eprintln!(
            "warning: {} task script(s) were edited by hand and were not overwritten:",
            report.protected.len()
        );
        for p in report.protected.iter().take(50) {
            eprintln!("  {}", c.root.join(p).display());
        }
        if report.protected.len() > 50 {
            eprintln!("  … and {} more", report.protected.len() - 50);
        }
        eprintln!("  hint: keep your edits in the template instead, or run `legwork expand --force` to overwrite them");
    }
    Ok(())
}
