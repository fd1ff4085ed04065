//! The results tables, summary.json, the terminal summary, the HTML report and
//! `legwork report` re-rendering, on a synthetic but realistic fixture.

use crate::report_fixture as fixture;

use assert_cmd::Command;
use legwork::report::{self, print_summary, write_all, Results};
use std::collections::HashMap;
use std::path::Path;

fn read_csv(path: &Path) -> (Vec<String>, Vec<HashMap<String, String>>) {
    let mut r = csv::Reader::from_path(path).unwrap();
    let header: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
    let rows = r
        .records()
        .map(|rec| {
            let rec = rec.unwrap();
            header
                .iter()
                .cloned()
                .zip(rec.iter().map(str::to_string))
                .collect()
        })
        .collect();
    (header, rows)
}

fn num(row: &HashMap<String, String>, col: &str) -> f64 {
    row[col]
        .parse()
        .unwrap_or_else(|_| panic!("{col} = {:?}", row[col]))
}

#[test]
fn tables_have_the_agreed_columns_and_values() {
    let dir = tempfile::tempdir().unwrap();
    let r = fixture::results();
    let w = write_all(dir.path(), &r).unwrap();
    for f in [
        "legs.csv",
        "edges.csv",
        "ligands.csv",
        "cycles.csv",
        "summary.json",
    ] {
        assert!(dir.path().join("results").join(f).is_file(), "{f} missing");
    }
    assert_eq!(w.html, dir.path().join("report/index.html"));
    assert_eq!(w.files.len(), 6);

    // edges.csv: at least ligand_a, ligand_b, ddg, sigma, in the campaign unit.
    let (h, rows) = read_csv(&dir.path().join("results/edges.csv"));
    for c in [
        "ligand_a",
        "ligand_b",
        "ddg",
        "sigma",
        "sigma_replicas",
        "sigma_spread",
        "flags",
        "unit",
    ] {
        assert!(h.contains(&c.to_string()), "edges.csv lacks {c}: {h:?}");
    }
    assert_eq!(rows.len(), r.edges.len());
    for (row, e) in rows.iter().zip(&r.edges) {
        assert_eq!(row["ligand_a"], e.ligand_a);
        assert_eq!(Some(row["ligand_b"].as_str()), e.ligand_b.as_deref());
        assert!((num(row, "ddg") - e.ddg).abs() < 1e-6);
        assert!((num(row, "sigma") - e.sigma).abs() < 1e-6);
        assert_eq!(row["unit"], "kcal/mol");
    }
    // The biased edge of the fixture (ork-05 → ork-06, +1.4) carries the residual flag.
    let biased = rows.iter().find(|x| x["ligand_a"] == "ork-05").unwrap();
    assert!(biased["flags"].contains("residual"), "{biased:?}");

    // ligands.csv: ligand, dg, sigma, ranked most favourable first.
    let (h, rows) = read_csv(&dir.path().join("results/ligands.csv"));
    assert_eq!(&h[..3], &["ligand", "dg", "sigma"]);
    assert_eq!(rows.len(), r.ligands.len());
    let dgs: Vec<f64> = rows.iter().map(|x| num(x, "dg")).collect();
    assert!(dgs.windows(2).all(|w| w[0] <= w[1]), "{dgs:?}");
    assert_eq!(rows[0]["rank"], "1");
    let centred: f64 = rows.iter().map(|x| num(x, "dg_minus_mean")).sum();
    assert!(centred.abs() < 1e-5, "dg_minus_mean sums to {centred}");
    for x in &rows {
        let shift = num(x, "dg") - num(x, "dg_minus_mean");
        assert!((shift - num(&rows[0], "dg") + num(&rows[0], "dg_minus_mean")).abs() < 1e-5);
    }

    // legs.csv: one row per leg replica, a column pair per estimator.
    let (h, rows) = read_csv(&dir.path().join("results/legs.csv"));
    for c in [
        "subject",
        "leg",
        "replica",
        "dg",
        "sigma",
        "dg_mbar",
        "sigma_ti",
        "min_overlap",
    ] {
        assert!(h.contains(&c.to_string()), "legs.csv lacks {c}");
    }
    assert_eq!(rows.len(), r.legs.len());

    // cycles.csv: basis cycles then hysteresis rows.
    let (_, rows) = read_csv(&dir.path().join("results/cycles.csv"));
    assert_eq!(rows.len(), r.cycles.len() + r.hysteresis.len());
    assert!(rows.iter().any(|x| x["kind"] == "hysteresis"));
    let first = &rows[0];
    let path: Vec<&str> = first["ligands"].split('>').collect();
    assert_eq!(path.first(), path.last(), "a cycle ends where it starts");

    // summary.json is the Results model itself.
    let back: Results = report::load(dir.path()).unwrap();
    assert_eq!(back.edges.len(), r.edges.len());
    assert_eq!(back.campaign, "orrin-fixture");
}

