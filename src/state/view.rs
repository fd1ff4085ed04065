//! A read-only view of a campaign's state, for the commands that only look
//! (`status` while another legwork holds the campaign, `collect`): the snapshot
//! and the journal read without the writer lock and without changing either.
//!
//! Consistency without a lock: the writer appends whole lines and fsyncs them,
//! and replaces the snapshot by a rename, so a reader sees an older snapshot
//! (whose `journal_bytes` the journal has reached) plus every complete line
//! after it. A last line still being written (no line end, or not yet valid
//! JSON at the very end) is left out: the view is the state as of the last
//! complete event. A bad line before the end is corruption and an error, as for
//! the writer.

use super::journal::{JournalError, Line, Snapshot};
use super::{CampaignState, StateData, StateError};
use crate::plan::Plan;
use std::path::Path;

impl CampaignState {
    /// Opens a read-only view of the campaign rooted at `root`: no lock is taken
    /// and nothing is written. [`CampaignState::commit`] on it is an error.
    ///
    /// # Errors
    ///
    /// An unreadable journal, or a corrupt line before its end.
    pub fn open_read_only(root: &Path, plan: Plan) -> Result<CampaignState, StateError> {
        let dir = root.join(".legwork");
        let data = read_state(&dir)?;
        let index = plan
            .tasks
            .iter()
            .enumerate()
            .map(|(i, t)| (t.id.clone(), i))
            .collect();
        Ok(CampaignState {
            root: root.to_path_buf(),
            dir,
            plan,
            index,
            data,
            journal: None,
            pending: Vec::new(),
            recovery: None,
            _lock: None,
        })
    }

    /// Whether this is a read-only view.
    pub fn is_read_only(&self) -> bool {
        self.journal.is_none()
    }

    /// The journal, or an error for a read-only view.
    pub(super) fn writable(&mut self) -> Result<&mut super::Journal, StateError> {
        let dir = self.dir.clone();
        self.journal.as_mut().ok_or_else(|| {
            StateError::Journal(JournalError::Io {
                path: dir.join("journal.jsonl"),
                source: std::io::Error::new(
                    std::io::ErrorKind::PermissionDenied,
                    "a read-only view of the campaign cannot write its journal (a legwork bug: this command should have taken the lock)",
                ),
            })
        })
    }
}

/// Snapshot plus the complete journal lines after it, read without writing.
fn read_state(dir: &Path) -> Result<StateData, JournalError> {
    let path = dir.join("journal.jsonl");
    let (mut state, start) = match std::fs::read(dir.join("snapshot.json")) {
        Ok(bytes) => match serde_json::from_slice::<Snapshot>(&bytes) {
            Ok(s) => (s.state, s.journal_bytes),
            Err(_) => (StateData::default(), 0),
        },
        Err(_) => (StateData::default(), 0),
    };
    let bytes = match std::fs::read(&path) {
        Ok(b) => b,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(StateData::default()),
        Err(source) => return Err(JournalError::Io { path, source }),
    };
    let start = if start as usize > bytes.len() {
        state = StateData::default();
        0
    } else {
        start as usize
    };
    let mut rest = &bytes[start..];
    let mut lineno = 0usize;
    while let Some(end) = rest.iter().position(|&b| b == b'\n') {
        let (line, tail) = rest.split_at(end + 1);
        rest = tail;
        lineno += 1;
        match serde_json::from_slice::<Line>(line) {
            Ok(l) => state.apply(&l.event),
            Err(_) if rest.is_empty() => break,
            Err(e) => {
                return Err(JournalError::Corrupt {
                    path,
                    line: lineno,
                    detail: e.to_string(),
                })
            }
        }
    }
    Ok(state)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::state::Event;
    use std::io::Write;

    #[test]
    fn a_torn_last_line_is_left_out_and_nothing_is_written() {
        let d = tempfile::tempdir().unwrap();
        let dir = d.path().join(".legwork");
        let (mut j, _) = crate::state::Journal::open(&dir).unwrap();
        j.append(&[Event::Task {
            task: "a/complex/r1/w00/production".into(),
            state: crate::state::TaskState::Done,
            attempt: 1,
            reason: None,
            kind: None,
            walltime_s: None,
        }])
        .unwrap();
        let path = dir.join("journal.jsonl");
        let mut f = std::fs::OpenOptions::new()
            .append(true)
            .open(&path)
            .unwrap();
        f.write_all(b"{\"t\":\"2026-01-01T00:00:00Z\",\"ev")
            .unwrap();
        let before = std::fs::read(&path).unwrap();
        let state = read_state(&dir).unwrap();
        assert_eq!(state.tasks.len(), 1);
        assert_eq!(
            std::fs::read(&path).unwrap(),
            before,
            "a reader writes nothing"
        );
    }
}
