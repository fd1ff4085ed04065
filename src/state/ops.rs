//! The operations on a campaign's state: submit what is ready, poll, resume,
//! cancel, watch until settled, rebuild from the tree. Each reconciles an
//! interrupted submission first, so a task is never submitted twice.

use super::record::{FailureKind, SubmissionStatus, SubmittedTask, TaskState};
use super::tracker::{self, classify, Verdict};
use super::{markers, CampaignState, Context, Event, StateError, Summary};
use crate::plan::{BatchDep, TaskIndex};
use crate::scheduler::{self, script, Dependency, Element, Scheduler, Submission};
use std::collections::{BTreeSet, HashMap};
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

/// What [`submit_ready`] did.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct SubmitSummary {
    /// Array jobs submitted.
    pub submissions: usize,
    /// Tasks submitted.
    pub tasks: usize,
    /// Ready tasks held back by `scheduler.max_queued`.
    pub held_back: usize,
    /// Tasks whose submission is left for the next round: it came back
    /// ambiguous and could not be resolved yet, or the time for this round's
    /// submissions was spent (so polling goes on while a controller is slow).
    pub deferred: usize,
}

/// What [`poll`] saw.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct PollSummary {
    /// Tasks whose state changed.
    pub changed: usize,
    /// Tasks that ended this poll.
    pub ended: usize,
    /// Tasks put back in the plan because a task they wait for failed.
    pub blocked: usize,
    /// Tasks gone from the queue whose exit marker legwork is still waiting for.
    pub awaiting_marker: usize,
}

/// What [`resume`] did.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct ResumeSummary {
    /// Failed or lost tasks put back for another attempt.
    pub requeued: Vec<String>,
    /// Of those, how many restart from a checkpoint.
    pub restarted: usize,
    /// Of those, how many got a longer walltime after a walltime kill.
    pub walltime_raised: usize,
    /// Failed or lost tasks with no attempt left.
    pub exhausted: Vec<String>,
    /// Unreadable outputs read again first (see [`super::reasons`]).
    pub revalidated: super::reasons::Revalidated,
    /// The submission that followed.
    pub submitted: SubmitSummary,
}

/// What [`cancel`] did.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct CancelSummary {
    /// Queued or running tasks cancelled in the scheduler.
    pub live: usize,
    /// Planned tasks that will not be submitted.
    pub planned: usize,
}

/// How [`watch_until_settled`] ended.
#[derive(Debug, Clone)]
pub struct Settled {
    /// The final summary.
    pub summary: Summary,
    /// Whether the stop flag ended it.
    pub interrupted: bool,
    /// Polls made.
    pub polls: u64,
}

/// Resolves submissions journalled as intent without a job id (a crash between
/// the two): by job name in the scheduler, else by the tasks' start markers, else
/// abandoned (the tasks return to the plan). Returns how many it resolved.
pub fn reconcile(
    state: &mut CampaignState,
    sched: &mut dyn Scheduler,
) -> Result<usize, StateError> {
    let intents: Vec<(u64, String, Vec<SubmittedTask>)> = state
        .data
        .submissions
        .iter()
        .filter(|(_, s)| s.status == SubmissionStatus::Intent)
        .map(|(n, s)| (*n, s.name.clone(), s.tasks.clone()))
        .collect();
    for (sub, name, tasks) in &intents {
        let ids = sched.find_by_name(name)?;
        if let Some(job) = ids.first() {
            if ids.len() > 1 {
                tracing::warn!("several jobs named {name}: {ids:?}; following {job}");
            }
            tracing::info!("submission {sub} ({name}) reached the scheduler as job {job}");
            state.record_event(Event::Submitted {
                sub: *sub,
                job: job.clone(),
            });
            continue;
        }
        let ran = tasks.iter().any(|t| {
            state
                .task_index(&t.task)
                .map(|i| state.task_dir(&state.plan.tasks[i]))
                .is_some_and(|d| markers::started(&d, t.attempt).is_some())
        });
        if ran {
            // It ran, but the scheduler has forgotten it: the markers decide.
            state.record_event(Event::Submitted {
                sub: *sub,
                job: String::new(),
            });
        } else {
            tracing::info!("submission {sub} ({name}) never reached the scheduler; its tasks return to the plan");
            state.record_event(Event::Abandoned {
                sub: *sub,
                why: "not found in the scheduler after an interrupted submission".into(),
            });
        }
    }
    state.commit()?;
    Ok(intents.len())
}

