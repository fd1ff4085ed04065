//! The demo engine's error type.

use std::path::PathBuf;

/// What can go wrong in the demo engine. Messages say what, where and what to do.
#[derive(Debug, thiserror::Error)]
pub enum DemoError {
    /// A parameter is out of its domain (e.g. a non-positive force constant).
    #[error("invalid parameter {name}: {message}")]
    Parameter {
        /// the command-line name of the parameter
        name: &'static str,
        /// why the value is wrong and what is allowed
        message: String,
    },
    /// Reading or writing a file failed.
    #[error("{path}: {source}")]
    Io {
        /// the file
        path: PathBuf,
        /// the operating-system error
        source: std::io::Error,
    },
    /// A file exists but its content is not what the engine expects.
    #[error("{path}:{line}: {message}")]
    Format {
        /// the file
        path: PathBuf,
        /// 1-based line (0 when the whole file is at fault)
        line: u64,
        /// what was wrong and how to fix it
        message: String,
    },
    /// A checkpoint belongs to a run with other parameters.
    #[error("{path}: this checkpoint was written by a run with different parameters ({detail}); delete it and the output file to start the window over, or run with the original parameters")]
    CheckpointMismatch {
        /// the checkpoint file
        path: PathBuf,
        /// which parameter differs
        detail: String,
    },
}

impl DemoError {
    /// Wraps an I/O error with the path it concerns.
    pub fn io(path: impl Into<PathBuf>, source: std::io::Error) -> Self {
        DemoError::Io {
            path: path.into(),
            source,
        }
    }

    /// A parameter error.
    pub fn parameter(name: &'static str, message: impl Into<String>) -> Self {
        DemoError::Parameter {
            name,
            message: message.into(),
        }
    }

    /// True when the user's input (parameters or files) is at fault rather than the system.
    pub fn is_bad_input(&self) -> bool {
        !matches!(self, DemoError::Io { .. })
    }
}
