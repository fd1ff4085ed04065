//! Cost and time: core-hours and GPU-hours used so far, from every attempt's
//! start and exit marker (`.attempts.jsonl`, falling back to `.started.json` /
//! `.exited.json`) times the cores and GPUs the task requested; per leg and in
//! total, with failed attempts apart; the completion rate and an ETA.
//!
//! The rules, in one place:
//!
//! - An attempt's time is its exit marker's end minus its start (as
//!   [`super::markers::Exited::elapsed_s`]); its cost is that time × the task's
//!   requested `cpus` (core-hours) and × its `gpus` (GPU-hours).
//! - An attempt *succeeded* when it exited 0 without a signal, unless legwork
//!   recorded that attempt as failed (output missing or short); every other
//!   ended attempt is *failed* (a non-zero exit, a signal, a walltime kill, a
//!   cancellation).
//! - An attempt with a start and no exit is *running* (counted to `now`) when
//!   its task is live on that attempt, else *lost*: counted, its time unknown.
//! - The completion rate is tasks done per hour of *busy time*: the union of
//!   every attempt's [start, end] (so idle days between two runs do not count);
//!   the ETA is the tasks not done at that rate.
//! - "To go" estimates what the tasks not done will cost: per stage, the mean
//!   core-hours of its succeeded attempts (the requested walltime × cores where
//!   none succeeded yet), and at most their requested walltime × cores.

use super::record::{TaskRecord, TaskState};
use super::CampaignState;
use crate::plan::Task;
use chrono::{DateTime, Utc};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::Path;

/// Hours spent by some attempts.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Hours {
    /// Attempts counted.
    pub attempts: usize,
    /// Core-hours: wall time × requested cores.
    pub core_h: f64,
    /// GPU-hours: wall time × requested GPUs.
    pub gpu_h: f64,
}

impl Hours {
    fn add(&mut self, seconds: f64, task: &Task) {
        let h = seconds.max(0.0) / 3600.0;
        self.attempts += 1;
        self.core_h += h * f64::from(task.resources.cpus);
        self.gpu_h += h * f64::from(task.resources.gpus);
    }
    fn merge(&mut self, o: &Hours) {
        self.attempts += o.attempts;
        self.core_h += o.core_h;
        self.gpu_h += o.gpu_h;
    }
}

/// The cost of one leg (every subject and replica of it), or of the campaign.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct LegCost {
    /// Leg name (`total` for the campaign).
    pub leg: String,
    /// Tasks of this leg.
    pub tasks: usize,
    /// Of them done.
    pub done: usize,
    /// Attempts that succeeded.
    pub succeeded: Hours,
    /// Attempts that failed (counted apart).
    pub failed: Hours,
    /// Attempts running now, counted up to `as_of`.
    pub running: Hours,
    /// Attempts with a start and no exit whose task is no longer on them
    /// (their time is unknown and not counted).
    pub lost_attempts: usize,
    /// Estimated core-hours of the tasks not done.
    pub to_go_core_h: f64,
    /// Estimated GPU-hours of the tasks not done.
    pub to_go_gpu_h: f64,
    /// The most the tasks not done may take: requested walltime × cores.
    pub to_go_limit_core_h: f64,
}

impl LegCost {
    /// Core-hours used so far: succeeded, failed and running.
    pub fn used_core_h(&self) -> f64 {
        self.succeeded.core_h + self.failed.core_h + self.running.core_h
    }
    /// GPU-hours used so far.
    pub fn used_gpu_h(&self) -> f64 {
        self.succeeded.gpu_h + self.failed.gpu_h + self.running.gpu_h
    }
    fn merge(&mut self, o: &LegCost) {
        self.tasks += o.tasks;
        self.done += o.done;
        self.succeeded.merge(&o.succeeded);
        self.failed.merge(&o.failed);
        self.running.merge(&o.running);
        self.lost_attempts += o.lost_attempts;
        self.to_go_core_h += o.to_go_core_h;
        self.to_go_gpu_h += o.to_go_gpu_h;
        self.to_go_limit_core_h += o.to_go_limit_core_h;
    }
}

/// Cost and time of a campaign, as of one moment.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Costs {
    /// When measured (UTC, RFC 3339).
    pub as_of: String,
    /// Per leg, in plan order.
    pub legs: Vec<LegCost>,
    /// The whole campaign.
    pub total: LegCost,
    /// Hours during which at least one attempt ran.
    pub busy_h: f64,
    /// Tasks done per busy hour (absent until a task is done).
    pub rate_per_h: Option<f64>,
    /// Busy hours until every task is done at that rate (0 when all are done).
    pub eta_h: Option<f64>,
}

