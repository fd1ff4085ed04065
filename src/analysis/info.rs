//! What the analysis needs to know about a campaign, taken from a loaded one.

use crate::cycle::{CampaignKind, LegSpec};
use crate::units::EnergyUnit;

/// What [`super::assemble`] needs to know about the campaign.
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

/// A campaign leg as the cycle sees it (sign, constant correction, restraint).
pub fn leg_spec(leg: &crate::campaign::Leg) -> LegSpec {
    LegSpec {
        name: leg.name.clone(),
        sign: f64::from(leg.sign),
        correction: leg.correction.unwrap_or(0.0),
        restraint: leg.restraint,
    }
}

impl CampaignInfo {
    /// Everything [`super::assemble`] needs, taken from a loaded campaign.
    pub fn from_campaign(c: &crate::campaign::Campaign) -> Self {
        let estimator = serde_json::to_value(c.analysis.estimator)
            .ok()
            .and_then(|v| v.as_str().map(str::to_string))
            .unwrap_or_else(|| "mbar".into());
        CampaignInfo {
            name: c.name.clone(),
            kind: c.kind,
            unit: c.unit,
            temperature_k: c.temperature_k,
            estimator,
            legs: c.legs.iter().map(leg_spec).collect(),
            reference: c.reference_ligand.clone(),
            seed: c.seed,
        }
    }
}
