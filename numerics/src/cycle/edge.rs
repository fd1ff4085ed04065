//! One edge (or one ligand's absolute/solvation cycle) from its legs.

use super::boresch::{BoreschRestraint, RestraintError, RestraintRelease};
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
    ///
    /// ```
    /// use legwork_numerics::cycle::CampaignKind;
    /// assert_eq!(CampaignKind::Solvation.as_str(), "solvation");
    /// ```
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
    /// Leg name.
    pub name: String,
    /// Sign of the leg in the cycle (+1 or −1).
    pub sign: f64,
    /// Constant added to the cycle for this leg, in the unit of the values: as
    /// given on an edge in its listed direction, negated on the reverse of an
    /// edge run both ways (see [`EdgeDirection`]).
    #[serde(default)]
    pub correction: f64,
    /// A Boresch restraint switched on along this leg (absolute binding).
    #[serde(default)]
    pub restraint: Option<BoreschRestraint>,
}

/// One finished leg replica's free energy, in the unit of the cycle.
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
    /// `constant` (a leg's constant correction) or `boresch` (standard-state release).
    pub kind: String,
    /// Value added to ΔΔG, in the unit of the cycle (sign and direction applied).
    pub value: f64,
    /// For `boresch`: the same correction by the analytic harmonic formula (a
    /// cross-check; `value` is the quadrature).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub analytic: Option<f64>,
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
    /// Σ sign × ΔG(leg, replica) + corrections.
    pub ddg: f64,
    /// √Σ σ(leg, replica)².
    pub sigma: f64,
    /// Legs that have no replica of this number: each enters with its mean over
    /// its own replicas and that mean's σ instead (empty when every leg ran it).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub filled: Vec<String>,
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
    ///
    /// ```
    /// use legwork_numerics::cycle::EdgeFlag;
    /// assert_eq!(EdgeFlag::ReplicaSpread.as_str(), "replica_spread");
    /// ```
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

/// Which way an edge is run relative to the first time its ligand pair was
/// listed. A leg's constant correction is stated for the pair's first-listed
/// direction a → b; the reverse run b → a estimates −ΔΔG(a → b), so its
/// constant corrections enter negated. Then forward + reverse is free of the
/// corrections and the hysteresis measures sampling alone. Boresch corrections
/// do not depend on the direction: the leg switches its restraint on whichever
/// way the edge runs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum EdgeDirection {
    /// The first (or only) direction in which this ligand pair is run.
    #[default]
    AsListed,
    /// The reverse of an edge listed earlier.
    Reverse,
}

impl EdgeDirection {
    /// +1 for [`AsListed`](Self::AsListed), −1 for [`Reverse`](Self::Reverse).
    ///
    /// ```
    /// use legwork_numerics::cycle::EdgeDirection;
    /// assert_eq!(EdgeDirection::Reverse.factor(), -1.0);
    /// ```
    pub fn factor(self) -> f64 {
        match self {
            EdgeDirection::AsListed => 1.0,
            EdgeDirection::Reverse => -1.0,
        }
    }

    fn is_as_listed(&self) -> bool {
        *self == EdgeDirection::AsListed
    }
}

