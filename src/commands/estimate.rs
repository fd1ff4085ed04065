//! `legwork estimate`: one leg's free energy from its window tables, by hand.

use crate::cli::Global;
use crate::collect::{read_leg_with, ReaderConfig, WindowHint};
use crate::estimate::{
    estimate_leg, DeltaG, Equilibration, EstimateOptions, LegEstimate, Method, Subsample,
};
use crate::exit::Exit;
use crate::units::EnergyUnit;
use serde_json::{json, Map, Value};
use std::path::PathBuf;
use std::time::Instant;

/// Options of `legwork estimate`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Window tables of one leg, one per state, in any order.
    #[arg(required = true, value_name = "FILE")]
    pub files: Vec<PathBuf>,
    /// Estimators: one or a comma list of ti, ti_spline, exp_forward, exp_reverse, bar, mbar, or all.
    #[arg(long, default_value = "all")]
    pub method: String,
    /// Unit of the results: kcal/mol, kJ/mol or kT.
    #[arg(long, default_value = "kcal/mol")]
    pub unit: EnergyUnit,
    /// Temperature in K, overriding the files' own.
    #[arg(long, value_name = "KELVIN")]
    pub temperature: Option<f64>,
    /// Equilibration: auto (detect), none, or a number of frames to discard.
    #[arg(long, default_value = "auto")]
    pub equilibration: Equilibration,
    /// Subsampling to uncorrelated frames: auto or none.
    #[arg(long, default_value = "auto", value_parser = parse_subsample)]
    pub subsample: Subsample,
    /// Also compute forward and reverse convergence series (the first method asked for).
    #[arg(long)]
    pub convergence: bool,
    /// Print JSON instead of a table.
    #[arg(long)]
    pub json: bool,
    /// Read the files with this reader configuration (a YAML file holding a
    /// reader section, or a campaign file whose `reader:` is used) instead of as
    /// window tables.
    #[arg(long, value_name = "FILE")]
    pub reader: Option<PathBuf>,
}

fn parse_subsample(s: &str) -> Result<Subsample, String> {
    match s {
        "auto" => Ok(Subsample::Auto),
        "none" => Ok(Subsample::None),
        _ => Err(format!("subsample must be auto or none, not '{s}'")),
    }
}

fn parse_methods(s: &str) -> Result<Vec<Method>, String> {
    let mut out = Vec::new();
    for part in s.split(',') {
        let part = part.trim();
        if part == "all" {
            out.extend(Method::ALL);
        } else {
            out.push(part.parse::<Method>()?);
        }
    }
    out.sort();
    out.dedup();
    Ok(out)
}

/// Runs `legwork estimate`.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    let methods =
        parse_methods(&args.method).map_err(|e| Exit::bad_input(format!("--method: {e}")))?;
    if let Some(t) = args.temperature {
        if !(t.is_finite() && t > 0.0) {
            return Err(Exit::bad_input(format!(
                "--temperature {t}: give a positive temperature in kelvin"
            ))
            .into());
        }
    }
    let hint = WindowHint {
        temperature_k: args.temperature,
        ..Default::default()
    };
    let t_read = Instant::now();
    let reader = match &args.reader {
        Some(p) => crate::collect::config::load_reader_file(p).map_err(Exit::bad_input)?,
        None => ReaderConfig::default(),
    };
    let leg = read_leg_with(&args.files, &reader, &vec![hint; args.files.len()])
        .map_err(|e| Exit::bad_input(e.to_string()))?;
    let read_s = t_read.elapsed().as_secs_f64();
    if methods.iter().all(|m| m.uses_dudl()) && !leg.windows.iter().all(|w| w.has_dudl()) {
        return Err(Exit::bad_input(
            "--method asks only for TI but the files have no dU/dλ column",
        )
        .into());
    }
    let opts = EstimateOptions {
        methods,
        equilibration: args.equilibration,
        subsample: args.subsample,
        convergence: args.convergence,
        ..Default::default()
    };
    let est = estimate_leg(&leg, &opts)
        .map_err(|e| Exit::bad_input(format!("cannot estimate this leg: {e}")))?;
    if let Some(m) = &est.mbar {
        tracing::info!(
            "read {:.3} s; MBAR solve {:.4} s in {} iterations, {} passes over the samples",
            read_s,
            m.solve_seconds,
            m.iterations,
            m.passes
        );
    }
    if args.json {
        println!(
            "{}",
            serde_json::to_string_pretty(&to_json(&est, args.unit, read_s))?
        );
    } else {
        print!("{}", table(&est, args.unit));
    }
    // The samples (as much memory as the energies) are left to the operating system,
    // which takes them back at exit in one go rather than one unmapping per window.
    std::mem::forget(leg);
    Ok(())
}

