//! `legwork propose`: where the next compute should go. `lambdas` proposes a λ
//! schedule from a pilot leg, `edges` an edge list from a difficulty matrix (or,
//! after a run, the few edges to add), `sampling` where additional frames reduce
//! the ligands' σ the most. The numbers come from `legwork_numerics::design`;
//! every one is a prediction, printed as such. Nothing here changes a campaign or
//! submits work.

use crate::analysis::Results;
use crate::cli::Global;
use crate::collect::{read_leg_with, ReaderConfig, WindowHint};
use crate::estimate::{estimate_leg, EstimateOptions, LegEstimate, Method};
use crate::exit::Exit;
use crate::report::{self, plots};
use legwork_numerics::design::allocate::{
    allocate, uniform, AllocationProblem, Network, Objective, WindowVariance,
};
use legwork_numerics::design::edges::{
    extra_edges, minimum_spanning_tree, propose_edges, tree_plus_random, Candidates, EdgeRules,
};
use legwork_numerics::design::length::{
    interpolate_components, predicted_adjacent_overlap, propose_schedule, LengthProfile,
    LengthSource, ScheduleRequest,
};
use legwork_numerics::design::{sum_of_variances, DesignError};
use legwork_numerics::estimate::ti::path_weights;
use plotters::prelude::*;
use serde_json::json;
use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

const CAUTION: &str = "Caution: these are predictions from a model, not measurements; run the proposal and check it (overlap, σ) before relying on it";

/// Options of `legwork propose`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// What to propose.
    #[command(subcommand)]
    pub what: What,
}

/// The three proposals.
#[derive(Debug, clap::Subcommand)]
pub enum What {
    /// A λ schedule for a leg from its pilot windows: equal thermodynamic length per step.
    Lambdas(LambdasArgs),
    /// An edge list from a difficulty matrix (or, with --after, the edges to add).
    Edges(EdgesArgs),
    /// Where additional frames cut the ligands' σ the most, from collected results.
    Sampling(SamplingArgs),
}

/// Options of `legwork propose lambdas`.
#[derive(Debug, clap::Args)]
pub struct LambdasArgs {
    /// The pilot's window tables, one per λ state, in any order.
    #[arg(required = true, value_name = "FILE")]
    pub files: Vec<PathBuf>,
    /// Number of states to propose; default: the fewest that clear --min-overlap.
    #[arg(long, value_name = "K")]
    pub windows: Option<usize>,
    /// The smallest adjacent overlap wanted (0.03 is common practice).
    #[arg(long, default_value_t = 0.03, value_name = "O")]
    pub min_overlap: f64,
    /// Aim at a predicted overlap of this many times --min-overlap (the prediction is optimistic for large steps).
    #[arg(long, default_value_t = 2.0, value_name = "FACTOR")]
    pub margin: f64,
    /// Length from: auto, dudl (variance of dU/dλ) or energy (spread of neighbour energy differences).
    #[arg(long, value_enum, default_value_t = SourceChoice::Auto)]
    pub source: SourceChoice,
    /// Read the tables with this campaign's `reader:` settings.
    #[arg(long, value_name = "CAMPAIGN")]
    pub campaign: Option<PathBuf>,
    /// Temperature in K, overriding the files' own.
    #[arg(long, value_name = "KELVIN")]
    pub temperature: Option<f64>,
    /// Print JSON instead of a table.
    #[arg(long)]
    pub json: bool,
}

/// Where `propose lambdas` takes the thermodynamic length from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum SourceChoice {
    /// dudl for a one-component leg with dU/dλ, else energy.
    Auto,
    /// The variance of dU/dλ in each window.
    Dudl,
    /// The spread of the energy difference between neighbouring states.
    Energy,
}

/// Options of `legwork propose edges`.
#[derive(Debug, clap::Args)]
pub struct EdgesArgs {
    /// The difficulty matrix: a CSV whose header is a corner cell then the ligand
    /// ids, one row per ligand; a cell is the pair's difficulty (> 0, read as
    /// proportional to the edge's expected variance), empty where the pair is not allowed.
    pub scores: PathBuf,
    /// Number of edges to propose; default ⌈1.5 × ligands⌉ (common practice, no source).
    #[arg(long, value_name = "M")]
    pub edges: Option<usize>,
    /// The most edges on the path between any two ligands.
    #[arg(long, default_value_t = 6, value_name = "HOPS")]
    pub max_path: usize,
    /// Allow ligands that are on no cycle (their edges get no closure check).
    #[arg(long)]
    pub allow_unchecked: bool,
    /// After a run: the campaign root (or its results/summary.json); propose the edges to add.
    #[arg(long, value_name = "RESULTS")]
    pub after: Option<PathBuf>,
    /// With --after: how many edges to add.
    #[arg(long, default_value_t = 3, value_name = "N")]
    pub add: usize,
    /// Write the edges as a CSV (`a,b`) that a campaign's `edges:` accepts.
    #[arg(long, value_name = "FILE")]
    pub out: Option<PathBuf>,
    /// Write an SVG figure of the network.
    #[arg(long, value_name = "FILE")]
    pub figure: Option<PathBuf>,
    /// Replace --out and --figure files that exist.
    #[arg(long)]
    pub force: bool,
    /// Seed of the random baseline the proposal is compared with.
    #[arg(long, default_value_t = 0)]
    pub seed: u64,
    /// Print JSON instead of a table.
    #[arg(long)]
    pub json: bool,
}

