//! Filling a [`LegReplica`] from the estimator's [`LegEstimate`].

use super::results::{Convergence, LegReplica, MethodValue, WindowSummary};
use crate::estimate::{LegEstimate, Method};
use crate::units::EnergyUnit;

/// The name an estimator has in files (`mbar`, `ti_spline`, …).
pub fn method_name(m: Method) -> String {
    serde_json::to_value(m)
        .ok()
        .and_then(|v| v.as_str().map(str::to_string))
        .unwrap_or_else(|| format!("{m:?}").to_lowercase())
}

impl LegReplica {
    /// The report's entry for one leg replica, from its estimate (reduced units)
    /// converted to `unit`. `headline` gives [`LegReplica::dg`]; `None` when the
    /// estimate lacks it.
    pub fn from_estimate(
        subject: &str,
        leg: &str,
        replica: u32,
        sign: f64,
        est: &LegEstimate,
        headline: Method,
        unit: EnergyUnit,
    ) -> Option<LegReplica> {
        let f = EnergyUnit::Kt.factor_to(unit, est.temperature_k);
        let head = est.estimates.get(&headline)?;
        let value = |m: &Method| {
            est.estimates.get(m).map(|d| MethodValue {
                method: method_name(*m),
                dg: d.delta_g * f,
                sigma: d.sigma * f,
            })
        };
        let methods = est.estimates.keys().filter_map(value).collect();
        let ti = [headline, Method::Ti, Method::TiSpline]
            .iter()
            .filter(|m| m.uses_dudl())
            .find_map(value);
        let convergence = est.convergence.as_ref().map(|c| Convergence {
            fractions: c.points.iter().map(|p| p.fraction).collect(),
            forward: c.points.iter().map(|p| p.forward.delta_g * f).collect(),
            forward_sigma: c.points.iter().map(|p| p.forward.sigma * f).collect(),
            reverse: c.points.iter().map(|p| p.reverse.delta_g * f).collect(),
            reverse_sigma: c.points.iter().map(|p| p.reverse.sigma * f).collect(),
        });
        Some(LegReplica {
            subject: subject.to_string(),
            leg: leg.to_string(),
            replica,
            sign,
            dg: head.delta_g * f,
            sigma: head.sigma * f,
            methods,
            overlap: est.overlap.clone().unwrap_or_default(),
            min_adjacent_overlap: est.min_adjacent_overlap,
            windows: window_summaries(est, f),
            ti,
            convergence,
            // In the campaign's unit, like every other number on the page.
            warnings: if est.warning_details.len() == est.warnings.len() {
                est.warnings_in(unit)
            } else {
                est.warnings.clone()
            },
        })
    }
}

/// One entry per window (per window and λ component for multi-component legs),
/// energies multiplied by `f` (reduced units to the campaign unit).
fn window_summaries(est: &LegEstimate, f: f64) -> Vec<WindowSummary> {
    if est.ti_points.is_empty() {
        return est
            .windows
            .iter()
            .map(|w| WindowSummary {
                lambda: est.lambdas.get(w.state).copied().unwrap_or(f64::NAN),
                component: None,
                dudl_mean: f64::NAN,
                dudl_sem: f64::NAN,
                frames: Some(w.frames as u64),
                discarded: Some(w.equilibration_frames as u64),
                inefficiency: Some(w.inefficiency),
            })
            .collect();
    }
    let multi = {
        let mut names: Vec<&str> = est.ti_points.iter().map(|p| p.component.as_str()).collect();
        names.sort_unstable();
        names.dedup();
        names.len() > 1
    };
    est.ti_points
        .iter()
        .map(|p| {
            let w = est.windows.iter().find(|w| w.state == p.state);
            WindowSummary {
                lambda: p.lambda,
                component: multi.then(|| p.component.clone()),
                dudl_mean: p.mean * f,
                dudl_sem: p.sem * f,
                frames: w.map(|w| w.frames as u64),
                discarded: w
                    .map(|w| w.ti_equilibration_frames.unwrap_or(w.equilibration_frames) as u64),
                inefficiency: w.map(|w| w.ti_inefficiency.unwrap_or(w.inefficiency)),
            }
        })
        .collect()
}