/// The direction of every subject in `subjects` (in that order): an edge b → a
/// is [`EdgeDirection::Reverse`] when a → b comes earlier in the list; every
/// other subject (including single ligands) is [`EdgeDirection::AsListed`].
///
/// ```
/// use legwork_numerics::cycle::{edge_directions, EdgeDirection, Subject};
/// let e = |a: &str, b: &str| Subject::Edge { a: a.into(), b: b.into() };
/// let d = edge_directions(&[e("x", "y"), e("y", "z"), e("y", "x")]);
/// assert_eq!(d, [EdgeDirection::AsListed, EdgeDirection::AsListed, EdgeDirection::Reverse]);
/// ```
pub fn edge_directions(subjects: &[Subject]) -> Vec<EdgeDirection> {
    subjects
        .iter()
        .enumerate()
        .map(|(i, s)| match s {
            Subject::Edge { a, b } => {
                let reverse_earlier = subjects[..i]
                    .iter()
                    .any(|t| matches!(t, Subject::Edge { a: ta, b: tb } if ta == b && tb == a));
                if reverse_earlier {
                    EdgeDirection::Reverse
                } else {
                    EdgeDirection::AsListed
                }
            }
            Subject::Ligand { .. } => EdgeDirection::AsListed,
        })
        .collect()
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
    /// Σ sign × mean ΔG(leg) + corrections, in the unit of the cycle.
    pub ddg: f64,
    /// Total uncertainty √(sigma_replicas² + sigma_spread²).
    pub sigma: f64,
    /// Part from the replicas' own σ (legs added in quadrature).
    pub sigma_replicas: f64,
    /// Part from the between-replica spread (legs added in quadrature).
    pub sigma_spread: f64,
    /// Per-replica ΔΔG for every replica number some leg has, in replica order
    /// (see [`ReplicaValue::filled`] for legs that lack one).
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
    /// The direction this edge was closed in (how its constant corrections were signed).
    #[serde(default, skip_serializing_if = "EdgeDirection::is_as_listed")]
    pub direction: EdgeDirection,
    /// Things about this cycle a reader should know (for example a Boresch
    /// correction whose analytic formula departs from the quadrature).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub warnings: Vec<String>,
}

/// Why a cycle could not be closed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum CycleError {
    /// A leg of the cycle has no finished replica.
    #[error("{subject}: leg '{leg}' has no finished replica, so the cycle cannot be closed")]
    MissingLeg {
        /// Subject id.
        subject: String,
        /// Leg name.
        leg: String,
    },
    /// A value was given for a leg the cycle does not have.
    #[error("{subject}: a value was given for leg '{leg}', which is not one of the cycle's legs ({known})")]
    UnknownLeg {
        /// Subject id.
        subject: String,
        /// Leg name.
        leg: String,
        /// The known legs, comma-separated.
        known: String,
    },
    /// A leg's restraint is not usable.
    #[error("{subject}: leg '{leg}' restraint: {source}")]
    BadRestraint {
        /// Subject id.
        subject: String,
        /// Leg name.
        leg: String,
        /// What is wrong.
        source: RestraintError,
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
    #[error("{0}: the cycle has no legs")]
    NoLegs(String),
}

/// Closes one cycle in its listed direction: [`combine_edge_directed`] with
/// [`EdgeDirection::AsListed`].
///
/// # Errors
///
/// As [`combine_edge_directed`].
///
/// ```
/// use legwork_numerics::cycle::{combine_edge, LegSpec, LegValue, Subject};
/// use legwork_numerics::units::EnergyUnit;
/// let leg = |name: &str, sign| LegSpec { name: name.into(), sign, correction: 0.0, restraint: None };
/// let v = |leg: &str, replica, dg| LegValue { leg: leg.into(), replica, dg, sigma: 0.1 };
/// let e = combine_edge(
///     &Subject::Edge { a: "x".into(), b: "y".into() },
///     &[leg("complex", 1.0), leg("solvent", -1.0)],
///     &[v("complex", 1, -3.0), v("solvent", 1, -1.0)],
///     298.15,
///     EnergyUnit::KcalPerMol,
/// )?;
/// assert!((e.ddg - (-2.0)).abs() < 1e-12);
/// # Ok::<(), legwork_numerics::cycle::CycleError>(())
/// ```
pub fn combine_edge(
    subject: &Subject,
    legs: &[LegSpec],
    values: &[LegValue],
    temperature_k: f64,
    unit: EnergyUnit,
) -> Result<EdgeResult, CycleError> {
    combine_edge_directed(
        subject,
        EdgeDirection::AsListed,
        legs,
        values,
        temperature_k,
        unit,
    )
}

