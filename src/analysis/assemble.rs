//! From finished leg replicas to a full [`Results`]: cycles, network, statistics
//! and the campaign-level warnings, one step per function.

use super::info::CampaignInfo;
use super::results::{LeftOut, LegReplica, MissingWork, Results, RESULTS_SCHEMA};
use crate::collect::experiment::IC50_NOTE;
use crate::cycle::{
    combine_edge_directed, edge_directions, CampaignKind, CycleError, EdgeResult, LegValue,
};
use crate::network::stats::compare_estimates;
use crate::network::{annotate_edges, solve, LigandEstimate, Measured, MeasuredKind};
use crate::network::{CycleClosure, Hysteresis, NetworkEdge, NetworkError, Offset};
use crate::plan::Subject;

/// Smallest adjacent-window overlap considered comfortable (rule of thumb,
/// common practice, no single source).
pub const MIN_OVERLAP: f64 = 0.03;

/// Why results could not be assembled.
#[derive(Debug, thiserror::Error)]
pub enum AssembleError {
    /// A cycle could not be closed for a reason other than unfinished legs.
    #[error(transparent)]
    Cycle(#[from] CycleError),
    /// The network could not be solved.
    #[error(transparent)]
    Network(#[from] NetworkError),
    /// A relative campaign's subject id is not `a+b`.
    #[error("subject '{0}' of a relative campaign is not of the form ligand_a+ligand_b")]
    Subject(String),
}

/// Closes every subject's cycle, solves the network (relative campaigns),
/// compares with `measured` and collects warnings. A subject whose cycle
/// cannot be closed (a leg with no result: list its replicas in `missing`) is
/// left out, with the reason, in [`Results::left_out`]; a network that cannot
/// be solved is a warning, and the edges stay.
///
/// # Errors
///
/// A relative campaign's subject that is not `a+b`.
pub fn assemble(
    info: &CampaignInfo,
    legs: Vec<LegReplica>,
    measured: Vec<Measured>,
    missing: Vec<MissingWork>,
) -> Result<Results, AssembleError> {
    let mut warnings = Vec::new();
    let mut left_out = Vec::new();
    let mut edges = close_cycles(info, &legs, &missing, &mut left_out, &mut warnings)?;
    let ligands = match info.kind {
        CampaignKind::Relative if !edges.is_empty() => {
            match fit_network(info, &mut edges, &measured, &mut warnings) {
                Ok(l) => l,
                Err(e) => {
                    warnings.push(format!(
                        "the network could not be solved, so there are no per-ligand results: {e}"
                    ));
                    Ligands::default()
                }
            }
        }
        CampaignKind::Relative => Ligands::default(),
        _ => Ligands::from_cycles(&edges, &measured),
    };
    let statistics = (!measured.is_empty())
        .then(|| compare_estimates(&ligands.ligands, &edges, &measured, info.seed));
    campaign_warnings(&legs, &measured, &missing, &left_out, &mut warnings);
    Ok(Results {
        schema: RESULTS_SCHEMA,
        campaign: info.name.clone(),
        kind: info.kind,
        unit: info.unit,
        temperature_k: info.temperature_k,
        estimator: info.estimator.clone(),
        generated_at: Some(chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true)),
        legs,
        edges,
        ligands: ligands.ligands,
        offsets: ligands.offsets,
        cycles: ligands.cycles,
        hysteresis: ligands.hysteresis,
        measured,
        statistics,
        missing,
        left_out,
        warnings,
        costs: None,
        notes: Vec::new(),
    })
}

/// The subjects in order of first appearance.
fn subjects(legs: &[LegReplica]) -> Vec<&str> {
    let mut subjects: Vec<&str> = Vec::new();
    for l in legs {
        if !subjects.contains(&l.subject.as_str()) {
            subjects.push(&l.subject);
        }
    }
    subjects
}

/// A subject id as the cycle sees it: an edge `a+b` (relative) or a ligand.
fn subject(info: &CampaignInfo, id: &str) -> Result<Subject, AssembleError> {
    Ok(match info.kind {
        CampaignKind::Relative => {
            let (a, b) = id
                .split_once('+')
                .ok_or_else(|| AssembleError::Subject(id.to_string()))?;
            Subject::Edge {
                a: a.to_string(),
                b: b.to_string(),
            }
        }
        _ => Subject::Ligand { id: id.to_string() },
    })
}

/// One cycle per subject from its leg replicas; a subject whose cycle cannot
/// be closed is left out, with the reason.
fn close_cycles(
    info: &CampaignInfo,
    legs: &[LegReplica],
    missing: &[MissingWork],
    left_out: &mut Vec<LeftOut>,
    warnings: &mut Vec<String>,
) -> Result<Vec<EdgeResult>, AssembleError> {
    let parsed = subjects(legs)
        .into_iter()
        .map(|s| Ok((s, subject(info, s)?)))
        .collect::<Result<Vec<_>, AssembleError>>()?;
    // An edge whose reverse came first takes its constant corrections negated.
    let directions = edge_directions(&parsed.iter().map(|p| p.1.clone()).collect::<Vec<_>>());
    let mut edges = Vec::new();
    for m in missing {
        if !legs.iter().any(|l| l.subject == m.subject)
            && !left_out.iter().any(|o| o.subject == m.subject)
        {
            left_out.push(LeftOut {
                subject: m.subject.clone(),
                reason: no_result_reason(&m.subject, None, missing),
            });
        }
    }
    for ((s, subject), direction) in parsed.into_iter().zip(directions) {
        let values: Vec<LegValue> = legs
            .iter()
            .filter(|l| l.subject == s)
            .map(|l| LegValue {
                leg: l.leg.clone(),
                replica: l.replica,
                dg: l.dg,
                sigma: l.sigma,
            })
            .collect();
        let closed = combine_edge_directed(
            &subject,
            direction,
            &info.legs,
            &values,
            info.temperature_k,
            info.unit,
        );
        match closed {
            Ok(e) => {
                warnings.extend(e.warnings.iter().cloned());
                edges.push(e);
            }
            Err(CycleError::MissingLeg { subject, leg }) => left_out.push(LeftOut {
                reason: no_result_reason(&subject, Some(&leg), missing),
                subject,
            }),
            Err(e) => left_out.push(LeftOut {
                subject: s.to_string(),
                reason: format!("its cycle could not be closed: {e}"),
            }),
        }
    }
    Ok(edges)
}

/// Why a subject has no result: its leg (or every leg) has no leg replica
/// with a result, and what became of its replicas.
fn no_result_reason(subject: &str, leg: Option<&str>, missing: &[MissingWork]) -> String {
    let of: Vec<String> = missing
        .iter()
        .filter(|m| m.subject == subject && leg.map_or(true, |l| m.leg == l))
        .map(|m| format!("{}/r{} {}", m.leg, m.replica, m.status.as_str()))
        .collect();
    let head = match leg {
        Some(l) => format!("leg '{l}' has no replica with a result"),
        None => "no leg replica has a result".to_string(),
    };
    if of.is_empty() {
        head
    } else {
        format!("{head} ({})", of.join(", "))
    }
}

/// Per-ligand results and what the network adds to them.
#[derive(Default)]
struct Ligands {
    ligands: Vec<LigandEstimate>,
    offsets: Vec<Offset>,
    cycles: Vec<CycleClosure>,
    hysteresis: Vec<Hysteresis>,
}

impl Ligands {
    /// Absolute and solvation campaigns: each ligand's cycle is its ΔG.
    fn from_cycles(edges: &[EdgeResult], measured: &[Measured]) -> Ligands {
        let measured_of = |id: &str| measured.iter().find(|m| m.ligand == id).map(|m| m.dg);
        Ligands {
            ligands: edges
                .iter()
                .map(|e| LigandEstimate {
                    ligand: e.ligand_a.clone(),
                    dg: e.ddg,
                    sigma: e.sigma,
                    measured: measured_of(&e.ligand_a),
                    component: 0,
                    anchor: None,
                })
                .collect(),
            ..Ligands::default()
        }
    }
}

/// Relative campaigns: the weighted network fit over the edges with a usable σ,
/// its residuals written back onto the edges.
fn fit_network(
    info: &CampaignInfo,
    edges: &mut [EdgeResult],
    measured: &[Measured],
    warnings: &mut Vec<String>,
) -> Result<Ligands, AssembleError> {
    // An edge without a usable σ cannot be weighted; leave it out of the fit (it
    // stays in the tables) rather than lose the whole network.
    let usable = |e: &&EdgeResult| e.sigma.is_finite() && e.sigma > 0.0;
    for e in edges.iter().filter(|e| !usable(e)) {
        warnings.push(format!(
            "{}: σ = {} cannot weight the network fit, so this edge is left out of it",
            e.subject, e.sigma
        ));
    }
    let net: Vec<NetworkEdge> = edges.iter().filter(usable).map(NetworkEdge::from).collect();
    if net.is_empty() {
        return Err(NetworkError::Empty.into());
    }
    let fit = solve(&net, measured, info.reference.as_deref())?;
    annotate_edges(edges, &fit);
    warnings.extend(fit.warnings.iter().cloned());
    let n_flag = fit.edges.iter().filter(|e| e.flagged).count();
    if n_flag > 0 {
        warnings.push(format!(
            "{n_flag} edge(s) disagree with the network by more than 2σ (flag 'residual')"
        ));
    }
    let n_cyc = fit.cycles.iter().filter(|c| c.flagged).count();
    if n_cyc > 0 {
        warnings.push(format!(
            "{n_cyc} cycle(s) do not close within 2σ (see cycles.csv)"
        ));
    }
    Ok(Ligands {
        ligands: fit.ligands,
        offsets: fit.offsets,
        cycles: fit.cycles,
        hysteresis: fit.hysteresis,
    })
}

/// Warnings about the campaign as a whole: IC50 measurements, low overlap,
/// unfinished and failed work, subjects left out.
fn campaign_warnings(
    legs: &[LegReplica],
    measured: &[Measured],
    missing: &[MissingWork],
    left_out: &[LeftOut],
    warnings: &mut Vec<String>,
) {
    if measured.iter().any(|m| m.kind == MeasuredKind::Ic50) {
        warnings.push(IC50_NOTE.to_string());
    }
    let low: Vec<String> = legs
        .iter()
        .filter(|l| l.min_adjacent_overlap.is_some_and(|o| o < MIN_OVERLAP))
        .map(|l| format!("{}/{}/r{}", l.subject, l.leg, l.replica))
        .collect();
    if !low.is_empty() {
        warnings.push(format!(
            "adjacent-window overlap below {MIN_OVERLAP} in {}: add windows where the overlap is low",
            low.join(", ")
        ));
    }
    let failed = missing
        .iter()
        .filter(|m| m.status == super::results::MissingStatus::Failed)
        .count();
    let unfinished = missing.len() - failed;
    if unfinished > 0 {
        warnings.push(format!(
            "{unfinished} leg replica(s) are not finished; results cover finished work only"
        ));
    }
    if failed > 0 {
        warnings.push(format!(
            "{failed} finished leg replica(s) could not be estimated (see 'Missing' and results/missing.csv); the other results do not use them"
        ));
    }
    if !left_out.is_empty() {
        let names: Vec<&str> = left_out.iter().map(|o| o.subject.as_str()).collect();
        warnings.push(format!(
            "no result for {}: {}",
            if left_out.len() == 1 {
                "1 subject".to_string()
            } else {
                format!("{} subjects", left_out.len())
            },
            names.join(", ")
        ));
    }
}
