//! One problem found in a campaign, with where it is and how to fix it.

use serde::Serialize;
use std::fmt;
use std::path::PathBuf;

/// How bad a problem is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    /// The campaign cannot be used until this is fixed.
    Error,
    /// Legal, but probably not what was meant.
    Warning,
}

/// A problem at a place in a file: the campaign file, a ligand or edge table, or a
/// template.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Diagnostic {
    /// Error or warning.
    pub severity: Severity,
    /// The file the problem is in.
    pub file: PathBuf,
    /// 1-based line (0 when the problem is about the whole file).
    pub line: usize,
    /// 1-based column (0 when unknown).
    pub col: usize,
    /// What is wrong.
    pub message: String,
    /// How to fix it.
    pub hint: Option<String>,
}

impl Diagnostic {
    /// Whether this is an error (as opposed to a warning).
    pub fn is_error(&self) -> bool {
        self.severity == Severity::Error
    }
}

impl fmt::Display for Diagnostic {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let sev = match self.severity {
            Severity::Error => "error",
            Severity::Warning => "warning",
        };
        write!(f, "{}", self.file.display())?;
        if self.line > 0 {
            write!(f, ":{}", self.line)?;
            if self.col > 0 {
                write!(f, ":{}", self.col)?;
            }
        }
        write!(f, ": {sev}: {}", self.message)?;
        if let Some(h) = &self.hint {
            write!(f, "\n  hint: {h}")?;
        }
        Ok(())
    }
}

/// The campaign could not be loaded: every problem found, errors and warnings, in
/// file order.
#[derive(Debug, Clone, thiserror::Error)]
pub struct CampaignError {
    /// Every diagnostic (at least one is an error).
    pub diagnostics: Vec<Diagnostic>,
}

impl CampaignError {
    /// The errors only.
    pub fn errors(&self) -> impl Iterator<Item = &Diagnostic> {
        self.diagnostics.iter().filter(|d| d.is_error())
    }
}

impl fmt::Display for CampaignError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (i, d) in self.diagnostics.iter().enumerate() {
            if i > 0 {
                writeln!(f)?;
            }
            write!(f, "{d}")?;
        }
        let n = self.errors().count();
        write!(
            f,
            "\n{n} error{} in the campaign; nothing was written",
            if n == 1 { "" } else { "s" }
        )
    }
}
