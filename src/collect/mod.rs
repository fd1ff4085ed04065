//! Reading window output (window tables, configurable columns, blocks) into
//! compact samples in reduced units. The only part of the numeric path that does
//! I/O.

mod blocks;
pub mod cache;
mod columns;
pub mod config;
mod error;
pub mod experiment;
pub mod gather;
pub mod legs;
mod meta;
mod parse;
mod window_table;

pub use config::ReaderConfig;
pub use error::ReadError;
pub use legwork_numerics::samples::{LegSamples, WindowSamples};
pub use meta::WindowHint;

use config::ReaderFormat;
use rayon::prelude::*;
use std::path::{Path, PathBuf};

/// Reads one window's output.
pub fn read_window(path: &Path, config: &ReaderConfig) -> Result<WindowSamples, ReadError> {
    read_window_with(path, config, &WindowHint::default())
}

/// Reads one window's output; `hint` supplies (and overrides) what the plan knows.
pub fn read_window_with(
    path: &Path,
    config: &ReaderConfig,
    hint: &WindowHint,
) -> Result<WindowSamples, ReadError> {
    thread_local! {
        // One text buffer per reading thread, reused from file to file: fresh
        // buffers for every file would cost a page fault per 4 KiB read.
        static TEXT: std::cell::RefCell<Vec<u8>> = const { std::cell::RefCell::new(Vec::new()) };
    }
    TEXT.with(|cell| {
        let mut text = cell.borrow_mut();
        text.clear();
        let io = |source| ReadError::Io {
            path: path.to_path_buf(),
            source,
        };
        let mut file = std::fs::File::open(path).map_err(io)?;
        if let Ok(meta) = file.metadata() {
            text.reserve(meta.len() as usize);
        }
        std::io::Read::read_to_end(&mut file, &mut text).map_err(io)?;
        let out = parse_window(path, &text, config, hint);
        if text.capacity() > 256 << 20 {
            *text = Vec::new();
        }
        out
    })
}

/// What a reader understood of a window, beyond its samples: which column (or
/// label) became which state or component, and where the unit and temperature
/// came from.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Explanation {
    /// (column or label in the file, what it became), in file order.
    pub columns: Vec<(String, String)>,
    /// The energy unit and where it came from.
    pub unit: String,
    /// Where the temperature came from.
    pub temperature: String,
}

