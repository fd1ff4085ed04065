//! Counts per leg and stage, and failure reasons grouped, for `status` and
//! `watch`.

use super::record::TaskState;
use super::CampaignState;
use serde::Serialize;
use std::collections::BTreeMap;

/// Counts of one group of tasks, one per state.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
pub struct Counts {
    /// Not submitted.
    pub planned: usize,
    /// In the queue.
    pub queued: usize,
    /// Started.
    pub running: usize,
    /// Done.
    pub done: usize,
    /// Failed.
    pub failed: usize,
    /// Lost.
    pub lost: usize,
    /// Cancelled.
    pub cancelled: usize,
}

impl Counts {
    /// Adds one task in `state`.
    pub fn add(&mut self, state: TaskState) {
        *self.get_mut(state) += 1;
    }
    fn get_mut(&mut self, state: TaskState) -> &mut usize {
        match state {
            TaskState::Planned => &mut self.planned,
            TaskState::Queued => &mut self.queued,
            TaskState::Running => &mut self.running,
            TaskState::Done => &mut self.done,
            TaskState::Failed => &mut self.failed,
            TaskState::Lost => &mut self.lost,
            TaskState::Cancelled => &mut self.cancelled,
        }
    }
    /// The count of `state`.
    pub fn get(&self, state: TaskState) -> usize {
        let mut c = self.clone();
        *c.get_mut(state)
    }
    /// All tasks.
    pub fn total(&self) -> usize {
        self.planned
            + self.queued
            + self.running
            + self.done
            + self.failed
            + self.lost
            + self.cancelled
    }
    /// Queued or running.
    pub fn live(&self) -> usize {
        self.queued + self.running
    }
}

/// One kind of failure and the tasks that share it.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct ReasonGroup {
    /// Failure class label (`walltime`, `exit code`, `lost`, …).
    pub kind: String,
    /// The first task's reason text (the others' differ at most in paths and
    /// numbers).
    pub reason: String,
    /// Tasks (ids) of this kind.
    pub tasks: Vec<String>,
    /// What to do next.
    pub next: String,
}

/// The whole campaign at a glance.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
pub struct Summary {
    /// Every task.
    pub total: Counts,
    /// Per `leg/stage` (legs in plan order).
    pub groups: Vec<(String, Counts)>,
    /// Failed and lost tasks, grouped by reason.
    pub reasons: Vec<ReasonGroup>,
    /// Tasks that failed and have no attempt left.
    pub exhausted: Vec<String>,
    /// Live tasks gone from the queue whose exit marker legwork is waiting for.
    pub awaiting_marker: Vec<String>,
}

impl Summary {
    /// The summary of `state` (`max_attempts` decides `exhausted`).
    pub fn of(state: &CampaignState) -> Summary {
        Self::with_limit(state, u32::MAX)
    }

    /// As [`Summary::of`], naming the failed tasks that used `max_attempts`.
    pub fn with_limit(state: &CampaignState, max_attempts: u32) -> Summary {
        let mut s = Summary::default();
        let mut order: Vec<String> = Vec::new();
        let mut groups: BTreeMap<String, Counts> = BTreeMap::new();
        let mut reasons: BTreeMap<String, (String, Vec<String>, String)> = BTreeMap::new();
        for (i, t) in state.plan().tasks.iter().enumerate() {
            let key = format!("{}/{}", t.leg, t.stage);
            let r = state.data().tasks.get(&t.id);
            let st = r.map(|r| r.state).unwrap_or_default();
            s.total.add(st);
            if !groups.contains_key(&key) {
                order.push(key.clone());
            }
            groups.entry(key).or_default().add(st);
            if r.is_some_and(|r| st.is_live() && r.awaiting_marker_since.is_some()) {
                s.awaiting_marker.push(t.id.clone());
            }
            if matches!(st, TaskState::Failed | TaskState::Lost) {
                let r = r.expect("failed tasks have records");
                let kind = r.kind.map(|k| k.label()).unwrap_or("unknown").to_string();
                reasons
                    .entry(kind)
                    .or_insert_with(|| {
                        (
                            r.reason.clone().unwrap_or_default(),
                            Vec::new(),
                            super::reasons::next_step(r.kind).to_string(),
                        )
                    })
                    .1
                    .push(t.id.clone());
                if r.attempt >= max_attempts
                    && r.kind != Some(super::record::FailureKind::Unreadable)
                {
                    s.exhausted.push(state.plan().tasks[i].id.clone());
                }
            }
        }
        s.groups = order
            .into_iter()
            .map(|k| {
                let c = groups.remove(&k).unwrap();
                (k, c)
            })
            .collect();
        s.reasons = reasons
            .into_iter()
            .map(|(kind, (reason, tasks, next))| ReasonGroup {
                kind,
                reason,
                tasks,
                next,
            })
            .collect();
        s
    }

    /// Whether every task is done.
    pub fn all_done(&self) -> bool {
        self.total.done == self.total.total()
    }
}