/// One attempt as the markers tell it.
#[derive(Debug, Clone, PartialEq)]
pub struct Attempt {
    /// Attempt number.
    pub attempt: u32,
    /// Start.
    pub start: Option<DateTime<Utc>>,
    /// End, when it has an exit marker.
    pub end: Option<DateTime<Utc>>,
    /// Exited 0 without a signal.
    pub clean: bool,
}

fn time(s: &str) -> Option<DateTime<Utc>> {
    DateTime::parse_from_rfc3339(s)
        .ok()
        .map(|t| t.with_timezone(&Utc))
}

/// Every attempt of the task in `dir`, in attempt order.
pub fn attempts(dir: &Path) -> Vec<Attempt> {
    let mut by: BTreeMap<u32, Attempt> = BTreeMap::new();
    let mut note = |v: &serde_json::Value| {
        let Some(n) = v.get("attempt").and_then(|a| a.as_u64()) else {
            return;
        };
        let a = by.entry(n as u32).or_insert(Attempt {
            attempt: n as u32,
            start: None,
            end: None,
            clean: false,
        });
        let t = v.get("time").and_then(|t| t.as_str()).and_then(time);
        if v.get("code").is_some() {
            a.end = t;
            a.start = v
                .get("started")
                .and_then(|s| s.as_str())
                .and_then(time)
                .or(a.start);
            a.clean = v.get("code").and_then(|c| c.as_i64()) == Some(0)
                && v.get("signal").map_or(true, |s| s.is_null());
        } else if a.start.is_none() {
            a.start = t;
        }
    };
    match std::fs::read_to_string(dir.join(super::markers::HISTORY)) {
        // A torn last line (the wrapper was killed while appending) is skipped.
        Ok(text) => text
            .lines()
            .filter_map(|l| serde_json::from_str(l).ok())
            .for_each(|v| note(&v)),
        Err(_) => {
            for f in [super::markers::STARTED, super::markers::EXITED] {
                if let Some(v) = std::fs::read(dir.join(f))
                    .ok()
                    .and_then(|b| serde_json::from_slice(&b).ok())
                {
                    note(&v);
                }
            }
        }
    }
    by.into_values().collect()
}

/// What one task has cost and what it leaves to do.
struct TaskCost {
    cost: LegCost,
    spans: Vec<(DateTime<Utc>, DateTime<Utc>)>,
}

fn task_cost(root: &Path, task: &Task, record: &TaskRecord, now: DateTime<Utc>) -> TaskCost {
    let mut cost = LegCost {
        tasks: 1,
        done: usize::from(record.state == TaskState::Done),
        ..Default::default()
    };
    let mut spans = Vec::new();
    if record.attempt == 0 {
        return TaskCost { cost, spans };
    }
    for a in attempts(&root.join(&task.dir)) {
        let current = a.attempt == record.attempt;
        match (a.start, a.end) {
            (Some(s), Some(e)) => {
                let rejected =
                    current && matches!(record.state, TaskState::Failed | TaskState::Lost);
                let secs = (e - s).num_milliseconds() as f64 / 1000.0;
                if a.clean && !rejected {
                    cost.succeeded.add(secs, task);
                } else {
                    cost.failed.add(secs, task);
                }
                spans.push((s, e));
            }
            (Some(s), None) if current && record.state.is_live() => {
                cost.running
                    .add((now - s).num_milliseconds() as f64 / 1000.0, task);
                spans.push((s, now.max(s)));
            }
            (Some(_), None) => cost.lost_attempts += 1,
            _ => {}
        }
    }
    TaskCost { cost, spans }
}

/// Hours covered by the union of `spans`.
pub fn busy_hours(mut spans: Vec<(DateTime<Utc>, DateTime<Utc>)>) -> f64 {
    spans.sort();
    let mut total = 0.0;
    let mut cur: Option<(DateTime<Utc>, DateTime<Utc>)> = None;
    for (s, e) in spans {
        cur = match cur {
            Some((cs, ce)) if s <= ce => Some((cs, ce.max(e))),
            Some((cs, ce)) => {
                total += (ce - cs).num_milliseconds() as f64;
                Some((s, e))
            }
            None => Some((s, e)),
        };
    }
    if let Some((cs, ce)) = cur {
        total += (ce - cs).num_milliseconds() as f64;
    }
    total / 3_600_000.0
}