/// When the journal was found damaged or shorter than its snapshot, rebuilds
/// the state from the tree and the scheduler, with a one-line notice.
fn recover_if_damaged(
    state: &mut CampaignState,
    sched: &mut dyn Scheduler,
    ctx: &Context,
) -> Result<(), StateError> {
    if let Some(why) = state.take_recovery() {
        let n = rescan(state, sched, ctx)?;
        tracing::warn!(
            "{why}; rebuilt the state from the snapshot, the rest of the journal, the task directories and the scheduler ({n} tasks updated)"
        );
    }
    Ok(())
}

/// The job id holding the current attempt of task `i`, if it is live in a known job.
fn live_job(state: &CampaignState, i: TaskIndex) -> Option<(String, usize)> {
    let r = state.data.tasks.get(&state.plan.tasks[i].id)?;
    if !r.state.is_live() {
        return None;
    }
    let s = state.data.submissions.get(&r.submission?)?;
    let job = s.job.clone().filter(|j| !j.is_empty())?;
    let idx = s
        .tasks
        .iter()
        .find(|t| t.task == state.plan.tasks[i].id)?
        .index;
    Some((job, idx))
}

/// Submits every planned, selected task whose dependencies are done or queued,
/// batch by batch in dependency order, within `scheduler.max_queued`.
pub fn submit_ready(
    state: &mut CampaignState,
    sched: &mut dyn Scheduler,
    ctx: &Context,
    sel: &super::Selection,
) -> Result<SubmitSummary, StateError> {
    submit_ready_within(state, sched, ctx, sel, None)
}

/// As [`submit_ready`], but starts no new submission once `budget` has passed
/// (the rest waits for the next round, so a slow controller does not stall the
/// polls of `watch`).
pub fn submit_ready_within(
    state: &mut CampaignState,
    sched: &mut dyn Scheduler,
    ctx: &Context,
    sel: &super::Selection,
    time_budget: Option<Duration>,
) -> Result<SubmitSummary, StateError> {
    reconcile(state, sched)?;
    recover_if_damaged(state, sched, ctx)?;
    let started = Instant::now();
    let mut stalled = false;
    let mut rebuilt = false;
    let mut summary = SubmitSummary::default();
    let live = state
        .data
        .tasks
        .values()
        .filter(|r| r.state.is_live())
        .count();
    let mut budget = if ctx.config.max_queued == 0 {
        usize::MAX
    } else {
        (ctx.config.max_queued as usize).saturating_sub(live)
    };
    let mut wrapper = None;
    for b in 0..state.plan.batches.len() {
        let mut chosen = ready_members(state, b, sel);
        if !rebuilt
            && chosen
                .iter()
                .any(|&(_, ti)| super::recover::tree_knows_more(state, ti))
        {
            // The tree shows work the journal does not know: rebuild first
            // (once), then decide again.
            rebuilt = true;
            let n = rescan(state, sched, ctx)?;
            tracing::warn!(
                "the task directories show work the journal does not know (a lost or cut journal?): rebuilt the state from them and the scheduler ({n} tasks updated)"
            );
            chosen = ready_members(state, b, sel);
        }
        // Never submit an attempt the tree shows already ran.
        chosen.retain(|&(_, ti)| !super::recover::tree_knows_more(state, ti));
        if budget < chosen.len() {
            summary.held_back += chosen.len() - budget;
            chosen.truncate(budget);
        }
        if chosen.is_empty() {
            continue;
        }
        let spent = time_budget.is_some_and(|b| summary.submissions > 0 && started.elapsed() >= b);
        if stalled || spent {
            summary.deferred += chosen.len();
            continue;
        }
        let wrapper_path = match &wrapper {
            Some(w) => w,
            None => wrapper.insert(script::install_wrapper(&state.root)?),
        };
        let (submission, intent) = build_submission(state, &*sched, ctx, b, &chosen);
        script::render(
            sched.kind(),
            ctx.batch_template.as_deref(),
            &submission,
            ctx.campaign,
            &ctx.config.options,
            wrapper_path,
        )?;
        if !submit_one(state, sched, &submission, intent)? {
            summary.deferred += chosen.len();
            // The scheduler is struggling: the rest waits for the next round.
            stalled = true;
            continue;
        }
        summary.submissions += 1;
        summary.tasks += chosen.len();
        budget -= chosen.len();
    }
    Ok(summary)
}