/// Closes one cycle.
///
/// ΔΔG = Σ_legs sign × mean_r ΔG(leg, r) + Σ corrections, where a leg's constant
/// correction is added as given, times `direction`'s [factor](EdgeDirection::factor),
/// and its Boresch restraint enters as sign × ΔG_release by quadrature
/// ([`BoreschRestraint::release`]; the leg is taken to switch the restraint on,
/// so releasing it into the standard state continues the leg's own path). Each
/// leg's replicas are combined with [`combine_replicas`]; legs are independent
/// simulations, so their variance parts add.
///
/// Legs may have different replica counts. The per-replica list holds every
/// replica number any leg has; a leg without that number enters it with its
/// mean over its replicas (named in [`ReplicaValue::filled`]).
///
/// `values` and corrections are in `unit`; the restraint's own units are fixed
/// (see [`BoreschRestraint`]) and its correction is converted to `unit` at
/// `temperature_k`.
///
/// # Errors
///
/// [`CycleError::NoLegs`] for an empty `legs`, [`CycleError::UnknownLeg`] for a
/// value of a leg not in `legs`, [`CycleError::NotFinite`] for a non-finite ΔG
/// or σ, [`CycleError::MissingLeg`] when a leg has no value,
/// [`CycleError::BadRestraint`] when a restraint fails
/// [`BoreschRestraint::validate`] (or the temperature is not positive).
///
/// ```
/// use legwork_numerics::cycle::{combine_edge_directed, EdgeDirection, LegSpec, LegValue, Subject};
/// use legwork_numerics::units::EnergyUnit;
/// let legs = [
///     LegSpec { name: "complex".into(), sign: 1.0, correction: 0.25, restraint: None },
///     LegSpec { name: "solvent".into(), sign: -1.0, correction: 0.0, restraint: None },
/// ];
/// let v = |leg: &str, dg| LegValue { leg: leg.into(), replica: 1, dg, sigma: 0.1 };
/// let back = combine_edge_directed(
///     &Subject::Edge { a: "y".into(), b: "x".into() },
///     EdgeDirection::Reverse,
///     &legs,
///     &[v("complex", 3.0), v("solvent", 1.0)],
///     298.15,
///     EnergyUnit::KcalPerMol,
/// )?;
/// assert!((back.ddg - (2.0 - 0.25)).abs() < 1e-12); // the correction follows the edge
/// # Ok::<(), legwork_numerics::cycle::CycleError>(())
/// ```
pub fn combine_edge_directed(
    subject: &Subject,
    direction: EdgeDirection,
    legs: &[LegSpec],
    values: &[LegValue],
    temperature_k: f64,
    unit: EnergyUnit,
) -> Result<EdgeResult, CycleError> {
    let id = subject.id();
    if legs.is_empty() {
        return Err(CycleError::NoLegs(id));
    }
    let by_leg = group_by_leg(&id, legs, values)?;
    let combined = combine_legs(&id, legs, &by_leg)?;
    let (corrections, warnings) = leg_corrections(&id, legs, direction, temperature_k, unit)?;
    let correction_sum: f64 = corrections.iter().map(|c| c.value).sum();

    let ddg = combined
        .iter()
        .map(|l| l.sign * l.combined.mean)
        .sum::<f64>()
        + correction_sum;
    let sigma_replicas = combined
        .iter()
        .map(|l| l.combined.sigma_replicas.powi(2))
        .sum::<f64>()
        .sqrt();
    let sigma_spread = combined
        .iter()
        .map(|l| l.combined.sigma_spread.powi(2))
        .sum::<f64>()
        .sqrt();
    let mut flags = Vec::new();
    if combined.iter().any(|l| l.combined.n == 1) {
        flags.push(EdgeFlag::SingleReplica);
    }
    if sigma_spread > 2.0 * sigma_replicas && sigma_spread > 0.0 {
        flags.push(EdgeFlag::ReplicaSpread);
    }
    flags.sort();

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
        replicas: per_replica(legs, &by_leg, &combined, correction_sum),
        legs: combined,
        corrections,
        fitted: None,
        residual: None,
        flags,
        direction,
        warnings,
    })
}

/// (ΔG, σ) of every replica of every leg, by leg name and replica number.
type ByLeg<'a> = BTreeMap<&'a str, BTreeMap<u32, (f64, f64)>>;

