//! The estimator's warnings: one per problem, none for exact agreement, the
//! window of identical frames named, numbers in the caller's unit.

use crate::estimate_support::scenarios::*;
use legwork::estimate::{
    estimate_leg, Equilibration, EstimateOptions, LegWarning, Method, Subsample,
};
use legwork::units::EnergyUnit;

fn plain() -> EstimateOptions {
    EstimateOptions {
        equilibration: Equilibration::None,
        subsample: Subsample::None,
        ..Default::default()
    }
}

/// Three identical states: every estimator gives exactly 0 with σ = 0 (the
/// definition of a free-energy difference between identical states), and nothing
/// is said about them disagreeing.
#[test]
fn identical_states_draw_no_disagreement() {
    let mut r = rng(61);
    let spec = Spec {
        states: 3,
        centre: 0.0,
        offset: 0.0,
        phi: 0.0,
        frames: 500,
        ..Spec::correlated()
    };
    let leg = leg(&spec, &mut r);
    let est = estimate_leg(&leg, &plain()).unwrap();
    for (m, d) in &est.estimates {
        assert!(d.delta_g.abs() < 1e-9, "{m}: {d:?}");
    }
    assert!(
        !est.warning_details
            .iter()
            .any(|w| matches!(w, LegWarning::Outlier { .. } | LegWarning::Disagree { .. })),
        "{:?}",
        est.warnings
    );
}

/// A window whose frames are all the same frame is named as such, and every
/// estimate of the leg is marked unreliable (its σ would be zero or meaningless).
#[test]
fn a_window_of_identical_frames_is_named() {
    let mut r = rng(62);
    let mut leg = leg(&Spec::correlated(), &mut r);
    let w = &mut leg.windows[2];
    let (k, c) = (w.n_states, w.components.len());
    let row: Vec<f64> = w.reduced[..k].to_vec();
    let d: Vec<f64> = w.dudl[..c].to_vec();
    for n in 0..w.frames {
        w.reduced[n * k..(n + 1) * k].copy_from_slice(&row);
        w.dudl[n * c..(n + 1) * c].copy_from_slice(&d);
    }
    let est = estimate_leg(&leg, &plain()).unwrap();
    let named: Vec<_> = est
        .warning_details
        .iter()
        .filter(|w| matches!(w, LegWarning::IdenticalFrames { state: 2, .. }))
        .collect();
    assert_eq!(named.len(), 1, "{:?}", est.warnings);
    assert!(est
        .warnings
        .iter()
        .any(|w| w.contains("window of state 2") && w.contains("identical")));
    for m in est.estimates.keys() {
        assert!(!est.is_reliable(*m), "{m} not marked");
    }
}

/// Where one-sided EXP is off (states that overlap poorly enough for EXP's bias
/// but well enough for BAR and MBAR), each estimator that disagrees with all the
/// others is one warning, not one per pair.
#[test]
fn an_estimator_that_disagrees_with_all_others_is_one_warning() {
    let spec = Spec {
        states: 3,
        centre: 7.0,
        offset: 1.0,
        phi: 0.0,
        frames: 3000,
        ..Spec::correlated()
    };
    let opts = EstimateOptions {
        unreliable_overlap: 0.0,
        ..plain()
    };
    let mut seen = 0;
    let mut r = rng(63);
    for _ in 0..20 {
        let est = estimate_leg(&leg(&spec, &mut r), &opts).unwrap();
        let outliers: Vec<Method> = est
            .warning_details
            .iter()
            .filter_map(|w| match w {
                LegWarning::Outlier { method, .. } => Some(*method),
                _ => None,
            })
            .collect();
        let pairs = est
            .warning_details
            .iter()
            .filter(|w| matches!(w, LegWarning::Disagree { .. }))
            .count();
        // one warning per odd estimator, at most one for what is left
        assert!(pairs <= 1, "{:?}", est.warnings);
        let mut unique = outliers.clone();
        unique.dedup();
        assert_eq!(unique, outliers);
        seen += outliers.len();
        for m in &outliers {
            assert!(
                matches!(m, Method::ExpForward | Method::ExpReverse),
                "{m} singled out: {:?}",
                est.warnings
            );
        }
    }
    assert!(seen > 0, "EXP was never the odd one out");
}

/// Warnings carry kT values and word them in any unit: 1 kT at 300 K is
/// R·300 K = 0.5962 kcal/mol (R = 1.987204e-3 kcal/(mol K), CODATA; from memory).
#[test]
fn warnings_are_worded_in_the_callers_unit() {
    let spec = Spec {
        transient_amplitude: 3.0,
        transient_share: 1.0,
        ..Spec::correlated()
    };
    let mut r = rng(64);
    let opts = EstimateOptions {
        equilibration: Equilibration::None,
        ..Default::default()
    };
    let est = estimate_leg(&leg(&spec, &mut r), &opts).unwrap();
    let w = est
        .warning_details
        .iter()
        .find_map(|w| match w {
            LegWarning::LegDrift { first, .. } | LegWarning::WindowDrift { first, .. } => {
                Some((w, *first))
            }
            _ => None,
        })
        .expect("the steady drift is flagged");
    let kcal = w.0.message(EnergyUnit::KcalPerMol, 300.0);
    let want = format!("{:.3}", w.1.delta_g * 0.596_161);
    assert!(
        kcal.contains(&want) && kcal.contains("kcal/mol"),
        "{kcal} vs {want}"
    );
    assert_eq!(est.warnings_in(EnergyUnit::Kt), est.warnings);
}
