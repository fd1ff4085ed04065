//! The checkpoint file: where a window's run can pick up again.
//!
//! JSON with the frame count, the byte length of the output at that frame, the
//! position (as IEEE-754 bit patterns, so it is restored exactly), the random
//! stream's word position and a fingerprint of every parameter that shapes the
//! output. A restarted run truncates the output to `output_bytes` and continues from
//! `frame`; because the random stream and position are restored bit for bit, the
//! finished file is byte-identical to an uninterrupted run's.

use super::DemoError;
use serde::{Deserialize, Serialize};
use std::io::Write;
use std::path::Path;

/// The format tag stored in every checkpoint.
pub const FORMAT: &str = "legwork demo checkpoint 1";

/// One checkpoint.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct Checkpoint {
    /// always [`FORMAT`]
    pub format: String,
    /// SHA-256 (hex) of the run parameters that determine the output's bytes
    pub fingerprint: String,
    /// frames written when the checkpoint was taken
    pub frame: u64,
    /// byte length of the output file at that frame
    pub output_bytes: u64,
    /// the configuration, each coordinate as `f64::to_bits`
    pub position_bits: Vec<u64>,
    /// the random stream's word position (a u128, in decimal)
    pub rng_word_pos: String,
}

impl Checkpoint {
    /// The configuration as numbers.
    pub fn position(&self) -> Vec<f64> {
        self.position_bits
            .iter()
            .map(|b| f64::from_bits(*b))
            .collect()
    }

    /// Reads a checkpoint; `Ok(None)` when the file does not exist.
    pub fn load(path: &Path) -> Result<Option<Checkpoint>, DemoError> {
        let text = match std::fs::read_to_string(path) {
            Ok(t) => t,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
            Err(e) => return Err(DemoError::io(path, e)),
        };
        let bad = |message: String| DemoError::Format {
            path: path.to_path_buf(),
            line: 0,
            message,
        };
        let ck: Checkpoint = serde_json::from_str(&text)
            .map_err(|e| bad(format!("not a readable demo checkpoint ({e})")))?;
        if ck.format != FORMAT {
            return Err(bad(format!(
                "unknown checkpoint format '{}', expected '{FORMAT}'",
                ck.format
            )));
        }
        if ck.rng_word_pos.parse::<u128>().is_err() {
            return Err(bad(format!(
                "rng_word_pos '{}' is not an integer",
                ck.rng_word_pos
            )));
        }
        Ok(Some(ck))
    }

    /// Writes the checkpoint atomically.
    pub fn save(&self, path: &Path) -> Result<(), DemoError> {
        let text = serde_json::to_string(self).expect("a checkpoint always serialises");
        write_atomic(path, text.as_bytes())
    }
}

/// Writes `bytes` to `path` so that readers see either the old file or the whole new
/// one: a temporary file beside it, then rename. No fsync: the rename already protects
/// against the process dying at any point (a crash, a walltime kill), and a checkpoint
/// damaged by a machine crash is set aside by [`crate::demo::run::run`], because starting
/// the window over gives the same bytes. Several fsyncs per window would cost more
/// than the whole run.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<(), DemoError> {
    let mut tmp = path.as_os_str().to_owned();
    tmp.push(".tmp");
    let tmp = std::path::PathBuf::from(tmp);
    let result = (|| {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        std::fs::rename(&tmp, path)
    })();
    result.map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        DemoError::io(path, e)
    })
}
