//! `legwork expand`: lay out the campaign's tree of task directories and scripts.

use crate::campaign::Campaign;
use crate::cli::Global;
use crate::exit::Exit;
use crate::plan::{self, Plan};
use crate::render::{self, RenderError, RenderOptions, TreeReport};
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
    let mut p = plan::expand(c);
    crate::state::life::apply_extensions(
        &mut p,
        &crate::state::life::load_extensions(&c.root)
            .map_err(|e| Exit::bad_input(e.to_string()))?,
    );
    lay_out(c, &p, args.force, args.dry_run, global)?;
    Ok(())
}

/// Renders the tree of `plan` (the one place the verbs that lay out a tree do it),
/// prints what was written and warns about task scripts edited by hand.
pub fn lay_out(
    c: &Campaign,
    p: &Plan,
    force: bool,
    dry_run: bool,
    global: &Global,
) -> anyhow::Result<TreeReport> {
    let opts = RenderOptions { force, dry_run };
    let bar = Bar {
        show: !global.quiet && std::io::stderr().is_terminal(),
        current: std::sync::Mutex::new(None),
    };
    let report = match render::write_tree_with(c, p, &opts, &bar) {
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
    Ok(report)
}

/// The tree writer's progress as a bar on standard error, for phases of at
/// least 200 tasks (shorter ones finish before a bar would be read).
struct Bar {
    show: bool,
    current: std::sync::Mutex<Option<indicatif::ProgressBar>>,
}

impl render::Progress for Bar {
    fn begin(&self, phase: &'static str, total: usize) {
        if !self.show || total < 200 {
            return;
        }
        let pb = indicatif::ProgressBar::new(total as u64);
        pb.set_style(
            indicatif::ProgressStyle::with_template("{msg:>9} [{bar:40}] {pos}/{len} {eta}")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar())
                .progress_chars("=> "),
        );
        pb.set_message(phase);
        *self.current.lock().unwrap_or_else(|e| e.into_inner()) = Some(pb);
    }

    fn advance(&self, n: usize) {
        if let Some(pb) = &*self.current.lock().unwrap_or_else(|e| e.into_inner()) {
            pb.inc(n as u64);
        }
    }

    fn end(&self) {
        if let Some(pb) = self
            .current
            .lock()
            .unwrap_or_else(|e| e.into_inner())
            .take()
        {
            pb.finish_and_clear();
        }
    }
}
