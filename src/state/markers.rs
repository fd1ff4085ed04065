//! The task markers the wrapper writes in each task directory.

use serde::{Deserialize, Serialize};
use std::path::Path;

/// `.started.json`.
pub const STARTED: &str = ".started.json";
/// `.exited.json`.
pub const EXITED: &str = ".exited.json";
/// `.attempts.jsonl`: every attempt's start marker and exit marker, in order.
pub const HISTORY: &str = ".attempts.jsonl";

/// Written when the task starts.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct Started {
    /// Start time (UTC, RFC 3339).
    pub time: String,
    /// Host it ran on.
    pub host: String,
    /// The scheduler's element id.
    pub job: String,
    /// Attempt number.
    pub attempt: u32,
}

/// Written when the task ends, also after SIGTERM.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct Exited {
    /// End time.
    pub time: String,
    /// Start time.
    #[serde(default)]
    pub started: String,
    /// The scheduler's element id.
    #[serde(default)]
    pub job: String,
    /// Attempt number.
    pub attempt: u32,
    /// Exit code of `bash task.sh`.
    pub code: Option<i32>,
    /// Signal name (`TERM`, `KILL`, …) if one ended it or was received.
    pub signal: Option<String>,
}

impl Exited {
    /// Seconds between start and end, if both times parse.
    pub fn elapsed_s(&self) -> Option<f64> {
        let a = chrono::DateTime::parse_from_rfc3339(&self.started).ok()?;
        let b = chrono::DateTime::parse_from_rfc3339(&self.time).ok()?;
        Some((b - a).num_milliseconds() as f64 / 1000.0)
    }
}

fn read<T: serde::de::DeserializeOwned>(path: &Path) -> Option<T> {
    serde_json::from_slice(&std::fs::read(path).ok()?).ok()
}

/// The start marker in `dir` if it belongs to `attempt`.
pub fn started(dir: &Path, attempt: u32) -> Option<Started> {
    read::<Started>(&dir.join(STARTED)).filter(|s| s.attempt == attempt)
}

/// The exit marker in `dir` if it belongs to `attempt`.
pub fn exited(dir: &Path, attempt: u32) -> Option<Exited> {
    read::<Exited>(&dir.join(EXITED)).filter(|s| s.attempt == attempt)
}

/// The exit marker in `dir`, whatever its attempt.
pub fn exited_any(dir: &Path) -> Option<Exited> {
    read::<Exited>(&dir.join(EXITED))
}

/// The start marker in `dir`, whatever its attempt.
pub fn started_any(dir: &Path) -> Option<Started> {
    read::<Started>(&dir.join(STARTED))
}
