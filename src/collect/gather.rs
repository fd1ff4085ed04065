//! Reading one leg replica's finished windows: every window's output through the
//! [`ParseCache`], then the windows checked against each other and joined into
//! one [`LegSamples`]. Nothing is estimated here; `analysis` calls this.

use super::cache::{ParseCache, Source};
use super::{assemble, LegSamples, ReadError, WindowSamples};
use std::path::PathBuf;

/// How the windows of a read were obtained.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct ReadCounts {
    /// Window files parsed from text.
    pub parsed: usize,
    /// Window files taken from the parse cache.
    pub cached: usize,
}

impl std::ops::AddAssign for ReadCounts {
    fn add_assign(&mut self, other: ReadCounts) {
        self.parsed += other.parsed;
        self.cached += other.cached;
    }
}

/// Reads the window outputs at `paths` (one per window, in window order) and
/// joins them into one leg's samples.
///
/// # Errors
///
/// The first window that cannot be read, or windows that do not fit together
/// (different λ states, temperatures or columns).
pub fn read_window_set(
    cache: &ParseCache,
    paths: &[PathBuf],
) -> Result<(LegSamples, ReadCounts), ReadError> {
    let mut counts = ReadCounts::default();
    let windows: Vec<WindowSamples> = paths
        .iter()
        .map(|path| {
            let (w, source) = cache.read(path)?;
            match source {
                Source::Cached => counts.cached += 1,
                Source::Parsed => counts.parsed += 1,
            }
            Ok(w)
        })
        .collect::<Result<_, ReadError>>()?;
    Ok((assemble(windows)?, counts))
}
