//! How `run` and `watch` show progress: bars on a terminal; off a terminal
//! (`nohup`, a batch job, CI, a log file) one line per change, at most every
//! `--progress-every` seconds, so a log shows what happened without a line per
//! poll. A record reads
//!
//! ```text
//! 2026-12-02T15:10:00Z progress: 30/42 done · 12 running · 0 queued · 0 planned · 0 failed · 0 lost · 0 cancelled · since last: 12 submitted, 0 resubmitted · 9.8 tasks/min · ETA 1 min · 0.52 core-h (0.03 failed) · 0 GPU-h (0 failed)
//! ```
//!
//! The rate is tasks done since this process started, per minute of its wall
//! time; the ETA is the tasks not done at that rate (absent until a task is done).
//! The hours are the campaign's so far ([`crate::state::costs`]), measured from
//! a read-only view of the journal and the task markers when a record is printed.

use super::watch::Bars;
use crate::state::summary::Counts;
use crate::state::Summary;
use std::cell::RefCell;
use std::io::{IsTerminal, Write};
use std::time::{Duration, Instant};

/// Default seconds between progress records off a terminal.
pub const DEFAULT_EVERY_S: f64 = 60.0;

/// Measures the campaign's costs for a progress record (`None`: unknown now).
pub(crate) type CostSource = Box<dyn Fn() -> Option<crate::state::costs::Costs>>;

/// The costs of the campaign rooted at `root` with `plan`, from a read-only
/// view (the caller holds the state mutably while it watches).
pub(crate) fn cost_source(root: &std::path::Path, plan: &crate::plan::Plan) -> CostSource {
    let root = root.to_path_buf();
    let plan = plan.clone();
    Box::new(move || {
        let state = crate::state::CampaignState::open_read_only(&root, plan.clone()).ok()?;
        Some(crate::state::costs::measure(&state, chrono::Utc::now()))
    })
}

/// Progress shown by `run` and `watch`.
pub(crate) enum Follow {
    /// Standard error is a terminal: bars.
    Bars(Bars),
    /// Not a terminal: one-line records.
    Records(Box<RefCell<Records>>),
    /// `-q`.
    Quiet,
}

impl Follow {
    /// Bars when standard error is a terminal, else records at most every `every`.
    pub(crate) fn new(quiet: bool, every: Duration) -> Follow {
        if quiet {
            Follow::Quiet
        } else if std::io::stderr().is_terminal() {
            Follow::Bars(Bars::new(false))
        } else {
            Follow::Records(Box::new(RefCell::new(Records::new(every))))
        }
    }

    /// Progress records also carry the hours `costs` measures.
    pub(crate) fn with_costs(self, costs: CostSource) -> Follow {
        if let Follow::Records(r) = &self {
            r.borrow_mut().costs = Some(costs);
        }
        self
    }

    /// A new look at the campaign.
    pub(crate) fn update(&self, s: &Summary) {
        match self {
            Follow::Bars(b) => b.update(s),
            Follow::Records(r) => r.borrow_mut().update(s, false),
            Follow::Quiet => {}
        }
    }

    /// `n` failed or lost tasks were resubmitted.
    pub(crate) fn resubmitted(&self, n: usize) {
        if let Follow::Records(r) = self {
            r.borrow_mut().resubmitted += n;
        }
    }

    /// The end: bars left as they are, a last record if anything changed.
    pub(crate) fn finish(&self) {
        match self {
            Follow::Bars(b) => b.finish(),
            Follow::Records(r) => {
                let mut r = r.borrow_mut();
                if let Some(s) = r.latest.take() {
                    r.update(&s, true);
                }
            }
            Follow::Quiet => {}
        }
    }
}

/// The record writer's memory.
pub(crate) struct Records {
    every: Duration,
    start: Instant,
    done_at_start: Option<usize>,
    last_print: Option<Instant>,
    printed: Option<Counts>,
    latest: Option<Summary>,
    submitted: usize,
    resubmitted: usize,
    previous: Option<Counts>,
    costs: Option<CostSource>,
}

impl Records {
    fn new(every: Duration) -> Records {
        Records {
            every,
            start: Instant::now(),
            done_at_start: None,
            last_print: None,
            printed: None,
            latest: None,
            submitted: 0,
            resubmitted: 0,
            previous: None,
            costs: None,
        }
    }

    fn update(&mut self, s: &Summary, last: bool) {
        let c = &s.total;
        self.done_at_start.get_or_insert(c.done);
        if let Some(p) = &self.previous {
            // Tasks that left `planned` since the last look were submitted.
            self.submitted += p.planned.saturating_sub(c.planned);
        }
        self.previous = Some(c.clone());
        if self.printed.as_ref() == Some(c) {
            self.latest = None;
            return;
        }
        let due = self.last_print.map_or(true, |t| t.elapsed() >= self.every);
        if !due && !last {
            self.latest = Some(s.clone());
            return;
        }
        let mut line = self.line(c);
        if let Some(costs) = self.costs.as_ref().and_then(|f| f()) {
            line.push_str(" · ");
            line.push_str(&crate::state::costs::record_fragment(&costs));
        }
        let mut err = std::io::stderr().lock();
        let _ = writeln!(err, "{line}");
        self.last_print = Some(Instant::now());
        self.printed = Some(c.clone());
        self.latest = None;
        self.submitted = 0;
        self.resubmitted = 0;
    }

    fn line(&self, c: &Counts) -> String {
        let now = chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
        let minutes = self.start.elapsed().as_secs_f64() / 60.0;
        let gained = c.done - self.done_at_start.unwrap_or(c.done).min(c.done);
        let rate = (minutes > 0.0 && gained > 0).then(|| gained as f64 / minutes);
        let left = c.total() - c.done;
        let eta = match rate {
            _ if left == 0 => "ETA now".to_string(),
            Some(r) => format!("ETA {}", human_minutes(left as f64 / r)),
            None => "ETA unknown (nothing done yet)".to_string(),
        };
        format!(
            "{now} progress: {}/{} done · {} running · {} queued · {} planned · {} failed · {} lost · {} cancelled · since last: {} submitted, {} resubmitted · {} · {eta}",
            c.done,
            c.total(),
            c.running,
            c.queued,
            c.planned,
            c.failed,
            c.lost,
            c.cancelled,
            self.submitted,
            self.resubmitted,
            match rate {
                Some(r) => format!("{r:.1} tasks/min"),
                None => "rate unknown".to_string(),
            }
        )
    }
}

/// Minutes as "45 s", "12 min", "3.5 h" or "2.1 d".
fn human_minutes(m: f64) -> String {
    if m < 1.0 {
        format!("{:.0} s", (m * 60.0).max(1.0))
    } else if m < 120.0 {
        format!("{m:.0} min")
    } else if m < 48.0 * 60.0 {
        format!("{:.1} h", m / 60.0)
    } else {
        format!("{:.1} d", m / 1440.0)
    }
}
