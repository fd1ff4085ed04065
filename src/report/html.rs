//! report/index.html: one self-contained page (inline CSS and SVG, no scripts,
//! nothing fetched from anywhere), rendered from the tera templates under
//! `templates/report/` (embedded in the binary) with autoescape on. The
//! functions here only shape [`Results`] into the page's context, one section
//! each; the templates hold the markup.

use super::format::{f2, o2, overlap_text, OVERLAP_FLOOR};
use super::plots::{self, PlotError};
use crate::analysis::{LegReplica, Results, MIN_OVERLAP};
use crate::collect::experiment::IC50_NOTE;
use crate::network::stats::{Interval, Stats};
use crate::network::Offset;
use serde::Serialize;
use std::sync::OnceLock;

/// The cautions every report carries.
pub const CAUTION_PREDICTIONS: &str = "These are computed predictions, not measurements. They do not replace experimental validation: a ranking is only as good as the force field, the sampling and the set-up behind it, and the error bars cover statistical noise only.";
/// Cluster-use caution.
pub const CAUTION_CLUSTER: &str = "Campaigns like this one occupy many cluster nodes, sometimes for days. Follow your site's scheduler policies and fair-share rules, and start with a small campaign before a large one.";
/// The IC50 caution when no IC50 was used.
const NO_IC50: &str = "Measured values given as IC50 would be taken as inhibition constants (ΔG = RT ln(IC50 / 1 M)), an approximation; none were used here.";

/// Leg sections start open when there are at most this many leg replicas.
const OPEN_LEGS: usize = 12;
/// Above this many leg replicas, only the legs worth a look (estimator warnings,
/// low overlap, a flagged edge) get plots, so the page stays a reasonable size.
pub const LEG_PLOT_LIMIT: usize = 60;

/// Why the page could not be rendered.
#[derive(Debug, thiserror::Error)]
pub enum HtmlError {
    /// A plot failed.
    #[error(transparent)]
    Plot(#[from] PlotError),
    /// A template failed (a bug in legwork's templates).
    #[error("rendering the report's HTML failed: {0}")]
    Template(String),
}

impl From<tera::Error> for HtmlError {
    fn from(e: tera::Error) -> Self {
        let mut message = e.to_string();
        let mut source = std::error::Error::source(&e);
        while let Some(s) = source {
            message.push_str(": ");
            message.push_str(&s.to_string());
            source = s.source();
        }
        HtmlError::Template(message)
    }
}

/// The report's templates, parsed once. Names end in `.html`, so tera escapes
/// every value they print unless a template marks it `safe`.
fn templates() -> Result<&'static tera::Tera, HtmlError> {
    static TERA: OnceLock<Result<tera::Tera, String>> = OnceLock::new();
    let parsed = TERA.get_or_init(|| {
        let mut t = tera::Tera::default();
        t.add_raw_templates([
            (
                "macros.html",
                include_str!("../../templates/report/macros.html.tera"),
            ),
            (
                "leg.html",
                include_str!("../../templates/report/leg.html.tera"),
            ),
            (
                "costs.html",
                include_str!("../../templates/report/costs.html.tera"),
            ),
            (
                "index.html",
                include_str!("../../templates/report/index.html.tera"),
            ),
        ])
        .map_err(|e| HtmlError::from(e).to_string())?;
        Ok(t)
    });
    parsed.as_ref().map_err(|m| HtmlError::Template(m.clone()))
}

/// Renders the whole page.
///
/// # Errors
///
/// A plot that cannot be drawn, or (a bug) a template that does not render.
pub fn render(r: &Results) -> Result<String, HtmlError> {
    let page = Page::new(r)?;
    let ctx = tera::Context::from_serialize(&page)?;
    Ok(templates()?.render("index.html", &ctx)?)
}

/// An inline SVG plot, split after `<svg …` so the template can add its role and
/// a `<title>` (for screen readers and tooltips) from the escaped caption.
#[derive(Serialize)]
struct Figure {
    head: String,
    rest: String,
    caption: String,
}

impl Figure {
    fn new(svg: String, caption: &str) -> Figure {
        let (head, rest) = match svg.find('>') {
            Some(i) if svg.starts_with("<svg") => (svg[..i].to_string(), svg[i + 1..].to_string()),
            _ => (String::from("<svg"), format!(">{svg}</svg>")),
        };
        Figure {
            head,
            rest,
            caption: caption.to_string(),
        }
    }
}

