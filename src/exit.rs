//! Exit codes and the one error type that carries one to `main`.
//!
//! Library modules return their own typed errors; commands turn the ones a user can
//! act on into an [`Exit`] so that `main` knows which code to return. Anything else
//! that reaches `main` is a runtime failure (code 1).

use std::fmt;

/// Process exit codes, documented in the README.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ExitKind {
    /// 1: a runtime failure (I/O, a scheduler command that kept failing, a bug).
    Failure,
    /// 2: bad input: an invalid campaign file, window table or command line.
    BadInput,
    /// 3: the work ended but is incomplete: tasks failed past their attempt limit, or
    /// nothing more can progress.
    Incomplete,
    /// 4: another legwork process holds the campaign's lock.
    Busy,
    /// 130: interrupted by Ctrl-C (SIGINT); what had started was stopped and recorded.
    Interrupted,
}

impl ExitKind {
    /// The numeric process exit code.
    pub fn code(self) -> u8 {
        match self {
            ExitKind::Failure => 1,
            ExitKind::BadInput => 2,
            ExitKind::Incomplete => 3,
            ExitKind::Busy => 4,
            ExitKind::Interrupted => 130,
        }
    }
}

/// An error that tells `main` which exit code to use. The message is printed as is,
/// so it should say what was wrong, where, and what to do.
#[derive(Debug)]
pub struct Exit {
    /// Which exit code.
    pub kind: ExitKind,
    /// The full, user-facing message (may span several lines).
    pub message: String,
}

impl Exit {
    /// An error with the given kind and message.
    pub fn new(kind: ExitKind, message: impl Into<String>) -> Self {
        Exit {
            kind,
            message: message.into(),
        }
    }
    /// Exit code 2: the input was wrong.
    pub fn bad_input(message: impl Into<String>) -> Self {
        Self::new(ExitKind::BadInput, message)
    }
    /// Exit code 3: the work is incomplete.
    pub fn incomplete(message: impl Into<String>) -> Self {
        Self::new(ExitKind::Incomplete, message)
    }
    /// Exit code 4: another process holds the lock.
    pub fn busy(message: impl Into<String>) -> Self {
        Self::new(ExitKind::Busy, message)
    }
    /// Exit code 130: interrupted.
    pub fn interrupted(message: impl Into<String>) -> Self {
        Self::new(ExitKind::Interrupted, message)
    }
}

impl fmt::Display for Exit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for Exit {}

/// The exit kind of an error chain: the first [`Exit`] found in it, else Failure.
pub fn classify(err: &anyhow::Error) -> ExitKind {
    err.chain()
        .find_map(|e| e.downcast_ref::<Exit>())
        .map(|e| e.kind)
        .unwrap_or(ExitKind::Failure)
}