/// Options of `legwork propose sampling`.
#[derive(Debug, clap::Args)]
pub struct SamplingArgs {
    /// The campaign root, or its results/summary.json (written by `legwork collect`).
    pub results: PathBuf,
    /// The budget: additional frames, or cost units when --frame-cost is given.
    #[arg(long, value_name = "AMOUNT")]
    pub budget: f64,
    /// Cost of one frame per leg, e.g. `complex=0.004,solvent=0.001` (core-hours per frame); default 1.
    #[arg(long, value_name = "LEG=COST,...")]
    pub frame_cost: Option<String>,
    /// What to minimise: sum (of the ligands' variances) or largest (ligand σ).
    #[arg(long, default_value = "sum", value_parser = parse_objective)]
    pub objective: Objective,
    /// Treat edges (or ligands) as independent targets, without the network.
    #[arg(long)]
    pub independent: bool,
    /// How many windows to list (largest allocations first); 0 lists all.
    #[arg(long, default_value_t = 20)]
    pub top: usize,
    /// Print JSON instead of a table.
    #[arg(long)]
    pub json: bool,
}

fn parse_objective(s: &str) -> Result<Objective, String> {
    match s {
        "sum" => Ok(Objective::SumOfVariances),
        "largest" => Ok(Objective::LargestSigma),
        _ => Err(format!("--objective must be sum or largest, not '{s}'")),
    }
}

/// Runs `legwork propose`.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    match args.what {
        What::Lambdas(a) => lambdas(a),
        What::Edges(a) => edges(a),
        What::Sampling(a) => sampling(a),
    }
}

fn design_exit(what: &str, e: DesignError) -> Exit {
    Exit::bad_input(format!("{what}: {e}"))
}

// ----------------------------------------------------------------- lambdas