/// The page's context: every number already spelled, every text unescaped
/// (the template escapes it).
#[derive(Serialize)]
struct Page {
    campaign: String,
    kind: &'static str,
    unit: String,
    temperature_k: f64,
    estimator: String,
    n_legs: usize,
    n_edges: usize,
    n_ligands: usize,
    relative: bool,
    generated_at: Option<String>,
    style: &'static str,
    cautions: Vec<&'static str>,
    warnings: Vec<String>,
    leg_warnings: usize,
    overview: Vec<Figure>,
    measured: bool,
    statistics: Option<StatisticsView>,
    offset: String,
    ligands: Vec<LigandRow>,
    edges: Vec<EdgeRow>,
    closures: Vec<ClosureRow>,
    missing: Vec<crate::analysis::MissingWork>,
    left_out: Vec<crate::analysis::LeftOut>,
    notes: Vec<crate::analysis::WorkNote>,
    legs: Vec<LegView>,
    overlap_floor: String,
    version: &'static str,
    costs: Option<super::cost_section::CostView>,
}

impl Page {
    fn new(r: &Results) -> Result<Page, HtmlError> {
        let relative = r.edges.iter().any(|e| e.ligand_b.is_some());
        let mut warnings = r.warnings.clone();
        let (overview, measured) = overview(r, relative).unwrap_or_else(|e| {
            warnings.push(format!("the overview plots could not be drawn: {e}"));
            (Vec::new(), false)
        });
        Ok(Page {
            campaign: r.campaign.clone(),
            kind: r.kind.as_str(),
            unit: r.unit.to_string(),
            temperature_k: r.temperature_k,
            estimator: r.estimator.clone(),
            n_legs: r.legs.len(),
            n_edges: r.edges.len(),
            n_ligands: r.ligands.len(),
            relative,
            generated_at: r.generated_at.clone(),
            style: include_str!("../../templates/report/style.css"),
            cautions: vec![
                CAUTION_PREDICTIONS,
                if r.uses_ic50() { IC50_NOTE } else { NO_IC50 },
                CAUTION_CLUSTER,
            ],
            warnings,
            leg_warnings: r.legs.iter().map(|l| l.warnings.len()).sum(),
            overview,
            measured,
            statistics: r.statistics.as_ref().map(|s| StatisticsView {
                resamples: s.ligands.resamples,
                seed: s.ligands.seed,
                rows: vec![
                    StatsRow::new("ligands (ΔG)", &s.ligands),
                    StatsRow::new("edges (ΔΔG)", &s.edges),
                ],
                anchored: s.anchored.clone(),
            }),
            offset: offset_note(&r.offsets),
            ligands: ligand_rows(r),
            edges: edge_rows(r),
            closures: closure_rows(r),
            missing: r.missing.clone(),
            left_out: r.left_out.clone(),
            notes: r.notes.clone(),
            legs: leg_views(r)?,
            overlap_floor: OVERLAP_FLOOR.to_string(),
            version: env!("CARGO_PKG_VERSION"),
            costs: super::cost_section::cost_view(r.costs.as_ref()),
        })
    }
}

/// The overview plots, and whether any ligand had a measurement to plot.
fn overview(r: &Results, relative: bool) -> Result<(Vec<Figure>, bool), HtmlError> {
    let mut figures = Vec::new();
    if relative && !r.ligands.is_empty() {
        figures.push(Figure::new(plots::network(r)?, "Each line is an edge, coloured by how far its own ΔΔG is from the network's reconciled value, in units of its σ."));
    }
    let measured = plots::predicted_vs_measured(r)?;
    let any = measured.is_some();
    if let Some(svg) = measured {
        figures.push(Figure::new(
            svg,
            "Each point is a ligand with a measurement; the diagonal is perfect agreement.",
        ));
    }
    if let Some(svg) = plots::edges_vs_measured(r)? {
        figures.push(Figure::new(svg, "Each point is an edge with both ligands measured: its own ΔΔG (before the network) against the measured difference."));
    }
    Ok((figures, any))
}

#[derive(Serialize)]
struct StatisticsView {
    resamples: usize,
    seed: u64,
    rows: Vec<StatsRow>,
    /// Ligands left out: each is the only measured ligand of its part of the
    /// network, so its ΔG equals its measurement by construction.
    anchored: Vec<String>,
}

