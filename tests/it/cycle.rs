//! Closing a cycle: signed legs, corrections, the Boresch standard-state
//! correction and replica combination.

use legwork::cycle::{
    combine_edge, combine_replicas, BoreschRestraint, CycleError, EdgeFlag, LegSpec, LegValue,
    STANDARD_VOLUME_A3,
};
use legwork::plan::Subject;
use legwork::units::EnergyUnit;
use serde_json::json;

const T: f64 = 298.15;

/// Runs a reference script with LEGWORK_PYTHON; `None` (after a loud SKIPPED
/// line) when it is not set.
use crate::reference_support::python;

fn spec(name: &str, sign: f64) -> LegSpec {
    LegSpec {
        name: name.into(),
        sign,
        correction: 0.0,
        restraint: None,
    }
}

fn value(leg: &str, replica: u32, dg: f64, sigma: f64) -> LegValue {
    LegValue {
        leg: leg.into(),
        replica,
        dg,
        sigma,
    }
}

fn edge() -> Subject {
    Subject::Edge {
        a: "ork-01".into(),
        b: "ork-02".into(),
    }
}

fn restraint(k_r: f64, k_ang: f64, theta_a: f64, theta_b: f64) -> BoreschRestraint {
    BoreschRestraint {
        r0: 5.2,
        theta_a,
        theta_b,
        k_r,
        k_theta_a: k_ang,
        k_theta_b: k_ang,
        k_phi_a: k_ang,
        k_phi_b: k_ang,
        k_phi_c: k_ang,
    }
}

#[test]
fn replica_combination_follows_the_stated_formula() {
    // Hand calculation of the formula documented on ReplicaCombination:
    // values 1.0, 1.2, 1.4 with σ 0.1, 0.2, 0.1 → mean 1.2;
    // per-replica part √(0.01 + 0.04 + 0.01)/3 = 0.0816497;
    // s² = (0.04 + 0 + 0.04)/2 = 0.04, spread part 0.2/√3 = 0.1154701;
    // total √(0.06/9 + 0.04/3) = √0.02 = 0.1414214.
    let c = combine_replicas(&[(1.0, 0.1), (1.2, 0.2), (1.4, 0.1)]).unwrap();
    assert!((c.mean - 1.2).abs() < 1e-12);
    assert!((c.sigma_replicas - 0.081_649_7).abs() < 1e-7);
    assert!((c.sigma_spread - 0.115_470_1).abs() < 1e-7);
    assert!((c.sigma - 0.141_421_4).abs() < 1e-7);
    assert_eq!(c.n, 3);

    let one = combine_replicas(&[(2.0, 0.3)]).unwrap();
    assert_eq!((one.mean, one.sigma, one.sigma_spread), (2.0, 0.3, 0.0));
    assert!(combine_replicas(&[]).is_none());
}

#[test]
fn edge_is_signed_sum_of_leg_means_plus_corrections() {
    let mut solvent = spec("solvent", -1.0);
    solvent.correction = 0.25;
    let legs = [spec("complex", 1.0), solvent];
    let values = [
        value("complex", 1, -3.0, 0.2),
        value("complex", 2, -3.4, 0.2),
        value("solvent", 1, -1.0, 0.1),
        value("solvent", 2, -1.2, 0.1),
    ];
    let e = combine_edge(&edge(), &legs, &values, T, EnergyUnit::KcalPerMol).unwrap();
    // (−3.2) − (−1.1) + 0.25
    assert!((e.ddg - (-1.85)).abs() < 1e-12);
    // Legs are independent: variance parts add over legs.
    let c = combine_replicas(&[(-3.0, 0.2), (-3.4, 0.2)]).unwrap();
    let s = combine_replicas(&[(-1.0, 0.1), (-1.2, 0.1)]).unwrap();
    assert!((e.sigma_replicas - c.sigma_replicas.hypot(s.sigma_replicas)).abs() < 1e-12);
    assert!((e.sigma_spread - c.sigma_spread.hypot(s.sigma_spread)).abs() < 1e-12);
    assert!((e.sigma - e.sigma_replicas.hypot(e.sigma_spread)).abs() < 1e-12);
    // Per replica: replica 1 = −3.0 + 1.0 + 0.25.
    assert_eq!(e.replicas.len(), 2);
    assert!((e.replicas[0].ddg - (-1.75)).abs() < 1e-12);
    assert!((e.replicas[0].sigma - 0.2f64.hypot(0.1)).abs() < 1e-12);
    assert_eq!(e.corrections.len(), 1);
    assert_eq!(e.ligand_b.as_deref(), Some("ork-02"));
    assert!(e.flags.is_empty(), "{:?}", e.flags);
}

