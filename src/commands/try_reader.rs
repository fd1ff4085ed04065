//! `legwork try-reader`: run a campaign's reader for one leg on sample output
//! files (a pilot window, or a file made by hand) and show what it understood,
//! before anything is launched. Given every window of the leg, it also
//! estimates the leg.

use crate::cli::Global;
use crate::collect::legs::{describe, leg_reader, window_hint};
use crate::collect::{assemble, explain_window, Explanation, WindowHint, WindowSamples};
use crate::estimate::{estimate_leg, EstimateOptions, Method};
use crate::exit::Exit;
use crate::units::EnergyUnit;
use std::fmt::Write;
use std::path::{Path, PathBuf};

/// Options of `legwork try-reader`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file (its reader, legs and λ schedules are used).
    pub file: PathBuf,
    /// Output files of one leg: one window, or all of them to estimate the leg.
    #[arg(required = true, value_name = "OUTPUT")]
    pub outputs: Vec<PathBuf>,
    /// The leg whose reader and λ states apply (needed when the campaign has several legs).
    #[arg(long)]
    pub leg: Option<String>,
    /// The window (state index, from 0) that a single file outside the tree sampled.
    #[arg(long, value_name = "N")]
    pub window: Option<usize>,
    /// Files outside the tree are the leg's windows 0, 1, 2, … in the order given.
    #[arg(long, conflicts_with = "window")]
    pub in_order: bool,
    /// Frames to show of each file.
    #[arg(long, default_value_t = 5, value_name = "N")]
    pub frames: usize,
    /// Where the campaign's tree is, instead of the file's `root:`.
    #[arg(long, value_name = "DIR")]
    pub root: Option<PathBuf>,
}

