//! The starting-configuration file written by `prepare` and read by a production run.
//!
//! Text, two lines:
//!
//! ```text
//! # legwork demo start 1
//! position: 1.6 0.9 0.9
//! ```
//!
//! Coordinates are written in Rust's shortest round-trip form, so reading them back
//! gives the same bits.

use super::DemoError;
use std::path::Path;

const MAGIC: &str = "# legwork demo start 1";

/// A configuration `displace` thermal widths `sigma` away from a well centred at
/// `center` on the first axis, along every one of `dimensions` axes.
pub fn displaced(center: f64, sigma: f64, dimensions: usize, displace: f64) -> Vec<f64> {
    let mut x = vec![displace * sigma; dimensions];
    x[0] += center;
    x
}

/// Renders a starting configuration.
pub fn render(position: &[f64]) -> String {
    let coords: Vec<String> = position.iter().map(|x| format!("{x}")).collect();
    format!("{MAGIC}\nposition: {}\n", coords.join(" "))
}

/// Writes a starting configuration atomically (temporary file, then rename).
pub fn write(path: &Path, position: &[f64]) -> Result<(), DemoError> {
    super::checkpoint::write_atomic(path, render(position).as_bytes())
}

/// Reads a starting configuration and checks it has `dimensions` coordinates.
pub fn read(path: &Path, dimensions: usize) -> Result<Vec<f64>, DemoError> {
    let text = std::fs::read_to_string(path).map_err(|e| DemoError::io(path, e))?;
    let bad = |line: u64, message: String| DemoError::Format {
        path: path.to_path_buf(),
        line,
        message,
    };
    let mut lines = text.lines();
    if lines.next() != Some(MAGIC) {
        return Err(bad(1, format!("not a demo starting configuration (expected first line '{MAGIC}'); write one with `legwork-demo-engine prepare`")));
    }
    let coords = lines
        .next()
        .and_then(|l| l.strip_prefix("position:"))
        .ok_or_else(|| bad(2, "expected 'position: x1 x2 …'".into()))?;
    let position = coords
        .split_whitespace()
        .map(|t| {
            t.parse::<f64>()
                .map_err(|_| bad(2, format!("'{t}' is not a number")))
        })
        .collect::<Result<Vec<_>, _>>()?;
    if position.len() != dimensions {
        return Err(bad(2, format!("{} coordinates, but the run has --dimensions {dimensions}; prepare again with the same dimensions", position.len())));
    }
    Ok(position)
}
