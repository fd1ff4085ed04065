//! The demo campaign end to end on the local executor (`legwork run`), checked
//! against the exact answers of its toy system (demo-data/exact.csv and
//! exact-ligands.csv, derived in closed form by the demo engine).

use assert_cmd::Command;
use std::collections::HashMap;
use std::path::Path;

fn rows(path: &Path) -> Vec<HashMap<String, String>> {
    let mut r = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .from_path(path)
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let headers = r.headers().unwrap().clone();
    r.records()
        .map(|rec| {
            let rec = rec.unwrap();
            headers
                .iter()
                .zip(rec.iter())
                .map(|(h, v)| (h.to_string(), v.to_string()))
                .collect()
        })
        .collect()
}

fn num(row: &HashMap<String, String>, key: &str) -> f64 {
    row[key]
        .parse()
        .unwrap_or_else(|_| panic!("column {key} = {:?} is not a number", row[key]))
}

#[test]
fn demo_campaign_recovers_the_exact_answers() {
    let tmp = tempfile::tempdir().unwrap();
    let root = tmp.path().join("orrin-demo");
    let out = Command::cargo_bin("legwork")
        .unwrap()
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .args(["-q", "run", "campaigns/demo.yaml", "--root"])
        .arg(&root)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "legwork run failed:\n{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );

    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data");
    let exact: HashMap<(String, String), f64> = rows(&demo.join("exact.csv"))
        .iter()
        .map(|r| {
            (
                (r["ligand_a"].clone(), r["ligand_b"].clone()),
                num(r, "ddg_exact"),
            )
        })
        .collect();
    let edges = rows(&root.join("results/edges.csv"));
    assert_eq!(edges.len(), exact.len(), "every demo edge has a result");
    for e in &edges {
        let key = (e["ligand_a"].clone(), e["ligand_b"].clone());
        let truth = exact[&key];
        let (ddg, sigma) = (num(e, "ddg"), num(e, "sigma"));
        assert!(sigma > 0.0 && sigma < 0.5, "{key:?}: implausible σ {sigma}");
        // Within 3σ of the closed-form answer: the acceptance bound for a Gaussian
        // error with an honest σ (a 3σ miss has probability 0.27% per edge).
        assert!(
            (ddg - truth).abs() <= 3.0 * sigma,
            "{key:?}: ΔΔG {ddg:.3} ± {sigma:.3} vs exact {truth:.3}"
        );
    }

    let exact_lig: HashMap<String, f64> = rows(&demo.join("exact-ligands.csv"))
        .iter()
        .map(|r| (r["ligand"].clone(), num(r, "dg_exact")))
        .collect();
    let ligands = rows(&root.join("results/ligands.csv"));
    assert_eq!(ligands.len(), exact_lig.len());
    let sq: f64 = ligands
        .iter()
        .map(|l| (num(l, "dg_minus_mean") - exact_lig[&l["ligand"]]).powi(2))
        .sum();
    let rmse = (sq / ligands.len() as f64).sqrt();
    assert!(
        rmse < 0.3,
        "per-ligand RMSE {rmse:.3} kcal/mol against the exact answers"
    );

    let html = std::fs::read_to_string(root.join("report/index.html")).unwrap();
    assert!(html.contains("<svg"), "the report carries its plots");

    // A second collect reads every window from the parse cache, and agrees.
    let before = std::fs::read_to_string(root.join("results/edges.csv")).unwrap();
    let again = Command::cargo_bin("legwork")
        .unwrap()
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .args(["collect", "campaigns/demo.yaml", "--root"])
        .arg(&root)
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&again.stdout);
    assert!(again.status.success(), "collect failed: {stdout}");
    assert!(
        stdout.contains("(0 windows parsed, 480 from cache)"),
        "second collect should parse nothing: {stdout}"
    );
    let after = std::fs::read_to_string(root.join("results/edges.csv")).unwrap();
    assert_eq!(before, after, "cached windows give the same edges");

    partial_campaign_lists_what_is_missing(&root);
}

/// With one window of one replica unfinished, that leg replica is listed as
/// missing and its edge rests on the other replica alone.
fn partial_campaign_lists_what_is_missing(root: &Path) {
    use legwork::campaign::{self, LoadOptions};
    let file = Path::new(env!("CARGO_MANIFEST_DIR")).join("campaigns/demo.yaml");
    let c = campaign::load(
        &file,
        &LoadOptions {
            root_override: Some(root.to_path_buf()),
        },
    )
    .unwrap()
    .campaign;
    let plan = legwork::plan::expand(&c);
    let set = &plan.windows[0];
    let unfinished = set.tasks[5];
    let (results, counts) =
        legwork::analysis::analyse_campaign(&c, &plan, &|i| i != unfinished, &|_, _| {}).unwrap();
    assert_eq!(counts.missing, 1);
    assert_eq!(
        counts.parsed, 0,
        "every finished window comes from the cache"
    );
    let m = &results.missing[0];
    assert_eq!(
        (
            m.subject.as_str(),
            m.leg.as_str(),
            m.replica,
            m.windows_done,
            m.windows_total
        ),
        (
            set.subject.id().as_str(),
            set.leg.as_str(),
            set.replica,
            11,
            12
        )
    );
    let edge = results
        .edges
        .iter()
        .find(|e| e.subject == set.subject.id())
        .expect("the edge is still estimated from its other replica");
    let leg = edge.legs.iter().find(|l| l.leg == set.leg).unwrap();
    assert_eq!(leg.combined.n, 1);
}
