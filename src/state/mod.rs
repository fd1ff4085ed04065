//! Campaign state: the journal, its snapshot and lock, task states, the tracker.
//!
//! [`CampaignState::open`] takes the campaign's lock and replays snapshot and
//! journal; the operations in [`ops`] ([`submit_ready`], [`poll`], [`resume`],
//! [`cancel`], [`watch_until_settled`], [`rescan`]) drive a
//! [`crate::scheduler::Scheduler`] and journal what they learn. Only this process
//! writes the journal; jobs write only their own task directory.

pub mod costs;
pub mod interrupt;
pub mod journal;
pub mod life;
pub mod lock;
pub mod markers;
pub mod ops;
pub mod outage;
pub mod reasons;
pub mod record;
pub mod recover;
pub mod selection;
pub mod submit_once;
pub mod summary;
mod tracker;
mod view;

pub use journal::{Event, Journal, JournalError};
pub use lock::{CampaignLock, LockError};
pub use ops::{
    cancel, poll, reconcile, rescan, resume, submit_ready, submit_ready_within,
    watch_until_settled, CancelSummary, PollSummary, ResumeSummary, Settled, SubmitSummary,
};
pub use record::{
    FailureKind, SubmissionRecord, SubmissionStatus, SubmittedTask, TaskRecord, TaskState,
};
pub use selection::Selection;
pub use summary::Summary;

use crate::plan::{Plan, Task, TaskIndex};
use crate::scheduler::{SchedulerConfig, SchedulerError};
use serde::{Deserialize, Serialize};
use std::collections::{BTreeMap, HashMap};
use std::path::{Path, PathBuf};
use std::time::Duration;
use thiserror::Error;

/// Everything the journal says, folded.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct StateData {
    /// Task id → record (tasks never submitted may be absent: planned).
    pub tasks: BTreeMap<String, TaskRecord>,
    /// Submission number → record.
    pub submissions: BTreeMap<u64, SubmissionRecord>,
    /// The next submission number.
    pub next_submission: u64,
}

impl StateData {
    /// Folds one event in.
    pub fn apply(&mut self, event: &Event) {
        match event {
            Event::Intent {
                sub,
                batch,
                name,
                tasks,
            } => {
                for t in tasks {
                    let r = self.tasks.entry(t.task.clone()).or_default();
                    r.state = TaskState::Queued;
                    r.attempt = t.attempt;
                    r.submission = Some(*sub);
                    r.reason = None;
                    r.kind = None;
                    r.awaiting_marker_since = None;
                }
                self.submissions.insert(
                    *sub,
                    SubmissionRecord {
                        batch: batch.clone(),
                        name: name.clone(),
                        tasks: tasks.clone(),
                        status: SubmissionStatus::Intent,
                        job: None,
                    },
                );
                self.next_submission = self.next_submission.max(sub + 1);
            }
            Event::Submitted { sub, job } => {
                if let Some(s) = self.submissions.get_mut(sub) {
                    s.status = SubmissionStatus::Submitted;
                    s.job = Some(job.clone());
                }
            }
            Event::Abandoned { sub, .. } => {
                if let Some(s) = self.submissions.get_mut(sub) {
                    s.status = SubmissionStatus::Abandoned;
                    for t in &s.tasks {
                        if let Some(r) = self.tasks.get_mut(&t.task) {
                            if r.submission == Some(*sub) {
                                r.state = TaskState::Planned;
                                r.attempt = t.attempt.saturating_sub(1);
                                r.submission = None;
                            }
                        }
                    }
                }
            }
            Event::Task {
                task,
                state,
                attempt,
                reason,
                kind,
                walltime_s,
            } => {
                let r = self.tasks.entry(task.clone()).or_default();
                r.state = *state;
                r.attempt = *attempt;
                r.reason = reason.clone();
                r.kind = *kind;
                r.awaiting_marker_since = None;
                if walltime_s.is_some() {
                    r.walltime_s = *walltime_s;
                }
            }
            Event::AwaitingMarker {
                task,
                attempt,
                since,
            } => {
                if let Some(r) = self.tasks.get_mut(task) {
                    if r.attempt == *attempt && r.state.is_live() {
                        r.awaiting_marker_since = Some(since.clone());
                    }
                }
            }
        }
    }
}