/// The members of batch `b` that are planned, selected and whose dependencies
/// are done or live: (position in the batch, task index).
fn ready_members(
    state: &CampaignState,
    b: usize,
    sel: &super::Selection,
) -> Vec<(usize, TaskIndex)> {
    let batch = &state.plan.batches[b];
    let mut chosen = Vec::new();
    for (pos, &ti) in batch.tasks.iter().enumerate() {
        let task = &state.plan.tasks[ti];
        let st = state.state(ti);
        if st != TaskState::Planned || !sel.matches(task, st) {
            continue;
        }
        let ready = task
            .after
            .iter()
            .all(|&a| state.state(a) == TaskState::Done || live_job(state, a).is_some());
        if ready {
            chosen.push((pos, ti));
        }
    }
    chosen
}

/// The dependencies of `chosen` (members of batch `b`, at array `indices`) on
/// what is not done yet: element-wise when the scheduler can and the indices
/// line up, else on the whole job.
fn dependencies(
    state: &CampaignState,
    sched: &dyn Scheduler,
    b: usize,
    chosen: &[(usize, TaskIndex)],
    indices: &[usize],
) -> Vec<Dependency> {
    let elementwise_batches: BTreeSet<usize> = state.plan.batches[b]
        .after
        .iter()
        .filter_map(|d| match d {
            BatchDep::Elementwise(x) => Some(*x),
            BatchDep::All(_) => None,
        })
        .collect();
    let mut ok: BTreeSet<String> = BTreeSet::new();
    let mut corr: BTreeSet<String> = BTreeSet::new();
    for (k, &(_, ti)) in chosen.iter().enumerate() {
        for &a in &state.plan.tasks[ti].after {
            if state.state(a) == TaskState::Done {
                continue;
            }
            let (job, idx) = live_job(state, a).expect("checked ready");
            let ew = sched.elementwise_dependencies()
                && elementwise_batches.contains(&state.plan.tasks[a].batch)
                && idx == indices[k];
            if ew {
                corr.insert(job);
            } else {
                ok.insert(job);
            }
        }
    }
    let mut after: Vec<Dependency> = ok.iter().cloned().map(Dependency::AfterOk).collect();
    after.extend(
        corr.into_iter()
            .filter(|j| !ok.contains(j))
            .map(Dependency::AfterCorr),
    );
    after
}