#[test]
fn html_is_one_self_contained_file_with_plots_and_cautions() {
    let dir = tempfile::tempdir().unwrap();
    let r = fixture::results();
    write_all(dir.path(), &r).unwrap();
    let entries: Vec<_> = std::fs::read_dir(dir.path().join("report"))
        .unwrap()
        .collect();
    assert_eq!(entries.len(), 1, "report/ holds only index.html");
    let html = std::fs::read_to_string(dir.path().join("report/index.html")).unwrap();
    assert!(html.starts_with("<!DOCTYPE html>"));
    assert!(html.trim_end().ends_with("</html>"));
    // Nothing loaded from elsewhere: no scripts, stylesheets, images or frames.
    for bad in [
        "<script", "<link", "<img", "<iframe", "src=", "@import", "url(",
    ] {
        assert!(!html.contains(bad), "report contains {bad}");
    }
    for href in html
        .match_indices("href=\"")
        .map(|(i, _)| &html[i + 6..i + 8])
    {
        assert!(href.starts_with('#'), "external link in the report: {href}");
    }
    // The plots, inline: network, predicted vs measured per ligand and per edge,
    // and per plotted leg the overlap heatmap, dU/dλ and convergence.
    let svgs = html.matches("<svg").count();
    let plotted_legs = html.matches("Overlap matrix").count();
    assert!(plotted_legs >= 1);
    assert_eq!(
        svgs,
        3 + 3 * plotted_legs,
        "{svgs} SVGs for {plotted_legs} plotted legs"
    );
    assert!(html.contains("Network: edge colour"));
    assert!(html.contains("Predicted against measured ΔG"));
    assert!(html.contains("Predicted against measured ΔΔG"));
    assert!(html.contains("±1 and ±2 kcal/mol"));
    assert!(html.contains("TI area"));
    assert!(html.contains("Forward and reverse convergence"));
    // A leg with two λ components gets one dU/dλ series (and legend entry) each.
    assert!(
        html.contains(">\ncharge\n</text>") && html.contains(">\nvdw\n</text>"),
        "component legend missing"
    );
    // The cautions paragraph.
    assert!(html.contains("id=\"cautions\""));
    assert!(html.contains("not measurements"));
    assert!(html.contains("do not replace experimental validation"));
    assert!(
        html.contains("IC50"),
        "the fixture uses an IC50, so its caution must show"
    );
    assert!(html.contains("scheduler policies"));
    // Every ligand and edge shows up.
    for l in &r.ligands {
        assert!(html.contains(&l.ligand));
    }
    for e in &r.edges {
        assert!(html.contains(&e.subject));
    }
}

#[test]
fn terminal_summary_ranks_ligands_and_lists_worst_edges_and_warnings() {
    let r = fixture::results();
    let mut out = Vec::new();
    print_summary(&r, &mut out).unwrap();
    let text = String::from_utf8(out).unwrap();
    let ranked = r.ranked_ligands();
    let pos: Vec<usize> = ranked
        .iter()
        .map(|l| text.find(&l.ligand).unwrap())
        .collect();
    assert!(
        pos.windows(2).all(|w| w[0] < w[1]),
        "ligands not in rank order:\n{text}"
    );
    let worst = r.worst_edges()[0];
    assert!(text.contains("Edges to look at first"));
    assert!(text.contains(&worst.subject));
    assert!(text.contains("Warnings:"));
    assert!(text.contains("RMSE"));
    assert!(text.contains("Not finished"));
}

