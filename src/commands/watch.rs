//! `legwork watch`: poll every `scheduler.poll_seconds`, submit more as the queue
//! drains, show progress bars per leg and overall, and stop when everything is
//! done or nothing more can progress. Ctrl-C stops watching; with the local
//! executor it also stops the running tasks and records them as cancelled (on a
//! cluster the jobs carry on in the queue).
//!
//! Also [`load`], the one place the scheduler verbs read a campaign.

use super::status::{state_exit, table, with_campaign};
use crate::cli::Global;
use crate::exit::Exit;
use crate::plan::Plan;
use crate::scheduler::SchedulerConfig;
use crate::state::{self, interrupt, Selection, Summary, TaskHooks};
use indicatif::{MultiProgress, ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::time::Duration;

/// Options of `legwork watch`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
    /// The campaign's tree is here instead of the file's `root:`.
    #[arg(long, value_name = "DIR")]
    pub root: Option<PathBuf>,
    /// Poll once, submit what is ready, print the table and exit.
    #[arg(long)]
    pub once: bool,
    /// Seconds between polls (default: the campaign's scheduler.poll_seconds).
    #[arg(long)]
    pub interval: Option<f64>,
    /// Seconds to wait for another legwork holding the campaign's lock.
    #[arg(long, default_value_t = 10.0)]
    pub lock_wait: f64,
    /// Off a terminal, print a progress record at most every this many seconds
    /// (when something changed). On a terminal, bars are drawn instead.
    #[arg(long, value_name = "SECONDS", default_value_t = super::progress::DEFAULT_EVERY_S)]
    pub progress_every: f64,
}

/// A campaign as the scheduler verbs need it.
pub struct Loaded {
    /// Campaign name.
    pub name: String,
    /// Root (absolute).
    pub root: PathBuf,
    /// The plan.
    pub plan: Plan,
    /// The `scheduler:` section.
    pub config: SchedulerConfig,
    /// The campaign's batch template (absolute), if it set one.
    pub batch_template: Option<PathBuf>,
    /// Output checks and re-rendering.
    pub hooks: Box<dyn TaskHooks>,
    /// The validated campaign itself.
    pub campaign: crate::campaign::Campaign,
}

/// Reads, validates and expands the campaign in `file` (bad input: exit 2).
pub fn load(file: &Path, root: Option<PathBuf>) -> anyhow::Result<Loaded> {
    let loaded = super::check::load_or_exit(file, root, false)?;
    let campaign = loaded.campaign;
    let mut plan = crate::plan::expand(&campaign);
    // `legwork extend` targets raise the campaign file's frames.
    crate::state::life::apply_extensions(
        &mut plan,
        &crate::state::life::load_extensions(&campaign.root)
            .map_err(|e| Exit::bad_input(e.to_string()))?,
    );
    let batch_template = campaign
        .scheduler
        .batch_template
        .as_ref()
        .map(|t| campaign.templates_dir.join(t));
    if let Some(t) = &batch_template {
        if !t.is_file() {
            return Err(Exit::bad_input(format!(
                "{}: scheduler.batch_template {} does not exist; copy one of legwork's templates/batch/*.sh.tera there, or remove the key to use the built-in one",
                campaign.file.display(),
                t.display()
            ))
            .into());
        }
    }
    Ok(Loaded {
        name: campaign.name.clone(),
        root: campaign.root.clone(),
        plan,
        config: campaign.scheduler.clone(),
        batch_template,
        hooks: campaign_hooks(campaign.clone()),
        campaign,
    })
}

/// Done means done with the campaign's own reader; reruns re-rendered by the
/// campaign's templates.
struct CampaignHooks {
    campaign: crate::campaign::Campaign,
}

impl TaskHooks for CampaignHooks {
    fn check_output(&self, plan: &Plan, task: usize, dir: &Path) -> Result<(), String> {
        crate::collect::legs::check_task_output(&self.campaign, plan, task, dir)
            .map(|_| ())
            .map_err(|e| {
                if e.rerun_can_fix() {
                    e.to_string()
                } else {
                    format!("{}{e}", crate::state::reasons::OUTPUT_UNREADABLE)
                }
            })
    }

    fn prepare_attempt(
        &self,
        plan: &Plan,
        task: usize,
        attempt: u32,
        restart: bool,
    ) -> Result<(), String> {
        crate::render::render_task(&self.campaign, plan, task, attempt, restart)
            .map(|_| ())
            .map_err(|e| e.to_string())
    }

    fn prepare_attempts(&self, plan: &Plan, tasks: &[(usize, u32, bool)]) -> Result<(), String> {
        if tasks.is_empty() {
            return Ok(());
        }
        crate::render::render_tasks(&self.campaign, plan, tasks)
            .map(|_| ())
            .map_err(|e| e.to_string())
    }
}

