//! `legwork status`: one poll of the scheduler, then a table per leg and stage
//! (planned / queued / running / done / failed / lost / cancelled) with failure
//! reasons grouped; `--json` for scripts; `--rescan` rebuilds the state from the
//! tree and the scheduler first.
//!
//! Also the glue every scheduler verb shares: open the campaign, its state and
//! its scheduler ([`with_campaign`]), and the task selection options.

use crate::cli::Global;
use crate::exit::Exit;
use crate::scheduler::{Scheduler, SchedulerKind};
use crate::state::{self, CampaignState, Context, Selection, StateError, Summary, TaskState};
use std::path::{Path, PathBuf};
use std::time::Duration;

/// Options of `legwork status`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
    /// The campaign's tree is here instead of the file's `root:`.
    #[arg(long, value_name = "DIR")]
    pub root: Option<PathBuf>,
    /// Print JSON instead of the table.
    #[arg(long)]
    pub json: bool,
    /// Rebuild the state from the task markers and the scheduler before showing it.
    #[arg(long)]
    pub rescan: bool,
    /// List every task's id in each failure group (default: the first five).
    #[arg(long)]
    pub all: bool,
    /// Seconds to wait for another legwork holding the campaign's lock.
    #[arg(long, default_value_t = 10.0)]
    pub lock_wait: f64,
}

/// Which tasks a verb touches. Every option may be repeated or comma-separated;
/// tasks must match every option given.
#[derive(Debug, Clone, Default, clap::Args)]
pub struct SelectArgs {
    /// Only these edges (`a+b`).
    #[arg(long = "edge", value_delimiter = ',', value_name = "A+B")]
    pub edges: Vec<String>,
    /// Only these ligands (absolute or solvation campaigns).
    #[arg(long = "ligand", value_delimiter = ',', value_name = "ID")]
    pub ligands: Vec<String>,
    /// Only these legs.
    #[arg(long = "leg", value_delimiter = ',', value_name = "NAME")]
    pub legs: Vec<String>,
    /// Only these replicas (from 1).
    #[arg(long = "replica", value_delimiter = ',', value_name = "N")]
    pub replicas: Vec<u32>,
    /// Only these windows (from 0).
    #[arg(long = "window", value_delimiter = ',', value_name = "N")]
    pub windows: Vec<usize>,
    /// Only these stages.
    #[arg(long = "stage", value_delimiter = ',', value_name = "NAME")]
    pub stages: Vec<String>,
    /// Only tasks in these states (planned, queued, running, done, failed, lost, cancelled).
    #[arg(long = "state", value_delimiter = ',', value_name = "STATE")]
    pub states: Vec<TaskState>,
    /// Only tasks whose id starts with this (e.g. `ork-01+ork-02/complex/r1/`).
    #[arg(long = "task", value_name = "ID")]
    pub tasks: Vec<String>,
}

impl SelectArgs {
    /// As a library selection.
    pub fn selection(&self) -> Selection {
        let mut subjects = self.edges.clone();
        subjects.extend(self.ligands.iter().cloned());
        Selection {
            subjects,
            legs: self.legs.clone(),
            replicas: self.replicas.clone(),
            windows: self.windows.clone(),
            stages: self.stages.clone(),
            states: self.states.clone(),
            tasks: self.tasks.clone(),
        }
    }
}

/// An open campaign: its state (locked), scheduler and operation context.
pub struct Opened<'a> {
    /// The state, locked for writing.
    pub state: &'a mut CampaignState,
    /// The scheduler.
    pub sched: Box<dyn Scheduler>,
    /// Names, config and hooks.
    pub ctx: Context<'a>,
}

/// Turns a state error into the exit code a user should see.
pub fn state_exit(e: StateError) -> anyhow::Error {
    match e {
        StateError::Lock(l) => Exit::busy(l.to_string()).into(),
        other => anyhow::Error::new(other),
    }
}

