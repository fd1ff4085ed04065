//! From finished leg replicas to a full [`Results`]: cycles, network, statistics.

use super::results::{LegReplica, MissingWork, Results, RESULTS_SCHEMA};
use crate::collect::experiment::IC50_NOTE;
use crate::cycle::{
    combine_edge_directed, edge_directions, CampaignKind, CycleError, LegSpec, LegValue,
};
use crate::network::stats::compare_estimates;
use crate::network::{annotate_edges, solve, LigandEstimate, Measured};
use crate::network::{NetworkEdge, NetworkError};
use crate::plan::Subject;
use crate::units::EnergyUnit;

/// Smallest adjacent-window overlap considered comfortable (rule of thumb,
/// common practice, no single source).
pub const MIN_OVERLAP: f64 = 0.03;

/// What [`assemble`] needs to know about the campaign.
#[derive(Debug, Clone, PartialEq)]
pub struct CampaignInfo {
    /// Campaign name.
    pub name: String,
    /// Relative, absolute or solvation.
    pub kind: CampaignKind,
    /// Campaign unit (every energy in the leg replicas is in it).
    pub unit: EnergyUnit,
    /// Temperature, K.
    pub temperature_k: f64,
    /// Headline estimator name.
    pub estimator: String,
    /// The legs, with signs and corrections.
    pub legs: Vec<LegSpec>,
    /// Reference ligand for the network offset, if the campaign names one.
    pub reference: Option<String>,
    /// Seed for the bootstrap intervals.
    pub seed: u64,
}

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
/// compares with `measured` and collects warnings. Subjects with a leg that has
/// no finished replica are left out with a warning; list them in `missing`.
pub fn assemble(
    info: &CampaignInfo,
    legs: Vec<LegReplica>,
    measured: Vec<Measured>,
    missing: Vec<MissingWork>,
) -> Result<Results, AssembleError> {
    let mut warnings = Vec::new();
    let mut subjects: Vec<&str> = Vec::new();
    for l in &legs {
        if !subjects.contains(&l.subject.as_str()) {
            subjects.push(&l.subject);
        }
    }
    let mut parsed = Vec::new();
    for s in subjects {
        let subject = match info.kind {
            CampaignKind::Relative => {
                let (a, b) = s
                    .split_once('+')
                    .ok_or_else(|| AssembleError::Subject(s.to_string()))?;
                Subject::Edge {
                    a: a.to_string(),
                    b: b.to_string(),
                }
            }
            _ => Subject::Ligand { id: s.to_string() },
        };
        parsed.push((s, subject));
    }
    // An edge whose reverse came first takes its constant corrections negated.
    let directions = edge_directions(&parsed.iter().map(|p| p.1.clone()).collect::<Vec<_>>());
    let mut edges = Vec::new();
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
            Err(CycleError::MissingLeg { subject, leg }) => warnings.push(format!(
                "{subject}: leg '{leg}' has no finished replica yet, so this {} is left out",
                if info.kind == CampaignKind::Relative {
                    "edge"
                } else {
                    "ligand"
                }
            )),
            Err(e) => return Err(e.into()),
        }
    }

    let measured_of = |id: &str| measured.iter().find(|m| m.ligand == id).map(|m| m.dg);
    let (ligands, offsets, cycles, hysteresis) = match info.kind {
        CampaignKind::Relative if !edges.is_empty() => {
            // An edge without a usable σ cannot be weighted; leave it out of the
            // fit (it stays in the tables) rather than lose the whole network.
            let usable = |e: &&crate::cycle::EdgeResult| e.sigma.is_finite() && e.sigma > 0.0;
            for e in edges.iter().filter(|e| !usable(e)) {
                warnings.push(format!(
                    "{}: σ = {} cannot weight the network fit, so this edge is left out of it",
                    e.subject, e.sigma
                ));
            }
            let net: Vec<NetworkEdge> =
                edges.iter().filter(usable).map(NetworkEdge::from).collect();
            if net.is_empty() {
                return Err(NetworkError::Empty.into());
            }
            let fit = solve(&net, &measured, info.reference.as_deref())?;
            annotate_edges(&mut edges, &fit);
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
            (fit.ligands, fit.offsets, fit.cycles, fit.hysteresis)
        }
        CampaignKind::Relative => (Vec::new(), Vec::new(), Vec::new(), Vec::new()),
        _ => (
            edges
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
            Vec::new(),
            Vec::new(),
            Vec::new(),
        ),
    };

    let statistics =
        (!measured.is_empty()).then(|| compare_estimates(&ligands, &edges, &measured, info.seed));
    if measured
        .iter()
        .any(|m| m.kind == crate::network::MeasuredKind::Ic50)
    {
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
    if !missing.is_empty() {
        warnings.push(format!(
            "{} leg replica(s) are not finished; results cover finished work only",
            missing.len()
        ));
    }
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
        ligands,
        offsets,
        cycles,
        hysteresis,
        measured,
        statistics,
        missing,
        warnings,
    })
}

impl From<crate::campaign::CampaignKind> for CampaignKind {
    fn from(k: crate::campaign::CampaignKind) -> Self {
        match k {
            crate::campaign::CampaignKind::Relative => CampaignKind::Relative,
            crate::campaign::CampaignKind::Absolute => CampaignKind::Absolute,
            crate::campaign::CampaignKind::Solvation => CampaignKind::Solvation,
        }
    }
}

/// A campaign leg as the cycle sees it (sign, constant correction, restraint).
pub fn leg_spec(leg: &crate::campaign::Leg) -> LegSpec {
    LegSpec {
        name: leg.name.clone(),
        sign: f64::from(leg.sign),
        correction: leg.correction.unwrap_or(0.0),
        restraint: leg
            .restraint
            .as_ref()
            .map(|r| crate::cycle::BoreschRestraint {
                r0: r.r0,
                theta_a: r.theta_a,
                theta_b: r.theta_b,
                k_r: r.k_r,
                k_theta_a: r.k_theta_a,
                k_theta_b: r.k_theta_b,
                k_phi_a: r.k_phi_a,
                k_phi_b: r.k_phi_b,
                k_phi_c: r.k_phi_c,
            }),
    }
}

impl CampaignInfo {
    /// Everything [`assemble`] needs, taken from a loaded campaign.
    pub fn from_campaign(c: &crate::campaign::Campaign) -> Self {
        let estimator = serde_json::to_value(c.analysis.estimator)
            .ok()
            .and_then(|v| v.as_str().map(str::to_string))
            .unwrap_or_else(|| "mbar".into());
        CampaignInfo {
            name: c.name.clone(),
            kind: c.kind.into(),
            unit: c.unit,
            temperature_k: c.temperature_k,
            estimator,
            legs: c.legs.iter().map(leg_spec).collect(),
            reference: c.reference_ligand.clone(),
            seed: c.seed,
        }
    }
}