#[derive(Serialize)]
struct IntervalView {
    value: String,
    low: String,
    high: String,
}

#[derive(Serialize)]
struct StatsRow {
    what: &'static str,
    n: usize,
    rmse: Option<IntervalView>,
    mue: Option<IntervalView>,
    pearson_r: Option<IntervalView>,
    r2: Option<IntervalView>,
    kendall_tau: Option<IntervalView>,
}

impl StatsRow {
    fn new(what: &'static str, s: &Stats) -> StatsRow {
        let i = |i: &Option<Interval>| {
            i.map(|i| IntervalView {
                value: f2(i.value),
                low: f2(i.low),
                high: f2(i.high),
            })
        };
        StatsRow {
            what,
            n: s.n,
            rmse: i(&s.rmse),
            mue: i(&s.mue),
            pearson_r: i(&s.pearson_r),
            r2: i(&s.r2),
            kendall_tau: i(&s.kendall_tau),
        }
    }
}

/// How the ligands' common offset was fixed, in a sentence.
fn offset_note(offsets: &[Offset]) -> String {
    match offsets {
        [] => String::new(),
        [Offset::Measured { count }] => {
            format!("The offset is fixed by the mean of {count} measured values.")
        }
        [Offset::Reference { ligand }] => format!("ΔG are relative to {ligand} (set to 0)."),
        [Offset::SeriesMean] => "ΔG are relative to the series mean (set to 0).".into(),
        many => format!(
            "The network has {} disconnected parts; compare ΔG only within a part.",
            many.len()
        ),
    }
}

#[derive(Serialize)]
struct LigandRow {
    ligand: String,
    dg: String,
    sigma: String,
    measured: String,
    error: String,
}

fn ligand_rows(r: &Results) -> Vec<LigandRow> {
    r.ranked_ligands()
        .into_iter()
        .map(|l| LigandRow {
            ligand: l.ligand.clone(),
            dg: f2(l.dg),
            sigma: if l.anchor.is_some() {
                "reference".to_string()
            } else {
                f2(l.sigma)
            },
            measured: o2(l.measured),
            error: o2(l.measured.map(|m| l.dg - m)),
        })
        .collect()
}

#[derive(Serialize)]
struct EdgeRow {
    subject: String,
    ddg: String,
    sigma: String,
    sigma_replicas: String,
    sigma_spread: String,
    replicas: usize,
    per_replica: String,
    corrections: String,
    fitted: String,
    residual: String,
    flags: Vec<&'static str>,
}

fn edge_rows(r: &Results) -> Vec<EdgeRow> {
    r.worst_edges()
        .into_iter()
        .map(|e| EdgeRow {
            subject: e.subject.clone(),
            ddg: f2(e.ddg),
            sigma: f2(e.sigma),
            sigma_replicas: f2(e.sigma_replicas),
            sigma_spread: f2(e.sigma_spread),
            replicas: e.legs.iter().map(|l| l.combined.n).min().unwrap_or(0),
            per_replica: e
                .replicas
                .iter()
                .map(|x| f2(x.ddg))
                .collect::<Vec<_>>()
                .join(", "),
            corrections: f2(e.corrections.iter().map(|c| c.value).sum()),
            fitted: o2(e.fitted),
            residual: o2(e.residual),
            flags: e.flags.iter().map(|f| f.as_str()).collect(),
        })
        .collect()
}

#[derive(Serialize)]
struct ClosureRow {
    path: String,
    sum: String,
    sigma: String,
    flagged: bool,
}

/// Basis cycles, then edges run both ways.
fn closure_rows(r: &Results) -> Vec<ClosureRow> {
    let cycles = r.cycles.iter().map(|c| {
        let mut path = c.ligands.clone();
        path.extend(c.ligands.first().cloned());
        ClosureRow {
            path: path.join(" → "),
            sum: f2(c.closure),
            sigma: f2(c.sigma),
            flagged: c.flagged,
        }
    });
    let pairs = r.hysteresis.iter().map(|h| ClosureRow {
        path: format!("{} ⇄ {}", h.a, h.b),
        sum: f2(h.hysteresis),
        sigma: f2(h.sigma),
        flagged: h.flagged,
    });
    cycles.chain(pairs).collect()
}

#[derive(Serialize)]
struct OverlapNote {
    text: String,
    low: bool,
}

#[derive(Serialize)]
struct MethodRow {
    method: String,
    dg: String,
    sigma: String,
}