#[test]
fn legwork_report_rerenders_identically_from_summary_json() {
    let dir = tempfile::tempdir().unwrap();
    write_all(dir.path(), &fixture::results()).unwrap();
    let html = dir.path().join("report/index.html");
    let edges = dir.path().join("results/edges.csv");
    let before = (
        std::fs::read(&html).unwrap(),
        std::fs::read(&edges).unwrap(),
    );
    std::fs::remove_file(&html).unwrap();
    std::fs::remove_file(&edges).unwrap();
    let out = Command::cargo_bin("legwork")
        .unwrap()
        .args(["report", dir.path().to_str().unwrap()])
        .assert()
        .success();
    let stdout = String::from_utf8_lossy(&out.get_output().stdout).into_owned();
    assert!(stdout.contains("Report: "), "{stdout}");
    assert_eq!(
        std::fs::read(&html).unwrap(),
        before.0,
        "HTML differs after re-render"
    );
    assert_eq!(std::fs::read(&edges).unwrap(), before.1);

    // Naming the summary.json itself works too.
    Command::cargo_bin("legwork")
        .unwrap()
        .args([
            "report",
            dir.path().join("results/summary.json").to_str().unwrap(),
        ])
        .assert()
        .success();
}

#[test]
fn legwork_report_without_results_or_with_a_broken_summary_fails_clearly() {
    let dir = tempfile::tempdir().unwrap();
    let out = Command::cargo_bin("legwork")
        .unwrap()
        .args(["report", dir.path().to_str().unwrap()])
        .assert()
        .code(3);
    let err = String::from_utf8_lossy(&out.get_output().stderr).into_owned();
    assert!(
        err.contains("summary.json") && err.contains("legwork collect"),
        "{err}"
    );

    std::fs::create_dir_all(dir.path().join("results")).unwrap();
    std::fs::write(
        dir.path().join("results/summary.json"),
        "{\n  \"schema\": 1,\n  \"campaign\": 5\n}\n",
    )
    .unwrap();
    let out = Command::cargo_bin("legwork")
        .unwrap()
        .args(["report", dir.path().to_str().unwrap()])
        .assert()
        .code(2);
    let err = String::from_utf8_lossy(&out.get_output().stderr).into_owned();
    assert!(err.contains("summary.json:3:"), "{err}");
    assert!(
        !dir.path().join("report/index.html").exists(),
        "nothing half-written"
    );
}

#[test]
fn undefined_numbers_survive_summary_json() {
    // JSON has no NaN; an undefined estimate is written as null and read back as NaN.
    let mut r = fixture::results();
    r.legs[0].methods[0].dg = f64::NAN;
    r.legs[0].windows[0].dudl_sem = f64::NAN;
    let dir = tempfile::tempdir().unwrap();
    write_all(dir.path(), &r).unwrap();
    let back = report::load(dir.path()).unwrap();
    assert!(back.legs[0].methods[0].dg.is_nan());
    assert!(back.legs[0].windows[0].dudl_sem.is_nan());
}

