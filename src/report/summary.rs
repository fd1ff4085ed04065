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
    notes(r, out)?;
    warnings(r, out)
}

/// Leg replicas whose result rests on outdated outputs or on frames that are
/// being extended.
fn notes(r: &Results, out: &mut dyn Write) -> io::Result<()> {
    if r.notes.is_empty() {
        return Ok(());
    }
    writeln!(
        out,
        "
Notes ({} leg replicas):",
        r.notes.len()
    )?;
    for n in &r.notes {
        writeln!(out, "  {}/{}/r{}: {}", n.subject, n.leg, n.replica, n.note)?;
    }
    Ok(())
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

/// What has no result: failed leg replicas first (every one: each needs a
/// look), then the unfinished ones (the first ten), then the subjects left out.
fn missing(r: &Results, out: &mut dyn Write) -> io::Result<()> {
    if !r.incomplete() {
        return Ok(());
    }
    let failed: Vec<_> = r.failed().collect();
    if !failed.is_empty() {
        writeln!(out, "\nFailed ({} leg replicas, no result):", failed.len())?;
        for m in &failed {
            writeln!(out, "  {}/{}/r{}: {}", m.subject, m.leg, m.replica, m.note)?;
        }
    }
    let unfinished: Vec<_> = r
        .missing
        .iter()
        .filter(|m| m.status == crate::analysis::MissingStatus::Unfinished)
        .collect();
    if !unfinished.is_empty() {
        writeln!(out, "\nNot finished ({} leg replicas):", unfinished.len())?;
        for m in unfinished.iter().take(10) {
            writeln!(out, "  {}/{}/r{}: {}", m.subject, m.leg, m.replica, m.note)?;
        }
        if unfinished.len() > 10 {
            writeln!(
                out,
                "  … and {} more (see results/missing.csv)",
                unfinished.len() - 10
            )?;
        }
    }
    if !r.left_out.is_empty() {
        writeln!(out, "\nNo result ({}):", r.left_out.len())?;
        for o in &r.left_out {
            writeln!(out, "  {}: {}", o.subject, o.reason)?;
        }
    }
    Ok(())
}

/// How many leg replicas with warnings the summary names before it counts.
const LEGS_NAMED: usize = 3;

/// Campaign warnings and the count of the legs' own, naming the first legs.
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
        let with: Vec<String> = r
            .legs
            .iter()
            .filter(|l| !l.warnings.is_empty())
            .map(|l| format!("{}/{}/r{}", l.subject, l.leg, l.replica))
            .collect();
        let shown = with
            .iter()
            .take(LEGS_NAMED)
            .cloned()
            .collect::<Vec<_>>()
            .join(", ");
        let more = match with.len().saturating_sub(LEGS_NAMED) {
            0 => String::new(),
            n => format!(" and {n} more"),
        };
        writeln!(
            out,
            "  - {leg_warnings} estimator warning(s) on {} leg replica(s): {shown}{more} (each named in the report)",
            with.len()
        )?;
    }
    Ok(())
}
