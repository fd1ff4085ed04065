//! results/*.csv and results/summary.json, rendered in memory.

use crate::analysis::Results;
use std::collections::BTreeSet;

fn num(v: f64) -> String {
    if v.is_finite() {
        format!("{:.6}", v + 0.0)
    } else {
        String::new()
    }
}

fn opt(v: Option<f64>) -> String {
    v.map(num).unwrap_or_default()
}

fn to_csv(header: &[String], rows: Vec<Vec<String>>) -> String {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(header).expect("in-memory write");
    for r in rows {
        w.write_record(&r).expect("in-memory write");
    }
    String::from_utf8(w.into_inner().expect("in-memory flush")).expect("CSV of UTF-8 fields")
}

fn header(names: &[&str]) -> Vec<String> {
    names.iter().map(|s| s.to_string()).collect()
}

/// `results/legs.csv`: one row per leg replica, the headline estimator first,
/// then every estimator's ΔG and σ.
pub fn legs_csv(r: &Results) -> String {
    let methods: BTreeSet<&str> = r
        .legs
        .iter()
        .flat_map(|l| l.methods.iter().map(|m| m.method.as_str()))
        .collect();
    let mut h = header(&[
        "subject",
        "leg",
        "replica",
        "sign",
        "method",
        "dg",
        "sigma",
        "min_overlap",
        "windows",
    ]);
    for m in &methods {
        h.push(format!("dg_{m}"));
        h.push(format!("sigma_{m}"));
    }
    h.extend(header(&["unit", "warnings"]));
    let rows = r
        .legs
        .iter()
        .map(|l| {
            let mut row = vec![
                l.subject.clone(),
                l.leg.clone(),
                l.replica.to_string(),
                format!("{}", l.sign),
                r.estimator.clone(),
                num(l.dg),
                num(l.sigma),
                opt(l.min_adjacent_overlap),
                l.windows.len().to_string(),
            ];
            for m in &methods {
                let v = l.methods.iter().find(|x| x.method == *m);
                row.push(opt(v.map(|v| v.dg)));
                row.push(opt(v.map(|v| v.sigma)));
            }
            row.push(r.unit.to_string());
            row.push(l.warnings.join("; "));
            row
        })
        .collect();
    to_csv(&h, rows)
}

/// `results/edges.csv`: one row per closed cycle.
pub fn edges_csv(r: &Results) -> String {
    let h = header(&[
        "subject",
        "ligand_a",
        "ligand_b",
        "ddg",
        "sigma",
        "sigma_replicas",
        "sigma_spread",
        "replicas",
        "replica_ddg",
        "corrections",
        "fitted",
        "residual",
        "flags",
        "unit",
    ]);
    let rows = r
        .edges
        .iter()
        .map(|e| {
            vec![
                e.subject.clone(),
                e.ligand_a.clone(),
                e.ligand_b.clone().unwrap_or_default(),
                num(e.ddg),
                num(e.sigma),
                num(e.sigma_replicas),
                num(e.sigma_spread),
                e.legs
                    .iter()
                    .map(|l| l.combined.n)
                    .min()
                    .unwrap_or(0)
                    .to_string(),
                e.replicas
                    .iter()
                    .map(|x| num(x.ddg))
                    .collect::<Vec<_>>()
                    .join(";"),
                num(e.corrections.iter().map(|c| c.value).sum()),
                opt(e.fitted),
                opt(e.residual),
                e.flags
                    .iter()
                    .map(|f| f.as_str())
                    .collect::<Vec<_>>()
                    .join(";"),
                r.unit.to_string(),
            ]
        })
        .collect();
    to_csv(&h, rows)
}

/// `results/ligands.csv`: ranked, most favourable ΔG first.
pub fn ligands_csv(r: &Results) -> String {
    let h = header(&[
        "ligand",
        "dg",
        "sigma",
        "dg_minus_mean",
        "measured",
        "rank",
        "component",
        "unit",
    ]);
    // ΔG relative to the mean of its connected part: independent of how the
    // offset was fixed, so comparable with any other gauge.
    let mean_of = |c: usize| {
        let v: Vec<f64> = r
            .ligands
            .iter()
            .filter(|l| l.component == c && l.dg.is_finite())
            .map(|l| l.dg)
            .collect();
        v.iter().sum::<f64>() / v.len().max(1) as f64
    };
    let rows = r
        .ranked_ligands()
        .iter()
        .enumerate()
        .map(|(i, l)| {
            vec![
                l.ligand.clone(),
                num(l.dg),
                match l.anchor {
                    Some(_) => "reference".to_string(),
                    None => num(l.sigma),
                },
                num(l.dg - mean_of(l.component)),
                opt(l.measured),
                (i + 1).to_string(),
                l.component.to_string(),
                r.unit.to_string(),
            ]
        })
        .collect();
    to_csv(&h, rows)
}

/// `results/cycles.csv`: basis cycles and hysteresis pairs.
pub fn cycles_csv(r: &Results) -> String {
    let h = header(&["kind", "ligands", "value", "sigma", "flagged", "unit"]);
    let mut rows: Vec<Vec<String>> = r
        .cycles
        .iter()
        .map(|c| {
            let mut path = c.ligands.clone();
            path.extend(c.ligands.first().cloned());
            vec![
                "cycle".into(),
                path.join(">"),
                num(c.closure),
                num(c.sigma),
                c.flagged.to_string(),
                r.unit.to_string(),
            ]
        })
        .collect();
    rows.extend(r.hysteresis.iter().map(|h| {
        vec![
            "hysteresis".into(),
            format!("{}>{}>{}", h.a, h.b, h.a),
            num(h.hysteresis),
            num(h.sigma),
            h.flagged.to_string(),
            r.unit.to_string(),
        ]
    }));
    to_csv(&h, rows)
}

/// `results/missing.csv`: one row per leg replica without a result (status
/// `unfinished` or `failed`, with the reason) and one per subject left out of
/// the results (status `left_out`, leg and replica empty). Only the header when
/// nothing is missing.
pub fn missing_csv(r: &Results) -> String {
    let h = header(&[
        "subject",
        "leg",
        "replica",
        "status",
        "windows_done",
        "windows_total",
        "reason",
    ]);
    let mut rows: Vec<Vec<String>> = r
        .missing
        .iter()
        .map(|m| {
            vec![
                m.subject.clone(),
                m.leg.clone(),
                m.replica.to_string(),
                m.status.as_str().to_string(),
                m.windows_done.to_string(),
                m.windows_total.to_string(),
                m.note.clone(),
            ]
        })
        .collect();
    rows.extend(r.left_out.iter().map(|o| {
        vec![
            o.subject.clone(),
            String::new(),
            String::new(),
            "left_out".to_string(),
            String::new(),
            String::new(),
            o.reason.clone(),
        ]
    }));
    to_csv(&h, rows)
}

/// `results/summary.json`: the whole [`Results`], pretty-printed.
pub fn summary_json(r: &Results) -> String {
    let mut s = serde_json::to_string_pretty(r).expect("Results serialises");
    s.push('\n');
    s
}