/// The submission of `chosen` (members of batch `b`) as the next submission
/// number, and the journal's intent event for it.
fn build_submission(
    state: &CampaignState,
    sched: &dyn Scheduler,
    ctx: &Context,
    b: usize,
    chosen: &[(usize, TaskIndex)],
) -> (Submission, Event) {
    let batch = &state.plan.batches[b];
    let positions: Vec<usize> = chosen.iter().map(|c| c.0).collect();
    let indices = sched.array_indices(&positions);
    let after = dependencies(state, sched, b, chosen, &indices);
    let sub = state.data.next_submission.max(1);
    let name = scheduler::job_name(ctx.campaign, &batch.id, sub);
    let mut resources = batch.resources.clone();
    let mut elements = Vec::with_capacity(chosen.len());
    let mut journal_tasks = Vec::with_capacity(chosen.len());
    for (k, &(_, ti)) in chosen.iter().enumerate() {
        let task = &state.plan.tasks[ti];
        let r = state.record(ti);
        if let Some(w) = r.walltime_s {
            resources.walltime_s = resources.walltime_s.max(w);
        }
        elements.push(Element {
            array_index: indices[k],
            task_id: task.id.clone(),
            dir: state.task_dir(task),
            attempt: r.attempt + 1,
        });
        journal_tasks.push(SubmittedTask {
            task: task.id.clone(),
            attempt: r.attempt + 1,
            index: indices[k],
            script: super::life::script_hash(&state.task_dir(task)),
            frames: task.frames,
        });
    }
    let submission = Submission {
        name: name.clone(),
        batch_id: batch.id.clone(),
        elements,
        resources,
        after,
        throttle: ctx.config.array_throttle,
        root: state.root.clone(),
        script: state.dir.join("batches").join(format!("{name}.sh")),
        log_dir: state.dir.join("logs"),
    };
    let intent = Event::Intent {
        sub,
        batch: batch.id.clone(),
        name,
        tasks: journal_tasks,
    };
    (submission, intent)
}

/// Journals `intent` (fsynced: a crash from here on is resolved by job name),
/// then submits exactly once ([`super::submit_once`]), then journals the job id
/// — or the abandonment of a submission the scheduler certainly did not take.
/// A refusal is returned as the scheduler's error; false means the outcome is
/// left for the next round (unresolved, or not taken while the scheduler
/// answers only with transient failures).
fn submit_one(
    state: &mut CampaignState,
    sched: &mut dyn Scheduler,
    submission: &Submission,
    intent: Event,
) -> Result<bool, StateError> {
    use super::submit_once::{ambiguous, submit_exactly_once, SubmitOutcome};
    let Event::Intent { sub, .. } = intent else {
        unreachable!("build_submission makes an intent")
    };
    std::fs::create_dir_all(&submission.log_dir)
        .map_err(|e| scheduler::SchedulerError::io(&submission.log_dir, e))?;
    state.record_event(intent);
    state.commit()?;
    match submit_exactly_once(sched, submission, &std::thread::sleep) {
        SubmitOutcome::Taken(job) => {
            state.record_event(Event::Submitted { sub, job });
            state.commit()?;
            Ok(true)
        }
        SubmitOutcome::NotTaken(e) => {
            state.record_event(Event::Abandoned {
                sub,
                why: e.to_string(),
            });
            state.commit()?;
            if ambiguous(&e) {
                tracing::warn!(
                    "{}: not submitted this round ({e}); legwork tries again at the next poll",
                    submission.name
                );
                Ok(false)
            } else {
                Err(e.into())
            }
        }
        SubmitOutcome::Unresolved(_) => Ok(false),
    }
}

/// Asks the scheduler once about every live task's job and reads the markers of
/// those that ended; journals every change.
pub fn poll(
    state: &mut CampaignState,
    sched: &mut dyn Scheduler,
    ctx: &Context,
) -> Result<PollSummary, StateError> {
    reconcile(state, sched)?;
    recover_if_damaged(state, sched, ctx)?;
    let mut summary = PollSummary::default();
    let (live, jobs) = live_elements(state, &*sched);
    if live.is_empty() {
        return Ok(summary);
    }
    let result = super::outage::patiently(ctx, "the queue query", || sched.query(&jobs))?;
    let now = ctx.clock.now();
    let mut to_cancel = Vec::new();
    for (ti, element, attempt) in live {
        let task = &state.plan.tasks[ti];
        let dir = state.task_dir(task);
        let r = &state.data.tasks[&task.id];
        let walltime = r.walltime_s.unwrap_or(0).max(task.resources.walltime_s);
        let status = element.as_ref().and_then(|e| result.elements.get(e));
        let plan = &state.plan;
        let mut verdict = classify(status, &dir, attempt, walltime, &|| {
            ctx.hooks.check_output(plan, ti, &dir)
        });
        if let Verdict::Ended(_, reason, _) = &mut verdict {
            if ctx.config.marker_grace_s() > 0
                && tracker::marker_may_be_late(status, &dir, attempt)
                && wait_for_marker(state, ctx, ti, attempt, now, reason)
            {
                summary.awaiting_marker += 1;
                continue;
            }
        }
        if matches!(verdict, Verdict::Blocked) {
            to_cancel.extend(element);
        }
        record_verdict(state, ti, attempt, verdict, &mut summary);
    }
    if !to_cancel.is_empty() {
        sched.cancel(&to_cancel)?;
    }
    state.commit()?;
    Ok(summary)
}

