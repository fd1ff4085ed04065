//! The library chain from window tables to reconciled ligands, on the demo
//! scenario: demo engine (in process) → reader → estimator → report entries →
//! cycles → network. The demo's answers are known exactly (demo-data/exact.csv,
//! exact-ligands.csv, analytic free energies of harmonic wells), so the check is
//! against them: every edge within 3σ, per-ligand ΔG (less the series mean)
//! within 0.3 kcal/mol RMSE.

use legwork::analysis::{assemble, CampaignInfo, LegReplica};
use legwork::campaign::{self, LoadOptions};
use legwork::collect::experiment::read_measured;
use legwork::collect::{read_leg, ReaderConfig};
use legwork::demo::fault::Faults;
use legwork::demo::run::{run, RunConfig};
use legwork::demo::scenario::read_ligands;
use legwork::demo::system::ToySystem;
use legwork::estimate::{estimate_leg, EstimateOptions};
use std::collections::HashMap;
use std::path::Path;

#[test]
fn demo_windows_to_reconciled_ligands_match_the_exact_answers() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let c = campaign::load(&root.join("campaigns/demo.yaml"), &LoadOptions::default())
        .unwrap()
        .campaign;
    let info = CampaignInfo::from_campaign(&c);
    let ligands = read_ligands(&root.join("demo-data/ligands.csv")).unwrap();
    let well = |id: &str, env: &str| {
        ligands
            .iter()
            .find(|l| l.id == id)
            .unwrap()
            .well(env)
            .unwrap()
    };
    let dims = c.vars["dimensions"].as_u64().unwrap() as usize;
    let phi = c.vars["phi"].as_f64().unwrap();
    let frames = c.stages.iter().find_map(|s| s.frames).unwrap();
    let tmp = tempfile::tempdir().unwrap();
    let opts = EstimateOptions::from_analysis(&c.analysis);
    let mut legs = Vec::new();
    let mut seed = 1u64;
    for e in &c.edges {
        for leg in &c.legs {
            let env = leg.vars["environment"].as_str().unwrap();
            let system =
                ToySystem::new(well(&e.a, env), well(&e.b, env), dims, c.temperature_k).unwrap();
            let lambdas = leg.lambdas.primaries();
            for replica in 1..=leg.replicas {
                let mut paths = Vec::new();
                for state in 0..lambdas.len() {
                    seed += 1;
                    let out =
                        tmp.path()
                            .join(format!("{}-{}-{replica}-{state}.tsv", e.id(), leg.name));
                    run(&RunConfig {
                        system,
                        temperature_k: c.temperature_k,
                        lambdas: lambdas.clone(),
                        state,
                        frames,
                        seed,
                        attempt: 1,
                        unit: c.unit,
                        phi,
                        time_step: 1.0,
                        start: None,
                        displace: 3.0,
                        output: out.clone(),
                        checkpoint: None,
                        checkpoint_every: 1000,
                        faults: Faults::default(),
                    })
                    .unwrap();
                    paths.push(out);
                }
                let samples = read_leg(&paths, &ReaderConfig::default()).unwrap();
                let est = estimate_leg(&samples, &opts).unwrap();
                legs.push(
                    LegReplica::from_estimate(
                        &e.id(),
                        &leg.name,
                        replica,
                        f64::from(leg.sign),
                        &est,
                        c.analysis.estimator,
                        c.unit,
                    )
                    .unwrap(),
                );
            }
        }
    }
    let measured =
        read_measured(c.experiment.as_deref().unwrap(), c.temperature_k, c.unit).unwrap();
    let r = assemble(&info, legs, measured, vec![]).unwrap();

    let mut exact: HashMap<String, f64> = HashMap::new();
    for rec in csv::Reader::from_path(root.join("demo-data/exact.csv"))
        .unwrap()
        .records()
    {
        let rec = rec.unwrap();
        exact.insert(format!("{}+{}", &rec[0], &rec[1]), rec[2].parse().unwrap());
    }
    assert_eq!(r.edges.len(), c.edges.len());
    for e in &r.edges {
        let x = exact[&e.subject];
        eprintln!(
            "{:<16} ddg {:+.3} ± {:.3}  exact {:+.3}  z {:+.2}",
            e.subject,
            e.ddg,
            e.sigma,
            x,
            (e.ddg - x) / e.sigma
        );
        assert!(
            (e.ddg - x).abs() < 3.0 * e.sigma,
            "{}: {} ± {} vs exact {x}",
            e.subject,
            e.ddg,
            e.sigma
        );
    }
    let mean = r.ligands.iter().map(|l| l.dg).sum::<f64>() / r.ligands.len() as f64;
    let mut se = 0.0;
    let mut n = 0;
    for rec in csv::Reader::from_path(root.join("demo-data/exact-ligands.csv"))
        .unwrap()
        .records()
    {
        let rec = rec.unwrap();
        let l = r.ligands.iter().find(|l| l.ligand == rec[0]).unwrap();
        se += (l.dg - mean - rec[1].parse::<f64>().unwrap()).powi(2);
        n += 1;
    }
    let rmse = (se / n as f64).sqrt();
    eprintln!("per-ligand RMSE (series mean removed): {rmse:.3} kcal/mol");
    assert!(rmse < 0.3, "{rmse}");
    assert!(r.statistics.is_some());
    // Left in the target folder for a look: the demo's report from library calls.
    let out = Path::new(env!("CARGO_TARGET_TMPDIR")).join("demo-report");
    legwork::report::write_all(&out, &r).unwrap();
}