/// Runs `legwork try-reader`.
pub fn run(args: Args, global: &Global) -> anyhow::Result<()> {
    let loaded = super::check::load_or_exit(&args.file, args.root.clone(), false)?;
    let c = &loaded.campaign;
    let plan = crate::plan::expand(c);
    let leg = match (&args.leg, c.legs.as_slice()) {
        (Some(l), _) => c.leg(l).ok_or_else(|| {
            Exit::bad_input(format!(
                "--leg {l}: the campaign has no such leg; its legs are {}",
                c.legs
                    .iter()
                    .map(|l| l.name.as_str())
                    .collect::<Vec<_>>()
                    .join(", ")
            ))
        })?,
        (None, [one]) => one,
        (None, legs) => {
            return Err(Exit::bad_input(format!(
                "the campaign has several legs ({}); say which with --leg",
                legs.iter()
                    .map(|l| l.name.as_str())
                    .collect::<Vec<_>>()
                    .join(", ")
            ))
            .into())
        }
    };
    if args.window.is_some() && args.outputs.len() > 1 {
        return Err(Exit::bad_input(
            "--window names the state of one file; with several files outside the tree use --in-order",
        )
        .into());
    }
    if let Some(w) = args.window {
        if w >= leg.windows() {
            return Err(Exit::bad_input(format!(
                "--window {w}: leg {} has {} windows (0..{})",
                leg.name,
                leg.windows(),
                leg.windows() - 1
            ))
            .into());
        }
    }
    let reader = leg_reader(c, &leg.name);
    let stage = c.analysed_stage().map(|s| s.name.clone());
    let mut out = String::new();
    let _ = writeln!(
        out,
        "reader of leg {} ({} windows, λ components {}):",
        leg.name,
        leg.windows(),
        leg.lambdas.components.join(", ")
    );
    for l in describe(reader) {
        let _ = writeln!(out, "  {l}");
    }
    print!("{out}");

    let root = std::fs::canonicalize(&c.root).unwrap_or_else(|_| c.root.clone());
    let task_of_window = |w: usize| {
        plan.tasks.iter().position(|t| {
            t.leg == leg.name && t.window == Some(w) && Some(&t.stage) == stage.as_ref()
        })
    };
    let base_hint = task_of_window(0)
        .map(|t| window_hint(c, &plan, t))
        .unwrap_or_default();
    let mut windows: Vec<WindowSamples> = Vec::new();
    // A note every window repeats (a settled conflict) is printed once.
    let mut said = std::collections::HashSet::new();
    for (i, path) in args.outputs.iter().enumerate() {
        let (window, how) = match in_tree(&root, path, &plan, &leg.name) {
            Some(Ok(w)) => (Some(w), "from its place in the tree".to_string()),
            Some(Err(other)) => {
                return Err(Exit::bad_input(format!(
                "{}: this file belongs to leg {other} of the tree, not leg {}; give --leg {other}",
                path.display(),
                leg.name
            ))
                .into())
            }
            None => match (args.window, args.in_order) {
                (Some(w), _) => (Some(w), "from --window".to_string()),
                (None, true) => (
                    Some(i),
                    "from its place in the list (--in-order)".to_string(),
                ),
                (None, false) => (None, "from the file's own state line".to_string()),
            },
        };
        if window.is_some_and(|w| w >= leg.windows()) {
            return Err(Exit::bad_input(format!(
                "{}: window {} is past the last of leg {} ({} windows)",
                path.display(),
                window.unwrap_or(0),
                leg.name,
                leg.windows()
            ))
            .into());
        }
        let hint = WindowHint {
            state: window,
            ..base_hint.clone()
        };
        let (w, ex) = explain_window(path, reader, &hint).map_err(|e| {
            let more = if window.is_none() && e.to_string().contains("which state") {
                "; give --window N for a file outside the campaign's tree (or --in-order for several)"
            } else {
                ""
            };
            Exit::bad_input(format!(
                "{e}{more}\n  hint: fix the reader settings (README: *Reading engine output*) and try again"
            ))
        })?;
        print!("{}", show(path, &how, &w, &ex, leg, args.frames, &mut said));
        windows.push(w);
    }
    let mut states: Vec<usize> = windows.iter().map(|w| w.state).collect();
    states.sort_unstable();
    states.dedup();
    if states.len() == leg.windows() && windows.len() == leg.windows() {
        let samples = assemble(windows).map_err(|e| Exit::bad_input(e.to_string()))?;
        let opts = EstimateOptions::from_analysis(&c.analysis);
        let est = estimate_leg(&samples, &opts)
            .map_err(|e| Exit::bad_input(format!("cannot estimate leg {}: {e}", leg.name)))?;
        let mut s = String::new();
        let _ = writeln!(
            s,
            "\nleg {}: G(state {}) − G(state 0) in {} at {} K",
            leg.name,
            leg.windows() - 1,
            c.unit,
            est.temperature_k
        );
        for m in Method::ALL {
            if let Some(d) = est.delta_g_in(m, c.unit) {
                let mark = if m == c.analysis.estimator {
                    "  (the campaign's headline)"
                } else {
                    ""
                };
                let _ = writeln!(
                    s,
                    "  {:<12} {:>10.4} ± {:.4}{mark}",
                    m.as_str(),
                    d.delta_g,
                    d.sigma
                );
            }
        }
        if let Some(o) = est.min_adjacent_overlap {
            let _ = writeln!(s, "  smallest overlap between neighbouring states: {o:.3}");
        }
        for w in samples.warnings.iter().chain(&est.warnings) {
            if said.insert(w.clone()) {
                let _ = writeln!(s, "  warning: {w}");
            }
        }
        print!("{s}");
    } else if !global.quiet && args.outputs.len() > 1 {
        println!(
            "\n{} of leg {}'s {} windows given; give all of them to see the leg's ΔG",
            states.len(),
            leg.name,
            leg.windows()
        );
    }
    Ok(())
}