/// (task index, element id if the job is known, attempt) of every live task,
/// and the jobs to ask the scheduler about.
#[allow(clippy::type_complexity)]
fn live_elements(
    state: &CampaignState,
    sched: &dyn Scheduler,
) -> (Vec<(TaskIndex, Option<String>, u32)>, Vec<String>) {
    let mut live = Vec::new();
    let mut jobs: BTreeSet<String> = BTreeSet::new();
    let mut index_of: HashMap<u64, HashMap<&str, usize>> = HashMap::new();
    for (ti, task) in state.plan.tasks.iter().enumerate() {
        let Some(r) = state.data.tasks.get(&task.id) else {
            continue;
        };
        if !r.state.is_live() {
            continue;
        }
        let Some(sub) = r.submission else {
            live.push((ti, None, r.attempt));
            continue;
        };
        let s = &state.data.submissions[&sub];
        let element = match s.job.as_deref() {
            Some(job) if !job.is_empty() => {
                let map = index_of.entry(sub).or_insert_with(|| {
                    s.tasks.iter().map(|t| (t.task.as_str(), t.index)).collect()
                });
                jobs.insert(job.to_string());
                map.get(task.id.as_str()).map(|&i| sched.element_id(job, i))
            }
            _ => None,
        };
        live.push((ti, element, r.attempt));
    }
    (live, jobs.into_iter().collect())
}

/// For a verdict that rests only on a missing exit marker: true while the
/// marker grace (`scheduler.marker_grace_seconds`, measured on `ctx.clock`)
/// has not passed since the wait began (journalling its start the first time);
/// once it has, adds the wait to `reason` and returns false.
fn wait_for_marker(
    state: &mut CampaignState,
    ctx: &Context,
    ti: TaskIndex,
    attempt: u32,
    now: chrono::DateTime<chrono::Utc>,
    reason: &mut Option<String>,
) -> bool {
    let grace = ctx.config.marker_grace_s();
    if grace == 0 {
        return false;
    }
    let id = state.plan.tasks[ti].id.clone();
    let waited = state.data.tasks[&id]
        .awaiting_marker_since
        .as_deref()
        .and_then(|t| chrono::DateTime::parse_from_rfc3339(t).ok())
        .map(|t| (now - t.with_timezone(&chrono::Utc)).num_seconds().max(0) as u64);
    match waited {
        Some(w) if w >= grace => {
            if let Some(why) = reason.as_mut() {
                why.push_str(&format!("; waited {w} s for it"));
            }
            false
        }
        Some(_) => true,
        None => {
            tracing::info!(
                "{id}: left the queue without an exit marker; waiting up to {grace} s for it (scheduler.marker_grace_seconds)"
            );
            state.record_event(Event::AwaitingMarker {
                task: id,
                attempt,
                since: now.to_rfc3339(),
            });
            true
        }
    }
}