#[test]
fn unequal_replica_counts_use_every_replica_and_pair_only_common_ones() {
    let legs = [spec("complex", 1.0), spec("solvent", -1.0)];
    let values = [
        value("complex", 1, -3.0, 0.2),
        value("complex", 2, -3.4, 0.2),
        value("complex", 3, -3.2, 0.2),
        value("solvent", 2, -1.0, 0.1),
    ];
    let e = combine_edge(&edge(), &legs, &values, T, EnergyUnit::KcalPerMol).unwrap();
    assert!((e.ddg - (-3.2 + 1.0)).abs() < 1e-12);
    assert_eq!(e.replicas.len(), 1);
    assert_eq!(e.replicas[0].replica, 2);
    assert!(e.flags.contains(&EdgeFlag::SingleReplica));
}

#[test]
fn replicas_that_disagree_are_flagged() {
    let legs = [spec("complex", 1.0), spec("solvent", -1.0)];
    let values = [
        value("complex", 1, -3.0, 0.05),
        value("complex", 2, -4.0, 0.05),
        value("solvent", 1, -1.0, 0.05),
        value("solvent", 2, -1.0, 0.05),
    ];
    let e = combine_edge(&edge(), &legs, &values, T, EnergyUnit::KcalPerMol).unwrap();
    assert!(e.sigma_spread > 2.0 * e.sigma_replicas);
    assert!(e.flags.contains(&EdgeFlag::ReplicaSpread));
}

#[test]
fn missing_and_unknown_legs_are_errors_that_name_the_leg() {
    let legs = [spec("complex", 1.0), spec("solvent", -1.0)];
    let err = combine_edge(
        &edge(),
        &legs,
        &[value("complex", 1, 1.0, 0.1)],
        T,
        EnergyUnit::KcalPerMol,
    )
    .unwrap_err();
    assert!(matches!(&err, CycleError::MissingLeg { leg, .. } if leg == "solvent"));
    assert!(err.to_string().contains("ork-01+ork-02"));
    let err = combine_edge(
        &edge(),
        &legs,
        &[value("vacuum", 1, 1.0, 0.1)],
        T,
        EnergyUnit::KcalPerMol,
    )
    .unwrap_err();
    assert!(err.to_string().contains("vacuum") && err.to_string().contains("complex, solvent"));
    let err = combine_edge(
        &edge(),
        &legs,
        &[value("complex", 1, f64::NAN, 0.1)],
        T,
        EnergyUnit::KcalPerMol,
    )
    .unwrap_err();
    assert!(matches!(err, CycleError::NotFinite { .. }));
}

#[test]
fn solvation_cycle_of_one_ligand() {
    // Solvation: ΔG_solv = ΔG(vacuum decoupling) − ΔG(water decoupling).
    let legs = [spec("vacuum", 1.0), spec("water", -1.0)];
    let values = [value("vacuum", 1, 2.0, 0.05), value("water", 1, 7.5, 0.1)];
    let s = Subject::Ligand {
        id: "ork-03".into(),
    };
    let e = combine_edge(&s, &legs, &values, T, EnergyUnit::KcalPerMol).unwrap();
    assert!((e.ddg - (-5.5)).abs() < 1e-12);
    assert_eq!(e.ligand_a, "ork-03");
    assert!(e.ligand_b.is_none());
}

