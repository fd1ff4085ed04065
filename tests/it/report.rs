//! The results tables, summary.json, the terminal summary, the HTML report and
//! `legwork report` re-rendering, on a synthetic but realistic fixture.

use crate::report_fixture as fixture;

use assert_cmd::Command;
use legwork::analysis::Results;
use legwork::report::{self, print_summary, write_all};
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

/// The fixture written to a fresh folder.
fn written() -> (tempfile::TempDir, Results) {
    let dir = tempfile::tempdir().unwrap();
    let r = fixture::results();
    let w = write_all(dir.path(), &r).unwrap();
    assert_eq!(w.html, dir.path().join("report/index.html"));
    assert_eq!(w.files.len(), 7);
    (dir, r)
}

#[test]
fn every_table_is_written_and_summary_json_is_the_results_model() {
    let (dir, r) = written();
    for f in [
        "legs.csv",
        "edges.csv",
        "ligands.csv",
        "cycles.csv",
        "missing.csv",
        "summary.json",
    ] {
        assert!(dir.path().join("results").join(f).is_file(), "{f} missing");
    }
    let back: Results = report::load(dir.path()).unwrap();
    assert_eq!(back.edges.len(), r.edges.len());
    assert_eq!(back.campaign, "orrin-fixture");
}

#[test]
fn edges_csv_has_the_agreed_columns_and_values() {
    let (dir, r) = written();
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
}

#[test]
fn ligands_csv_is_ranked_with_a_centred_column() {
    let (dir, r) = written();
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
}