/// Runs `legwork watch`.
pub fn run(args: Args, global: &Global) -> anyhow::Result<()> {
    let stop = interrupt::install();
    with_campaign(&args.file, args.root.clone(), args.lock_wait, global, |c| {
        let kind = c.sched.kind();
        if args.once {
            state::poll(c.state, c.sched.as_mut(), &c.ctx).map_err(state_exit)?;
            state::submit_ready(c.state, c.sched.as_mut(), &c.ctx, &Selection::all())
                .map_err(state_exit)?;
            let s = Summary::with_limit(c.state, c.ctx.config.max_attempts);
            print!("{}", table(&s, kind, false));
            return Ok(());
        }
        let interval =
            Duration::from_secs_f64(args.interval.unwrap_or(c.ctx.config.poll_seconds).max(0.05));
        let bars = super::progress::Follow::new(
            global.quiet,
            Duration::from_secs_f64(args.progress_every.max(0.0)),
        )
        .with_costs(super::progress::cost_source(c.state.root(), c.state.plan()));
        // The state before this watch submits anything: the baseline of the
        // first record's "submitted".
        bars.update(&c.state.summary());
        let settled = state::watch_until_settled(
            c.state,
            c.sched.as_mut(),
            &c.ctx,
            interval,
            stop,
            &mut |s| bars.update(s),
        )
        .map_err(state_exit)?;
        bars.finish();
        if settled.interrupted {
            if kind.runs_here() {
                let r = state::cancel(
                    c.state,
                    c.sched.as_mut(),
                    &Selection {
                        states: vec![state::TaskState::Queued, state::TaskState::Running],
                        ..Default::default()
                    },
                    "interrupted (Ctrl-C during legwork watch)",
                )
                .map_err(state_exit)?;
                return Err(Exit::interrupted(format!(
                    "interrupted: stopped {} local tasks and recorded them as cancelled; `legwork resume {} --state cancelled` runs them again",
                    r.live,
                    target(&args)
                ))
                .into());
            }
            return Err(Exit::interrupted(format!(
                "interrupted: stopped watching; the jobs carry on in the queue (`legwork watch {}` follows them again)",
                target(&args)
            ))
            .into());
        }
        let s = settled.summary;
        if !global.quiet {
            print!("{}", table(&s, kind, false));
        }
        if s.all_done() {
            Ok(())
        } else {
            Err(Exit::incomplete(format!(
                "nothing more can progress: {} done, {} failed, {} lost, {} cancelled, {} planned behind them; see the reasons above, then `legwork resume {}`",
                s.total.done,
                s.total.failed,
                s.total.lost,
                s.total.cancelled,
                s.total.planned,
                args.file.display()
            ))
            .into())
        }
    })
}

/// The campaign as the user named it, to repeat in hints (with `--root` if given).
fn target(args: &Args) -> String {
    match &args.root {
        Some(r) => format!("{} --root {}", args.file.display(), r.display()),
        None => args.file.display().to_string(),
    }
}

/// Progress bars: one per leg and one overall, counting done tasks.
pub(crate) struct Bars {
    multi: MultiProgress,
    overall: ProgressBar,
    legs: std::cell::RefCell<HashMap<String, ProgressBar>>,
}

impl Bars {
    pub(crate) fn new(quiet: bool) -> Bars {
        let multi = MultiProgress::with_draw_target(if quiet {
            ProgressDrawTarget::hidden()
        } else {
            ProgressDrawTarget::stderr()
        });
        let overall = multi.add(ProgressBar::new(0));
        overall.set_style(style());
        overall.set_prefix("all");
        Bars {
            multi,
            overall,
            legs: Default::default(),
        }
    }

    pub(crate) fn update(&self, s: &Summary) {
        let mut per_leg: Vec<(String, usize, usize, String)> = Vec::new();
        for (key, c) in &s.groups {
            let leg = key.split('/').next().unwrap_or(key).to_string();
            match per_leg.iter_mut().find(|l| l.0 == leg) {
                Some(l) => {
                    l.1 += c.done;
                    l.2 += c.total();
                    l.3 = counts_msg(&merge(&l.3, c));
                }
                None => per_leg.push((leg, c.done, c.total(), counts_msg(c))),
            }
        }
        let mut legs = self.legs.borrow_mut();
        for (leg, done, total, msg) in per_leg {
            let bar = legs.entry(leg.clone()).or_insert_with(|| {
                let b = self
                    .multi
                    .insert_before(&self.overall, ProgressBar::new(total as u64));
                b.set_style(style());
                b.set_prefix(leg.clone());
                b
            });
            bar.set_length(total as u64);
            bar.set_position(done as u64);
            bar.set_message(msg);
        }
        self.overall.set_length(s.total.total() as u64);
        self.overall.set_position(s.total.done as u64);
        self.overall.set_message(counts_msg(&s.total));
    }

    pub(crate) fn finish(&self) {
        for b in self.legs.borrow().values() {
            b.abandon();
        }
        self.overall.abandon();
    }
}

fn style() -> ProgressStyle {
    ProgressStyle::with_template("{prefix:>12} [{bar:30}] {pos}/{len} done  {msg}")
        .expect("valid template")
        .progress_chars("=> ")
}

/// Accumulates counts across a leg's stages (carried as the message text).
fn merge(prev: &str, c: &state::summary::Counts) -> state::summary::Counts {
    let mut m = c.clone();
    for part in prev.split(", ") {
        if let Some((n, name)) = part.split_once(' ') {
            let n: usize = n.parse().unwrap_or(0);
            match name {
                "queued" => m.queued += n,
                "running" => m.running += n,
                "failed" => m.failed += n,
                "lost" => m.lost += n,
                "cancelled" => m.cancelled += n,
                _ => {}
            }
        }
    }
    m
}

fn counts_msg(c: &state::summary::Counts) -> String {
    let mut parts = Vec::new();
    for (n, name) in [
        (c.queued, "queued"),
        (c.running, "running"),
        (c.failed, "failed"),
        (c.lost, "lost"),
        (c.cancelled, "cancelled"),
    ] {
        if n > 0 {
            parts.push(format!("{n} {name}"));
        }
    }
    parts.join(", ")
}

/// The task hooks of a loaded campaign: done means the stage output validates
/// with the campaign's reader; reruns are re-rendered from its templates.
pub fn campaign_hooks(campaign: crate::campaign::Campaign) -> Box<dyn TaskHooks> {
    Box::new(CampaignHooks { campaign })
}