/// Reads one window and says what the reader understood (see [`Explanation`]).
pub fn explain_window(
    path: &Path,
    config: &ReaderConfig,
    hint: &WindowHint,
) -> Result<(WindowSamples, Explanation), ReadError> {
    let text = std::fs::read(path).map_err(|source| ReadError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let mut ex = Explanation::default();
    let w = parse_inner(path, &text, config, hint, Some(&mut ex))?;
    Ok((w, ex))
}

/// Parses one window's output already in memory (`path` is used in messages).
pub fn parse_window(
    path: &Path,
    text: &[u8],
    config: &ReaderConfig,
    hint: &WindowHint,
) -> Result<WindowSamples, ReadError> {
    parse_inner(path, text, config, hint, None)
}

fn parse_inner(
    path: &Path,
    text: &[u8],
    config: &ReaderConfig,
    hint: &WindowHint,
    ex: Option<&mut Explanation>,
) -> Result<WindowSamples, ReadError> {
    match config.format {
        ReaderFormat::WindowTable => {
            window_table::parse_window_table(path, text, hint, config.on_conflict, ex)
        }
        ReaderFormat::Columns => {
            let cols = config.columns.as_ref().ok_or_else(|| {
                ReadError::Config(
                    "`format: columns` needs a `columns:` section (energies, energy_unit, ...)"
                        .into(),
                )
            })?;
            columns::parse_columns(path, text, cols, hint, config.on_conflict, ex)
        }
        ReaderFormat::Blocks => {
            let b = config.blocks.as_ref().ok_or_else(|| {
                ReadError::Config(
                    "`format: blocks` needs a `blocks:` section (start, energies, energy_unit, ...)"
                        .into(),
                )
            })?;
            blocks::parse_blocks(path, text, b, hint, config.on_conflict, ex)
        }
    }
}

/// Reads every window of one leg, files in parallel, in any order; sorts by state
/// and checks that the windows fit together.
pub fn read_leg(paths: &[PathBuf], config: &ReaderConfig) -> Result<LegSamples, ReadError> {
    let hints = vec![WindowHint::default(); paths.len()];
    read_leg_with(paths, config, &hints)
}

/// [`read_leg`] with one hint per file (same order as `paths`).
pub fn read_leg_with(
    paths: &[PathBuf],
    config: &ReaderConfig,
    hints: &[WindowHint],
) -> Result<LegSamples, ReadError> {
    if paths.is_empty() {
        return Err(ReadError::Leg("no window files given".into()));
    }
    assert_eq!(paths.len(), hints.len(), "one hint per path");
    let windows: Vec<WindowSamples> = paths
        .par_iter()
        .zip(hints.par_iter())
        .map(|(p, h)| read_window_with(p, config, h))
        .collect::<Result<_, _>>()?;
    assemble(windows)
}

/// Sorts windows by state and checks that they belong to one leg: the same λ
/// lists, temperature and state count, one window per state, none missing.
pub fn assemble(mut windows: Vec<WindowSamples>) -> Result<LegSamples, ReadError> {
    windows.sort_by_key(|w| w.state);
    if let Some(w) = windows.iter().find(|w| w.frames == 0) {
        return Err(ReadError::Leg(format!(
            "{}: no data lines, only the header (the window has not written a frame yet); rerun or finish that window",
            w.source.display()
        )));
    }
    let first = &windows[0];
    let k = first.n_states;
    for w in &windows[1..] {
        let name = |x: &WindowSamples| x.source.display().to_string();
        if w.n_states != k || w.lambdas != first.lambdas {
            return Err(ReadError::Leg(format!(
                "{} and {} disagree on the λ list ({} vs {} states: {:?} vs {:?}); every window of a leg must list the same λ of every state",
                name(first), name(w), k, w.n_states, first.lambdas, w.lambdas
            )));
        }
        if w.components != first.components || w.component_lambdas != first.component_lambdas {
            return Err(ReadError::Leg(format!(
                "{} and {} disagree on the λ components or their λ lists; every window of a leg must list the same",
                name(first), name(w)
            )));
        }
        if (w.temperature_k - first.temperature_k).abs() > 1e-9 * first.temperature_k {
            return Err(ReadError::Leg(format!(
                "{} is at {} K but {} is at {} K; a leg is analysed at one temperature (or pass --temperature to override)",
                name(w), w.temperature_k, name(first), first.temperature_k
            )));
        }
        if w.has_dudl() != first.has_dudl() {
            return Err(ReadError::Leg(format!(
                "{} has dU/dλ columns but {} has none; every window must write the same columns",
                name(if w.has_dudl() { w } else { first }),
                name(if w.has_dudl() { first } else { w })
            )));
        }
    }
    for pair in windows.windows(2) {
        if pair[0].state == pair[1].state {
            return Err(ReadError::Leg(format!(
                "{} and {} both sampled state {}; give one window per state",
                pair[0].source.display(),
                pair[1].source.display(),
                pair[0].state
            )));
        }
    }
    let have: Vec<usize> = windows.iter().map(|w| w.state).collect();
    let missing: Vec<usize> = (0..k).filter(|s| !have.contains(s)).collect();
    if !missing.is_empty() {
        return Err(ReadError::Leg(format!(
            "the leg has {k} states but no window sampled state(s) {missing:?}; add their window files (or check that each file's '# state:' line is right)"
        )));
    }
    let mut leg = LegSamples::from_windows(windows);
    // A note that every window repeats (a settled unit conflict) is said once.
    let mut seen = std::collections::HashSet::new();
    leg.warnings.retain(|w| seen.insert(w.clone()));
    Ok(leg)
}

/// The "done means done" check of a finished window: its output parses and holds
/// at least `min_frames` frames (and at least one). Returns the frame count.
pub fn validate_output(
    path: &Path,
    config: &ReaderConfig,
    min_frames: Option<u64>,
) -> Result<u64, ReadError> {
    validate_output_with(path, config, &WindowHint::default(), min_frames)
}

/// [`validate_output`] with what the plan knows about the window.
pub fn validate_output_with(
    path: &Path,
    config: &ReaderConfig,
    hint: &WindowHint,
    min_frames: Option<u64>,
) -> Result<u64, ReadError> {
    let w = read_window_with(path, config, hint)?;
    let frames = w.frames as u64;
    let min = min_frames.unwrap_or(1).max(1);
    if frames < min {
        return Err(ReadError::TooFewFrames {
            path: path.to_path_buf(),
            frames,
            min,
        });
    }
    Ok(frames)
}
