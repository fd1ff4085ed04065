//! One edge (or one ligand's absolute/solvation cycle) from its legs.

use super::boresch::BoreschRestraint;
use super::replicas::{combine_replicas, ReplicaCombination};
use super::subject::Subject;
use crate::units::EnergyUnit;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// What a campaign computes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum CampaignKind {
    /// Relative binding: edges between ligands, a bound and an unbound leg each.
    #[default]
    Relative,
    /// Absolute binding: one cycle per ligand, usually with a restrained complex leg.
    Absolute,
    /// Solvation (or transfer) free energy: one cycle per ligand, no protein.
    Solvation,
}

impl CampaignKind {
    /// `relative`, `absolute` or `solvation`.
    pub fn as_str(self) -> &'static str {
        match self {
            CampaignKind::Relative => "relative",
            CampaignKind::Absolute => "absolute",
            CampaignKind::Solvation => "solvation",
        }
    }
}

/// How one leg enters its cycle.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LegSpec {
    /// Leg name as in the campaign file.
    pub name: String,
    /// Sign of the leg in the cycle (+1 or −1).
    pub sign: f64,
    /// Constant added to the leg's signed contribution, in the campaign unit.
    #[serde(default)]
    pub correction: f64,
    /// A Boresch restraint switched on along this leg (absolute binding).
    #[serde(default)]
    pub restraint: Option<BoreschRestraint>,
}

/// One finished leg replica's free energy, in the campaign unit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LegValue {
    /// Leg name.
    pub leg: String,
    /// Replica number (from 1).
    pub replica: u32,
    /// ΔG of the leg (headline estimator).
    pub dg: f64,
    /// Its standard error.
    pub sigma: f64,
}

/// A correction applied to an edge, as it enters the sum.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Correction {
    /// The leg it belongs to.
    pub leg: String,
    /// `constant` (from the campaign file) or `boresch` (standard-state release).
    pub kind: String,
    /// Value added to ΔΔG, in the campaign unit (sign already applied).
    pub value: f64,
}

/// A leg after its replicas were combined.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CombinedLeg {
    /// Leg name.
    pub leg: String,
    /// Its sign in the cycle.
    pub sign: f64,
    /// Replica mean and uncertainty parts of the leg's ΔG (unsigned, no corrections).
    pub combined: ReplicaCombination,
}

/// ΔΔG of one replica: every leg of the same replica number, signed, plus corrections.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ReplicaValue {
    /// Replica number.
    pub replica: u32,
    /// Σ sign × ΔG(leg) + corrections.
    pub ddg: f64,
    /// √Σ σ(leg)².
    pub sigma: f64,
}

/// Something about an edge worth a second look.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum EdgeFlag {
    /// Only one replica of some leg: the between-replica spread is unknown.
    SingleReplica,
    /// Replicas disagree by more than twice their own σ (spread part > 2 × per-replica part).
    ReplicaSpread,
    /// Network residual larger than 2σ of the edge.
    Residual,
    /// Run in both directions and the two disagree by more than 2σ.
    Hysteresis,
    /// Part of a basis cycle whose closure exceeds 2σ.
    Closure,
}

impl EdgeFlag {
    /// Short label used in tables.
    pub fn as_str(self) -> &'static str {
        match self {
            EdgeFlag::SingleReplica => "single_replica",
            EdgeFlag::ReplicaSpread => "replica_spread",
            EdgeFlag::Residual => "residual",
            EdgeFlag::Hysteresis => "hysteresis",
            EdgeFlag::Closure => "closure",
        }
    }
}

/// The result of one cycle: an edge's ΔΔG, or a ligand's absolute ΔG.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EdgeResult {
    /// Subject id (`a+b` or the ligand id).
    pub subject: String,
    /// First ligand (the ligand, for absolute and solvation cycles).
    pub ligand_a: String,
    /// Second ligand; absent for absolute and solvation cycles.
    pub ligand_b: Option<String>,
    /// Σ sign × mean ΔG(leg) + corrections, in the campaign unit.
    pub ddg: f64,
    /// Total uncertainty √(sigma_replicas² + sigma_spread²).
    pub sigma: f64,
    /// Part from the replicas' own σ (legs added in quadrature).
    pub sigma_replicas: f64,
    /// Part from the between-replica spread (legs added in quadrature).
    pub sigma_spread: f64,
    /// Per-replica ΔΔG for replica numbers that every leg has.
    pub replicas: Vec<ReplicaValue>,
    /// Each leg with its replicas combined.
    pub legs: Vec<CombinedLeg>,
    /// Corrections included in `ddg`.
    pub corrections: Vec<Correction>,
    /// Network fit of this edge (filled in by [`crate::network::annotate_edges`]).
    #[serde(default)]
    pub fitted: Option<f64>,
    /// `ddg − fitted` (filled in by the network).
    #[serde(default)]
    pub residual: Option<f64>,
    /// Flags, sorted.
    #[serde(default)]
    pub flags: Vec<EdgeFlag>,
}

