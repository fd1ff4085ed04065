//! Replacing a file: the one way legwork replaces a file it owns.
//!
//! The rule, for every file legwork replaces (snapshot, status files, batch
//! scripts, task scripts, the render manifest, parse-cache entries, results):
//!
//! 1. the new content goes to a temporary file **in the same directory** (so the
//!    rename below never crosses a filesystem), created with the final mode;
//! 2. the temporary file is fsynced (its data is on disk before its name is);
//! 3. it is renamed over the target (readers see the old file or the whole new
//!    one, never a part);
//! 4. the directory is fsynced (the rename itself survives a machine crash).
//!
//! When any step fails, the temporary file is removed before the error is
//! returned: no error path leaves one behind (the temporary file is a
//! [`tempfile::NamedTempFile`], removed when dropped). A process killed between
//! steps 1 and 3 can leave one; its name starts with `.` and ends with `.tmp`
//! (`.<name>.XXXXXX.tmp`), which nothing legwork reads matches.
//!
//! Files created where nothing exists yet may be written in place instead (the
//! tree writer's `O_EXCL` creates: nothing can be reading a file that did not
//! exist), and the journal is appended to, not replaced (it fsyncs each append).

use std::fs::{File, Metadata, Permissions};
use std::io::{self, BufWriter, Write};
use std::os::unix::fs::PermissionsExt;
use std::path::{Path, PathBuf};

/// The mode of an ordinary data file (before the umask).
pub const DATA_MODE: u32 = 0o666;
/// The mode of a script legwork writes (before the umask).
pub const SCRIPT_MODE: u32 = 0o755;

/// Replaces `path` with `bytes` (mode [`DATA_MODE`] before the umask), creating
/// its parent folders. See the module documentation for the guarantees.
///
/// # Errors
///
/// Any I/O error of the steps; the temporary file is gone by then.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> io::Result<()> {
    write_with(path, DATA_MODE, |w| w.write_all(bytes)).map(drop)
}

/// Replaces `path` with what `write` writes, with file mode `mode` (before the
/// umask), and returns the new file's metadata (size and mtime, which the
/// rename keeps).
///
/// # Errors
///
/// Any I/O error of the steps, or the error `write` returns; the temporary
/// file is gone by then.
pub fn write_with(
    path: &Path,
    mode: u32,
    write: impl FnOnce(&mut dyn Write) -> io::Result<()>,
) -> io::Result<Metadata> {
    stage(path, mode, write)?.commit()
}

/// A new content written and fsynced under a temporary name beside its target,
/// not yet in place: [`Staged::commit`] renames it; dropping it removes it. For
/// writes of several files that should all land or none (stage each, then
/// commit each).
#[derive(Debug)]
pub struct Staged {
    file: tempfile::NamedTempFile,
    target: PathBuf,
    meta: Metadata,
}

/// Steps 1 and 2 of the rule: writes what `write` writes to a temporary file
/// beside `path` (creating the parent folders) and fsyncs it.
///
/// # Errors
///
/// Any I/O error, or the error `write` returns; the temporary file is gone by
/// then.
pub fn stage(
    path: &Path,
    mode: u32,
    write: impl FnOnce(&mut dyn Write) -> io::Result<()>,
) -> io::Result<Staged> {
    let dir = parent(path);
    std::fs::create_dir_all(dir)?;
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let file = tempfile::Builder::new()
        .prefix(&format!(".{name}."))
        .suffix(".tmp")
        .permissions(Permissions::from_mode(mode))
        .tempfile_in(dir)?;
    // Any early return below drops `file`, which removes it.
    {
        let mut out = BufWriter::with_capacity(64 * 1024, file.as_file());
        write(&mut out)?;
        out.flush()?;
    }
    file.as_file().sync_all()?;
    let meta = file.as_file().metadata()?;
    Ok(Staged {
        file,
        target: path.to_path_buf(),
        meta,
    })
}

