//! What `status` and `collect` say about a campaign that changed after it ran:
//! finished tasks whose script would now render differently (*outdated*), and
//! finished windows asked for more frames than they hold (*short*). The verbs
//! that act on them are `rerun` and `extend` (and `resume`, `run` for short
//! windows); the state side is [`crate::state::life`].

use crate::analysis::{NoteKind, WorkNote};
use crate::campaign::Campaign;
use crate::plan::{Plan, TaskIndex};
use crate::render::manifest::{self, Manifest};
use crate::state::life::{self as state_life, Why};
use crate::state::{CampaignState, TaskState};
use rayon::prelude::*;
use serde::Serialize;
use std::collections::BTreeSet;
use std::path::PathBuf;

/// The outdated and short tasks of a campaign, for `status`.
#[derive(Debug, Clone, Default, Serialize)]
pub struct Life {
    /// Done tasks whose script would render differently now.
    pub outdated: Vec<String>,
    /// Done windows asked for more frames than they had to hold when they ran:
    /// (task, frames then, frames now).
    pub short: Vec<ShortTask>,
}

/// One short window.
#[derive(Debug, Clone, Serialize)]
pub struct ShortTask {
    /// Task id.
    pub task: String,
    /// The frames it had to hold when it ran (unknown for work recorded before
    /// targets were).
    pub had: Option<u64>,
    /// The frames it must hold now.
    pub wants: u64,
}

/// The done tasks of `state` whose recorded script differs from what `expand`
/// would render for their attempt now (the render manifest's hash when the
/// campaign's inputs are the ones last rendered, else rendered in memory).
pub fn outdated(campaign: &Campaign, state: &CampaignState) -> BTreeSet<TaskIndex> {
    let plan = state.plan();
    let man = Manifest::load(&campaign.root);
    let fresh = man.fingerprint == crate::render::fingerprint(campaign);
    let recorded: Vec<(TaskIndex, String, u32)> = (0..plan.tasks.len())
        .filter(|&ti| state.state(ti) == TaskState::Done)
        .filter_map(|ti| {
            let s = state_life::submitted(state, ti)?;
            Some((ti, s.script.clone()?, s.attempt))
        })
        .collect();
    if recorded.is_empty() {
        return BTreeSet::new();
    }
    let tera = crate::campaign::templates::load_tera(campaign).ok();
    let builder = crate::render::ContextBuilder::for_rendering(campaign, plan);
    recorded
        .par_iter()
        .filter(|(ti, hash, attempt)| {
            let rel = plan.tasks[*ti].dir.join(crate::render::TASK_FILE);
            let entry = rel.to_str().and_then(|r| man.entries.get(r));
            let restart = entry.is_some_and(|e| e.attempt == *attempt && e.restart);
            let now = match entry {
                Some(e) if fresh && e.attempt == *attempt => Some(e.hash.clone()),
                _ => tera.as_ref().and_then(|t| {
                    crate::render::render_one(t, &builder, campaign, plan, *ti, *attempt, restart)
                        .ok()
                        .map(|text| manifest::hash(text.as_bytes()))
                }),
            };
            // A template that no longer renders is `check`'s to report.
            now.is_some_and(|n| &n != hash)
        })
        .map(|(ti, _, _)| *ti)
        .collect()
}

/// Whether task `ti`'s output holds what it must now (the done check).
fn output_ok(campaign: &Campaign, plan: &Plan, ti: TaskIndex) -> bool {
    let dir = campaign.root.join(&plan.tasks[ti].dir);
    crate::collect::legs::check_task_output(campaign, plan, ti, &dir).is_ok()
}

/// The outdated and short tasks of the campaign.
pub fn life(campaign: &Campaign, state: &CampaignState) -> Life {
    let plan = state.plan();
    let check = |ti| output_ok(campaign, plan, ti);
    let short = state_life::short_tasks(state, &crate::state::Selection::all(), &check)
        .into_iter()
        .map(|(ti, had, wants)| ShortTask {
            task: plan.tasks[ti].id.clone(),
            had,
            wants,
        })
        .collect();
    Life {
        outdated: outdated(campaign, state)
            .into_iter()
            .map(|ti| plan.tasks[ti].id.clone())
            .collect(),
        short,
    }
}

