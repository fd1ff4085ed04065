//! The `# key: value` metadata lines at the top of a window file, and the hints a
//! caller that knows the plan can give instead.

use super::error::ReadError;
use super::parse::is_skippable;
use crate::units::EnergyUnit;
use memchr::memchr;
use std::path::Path;

/// What a caller knows about a window beyond its file (from the plan): it fills in
/// what the file does not say and wins over what it does.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct WindowHint {
    /// 0-based index of the sampled state.
    pub state: Option<usize>,
    /// Primary λ of every state.
    pub lambdas: Option<Vec<f64>>,
    /// Per component (name, λ at every state), for multi-component legs.
    pub component_lambdas: Option<Vec<(String, Vec<f64>)>>,
    /// Temperature of the samples, K (an override).
    pub temperature_k: Option<f64>,
}

/// Metadata read from the comment lines.
#[derive(Debug, Default)]
pub(crate) struct Meta {
    pub first_comment: Option<String>,
    pub temperature_k: Option<f64>,
    pub energy_unit: Option<EnergyUnit>,
    pub state: Option<usize>,
    pub lambdas: Option<Vec<f64>>,
    pub component_lambdas: Vec<(String, Vec<f64>)>,
}

/// The comment block, the header line, and where data begins.
pub(crate) struct Preamble {
    pub meta: Meta,
    /// The first non-comment line (the header, or the first data line), its text and
    /// 1-based number; None for a file without one.
    pub first_line: Option<(String, usize)>,
    /// Byte offset and 1-based line number just after the first non-comment line.
    pub after_first: (usize, usize),
    /// Byte offset and line number of the first non-comment line.
    pub at_first: (usize, usize),
}

fn numbers(path: &Path, line_no: usize, key: &str, value: &str) -> Result<Vec<f64>, ReadError> {
    value
        .split_whitespace()
        .map(|t| {
            t.parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| ReadError::Header {
                    path: path.to_path_buf(),
                    line: line_no,
                    problem: format!(
                        "'{key}:' holds '{t}', which is not a finite number; write one λ per state separated by spaces"
                    ),
                })
        })
        .collect()
}

/// Reads the comment block at the top of `text`.
pub(crate) fn read_preamble(
    path: &Path,
    text: &[u8],
    comments: &[Vec<u8>],
) -> Result<Preamble, ReadError> {
    let mut meta = Meta::default();
    let mut pos = 0usize;
    let mut line_no = 1usize;
    while pos < text.len() {
        let end = memchr(b'\n', &text[pos..]).map_or(text.len(), |i| pos + i);
        let raw = &text[pos..end];
        let line = std::str::from_utf8(raw).map_err(|_| ReadError::Header {
            path: path.to_path_buf(),
            line: line_no,
            problem: "not UTF-8 text; window files must be UTF-8".into(),
        })?;
        let line = line.trim_end_matches('\r');
        if is_skippable(raw, comments) {
            let trimmed = line.trim_start();
            if let Some(prefix) = comments.iter().find(|c| trimmed.as_bytes().starts_with(c)) {
                let body = trimmed[prefix.len()..].trim();
                if meta.first_comment.is_none() && !body.is_empty() {
                    meta.first_comment = Some(body.to_string());
                }
                if let Some((key, value)) = body.split_once(':') {
                    apply(&mut meta, path, line_no, key.trim(), value.trim())?;
                }
            }
            pos = end + 1;
            line_no += 1;
            continue;
        }
        return Ok(Preamble {
            meta,
            first_line: Some((line.to_string(), line_no)),
            after_first: ((end + 1).min(text.len()), line_no + 1),
            at_first: (pos, line_no),
        });
    }
    Ok(Preamble {
        meta,
        first_line: None,
        after_first: (text.len(), line_no),
        at_first: (text.len(), line_no),
    })
}

fn apply(
    meta: &mut Meta,
    path: &Path,
    line_no: usize,
    key: &str,
    value: &str,
) -> Result<(), ReadError> {
    let bad = |problem: String| ReadError::Header {
        path: path.to_path_buf(),
        line: line_no,
        problem,
    };
    match key {
        "temperature_K" => {
            let t = value
                .parse::<f64>()
                .ok()
                .filter(|t| t.is_finite() && *t > 0.0)
                .ok_or_else(|| {
                    bad(format!(
                        "temperature_K '{value}' is not a positive number of kelvin"
                    ))
                })?;
            meta.temperature_k = Some(t);
        }
        "energy_unit" => {
            meta.energy_unit = Some(value.parse().map_err(|e| bad(format!("{e}")))?);
        }
        "state" => {
            meta.state = Some(value.parse::<usize>().map_err(|_| {
                bad(format!(
                    "state '{value}' is not a 0-based state index (0, 1, 2, ...)"
                ))
            })?);
        }
        "lambdas" => meta.lambdas = Some(numbers(path, line_no, key, value)?),
        k if k.starts_with("lambdas.") => {
            let name = k["lambdas.".len()..].to_string();
            let values = numbers(path, line_no, key, value)?;
            meta.component_lambdas.push((name, values));
        }
        _ => {}
    }
    Ok(())
}
