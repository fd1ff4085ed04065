//! `legwork collect`: estimate every leg replica whose windows are done, close the
//! cycles, solve the network, compare with experiment, and write results/ and the
//! report. What is not finished is listed, not guessed.

use crate::analysis::{self, Counts, Results};
use crate::cli::Global;
use crate::commands::check::load_or_exit;
use crate::exit::Exit;
use crate::plan;
use crate::report::{self, Written};
use crate::state::{CampaignState, TaskState};
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::Write;
use std::path::PathBuf;
use std::time::Duration;

/// Options of `legwork collect`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
    /// The campaign's tree is here instead of the file's `root:`.
    #[arg(long, value_name = "DIR")]
    pub root: Option<PathBuf>,
    /// Seconds to wait for another legwork writing results/ and report/.
    #[arg(long, default_value_t = 60.0)]
    pub lock_wait: f64,
}

/// Runs `legwork collect`.
pub fn run(args: Args, global: &Global) -> anyhow::Result<()> {
    let loaded = load_or_exit(&args.file, args.root.clone(), false)?;
    let campaign = loaded.campaign;
    let mut plan = plan::expand(&campaign);
    crate::state::life::apply_extensions(
        &mut plan,
        &crate::state::life::load_extensions(&campaign.root).map_err(super::status::state_exit)?,
    );
    // Collecting only looks: a read-only view of the journal, no writer lock, so
    // it works while `watch` or `run` holds the campaign. Only the writing of
    // results/ and report/ takes a lock of its own.
    let state =
        CampaignState::open_read_only(&campaign.root, plan).map_err(super::status::state_exit)?;
    let (results, counts) = collect_with_state(&campaign, &state, global)?;
    let written = report::write_all_locked(
        &campaign.root,
        &results,
        Duration::from_secs_f64(args.lock_wait.max(0.0)),
    )?;
    print_outcome(&results, &counts, &written, global)?;
    incomplete(
        &campaign.name,
        &results,
        &counts,
        &args.file.display().to_string(),
    )
}

/// Exit code 3 when the results do not cover the whole campaign: a leg replica
/// failed or unfinished, or a subject left out. The results written cover
/// everything else.
pub fn incomplete(
    name: &str,
    results: &Results,
    counts: &Counts,
    file: &str,
) -> anyhow::Result<()> {
    if counts.legs == 0 && counts.failed == 0 {
        return Err(Exit::incomplete(format!(
            "no leg replica of {name} has all its windows done yet; `legwork status {file}` shows where they are"
        ))
        .into());
    }
    if !results.incomplete() {
        return Ok(());
    }
    let mut parts = Vec::new();
    if counts.failed > 0 {
        parts.push(format!(
            "{} leg replica(s) could not be estimated",
            counts.failed
        ));
    }
    if counts.missing > 0 {
        parts.push(format!("{} are not finished", counts.missing));
    }
    if !results.left_out.is_empty() {
        parts.push(format!(
            "{} subject(s) have no result",
            results.left_out.len()
        ));
    }
    let hint = if counts.failed > 0 {
        format!(
            "hint: the reasons are in results/missing.csv; fix or rerun those windows, then `legwork collect {file}` again"
        )
    } else {
        format!("hint: `legwork status {file}` shows where the rest is")
    };
    Err(Exit::incomplete(format!(
        "the results of {name} are incomplete: {}; everything else was computed and written\n{hint}",
        parts.join(", ")
    ))
    .into())
}

/// Analyses the campaign using `state` to know which tasks are done, with a
/// progress bar on standard error.
pub fn collect_with_state(
    campaign: &crate::campaign::Campaign,
    state: &CampaignState,
    global: &Global,
) -> anyhow::Result<(Results, Counts)> {
    let plan = state.plan();
    let bar = ProgressBar::with_draw_target(
        Some(plan.windows.len() as u64),
        if global.quiet {
            ProgressDrawTarget::hidden()
        } else {
            ProgressDrawTarget::stderr()
        },
    );
    bar.set_style(
        ProgressStyle::with_template("{prefix:>12} [{bar:30}] {pos}/{len} leg replicas")
            .expect("valid template")
            .progress_chars("=> "),
    );
    bar.set_prefix("estimating");
    // Windows being extended or rerun are read from their previous attempt's
    // output; outdated and short ones are read as they are, with a note.
    let view = super::life::collect_view(campaign, state);
    let done = |i: plan::TaskIndex| state.state(i) == TaskState::Done || view.kept.contains_key(&i);
    let dir_of = |i: plan::TaskIndex| {
        view.kept
            .get(&i)
            .cloned()
            .unwrap_or_else(|| campaign.root.join(&plan.tasks[i].dir))
    };
    let result = analysis::analyse_campaign_from(campaign, plan, &done, &dir_of, &|n, _| {
        bar.set_position(n as u64)
    });
    bar.finish_and_clear();
    let (mut results, counts) =
        result.map_err(|e| Exit::new(crate::exit::ExitKind::Failure, e.to_string()))?;
    results.costs = Some(crate::state::costs::measure(state, chrono::Utc::now()));
    results.notes = view.notes;
    Ok((results, counts))
}

/// Prints the terminal summary, what was read, and where the files are.
pub fn print_outcome(
    results: &Results,
    counts: &Counts,
    written: &Written,
    global: &Global,
) -> anyhow::Result<()> {
    if global.quiet {
        return Ok(());
    }
    let stdout = std::io::stdout();
    let mut out = stdout.lock();
    report::print_summary(results, &mut out)?;
    writeln!(
        out,
        "\nCollected {} leg replicas ({} windows parsed, {} from cache); {} not finished{}.",
        counts.legs,
        counts.parsed,
        counts.cached,
        counts.missing,
        if counts.failed > 0 {
            format!(", {} failed", counts.failed)
        } else {
            String::new()
        }
    )?;
    writeln!(
        out,
        "Tables in {}\nReport: {}",
        written.results_dir.display(),
        written.html.display()
    )?;
    Ok(())
}
