//! A campaign's life after its first launch: finished tasks run again on
//! purpose ([`rerun`]) and finished windows asked for more frames than they
//! hold (*short*, [`is_short`]) continued from their checkpoints
//! ([`extend_short`]). Nothing here runs by itself: `status` only shows what is
//! outdated or short, and the verbs `rerun`, `extend`, `resume` and `run` call
//! these.
//!
//! Every attempt's submission records the hash of its `task.sh` and the frames
//! its output had to hold ([`super::SubmittedTask`]); that is what a done task
//! is compared with. Before a task runs again its previous output is kept in
//! `previous/attempt-N/` of its own directory ([`PREVIOUS`]): moved there for a
//! rerun, copied there for an extension (the engine continues from the files in
//! place). Neither is ever deleted. The next attempt goes through
//! [`super::submit_ready`], so every attempt still runs exactly once.

use super::journal::Event;
use super::record::{SubmittedTask, TaskState};
use super::{CampaignState, Context, Selection, StateError, SubmitSummary};
use crate::plan::{Plan, TaskIndex};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// The folder of a task directory that keeps earlier attempts' outputs.
pub const PREVIOUS: &str = "previous";

/// The record in each `previous/attempt-N/` saying why it was kept.
pub const KEPT: &str = ".kept.json";

/// Extension targets: task id → frames (`.legwork/extensions.json`).
pub const EXTENSIONS: &str = "extensions.json";

/// Why an attempt's output was kept aside.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Why {
    /// The task runs again from the start (`legwork rerun`).
    Rerun,
    /// The task continues to more frames (`legwork extend`, a raised `frames`).
    Extend,
}

/// The contents of [`KEPT`].
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct Kept {
    /// The attempt whose output this is.
    pub attempt: u32,
    /// Why it was kept.
    pub why: Why,
    /// The frames that attempt had to hold, if any.
    #[serde(default)]
    pub frames: Option<u64>,
    /// When (UTC, RFC 3339).
    pub time: String,
}

/// `dir/previous/attempt-N`.
pub fn previous_dir(dir: &Path, attempt: u32) -> PathBuf {
    dir.join(PREVIOUS).join(format!("attempt-{attempt}"))
}

/// The hash of `dir/task.sh` as the render manifest spells it.
pub fn script_hash(dir: &Path) -> Option<String> {
    std::fs::read(dir.join(crate::render::TASK_FILE))
        .ok()
        .map(|b| crate::render::manifest::hash(&b))
}

/// What the submission of task `ti`'s current attempt recorded.
pub fn submitted(state: &CampaignState, ti: TaskIndex) -> Option<&SubmittedTask> {
    let id = &state.plan.tasks[ti].id;
    let r = state.data.tasks.get(id)?;
    let s = state.data.submissions.get(&r.submission?)?;
    s.tasks
        .iter()
        .find(|t| &t.task == id && t.attempt == r.attempt)
}

/// For a done task whose output must now hold more frames than when it ran:
/// (frames it had to hold then, frames it must hold now). A task submitted with
/// no frame target (or before targets were recorded) is short when `check`
/// says its output does not hold the target now.
pub fn is_short(
    state: &CampaignState,
    ti: TaskIndex,
    check: &dyn Fn(TaskIndex) -> bool,
) -> Option<(Option<u64>, u64)> {
    if state.state(ti) != TaskState::Done {
        return None;
    }
    let want = state.plan.tasks[ti].frames?;
    match submitted(state, ti).and_then(|s| s.frames) {
        Some(had) if had >= want => None,
        Some(had) => Some((Some(had), want)),
        None if check(ti) => None,
        None => Some((None, want)),
    }
}

/// Every short task of the selection, in plan order.
pub fn short_tasks(
    state: &CampaignState,
    sel: &Selection,
    check: &dyn Fn(TaskIndex) -> bool,
) -> Vec<(TaskIndex, Option<u64>, u64)> {
    (0..state.plan.tasks.len())
        .filter(|&ti| sel.matches(&state.plan.tasks[ti], state.state(ti)))
        .filter_map(|ti| is_short(state, ti, check).map(|(had, want)| (ti, had, want)))
        .collect()
}