fn lambdas(args: LambdasArgs) -> anyhow::Result<()> {
    if let Some(t) = args.temperature {
        if !(t.is_finite() && t > 0.0) {
            return Err(Exit::bad_input(format!(
                "--temperature {t}: give a positive temperature in kelvin"
            ))
            .into());
        }
    }
    let reader = match &args.campaign {
        Some(file) => crate::commands::check::load_or_exit(file, None, false)?
            .campaign
            .reader
            .clone(),
        None => ReaderConfig::default(),
    };
    let hint = WindowHint {
        temperature_k: args.temperature,
        ..Default::default()
    };
    let leg = read_leg_with(&args.files, &reader, &vec![hint; args.files.len()])
        .map_err(|e| Exit::bad_input(e.to_string()))?;
    let has_dudl = leg.windows.iter().all(|w| w.has_dudl());
    let mut methods = vec![Method::Mbar];
    if has_dudl {
        methods.push(Method::Ti);
    }
    let est = estimate_leg(
        &leg,
        &EstimateOptions {
            methods,
            ..Default::default()
        },
    )
    .map_err(|e| Exit::bad_input(format!("cannot estimate the pilot leg: {e}")))?;
    let source = match args.source {
        SourceChoice::Dudl => LengthSource::DudlVariance,
        SourceChoice::Energy => LengthSource::NeighbourEnergy,
        SourceChoice::Auto if leg.components.len() == 1 && has_dudl => LengthSource::DudlVariance,
        SourceChoice::Auto => LengthSource::NeighbourEnergy,
    };
    let discard: Vec<usize> = est
        .windows
        .iter()
        .map(|w| match source {
            LengthSource::DudlVariance => {
                w.ti_equilibration_frames.unwrap_or(w.equilibration_frames)
            }
            LengthSource::NeighbourEnergy => w.equilibration_frames,
        })
        .collect();
    let profile = LengthProfile::from_samples(&leg, &discard, Some(source))
        .map_err(|e| design_exit("the pilot", e))?;
    let request = ScheduleRequest {
        windows: args.windows,
        min_overlap: args.min_overlap,
        margin: args.margin,
        ..Default::default()
    };
    let proposal = propose_schedule(&profile, &request).map_err(|e| match e {
        DesignError::Infeasible(m) => Exit::bad_input(format!(
            "no schedule proposed: {m}\nhint: lower --min-overlap or --margin, or give --windows"
        )),
        DesignError::Input(m) => Exit::bad_input(format!("--windows/--min-overlap/--margin: {m}")),
    })?;
    let pilot_steps = profile.steps(&leg.lambdas);
    let mut pos = vec![0.0];
    for s in &pilot_steps {
        pos.push(pos.last().copied().unwrap_or(0.0) + s);
    }
    let used: Vec<f64> = est.windows.iter().map(|w| w.used.max(1) as f64).collect();
    let pilot_predicted = predicted_adjacent_overlap(&pos, Some(&used));
    let measured = adjacent(&est);
    let components =
        interpolate_components(&leg.lambdas, &leg.component_lambdas, &proposal.lambdas);
    if args.json {
        let doc = json!({
            "source": source,
            "total_length": profile.total(),
            "pilot": {
                "lambdas": leg.lambdas,
                "step_length": pilot_steps,
                "measured_adjacent_overlap": measured,
                "predicted_adjacent_overlap": pilot_predicted,
            },
            "proposal": {
                "lambdas": proposal.lambdas,
                "components": leg.components.iter().zip(&components).map(|(n, v)| (n.clone(), json!(v))).collect::<serde_json::Map<_, _>>(),
                "step_length": proposal.step_length,
                "predicted_adjacent_overlap": proposal.predicted_adjacent_overlap,
                "meets_min_overlap": proposal.meets_min_overlap,
                "fewest_windows": proposal.fewest_windows,
            },
            "min_overlap": args.min_overlap,
            "margin": args.margin,
            "caution": CAUTION,
        });
        println!("{}", serde_json::to_string_pretty(&doc)?);
        return Ok(());
    }
    let mut s = String::new();
    let src = match source {
        LengthSource::DudlVariance => "the variance of dU/dλ",
        LengthSource::NeighbourEnergy => "the spread of neighbouring energy differences",
    };
    let _ = writeln!(
        s,
        "pilot: {} states; thermodynamic length {:.2} (from {src}; units of thermal fluctuation)",
        leg.n_states(),
        profile.total()
    );
    let _ = writeln!(
        s,
        "\n  {:>5}  {:>15}  {:>7}  {:>17}  {:>18}",
        "step", "λ", "length", "overlap, measured", "overlap, predicted"
    );
    for i in 0..leg.n_states() - 1 {
        let _ = writeln!(
            s,
            "  {:>5}  {:>6.4} → {:<6.4}  {:>7.3}  {:>17.3}  {:>18.3}",
            format!("{i}–{}", i + 1),
            leg.lambdas[i],
            leg.lambdas[i + 1],
            pilot_steps[i],
            measured.get(i).copied().unwrap_or(f64::NAN),
            pilot_predicted[i]
        );
    }
    let min = |v: &[f64]| v.iter().copied().fold(f64::INFINITY, f64::min);
    let k = proposal.lambdas.len();
    let _ = writeln!(
        s,
        "\nproposal: {k} states (pilot {}), length {:.3} per step; smallest adjacent overlap predicted {:.3} (pilot: measured {:.3}, predicted {:.3})",
        leg.n_states(),
        proposal.step_length,
        proposal.min_predicted_overlap(),
        min(&measured),
        min(&pilot_predicted)
    );
    match proposal.fewest_windows {
        Some(f) => {
            let _ = writeln!(
                s,
                "  the fewest states predicted to clear {} × margin {} = {:.3}: {f}",
                args.min_overlap,
                args.margin,
                args.min_overlap * args.margin
            );
        }
        None => {
            let _ = writeln!(
                s,
                "  no number of states up to {} is predicted to clear {} × margin {}",
                request.max_windows, args.min_overlap, args.margin
            );
        }
    }
    if !proposal.meets_min_overlap {
        let _ = writeln!(
            s,
            "  warning: with {k} states the smallest predicted overlap is below {} × {}; ask for more states (--windows)",
            args.min_overlap, args.margin
        );
    }
    let fmt = |v: &[f64]| {
        v.iter()
            .map(|x| format!("{:.4}", x))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let _ = writeln!(s, "\nfor the leg in the campaign file:");
    if leg.components.len() == 1 {
        let _ = writeln!(s, "    lambdas: [{}]", fmt(&proposal.lambdas));
    } else {
        let _ = writeln!(s, "    lambdas:\n      components:");
        for (name, v) in leg.components.iter().zip(&components) {
            let _ = writeln!(s, "        {name}: [{}]", fmt(v));
        }
    }
    let _ = writeln!(
        s,
        "\nThe schedule equalizes the overlap for MBAR and BAR; TI also needs enough states to follow the curvature of ⟨dU/dλ⟩, so check TI against MBAR before using it on few states. The pilot's windows are samples of their own states; legwork does not yet write a new schedule into a campaign. {CAUTION}."
    );
    print!("{s}");
    Ok(())
}

fn adjacent(est: &LegEstimate) -> Vec<f64> {
    match &est.overlap {
        Some(o) => (0..o.len().saturating_sub(1))
            .map(|i| o[i][i + 1].min(o[i + 1][i]))
            .collect(),
        None => Vec::new(),
    }
}

// ------------------------------------------------------------------- edges

/// A difficulty matrix read from CSV.
struct Scores {
    ids: Vec<String>,
    candidates: Candidates,
}

fn read_scores(path: &Path) -> Result<Scores, Exit> {
    let text = std::fs::read_to_string(path).map_err(|e| {
        Exit::bad_input(format!(
            "{}: cannot read the difficulty matrix: {e}\nhint: give the path of a CSV file",
            path.display()
        ))
    })?;
    let at = |line: usize, what: String| {
        Exit::bad_input(format!(
            "{}:{line}: {what}\nhint: the matrix is a CSV: a header `id,<ligand>,<ligand>,…`, then one row per ligand `<ligand>,<difficulty>,…`, a cell empty where the pair is not allowed",
            path.display()
        ))
    };
    let mut rows: Vec<(usize, Vec<String>)> = Vec::new();
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(false)
        .comment(Some(b'#'))
        .flexible(true)
        .trim(csv::Trim::All)
        .from_reader(text.as_bytes());
    for rec in rdr.records() {
        let rec =
            rec.map_err(|e| at(e.position().map_or(0, |p| p.line() as usize), e.to_string()))?;
        let line = rec.position().map_or(0, |p| p.line() as usize);
        rows.push((line, rec.iter().map(str::to_string).collect()));
    }
    let Some((hline, header)) = rows.first().cloned() else {
        return Err(at(1, "the file is empty".into()));
    };
    let ids: Vec<String> = header[1..].to_vec();
    if ids.len() < 3 {
        return Err(at(
            hline,
            format!(
                "{} ligands in the header; a network needs at least 3",
                ids.len()
            ),
        ));
    }
    let mut index = BTreeMap::new();
    for (i, id) in ids.iter().enumerate() {
        if id.is_empty() || index.insert(id.clone(), i).is_some() {
            return Err(at(
                hline,
                format!("ligand '{id}' is empty or appears twice in the header"),
            ));
        }
    }
    let n = ids.len();
    let mut given: Vec<Option<(f64, usize)>> = vec![None; n * n];
    let mut seen = vec![false; n];
    for (line, row) in &rows[1..] {
        let Some(&a) = index.get(&row[0]) else {
            return Err(at(
                *line,
                format!("row ligand '{}' is not in the header", row[0]),
            ));
        };
        if std::mem::replace(&mut seen[a], true) {
            return Err(at(*line, format!("ligand '{}' has two rows", row[0])));
        }
        if row.len() > n + 1 {
            return Err(at(
                *line,
                format!("{} cells for {n} ligands", row.len() - 1),
            ));
        }
        for (b, cell) in row[1..].iter().enumerate() {
            if cell.is_empty() || a == b {
                continue;
            }
            let v: f64 = cell
                .parse()
                .ok()
                .filter(|v: &f64| v.is_finite() && *v > 0.0)
                .ok_or_else(|| {
                    at(
                        *line,
                        format!(
                            "pair {}+{}: '{cell}' is not a positive number",
                            ids[a], ids[b]
                        ),
                    )
                })?;
            given[a * n + b] = Some((v, *line));
        }
    }
    let mut candidates = Candidates::new(n);
    for a in 0..n {
        for b in a + 1..n {
            let v = match (given[a * n + b], given[b * n + a]) {
                (Some((x, l)), Some((y, _))) if (x - y).abs() > 1e-12 * x.abs().max(y.abs()) => {
                    return Err(at(l, format!("pair {}+{} has two different difficulties, {x} and {y}; give it once or twice the same", ids[a], ids[b])));
                }
                (Some((x, _)), _) | (None, Some((x, _))) => x,
                (None, None) => continue,
            };
            candidates
                .allow(a, b, v)
                .map_err(|e| at(0, e.to_string()))?;
        }
    }
    Ok(Scores { ids, candidates })
}

fn edges(args: EdgesArgs) -> anyhow::Result<()> {
    for p in [&args.out, &args.figure].into_iter().flatten() {
        if p.exists() && !args.force {
            return Err(Exit::bad_input(format!(
                "{} exists; legwork does not overwrite it\nhint: choose another path or add --force",
                p.display()
            ))
            .into());
        }
    }
    let scores = read_scores(&args.scores)?;
    if let Some(after) = &args.after {
        return edges_after(&args, &scores, after);
    }
    let n = scores.ids.len();
    let rules = EdgeRules {
        edges: args.edges.unwrap_or((3 * n).div_ceil(2)),
        max_path: args.max_path,
        every_ligand_in_cycle: !args.allow_unchecked,
    };
    let c = &scores.candidates;
    let p = propose_edges(c, &rules).map_err(|e| {
        Exit::bad_input(format!(
            "{}: no network proposed: {e}\nhint: allow more pairs in the matrix, raise --edges or --max-path, or add --allow-unchecked",
            args.scores.display()
        ))
    })?;
    let var = |e: &[(usize, usize)]| -> Vec<(usize, usize, f64)> {
        e.iter()
            .map(|&(a, b)| (a, b, c.get(a, b).expect("allowed")))
            .collect()
    };
    let tree = minimum_spanning_tree(c).expect("the proposal has a tree");
    let tree_sum = sum_of_variances(n, &var(&tree)).expect("connected");
    let extra = rules.edges.saturating_sub(n - 1);
    let seeds = 20u64;
    let random: Vec<f64> = (0..seeds)
        .filter_map(|s| tree_plus_random(c, extra, args.seed.wrapping_add(s)).ok())
        .map(|e| sum_of_variances(n, &var(&e)).expect("connected"))
        .collect();
    let random_mean = random.iter().sum::<f64>() / random.len().max(1) as f64;
    let with_sigma: Vec<(String, String, f64)> = p
        .edges
        .iter()
        .map(|&(a, b)| {
            (
                scores.ids[a].clone(),
                scores.ids[b].clone(),
                c.get(a, b).expect("allowed").sqrt(),
            )
        })
        .collect();
    write_outputs(&args, &scores.ids, &with_sigma, &[], "Proposed network")?;
    if args.json {
        let doc = json!({
            "ligands": n,
            "edges": with_sigma.iter().map(|(a, b, s)| json!({"a": a, "b": b, "expected_sigma": s})).collect::<Vec<_>>(),
            "expected_sum_of_variances": p.sum_of_variances,
            "expected_largest_sigma": p.largest_sigma,
            "longest_path": p.diameter,
            "baseline": {"tree": tree_sum, "tree_plus_random_mean": random_mean, "seeds": random.len()},
            "caution": CAUTION,
        });
        println!("{}", serde_json::to_string_pretty(&doc)?);
        return Ok(());
    }
    let mut s = String::new();
    let _ = writeln!(
        s,
        "{} ligands, {} allowed pairs → {} edges; every ligand on a cycle: {}; longest path {} edges (bound {})",
        n,
        c.pairs().len(),
        p.edges.len(),
        if rules.every_ligand_in_cycle { "yes" } else { "not required" },
        p.diameter,
        rules.max_path
    );
    let _ = writeln!(
        s,
        "expected sum of ligand variances {:.4} (difficulty units); spanning tree alone {:.4}; tree + {extra} random edges {:.4} (mean of {} seeds)",
        p.sum_of_variances,
        tree_sum,
        random_mean,
        random.len()
    );
    let _ = writeln!(
        s,
        "expected largest ligand σ {:.4} (√difficulty units)\n",
        p.largest_sigma
    );
    let _ = writeln!(s, "  {:<20} {:<20} {:>10}", "a", "b", "difficulty");
    for (a, b, sg) in &with_sigma {
        let _ = writeln!(s, "  {a:<20} {b:<20} {:>10.4}", sg * sg);
    }
    written_lines(&mut s, &args);
    let _ = writeln!(s, "\n{CAUTION}.");
    print!("{s}");
    Ok(())
}

fn written_lines(s: &mut String, args: &EdgesArgs) {
    if let Some(o) = &args.out {
        let _ = writeln!(
            s,
            "\nedges written to {} (for `edges:` in the campaign file)",
            o.display()
        );
    }
    if let Some(f) = &args.figure {
        let _ = writeln!(s, "figure written to {}", f.display());
    }
}

fn load_results(path: &Path) -> Result<Results, Exit> {
    let r = if path.is_dir() {
        report::load(path)
    } else {
        report::load_file(path)
    };
    r.map_err(|e| {
        Exit::bad_input(format!(
            "{e}\nhint: give the campaign root or its results/summary.json; `legwork collect CAMPAIGN` writes it"
        ))
    })
}

fn edges_after(args: &EdgesArgs, scores: &Scores, after: &Path) -> anyhow::Result<()> {
    let results = load_results(after)?;
    // The network's ligands, in the matrix's order where the matrix has them.
    let mut net_ids: Vec<String> = Vec::new();
    for e in &results.edges {
        if let Some(b) = &e.ligand_b {
            for l in [&e.ligand_a, b] {
                if !net_ids.contains(l) {
                    net_ids.push(l.clone());
                }
            }
        }
    }
    if net_ids.is_empty() {
        return Err(Exit::bad_input(format!(
            "{}: the results have no edges between two ligands\nhint: --after needs a relative campaign's collected results",
            after.display()
        ))
        .into());
    }
    let missing: Vec<&String> = net_ids.iter().filter(|l| !scores.ids.contains(l)).collect();
    if !missing.is_empty() {
        return Err(Exit::bad_input(format!(
            "{}: ligand(s) {} of the results are not in the difficulty matrix\nhint: add a row and a column for each",
            args.scores.display(),
            missing.iter().map(|s| s.as_str()).collect::<Vec<_>>().join(", ")
        ))
        .into());
    }
    let idx = |l: &str| net_ids.iter().position(|x| x == l).expect("listed");
    let m = net_ids.len();
    let mut current = Vec::new();
    let mut ratios = Vec::new();
    for e in &results.edges {
        let Some(b) = &e.ligand_b else { continue };
        let (i, j) = (idx(&e.ligand_a), idx(b));
        current.push((i, j, e.sigma * e.sigma));
        let (si, sj) = (
            scores
                .ids
                .iter()
                .position(|x| x == &e.ligand_a)
                .expect("checked"),
            scores.ids.iter().position(|x| x == b).expect("checked"),
        );
        if let Some(d) = scores.candidates.get(si, sj) {
            ratios.push(e.sigma * e.sigma / d);
        }
    }
    // Calibrate difficulty to variance by the median ratio over the edges run.
    ratios.sort_by(f64::total_cmp);
    let scale = if ratios.is_empty() {
        1.0
    } else {
        ratios[ratios.len() / 2]
    };
    let mut cand = Candidates::new(m);
    for (a, b, d) in scores.candidates.pairs() {
        let (ia, ib) = (
            net_ids.iter().position(|x| x == &scores.ids[a]),
            net_ids.iter().position(|x| x == &scores.ids[b]),
        );
        if let (Some(ia), Some(ib)) = (ia, ib) {
            cand.allow(ia, ib, d * scale).expect("positive");
        }
    }
    let sug = extra_edges(&current, &cand, args.add).map_err(|e| {
        Exit::bad_input(format!(
            "{}: {e}\nhint: the network of the results must connect every ligand before edges can be suggested",
            after.display()
        ))
    })?;
    let largest_now = {
        let c = legwork_numerics::design::laplacian_pinv(m, &current)
            .map_err(|e| Exit::bad_input(e.to_string()))?;
        (0..m).map(|i| c[(i, i)]).fold(0.0, f64::max).sqrt()
    };
    let existing: Vec<(String, String, f64)> = current
        .iter()
        .map(|&(a, b, v)| (net_ids[a].clone(), net_ids[b].clone(), v.sqrt()))
        .collect();
    let added: Vec<(String, String, f64)> = sug
        .iter()
        .map(|x| {
            (
                net_ids[x.a].clone(),
                net_ids[x.b].clone(),
                x.variance.sqrt(),
            )
        })
        .collect();
    write_outputs(
        args,
        &net_ids,
        &existing,
        &added,
        "Network with suggested edges",
    )?;
    let unit = results.unit.as_str();
    if args.json {
        let doc = json!({
            "unit": unit,
            "calibration": scale,
            "largest_sigma_now": largest_now,
            "add": sug.iter().map(|x| json!({
                "a": net_ids[x.a], "b": net_ids[x.b],
                "expected_sigma": x.variance.sqrt(),
                "worst_ligand_before": net_ids[x.worst_before],
                "largest_sigma_after": x.largest_sigma_after,
            })).collect::<Vec<_>>(),
            "caution": CAUTION,
        });
        println!("{}", serde_json::to_string_pretty(&doc)?);
        return Ok(());
    }
    let mut s = String::new();
    let _ = writeln!(
        s,
        "{} edges run among {m} ligands; largest ligand σ now {largest_now:.3} {unit} (relative to the series mean)",
        current.len()
    );
    let _ = writeln!(
        s,
        "expected σ of a new edge: √(difficulty × {scale:.4}), the median ratio of σ² to difficulty over the edges run\n"
    );
    let _ = writeln!(
        s,
        "  {:<28} {:>12} {:>22} {:>16}",
        "add", "expected σ", "largest ligand σ after", "helps most"
    );
    for x in &sug {
        let _ = writeln!(
            s,
            "  {:<28} {:>12.3} {:>22.3} {:>16}",
            format!("{}+{}", net_ids[x.a], net_ids[x.b]),
            x.variance.sqrt(),
            x.largest_sigma_after,
            net_ids[x.worst_before]
        );
    }
    written_lines(&mut s, args);
    let _ = writeln!(s, "\nAdd the edges to the campaign's `edges:` and run them; legwork does not change the campaign. {CAUTION}.");
    print!("{s}");
    Ok(())
}

fn write_outputs(
    args: &EdgesArgs,
    ids: &[String],
    edges: &[(String, String, f64)],
    added: &[(String, String, f64)],
    title: &str,
) -> anyhow::Result<()> {
    if let Some(out) = &args.out {
        let list = if args.after.is_some() { added } else { edges };
        let mut csv = String::from("a,b\n");
        for (a, b, _) in list {
            let _ = writeln!(csv, "{a},{b}");
        }
        write_atomic(out, csv.as_bytes())?;
    }
    if let Some(fig) = &args.figure {
        let svg = network_svg(ids, edges, added, title)
            .map_err(|e| anyhow::anyhow!("drawing the network figure failed: {e}"))?;
        write_atomic(fig, svg.as_bytes())?;
    }
    Ok(())
}

/// Writes through a temporary file in the same folder and a rename, so a reader
/// never sees half a file.
fn write_atomic(path: &Path, bytes: &[u8]) -> anyhow::Result<()> {
    let dir = path
        .parent()
        .filter(|d| !d.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path.file_name().and_then(|n| n.to_str()).unwrap_or("out");
    let tmp = dir.join(format!(".{name}.tmp{}", std::process::id()));
    std::fs::write(&tmp, bytes)
        .and_then(|_| std::fs::rename(&tmp, path))
        .map_err(|e| {
            let _ = std::fs::remove_file(&tmp);
            Exit::new(
                crate::exit::ExitKind::Failure,
                format!(
                    "{}: cannot write: {e}\nhint: check that the folder exists and is writable",
                    path.display()
                ),
            )
        })?;
    Ok(())
}

/// The network on a circle: line width grows with 1/σ (precise edges are
/// heavy), suggested edges dashed in the second colour.
fn network_svg(
    ids: &[String],
    edges: &[(String, String, f64)],
    added: &[(String, String, f64)],
    title: &str,
) -> Result<String, String> {
    let (w, h) = (620u32, 580u32);
    let mut s = String::new();
    {
        let root = SVGBackend::with_string(&mut s, (w, h)).into_drawing_area();
        let draw = || -> Result<(), DrawingAreaErrorKind<std::io::Error>> {
            root.fill(&WHITE)?;
            let n = ids.len().max(1) as f64;
            let (cx, cy, r) = (w as f64 / 2.0, h as f64 / 2.0 + 10.0, h as f64 / 2.0 - 90.0);
            let pos = |id: &str| -> (i32, i32) {
                let i = ids.iter().position(|x| x == id).unwrap_or(0) as f64;
                let a = 2.0 * std::f64::consts::PI * i / n - std::f64::consts::FRAC_PI_2;
                ((cx + r * a.cos()) as i32, (cy + r * a.sin()) as i32)
            };
            root.draw(&Text::new(
                format!(
                    "{title}: {} ligands, {} edges",
                    ids.len(),
                    edges.len() + added.len()
                ),
                (14, 12),
                ("sans-serif", 16).into_font().color(&plots::INK),
            ))?;
            root.draw(&Text::new(
                "line width ∝ 1/expected σ (predicted, not measured)".to_string(),
                (14, 34),
                ("sans-serif", 12).into_font().color(&plots::MUTED),
            ))?;
            let min_sigma = edges
                .iter()
                .chain(added)
                .map(|e| e.2)
                .fold(f64::INFINITY, f64::min);
            let width = |sg: f64| ((4.0 * min_sigma / sg).round() as u32).clamp(1, 4);
            for (a, b, sg) in edges {
                root.draw(&PathElement::new(
                    vec![pos(a), pos(b)],
                    plots::TEAL.stroke_width(width(*sg)),
                ))?;
            }
            for (a, b, sg) in added {
                // Dashed: short segments along the line.
                let (p, q) = (pos(a), pos(b));
                let steps = 24;
                for k in (0..steps).step_by(2) {
                    let t0 = k as f64 / steps as f64;
                    let t1 = (k + 1) as f64 / steps as f64;
                    let at = |t: f64| {
                        (
                            (p.0 as f64 + t * (q.0 - p.0) as f64) as i32,
                            (p.1 as f64 + t * (q.1 - p.1) as f64) as i32,
                        )
                    };
                    root.draw(&PathElement::new(
                        vec![at(t0), at(t1)],
                        plots::ORANGE.stroke_width(width(*sg)),
                    ))?;
                }
            }
            for id in ids {
                let (x, y) = pos(id);
                root.draw(&Circle::new((x, y), 5, plots::INK.filled()))?;
                let a = ((y as f64 - cy).atan2(x as f64 - cx)).cos();
                let dx = if a < -0.2 {
                    -12 - 7 * id.chars().count() as i32
                } else {
                    10
                };
                root.draw(&Text::new(
                    id.clone(),
                    (x + dx, y - 6),
                    ("sans-serif", 12).into_font().color(&plots::INK),
                ))?;
            }
            root.present()
        };
        draw().map_err(|e| e.to_string())?;
    }
    Ok(s)
}

// ---------------------------------------------------------------- sampling

fn parse_costs(s: Option<&str>) -> Result<BTreeMap<String, f64>, Exit> {
    let mut out = BTreeMap::new();
    for part in s
        .unwrap_or("")
        .split(',')
        .map(str::trim)
        .filter(|p| !p.is_empty())
    {
        let (leg, v) = part.split_once('=').ok_or_else(|| {
            Exit::bad_input(format!("--frame-cost: '{part}' is not LEG=COST\nhint: e.g. --frame-cost complex=0.004,solvent=0.001"))
        })?;
        let v: f64 = v
            .trim()
            .parse()
            .ok()
            .filter(|v: &f64| v.is_finite() && *v > 0.0)
            .ok_or_else(|| {
                Exit::bad_input(format!(
                    "--frame-cost: '{part}': the cost must be a positive number"
                ))
            })?;
        out.insert(leg.trim().to_string(), v);
    }
    Ok(out)
}

/// One window of the results as the allocator sees it.
struct Win {
    subject: String,
    leg: String,
    replica: u32,
    state: usize,
    frames: f64,
}

fn sampling(args: SamplingArgs) -> anyhow::Result<()> {
    if !(args.budget.is_finite() && args.budget > 0.0) {
        return Err(
            Exit::bad_input(format!("--budget {}: give a positive amount", args.budget)).into(),
        );
    }
    let costs = parse_costs(args.frame_cost.as_deref())?;
    let results = load_results(&args.results)?;
    for leg in costs.keys() {
        if !results.legs.iter().any(|l| &l.leg == leg) {
            return Err(Exit::bad_input(format!(
                "--frame-cost: the results have no leg '{leg}'\nhint: the legs are {}",
                {
                    let mut v: Vec<&str> = results.legs.iter().map(|l| l.leg.as_str()).collect();
                    v.sort_unstable();
                    v.dedup();
                    v.join(", ")
                }
            ))
            .into());
        }
    }
    let groups: Vec<&crate::cycle::EdgeResult> = results.edges.iter().collect();
    if groups.is_empty() {
        return Err(Exit::incomplete(
            "the results have no finished edge yet; collect again when some are done",
        )
        .into());
    }
    let mut windows = Vec::new();
    let mut wins = Vec::new();
    let mut notes = Vec::new();
    for (g, e) in groups.iter().enumerate() {
        let legs: Vec<&crate::analysis::LegReplica> = results
            .legs
            .iter()
            .filter(|l| l.subject == e.subject)
            .collect();
        let mut model = 0.0;
        let mut parts: Vec<(Win, f64, f64)> = Vec::new(); // window, share of edge variance, cost
        for l in &legs {
            let n_rep = legs.iter().filter(|x| x.leg == l.leg).count() as f64;
            let shares = window_shares(l);
            let Some(shares) = shares else {
                notes.push(format!(
                    "{}/{}/r{}: no per-window frames in the results; left out",
                    l.subject, l.leg, l.replica
                ));
                continue;
            };
            let var = l.sigma * l.sigma / (n_rep * n_rep);
            model += var;
            for (state, share, frames) in shares {
                parts.push((
                    Win {
                        subject: l.subject.clone(),
                        leg: l.leg.clone(),
                        replica: l.replica,
                        state,
                        frames,
                    },
                    var * share,
                    costs.get(&l.leg).copied().unwrap_or(1.0),
                ));
            }
        }
        if parts.is_empty() || model <= 0.0 {
            return Err(Exit::bad_input(format!(
                "{}: none of its legs has per-window results with a σ, so its variance cannot be split over windows\nhint: collect again with a current legwork",
                e.subject
            ))
            .into());
        }
        // Scale the windows' shares to the edge's reported σ² (which includes the
        // replica spread and corrections' errors as measured).
        let rho = e.sigma * e.sigma / model;
        for (w, v, cost) in parts {
            windows.push(WindowVariance {
                group: g,
                a: rho * v * w.frames,
                frames: w.frames,
                cost,
            });
            wins.push(w);
        }
    }
    let mut ligand_ids: Vec<String> = Vec::new();
    let relative = groups.iter().all(|e| e.ligand_b.is_some());
    let network = if relative && !args.independent {
        let mut edges = Vec::new();
        for e in &groups {
            let b = e.ligand_b.as_ref().expect("relative");
            let mut id = |l: &String| match ligand_ids.iter().position(|x| x == l) {
                Some(i) => i,
                None => {
                    ligand_ids.push(l.clone());
                    ligand_ids.len() - 1
                }
            };
            edges.push((id(&e.ligand_a), id(b)));
        }
        Some(Network {
            ligands: ligand_ids.len(),
            edges,
        })
    } else {
        None
    };
    let problem = AllocationProblem {
        windows,
        groups: groups.len(),
        network,
    };
    let out = allocate(&problem, args.budget, args.objective).map_err(|e| {
        Exit::bad_input(format!(
            "{}: {e}\nhint: a network that falls apart can be allocated with --independent",
            args.results.display()
        ))
    })?;
    let u = uniform(&problem, args.budget);
    let uf: Vec<f64> = problem
        .windows
        .iter()
        .zip(&u)
        .map(|(w, e)| w.frames + e)
        .collect();
    let uniform_obj = problem
        .objective(&uf, args.objective)
        .map_err(|e| Exit::bad_input(e.to_string()))?;
    let unit = results.unit.as_str();
    let what = match (args.objective, problem.network.is_some()) {
        (Objective::SumOfVariances, true) => format!("sum of ligand variances ({unit})²"),
        (Objective::SumOfVariances, false) => format!("sum of edge variances ({unit})²"),
        (Objective::LargestSigma, true) => format!("largest ligand σ ({unit})"),
        (Objective::LargestSigma, false) => format!("largest edge σ ({unit})"),
    };
    let mut order: Vec<usize> = (0..wins.len()).collect();
    order.sort_by(|&a, &b| out.extra[b].total_cmp(&out.extra[a]));
    let shown = if args.top == 0 {
        order.len()
    } else {
        args.top.min(order.len())
    };
    if args.json {
        let doc = json!({
            "unit": unit,
            "objective": what,
            "budget": args.budget,
            "spent": out.spent,
            "before": out.objective_before,
            "after": out.objective_after,
            "uniform": uniform_obj,
            "edges": groups.iter().enumerate().map(|(g, e)| json!({
                "subject": e.subject,
                "sigma_before": out.group_variance_before[g].sqrt(),
                "sigma_after": out.group_variance_after[g].sqrt(),
            })).collect::<Vec<_>>(),
            "ligands": ligand_ids.iter().enumerate().map(|(i, l)| json!({
                "ligand": l,
                "sigma_before": out.ligand_variance_before[i].sqrt(),
                "sigma_after": out.ligand_variance_after[i].sqrt(),
            })).collect::<Vec<_>>(),
            "windows": order.iter().map(|&i| { let w = &wins[i]; json!({
                "subject": w.subject, "leg": w.leg, "replica": w.replica, "window": w.state,
                "frames": w.frames, "extra_frames": out.extra[i].ceil(),
            })}).collect::<Vec<_>>(),
            "notes": notes,
            "caution": CAUTION,
        });
        println!("{}", serde_json::to_string_pretty(&doc)?);
        return Ok(());
    }
    let mut s = String::new();
    let _ = writeln!(
        s,
        "{} windows of {} {}; budget {} ({})",
        wins.len(),
        groups.len(),
        if relative { "edges" } else { "ligands" },
        args.budget,
        if costs.is_empty() {
            "frames"
        } else {
            "cost units of --frame-cost"
        }
    );
    let _ = writeln!(
        s,
        "{what}: now {:.4}, after this allocation {:.4}, after the same budget spread evenly {:.4}\n",
        out.objective_before, out.objective_after, uniform_obj
    );
    let _ = writeln!(
        s,
        "  {:<28} {:>11} {:>11}",
        if relative { "edge" } else { "ligand" },
        "σ now",
        "σ after"
    );
    for (g, e) in groups.iter().enumerate() {
        let _ = writeln!(
            s,
            "  {:<28} {:>11.4} {:>11.4}",
            e.subject,
            out.group_variance_before[g].sqrt(),
            out.group_variance_after[g].sqrt()
        );
    }
    if !ligand_ids.is_empty() {
        let _ = writeln!(
            s,
            "\n  {:<28} {:>11} {:>11}   (relative to the series mean)",
            "ligand", "σ now", "σ after"
        );
        for (i, l) in ligand_ids.iter().enumerate() {
            let _ = writeln!(
                s,
                "  {:<28} {:>11.4} {:>11.4}",
                l,
                out.ligand_variance_before[i].sqrt(),
                out.ligand_variance_after[i].sqrt()
            );
        }
    }
    let _ = writeln!(s, "\n  {:<40} {:>8} {:>14}", "window", "kept", "add frames");
    for &i in &order[..shown] {
        let w = &wins[i];
        let _ = writeln!(
            s,
            "  {:<40} {:>8} {:>14}",
            format!("{}/{}/r{}/w{:02}", w.subject, w.leg, w.replica, w.state),
            w.frames,
            out.extra[i].ceil()
        );
    }
    if shown < order.len() {
        let _ = writeln!(
            s,
            "  … {} more windows (--top 0 lists all)",
            order.len() - shown
        );
    }
    let _ = writeln!(
        s,
        "  (kept: frames after equilibration, the ones the estimate used)"
    );
    for n in &notes {
        let _ = writeln!(s, "note: {n}");
    }
    let _ = writeln!(
        s,
        "\nEach window's share of its leg's σ² follows the TI error propagation (c_i² SEM_i², SEM_i² ∝ 1/frames), scaled to the edge's reported σ. legwork does not extend windows yet: run the extra frames by hand. {CAUTION}."
    );
    print!("{s}");
    Ok(())
}

/// Each window's (state, share of its leg replica's variance, production frames),
/// from the TI error propagation σ² = Σ c_i² SEM_i² (trapezoid weights along each
/// component's λ path). Without dU/dλ the shares are equal. `None` when the
/// windows carry no frame counts.
fn window_shares(l: &crate::analysis::LegReplica) -> Option<Vec<(usize, f64, f64)>> {
    let mut by_comp: BTreeMap<Option<String>, Vec<&crate::analysis::WindowSummary>> =
        BTreeMap::new();
    for w in &l.windows {
        by_comp.entry(w.component.clone()).or_default().push(w);
    }
    let k = by_comp.values().map(|v| v.len()).min()?;
    if k == 0 {
        return None;
    }
    let mut t = vec![0.0; k];
    let mut frames = vec![0.0; k];
    for list in by_comp.values() {
        let x: Vec<f64> = list.iter().map(|w| w.lambda).collect();
        let c = path_weights(&x, false);
        for (i, w) in list.iter().take(k).enumerate() {
            if w.dudl_sem.is_finite() {
                t[i] += (c[i] * w.dudl_sem).powi(2);
            }
            let f = w.frames? as f64 - w.discarded.unwrap_or(0) as f64;
            frames[i] = f.max(1.0);
        }
    }
    let total: f64 = t.iter().sum();
    Some(
        (0..k)
            .map(|i| {
                let share = if total > 0.0 {
                    t[i] / total
                } else {
                    1.0 / k as f64
                };
                (i, share, frames[i])
            })
            .collect(),
    )
}