/// Journals what the tracker decided about task `ti` and counts it.
fn record_verdict(
    state: &mut CampaignState,
    ti: TaskIndex,
    attempt: u32,
    verdict: Verdict,
    summary: &mut PollSummary,
) {
    let id = state.plan.tasks[ti].id.clone();
    let old = state.data.tasks[&id].state;
    let event = match verdict {
        Verdict::Live(s) if s == old => return,
        Verdict::Live(s) => Event::Task {
            task: id,
            state: s,
            attempt,
            reason: None,
            kind: None,
            walltime_s: None,
        },
        Verdict::Blocked => {
            summary.blocked += 1;
            Event::Task {
                task: id,
                state: TaskState::Planned,
                attempt: attempt.saturating_sub(1),
                reason: Some("waiting: a task it depends on failed".into()),
                kind: None,
                walltime_s: None,
            }
        }
        Verdict::Ended(s, reason, kind) => {
            summary.ended += 1;
            Event::Task {
                task: id,
                state: s,
                attempt,
                reason,
                kind,
                walltime_s: None,
            }
        }
    };
    summary.changed += 1;
    state.record_event(event);
}

/// Puts failed and lost selected tasks (and cancelled ones when the selection
/// names the cancelled state) back for another attempt, up to
/// `scheduler.max_attempts`: re-rendered with the restart flag when a checkpoint
/// exists, with the walltime multiplied by `scheduler.walltime_factor` after a
/// walltime kill; then submits what is ready. Queued and running tasks are never
/// touched.
pub fn resume(
    state: &mut CampaignState,
    sched: &mut dyn Scheduler,
    ctx: &Context,
    sel: &super::Selection,
) -> Result<ResumeSummary, StateError> {
    poll(state, sched, ctx)?;
    let mut summary = ResumeSummary {
        revalidated: super::reasons::revalidate_unreadable(state, ctx, sel)?,
        ..Default::default()
    };
    let with_cancelled = sel.states.contains(&TaskState::Cancelled);
    // A cancelled attempt may still be ending in the queue (Slurm's COMPLETING):
    // such tasks wait for a later resume rather than run twice at once.
    let still_ending = if with_cancelled {
        cancelled_still_in_queue(state, sched)?
    } else {
        Default::default()
    };
    let mut render = Vec::new();
    let mut events = Vec::new();
    for ti in 0..state.plan.tasks.len() {
        let st = state.state(ti);
        let eligible = matches!(st, TaskState::Failed | TaskState::Lost)
            || (with_cancelled && st == TaskState::Cancelled);
        let task = &state.plan.tasks[ti];
        if !eligible || !sel.matches(task, st) || still_ending.contains(&ti) {
            continue;
        }
        let r = state.record(ti);
        // A reader mistake: rerunning the engine would write the same output.
        if r.kind == Some(FailureKind::Unreadable) {
            continue;
        }
        if r.attempt >= ctx.config.max_attempts {
            summary.exhausted.push(task.id.clone());
            continue;
        }
        let dir = state.task_dir(task);
        let restart = ctx.hooks.has_checkpoint(&state.plan, ti, &dir);
        render.push((ti, r.attempt + 1, restart));
        let walltime_s = (r.kind == Some(FailureKind::Walltime)).then(|| {
            let now = r.walltime_s.unwrap_or(0).max(task.resources.walltime_s);
            ((now as f64) * ctx.config.walltime_factor.max(1.0)).ceil() as u64
        });
        summary.restarted += restart as usize;
        summary.walltime_raised += walltime_s.is_some() as usize;
        summary.requeued.push(task.id.clone());
        events.push(Event::Task {
            task: task.id.clone(),
            state: TaskState::Planned,
            attempt: r.attempt,
            reason: None,
            kind: None,
            walltime_s,
        });
    }
    back_to_plan(state, ctx, &render, events)?;
    summary.submitted = submit_ready_in(state, sched, ctx, sel)?;
    Ok(summary)
}

/// Renders each task's next attempt, then journals the events that put the
/// tasks back to `planned` and commits. Scripts first: a task goes back to the
/// plan only once its next attempt's script is in place.
pub(super) fn back_to_plan(
    state: &mut CampaignState,
    ctx: &Context,
    render: &[(TaskIndex, u32, bool)],
    events: Vec<Event>,
) -> Result<(), StateError> {
    ctx.hooks
        .prepare_attempts(&state.plan, render)
        .map_err(|detail| StateError::Task {
            task: format!("{} tasks", render.len()),
            detail,
        })?;
    for e in events {
        state.record_event(e);
    }
    state.commit()
}