impl Staged {
    /// Steps 3 and 4: renames the staged file over its target and fsyncs the
    /// directory. Returns the new file's metadata.
    ///
    /// # Errors
    ///
    /// The rename's or the directory sync's error; after a failed rename the
    /// temporary file is removed.
    pub fn commit(self) -> io::Result<Metadata> {
        let Staged { file, target, meta } = self;
        // On failure `persist` hands the file back; dropping it removes it.
        file.persist(&target).map_err(|e| e.error)?;
        sync_dir(parent(&target))?;
        Ok(meta)
    }

    /// The file this will replace.
    pub fn target(&self) -> &Path {
        &self.target
    }
}

/// Fsyncs a directory, so that the names created, renamed or removed in it
/// survive a machine crash.
///
/// # Errors
///
/// Opening or syncing the directory.
pub fn sync_dir(dir: &Path) -> io::Result<()> {
    File::open(dir)?.sync_all()
}

fn parent(path: &Path) -> &Path {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn leftovers(dir: &Path) -> Vec<String> {
        std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .filter(|n| n.ends_with(".tmp"))
            .collect()
    }

    #[test]
    fn replaces_the_whole_file_with_the_mode_asked_for() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("sub/a.txt");
        write_atomic(&p, b"first version, longer").unwrap();
        write_atomic(&p, b"second").unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"second");
        let s = d.path().join("s.sh");
        let meta = write_with(&s, SCRIPT_MODE, |w| w.write_all(b"#!/bin/bash\n")).unwrap();
        assert_eq!(meta.len(), 12);
        let mode = std::fs::metadata(&s).unwrap().permissions().mode();
        assert_eq!(mode & 0o100, 0o100, "executable for its owner: {mode:o}");
        assert!(leftovers(d.path()).is_empty());
    }

    #[test]
    fn a_failing_writer_leaves_the_old_file_and_no_temporary_file() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("a.txt");
        write_atomic(&p, b"old").unwrap();
        let err = write_with(&p, DATA_MODE, |w| {
            w.write_all(b"half of it")?;
            Err(io::Error::other("disk full (simulated)"))
        })
        .unwrap_err();
        assert_eq!(err.to_string(), "disk full (simulated)");
        assert_eq!(std::fs::read(&p).unwrap(), b"old");
        assert!(leftovers(d.path()).is_empty(), "{:?}", leftovers(d.path()));
    }

    #[test]
    fn a_failing_rename_leaves_no_temporary_file() {
        // A non-empty directory cannot be replaced by a file (also for root,
        // unlike a read-only directory).
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("taken");
        std::fs::create_dir_all(p.join("inside")).unwrap();
        assert!(write_atomic(&p, b"x").is_err());
        assert!(p.join("inside").is_dir());
        assert!(leftovers(d.path()).is_empty(), "{:?}", leftovers(d.path()));
    }

    #[test]
    fn a_parent_that_is_a_file_is_an_error_without_leftovers() {
        let d = tempfile::tempdir().unwrap();
        std::fs::write(d.path().join("f"), b"").unwrap();
        assert!(write_atomic(&d.path().join("f/a.txt"), b"x").is_err());
        assert!(leftovers(d.path()).is_empty());
    }

    #[test]
    fn staged_files_land_only_when_committed() {
        let d = tempfile::tempdir().unwrap();
        let a = d.path().join("a");
        let b = d.path().join("b");
        let sa = stage(&a, DATA_MODE, |w| w.write_all(b"A")).unwrap();
        let sb = stage(&b, DATA_MODE, |w| w.write_all(b"B")).unwrap();
        assert!(!a.exists() && !b.exists());
        assert_eq!(sa.target(), a.as_path());
        sa.commit().unwrap();
        drop(sb);
        assert_eq!(std::fs::read(&a).unwrap(), b"A");
        assert!(!b.exists());
        assert!(leftovers(d.path()).is_empty());
    }
}