#[derive(Serialize)]
struct WindowRow {
    component: String,
    lambda: String,
    dudl_mean: String,
    dudl_sem: String,
    frames: String,
    discarded: String,
    inefficiency: String,
}

#[derive(Serialize)]
struct LegView {
    open: bool,
    plotted: bool,
    subject: String,
    leg: String,
    replica: u32,
    dg: String,
    sigma: String,
    overlap: Option<OverlapNote>,
    warnings: Vec<String>,
    methods: Vec<MethodRow>,
    figures: Vec<Figure>,
    multi: bool,
    windows: Vec<WindowRow>,
}

/// The legs grouped by subject (in order of first appearance), then leg, then
/// replica; above [`LEG_PLOT_LIMIT`] only the first and those worth a look
/// get plots.
fn leg_views(r: &Results) -> Result<Vec<LegView>, HtmlError> {
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
    let many = r.legs.len() > LEG_PLOT_LIMIT;
    legs.into_iter()
        .enumerate()
        .map(|(i, l)| {
            let worth = !l.warnings.is_empty()
                || l.min_adjacent_overlap.is_some_and(|o| o < MIN_OVERLAP)
                || r.edges
                    .iter()
                    .any(|e| e.subject == l.subject && !e.flags.is_empty());
            let open = i == 0 || r.legs.len() <= OPEN_LEGS;
            leg_view(r, l, open, i == 0 || !many || worth)
        })
        .collect()
}

fn leg_view(r: &Results, l: &LegReplica, open: bool, plotted: bool) -> Result<LegView, HtmlError> {
    let opt_u = |v: Option<u64>| v.map(|v| v.to_string()).unwrap_or_else(|| "–".into());
    let mut warnings = l.warnings.clone();
    // A plot that cannot be drawn is a warning on its leg, never a missing page.
    let figures = if plotted {
        leg_figures(r, l).unwrap_or_else(|e| {
            warnings.push(format!("its plots could not be drawn: {e}"));
            Vec::new()
        })
    } else {
        Vec::new()
    };
    Ok(LegView {
        open,
        plotted,
        subject: l.subject.clone(),
        leg: l.leg.clone(),
        replica: l.replica,
        dg: f2(l.dg),
        sigma: f2(l.sigma),
        overlap: l.min_adjacent_overlap.map(|o| OverlapNote {
            text: overlap_text(o),
            low: o < MIN_OVERLAP,
        }),
        warnings,
        methods: l
            .methods
            .iter()
            .map(|m| MethodRow {
                method: m.method.clone(),
                dg: f2(m.dg),
                sigma: f2(m.sigma),
            })
            .collect(),
        figures,
        multi: l.windows.iter().any(|w| w.component.is_some()),
        windows: l
            .windows
            .iter()
            .map(|w| WindowRow {
                component: w.component.clone().unwrap_or_default(),
                lambda: format!("{:.3}", w.lambda),
                dudl_mean: f2(w.dudl_mean),
                dudl_sem: f2(w.dudl_sem),
                frames: opt_u(w.frames),
                discarded: opt_u(w.discarded),
                inefficiency: o2(w.inefficiency),
            })
            .collect(),
    })
}

/// A leg replica's plots: overlap, ⟨dU/dλ⟩, convergence (those it has data for).
fn leg_figures(r: &Results, l: &LegReplica) -> Result<Vec<Figure>, HtmlError> {
    let unit = r.unit.to_string();
    let mut figures = Vec::new();
    if let Some(svg) = plots::overlap(l)? {
        figures.push(Figure::new(svg, &format!(
            "Overlap between states: two significant figures per cell, a dot below {OVERLAP_FLOOR}, colour on a √ scale (key on the right). Neighbouring states should overlap well above {MIN_OVERLAP} (rule of thumb).",
        )));
    }
    if let Some(svg) = plots::dudl(l, &unit)? {
        figures.push(Figure::new(
            svg,
            "Mean dU/dλ per window with ±SEM; the shaded area under the points is the integral TI estimates, and the title gives the leg's reported TI value.",
        ));
    }
    if let Some(svg) = l
        .convergence
        .as_ref()
        .map(|c| plots::convergence(c, &unit))
        .transpose()?
        .flatten()
    {
        figures.push(Figure::new(svg, "ΔG from the first (forward) or last (reverse) part of every window. Curves that meet early suggest converged sampling."));
    }
    Ok(figures)
}
