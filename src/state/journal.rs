//! The append-only journal (`.legwork/journal.jsonl`, one JSON event per line,
//! fsync after each batch of events) and its compacted snapshot
//! (`.legwork/snapshot.json`, written by temp + fsync + rename), which records
//! how many journal bytes it covers.

use super::record::{FailureKind, SubmittedTask, TaskState};
use super::StateData;
use serde::{Deserialize, Serialize};
use std::fs::File;
use std::io::{BufRead, BufReader, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use thiserror::Error;

/// One journal event.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "event", rename_all = "snake_case")]
pub enum Event {
    /// About to call the scheduler for submission `sub`.
    Intent {
        /// Submission number (unique in the campaign).
        sub: u64,
        /// Batch id.
        batch: String,
        /// Job name.
        name: String,
        /// Its elements.
        tasks: Vec<SubmittedTask>,
    },
    /// The scheduler accepted submission `sub` as job `job`.
    Submitted {
        /// Submission number.
        sub: u64,
        /// Job id.
        job: String,
    },
    /// Submission `sub` never reached the scheduler.
    Abandoned {
        /// Submission number.
        sub: u64,
        /// Why.
        why: String,
    },
    /// A task changed state.
    Task {
        /// Task id.
        task: String,
        /// New state.
        state: TaskState,
        /// Attempt it refers to.
        attempt: u32,
        /// Why (failed, lost, cancelled).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        reason: Option<String>,
        /// Class of failure.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        kind: Option<FailureKind>,
        /// Raised walltime for the next attempt.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        walltime_s: Option<u64>,
    },
    /// A live task's element left the queue without an exit marker; legwork waits
    /// for the marker until `since` plus the scheduler's marker grace.
    AwaitingMarker {
        /// Task id.
        task: String,
        /// Attempt it refers to.
        attempt: u32,
        /// When it was first seen gone (UTC, RFC 3339).
        since: String,
    },
}

/// A journal line: when, and what.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub(super) struct Line {
    t: String,
    #[serde(flatten)]
    pub(super) event: Event,
}

/// What went wrong with the journal or snapshot.
#[derive(Debug, Error)]
pub enum JournalError {
    /// I/O.
    #[error("{path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The error.
        source: std::io::Error,
    },
    /// A line in the middle of the journal does not parse (the last line may be
    /// torn by a crash and is dropped; any other is corruption).
    #[error("{path}:{line}: unreadable journal event ({detail}); run `legwork status --rescan` to rebuild the state from the tree and the scheduler")]
    Corrupt {
        /// The journal.
        path: PathBuf,
        /// 1-based line number.
        line: usize,
        /// What serde said.
        detail: String,
    },
}

/// The snapshot file's content.
#[derive(Debug, Serialize, Deserialize)]
pub(super) struct Snapshot {
    /// Journal bytes already folded into `state`.
    pub(super) journal_bytes: u64,
    pub(super) state: StateData,
}

/// The open journal (append side).
#[derive(Debug)]
pub struct Journal {
    path: PathBuf,
    snapshot: PathBuf,
    file: File,
    len: u64,
    since_snapshot: u64,
    damage: Option<String>,
}

