//! Formatting results: tables (CSV, JSON), SVG plots, the HTML report and the
//! terminal summary. Nothing here computes a result: everything shown comes from
//! the [`Results`] that [`crate::analysis`] produced.
//!
//! [`write_all`] writes `results/*.csv`, `results/summary.json` and
//! `report/index.html` under the campaign root, [`load`] reads summary.json back
//! for re-rendering, and [`print_summary`] writes the terminal summary.
//! [`overlap_label`] is the one place an overlap value is spelled.

mod cost_section;
mod format;
pub mod html;
pub mod plots;
mod summary;
pub mod tables;

pub use format::{overlap_label, overlap_text, OVERLAP_DOT, OVERLAP_FLOOR};
pub use summary::print_summary;

use crate::analysis::{Results, RESULTS_SCHEMA};

use std::path::{Path, PathBuf};

/// What [`write_all`] wrote.
#[derive(Debug, Clone, PartialEq)]
pub struct Written {
    /// `<root>/results/`.
    pub results_dir: PathBuf,
    /// `<root>/report/index.html`.
    pub html: PathBuf,
    /// Every file written, in order.
    pub files: Vec<PathBuf>,
}

/// Why the report could not be written or read.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    /// The HTML page (or one of its plots) could not be rendered.
    #[error(transparent)]
    Html(#[from] html::HtmlError),
    /// A file could not be written.
    #[error("cannot write {path}: {source}")]
    Write {
        /// The file.
        path: PathBuf,
        /// Why.
        source: std::io::Error,
    },
    /// summary.json could not be read.
    #[error("cannot read {path}: {source}; run `legwork collect` first to produce it")]
    Read {
        /// The file.
        path: PathBuf,
        /// Why.
        source: std::io::Error,
    },
    /// summary.json is not valid.
    #[error("{path}:{line}:{column}: not a legwork results summary: {message}; re-create it with `legwork collect`")]
    Parse {
        /// The file.
        path: PathBuf,
        /// Line.
        line: usize,
        /// Column.
        column: usize,
        /// What serde said.
        message: String,
    },
    /// summary.json has a newer layout.
    #[error("{path}: results layout {found} is not the one this legwork reads ({RESULTS_SCHEMA}); re-create it with `legwork collect`")]
    Schema {
        /// The file.
        path: PathBuf,
        /// The layout version found.
        found: u32,
    },
}

/// `<root>/results/summary.json`.
pub fn summary_path(root: &Path) -> PathBuf {
    root.join("results").join("summary.json")
}

/// Writes every table, summary.json and report/index.html under `root`.
/// Everything is rendered in memory first and each file is replaced atomically
/// (temporary file + rename), so a failure leaves the previous files intact.
pub fn write_all(root: &Path, r: &Results) -> Result<Written, ReportError> {
    let results_dir = root.join("results");
    let report_dir = root.join("report");
    let html_path = report_dir.join("index.html");
    let mut files: Vec<(PathBuf, String)> = vec![
        (results_dir.join("legs.csv"), tables::legs_csv(r)),
        (results_dir.join("edges.csv"), tables::edges_csv(r)),
        (results_dir.join("ligands.csv"), tables::ligands_csv(r)),
        (results_dir.join("cycles.csv"), tables::cycles_csv(r)),
        (results_dir.join("missing.csv"), tables::missing_csv(r)),
        (results_dir.join("summary.json"), tables::summary_json(r)),
        (html_path.clone(), html::render(r)?),
    ];
    if let Some(c) = &r.costs {
        files.push((results_dir.join("costs.csv"), crate::state::costs::csv(c)));
    }
    // Every temporary file first; only when all are written are they renamed
    // into place, so a failure (disk full, a folder that cannot be made) leaves
    // the previous results untouched.
    let mut staged = Vec::with_capacity(files.len());
    for (path, text) in &files {
        // A failure drops (and so removes) the files staged before it.
        staged.push(stage(path, text)?);
    }
    let mut written = Vec::with_capacity(staged.len());
    for st in staged {
        let path = st.target().to_path_buf();
        st.commit().map_err(|source| ReportError::Write {
            path: path.clone(),
            source,
        })?;
        written.push(path);
    }
    Ok(Written {
        results_dir,
        html: html_path,
        files: written,
    })
}

/// [`write_all`] under the results lock (`<root>/.legwork/results-lock/lock`),
/// waiting up to `wait` for another legwork writing them: two collects (or a
/// collect and a report) never interleave their files. This lock is not the
/// campaign's writer lock, so results are written while `watch` or `run` holds
/// the campaign.
pub fn write_all_locked(
    root: &Path,
    r: &Results,
    wait: std::time::Duration,
) -> Result<Written, ReportError> {
    let dir = root.join(".legwork").join("results-lock");
    let _lock =
        crate::state::CampaignLock::acquire(&dir, wait).map_err(|e| ReportError::Write {
            path: dir.join("lock"),
            source: std::io::Error::other(e.to_string()),
        })?;
    write_all(root, r)
}

/// Writes `text` next to `path` under a temporary name ([`crate::fsutil::stage`]).
fn stage(path: &Path, text: &str) -> Result<crate::fsutil::Staged, ReportError> {
    crate::fsutil::stage(path, crate::fsutil::DATA_MODE, |w| {
        w.write_all(text.as_bytes())
    })
    .map_err(|source| ReportError::Write {
        path: path.to_path_buf(),
        source,
    })
}

/// Reads `<root>/results/summary.json` back.
pub fn load(root: &Path) -> Result<Results, ReportError> {
    load_file(&summary_path(root))
}

/// Reads a summary.json at `path`.
pub fn load_file(path: &Path) -> Result<Results, ReportError> {
    let text = std::fs::read_to_string(path).map_err(|source| ReportError::Read {
        path: path.to_path_buf(),
        source,
    })?;
    let probe: serde_json::Value = serde_json::from_str(&text).map_err(|e| ReportError::Parse {
        path: path.to_path_buf(),
        line: e.line(),
        column: e.column(),
        message: e.to_string(),
    })?;
    if let Some(found) = probe.get("schema").and_then(|s| s.as_u64()) {
        if found as u32 != RESULTS_SCHEMA {
            return Err(ReportError::Schema {
                path: path.to_path_buf(),
                found: found as u32,
            });
        }
    }
    serde_json::from_str(&text).map_err(|e| ReportError::Parse {
        path: path.to_path_buf(),
        line: e.line(),
        column: e.column(),
        message: e.to_string(),
    })
}
