//! report/index.html: one self-contained page (inline CSS and SVG, no scripts,
//! nothing fetched from anywhere).

use super::plots::{self, PlotError};
use super::results::{LegReplica, Results};
use crate::collect::experiment::IC50_NOTE;
use crate::network::stats::{Interval, Stats};
use crate::network::Offset;
use std::fmt::Write;

/// The cautions every report carries.
pub const CAUTION_PREDICTIONS: &str = "These are computed predictions, not measurements. They do not replace experimental validation: a ranking is only as good as the force field, the sampling and the set-up behind it, and the error bars cover statistical noise only.";
/// Cluster-use caution.
pub const CAUTION_CLUSTER: &str = "Campaigns like this one occupy many cluster nodes, sometimes for days. Follow your site's scheduler policies and fair-share rules, and start with a small campaign before a large one.";

/// Leg sections start open when there are at most this many leg replicas.
const OPEN_LEGS: usize = 12;
/// Above this many leg replicas, only the legs worth a look (estimator warnings,
/// low overlap, a flagged edge) get plots, so the page stays a reasonable size.
pub const LEG_PLOT_LIMIT: usize = 60;

fn esc(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            '\'' => o.push_str("&#39;"),
            c => o.push(c),
        }
    }
    o
}

fn f2(v: f64) -> String {
    if v.is_finite() {
        let s = format!("{v:.2}");
        // A value that rounds to zero prints as 0.00, never "-0.00".
        if s == "-0.00" {
            "0.00".into()
        } else {
            s
        }
    } else {
        "–".into()
    }
}

fn o2(v: Option<f64>) -> String {
    v.map(f2).unwrap_or_else(|| "–".into())
}

