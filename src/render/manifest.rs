//! What render last wrote, so that a re-expand can tell unchanged, ours-to-update
//! and user-edited files apart after one `stat`.
//!
//! Replacing scripts is journalled: before a set of task scripts is replaced,
//! one append to `<root>/.legwork/render-journal.tsv` (fsynced) records what
//! each will hold (path, hash, attempt, restart). Each replacement is a rename,
//! so after a crash at any point every script is either the old one (the
//! manifest's entry) or the new one (the journal's), and [`Manifest::load`]
//! replays the journal against the disk: a file whose content has the
//! journalled hash takes the journalled entry. [`Manifest::save`] removes the
//! journal once the manifest holds everything.

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
    /// Whether [`Manifest::load`] found a journal of renders (left by a render
    /// that stopped half-way): the manifest should then be saved, which ends it.
    pub replayed: bool,
}

const HEADER: &str = "# legwork render manifest 1";

/// One script about to be replaced: what it will hold.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Intent {
    /// The file, relative to the root.
    pub rel: String,
    /// Hash of the new content.
    pub hash: String,
    /// The attempt it is rendered for.
    pub attempt: u32,
    /// The restart flag it is rendered with.
    pub restart: bool,
}

/// Where the journal of renders lives.
pub fn journal_path(root: &Path) -> PathBuf {
    root.join(".legwork").join("render-journal.tsv")
}

/// Appends `intents` to the journal of renders in one write and fsyncs it, before
/// any of those files is replaced.
pub fn record_intents(root: &Path, intents: &[Intent]) -> std::io::Result<()> {
    use std::io::Write;
    if intents.is_empty() {
        return Ok(());
    }
    let p = journal_path(root);
    std::fs::create_dir_all(p.parent().expect("has a parent"))?;
    let mut out = String::with_capacity(intents.len() * 96);
    for i in intents {
        out.push_str(&format!(
            "{}\t{}\t{}\t{}\n",
            i.rel,
            i.hash,
            i.attempt,
            u8::from(i.restart)
        ));
    }
    let mut f = std::fs::OpenOptions::new()
        .create(true)
        .read(true)
        .append(true)
        .open(&p)?;
    // A line torn by an earlier failed append is ended first, so that it never
    // swallows the first line of this one (a torn line is skipped on replay).
    if !ends_a_line(&mut f)? {
        out.insert(0, '\n');
    }
    f.write_all(out.as_bytes())?;
    f.sync_data()
}

/// Whether the file is empty or ends with a newline.
fn ends_a_line(f: &mut std::fs::File) -> std::io::Result<bool> {
    use std::io::{Read, Seek, SeekFrom};
    if f.metadata()?.len() == 0 {
        return Ok(true);
    }
    f.seek(SeekFrom::End(-1))?;
    let mut last = [0u8; 1];
    f.read_exact(&mut last)?;
    Ok(last[0] == b'\n')
}

/// The journal's intents in order; a torn or unreadable line is skipped.
fn read_intents(root: &Path) -> Vec<Intent> {
    let Ok(text) = std::fs::read_to_string(journal_path(root)) else {
        return Vec::new();
    };
    text.lines()
        .filter_map(|line| {
            let f: Vec<&str> = line.split('\t').collect();
            if f.len() != 4 || f[1].len() != 32 {
                return None;
            }
            Some(Intent {
                rel: f[0].to_string(),
                hash: f[1].to_string(),
                attempt: f[2].parse().ok()?,
                restart: f[3] == "1",
            })
        })
        .collect()
}

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
    /// A journal of renders left by a crash is replayed against the disk (see
    /// the module documentation).
    pub fn load(root: &Path) -> Manifest {
        let mut m = Manifest::load_saved(root);
        m.replay(root);
        m
    }

    /// Applies the journal's intents whose content is on disk.
    fn replay(&mut self, root: &Path) {
        let intents = read_intents(root);
        if intents.is_empty() {
            return;
        }
        self.replayed = true;
        let mut applied = 0usize;
        for i in &intents {
            let Ok(bytes) = std::fs::read(root.join(&i.rel)) else {
                continue;
            };
            if hash(&bytes) != i.hash {
                continue;
            }
            let Ok(meta) = std::fs::metadata(root.join(&i.rel)) else {
                continue;
            };
            self.entries.insert(
                i.rel.clone(),
                Entry {
                    hash: i.hash.clone(),
                    size: meta.len(),
                    mtime_ns: mtime_ns(&meta),
                    attempt: i.attempt,
                    restart: i.restart,
                },
            );
            applied += 1;
        }
        tracing::info!(
            "a render stopped half-way: {applied} of {} journalled scripts had been replaced; recorded as legwork's own",
            intents.len()
        );
    }

    /// The manifest file alone, without the journal.
    fn load_saved(root: &Path) -> Manifest {
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

    /// Writes the manifest atomically (temp file, fsync, rename), then removes
    /// the journal of renders (the manifest now holds what it recorded).
    pub fn save(&self, root: &Path) -> std::io::Result<()> {
        self.save_manifest(root)?;
        match std::fs::remove_file(journal_path(root)) {
            Err(e) if e.kind() != std::io::ErrorKind::NotFound => Err(e),
            _ => Ok(()),
        }
    }

    fn save_manifest(&self, root: &Path) -> std::io::Result<()> {
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

#[cfg(test)]
mod tests {
    use super::*;

    fn intent(rel: &str, content: &str, attempt: u32) -> Intent {
        Intent {
            rel: rel.into(),
            hash: hash(content.as_bytes()),
            attempt,
            restart: false,
        }
    }

    #[test]
    fn the_journal_takes_the_file_on_disk_and_survives_a_torn_line() {
        let d = tempfile::tempdir().unwrap();
        let root = d.path();
        std::fs::write(root.join("a.sh"), "new a").unwrap();
        std::fs::write(root.join("b.sh"), "old b").unwrap();
        record_intents(root, &[intent("a.sh", "new a", 2)]).unwrap();
        // A torn append (no newline), then a whole one.
        let j = journal_path(root);
        let mut text = std::fs::read_to_string(&j).unwrap();
        text.push_str("b.sh\tdead");
        std::fs::write(&j, text).unwrap();
        record_intents(root, &[intent("b.sh", "new b", 3)]).unwrap();
        std::fs::write(root.join("b.sh"), "new b").unwrap();
        let m = Manifest::load(root);
        assert!(m.replayed);
        assert_eq!(m.entries["a.sh"].attempt, 2);
        assert_eq!(m.entries["b.sh"].attempt, 3);
        assert_eq!(m.entries["b.sh"].hash, hash(b"new b"));
        m.save(root).unwrap();
        assert!(!j.exists(), "save ends the journal");
        let again = Manifest::load(root);
        assert!(!again.replayed);
        assert_eq!(again.entries, m.entries);
    }

    #[test]
    fn a_journalled_write_that_never_happened_keeps_the_old_entry() {
        let d = tempfile::tempdir().unwrap();
        let root = d.path();
        std::fs::write(root.join("a.sh"), "old a").unwrap();
        record_intents(root, &[intent("a.sh", "new a", 2)]).unwrap();
        let m = Manifest::load(root);
        assert!(m.replayed);
        assert!(!m.entries.contains_key("a.sh"));
    }
}
