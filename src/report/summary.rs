//! The terminal summary: ranked ligands, worst edges, agreement with experiment, warnings.

use crate::analysis::Results;
use crate::network::stats::{Interval, Stats};
use crate::network::Offset;
use std::io::{self, Write};

/// How many edges the summary lists as worst.
const WORST_EDGES: usize = 5;

fn interval(name: &str, i: &Option<Interval>) -> Option<String> {
    i.map(|i| format!("{name} {:.2} [{:.2}, {:.2}]", i.value, i.low, i.high))
}

fn stats_line(s: &Stats) -> String {
    [
        interval("RMSE", &s.rmse),
        interval("MUE", &s.mue),
        interval("R", &s.pearson_r),
        interval("R²", &s.r2),
        interval("τ", &s.kendall_tau),
    ]
    .into_iter()
    .flatten()
    .collect::<Vec<_>>()
    .join("  ")
}

/// Writes the summary for a terminal (plain text, no colour codes).
pub fn print_summary(r: &Results, out: &mut dyn Write) -> io::Result<()> {
    writeln!(
        out,
        "{} — {} campaign, {} at {} K, headline estimator {}",
        r.campaign,
        r.kind.as_str(),
        r.unit,
        r.temperature_k,
        r.estimator
    )?;
    ligands(r, out)?;
    edges(r, out)?;
    if !r.cycles.is_empty() {
        let bad = r.cycles.iter().filter(|c| c.flagged).count();
        writeln!(
            out,
            "\nCycle closure: {} of {} basis cycles within 2σ",
            r.cycles.len() - bad,
            r.cycles.len()
        )?;
    }
    if let Some(s) = &r.statistics {
        writeln!(
            out,
            "\nAgainst experiment ({}, bootstrap 95% intervals):",
            r.unit
        )?;
        if s.ligands.n > 0 {
            writeln!(
                out,
                "  ligands (n={}): {}",
                s.ligands.n,
                stats_line(&s.ligands)
            )?;
        }
        if s.edges.n > 0 {
            writeln!(out, "  edges   (n={}): {}", s.edges.n, stats_line(&s.edges))?;
        }
        if !s.anchored.is_empty() {
            writeln!(
                out,
                "  not scored (ΔG fixed by their own measurement): {}",
                s.anchored.join(", ")
            )?;
        }
    }
    missing(r, out)?;
    warnings(r, out)
}

/// The ligands, most favourable first, and how their offset was fixed.
fn ligands(r: &Results, out: &mut dyn Write) -> io::Result<()> {
    if r.ligands.is_empty() {
        return writeln!(out, "No ligand has a result yet.");
    }
    let offset = match r.offsets.as_slice() {
        [] => "absolute cycles".to_string(),
        [Offset::Measured { count }] => format!("offset: mean of {count} measured"),
        [Offset::Reference { ligand }] => format!("offset: {ligand} at 0"),
        [Offset::SeriesMean] => "offset: series mean at 0".to_string(),
        many => format!("{} disconnected parts", many.len()),
    };
    writeln!(out, "\nLigands, most favourable first ({offset}):")?;
    writeln!(
        out,
        "  {:>4}  {:<16} {:>9} {:>7} {:>9}",
        "rank", "ligand", "ΔG", "σ", "measured"
    )?;
    for (i, l) in r.ranked_ligands().iter().enumerate() {
        let m = l.measured.map(|m| format!("{m:9.2}")).unwrap_or_default();
        writeln!(
            out,
            "  {:>4}  {:<16} {:>9.2} {:>7} {:>9}",
            i + 1,
            l.ligand,
            l.dg,
            match l.anchor {
                Some(_) => "ref".to_string(),
                None => format!("{:.2}", l.sigma),
            },
            m
        )?;
    }
    Ok(())
}

/// The worst edges of a relative campaign, with their residuals and flags.
fn edges(r: &Results, out: &mut dyn Write) -> io::Result<()> {
    if r.edges.is_empty() || !r.edges.iter().any(|e| e.ligand_b.is_some()) {
        return Ok(());
    }
    writeln!(out, "\nEdges to look at first:")?;
    for e in r.worst_edges().into_iter().take(WORST_EDGES) {
        let resid = match (e.residual, e.sigma > 0.0) {
            (Some(x), true) => format!("  residual {x:+.2} ({:.1}σ)", (x / e.sigma).abs()),
            _ => String::new(),
        };
        let flags = if e.flags.is_empty() {
            String::new()
        } else {
            let names: Vec<&str> = e.flags.iter().map(|f| f.as_str()).collect();
            format!("  [{}]", names.join(", "))
        };
        writeln!(
            out,
            "  {:<28} ΔΔG {:+7.2} ± {:.2}{resid}{flags}",
            e.subject, e.ddg, e.sigma
        )?;
    }
    Ok(())
}

/// The unfinished leg replicas (the first ten).
fn missing(r: &Results, out: &mut dyn Write) -> io::Result<()> {
    if r.missing.is_empty() {
        return Ok(());
    }
    writeln!(out, "\nNot finished ({} leg replicas):", r.missing.len())?;
    for m in r.missing.iter().take(10) {
        writeln!(
            out,
            "  {}/{}/r{}: {}/{} windows {}",
            m.subject, m.leg, m.replica, m.windows_done, m.windows_total, m.note
        )?;
    }
    if r.missing.len() > 10 {
        writeln!(
            out,
            "  … and {} more (see summary.json)",
            r.missing.len() - 10
        )?;
    }
    Ok(())
}

/// Campaign warnings and the count of the legs' own.
fn warnings(r: &Results, out: &mut dyn Write) -> io::Result<()> {
    let leg_warnings: usize = r.legs.iter().map(|l| l.warnings.len()).sum();
    if r.warnings.is_empty() && leg_warnings == 0 {
        return Ok(());
    }
    writeln!(out, "\nWarnings:")?;
    for w in &r.warnings {
        writeln!(out, "  - {w}")?;
    }
    if leg_warnings > 0 {
        writeln!(
            out,
            "  - {leg_warnings} estimator warning(s) on individual legs (see the report)"
        )?;
    }
    Ok(())
}