#[test]
fn boresch_release_enters_with_the_leg_sign_and_in_the_campaign_unit() {
    let r = restraint(10.0, 10.0, 90.0, 90.0);
    let mut complex = spec("complex", -1.0);
    complex.restraint = Some(r);
    let legs = [complex, spec("solvent", 1.0)];
    let values = [
        value("complex", 1, 20.0, 0.2),
        value("solvent", 1, 12.0, 0.1),
    ];
    let s = Subject::Ligand {
        id: "ork-01".into(),
    };
    let e = combine_edge(&s, &legs, &values, T, EnergyUnit::KcalPerMol).unwrap();
    let release = r.release_free_energy(T, EnergyUnit::KcalPerMol);
    assert!(
        release < 0.0,
        "releasing a restraint into 1 M is favourable"
    );
    assert!((e.ddg - (-20.0 + 12.0 - release)).abs() < 1e-12);
    assert_eq!(e.corrections[0].kind, "boresch");
    let kj = r.release_free_energy(T, EnergyUnit::KjPerMol);
    assert!((kj - release * 4.184).abs() < 1e-9);

    let mut bad = spec("complex", -1.0);
    bad.restraint = Some(restraint(10.0, 10.0, 0.0, 90.0));
    let err = combine_edge(
        &s,
        &[bad, spec("solvent", 1.0)],
        &values,
        T,
        EnergyUnit::KcalPerMol,
    )
    .unwrap_err();
    assert!(err.to_string().contains("theta_a"), "{err}");
}

#[test]
fn boresch_formula_by_hand() {
    // Boresch et al. 2003 (eq. 32, number from memory), evaluated by hand for k_r = 10 kcal/mol/Å²,
    // all angular k = 10 kcal/mol/rad², r0 = 5.2 Å, θA = θB = 90°, T = 298.15 K:
    // kT = 0.5924849 kcal/mol (CODATA 2018 R, 4.184 J/cal),
    // V° = 1660.5391 Å³, 8π²V° = 131 110.9, √(10⁶) = 1000,
    // (2πkT)³ = 3.7226927³ = 51.5907, r0² = 27.04,
    // ratio = 131 110.9 × 1000 / (27.04 × 51.5907) = 93 985,
    // ΔG = −0.5924849 × ln(93 985) = −0.5924849 × 11.4509 = −6.7845 kcal/mol.
    assert!((STANDARD_VOLUME_A3 - 1660.5391).abs() < 1e-3);
    let g = restraint(10.0, 10.0, 90.0, 90.0).release_free_energy(T, EnergyUnit::KcalPerMol);
    assert!((g - (-6.7845)).abs() < 2e-3, "{g}");
}

#[test]
fn boresch_matches_numerical_integration_for_stiff_restraints() {
    // Reference: direct quadrature of the restraint's Boltzmann factor over the six
    // Boresch coordinates with their Jacobians (tests/python/boresch_integral.py).
    let stiff = [
        restraint(20.0, 100.0, 90.0, 90.0),
        restraint(50.0, 200.0, 60.0, 110.0),
        restraint(10.0, 80.0, 45.0, 135.0),
    ];
    let soft = [restraint(2.0, 2.0, 60.0, 120.0)];
    let all: Vec<_> = stiff.iter().chain(&soft).collect();
    let input = json!({ "temperature_K": T, "restraints": all });
    let Some(out) = python("boresch_integral.py", input) else {
        return;
    };
    let numeric: Vec<f64> = serde_json::from_value(out["release_kcal"].clone()).unwrap();
    for (r, n) in all.iter().zip(&numeric) {
        let a = r.release_free_energy(T, EnergyUnit::KcalPerMol);
        eprintln!("analytic {a:.5}  numeric {n:.5}  diff {:.5}", a - n);
    }
    for (r, n) in stiff.iter().zip(&numeric) {
        let a = r.release_free_energy(T, EnergyUnit::KcalPerMol);
        assert!(
            (a - n).abs() < 0.01,
            "stiff restraint {r:?}: analytic {a}, numeric {n}"
        );
    }
    // The analytic formula is a stiff-restraint approximation: for a soft one it
    // must visibly depart from the exact integral (otherwise the check above
    // would not discriminate anything).
    let a = soft[0].release_free_energy(T, EnergyUnit::KcalPerMol);
    assert!(
        (a - numeric[3]).abs() > 0.05,
        "soft: analytic {a}, numeric {}",
        numeric[3]
    );
}