/// The costs of the campaign in `state`, as of `now`.
pub fn measure(state: &CampaignState, now: DateTime<Utc>) -> Costs {
    let plan = state.plan();
    let mut legs: Vec<LegCost> = Vec::new();
    let mut spans = Vec::new();
    // Per stage: (succeeded core-h, succeeded GPU-h, attempts) for the mean.
    let mut stage_mean: BTreeMap<(String, String), Hours> = BTreeMap::new();
    let mut costs: Vec<LegCost> = Vec::with_capacity(plan.tasks.len());
    for (i, task) in plan.tasks.iter().enumerate() {
        let tc = task_cost(state.root(), task, &state.record(i), now);
        stage_mean
            .entry((task.leg.clone(), task.stage.clone()))
            .or_default()
            .merge(&tc.cost.succeeded);
        spans.extend(tc.spans);
        costs.push(tc.cost);
    }
    for (task, mut c) in plan.tasks.iter().zip(costs) {
        if c.done == 0 {
            let limit_h = task.resources.walltime_s as f64 / 3600.0;
            let m = &stage_mean[&(task.leg.clone(), task.stage.clone())];
            let (core, gpu) = if m.attempts > 0 {
                (m.core_h / m.attempts as f64, m.gpu_h / m.attempts as f64)
            } else {
                (
                    limit_h * f64::from(task.resources.cpus),
                    limit_h * f64::from(task.resources.gpus),
                )
            };
            c.to_go_core_h = core;
            c.to_go_gpu_h = gpu;
            c.to_go_limit_core_h = limit_h * f64::from(task.resources.cpus);
        }
        match legs.iter_mut().find(|l| l.leg == task.leg) {
            Some(l) => l.merge(&c),
            None => legs.push(LegCost {
                leg: task.leg.clone(),
                ..c
            }),
        }
    }
    summarise(legs, busy_hours(spans), now)
}

fn summarise(legs: Vec<LegCost>, busy_h: f64, now: DateTime<Utc>) -> Costs {
    let mut total = LegCost {
        leg: "total".into(),
        ..Default::default()
    };
    legs.iter().for_each(|l| total.merge(l));
    let rate = (busy_h > 0.0 && total.done > 0).then(|| total.done as f64 / busy_h);
    let left = total.tasks - total.done;
    let eta_h = if left == 0 {
        Some(0.0)
    } else {
        rate.map(|r| left as f64 / r)
    };
    Costs {
        as_of: now.to_rfc3339_opts(chrono::SecondsFormat::Secs, true),
        legs,
        total,
        busy_h,
        rate_per_h: rate,
        eta_h,
    }
}

/// Hours as "45 s", "12 min", "3.5 h" or "2.1 d".
pub fn human_hours(h: f64) -> String {
    let m = h * 60.0;
    if m < 1.0 {
        format!("{:.0} s", (m * 60.0).max(1.0))
    } else if m < 120.0 {
        format!("{m:.0} min")
    } else if m < 48.0 * 60.0 {
        format!("{h:.1} h")
    } else {
        format!("{:.1} d", h / 24.0)
    }
}

/// A number of hours in a table: three significant decimals for small values.
pub fn hours_text(h: f64) -> String {
    if h == 0.0 {
        "0".into()
    } else if h < 0.01 {
        format!("{h:.4}")
    } else if h < 10.0 {
        format!("{h:.2}")
    } else {
        format!("{h:.1}")
    }
}

/// The cost table `status` prints.
pub fn table(c: &Costs) -> String {
    let w = c.legs.iter().map(|l| l.leg.len()).max().unwrap_or(5).max(9);
    let mut out = format!(
        "\ncost so far (requested cores and GPUs × time between the task markers), as of {}:\n{:<w$} {:>7} {:>10} {:>9} {:>14} {:>12} {:>14} {:>16}\n",
        c.as_of, "leg", "done", "core-h", "GPU-h", "failed core-h", "failed GPU-h", "running core-h", "to go core-h"
    );
    let gpus = c.total.used_gpu_h() > 0.0 || c.total.to_go_gpu_h > 0.0;
    for l in c.legs.iter().chain(std::iter::once(&c.total)) {
        out.push_str(&format!(
            "{:<w$} {:>7} {:>10} {:>9} {:>14} {:>12} {:>14} {:>16}\n",
            l.leg,
            format!("{}/{}", l.done, l.tasks),
            hours_text(l.used_core_h()),
            hours_text(l.used_gpu_h()),
            format!("{} ({})", hours_text(l.failed.core_h), l.failed.attempts),
            hours_text(l.failed.gpu_h),
            hours_text(l.running.core_h),
            format!(
                "~{} (≤{})",
                hours_text(l.to_go_core_h),
                hours_text(l.to_go_limit_core_h)
            ),
        ));
    }
    if !gpus {
        out.push_str("(no task requests GPUs)\n");
    }
    if c.total.lost_attempts > 0 {
        out.push_str(&format!(
            "{} attempt(s) started and never wrote an exit marker; their time is unknown and not counted\n",
            c.total.lost_attempts
        ));
    }
    out.push_str(&rate_line(c));
    out.push('\n');
    out
}