fn dg_json(d: DeltaG) -> Value {
    json!({"delta_g": d.delta_g, "sigma": d.sigma})
}

/// The JSON document of `legwork estimate --json`.
pub fn to_json(est: &LegEstimate, unit: EnergyUnit, read_s: f64) -> Value {
    let t = est.temperature_k;
    let estimates: Map<String, Value> = est
        .estimates
        .iter()
        .map(|(m, d)| (m.as_str().to_string(), dg_json(d.in_unit(unit, t))))
        .collect();
    let mut doc = json!({
        "unit": unit.as_str(),
        "temperature_K": t,
        "states": est.n_states,
        "estimates": estimates,
        "overlap": est.overlap,
        "min_adjacent_overlap": est.min_adjacent_overlap,
        "windows": est.windows,
        "warnings": est.warnings_in(unit),
        "unreliable": est.unreliable,
        "read_s": read_s,
    });
    if let Some(m) = &est.mbar {
        doc["mbar_solve_s"] = json!(m.solve_seconds);
        doc["mbar_iterations"] = json!(m.iterations);
    }
    if let Some(c) = &est.convergence {
        doc["convergence"] = json!({
            "method": c.method.as_str(),
            "points": c.points.iter().map(|p| json!({
                "fraction": p.fraction,
                "forward": dg_json(p.forward.in_unit(unit, t)),
                "reverse": dg_json(p.reverse.in_unit(unit, t)),
            })).collect::<Vec<_>>(),
        });
    }
    doc
}

fn table(est: &LegEstimate, unit: EnergyUnit) -> String {
    use std::fmt::Write;
    let t = est.temperature_k;
    let mut s = String::new();
    let _ = writeln!(
        s,
        "{} states at {} K; G(state {}) − G(state 0) in {unit}",
        est.n_states,
        t,
        est.n_states - 1
    );
    let _ = writeln!(s, "\n  {:<12} {:>12} {:>10}", "method", "ΔG", "σ");
    for m in Method::ALL {
        if let Some(d) = est.delta_g_in(m, unit) {
            let _ = writeln!(
                s,
                "  {:<12} {:>12.4} {:>10.4}",
                m.as_str(),
                d.delta_g,
                d.sigma
            );
        }
    }
    if let Some(o) = est.min_adjacent_overlap {
        let _ = writeln!(
            s,
            "\n  smallest overlap between neighbouring states: {}",
            crate::report::overlap_text(o)
        );
    }
    let _ = writeln!(
        s,
        "\n  {:>5} {:>8} {:>13} {:>12} {:>6}",
        "state", "frames", "equilibration", "inefficiency", "used"
    );
    for w in &est.windows {
        let _ = writeln!(
            s,
            "  {:>5} {:>8} {:>13} {:>12.2} {:>6}",
            w.state, w.frames, w.equilibration_frames, w.inefficiency, w.used
        );
    }
    if let Some(c) = &est.convergence {
        let _ = writeln!(
            s,
            "\n  convergence ({}): fraction, forward, reverse",
            c.method
        );
        for p in &c.points {
            let (f, r) = (p.forward.in_unit(unit, t), p.reverse.in_unit(unit, t));
            let _ = writeln!(
                s,
                "  {:>5.1} {:>10.4} ± {:<8.4} {:>10.4} ± {:<8.4}",
                p.fraction, f.delta_g, f.sigma, r.delta_g, r.sigma
            );
        }
    }
    if !est.unreliable.is_empty() {
        let _ = writeln!(s, "\nunreliable:");
        for (m, why) in &est.unreliable {
            let _ = writeln!(s, "  - {m}: {why}");
        }
    }
    if !est.warnings.is_empty() {
        let _ = writeln!(s, "\nwarnings:");
        for w in est.warnings_in(unit) {
            let _ = writeln!(s, "  - {w}");
        }
    }
    s
}