/// Opens the campaign in `file`, its state and scheduler, and runs `f`.
pub fn with_campaign<T>(
    file: &Path,
    root: Option<PathBuf>,
    lock_wait: f64,
    global: &Global,
    f: impl FnOnce(&mut Opened) -> anyhow::Result<T>,
) -> anyhow::Result<T> {
    with_loaded(super::watch::load(file, root)?, lock_wait, global, f)
}

/// Opens the state and scheduler of an already loaded campaign, and runs `f`.
pub fn with_loaded<T>(
    loaded: super::watch::Loaded,
    lock_wait: f64,
    global: &Global,
    f: impl FnOnce(&mut Opened) -> anyhow::Result<T>,
) -> anyhow::Result<T> {
    let _ = global;
    let mut state = CampaignState::open(
        &loaded.root,
        loaded.plan.clone(),
        Duration::from_secs_f64(lock_wait.max(0.0)),
    )
    .map_err(state_exit)?;
    let sched = crate::scheduler::build(&loaded.config, &loaded.root, &loaded.name);
    let mut opened = Opened {
        state: &mut state,
        sched,
        ctx: Context {
            campaign: &loaded.name,
            config: &loaded.config,
            batch_template: loaded.batch_template.clone(),
            hooks: loaded.hooks.as_ref(),
            clock: &crate::state::SystemClock,
        },
    };
    f(&mut opened)
}

/// Runs `legwork status`. Without `--rescan` it never waits: when another
/// legwork holds the campaign (a `watch` or `run` that keeps the journal
/// current), it shows a read-only view of the journal instead of querying the
/// scheduler itself.
pub fn run(args: Args, global: &Global) -> anyhow::Result<()> {
    if !args.rescan {
        let loaded = super::watch::load(&args.file, args.root.clone())?;
        let dir = loaded.root.join(".legwork");
        match crate::state::CampaignLock::acquire(&dir, Duration::ZERO) {
            Ok(probe) => drop(probe),
            Err(crate::state::LockError::Busy { holder, .. }) => {
                return read_only_status(&args, &loaded, &holder, global);
            }
            Err(e) => return Err(state_exit(e.into())),
        }
        let campaign = loaded.campaign.clone();
        return with_loaded(loaded, args.lock_wait, global, |c| {
            show(&args, c, &campaign, global)
        });
    }
    let loaded = super::watch::load(&args.file, args.root.clone())?;
    let campaign = loaded.campaign.clone();
    with_loaded(loaded, args.lock_wait, global, |c| {
        show(&args, c, &campaign, global)
    })
}

/// The table (or JSON) from a read-only view, with a note saying whose.
fn read_only_status(
    args: &Args,
    loaded: &super::watch::Loaded,
    holder: &str,
    global: &Global,
) -> anyhow::Result<()> {
    let state =
        CampaignState::open_read_only(&loaded.root, loaded.plan.clone()).map_err(state_exit)?;
    let summary = Summary::with_limit(&state, loaded.config.max_attempts);
    if !global.quiet {
        eprintln!(
            "note: {holder} is following this campaign; this is its journal as of now (it queries the scheduler, so this status does not)"
        );
    }
    let life = super::life::life(&loaded.campaign, &state);
    if args.json {
        println!("{}", with_costs(&life.json(&summary)?, &state)?);
    } else {
        print!("{}", table(&summary, loaded.config.kind, args.all));
        print!("{}", cost_table(&state));
        print!("{}", life.text(args.all));
    }
    Ok(())
}

/// One poll (or a rescan), then the table or JSON.
fn show(
    args: &Args,
    c: &mut Opened,
    campaign: &crate::campaign::Campaign,
    global: &Global,
) -> anyhow::Result<()> {
    {
        if args.rescan {
            let n = state::rescan(c.state, c.sched.as_mut(), &c.ctx).map_err(state_exit)?;
            if !args.json && !global.quiet {
                println!("rescanned the tree and the scheduler: {n} tasks corrected");
            }
        } else {
            state::poll(c.state, c.sched.as_mut(), &c.ctx).map_err(state_exit)?;
        }
        let summary = Summary::with_limit(c.state, c.ctx.config.max_attempts);
        let life = super::life::life(campaign, c.state);
        if args.json {
            println!("{}", with_costs(&life.json(&summary)?, c.state)?);
        } else {
            print!("{}", table(&summary, c.sched.kind(), args.all));
            print!("{}", cost_table(c.state));
            print!("{}", life.text(args.all));
        }
        Ok(())
    }
}

