//! What render last wrote, so that a re-expand can tell unchanged, ours-to-update
//! and user-edited files apart after one `stat`.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

/// One file render wrote.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Entry {
    /// Hex SHA-256 (first 16 bytes) of the content written.
    pub hash: String,
    /// Size in bytes.
    pub size: u64,
    /// Modification time after the write, ns since the Unix epoch.
    pub mtime_ns: u64,
    /// The attempt the file was rendered for.
    pub attempt: u32,
    /// The restart flag it was rendered with.
    pub restart: bool,
}

/// The manifest: file (relative to the root) → entry, plus the fingerprint of the
/// inputs of the last full render.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Manifest {
    /// Fingerprint of campaign, tables, templates, legwork version and exe.
    pub fingerprint: String,
    /// Every file.
    pub entries: HashMap<String, Entry>,
}

const HEADER: &str = "# legwork render manifest 1";

/// Where the manifest lives.
pub fn path(root: &Path) -> PathBuf {
    root.join(".legwork").join("render-manifest.tsv")
}

/// Hash of file content as stored in the manifest.
pub fn hash(bytes: &[u8]) -> String {
    use sha2::{Digest, Sha256};
    let d = Sha256::digest(bytes);
    let mut s = String::with_capacity(32);
    for b in &d[..16] {
        s.push_str(&format!("{b:02x}"));
    }
    s
}

impl Manifest {
    /// Reads the manifest; a missing or unreadable one is empty (every existing
    /// file is then compared by content).
    pub fn load(root: &Path) -> Manifest {
        let Ok(text) = std::fs::read_to_string(path(root)) else {
            return Manifest::default();
        };
        let mut lines = text.lines();
        if lines.next() != Some(HEADER) {
            return Manifest::default();
        }
        let mut m = Manifest::default();
        for line in lines {
            if let Some(fp) = line.strip_prefix("# fingerprint: ") {
                m.fingerprint = fp.to_string();
                continue;
            }
            let f: Vec<&str> = line.split('\t').collect();
            if f.len() != 6 {
                continue;
            }
            let (Ok(size), Ok(mtime_ns), Ok(attempt)) = (f[2].parse(), f[3].parse(), f[4].parse())
            else {
                continue;
            };
            m.entries.insert(
                f[0].to_string(),
                Entry {
                    hash: f[1].to_string(),
                    size,
                    mtime_ns,
                    attempt,
                    restart: f[5] == "1",
                },
            );
        }
        m
    }

    /// Writes the manifest atomically (temp file, fsync, rename).
    pub fn save(&self, root: &Path) -> std::io::Result<()> {
        let p = path(root);
        std::fs::create_dir_all(p.parent().expect("has a parent"))?;
        let mut keys: Vec<&String> = self.entries.keys().collect();
        keys.sort();
        let mut out = String::with_capacity(64 + keys.len() * 96);
        out.push_str(HEADER);
        out.push('\n');
        out.push_str(&format!("# fingerprint: {}\n", self.fingerprint));
        for k in keys {
            let e = &self.entries[k];
            out.push_str(&format!(
                "{k}\t{}\t{}\t{}\t{}\t{}\n",
                e.hash,
                e.size,
                e.mtime_ns,
                e.attempt,
                u8::from(e.restart)
            ));
        }
        crate::fsutil::write_atomic(&p, out.as_bytes())
    }
}

/// A file's mtime in ns since the epoch.
pub fn mtime_ns(meta: &std::fs::Metadata) -> u64 {
    meta.modified()
        .ok()
        .and_then(|t| t.duration_since(std::time::UNIX_EPOCH).ok())
        .map_or(0, |d| d.as_nanos() as u64)
}
