//! What can go wrong while reading window output.

use std::path::PathBuf;

/// A window file could not be read, or a leg's windows do not fit together. Every
/// message says which file (and line:column and column header where there is one)
/// and what to change.
#[derive(Debug, thiserror::Error)]
pub enum ReadError {
    /// The file could not be opened or read.
    #[error("{path}: cannot read the file: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The operating system's error.
        source: std::io::Error,
    },
    /// A value in the data could not be read as a number.
    #[error("{path}:{line}:{column}: column '{header}': {problem}")]
    Value {
        /// The file.
        path: PathBuf,
        /// 1-based line number.
        line: usize,
        /// 1-based byte column.
        column: usize,
        /// The header of the column (or `column N` when the file has no header).
        header: String,
        /// What is wrong and what to do.
        problem: String,
    },
    /// A line does not have the fields the header promises.
    #[error("{path}:{line}:{column}: {problem}")]
    Shape {
        /// The file.
        path: PathBuf,
        /// 1-based line number.
        line: usize,
        /// 1-based byte column.
        column: usize,
        /// What is wrong and what to do.
        problem: String,
    },
    /// The metadata lines or the header are wrong or incomplete.
    #[error("{path}:{line}: {problem}")]
    Header {
        /// The file.
        path: PathBuf,
        /// 1-based line number (of the offending line, or where it was expected).
        line: usize,
        /// What is wrong and what to do.
        problem: String,
    },
    /// The reader configuration cannot work.
    #[error("reader configuration: {0}")]
    Config(String),
    /// The file holds fewer frames than required.
    #[error("{path}: {frames} frames, fewer than the {min} required; let the window run longer or lower the stage's frames")]
    TooFewFrames {
        /// The file.
        path: PathBuf,
        /// Frames found.
        frames: u64,
        /// Frames required.
        min: u64,
    },
    /// The file holds nothing yet (no header, or no data after the comments).
    #[error("{path}: {problem}")]
    Empty {
        /// The file.
        path: PathBuf,
        /// What is missing.
        problem: String,
    },
    /// A leg's windows disagree with each other, or states are missing or doubled.
    #[error("{0}")]
    Leg(String),
}

impl ReadError {
    /// Whether running the engine again can cure this: the output is missing,
    /// empty or short (the engine died, the walltime hit). Everything else is a
    /// file the engine finished that the reader does not understand: a reader
    /// setting (or an engine writing something else than configured), which a
    /// rerun would only repeat.
    pub fn rerun_can_fix(&self) -> bool {
        matches!(
            self,
            ReadError::Io { .. } | ReadError::TooFewFrames { .. } | ReadError::Empty { .. }
        )
    }
}
