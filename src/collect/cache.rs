//! A cache of parsed windows, so that a second `collect` after a few more windows
//! finish parses only those.
//!
//! One entry per window file under `<root>/.legwork/cache/windows/`, named by a
//! hash of the window's path. An entry is valid while the window file has the same
//! path, size and modification time, and was parsed by the same reader settings and
//! the same cache format; anything else is a miss and the file is parsed again.
//! Entries are written to a temporary file and renamed into place, so a crash
//! leaves either the old entry or the new one.
//!
//! Layout of an entry: one JSON line (the key and every field of
//! [`WindowSamples`] except the two matrices), then the reduced-potential matrix and
//! the dU/dλ matrix as little-endian f64, back to back.

use super::{read_window_with, ReadError, ReaderConfig, WindowHint, WindowSamples};
use crate::campaign::Campaign;
use crate::plan::Plan;
use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};
use std::collections::HashMap;
use std::fs;
use std::io;
use std::path::{Path, PathBuf};
use std::time::UNIX_EPOCH;

/// Bumped whenever the entry layout or the meaning of parsed samples changes.
const FORMAT: u32 = 2;

/// What identifies the parsed content of a window file.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
struct Key {
    format: u32,
    version: String,
    path: PathBuf,
    size: u64,
    mtime_ns: u128,
    reader: String,
}

/// The header line of an entry: its key and the window's small fields.
#[derive(Serialize, Deserialize)]
struct Header {
    key: Key,
    state: usize,
    temperature_k: f64,
    lambdas: Vec<f64>,
    components: Vec<String>,
    component_lambdas: Vec<Vec<f64>>,
    frames: usize,
    n_states: usize,
    reduced_len: usize,
    dudl_len: usize,
    warnings: Vec<String>,
}

/// How a window was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Source {
    /// From a valid cache entry.
    Cached,
    /// Parsed from the window file (and the cache entry written).
    Parsed,
}

/// The parse cache of one campaign.
#[derive(Debug, Clone)]
pub struct ParseCache {
    dir: PathBuf,
    reader: ReaderConfig,
    reader_key: String,
    /// Per leg: its reader, that reader's key, and what the plan knows.
    legs: Vec<LegReading>,
    /// Output path of every analysed window task → (leg, window).
    outputs: HashMap<PathBuf, (usize, usize)>,
}

#[derive(Debug, Clone)]
struct LegReading {
    reader: ReaderConfig,
    key: String,
    hint: WindowHint,
}

impl ParseCache {
    /// The cache under `legwork_dir` (a campaign's `.legwork/`) for windows read
    /// with `reader`.
    pub fn new(legwork_dir: &Path, reader: &ReaderConfig) -> ParseCache {
        ParseCache {
            dir: legwork_dir.join("cache").join("windows"),
            reader: reader.clone(),
            reader_key: serde_json::to_string(reader).unwrap_or_default(),
            legs: Vec::new(),
            outputs: HashMap::new(),
        }
    }

    /// The cache of `campaign`'s analysed windows: a window output of the plan
    /// is read with its leg's reader and what the plan knows about it (state,
    /// λ, temperature; both are part of the cache key); any other path with
    /// the campaign's reader alone.
    pub fn for_campaign(campaign: &Campaign, plan: &Plan) -> ParseCache {
        let mut cache = ParseCache::new(&campaign.root.join(".legwork"), &campaign.reader);
        let Some(output) = campaign.analysed_stage().and_then(|s| s.output.clone()) else {
            return cache;
        };
        let mut leg_index: HashMap<&str, usize> = HashMap::new();
        for set in &plan.windows {
            for (w, &t) in set.tasks.iter().enumerate() {
                let task = &plan.tasks[t];
                let l = *leg_index.entry(task.leg.as_str()).or_insert_with(|| {
                    let reader = super::legs::leg_reader(campaign, &task.leg).clone();
                    let mut hint = super::legs::window_hint(campaign, plan, t);
                    hint.state = None;
                    hint.what = Some(format!("leg {}", task.leg));
                    cache.legs.push(LegReading {
                        key: serde_json::to_string(&reader).unwrap_or_default(),
                        reader,
                        hint,
                    });
                    cache.legs.len() - 1
                });
                let window = task.window.unwrap_or(w);
                cache
                    .outputs
                    .insert(campaign.root.join(&task.dir).join(&output), (l, window));
            }
        }
        cache
    }

    /// The window at `path`, from the cache when its entry is still valid, else
    /// parsed and cached. A cache entry that cannot be read or written is not an
    /// error: the window is parsed and a warning logged.
    pub fn read(&self, path: &Path) -> Result<(WindowSamples, Source), ReadError> {
        match self.outputs.get(path) {
            Some(&(l, window)) => {
                let leg = &self.legs[l];
                let hint = WindowHint {
                    state: Some(window),
                    what: leg
                        .hint
                        .what
                        .as_ref()
                        .map(|w| format!("{w}, window {window}")),
                    ..leg.hint.clone()
                };
                let key = format!("{}|{hint:?}", leg.key);
                self.read_with(path, &leg.reader, &hint, &key)
            }
            None => self.read_with(path, &self.reader, &WindowHint::default(), &self.reader_key),
        }
    }

    fn read_with(
        &self,
        path: &Path,
        reader: &ReaderConfig,
        hint: &WindowHint,
        reader_key: &str,
    ) -> Result<(WindowSamples, Source), ReadError> {
        let key = self.key(path, reader_key)?;
        let entry = self.entry_path(path);
        match load(&entry, &key) {
            Ok(Some(w)) => return Ok((w, Source::Cached)),
            Ok(None) => {}
            Err(e) => tracing::warn!("ignoring unreadable cache entry {}: {e}", entry.display()),
        }
        let w = read_window_with(path, reader, hint)?;
        if let Err(e) = store(&entry, &key, &w) {
            tracing::warn!("could not write cache entry {}: {e}", entry.display());
        }
        Ok((w, Source::Parsed))
    }