/// The JSON `status --json` prints: the summary's keys and `costs`
/// ([`state::costs::Costs`]).
fn with_costs(json: &str, state: &CampaignState) -> anyhow::Result<String> {
    let mut v: serde_json::Value = serde_json::from_str(json)?;
    let costs = state::costs::measure(state, chrono::Utc::now());
    v["costs"] = serde_json::to_value(costs)?;
    Ok(serde_json::to_string_pretty(&v)?)
}

/// The cost table below the status table.
fn cost_table(state: &CampaignState) -> String {
    state::costs::table(&state::costs::measure(state, chrono::Utc::now()))
}

/// The status table as text.
pub fn table(s: &Summary, kind: SchedulerKind, all: bool) -> String {
    let mut out = String::new();
    let w = s
        .groups
        .iter()
        .map(|(k, _)| k.len())
        .max()
        .unwrap_or(5)
        .max(9);
    out.push_str(&format!("{:<w$}", "leg/stage"));
    for st in TaskState::ALL {
        out.push_str(&format!(" {:>9}", st.name()));
    }
    out.push('\n');
    let row = |out: &mut String, name: &str, c: &state::summary::Counts| {
        out.push_str(&format!("{name:<w$}"));
        for st in TaskState::ALL {
            out.push_str(&format!(" {:>9}", c.get(st)));
        }
        out.push('\n');
    };
    for (k, c) in &s.groups {
        row(&mut out, k, c);
    }
    row(&mut out, "total", &s.total);
    if !s.reasons.is_empty() {
        out.push_str("\nfailed and lost, by kind of reason:\n");
        for g in &s.reasons {
            let shown: Vec<&str> = g
                .tasks
                .iter()
                .take(if all { usize::MAX } else { 3 })
                .map(String::as_str)
                .collect();
            let more = g.tasks.len() - shown.len();
            out.push_str(&format!(
                "  [{}] {} task{}: {}{}\n      first: {}\n      next: {}\n",
                g.kind,
                g.tasks.len(),
                if g.tasks.len() == 1 { "" } else { "s" },
                shown.join(", "),
                if more > 0 {
                    format!(" (+{more} more; --all lists them)")
                } else {
                    String::new()
                },
                g.reason,
                g.next
            ));
        }
        let rerunnable = s.reasons.iter().any(|g| g.kind != "output unreadable");
        if !s.exhausted.is_empty() {
            out.push_str(&format!(
                "{} of them used every attempt (scheduler.max_attempts); fix the cause, then `legwork resume FILE --extra-attempts N`\n",
                s.exhausted.len()
            ));
        } else if rerunnable {
            out.push_str("run `legwork resume FILE` to resubmit them\n");
        }
    }
    if !s.awaiting_marker.is_empty() {
        out.push_str(&format!(
            "\n{} task{} left the queue without an exit marker yet ({}{}); legwork waits scheduler.marker_grace_seconds for a marker slowed by the shared filesystem before calling them lost\n",
            s.awaiting_marker.len(),
            if s.awaiting_marker.len() == 1 { "" } else { "s" },
            s.awaiting_marker.iter().take(3).cloned().collect::<Vec<_>>().join(", "),
            if s.awaiting_marker.len() > 3 { ", …" } else { "" }
        ));
    }
    if s.all_done() {
        out.push_str("every task is done\n");
    } else if s.total.live() > 0 && kind.runs_here() {
        out.push_str("the local executor runs the queued tasks in the background; `legwork watch FILE` follows them\n");
    }
    out
}