/// Reads the extension targets of the campaign rooted at `root` (none when the
/// file does not exist).
pub fn load_extensions(root: &Path) -> Result<BTreeMap<String, u64>, StateError> {
    let path = root.join(".legwork").join(EXTENSIONS);
    match std::fs::read(&path) {
        Ok(b) => serde_json::from_slice(&b).map_err(|e| StateError::Task {
            task: path.display().to_string(),
            detail: format!("unreadable extension targets: {e}; restore it, or delete it to drop every `legwork extend` target"),
        }),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(BTreeMap::new()),
        Err(e) => Err(StateError::Task {
            task: path.display().to_string(),
            detail: e.to_string(),
        }),
    }
}

/// Raises the frames of every task of `plan` that `legwork extend` asked more
/// of (a target never lowers what the campaign file asks).
pub fn apply_extensions(plan: &mut Plan, targets: &BTreeMap<String, u64>) {
    for t in plan.tasks.iter_mut() {
        if let Some(&f) = targets.get(&t.id) {
            t.frames = Some(t.frames.map_or(f, |now| now.max(f)));
        }
    }
}

/// Records new targets (merged over the old ones, never lower) in the state's
/// extension file, atomically, and raises the state's plan to them.
pub fn set_targets(
    state: &mut CampaignState,
    new: &BTreeMap<String, u64>,
) -> Result<(), StateError> {
    let mut all = load_extensions(&state.root)?;
    for (id, &f) in new {
        let e = all.entry(id.clone()).or_insert(f);
        *e = (*e).max(f);
    }
    let path = state.dir.join(EXTENSIONS);
    let text = serde_json::to_vec_pretty(&all).expect("a map of numbers serialises");
    crate::fsutil::write_atomic(&path, &text).map_err(|e| StateError::Task {
        task: path.display().to_string(),
        detail: e.to_string(),
    })?;
    apply_extensions(&mut state.plan, &all);
    Ok(())
}

/// What [`rerun`] and [`extend_short`] did.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Requeued {
    /// Tasks put back for one more attempt.
    pub tasks: Vec<String>,
    /// Of those, how many continue from a checkpoint.
    pub restarted: usize,
    /// Where each one's previous output was kept (relative to the root).
    pub kept: Vec<PathBuf>,
    /// The submission that followed (none when `submit` was false).
    pub submitted: SubmitSummary,
}

/// Runs the selected done tasks again from the start, each once more (the
/// next attempt): its previous output is moved to `previous/attempt-N/`, its script
/// re-rendered, and it is submitted with whatever waits for it. `only` (when
/// given) restricts the selection further (e.g. to the outdated tasks).
pub fn rerun(
    state: &mut CampaignState,
    sched: &mut dyn crate::scheduler::Scheduler,
    ctx: &Context,
    sel: &Selection,
    only: Option<&dyn Fn(TaskIndex) -> bool>,
) -> Result<Requeued, StateError> {
    super::poll(state, sched, ctx)?;
    let chosen: Vec<TaskIndex> = (0..state.plan.tasks.len())
        .filter(|&ti| state.state(ti) == TaskState::Done)
        .filter(|&ti| sel.matches(&state.plan.tasks[ti], TaskState::Done))
        .filter(|&ti| only.map_or(true, |f| f(ti)))
        .collect();
    let mut out = requeue(state, ctx, &chosen, Why::Rerun)?;
    out.submitted = super::ops::submit_ready_in(state, sched, ctx, sel)?;
    Ok(out)
}

/// Puts every short task of the selection back for one more attempt that
/// continues from its checkpoint (`task.restart`, the new target as
/// `task.frames`), its output copied to `previous/attempt-N/` first; submits
/// them when `submit` is true (else the caller's own submission does).
pub fn extend_short(
    state: &mut CampaignState,
    sched: &mut dyn crate::scheduler::Scheduler,
    ctx: &Context,
    sel: &Selection,
    submit: bool,
) -> Result<Requeued, StateError> {
    let plan = state.plan.clone();
    let check = |ti: TaskIndex| {
        let dir = state.task_dir(&plan.tasks[ti]);
        ctx.hooks.check_output(&plan, ti, &dir).is_ok()
    };
    let chosen: Vec<TaskIndex> = short_tasks(state, sel, &check)
        .into_iter()
        .map(|(ti, _, _)| ti)
        .collect();
    let mut out = requeue(state, ctx, &chosen, Why::Extend)?;
    if submit && !out.tasks.is_empty() {
        out.submitted = super::ops::submit_ready_in(state, sched, ctx, sel)?;
    }
    Ok(out)
}