#[test]
fn absolute_campaign_reports_one_cycle_per_ligand_with_the_restraint_correction() {
    use legwork::cycle::{BoreschRestraint, CampaignKind, LegSpec};
    use legwork::report::{assemble, CampaignInfo, LegReplica};
    use legwork::units::EnergyUnit;
    let restraint = BoreschRestraint {
        r0: 6.0,
        theta_a: 80.0,
        theta_b: 100.0,
        k_r: 10.0,
        k_theta_a: 20.0,
        k_theta_b: 20.0,
        k_phi_a: 20.0,
        k_phi_b: 20.0,
        k_phi_c: 20.0,
    };
    let info = CampaignInfo {
        name: "orrin-absolute".into(),
        kind: CampaignKind::Absolute,
        unit: EnergyUnit::KjPerMol,
        temperature_k: 300.0,
        estimator: "mbar".into(),
        legs: vec![
            LegSpec {
                name: "complex".into(),
                sign: -1.0,
                correction: 0.0,
                restraint: Some(restraint),
            },
            LegSpec {
                name: "solvent".into(),
                sign: 1.0,
                correction: 0.0,
                restraint: None,
            },
        ],
        reference: None,
        seed: 1,
    };
    let leg = |s: &str, l: &str, r: u32, dg: f64| LegReplica {
        subject: s.into(),
        leg: l.into(),
        replica: r,
        sign: if l == "complex" { -1.0 } else { 1.0 },
        dg,
        sigma: 0.3,
        methods: vec![],
        overlap: vec![],
        min_adjacent_overlap: Some(0.01),
        windows: vec![],
        convergence: None,
        warnings: vec![],
    };
    let legs = vec![
        leg("ork-01", "complex", 1, 80.0),
        leg("ork-01", "solvent", 1, 40.0),
        leg("ork-01", "complex", 2, 82.0),
        leg("ork-01", "solvent", 2, 41.0),
        leg("ork-02", "complex", 1, 70.0),
    ];
    let r = assemble(&info, legs, vec![], vec![]).unwrap();
    // ork-02 has no solvent leg yet: left out, with a warning naming it.
    assert_eq!(r.edges.len(), 1);
    assert!(r
        .warnings
        .iter()
        .any(|w| w.contains("ork-02") && w.contains("solvent")));
    assert!(r.warnings.iter().any(|w| w.contains("overlap below")));
    let release = restraint.release_free_energy(300.0, EnergyUnit::KjPerMol);
    let expected = -81.0 + 40.5 - release;
    assert!((r.edges[0].ddg - expected).abs() < 1e-9);
    assert_eq!(r.ligands.len(), 1);
    assert!((r.ligands[0].dg - expected).abs() < 1e-9);
    assert!(r.offsets.is_empty() && r.cycles.is_empty());

    let dir = tempfile::tempdir().unwrap();
    write_all(dir.path(), &r).unwrap();
    let (_, rows) = read_csv(&dir.path().join("results/edges.csv"));
    assert_eq!(rows[0]["ligand_b"], "");
    assert_eq!(rows[0]["unit"], "kJ/mol");
    assert!((num(&rows[0], "corrections") - (-release)).abs() < 1e-5);
    let html = std::fs::read_to_string(dir.path().join("report/index.html")).unwrap();
    assert!(
        !html.contains("Network: edge colour"),
        "no network for absolute campaigns"
    );
    assert!(html.contains("Cycles per ligand"));
}

#[test]
fn ti_area_sums_over_lambda_components() {
    use legwork::report::plots::trapezoid;
    use legwork::report::WindowSummary;
    // Trapezoid rule by hand: component a, λ 0 → 1 with dU/dλ 2 → 4: area 3;
    // component b, λ 0 → 0.5 → 1 with 1, 1, 3: 0.5 + 1 = 1.5. Total 4.5.
    let w = |c: &str, lambda: f64, dudl_mean: f64| WindowSummary {
        lambda,
        component: Some(c.into()),
        dudl_mean,
        dudl_sem: 0.1,
        frames: None,
        discarded: None,
        inefficiency: None,
    };
    let ws = [
        w("a", 0.0, 2.0),
        w("a", 1.0, 4.0),
        w("b", 0.0, 1.0),
        w("b", 0.5, 1.0),
        w("b", 1.0, 3.0),
    ];
    assert!((trapezoid(&ws) - 4.5).abs() < 1e-12);
}

#[test]
fn a_failed_write_leaves_nothing_half_written() {
    let dir = tempfile::tempdir().unwrap();
    // report/ cannot be created because a file is in the way.
    std::fs::write(dir.path().join("report"), "in the way").unwrap();
    let err = write_all(dir.path(), &fixture::results()).unwrap_err();
    assert!(err.to_string().contains("index.html"), "{err}");
    let left: Vec<_> = std::fs::read_dir(dir.path().join("results"))
        .map(|d| d.map(|e| e.unwrap().file_name()).collect())
        .unwrap_or_default();
    assert!(left.is_empty(), "files left behind: {left:?}");
}

#[test]
fn legwork_report_finds_the_root_from_the_campaign_file() {
    // The root defaults to a folder named after the campaign beside its file.
    let dir = tempfile::tempdir().unwrap();
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/campaigns/basic");
    for entry in walkdir::WalkDir::new(&src) {
        let entry = entry.unwrap();
        let to = dir.path().join(entry.path().strip_prefix(&src).unwrap());
        if entry.file_type().is_dir() {
            std::fs::create_dir_all(&to).unwrap();
        } else {
            std::fs::copy(entry.path(), &to).unwrap();
        }
    }
    let file = dir.path().join("campaign.yaml");
    let loaded = legwork::campaign::load(&file, &Default::default()).unwrap();
    write_all(&loaded.campaign.root, &fixture::results()).unwrap();
    std::fs::remove_file(loaded.campaign.root.join("report/index.html")).unwrap();
    Command::cargo_bin("legwork")
        .unwrap()
        .args(["report", file.to_str().unwrap()])
        .assert()
        .success();
    assert!(loaded.campaign.root.join("report/index.html").is_file());
}