/// What went wrong with the campaign's state.
#[derive(Debug, Error)]
pub enum StateError {
    /// The lock is held by someone else.
    #[error(transparent)]
    Lock(#[from] LockError),
    /// The journal or snapshot.
    #[error(transparent)]
    Journal(#[from] JournalError),
    /// The scheduler.
    #[error(transparent)]
    Scheduler(#[from] SchedulerError),
    /// A hook (output check, re-render) failed for a task.
    #[error("task {task}: {detail}")]
    Task {
        /// Task id.
        task: String,
        /// What went wrong.
        detail: String,
    },
}

/// What legwork asks of the rest of the program for each task: whether its
/// output validates, how to re-render its script for another attempt, whether it
/// left a checkpoint.
pub trait TaskHooks {
    /// `Ok` when the task's output (after exit 0) is complete and valid; else a
    /// reason a user can act on (e.g. "window.tsv: 1200 of 2000 frames").
    fn check_output(&self, plan: &Plan, task: TaskIndex, dir: &Path) -> Result<(), String>;

    /// Re-renders the task's script for `attempt` with the restart flag.
    fn prepare_attempt(
        &self,
        plan: &Plan,
        task: TaskIndex,
        attempt: u32,
        restart: bool,
    ) -> Result<(), String>;

    /// Re-renders several tasks at once: (task, attempt, restart). Default: one
    /// [`TaskHooks::prepare_attempt`] each; override when rendering has a fixed
    /// cost per call (templates, manifest).
    fn prepare_attempts(
        &self,
        plan: &Plan,
        tasks: &[(TaskIndex, u32, bool)],
    ) -> Result<(), String> {
        for &(t, attempt, restart) in tasks {
            self.prepare_attempt(plan, t, attempt, restart)
                .map_err(|e| format!("{}: {e}", plan.tasks[t].id))?;
        }
        Ok(())
    }

    /// Whether the task left a checkpoint to restart from. Default: a file in its
    /// directory whose name starts with `checkpoint` or ends in `.ckpt`, `.cpt` or
    /// `.chk` (common practice, no source).
    fn has_checkpoint(&self, _plan: &Plan, _task: TaskIndex, dir: &Path) -> bool {
        std::fs::read_dir(dir)
            .map(|rd| {
                rd.flatten().any(|e| {
                    let n = e.file_name().to_string_lossy().into_owned();
                    n.starts_with("checkpoint")
                        || [".ckpt", ".cpt", ".chk"].iter().any(|x| n.ends_with(x))
                })
            })
            .unwrap_or(false)
    }
}

/// Hooks that trust exit codes alone and never re-render (tests, and campaigns
/// whose stages declare no output).
#[derive(Debug, Clone, Copy, Default)]
pub struct ExitCodeOnly;

impl TaskHooks for ExitCodeOnly {
    fn check_output(&self, _: &Plan, _: TaskIndex, _: &Path) -> Result<(), String> {
        Ok(())
    }
    fn prepare_attempt(&self, _: &Plan, _: TaskIndex, _: u32, _: bool) -> Result<(), String> {
        Ok(())
    }
}

/// What the operations need beyond the state and the scheduler.
pub struct Context<'a> {
    /// Campaign name (job names).
    pub campaign: &'a str,
    /// The `scheduler:` section.
    pub config: &'a SchedulerConfig,
    /// The campaign's own batch template, if it set one (absolute path).
    pub batch_template: Option<PathBuf>,
    /// Output checks and re-rendering.
    pub hooks: &'a dyn TaskHooks,
    /// What time it is (the late-marker wait); [`SystemClock`] but in tests.
    pub clock: &'a dyn Clock,
}

/// A source of the current time, so that waits measured in wall-clock time
/// (the late-marker grace) can be driven by a test without sleeping.
pub trait Clock: Sync {
    /// Now.
    fn now(&self) -> chrono::DateTime<chrono::Utc>;

    /// Waits `d` (a scheduler outage's back-off); a test clock advances instead.
    /// Returns early when Ctrl-C came.
    fn sleep(&self, d: std::time::Duration) {
        let end = std::time::Instant::now() + d;
        while !interrupt::interrupted() {
            let now = std::time::Instant::now();
            if now >= end {
                break;
            }
            std::thread::sleep((end - now).min(std::time::Duration::from_millis(50)));
        }
    }
}

/// The machine's clock.
#[derive(Debug, Clone, Copy, Default)]
pub struct SystemClock;

impl Clock for SystemClock {
    fn now(&self) -> chrono::DateTime<chrono::Utc> {
        chrono::Utc::now()
    }
}

/// Snapshot after this many journal events.
const SNAPSHOT_EVERY: u64 = 50_000;

/// A campaign's state, open for writing (the lock is held until drop), or a
/// read-only view of it ([`CampaignState::open_read_only`]: no lock, no journal).
pub struct CampaignState {
    root: PathBuf,
    dir: PathBuf,
    plan: Plan,
    index: HashMap<String, TaskIndex>,
    data: StateData,
    journal: Option<Journal>,
    pending: Vec<Event>,
    recovery: Option<String>,
    _lock: Option<CampaignLock>,
}

impl CampaignState {
    /// Opens the state of the campaign rooted at `root` (absolute), whose plan is
    /// `plan`: takes the lock (waiting up to `lock_wait`) and replays the journal.
    pub fn open(root: &Path, plan: Plan, lock_wait: Duration) -> Result<CampaignState, StateError> {
        let dir = root.join(".legwork");
        let lock = CampaignLock::acquire(&dir, lock_wait)?;
        let (mut journal, data) = Journal::open(&dir)?;
        let recovery = journal.take_damage();
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
            journal: Some(journal),
            pending: Vec::new(),
            recovery,
            _lock: Some(lock),
        })
    }