/// Keeps each chosen task's output, re-renders its script for the next
/// attempt, then journals it planned (in that order: a task returns to the plan
/// only once its previous output is safe and its next script is in place).
fn requeue(
    state: &mut CampaignState,
    ctx: &Context,
    chosen: &[TaskIndex],
    why: Why,
) -> Result<Requeued, StateError> {
    let mut out = Requeued::default();
    let mut render = Vec::with_capacity(chosen.len());
    for &ti in chosen {
        let task = &state.plan.tasks[ti];
        let dir = state.task_dir(task);
        let r = state.record(ti);
        let frames = submitted(state, ti).and_then(|s| s.frames);
        let kept = keep_output(&dir, r.attempt, why, frames).map_err(|e| StateError::Task {
            task: task.id.clone(),
            detail: format!(
                "could not keep its previous output aside: {e}; nothing was resubmitted for it"
            ),
        })?;
        let restart = why == Why::Extend && ctx.hooks.has_checkpoint(&state.plan, ti, &dir);
        out.restarted += usize::from(restart);
        out.kept.push(
            kept.strip_prefix(&state.root)
                .unwrap_or(&kept)
                .to_path_buf(),
        );
        render.push((ti, r.attempt + 1, restart));
    }
    let mut events = Vec::with_capacity(render.len());
    for &(ti, next, _) in &render {
        let id = state.plan.tasks[ti].id.clone();
        out.tasks.push(id.clone());
        events.push(Event::Task {
            task: id,
            state: TaskState::Planned,
            attempt: next - 1,
            reason: None,
            kind: None,
            walltime_s: None,
        });
    }
    super::ops::back_to_plan(state, ctx, &render, events)?;
    Ok(out)
}

/// Keeps attempt `attempt`'s output in `previous/attempt-N/` (a free name if
/// that exists already): for a rerun every visible file but `task.sh` is moved
/// there; for an extension they are copied (the engine continues from them).
/// The markers and the attempt history (hidden files) stay where they are.
fn keep_output(
    dir: &Path,
    attempt: u32,
    why: Why,
    frames: Option<u64>,
) -> std::io::Result<PathBuf> {
    let mut target = previous_dir(dir, attempt);
    let mut n = 2;
    while target.exists() {
        target = dir.join(PREVIOUS).join(format!("attempt-{attempt}-{n}"));
        n += 1;
    }
    std::fs::create_dir_all(&target)?;
    for entry in std::fs::read_dir(dir)? {
        let entry = entry?;
        let name = entry.file_name();
        let s = name.to_string_lossy();
        if s.starts_with('.') || s == PREVIOUS || s == crate::render::TASK_FILE {
            continue;
        }
        match why {
            Why::Rerun => std::fs::rename(entry.path(), target.join(&name))?,
            Why::Extend => copy_all(&entry.path(), &target.join(&name))?,
        }
    }
    let kept = Kept {
        attempt,
        why,
        frames,
        time: chrono::Utc::now().to_rfc3339(),
    };
    let text = serde_json::to_vec_pretty(&kept).expect("serialises");
    crate::fsutil::write_atomic(&target.join(KEPT), &text)?;
    crate::fsutil::sync_dir(dir)?;
    Ok(target)
}

/// Copies a file, or a folder and everything in it.
fn copy_all(from: &Path, to: &Path) -> std::io::Result<()> {
    if std::fs::symlink_metadata(from)?.is_dir() {
        std::fs::create_dir_all(to)?;
        for e in std::fs::read_dir(from)? {
            let e = e?;
            copy_all(&e.path(), &to.join(e.file_name()))?;
        }
        Ok(())
    } else {
        std::fs::copy(from, to).map(|_| ())
    }
}

/// For a task that is not done but whose previous attempt was (it is being
/// rerun or extended): the folder holding that attempt's output, and why.
pub fn kept_for(dir: &Path, attempt: u32) -> Option<(PathBuf, Kept)> {
    // Planned: the journal's attempt is the one that finished; queued or
    // running: the one before.
    [attempt, attempt.saturating_sub(1)]
        .into_iter()
        .filter(|&a| a > 0)
        .find_map(|a| {
            let d = previous_dir(dir, a);
            let k: Kept = serde_json::from_slice(&std::fs::read(d.join(KEPT)).ok()?).ok()?;
            Some((d, k))
        })
}