impl Journal {
    /// Opens (creating) the journal in `dir` and replays snapshot + journal into
    /// the state. A torn last line (crash mid-write) is cut off.
    pub fn open(dir: &Path) -> Result<(Journal, StateData), JournalError> {
        let path = dir.join("journal.jsonl");
        let snapshot = dir.join("snapshot.json");
        let io = |p: &Path| {
            let p = p.to_path_buf();
            move |source| JournalError::Io { path: p, source }
        };
        std::fs::create_dir_all(dir).map_err(io(dir))?;
        let (mut state, start) = match std::fs::read(&snapshot) {
            Ok(bytes) => match serde_json::from_slice::<Snapshot>(&bytes) {
                Ok(s) => (s.state, s.journal_bytes),
                Err(e) => {
                    tracing::warn!(
                        "{}: unreadable snapshot ({e}); replaying the whole journal",
                        snapshot.display()
                    );
                    (StateData::default(), 0)
                }
            },
            Err(_) => (StateData::default(), 0),
        };
        let mut file = std::fs::OpenOptions::new()
            .read(true)
            .append(true)
            .create(true)
            .open(&path)
            .map_err(io(&path))?;
        let total = file.metadata().map_err(io(&path))?.len();
        let mut damage = None;
        if start > total {
            damage = Some(format!(
                "{} is shorter than its snapshot says ({total} of {start} bytes): it was cut or replaced",
                path.display()
            ));
        }
        let start = if start > total { 0 } else { start };
        if start == 0 && total > 0 {
            state = StateData::default();
        }
        file.seek(SeekFrom::Start(start)).map_err(io(&path))?;
        let mut reader = BufReader::with_capacity(1 << 20, &file);
        let mut offset = start;
        let mut good = start;
        let mut lineno = 0usize;
        let mut buf = Vec::new();
        let mut events = 0u64;
        let mut set_aside: Vec<String> = Vec::new();
        loop {
            buf.clear();
            let n = reader.read_until(b'\n', &mut buf).map_err(io(&path))?;
            if n == 0 {
                break;
            }
            lineno += 1;
            offset += n as u64;
            if buf.last() != Some(&b'\n') {
                tracing::warn!("{}: dropping a torn last line", path.display());
                break;
            }
            match serde_json::from_slice::<Line>(&buf) {
                Ok(line) => {
                    state.apply(&line.event);
                    good = offset;
                    events += 1;
                }
                Err(_) if offset == total => {
                    tracing::warn!("{}: dropping a torn last line", path.display());
                    break;
                }
                Err(e) => {
                    // One unreadable line must not block every verb: it is
                    // set aside with its line number, the rest is replayed,
                    // and the tree fills in what it said.
                    tracing::warn!(
                        "{}:{lineno}: unreadable line ({e}); set aside",
                        path.display()
                    );
                    set_aside.push(format!(
                        "{lineno}\t{}",
                        String::from_utf8_lossy(&buf).trim_end()
                    ));
                    good = offset;
                }
            }
        }
        drop(reader);
        if !set_aside.is_empty() {
            let side = dir.join("journal.damaged");
            let mut text = set_aside.join("\n");
            text.push('\n');
            crate::fsutil::write_atomic(&side, text.as_bytes()).map_err(io(&side))?;
            damage = Some(format!(
                "{} had {} unreadable line{} (kept with {} in {})",
                path.display(),
                set_aside.len(),
                if set_aside.len() == 1 { "" } else { "s" },
                if set_aside.len() == 1 {
                    "its line number"
                } else {
                    "their line numbers"
                },
                side.display()
            ));
        }
        if good < total {
            file.set_len(good).map_err(io(&path))?;
        }
        Ok((
            Journal {
                path,
                snapshot,
                file,
                len: good,
                since_snapshot: events,
                damage,
            },
            state,
        ))
    }

    /// Appends events and fsyncs them (one fsync for the whole batch).
    pub fn append(&mut self, events: &[Event]) -> Result<(), JournalError> {
        if events.is_empty() {
            return Ok(());
        }
        let t = chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Millis, true);
        let mut out = Vec::with_capacity(events.len() * 128);
        for event in events {
            serde_json::to_writer(
                &mut out,
                &Line {
                    t: t.clone(),
                    event: event.clone(),
                },
            )
            .expect("serialisable");
            out.push(b'\n');
        }
        let io = |source| JournalError::Io {
            path: self.path.clone(),
            source,
        };
        self.file.write_all(&out).map_err(io)?;
        self.file.sync_data().map_err(io)?;
        self.len += out.len() as u64;
        self.since_snapshot += events.len() as u64;
        Ok(())
    }

    /// What replay found wrong with the journal (damaged lines set aside, or a
    /// journal shorter than its snapshot), once.
    pub fn take_damage(&mut self) -> Option<String> {
        self.damage.take()
    }

    /// Events appended since the last snapshot.
    pub fn since_snapshot(&self) -> u64 {
        self.since_snapshot
    }

    /// Writes the snapshot of `state` (which must include every appended event).
    pub fn snapshot(&mut self, state: &StateData) -> Result<(), JournalError> {
        let snap = Snapshot {
            journal_bytes: self.len,
            state: state.clone(),
        };
        let bytes = serde_json::to_vec(&snap).expect("serialisable");
        crate::fsutil::write_atomic(&self.snapshot, &bytes).map_err(|source| JournalError::Io {
            path: self.snapshot.clone(),
            source,
        })?;
        self.since_snapshot = 0;
        Ok(())
    }

    /// The journal file.
    pub fn path(&self) -> &Path {
        &self.path
    }
}
