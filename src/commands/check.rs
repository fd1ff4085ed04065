//! `legwork check`: validate a campaign file and summarise what it would run.

use crate::campaign::{self, Campaign, Diagnostic, LoadOptions};
use crate::cli::Global;
use crate::exit::Exit;
use crate::plan::{self, Plan};
use serde::Serialize;
use std::path::PathBuf;

/// Options of `legwork check`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign file.
    pub file: PathBuf,
    /// Where the tree would go, instead of the file's `root:`.
    #[arg(long, value_name = "DIR")]
    pub root: Option<PathBuf>,
    /// Print the summary (or the problems) as JSON on standard output.
    #[arg(long)]
    pub json: bool,
}

/// One leg in the summary.
#[derive(Debug, Serialize)]
pub struct LegSummary {
    /// leg name
    pub name: String,
    /// +1 or −1
    pub sign: i32,
    /// λ states
    pub windows: usize,
    /// replicas
    pub replicas: u32,
    /// λ components
    pub components: Vec<String>,
}

/// What `check` reports about a valid campaign.
#[derive(Debug, Serialize)]
pub struct Summary {
    /// campaign name
    pub campaign: String,
    /// relative, absolute or solvation
    pub kind: String,
    /// the campaign file
    pub file: PathBuf,
    /// where the tree goes
    pub root: PathBuf,
    /// number of ligands
    pub ligands: usize,
    /// number of edges
    pub edges: usize,
    /// the legs
    pub legs: Vec<LegSummary>,
    /// windows over every subject, leg and replica
    pub windows: usize,
    /// tasks of each stage, in stage order
    pub tasks: Vec<(String, usize)>,
    /// all tasks
    pub total_tasks: usize,
    /// Σ cpus × walltime over every task, in hours
    pub core_hours: f64,
    /// Σ gpus × walltime over every task, in hours
    pub gpu_hours: f64,
    /// warnings
    pub warnings: Vec<Diagnostic>,
}

/// The summary of a loaded campaign and its plan.
pub fn summarise(c: &Campaign, p: &Plan, warnings: Vec<Diagnostic>) -> Summary {
    let subjects = c.subjects().len();
    let (mut core, mut gpu) = (0.0, 0.0);
    for t in &p.tasks {
        let h = t.resources.walltime_s as f64 / 3600.0;
        core += t.resources.cpus as f64 * h;
        gpu += t.resources.gpus as f64 * h;
    }
    Summary {
        campaign: c.name.clone(),
        kind: c.kind.as_str().into(),
        file: c.file.clone(),
        root: c.root.clone(),
        ligands: c.ligands.len(),
        edges: c.edges.len(),
        legs: c
            .legs
            .iter()
            .map(|l| LegSummary {
                name: l.name.clone(),
                sign: l.sign,
                windows: l.windows(),
                replicas: l.replicas,
                components: l.lambdas.components.clone(),
            })
            .collect(),
        windows: subjects
            * c.legs
                .iter()
                .map(|l| l.windows() * l.replicas as usize)
                .sum::<usize>(),
        tasks: p.tasks_per_stage(),
        total_tasks: p.tasks.len(),
        core_hours: core,
        gpu_hours: gpu,
        warnings,
    }
}

/// Loads a campaign for a command, turning problems into exit code 2 (printed all
/// at once) and printing warnings on standard error.
pub fn load_or_exit(
    file: &std::path::Path,
    root: Option<PathBuf>,
    json: bool,
) -> anyhow::Result<campaign::Loaded> {
    match campaign::load(
        file,
        &LoadOptions {
            root_override: root,
        },
    ) {
        Ok(l) => {
            if !json {
                for w in &l.warnings {
                    eprintln!("{w}");
                }
            }
            Ok(l)
        }
        Err(e) => {
            if json {
                println!(
                    "{}",
                    serde_json::to_string_pretty(
                        &serde_json::json!({"ok": false, "diagnostics": e.diagnostics})
                    )?
                );
            }
            Err(Exit::bad_input(e.to_string()).into())
        }
    }
}