    fn key(&self, path: &Path, reader_key: &str) -> Result<Key, ReadError> {
        let meta = fs::metadata(path).map_err(|source| ReadError::Io {
            path: path.to_path_buf(),
            source,
        })?;
        let mtime_ns = meta
            .modified()
            .ok()
            .and_then(|t| t.duration_since(UNIX_EPOCH).ok())
            .map(|d| d.as_nanos())
            .unwrap_or(0);
        Ok(Key {
            format: FORMAT,
            version: env!("CARGO_PKG_VERSION").to_string(),
            path: path.to_path_buf(),
            size: meta.len(),
            mtime_ns,
            reader: reader_key.to_string(),
        })
    }

    fn entry_path(&self, path: &Path) -> PathBuf {
        let digest = Sha256::digest(path.as_os_str().as_encoded_bytes());
        let name: String = digest[..16].iter().map(|b| format!("{b:02x}")).collect();
        self.dir.join(format!("{name}.win"))
    }
}

fn load(entry: &Path, key: &Key) -> io::Result<Option<WindowSamples>> {
    let bytes = match fs::read(entry) {
        Ok(b) => b,
        Err(e) if e.kind() == io::ErrorKind::NotFound => return Ok(None),
        Err(e) => return Err(e),
    };
    let Some(nl) = bytes.iter().position(|&b| b == b'\n') else {
        return Err(invalid("no header line"));
    };
    let header: Header = serde_json::from_slice(&bytes[..nl]).map_err(io::Error::other)?;
    if &header.key != key {
        return Ok(None);
    }
    let body = &bytes[nl + 1..];
    if body.len() != 8 * (header.reduced_len + header.dudl_len) {
        return Err(invalid("body length does not match its header"));
    }
    let mut floats = body
        .chunks_exact(8)
        .map(|c| f64::from_le_bytes(c.try_into().expect("chunks of 8")));
    let reduced: Vec<f64> = floats.by_ref().take(header.reduced_len).collect();
    let dudl: Vec<f64> = floats.collect();
    Ok(Some(WindowSamples {
        source: header.key.path,
        state: header.state,
        temperature_k: header.temperature_k,
        lambdas: header.lambdas,
        components: header.components,
        component_lambdas: header.component_lambdas,
        frames: header.frames,
        n_states: header.n_states,
        reduced,
        dudl,
        warnings: header.warnings,
    }))
}

fn store(entry: &Path, key: &Key, w: &WindowSamples) -> io::Result<()> {
    let dir = entry.parent().expect("entries live in a directory");
    fs::create_dir_all(dir)?;
    let header = Header {
        key: key.clone(),
        state: w.state,
        temperature_k: w.temperature_k,
        lambdas: w.lambdas.clone(),
        components: w.components.clone(),
        component_lambdas: w.component_lambdas.clone(),
        frames: w.frames,
        n_states: w.n_states,
        reduced_len: w.reduced.len(),
        dudl_len: w.dudl.len(),
        warnings: w.warnings.clone(),
    };
    crate::fsutil::write_with(entry, crate::fsutil::DATA_MODE, |out| {
        serde_json::to_writer(&mut *out, &header).map_err(io::Error::other)?;
        out.write_all(b"\n")?;
        for v in w.reduced.iter().chain(&w.dudl) {
            out.write_all(&v.to_le_bytes())?;
        }
        Ok(())
    })
    .map(drop)
}

fn invalid(what: &str) -> io::Error {
    io::Error::new(io::ErrorKind::InvalidData, what.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn table(dir: &Path, name: &str, extra: &str) -> PathBuf {
        let p = dir.join(name);
        fs::write(
            &p,
            format!(
                "# legwork window table 1\n# temperature_K: 300\n# energy_unit: kT\n# state: 0\n# lambdas: 0 1\n\
                 time\tdudl\tu0\tu1\n0\t1.5\t0.25\t1.75\n1\t2.5\t0.5\t3.0\n{extra}"
            ),
        )
        .unwrap();
        p
    }

    #[test]
    fn second_read_hits_and_a_changed_file_misses() {
        let dir = tempfile::tempdir().unwrap();
        let cache = ParseCache::new(&dir.path().join(".legwork"), &ReaderConfig::default());
        let p = table(dir.path(), "w.tsv", "");
        let (first, s1) = cache.read(&p).unwrap();
        let (second, s2) = cache.read(&p).unwrap();
        assert_eq!((s1, s2), (Source::Parsed, Source::Cached));
        assert_eq!(first, second);
        table(dir.path(), "w.tsv", "2\t3.5\t0.75\t4.25\n");
        let (third, s3) = cache.read(&p).unwrap();
        assert_eq!(s3, Source::Parsed);
        assert_eq!(third.frames, 3);
    }

    #[test]
    fn a_damaged_entry_is_reparsed() {
        let dir = tempfile::tempdir().unwrap();
        let cache = ParseCache::new(&dir.path().join(".legwork"), &ReaderConfig::default());
        let p = table(dir.path(), "w.tsv", "");
        cache.read(&p).unwrap();
        let entry = cache.entry_path(&p);
        let mut bytes = fs::read(&entry).unwrap();
        bytes.truncate(bytes.len() - 3);
        fs::write(&entry, bytes).unwrap();
        let (w, s) = cache.read(&p).unwrap();
        assert_eq!(s, Source::Parsed);
        assert_eq!(w.frames, 2);
    }
}