/// "rate 12.0 tasks/h over 1.5 h of running time · ETA 20 min".
pub fn rate_line(c: &Costs) -> String {
    match (c.rate_per_h, c.eta_h) {
        (_, Some(0.0)) => format!(
            "every task is done; {} of running time",
            human_hours(c.busy_h)
        ),
        (Some(r), Some(e)) => format!(
            "rate {r:.1} tasks/h over {} of running time · ETA {} of running time for the {} tasks not done",
            human_hours(c.busy_h),
            human_hours(e),
            c.total.tasks - c.total.done
        ),
        _ => "rate and ETA unknown (no task done yet)".into(),
    }
}

/// The fragment a progress record carries: "3.2 core-h (0.4 failed), 0 GPU-h".
pub fn record_fragment(c: &Costs) -> String {
    format!(
        "{} core-h ({} failed) · {} GPU-h ({} failed)",
        hours_text(c.total.used_core_h()),
        hours_text(c.total.failed.core_h),
        hours_text(c.total.used_gpu_h()),
        hours_text(c.total.failed.gpu_h)
    )
}

/// `results/costs.csv`: one row per leg and a total row.
pub fn csv(c: &Costs) -> String {
    let mut out = String::from("leg,tasks,done,core_h,gpu_h,succeeded_attempts,succeeded_core_h,succeeded_gpu_h,failed_attempts,failed_core_h,failed_gpu_h,running_attempts,running_core_h,running_gpu_h,lost_attempts,to_go_core_h,to_go_gpu_h,to_go_limit_core_h\n");
    for l in c.legs.iter().chain(std::iter::once(&c.total)) {
        out.push_str(&format!(
            "{},{},{},{:.6},{:.6},{},{:.6},{:.6},{},{:.6},{:.6},{},{:.6},{:.6},{},{:.6},{:.6},{:.6}\n",
            l.leg,
            l.tasks,
            l.done,
            l.used_core_h(),
            l.used_gpu_h(),
            l.succeeded.attempts,
            l.succeeded.core_h,
            l.succeeded.gpu_h,
            l.failed.attempts,
            l.failed.core_h,
            l.failed.gpu_h,
            l.running.attempts,
            l.running.core_h,
            l.running.gpu_h,
            l.lost_attempts,
            l.to_go_core_h,
            l.to_go_gpu_h,
            l.to_go_limit_core_h
        ));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn t(s: &str) -> DateTime<Utc> {
        time(s).unwrap()
    }

    #[test]
    fn busy_time_is_the_union_of_the_spans() {
        // [0,2] ∪ [1,3] ∪ [5,6] h = 3 + 1 = 4 h (interval union, by hand).
        let spans = vec![
            (t("2026-01-01T00:00:00Z"), t("2026-01-01T02:00:00Z")),
            (t("2026-01-01T05:00:00Z"), t("2026-01-01T06:00:00Z")),
            (t("2026-01-01T01:00:00Z"), t("2026-01-01T03:00:00Z")),
        ];
        assert!((busy_hours(spans) - 4.0).abs() < 1e-12);
        assert_eq!(busy_hours(Vec::new()), 0.0);
    }

    #[test]
    fn history_lines_pair_by_attempt_and_a_torn_line_is_skipped() {
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(
            dir.path().join(super::super::markers::HISTORY),
            concat!(
                "{\"time\":\"2026-01-01T00:00:00.5Z\",\"host\":\"h\",\"job\":\"1\",\"attempt\":1,\"pid\":3}\n",
                "{\"time\":\"2026-01-01T00:30:00.5Z\",\"started\":\"2026-01-01T00:00:00.5Z\",\"job\":\"1\",\"attempt\":1,\"code\":1,\"signal\":null}\n",
                "{\"time\":\"2026-01-01T01:00:00Z\",\"host\":\"h\",\"job\":\"2\",\"attempt\":2,\"pid\":4}\n",
                "{\"time\":\"2026-01-01T02:00:00Z\",\"started\":\"2026-01-01T01:00:00Z\",\"job\":\"2\",\"attempt\":2,\"code\":0,\"signal\":null}\n",
                "{\"time\":\"2026-01-01T03:00:00Z\",\"host\":\"h\",\"job\":\"3\",\"att",
            ),
        )
        .unwrap();
        let a = attempts(dir.path());
        assert_eq!(a.len(), 2);
        assert!(!a[0].clean && a[1].clean);
        assert_eq!(
            (a[1].end.unwrap() - a[1].start.unwrap()).num_seconds(),
            3600
        );
    }
}