/// Submits what is ready within `sel`, whatever task states it names (the
/// tasks it chose have just been put back to `planned`).
pub(super) fn submit_ready_in(
    state: &mut CampaignState,
    sched: &mut dyn Scheduler,
    ctx: &Context,
    sel: &super::Selection,
) -> Result<SubmitSummary, StateError> {
    let mut s = sel.clone();
    s.states.clear();
    submit_ready(state, sched, ctx, &s)
}

/// Cancelled tasks whose last attempt the scheduler still lists as live.
fn cancelled_still_in_queue(
    state: &CampaignState,
    sched: &mut dyn Scheduler,
) -> Result<BTreeSet<TaskIndex>, StateError> {
    let mut elements: Vec<(TaskIndex, String, String)> = Vec::new();
    for (ti, task) in state.plan.tasks.iter().enumerate() {
        let Some(r) = state.data.tasks.get(&task.id) else {
            continue;
        };
        if r.state != TaskState::Cancelled {
            continue;
        }
        let Some(s) = r.submission.and_then(|n| state.data.submissions.get(&n)) else {
            continue;
        };
        let (Some(job), Some(t)) = (
            s.job.clone().filter(|j| !j.is_empty()),
            s.tasks.iter().find(|t| t.task == task.id),
        ) else {
            continue;
        };
        elements.push((ti, sched.element_id(&job, t.index), job));
    }
    if elements.is_empty() {
        return Ok(BTreeSet::new());
    }
    let jobs: Vec<String> = elements
        .iter()
        .map(|e| e.2.clone())
        .collect::<BTreeSet<_>>()
        .into_iter()
        .collect();
    let result = sched.query(&jobs)?;
    Ok(elements
        .into_iter()
        .filter(|(_, e, _)| result.elements.get(e).is_some_and(|s| s.state.is_live()))
        .map(|(ti, _, _)| ti)
        .collect())
}

/// Cancels the selected queued and running tasks in the scheduler and marks the
/// selected planned ones cancelled, journalling `reason`.
pub fn cancel(
    state: &mut CampaignState,
    sched: &mut dyn Scheduler,
    sel: &super::Selection,
    reason: &str,
) -> Result<CancelSummary, StateError> {
    reconcile(state, sched)?;
    let mut summary = CancelSummary::default();
    let mut elements = Vec::new();
    let mut events = Vec::new();
    for ti in 0..state.plan.tasks.len() {
        let st = state.state(ti);
        let task = &state.plan.tasks[ti];
        if !(st.is_live() || st == TaskState::Planned) || !sel.matches(task, st) {
            continue;
        }
        let r = state.record(ti);
        if st.is_live() {
            if let Some((job, idx)) = live_job(state, ti) {
                elements.push(sched.element_id(&job, idx));
            }
            summary.live += 1;
        } else {
            summary.planned += 1;
        }
        events.push(Event::Task {
            task: task.id.clone(),
            state: TaskState::Cancelled,
            attempt: r.attempt,
            reason: Some(reason.to_string()),
            kind: None,
            walltime_s: None,
        });
    }
    if !elements.is_empty() {
        sched.cancel(&elements)?;
    }
    for e in events {
        state.record_event(e);
    }
    state.commit()?;
    Ok(summary)
}