#[test]
fn legs_and_cycles_csv_have_one_row_per_leg_replica_and_closure() {
    let (dir, r) = written();
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
    assert!(html.contains("against λ — TI "));
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
    // The summary names the legs with estimator warnings, not just a count.
    let warned: Vec<String> = r
        .legs
        .iter()
        .filter(|l| !l.warnings.is_empty())
        .map(|l| format!("{}/{}/r{}", l.subject, l.leg, l.replica))
        .collect();
    assert!(!warned.is_empty(), "the fixture has legs with warnings");
    assert!(
        text.contains(&warned[0]),
        "the first leg with warnings ({}) is named:\n{text}",
        warned[0]
    );
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
    use legwork::analysis::{assemble, CampaignInfo, LegReplica};
    use legwork::cycle::{BoreschRestraint, CampaignKind, LegSpec};
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
        ti: None,
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
fn dudl_plot_names_the_reported_ti_value_not_a_recomputed_one() {
    // The analysis reports TI; the plot's title must show exactly that number.
    // Give the leg a TI value far from the area under its points, so a title
    // recomputed from the points would not match.
    let mut leg = fixture::results().legs[0].clone();
    leg.ti = Some(legwork::analysis::MethodValue {
        method: "ti".into(),
        dg: 12.345,
        sigma: 0.678,
    });
    let svg = legwork::report::plots::dudl(&leg, "kcal/mol")
        .unwrap()
        .unwrap();
    assert!(svg.contains("TI 12.35 ± 0.68 kcal/mol"), "title not found");
    leg.ti.as_mut().unwrap().method = "ti_spline".into();
    let svg = legwork::report::plots::dudl(&leg, "kcal/mol")
        .unwrap()
        .unwrap();
    assert!(svg.contains("TI (spline) 12.35 ± 0.68"));
    // No TI computed: the title gives no number at all.
    leg.ti = None;
    let svg = legwork::report::plots::dudl(&leg, "kcal/mol")
        .unwrap()
        .unwrap();
    assert!(!svg.contains(" ± "), "a TI value appeared from nowhere");
}

/// The text of every `<text>` element of an SVG drawn by plotters.
fn svg_texts(svg: &str) -> Vec<String> {
    svg.split("<text")
        .skip(1)
        .filter_map(|t| {
            let body = &t[t.find('>')? + 1..t.find("</text>")?];
            Some(body.trim().to_string())
        })
        .collect()
}

#[test]
fn overlap_cells_keep_the_leading_zero_and_dot_tiny_values() {
    use legwork::report::{overlap_label, overlap_text, OVERLAP_DOT};
    // The fixture's overlap rows are exp(-1.3 |i - j|), normalised; with 12
    // states the far corners are ~1e-7, the diagonal ~0.57.
    let leg = fixture::results().legs[0].clone();
    let svg = legwork::report::plots::overlap(&leg).unwrap().unwrap();
    let texts = svg_texts(&svg);
    let k = leg.overlap.len();
    let mut cells = 0;
    for row in &leg.overlap {
        for &v in row {
            // Expected spelling, worked out independently: two significant
            // figures as a fixed-point number (v ≥ 0.01) or a dot.
            let digits = if v >= 0.1 { 2 } else { 3 };
            let expected = if v < 0.01 {
                OVERLAP_DOT.to_string()
            } else {
                format!("{v:.digits$}")
            };
            assert_eq!(overlap_label(v), expected, "{v}");
            cells += 1;
        }
    }
    assert_eq!(cells, k * k);
    let numbers: Vec<&String> = texts.iter().filter(|t| t.starts_with("0.")).collect();
    let dots = texts.iter().filter(|t| *t == OVERLAP_DOT).count();
    let expect_numbers = leg.overlap.iter().flatten().filter(|&&v| v >= 0.01).count();
    // Key ticks are spelled like the cells; count the cells' labels only.
    assert!(numbers.len() >= expect_numbers, "{numbers:?}");
    assert!(dots >= k * k - expect_numbers, "{dots} dots");
    assert!(
        !texts.iter().any(|t| t.starts_with('.')),
        "a label without its leading zero: {texts:?}"
    );
    assert!(
        texts.iter().any(|t| t.contains("below")),
        "no key for the dot"
    );
    assert_eq!(overlap_text(0.00312), "3.1e-3");
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
    use legwork::analysis::LegReplica;
    use legwork::collect::{LegSamples, WindowSamples};
    use legwork::estimate::{estimate_leg, EstimateOptions, Method};
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
    // The TI value the ⟨dU/dλ⟩ plot names is the estimator's own trapezoid TI
    // (headline MBAR is not a TI method), converted to kcal/mol.
    let ti = r.ti.as_ref().expect("TI was computed");
    assert_eq!(ti.method, "ti");
    assert!((ti.dg - est.estimates[&Method::Ti].delta_g * kt).abs() < 1e-12);
    assert!((ti.sigma - est.estimates[&Method::Ti].sigma * kt).abs() < 1e-12);
    assert_eq!(r.overlap.len(), 5);
    assert!(r.convergence.is_some());
    let spline = LegReplica::from_estimate("x", "complex", 1, 1.0, &est, Method::TiSpline, unit);
    assert_eq!(
        spline.is_some(),
        est.estimates.contains_key(&Method::TiSpline)
    );
    if let Some(s) = spline {
        // A TI headline is the TI value shown.
        assert_eq!(s.ti.as_ref().map(|t| t.method.as_str()), Some("ti_spline"));
        assert_eq!(s.ti.unwrap().dg, s.dg);
    }
}

#[test]
fn text_from_the_campaign_is_escaped_on_the_page() {
    // Names and notes come from user files; the page's templates escape every
    // value (tera autoescape), so markup in them shows as text.
    let mut r = fixture::results();
    r.campaign = "<script>alert('x')</script> & co".into();
    r.warnings.push("ligand \"<b>bold</b>\" & friends".into());
    r.missing[0].note = "<i>late</i>".into();
    let html = legwork::report::html::render(&r).unwrap();
    for raw in ["<script", "<b>bold", "<i>late"] {
        assert!(!html.contains(raw), "{raw} reached the page unescaped");
    }
    assert!(
        html.contains("&lt;script&gt;alert("),
        "campaign name not escaped"
    );
    assert!(html.contains("&lt;b&gt;bold&lt;"), "warning not escaped");
    assert!(html.contains("&amp; co"));
    assert!(html.contains("&lt;i&gt;late&lt;"));
    // The plots stay inline SVG, not escaped text.
    assert!(html.matches("<svg").count() >= 3);
}