const STYLE: &str = r#"
:root { --ink:#1f2933; --muted:#66727f; --line:#dde1e5; --teal:#0f6e6a; --warn:#8a4b08; --bad:#b83227; --paper:#fbfaf7; }
* { box-sizing: border-box; }
body { margin:0; background:var(--paper); color:var(--ink); font:15px/1.5 system-ui, -apple-system, "Segoe UI", Roboto, sans-serif; }
main { max-width:1240px; margin:0 auto; padding:24px 28px 60px; }
h1 { font-size:26px; margin:0 0 4px; letter-spacing:-0.01em; }
h2 { font-size:19px; margin:36px 0 10px; padding-bottom:4px; border-bottom:2px solid var(--teal); }
h3 { font-size:16px; margin:0; display:inline; }
.meta { color:var(--muted); margin:0 0 18px; }
.caution { background:#fff7e8; border-left:5px solid #d99a1e; padding:12px 16px; margin:14px 0; }
.caution p { margin:4px 0; }
.warnings li { color:var(--warn); }
.row { display:flex; flex-wrap:wrap; gap:16px; align-items:flex-start; }
figure { margin:0; background:#fff; border:1px solid var(--line); border-radius:6px; padding:4px; }
figure svg { display:block; max-width:100%; height:auto; }
figcaption { color:var(--muted); font-size:13px; padding:4px 6px 2px; width:0; min-width:100%; }
table { border-collapse:collapse; background:#fff; font-variant-numeric:tabular-nums; margin:6px 0 10px; }
th, td { border-bottom:1px solid var(--line); padding:4px 10px; text-align:right; }
th { background:#eef3f2; font-weight:600; }
td.l, th.l { text-align:left; }
.flag { display:inline-block; background:#fbe3df; color:var(--bad); border-radius:3px; padding:0 5px; margin-right:3px; font-size:12px; }
.ok { color:#2f855a; } .bad { color:var(--bad); font-weight:600; }
details.inner { border:none; padding:0; margin:4px 0; }
details { background:#fff; border:1px solid var(--line); border-radius:6px; margin:10px 0; padding:8px 12px; }
summary { cursor:pointer; }
.small { font-size:13px; color:var(--muted); }
nav a { color:var(--teal); }
footer { margin-top:40px; color:var(--muted); font-size:13px; }
"#;

fn interval_cell(i: &Option<Interval>) -> String {
    match i {
        Some(i) => format!(
            "{} <span class=\"small\">[{}, {}]</span>",
            f2(i.value),
            f2(i.low),
            f2(i.high)
        ),
        None => "–".into(),
    }
}

fn stats_row(out: &mut String, what: &str, s: &Stats) {
    let _ = writeln!(
        out,
        "<tr><td class=\"l\">{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
        esc(what),
        s.n,
        interval_cell(&s.rmse),
        interval_cell(&s.mue),
        interval_cell(&s.pearson_r),
        interval_cell(&s.r2),
        interval_cell(&s.kendall_tau)
    );
}

fn figure(out: &mut String, svg: &str, caption: &str) {
    // A <title> inside the SVG names the plot for screen readers and tooltips.
    let svg = match svg.find('>') {
        Some(i) if svg.starts_with("<svg") => format!(
            "{} role=\"img\"><title>{}</title>{}",
            &svg[..i],
            esc(caption),
            &svg[i + 1..]
        ),
        _ => svg.to_string(),
    };
    let _ = writeln!(
        out,
        "<figure>{svg}<figcaption>{}</figcaption></figure>",
        esc(caption)
    );
}

fn windows_table(out: &mut String, l: &LegReplica) {
    if l.windows.is_empty() {
        return;
    }
    let multi = l.windows.iter().any(|w| w.component.is_some());
    out.push_str("<details class=\"inner\"><summary class=\"small\">per-window diagnostics</summary><table><tr>");
    if multi {
        out.push_str("<th class=\"l\">component</th>");
    }
    out.push_str("<th>λ</th><th>⟨dU/dλ⟩</th><th>SEM</th><th>frames</th><th>discarded</th><th>inefficiency g</th></tr>\n");
    let opt_u = |v: Option<u64>| v.map(|v| v.to_string()).unwrap_or_else(|| "–".into());
    for w in &l.windows {
        out.push_str("<tr>");
        if multi {
            let _ = write!(
                out,
                "<td class=\"l\">{}</td>",
                esc(w.component.as_deref().unwrap_or(""))
            );
        }
        let _ = writeln!(
            out,
            "<td>{:.3}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            w.lambda,
            f2(w.dudl_mean),
            f2(w.dudl_sem),
            opt_u(w.frames),
            opt_u(w.discarded),
            o2(w.inefficiency)
        );
    }
    out.push_str("</table></details>\n");
}

fn leg_section(
    out: &mut String,
    r: &Results,
    l: &LegReplica,
    open: bool,
    with_plots: bool,
) -> Result<(), PlotError> {
    let unit = r.unit.to_string();
    let overlap = l
        .min_adjacent_overlap
        .map(|o| {
            let cls = if o < super::assemble::MIN_OVERLAP {
                "bad"
            } else {
                "ok"
            };
            format!(" · min adjacent overlap <span class=\"{cls}\">{o:.3}</span>")
        })
        .unwrap_or_default();
    let _ = writeln!(
        out,
        "<details{}><summary><h3>{} / {} / replica {}</h3> — ΔG {} ± {} {}{} {}</summary>",
        if open { " open" } else { "" },
        esc(&l.subject),
        esc(&l.leg),
        l.replica,
        f2(l.dg),
        f2(l.sigma),
        esc(&unit),
        overlap,
        if l.warnings.is_empty() {
            String::new()
        } else {
            format!(
                "<span class=\"flag\">{} warning(s)</span>",
                l.warnings.len()
            )
        }
    );
    if !l.methods.is_empty() {
        out.push_str("<table><tr><th class=\"l\">estimator</th><th>ΔG</th><th>σ</th></tr>\n");
        for m in &l.methods {
            let _ = writeln!(
                out,
                "<tr><td class=\"l\">{}</td><td>{}</td><td>{}</td></tr>",
                esc(&m.method),
                f2(m.dg),
                f2(m.sigma)
            );
        }
        out.push_str("</table>\n");
    }
    if !l.warnings.is_empty() {
        out.push_str("<ul class=\"warnings\">");
        for w in &l.warnings {
            let _ = write!(out, "<li>{}</li>", esc(w));
        }
        out.push_str("</ul>\n");
    }
    if !with_plots {
        windows_table(out, l);
        out.push_str("<p class=\"small\">Plots left out to keep the page small (many legs, nothing flagged here); the numbers are in results/summary.json.</p></details>\n");
        return Ok(());
    }
    out.push_str("<div class=\"row\">\n");
    if let Some(svg) = plots::overlap(l)? {
        figure(out, &svg, "Overlap between states (colour on a √ scale). Neighbouring states should overlap well above 0.03 (rule of thumb).");
    }
    if let Some(svg) = plots::dudl(l, &unit)? {
        figure(
            out,
            &svg,
            "Mean dU/dλ per window with ±SEM; the shaded area is the trapezoid TI estimate.",
        );
    }
    if let Some(c) = &l.convergence {
        if let Some(svg) = plots::convergence(c, &unit)? {
            figure(out, &svg, "ΔG from the first (forward) or last (reverse) part of every window. Curves that meet early suggest converged sampling.");
        }
    }
    out.push_str("</div>\n");
    windows_table(out, l);
    out.push_str("</details>\n");
    Ok(())
}

/// Renders the whole page.
pub fn render(r: &Results) -> Result<String, PlotError> {
    let unit = esc(r.unit.as_str());
    let mut o = String::with_capacity(256 * 1024);
    let _ = writeln!(
        o,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n<title>{} — legwork results</title>\n<style>{STYLE}</style>\n</head>\n<body>\n<main>",
        esc(&r.campaign)
    );
    let _ = writeln!(
        o,
        "<h1>{}</h1>\n<p class=\"meta\">{} campaign · energies in {unit} · {} K · headline estimator {} · {} leg replicas, {} {}, {} ligands{}</p>",
        esc(&r.campaign),
        r.kind.as_str(),
        r.temperature_k,
        esc(&r.estimator),
        r.legs.len(),
        r.edges.len(),
        if r.edges.iter().any(|e| e.ligand_b.is_some()) {
            "edges"
        } else {
            "ligand cycles"
        },
        r.ligands.len(),
        r.generated_at
            .as_deref()
            .map(|t| format!(" · assembled {}", esc(t)))
            .unwrap_or_default()
    );
    o.push_str("<nav class=\"small\"><a href=\"#overview\">overview</a> · <a href=\"#ligands\">ligands</a> · <a href=\"#edges\">edges</a> · <a href=\"#cycles\">cycles</a> · <a href=\"#legs\">legs</a></nav>\n");
    let _ = writeln!(
        o,
        "<section class=\"caution\" id=\"cautions\"><strong>Cautions.</strong>\n<p>{}</p>\n<p>{}</p>\n<p>{}</p>\n</section>",
        esc(CAUTION_PREDICTIONS),
        if r.uses_ic50() {
            esc(IC50_NOTE)
        } else {
            "Measured values given as IC50 would be taken as inhibition constants (ΔG = RT ln(IC50 / 1 M)), an approximation; none were used here.".into()
        },
        esc(CAUTION_CLUSTER)
    );
    let leg_warnings: usize = r.legs.iter().map(|l| l.warnings.len()).sum();
    if !r.warnings.is_empty() || leg_warnings > 0 {
        o.push_str("<h2 id=\"warnings\">Warnings</h2>\n<ul class=\"warnings\">\n");
        for w in &r.warnings {
            let _ = writeln!(o, "<li>{}</li>", esc(w));
        }
        if leg_warnings > 0 {
            let _ = writeln!(
                o,
                "<li>{leg_warnings} estimator warning(s) on individual legs; see the legs below.</li>"
            );
        }
        o.push_str("</ul>\n");
    }

    o.push_str("<h2 id=\"overview\">Overview</h2>\n<div class=\"row\">\n");
    if r.edges.iter().any(|e| e.ligand_b.is_some()) && !r.ligands.is_empty() {
        figure(&mut o, &plots::network(r)?, "Each line is an edge, coloured by how far its own ΔΔG is from the network's reconciled value, in units of its σ.");
    }
    match plots::predicted_vs_measured(r)? {
        Some(svg) => figure(&mut o, &svg, "Each point is a ligand with a measurement; the diagonal is perfect agreement."),
        None => o.push_str("<p class=\"small\">No measured values: the comparison with experiment is not shown.</p>\n"),
    }
    if let Some(svg) = plots::edges_vs_measured(r)? {
        figure(&mut o, &svg, "Each point is an edge with both ligands measured: its own ΔΔG (before the network) against the measured difference.");
    }
    o.push_str("</div>\n");

    if let Some(s) = &r.statistics {
        let _ = writeln!(o, "<h2 id=\"experiment\">Against experiment</h2>\n<p class=\"small\">Bootstrap 95% intervals in brackets ({} resamples, seed {}). Errors in {unit}. Per-ligand errors depend on the offset: when it is fixed by the measured mean, RMSE and MUE measure the scatter about that mean; per-edge errors do not depend on it.</p>", s.ligands.resamples, s.ligands.seed);
        o.push_str("<table><tr><th class=\"l\">over</th><th>n</th><th>RMSE</th><th>MUE</th><th>Pearson R</th><th>R²</th><th>Kendall τ</th></tr>\n");
        stats_row(&mut o, "ligands (ΔG)", &s.ligands);
        stats_row(&mut o, "edges (ΔΔG)", &s.edges);
        o.push_str("</table>\n");
        if !s.anchored.is_empty() {
            let names: Vec<String> = s.anchored.iter().map(|a| esc(a)).collect();
            let _ = writeln!(o, "<p class=\"small\">Not scored: {} (the only measured ligand of its part of the network, so its ΔG equals its measurement by construction).</p>", names.join(", "));
        }
    }

    let offset = match r.offsets.as_slice() {
        [] => String::new(),
        [Offset::Measured { count }] => {
            format!("The offset is fixed by the mean of {count} measured values.")
        }
        [Offset::Reference { ligand }] => format!("ΔG are relative to {} (set to 0).", esc(ligand)),
        [Offset::SeriesMean] => "ΔG are relative to the series mean (set to 0).".into(),
        many => format!(
            "The network has {} disconnected parts; compare ΔG only within a part.",
            many.len()
        ),
    };
    let _ = writeln!(
        o,
        "<h2 id=\"ligands\">Ligands</h2>\n<p class=\"small\">Most favourable first. {offset}</p>"
    );
    o.push_str("<table><tr><th>rank</th><th class=\"l\">ligand</th><th>ΔG</th><th>σ</th><th>measured</th><th>predicted − measured</th></tr>\n");
    for (i, l) in r.ranked_ligands().iter().enumerate() {
        let _ = writeln!(
            o,
            "<tr><td>{}</td><td class=\"l\">{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            i + 1,
            esc(&l.ligand),
            f2(l.dg),
            if l.anchor.is_some() { "reference".to_string() } else { f2(l.sigma) },
            o2(l.measured),
            o2(l.measured.map(|m| l.dg - m))
        );
    }
    o.push_str("</table>\n");

    let relative = r.edges.iter().any(|e| e.ligand_b.is_some());
    let _ = writeln!(
        o,
        "<h2 id=\"edges\">{}</h2>\n<p class=\"small\">σ = √(σ<sub>replicas</sub>² + σ<sub>spread</sub>²): the replicas' own errors and the scatter between replicas, both shown.</p>",
        if relative { "Edges" } else { "Cycles per ligand" }
    );
    o.push_str("<table><tr><th class=\"l\">subject</th><th>ΔΔG</th><th>σ</th><th>σ replicas</th><th>σ spread</th><th>replicas</th><th class=\"l\">per replica</th><th>corrections</th><th>network</th><th>residual</th><th class=\"l\">flags</th></tr>\n");
    for e in r.worst_edges() {
        let flags: String = e
            .flags
            .iter()
            .map(|f| format!("<span class=\"flag\">{}</span>", f.as_str()))
            .collect();
        let _ = writeln!(
            o,
            "<tr><td class=\"l\">{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td class=\"l small\">{}</td><td>{}</td><td>{}</td><td>{}</td><td class=\"l\">{}</td></tr>",
            esc(&e.subject),
            f2(e.ddg),
            f2(e.sigma),
            f2(e.sigma_replicas),
            f2(e.sigma_spread),
            e.legs.iter().map(|l| l.combined.n).min().unwrap_or(0),
            e.replicas
                .iter()
                .map(|x| f2(x.ddg))
                .collect::<Vec<_>>()
                .join(", "),
            f2(e.corrections.iter().map(|c| c.value).sum()),
            o2(e.fitted),
            o2(e.residual),
            flags
        );
    }
    o.push_str("</table>\n");

    if !r.cycles.is_empty() || !r.hysteresis.is_empty() {
        o.push_str("<h2 id=\"cycles\">Cycle closure and hysteresis</h2>\n<p class=\"small\">Around a closed cycle the ΔΔG sum to zero for exact free energies; an edge run both ways should give forward + reverse = 0.</p>\n");
        o.push_str("<table><tr><th class=\"l\">cycle</th><th>sum</th><th>σ</th><th class=\"l\">within 2σ</th></tr>\n");
        for c in &r.cycles {
            let mut path = c.ligands.clone();
            path.extend(c.ligands.first().cloned());
            let _ = writeln!(
                o,
                "<tr><td class=\"l\">{}</td><td>{}</td><td>{}</td><td class=\"l\">{}</td></tr>",
                esc(&path.join(" → ")),
                f2(c.closure),
                f2(c.sigma),
                if c.flagged {
                    "<span class=\"bad\">no</span>"
                } else {
                    "<span class=\"ok\">yes</span>"
                }
            );
        }
        for h in &r.hysteresis {
            let _ = writeln!(
                o,
                "<tr><td class=\"l\">{} ⇄ {}</td><td>{}</td><td>{}</td><td class=\"l\">{}</td></tr>",
                esc(&h.a),
                esc(&h.b),
                f2(h.hysteresis),
                f2(h.sigma),
                if h.flagged { "<span class=\"bad\">no</span>" } else { "<span class=\"ok\">yes</span>" }
            );
        }
        o.push_str("</table>\n");
    }

    if !r.missing.is_empty() {
        o.push_str("<h2 id=\"missing\">Not finished</h2>\n<table><tr><th class=\"l\">leg replica</th><th>windows done</th><th class=\"l\">note</th></tr>\n");
        for m in &r.missing {
            let _ = writeln!(
                o,
                "<tr><td class=\"l\">{}/{}/r{}</td><td>{} of {}</td><td class=\"l\">{}</td></tr>",
                esc(&m.subject),
                esc(&m.leg),
                m.replica,
                m.windows_done,
                m.windows_total,
                esc(&m.note)
            );
        }
        o.push_str("</table>\n");
    }

    if !r.legs.is_empty() {
        o.push_str("<h2 id=\"legs\">Legs</h2>\n");
        let many = r.legs.len() > LEG_PLOT_LIMIT;
        // Group by subject (in order of first appearance), then leg, then replica.
        let mut order: Vec<&str> = Vec::new();
        for l in &r.legs {
            if !order.contains(&l.subject.as_str()) {
                order.push(&l.subject);
            }
        }
        let mut legs: Vec<&LegReplica> = r.legs.iter().collect();
        legs.sort_by_key(|l| {
            (
                order.iter().position(|s| *s == l.subject),
                l.leg.clone(),
                l.replica,
            )
        });
        for (i, l) in legs.into_iter().enumerate() {
            let open = i == 0 || r.legs.len() <= OPEN_LEGS;
            let worth = !l.warnings.is_empty()
                || l.min_adjacent_overlap
                    .is_some_and(|o| o < super::assemble::MIN_OVERLAP)
                || r.edges
                    .iter()
                    .any(|e| e.subject == l.subject && !e.flags.is_empty());
            leg_section(&mut o, r, l, open, i == 0 || !many || worth)?;
        }
    }
    let _ = writeln!(
        o,
        "<footer>Written by legwork {}. Tables: results/*.csv; everything on this page: results/summary.json.</footer>\n</main>\n</body>\n</html>",
        env!("CARGO_PKG_VERSION")
    );
    Ok(o)
}
