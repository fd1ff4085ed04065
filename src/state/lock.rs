//! One legwork writes a campaign's state at a time: an advisory lock on
//! `<root>/.legwork/lock`, plus the holder's pid, host and start time written in
//! the file, because `flock` on NFS may be unreliable. A second legwork waits up
//! to a timeout and then says who holds the lock.

use fs4::fs_std::FileExt;
use serde::{Deserialize, Serialize};
use std::fs::File;
use std::io::{Read, Seek, Write};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};
use thiserror::Error;

/// Who holds the lock.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct Holder {
    /// Process id.
    pub pid: u32,
    /// Host name.
    pub host: String,
    /// When it took the lock (RFC 3339).
    pub since: String,
    /// Its command line.
    pub command: String,
}

impl std::fmt::Display for Holder {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "pid {} on {} since {} (`{}`)",
            self.pid, self.host, self.since, self.command
        )
    }
}

/// Why the lock could not be taken.
#[derive(Debug, Error)]
pub enum LockError {
    /// Someone else holds it.
    #[error("another legwork holds {path}: {holder}; wait for it to finish, or if that process is gone, delete the lock file")]
    Busy {
        /// The lock file.
        path: PathBuf,
        /// Who holds it (as far as the file says).
        holder: String,
    },
    /// The lock file could not be used.
    #[error("{path}: {source}")]
    Io {
        /// The lock file.
        path: PathBuf,
        /// The error.
        source: std::io::Error,
    },
}

/// The held lock; released on drop.
#[derive(Debug)]
pub struct CampaignLock {
    file: File,
    path: PathBuf,
}

/// This machine's host name.
pub fn hostname() -> String {
    nix::unistd::gethostname()
        .ok()
        .and_then(|h| h.into_string().ok())
        .unwrap_or_else(|| "unknown-host".into())
}

fn pid_alive(pid: u32) -> bool {
    // No signal checks existence; EPERM means it exists under another user.
    let Ok(pid) = i32::try_from(pid) else {
        return false;
    };
    match nix::sys::signal::kill(nix::unistd::Pid::from_raw(pid), None) {
        Ok(()) => true,
        Err(e) => e == nix::errno::Errno::EPERM,
    }
}

impl CampaignLock {
    /// Takes the lock of the campaign whose bookkeeping folder is `dir`
    /// (`<root>/.legwork`), waiting up to `wait`.
    pub fn acquire(dir: &Path, wait: Duration) -> Result<CampaignLock, LockError> {
        let path = dir.join("lock");
        let io = |source| LockError::Io {
            path: path.clone(),
            source,
        };
        std::fs::create_dir_all(dir).map_err(io)?;
        let start = Instant::now();
        loop {
            let mut file = std::fs::OpenOptions::new()
                .read(true)
                .write(true)
                .create(true)
                .truncate(false)
                .open(&path)
                .map_err(io)?;
            let got = file.try_lock_exclusive().map_err(io)?;
            let mut text = String::new();
            let _ = file.read_to_string(&mut text);
            let recorded: Option<Holder> = serde_json::from_str(text.trim()).ok();
            let me = std::process::id();
            let here = hostname();
            // The flock says free, but the file may name a live holder the flock
            // could not see (another NFS client, or a broken flock).
            let live_other = recorded
                .as_ref()
                .filter(|h| h.host != here || (h.pid != me && pid_alive(h.pid)));
            if got && live_other.is_none() {
                let holder = Holder {
                    pid: me,
                    host: here,
                    since: chrono::Utc::now().to_rfc3339(),
                    command: std::env::args().collect::<Vec<_>>().join(" "),
                };
                file.set_len(0).map_err(io)?;
                file.rewind().map_err(io)?;
                file.write_all(serde_json::to_string(&holder).unwrap().as_bytes())
                    .and_then(|_| file.sync_all())
                    .map_err(io)?;
                return Ok(CampaignLock { file, path });
            }
            if got {
                let _ = FileExt::unlock(&file);
            }
            if start.elapsed() >= wait {
                return Err(LockError::Busy {
                    path,
                    holder: recorded
                        .map(|h| h.to_string())
                        .unwrap_or_else(|| "a process that did not record itself".into()),
                });
            }
            std::thread::sleep(Duration::from_millis(100).min(wait));
        }
    }

    /// The lock file.
    pub fn path(&self) -> &Path {
        &self.path
    }
}

impl Drop for CampaignLock {
    fn drop(&mut self) {
        let _ = self.file.set_len(0);
        let _ = self.file.sync_all();
        let _ = FileExt::unlock(&self.file);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_second_holder_is_told_who_holds_it() {
        let d = tempfile::tempdir().unwrap();
        let _first = CampaignLock::acquire(d.path(), Duration::ZERO).unwrap();
        // Same process, new open file description: flock conflicts (Linux flock
        // locks belong to the open file description).
        let err = CampaignLock::acquire(d.path(), Duration::from_millis(150));
        // Our own pid is recorded, so the second call is accepted only if the
        // flock allowed it; either way it must not be a silent double hold by
        // another process. Here the flock conflicts.
        match err {
            Err(LockError::Busy { holder, .. }) => {
                assert!(
                    holder.contains(&format!("pid {}", std::process::id())),
                    "{holder}"
                )
            }
            Ok(_) => panic!("the lock was taken twice"),
            Err(e) => panic!("{e}"),
        }
    }

    #[test]
    fn a_dead_holder_on_this_host_is_taken_over() {
        let d = tempfile::tempdir().unwrap();
        let stale = Holder {
            pid: 999_999_999,
            host: hostname(),
            since: "2020-01-01T00:00:00Z".into(),
            command: "legwork submit x".into(),
        };
        std::fs::write(
            d.path().join("lock"),
            serde_json::to_string(&stale).unwrap(),
        )
        .unwrap();
        let l = CampaignLock::acquire(d.path(), Duration::ZERO).unwrap();
        let text = std::fs::read_to_string(l.path()).unwrap();
        assert!(text.contains(&format!("\"pid\":{}", std::process::id())));
        drop(l);
        assert_eq!(std::fs::read_to_string(d.path().join("lock")).unwrap(), "");
    }

    #[test]
    fn a_holder_on_another_host_is_respected_even_without_flock() {
        let d = tempfile::tempdir().unwrap();
        let other = Holder {
            pid: 1,
            host: "some-other-login-node".into(),
            since: "2026-01-01T00:00:00Z".into(),
            command: "legwork watch c.yaml".into(),
        };
        std::fs::write(
            d.path().join("lock"),
            serde_json::to_string(&other).unwrap(),
        )
        .unwrap();
        let err = CampaignLock::acquire(d.path(), Duration::ZERO).unwrap_err();
        assert!(err.to_string().contains("some-other-login-node"), "{err}");
    }
}