/// The window of `path` when it lies in the campaign's tree: `Ok(window)` for a
/// file of leg `leg`, `Err(other leg)` for another leg's.
fn in_tree(
    root: &Path,
    path: &Path,
    plan: &crate::plan::Plan,
    leg: &str,
) -> Option<Result<usize, String>> {
    let abs = std::fs::canonicalize(path).ok()?;
    let rel = abs.strip_prefix(root).ok()?;
    let t = plan
        .tasks
        .iter()
        .filter(|t| t.window.is_some() && rel.starts_with(&t.dir))
        .max_by_key(|t| t.dir.components().count())?;
    Some(if t.leg == leg {
        Ok(t.window.unwrap_or(0))
    } else {
        Err(t.leg.clone())
    })
}

fn show(
    path: &Path,
    how: &str,
    w: &WindowSamples,
    ex: &Explanation,
    leg: &crate::campaign::Leg,
    frames: usize,
    said: &mut std::collections::HashSet<String>,
) -> String {
    let mut s = String::new();
    let k = w.n_states;
    let lambdas: Vec<String> = leg
        .lambdas
        .components
        .iter()
        .enumerate()
        .map(|(c, n)| format!("{n} {}", leg.lambdas.values[c][w.state]))
        .collect();
    let _ = writeln!(s, "\n{}: window {} ({how})", path.display(), w.state);
    let _ = writeln!(s, "  frames       {}", w.frames);
    let _ = writeln!(
        s,
        "  states       {k}; this window sampled state {} ({})",
        w.state,
        lambdas.join(", ")
    );
    let kt_per = EnergyUnit::Kt.factor_to(EnergyUnit::KjPerMol, w.temperature_k);
    let _ = writeln!(
        s,
        "  temperature  {} K, {}",
        w.temperature_k, ex.temperature
    );
    let _ = writeln!(
        s,
        "  energy unit  {}; 1 kT = {:.4} kJ/mol = {:.4} kcal/mol here",
        ex.unit,
        kt_per,
        kt_per / 4.184
    );
    let _ = writeln!(s, "  what each column became:");
    let width = ex
        .columns
        .iter()
        .map(|(c, _)| c.chars().count())
        .max()
        .unwrap_or(0);
    for (col, meaning) in &ex.columns {
        let pad = width - col.chars().count();
        let _ = writeln!(s, "    {col}{} → {meaning}", " ".repeat(pad));
    }
    // The states worth seeing: the first, the sampled one and its neighbours,
    // the last.
    let mut show: Vec<usize> = vec![0, 1, w.state.saturating_sub(1), w.state, w.state + 1, k - 1];
    show.retain(|&j| j < k);
    show.sort_unstable();
    show.dedup();
    for m in &w.warnings {
        if said.insert(m.clone()) {
            let _ = writeln!(s, "  warning: {m}");
        }
    }
    let n = frames.min(w.frames);
    if n == 0 {
        return s;
    }
    let _ = writeln!(
        s,
        "  first {n} frame{} in reduced units (kT):",
        if n == 1 { "" } else { "s" }
    );
    let mut head = format!("    {:>6}", "frame");
    if w.has_dudl() {
        for c in &w.components {
            let _ = write!(head, " {:>12}", format!("dU/dλ.{c}"));
        }
    }
    let mut last = None;
    for &j in &show {
        if last.is_some_and(|l: usize| j > l + 1) {
            head.push_str("      …");
        }
        let _ = write!(head, " {:>10}", format!("u{j}"));
        last = Some(j);
    }
    let _ = writeln!(s, "{head}");
    for f in 0..n {
        let mut line = format!("    {f:>6}");
        if w.has_dudl() {
            for c in 0..w.components.len() {
                let _ = write!(line, " {:>12.5}", w.dudl_at(f, c));
            }
        }
        let row = w.row(f);
        let mut last = None;
        for &j in &show {
            if last.is_some_and(|l: usize| j > l + 1) {
                line.push_str("      …");
            }
            let _ = write!(line, " {:>10.4}", row[j]);
            last = Some(j);
        }
        let _ = writeln!(s, "{line}");
    }
    s
}