/// Reads the measured-affinities file, if the campaign names one, with the same
/// reader `collect` uses: a bad row is exit code 2 here, before anything runs.
/// Measured ligands that are not in the campaign are a warning.
fn check_experiment(c: &Campaign, json: bool) -> anyhow::Result<()> {
    let Some(path) = &c.experiment else {
        return Ok(());
    };
    match crate::collect::experiment::read_measured(path, c.temperature_k, c.unit) {
        Ok(measured) => {
            let unknown: Vec<&str> = measured
                .iter()
                .map(|m| m.ligand.as_str())
                .filter(|l| !c.ligands.iter().any(|x| x.id == *l))
                .collect();
            if !unknown.is_empty() && !json {
                eprintln!(
                    "warning: {}: measured ligands that are not in the campaign (ignored): {}",
                    path.display(),
                    unknown.join(", ")
                );
            }
            Ok(())
        }
        Err(e) => {
            if json {
                println!(
                    "{}",
                    serde_json::json!({"ok": false, "experiment_error": e.to_string()})
                );
            }
            Err(Exit::bad_input(format!(
                "error: {e}\nhint: each row is ligand,kind,value,unit with kind dg (unit kcal/mol or kJ/mol) or ki, kd, ic50 (unit pM, nM, uM, mM or M); see 'Measured affinities' in the README"
            ))
            .into())
        }
    }
}

/// Runs `legwork check`.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    let loaded = load_or_exit(&args.file, args.root, args.json)?;
    let c = &loaded.campaign;
    let p = plan::expand(c);
    if let Err(e) = crate::render::probe(c, &p) {
        if args.json {
            println!(
                "{}",
                serde_json::json!({"ok": false, "render_error": e.to_string()})
            );
        }
        return Err(Exit::bad_input(format!("error: {e}")).into());
    }
    let reader_problems = crate::collect::legs::check_readers(c);
    if !reader_problems.is_empty() {
        let text: Vec<String> = reader_problems
            .iter()
            .map(|p| format!("{}: {p}", c.file.display()))
            .collect();
        if args.json {
            println!(
                "{}",
                serde_json::json!({"ok": false, "reader_errors": text})
            );
        }
        return Err(Exit::bad_input(text.join("\n")).into());
    }
    check_experiment(c, args.json)?;
    let s = summarise(c, &p, loaded.warnings);
    if args.json {
        let mut v = serde_json::to_value(&s)?;
        v["ok"] = true.into();
        v["readers"] = reader_lines(c)
            .into_iter()
            .map(|(legs, lines)| serde_json::json!({"legs": legs, "reader": lines}))
            .collect::<Vec<_>>()
            .into();
        v["tasks"] = s
            .tasks
            .iter()
            .map(|(k, n)| (k.clone(), serde_json::json!(n)))
            .collect::<serde_json::Map<_, _>>()
            .into();
        println!("{}", serde_json::to_string_pretty(&v)?);
        return Ok(());
    }
    println!(
        "campaign {} ({}) is valid: {}",
        s.campaign,
        s.kind,
        s.file.display()
    );
    println!("  ligands     {}", s.ligands);
    if c.kind == campaign::CampaignKind::Relative {
        println!("  edges       {}", s.edges);
    }
    for l in &s.legs {
        let comps = if l.components.len() > 1 {
            format!(", components {}", l.components.join("/"))
        } else {
            String::new()
        };
        println!(
            "  leg         {} (sign {:+}): {} windows × {} replica{}{comps}",
            l.name,
            l.sign,
            l.windows,
            l.replicas,
            if l.replicas == 1 { "" } else { "s" }
        );
    }
    println!("  windows     {}", s.windows);
    for (stage, n) in &s.tasks {
        println!("  tasks       {stage}: {n}");
    }
    println!("  total       {} tasks", s.total_tasks);
    println!(
        "  requests    {:.1} core-hours, {:.1} GPU-hours",
        s.core_hours, s.gpu_hours
    );
    for (legs, lines) in reader_lines(c) {
        println!("  reader      legs {}:", legs.join(", "));
        for l in lines {
            println!("                {l}");
        }
    }
    println!("  tree        {}", s.root.display());
    if !s.warnings.is_empty() {
        println!(
            "  {} warning{} (above)",
            s.warnings.len(),
            if s.warnings.len() == 1 { "" } else { "s" }
        );
    }
    Ok(())
}

/// The reader settings in words, once per group of legs that share them.
fn reader_lines(c: &Campaign) -> Vec<(Vec<String>, Vec<String>)> {
    let mut out: Vec<(Vec<String>, Vec<String>)> = Vec::new();
    for leg in &c.legs {
        let lines = crate::collect::legs::describe(crate::collect::legs::leg_reader(c, &leg.name));
        match out.iter_mut().find(|(_, l)| *l == lines) {
            Some((legs, _)) => legs.push(leg.name.clone()),
            None => out.push((vec![leg.name.clone()], lines)),
        }
    }
    out
}