/// Polls and submits (more as the queue drains) every `interval` until nothing
/// is queued or running and nothing more can be submitted, or `stop` is set.
/// `progress` sees the summary after each poll.
pub fn watch_until_settled(
    state: &mut CampaignState,
    sched: &mut dyn Scheduler,
    ctx: &Context,
    interval: Duration,
    stop: &AtomicBool,
    progress: &mut dyn FnMut(&Summary),
) -> Result<Settled, StateError> {
    let mut polls = 0;
    loop {
        poll(state, sched, ctx)?;
        polls += 1;
        let submitted = if stop.load(Ordering::SeqCst) {
            SubmitSummary::default()
        } else {
            submit_ready_within(state, sched, ctx, &super::Selection::all(), Some(interval))?
        };
        let summary = Summary::with_limit(state, ctx.config.max_attempts);
        progress(&summary);
        if stop.load(Ordering::SeqCst) {
            return Ok(Settled {
                summary,
                interrupted: true,
                polls,
            });
        }
        if summary.total.live() == 0 && submitted.tasks == 0 && submitted.deferred == 0 {
            return Ok(Settled {
                summary,
                interrupted: false,
                polls,
            });
        }
        let t = Instant::now();
        while t.elapsed() < interval {
            if stop.load(Ordering::SeqCst) {
                break;
            }
            std::thread::sleep(Duration::from_millis(50).min(interval));
        }
    }
}

/// Rebuilds every task's state from the tree (markers, output checks) and the
/// scheduler (one query for every job the journal knows), journals the
/// differences and writes a snapshot. Returns how many tasks changed.
pub fn rescan(
    state: &mut CampaignState,
    sched: &mut dyn Scheduler,
    ctx: &Context,
) -> Result<usize, StateError> {
    reconcile(state, sched)?;
    let mut latest: HashMap<String, (String, u32, usize)> = HashMap::new();
    let mut jobs = BTreeSet::new();
    for s in state.data.submissions.values() {
        if s.status != SubmissionStatus::Submitted {
            continue;
        }
        let job = s.job.clone().unwrap_or_default();
        if !job.is_empty() {
            jobs.insert(job.clone());
        }
        for t in &s.tasks {
            // Submissions iterate in number order: the last one wins.
            latest.insert(t.task.clone(), (job.clone(), t.attempt, t.index));
        }
    }
    let jobs: Vec<String> = jobs.into_iter().collect();
    let result = sched.query(&jobs)?;
    let mut changed = 0;
    for ti in 0..state.plan.tasks.len() {
        let task = &state.plan.tasks[ti];
        let dir = state.task_dir(task);
        let r = state.record(ti);
        let walltime = r.walltime_s.unwrap_or(0).max(task.resources.walltime_s);
        let plan = &state.plan;
        let check = || ctx.hooks.check_output(plan, ti, &dir);
        let in_tree = super::recover::tree_attempt(&dir);
        let (status, attempt) = match latest.get(&task.id) {
            // The tree has seen a later attempt than the journal (a cut journal).
            Some((_, attempt, _)) if in_tree > *attempt => (None, in_tree),
            Some((job, attempt, idx)) => {
                let st = (!job.is_empty())
                    .then(|| result.elements.get(&sched.element_id(job, *idx)))
                    .flatten();
                (Some(st), *attempt)
            }
            None => (None, in_tree),
        };
        let (new, reason, kind) = match status {
            Some(st) => match classify(st, &dir, attempt, walltime, &check) {
                Verdict::Live(s) => (s, None, None),
                Verdict::Blocked => (TaskState::Queued, None, None),
                Verdict::Ended(s, reason, kind) => (s, reason, kind),
            },
            None if attempt > 0 => match classify(None, &dir, attempt, walltime, &check) {
                Verdict::Ended(s, reason, kind) => (s, reason, kind),
                _ => (TaskState::Planned, None, None),
            },
            None => (TaskState::Planned, None, None),
        };
        // Cancelled through legwork stays cancelled unless the task ran to an end since.
        if r.state == TaskState::Cancelled && !matches!(new, TaskState::Done) {
            continue;
        }
        if new != r.state || attempt != r.attempt || reason != r.reason {
            changed += 1;
            state.record_event(Event::Task {
                task: task.id.clone(),
                state: new,
                attempt,
                reason,
                kind,
                walltime_s: None,
            });
        }
    }
    state.compact()?;
    Ok(changed)
}