impl Life {
    /// The lines `status` prints after its table (nothing when there is nothing
    /// to say).
    pub fn text(&self, all: bool) -> String {
        let shown = |ids: Vec<&str>| {
            let n = ids.len();
            let mut s: Vec<&str> = ids
                .into_iter()
                .take(if all { usize::MAX } else { 3 })
                .collect();
            if s.len() < n {
                s.push("…");
            }
            s.join(", ")
        };
        let mut out = String::new();
        if !self.outdated.is_empty() {
            out.push_str(&format!(
                "\noutdated: {} done task{} ran with a script that has changed since ({}); their results are kept and marked; `legwork rerun FILE --outdated` runs them again\n",
                self.outdated.len(),
                if self.outdated.len() == 1 { "" } else { "s" },
                shown(self.outdated.iter().map(String::as_str).collect()),
            ));
        }
        if !self.short.is_empty() {
            let first = &self.short[0];
            out.push_str(&format!(
                "\nshort: {} done window{} hold fewer frames than now asked ({}; first: {} of {}); `legwork resume FILE` extends them from their checkpoints\n",
                self.short.len(),
                if self.short.len() == 1 { "" } else { "s" },
                shown(self.short.iter().map(|s| s.task.as_str()).collect()),
                first.had.map_or("fewer".to_string(), |h| h.to_string()),
                first.wants,
            ));
        }
        out
    }

    /// `summary` as JSON with `outdated` and `short` added.
    pub fn json(&self, summary: &impl Serialize) -> serde_json::Result<String> {
        let mut v = serde_json::to_value(summary)?;
        if let Some(m) = v.as_object_mut() {
            m.insert(
                "outdated".into(),
                serde_json::json!({"count": self.outdated.len(), "tasks": self.outdated}),
            );
            m.insert(
                "short".into(),
                serde_json::json!({"count": self.short.len(), "tasks": self.short}),
            );
        }
        serde_json::to_string_pretty(&v)
    }
}

/// What `collect` reads and says for a changed campaign: which tasks count as
/// finished, where each window's output is, and a note per leg replica.
pub struct CollectView {
    /// Task → the folder its output is read from, for tasks being extended
    /// or rerun (their previous attempt's output).
    pub kept: std::collections::HashMap<TaskIndex, PathBuf>,
    /// A note per leg replica resting on outdated, short or kept outputs.
    pub notes: Vec<WorkNote>,
}

/// Looks at every analysed window of the campaign.
pub fn collect_view(campaign: &Campaign, state: &CampaignState) -> CollectView {
    let plan = state.plan();
    let stale = outdated(campaign, state);
    let mut view = CollectView {
        kept: Default::default(),
        notes: Vec::new(),
    };
    for set in &plan.windows {
        let mut old = Vec::new();
        let mut extending = Vec::new();
        let mut rerunning = Vec::new();
        let mut short = Vec::new();
        for (k, &t) in set.tasks.iter().enumerate() {
            let st = state.state(t);
            if st == TaskState::Done {
                if stale.contains(&t) {
                    old.push(k);
                }
                if state_life::is_short(state, t, &|ti| output_ok(campaign, plan, ti)).is_some() {
                    short.push(k);
                }
                continue;
            }
            let dir = campaign.root.join(&plan.tasks[t].dir);
            if let Some((kept, record)) = state_life::kept_for(&dir, state.record(t).attempt) {
                view.kept.insert(t, kept);
                match record.why {
                    Why::Extend => extending.push(k),
                    Why::Rerun => rerunning.push(k),
                }
            }
        }
        let mut note = |kind, windows: Vec<usize>, text: String| {
            view.notes.push(WorkNote {
                subject: set.subject.id(),
                leg: set.leg.clone(),
                replica: set.replica,
                kind,
                windows,
                note: text,
            })
        };
        if !old.is_empty() {
            let text = format!("rests on {} outdated window(s) ({}): their script changed since they ran; `legwork rerun FILE --outdated` runs them again", old.len(), list(&old));
            note(NoteKind::Outdated, old, text);
        }
        let extended = !extending.is_empty();
        if extended {
            let text = format!("being extended: window(s) {} run again; until they finish their previous frames are used", list(&extending));
            note(NoteKind::Extending, extending, text);
        }
        if !rerunning.is_empty() {
            let text = format!("being rerun: window(s) {} run again; until they finish their previous output is used", list(&rerunning));
            note(NoteKind::Extending, rerunning, text);
        }
        if !extended && !short.is_empty() {
            let text = format!("short: window(s) {} hold fewer frames than now asked; the frames that exist are used; `legwork resume FILE` extends them", list(&short));
            note(NoteKind::Extending, short, text);
        }
    }
    view
}

fn list(ws: &[usize]) -> String {
    ws.iter()
        .map(|w| w.to_string())
        .collect::<Vec<_>>()
        .join(", ")
}

/// For `run`: puts every short window back for its extension (submitted by the
/// watch that follows); returns how many.
pub fn extend_short_for_run(
    state: &mut CampaignState,
    sched: &mut dyn crate::scheduler::Scheduler,
    ctx: &crate::state::Context,
) -> anyhow::Result<usize> {
    let r = state_life::extend_short(state, sched, ctx, &crate::state::Selection::all(), false)
        .map_err(super::status::state_exit)?;
    Ok(r.tasks.len())
}