/// Why a cycle could not be closed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum CycleError {
    /// A leg of the cycle has no finished replica.
    #[error("{subject}: leg '{leg}' has no finished replica, so the cycle cannot be closed; finish or resume its windows")]
    MissingLeg {
        /// Subject id.
        subject: String,
        /// Leg name.
        leg: String,
    },
    /// A value was given for a leg the cycle does not have.
    #[error("{subject}: a value was given for leg '{leg}', which is not one of the campaign's legs ({known})")]
    UnknownLeg {
        /// Subject id.
        subject: String,
        /// Leg name.
        leg: String,
        /// The known legs, comma-separated.
        known: String,
    },
    /// A leg's restraint is not usable.
    #[error("{subject}: leg '{leg}' restraint: {message}")]
    BadRestraint {
        /// Subject id.
        subject: String,
        /// Leg name.
        leg: String,
        /// What is wrong.
        message: String,
    },
    /// A value or σ is not a finite number.
    #[error("{subject}: leg '{leg}' replica {replica}: ΔG or σ is not finite ({dg}, {sigma})")]
    NotFinite {
        /// Subject id.
        subject: String,
        /// Leg name.
        leg: String,
        /// Replica.
        replica: u32,
        /// The value.
        dg: f64,
        /// Its σ.
        sigma: f64,
    },
    /// The cycle has no legs.
    #[error("{0}: the campaign defines no legs")]
    NoLegs(String),
}

/// Closes one cycle.
///
/// ΔΔG = Σ_legs sign × mean_r ΔG(leg, r) + Σ corrections, where a leg's constant
/// correction is added as given and its Boresch restraint enters as
/// sign × ΔG_release (the leg is taken to switch the restraint on, so releasing
/// it into the standard state continues the leg's own path). Each leg's replicas
/// are combined with [`combine_replicas`]; legs are independent simulations, so
/// their variance parts add. Legs may have different replica counts; the
/// per-replica ΔΔG list holds only the replica numbers every leg has.
pub fn combine_edge(
    subject: &Subject,
    legs: &[LegSpec],
    values: &[LegValue],
    temperature_k: f64,
    unit: EnergyUnit,
) -> Result<EdgeResult, CycleError> {
    let id = subject.id();
    if legs.is_empty() {
        return Err(CycleError::NoLegs(id));
    }
    let mut by_leg: BTreeMap<&str, BTreeMap<u32, (f64, f64)>> = BTreeMap::new();
    for v in values {
        if !legs.iter().any(|l| l.name == v.leg) {
            return Err(CycleError::UnknownLeg {
                subject: id,
                leg: v.leg.clone(),
                known: legs
                    .iter()
                    .map(|l| l.name.as_str())
                    .collect::<Vec<_>>()
                    .join(", "),
            });
        }
        if !(v.dg.is_finite() && v.sigma.is_finite()) {
            return Err(CycleError::NotFinite {
                subject: id,
                leg: v.leg.clone(),
                replica: v.replica,
                dg: v.dg,
                sigma: v.sigma,
            });
        }
        by_leg
            .entry(v.leg.as_str())
            .or_default()
            .insert(v.replica, (v.dg, v.sigma.abs()));
    }

    let mut corrections = Vec::new();
    let mut combined_legs = Vec::new();
    let mut ddg = 0.0;
    let (mut var_rep, mut var_spread) = (0.0, 0.0);
    let mut flags = Vec::new();
    for spec in legs {
        let reps = by_leg
            .get(spec.name.as_str())
            .filter(|r| !r.is_empty())
            .ok_or_else(|| CycleError::MissingLeg {
                subject: id.clone(),
                leg: spec.name.clone(),
            })?;
        let pairs: Vec<(f64, f64)> = reps.values().copied().collect();
        let c = combine_replicas(&pairs).expect("non-empty");
        ddg += spec.sign * c.mean;
        var_rep += c.sigma_replicas.powi(2);
        var_spread += c.sigma_spread.powi(2);
        if c.n == 1 {
            flags.push(EdgeFlag::SingleReplica);
        }
        combined_legs.push(CombinedLeg {
            leg: spec.name.clone(),
            sign: spec.sign,
            combined: c,
        });
        if spec.correction != 0.0 {
            corrections.push(Correction {
                leg: spec.name.clone(),
                kind: "constant".into(),
                value: spec.correction,
            });
        }
        if let Some(r) = &spec.restraint {
            r.validate().map_err(|message| CycleError::BadRestraint {
                subject: id.clone(),
                leg: spec.name.clone(),
                message,
            })?;
            corrections.push(Correction {
                leg: spec.name.clone(),
                kind: "boresch".into(),
                value: spec.sign * r.release_free_energy(temperature_k, unit),
            });
        }
    }
    let correction_sum: f64 = corrections.iter().map(|c| c.value).sum();
    ddg += correction_sum;
    let sigma_replicas = var_rep.sqrt();
    let sigma_spread = var_spread.sqrt();
    if sigma_spread > 2.0 * sigma_replicas && sigma_spread > 0.0 {
        flags.push(EdgeFlag::ReplicaSpread);
    }
    flags.sort();
    flags.dedup();

    let mut replica_numbers: Vec<u32> = by_leg.values().flat_map(|r| r.keys().copied()).collect();
    replica_numbers.sort_unstable();
    replica_numbers.dedup();
    let replicas = replica_numbers
        .into_iter()
        .filter_map(|r| {
            let mut sum = correction_sum;
            let mut var = 0.0;
            for spec in legs {
                let (dg, s) = by_leg.get(spec.name.as_str())?.get(&r)?;
                sum += spec.sign * dg;
                var += s * s;
            }
            Some(ReplicaValue {
                replica: r,
                ddg: sum,
                sigma: var.sqrt(),
            })
        })
        .collect();

    let (ligand_a, ligand_b) = match subject {
        Subject::Edge { a, b } => (a.clone(), Some(b.clone())),
        Subject::Ligand { id } => (id.clone(), None),
    };
    Ok(EdgeResult {
        subject: id,
        ligand_a,
        ligand_b,
        ddg,
        sigma: sigma_replicas.hypot(sigma_spread),
        sigma_replicas,
        sigma_spread,
        replicas,
        legs: combined_legs,
        corrections,
        fitted: None,
        residual: None,
        flags,
    })
}