#[test]
fn odd_inputs_still_render() {
    // Undefined numbers, a ragged overlap matrix, mismatched convergence series
    // and no measurements at all must not stop the page from being written.
    let mut r = fixture::results();
    r.ligands[0].dg = f64::NAN;
    r.legs[0].overlap.pop();
    r.legs[0].windows[3].lambda = f64::NAN;
    if let Some(c) = r.legs[1].convergence.as_mut() {
        c.reverse.truncate(3);
        c.forward_sigma.clear();
    }
    let dir = tempfile::tempdir().unwrap();
    write_all(dir.path(), &r).unwrap();
    r.measured.clear();
    r.statistics = None;
    for l in &mut r.ligands {
        l.measured = None;
    }
    write_all(dir.path(), &r).unwrap();
    let html = std::fs::read_to_string(dir.path().join("report/index.html")).unwrap();
    assert!(html.contains("No measured values"));
}

#[test]
fn leg_replica_from_a_real_estimate_is_in_the_campaign_unit() {
    use legwork::collect::{LegSamples, WindowSamples};
    use legwork::estimate::{estimate_leg, EstimateOptions, Method};
    use legwork::report::LegReplica;
    use legwork::units::{kt_in, EnergyUnit};
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};
    // Harmonic oscillators U_λ = ½ k_λ x² (reduced units), k_λ = 1 + 3λ: the exact
    // ΔG = ½ ln(k₁/k₀) = ½ ln 4 kT (Shirts & Chodera 2008, harmonic oscillator test).
    let lambdas = vec![0.0, 0.25, 0.5, 0.75, 1.0];
    let k = |l: f64| 1.0 + 3.0 * l;
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(9);
    let windows = lambdas
        .iter()
        .enumerate()
        .map(|(s, &l)| {
            let normal = Normal::new(0.0, 1.0 / k(l).sqrt()).unwrap();
            let xs: Vec<f64> = (0..1500).map(|_| normal.sample(&mut rng)).collect();
            let reduced = xs
                .iter()
                .flat_map(|x| lambdas.iter().map(move |&m| 0.5 * k(m) * x * x))
                .collect();
            let dudl = xs.iter().map(|x| 0.5 * 3.0 * x * x).collect();
            WindowSamples::from_reduced(s, 298.15, lambdas.clone(), reduced, dudl)
        })
        .collect();
    let est = estimate_leg(
        &LegSamples::from_windows(windows),
        &EstimateOptions::default(),
    )
    .unwrap();
    let unit = EnergyUnit::KcalPerMol;
    let r = LegReplica::from_estimate("ork-01+ork-02", "complex", 1, 1.0, &est, Method::Mbar, unit)
        .unwrap();
    let kt = kt_in(unit, 298.15);
    let mbar = est.estimates[&Method::Mbar];
    assert!((r.dg - mbar.delta_g * kt).abs() < 1e-12);
    assert!((r.sigma - mbar.sigma * kt).abs() < 1e-12);
    let exact = 0.5 * 4f64.ln() * kt;
    assert!(
        (r.dg - exact).abs() < 4.0 * r.sigma,
        "{} vs exact {exact} ± {}",
        r.dg,
        r.sigma
    );
    assert_eq!(r.methods.len(), est.estimates.len());
    assert!(r.methods.iter().any(|m| m.method == "mbar"));
    assert_eq!(r.windows.len(), 5);
    assert!(r
        .windows
        .iter()
        .all(|w| w.component.is_none() && w.frames == Some(1500)));
    // The TI area of the converted windows is the trapezoid TI estimate, in kcal/mol.
    let ti = est.estimates[&Method::Ti].delta_g * kt;
    assert!((legwork::report::plots::trapezoid(&r.windows) - ti).abs() < 1e-9);
    assert_eq!(r.overlap.len(), 5);
    assert!(r.convergence.is_some());
    assert!(
        LegReplica::from_estimate("x", "complex", 1, 1.0, &est, Method::TiSpline, unit).is_some()
            == est.estimates.contains_key(&Method::TiSpline)
    );
}