    /// The campaign root.
    pub fn root(&self) -> &Path {
        &self.root
    }

    /// `<root>/.legwork`.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// The plan.
    pub fn plan(&self) -> &Plan {
        &self.plan
    }

    /// Everything the journal says.
    pub fn data(&self) -> &StateData {
        &self.data
    }

    /// The index of a task id.
    pub fn task_index(&self, id: &str) -> Option<TaskIndex> {
        self.index.get(id).copied()
    }

    /// The record of task `i` (planned, attempt 0, if never submitted).
    pub fn record(&self, i: TaskIndex) -> TaskRecord {
        self.data
            .tasks
            .get(&self.plan.tasks[i].id)
            .cloned()
            .unwrap_or_default()
    }

    /// The state of task `i`.
    pub fn state(&self, i: TaskIndex) -> TaskState {
        self.data
            .tasks
            .get(&self.plan.tasks[i].id)
            .map(|r| r.state)
            .unwrap_or_default()
    }

    /// Task `i`'s directory (absolute).
    pub fn task_dir(&self, task: &Task) -> PathBuf {
        self.root.join(&task.dir)
    }

    /// Records an event (applied now, written at the next [`CampaignState::commit`]).
    pub fn record_event(&mut self, event: Event) {
        self.data.apply(&event);
        self.pending.push(event);
    }

    /// Writes and fsyncs the recorded events; snapshots when the journal has
    /// grown enough since the last one.
    pub fn commit(&mut self) -> Result<(), StateError> {
        let events = std::mem::take(&mut self.pending);
        if events.is_empty() && self.is_read_only() {
            return Ok(());
        }
        self.writable()?;
        let journal = self.journal.as_mut().expect("writable");
        journal.append(&events)?;
        if journal.since_snapshot() >= SNAPSHOT_EVERY {
            journal.snapshot(&self.data)?;
        }
        Ok(())
    }

    /// Why the state must be rebuilt from the tree (the journal was damaged or
    /// shorter than its snapshot), once.
    pub fn take_recovery(&mut self) -> Option<String> {
        self.recovery.take()
    }

    /// Writes a snapshot now.
    pub fn compact(&mut self) -> Result<(), StateError> {
        self.commit()?;
        let data = self.data.clone();
        self.writable()?.snapshot(&data)?;
        Ok(())
    }

    /// Counts and failure reasons per leg and stage.
    pub fn summary(&self) -> Summary {
        Summary::of(self)
    }
}

impl Drop for CampaignState {
    fn drop(&mut self) {
        if let (false, Some(journal)) = (self.pending.is_empty(), self.journal.as_mut()) {
            let events = std::mem::take(&mut self.pending);
            if let Err(e) = journal.append(&events) {
                tracing::error!("could not write the journal on exit: {e}");
            }
        }
    }
}

/// How long a command waits for the lock by default.
pub const DEFAULT_LOCK_WAIT: Duration = Duration::from_secs(10);