/// Checks the values (known leg, finite numbers) and groups them by leg.
fn group_by_leg<'a>(
    id: &str,
    legs: &[LegSpec],
    values: &'a [LegValue],
) -> Result<ByLeg<'a>, CycleError> {
    let mut by_leg: ByLeg = BTreeMap::new();
    for v in values {
        if !legs.iter().any(|l| l.name == v.leg) {
            return Err(CycleError::UnknownLeg {
                subject: id.to_string(),
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
                subject: id.to_string(),
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
    Ok(by_leg)
}

/// Each leg's replicas combined, in the order of `legs`.
fn combine_legs(
    id: &str,
    legs: &[LegSpec],
    by_leg: &ByLeg,
) -> Result<Vec<CombinedLeg>, CycleError> {
    legs.iter()
        .map(|spec| {
            let pairs: Vec<(f64, f64)> = by_leg
                .get(spec.name.as_str())
                .map(|r| r.values().copied().collect())
                .unwrap_or_default();
            let combined = combine_replicas(&pairs).ok_or_else(|| CycleError::MissingLeg {
                subject: id.to_string(),
                leg: spec.name.clone(),
            })?;
            Ok(CombinedLeg {
                leg: spec.name.clone(),
                sign: spec.sign,
                combined,
            })
        })
        .collect()
}

/// The legs' constant and Boresch corrections, and a warning for each Boresch
/// correction whose analytic formula departs from the quadrature.
fn leg_corrections(
    id: &str,
    legs: &[LegSpec],
    direction: EdgeDirection,
    temperature_k: f64,
    unit: EnergyUnit,
) -> Result<(Vec<Correction>, Vec<String>), CycleError> {
    let mut corrections = Vec::new();
    let mut warnings = Vec::new();
    for spec in legs {
        if spec.correction != 0.0 {
            corrections.push(Correction {
                leg: spec.name.clone(),
                kind: "constant".into(),
                value: direction.factor() * spec.correction,
                analytic: None,
            });
        }
        let Some(r) = &spec.restraint else {
            continue;
        };
        let release: RestraintRelease =
            r.release(temperature_k, unit)
                .map_err(|source| CycleError::BadRestraint {
                    subject: id.to_string(),
                    leg: spec.name.clone(),
                    source,
                })?;
        if release.analytic_departs(temperature_k, unit) {
            warnings.push(format!(
                "{id}: leg '{}': the analytic Boresch formula gives {:.3} {unit} where the quadrature gives {:.3} (difference {:+.3}); the quadrature is used (the formula holds only for stiff restraints away from 0° and 180°)",
                spec.name,
                release.analytic,
                release.quadrature,
                release.difference(),
            ));
        }
        corrections.push(Correction {
            leg: spec.name.clone(),
            kind: "boresch".into(),
            value: spec.sign * release.quadrature,
            analytic: Some(spec.sign * release.analytic),
        });
    }
    Ok((corrections, warnings))
}

/// ΔΔG of every replica number any leg has; a leg lacking the number enters
/// with its combined mean and σ.
fn per_replica(
    legs: &[LegSpec],
    by_leg: &ByLeg,
    combined: &[CombinedLeg],
    correction_sum: f64,
) -> Vec<ReplicaValue> {
    let mut numbers: Vec<u32> = by_leg.values().flat_map(|r| r.keys().copied()).collect();
    numbers.sort_unstable();
    numbers.dedup();
    numbers
        .into_iter()
        .map(|r| {
            let (mut sum, mut var) = (correction_sum, 0.0);
            let mut filled = Vec::new();
            for (spec, c) in legs.iter().zip(combined) {
                let own = by_leg.get(spec.name.as_str()).and_then(|m| m.get(&r));
                let (dg, s) = match own {
                    Some(&v) => v,
                    None => {
                        filled.push(spec.name.clone());
                        (c.combined.mean, c.combined.sigma)
                    }
                };
                sum += spec.sign * dg;
                var += s * s;
            }
            ReplicaValue {
                replica: r,
                ddg: sum,
                sigma: var.sqrt(),
                filled,
            }
        })
        .collect()
}
