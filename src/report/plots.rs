//! The report's SVG plots (plotters, SVG backend), each returned as a string.

use super::format::{overlap_label, overlap_text, OVERLAP_DOT, OVERLAP_FLOOR};
use crate::analysis::{Convergence, LegReplica, Results, WindowSummary};
use plotters::coord::Shift;
use plotters::prelude::*;
use std::f64::consts::PI;

/// A plot failed to draw.
#[derive(Debug, thiserror::Error)]
#[error("drawing the {plot} plot failed: {message}")]
pub struct PlotError {
    /// Which plot.
    pub plot: &'static str,
    /// What plotters said.
    pub message: String,
}

type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;
type DrawResult = Result<(), DrawingAreaErrorKind<std::io::Error>>;

/// Text and lines.
pub const INK: RGBColor = RGBColor(0x1f, 0x29, 0x33);
/// Axes, grid and secondary text.
pub const MUTED: RGBColor = RGBColor(0x7b, 0x87, 0x94);
/// Main data colour (deep teal).
pub const TEAL: RGBColor = RGBColor(0x0f, 0x6e, 0x6a);
/// Second series (burnt orange).
pub const ORANGE: RGBColor = RGBColor(0xc2, 0x5e, 0x12);
/// Within 1σ.
pub const GOOD: RGBColor = RGBColor(0x2f, 0x85, 0x5a);
/// Between 1σ and 2σ.
pub const FAIR: RGBColor = RGBColor(0xd9, 0x9a, 0x1e);
/// Beyond 2σ.
pub const BAD: RGBColor = RGBColor(0xb8, 0x32, 0x27);
const PAPER: RGBColor = RGBColor(0xff, 0xff, 0xff);
const FONT: &str = "sans-serif";

fn render(
    plot: &'static str,
    size: (u32, u32),
    draw: impl FnOnce(&Area) -> DrawResult,
) -> Result<String, PlotError> {
    let mut s = String::new();
    {
        let root = SVGBackend::with_string(&mut s, size).into_drawing_area();
        root.fill(&PAPER)
            .and_then(|_| draw(&root))
            .and_then(|_| root.present())
            .map_err(|e| PlotError {
                plot,
                message: e.to_string(),
            })?;
    }
    Ok(s)
}

/// Padded range of finite values (and the extra points), never empty.
fn range(values: impl IntoIterator<Item = f64>) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.into_iter().filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if !lo.is_finite() {
        return (-1.0, 1.0);
    }
    let pad = ((hi - lo) * 0.08).max(1e-3 * (1.0 + hi.abs().max(lo.abs())));
    (lo - pad, hi + pad)
}

type Chart<'a, 'b> = ChartContext<
    'a,
    SVGBackend<'b>,
    Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
>;

/// A vertical error bar from `lo` to `hi` at `x` with caps `cap` pixels wide each side.
fn error_bar(chart: &mut Chart, x: f64, lo: f64, hi: f64, cap: i32) -> DrawResult {
    if !(lo.is_finite() && hi.is_finite()) || hi <= lo {
        return Ok(());
    }
    let style = INK.stroke_width(1);
    chart.draw_series(std::iter::once(PathElement::new(
        vec![(x, lo), (x, hi)],
        style,
    )))?;
    for y in [lo, hi] {
        chart.draw_series(std::iter::once(
            EmptyElement::at((x, y)) + PathElement::new(vec![(-cap, 0), (cap, 0)], style),
        ))?;
    }
    Ok(())
}

/// Colour for |residual| / σ.
pub fn z_colour(z: f64) -> RGBColor {
    if z <= 1.0 {
        GOOD
    } else if z <= 2.0 {
        FAIR
    } else {
        BAD
    }
}

/// Where the network's ligands sit: evenly on a circle, the first at the top.
struct Ring<'a> {
    names: Vec<&'a str>,
    centre: (f64, f64),
    radius: f64,
}

impl Ring<'_> {
    /// The angle of the i-th ligand.
    fn angle(&self, i: usize) -> f64 {
        2.0 * PI * i as f64 / self.names.len().max(1) as f64 - PI / 2.0
    }

    /// The pixel position of a ligand, if it is on the ring.
    fn pos(&self, name: &str) -> Option<(i32, i32)> {
        let a = self.angle(self.names.iter().position(|x| *x == name)?);
        Some((
            (self.centre.0 + self.radius * a.cos()) as i32,
            (self.centre.1 + self.radius * a.sin()) as i32,
        ))
    }
}

/// The network drawn on a circle, edges coloured by |residual|/σ (or, before the
/// network is solved, by σ relative to the largest σ).
pub fn network(r: &Results) -> Result<String, PlotError> {
    let (w, h) = (540u32, 500u32);
    let ring = Ring {
        names: r.ligands.iter().map(|l| l.ligand.as_str()).collect(),
        centre: (w as f64 / 2.0, h as f64 / 2.0 + 6.0),
        radius: (h as f64 / 2.0) - 80.0,
    };
    render("network", (w, h), |root| {
        root.draw(&Text::new(
            "Network: edge colour = |residual| / σ",
            (16, 14),
            (FONT, 16).into_font().color(&INK),
        ))?;
        network_edges(root, r, &ring)?;
        network_nodes(root, &ring)?;
        network_legend(root, h as i32)
    })
}

/// One line per edge; edges run more than once (e.g. both directions) side by side.
fn network_edges(root: &Area, r: &Results, ring: &Ring) -> DrawResult {
    let max_sigma = r.edges.iter().map(|e| e.sigma).fold(0.0, f64::max);
    let mut drawn: Vec<(String, String)> = Vec::new();
    for e in &r.edges {
        let Some(b) = e.ligand_b.as_deref() else {
            continue;
        };
        let (Some(p), Some(q)) = (ring.pos(&e.ligand_a), ring.pos(b)) else {
            continue;
        };
        let key = if e.ligand_a.as_str() < b {
            (e.ligand_a.clone(), b.to_string())
        } else {
            (b.to_string(), e.ligand_a.clone())
        };
        let shift = 6.0 * drawn.iter().filter(|k| **k == key).count() as f64;
        drawn.push(key);
        let (dx, dy) = ((q.0 - p.0) as f64, (q.1 - p.1) as f64);
        let norm = dx.hypot(dy).max(1.0);
        let (ox, oy) = ((-dy / norm * shift) as i32, (dx / norm * shift) as i32);
        let (p, q) = ((p.0 + ox, p.1 + oy), (q.0 + ox, q.1 + oy));
        let z = match e.residual {
            Some(x) if e.sigma > 0.0 => (x / e.sigma).abs(),
            _ if max_sigma > 0.0 => 2.5 * e.sigma / max_sigma,
            _ => 0.0,
        };
        let width = if e.flags.is_empty() { 3 } else { 5 };
        root.draw(&PathElement::new(
            vec![p, q],
            z_colour(z).stroke_width(width),
        ))?;
    }
    Ok(())
}

/// A circle and a name per ligand, the name outside the ring.
fn network_nodes(root: &Area, ring: &Ring) -> DrawResult {
    for (i, name) in ring.names.iter().enumerate() {
        let Some((x, y)) = ring.pos(name) else {
            continue;
        };
        root.draw(&Circle::new((x, y), 9, PAPER.filled()))?;
        root.draw(&Circle::new((x, y), 9, INK.stroke_width(2)))?;
        let a = ring.angle(i);
        let (lx, ly) = (x as f64 + 22.0 * a.cos(), y as f64 + 22.0 * a.sin());
        let est = 0.6 * 14.0 * name.chars().count() as f64;
        let lx = if a.cos() < -0.3 {
            lx - est
        } else if a.cos() < 0.3 {
            lx - est / 2.0
        } else {
            lx
        };
        root.draw(&Text::new(
            name.to_string(),
            (lx as i32, ly as i32 - 7),
            (FONT, 14).into_font().color(&INK),
        ))?;
    }
    Ok(())
}

/// The colour key along the bottom.
fn network_legend(root: &Area, h: i32) -> DrawResult {
    let legend = [(GOOD, "≤ 1σ"), (FAIR, "1–2σ"), (BAD, "> 2σ")];
    for (k, (c, label)) in legend.iter().enumerate() {
        let x = 16 + 90 * k as i32;
        let y = h - 22;
        root.draw(&PathElement::new(
            vec![(x, y), (x + 28, y)],
            c.stroke_width(4),
        ))?;
        root.draw(&Text::new(
            label.to_string(),
            (x + 34, y - 7),
            (FONT, 13).into_font().color(&INK),
        ))?;
    }
    root.draw(&Text::new(
        "thick: flagged edge",
        (290, h - 29),
        (FONT, 13).into_font().color(&MUTED),
    ))?;
    Ok(())
}

/// Predicted against measured ΔG of each ligand with σ error bars, the
/// identity line and ±1 kcal/mol and ±2 kcal/mol bands (drawn in the campaign unit).
pub fn predicted_vs_measured(r: &Results) -> Result<Option<String>, PlotError> {
    let pts: Vec<(String, f64, f64, f64)> = r
        .ligands
        .iter()
        .filter_map(|l| Some((l.ligand.clone(), l.measured?, l.dg, l.sigma)))
        .collect();
    agreement(r, pts, "Predicted against measured ΔG", "ΔG")
}

/// Each edge's own ΔΔG against the measured ΔG(b) − ΔG(a), same layout.
pub fn edges_vs_measured(r: &Results) -> Result<Option<String>, PlotError> {
    let m = |id: &str| r.measured.iter().find(|m| m.ligand == id).map(|m| m.dg);
    let pts: Vec<(String, f64, f64, f64)> = r
        .edges
        .iter()
        .filter_map(|e| {
            let b = e.ligand_b.as_deref()?;
            Some((e.subject.clone(), m(b)? - m(&e.ligand_a)?, e.ddg, e.sigma))
        })
        .collect();
    agreement(r, pts, "Predicted against measured ΔΔG", "ΔΔG")
}

/// (label, measured, predicted, σ) points against the identity line.
fn agreement(
    r: &Results,
    pts: Vec<(String, f64, f64, f64)>,
    title: &'static str,
    quantity: &'static str,
) -> Result<Option<String>, PlotError> {
    let pts: Vec<(String, f64, f64, f64)> = pts
        .into_iter()
        .filter(|p| p.1.is_finite() && p.2.is_finite())
        .collect();
    if pts.is_empty() {
        return Ok(None);
    }
    let one = r.one_kcal();
    let (lo, hi) = range(
        pts.iter()
            .flat_map(|p| [p.1, p.2 - p.3, p.2 + p.3])
            .chain(pts.iter().map(|p| p.1 - one))
            .chain(pts.iter().map(|p| p.1 + one)),
    );
    let unit = r.unit.to_string();
    render(title, (500, 500), |root| {
        let mut chart = ChartBuilder::on(root)
            .caption(title, (FONT, 16).into_font().color(&INK))
            .margin(14)
            .x_label_area_size(44)
            .y_label_area_size(56)
            .build_cartesian_2d(lo..hi, lo..hi)?;
        chart
            .configure_mesh()
            .light_line_style(TRANSPARENT)
            .bold_line_style(RGBColor(0xe4, 0xe7, 0xeb))
            .axis_style(MUTED)
            .x_desc(format!("measured {quantity} ({unit})"))
            .y_desc(format!("predicted {quantity} ({unit})"))
            .label_style((FONT, 12).into_font().color(&INK))
            .draw()?;
        for (k, alpha) in [(2.0, 0.08), (1.0, 0.16)] {
            let d = k * one;
            chart.draw_series(std::iter::once(Polygon::new(
                vec![(lo, lo - d), (hi, hi - d), (hi, hi + d), (lo, lo + d)],
                TEAL.mix(alpha).filled(),
            )))?;
        }
        chart.draw_series(LineSeries::new([(lo, lo), (hi, hi)], MUTED.stroke_width(1)))?;
        for p in &pts {
            error_bar(&mut chart, p.1, p.2 - p.3, p.2 + p.3, 4)?;
        }
        chart.draw_series(
            pts.iter()
                .map(|p| Circle::new((p.1, p.2), 5, ORANGE.filled())),
        )?;
        if pts.len() <= 15 {
            chart.draw_series(pts.iter().map(|p| {
                EmptyElement::at((p.1, p.2))
                    + Text::new(
                        p.0.to_string(),
                        (7, -14),
                        (FONT, 11).into_font().color(&MUTED),
                    )
            }))?;
        }
        let note = "bands: ±1 and ±2 kcal/mol; bars: ±1σ";
        root.draw(&Text::new(
            note,
            (80, 44),
            (FONT, 12).into_font().color(&MUTED),
        ))?;
        Ok(())
    })
    .map(Some)
}

/// Sequential colour from near-white (0) to deep blue (1), on a √ scale so that
/// small overlaps stay visible.
fn heat(v: f64) -> RGBColor {
    let t = v.clamp(0.0, 1.0).sqrt();
    let (a, b) = ((0xf6, 0xf4, 0xee), (0x17, 0x3f, 0x7a));
    let mix = |x: u8, y: u8| (x as f64 + (y as f64 - x as f64) * t).round() as u8;
    RGBColor(mix(a.0, b.0), mix(a.1, b.1), mix(a.2, b.2))
}

/// Width of the overlap plot's colour key, pixels.
const KEY_WIDTH: u32 = 76;

/// A leg replica's overlap matrix as a heatmap (state 0 top left), each cell
/// labelled with [`overlap_label`] when the matrix is small enough to read, and
/// a colour key on the right.
pub fn overlap(leg: &LegReplica) -> Result<Option<String>, PlotError> {
    let k = leg.overlap.len();
    if k == 0 {
        return Ok(None);
    }
    let (w, h) = (330 + KEY_WIDTH, 340);
    render("overlap", (w, h), |root| {
        let (matrix, key) = root.split_horizontally(w - KEY_WIDTH);
        overlap_cells(&matrix, &leg.overlap)?;
        overlap_key(&key)
    })
    .map(Some)
}

/// The heatmap itself.
fn overlap_cells(area: &Area, overlap: &[Vec<f64>]) -> DrawResult {
    let k = overlap.len();
    let ki = k as i32;
    // Rows are drawn bottom-up, so row i of the matrix sits at y = k − 1 − i.
    let mut chart = ChartBuilder::on(area)
        .caption("Overlap matrix", (FONT, 15).into_font().color(&INK))
        .margin(10)
        .x_label_area_size(34)
        .y_label_area_size(30)
        .build_cartesian_2d((0..ki - 1).into_segmented(), (0..ki - 1).into_segmented())?;
    let every = (k / 12 + 1) as i32;
    let label = move |v: &SegmentValue<i32>, flip: bool| match v {
        SegmentValue::CenterOf(i) => {
            let state = if flip { ki - 1 - i } else { *i };
            if state % every == 0 {
                state.to_string()
            } else {
                String::new()
            }
        }
        _ => String::new(),
    };
    chart
        .configure_mesh()
        .disable_mesh()
        .axis_style(MUTED)
        .x_labels(k)
        .y_labels(k)
        .x_label_formatter(&|v| label(v, false))
        .y_label_formatter(&|v| label(v, true))
        .label_style((FONT, 10).into_font().color(&INK))
        .x_desc("state")
        .draw()?;
    let (pw, ph) = chart.plotting_area().dim_in_pixel();
    let cell = (pw as f64 / k as f64, ph as f64 / k as f64);
    let labels: Vec<Vec<String>> = overlap
        .iter()
        .map(|row| row.iter().map(|&v| overlap_label(v)).collect())
        .collect();
    // One font size for the whole matrix, the largest at which its longest
    // label fits its cell; too small to read means no labels.
    let longest = labels.iter().flatten().map(|l| l.chars().count()).max();
    let size = (0.9 * cell.0 / (0.58 * longest.unwrap_or(1).max(1) as f64)).min(12.0);
    let readable = k <= 16 && size >= 6.5;
    for (i, row) in overlap.iter().enumerate() {
        let y = ki - 1 - i as i32;
        for (j, &v) in row.iter().enumerate() {
            let x = j as i32;
            let corner = (SegmentValue::Exact(x), SegmentValue::Exact(y + 1));
            chart.draw_series(std::iter::once(Rectangle::new(
                [
                    corner.clone(),
                    (SegmentValue::Exact(x + 1), SegmentValue::Exact(y)),
                ],
                heat(v).filled(),
            )))?;
            let text = &labels[i][j];
            if readable && !text.is_empty() {
                let colour = if v.sqrt() > 0.55 { PAPER } else { INK };
                let tw = 0.58 * size * text.chars().count() as f64;
                let at = (
                    ((cell.0 - tw) / 2.0) as i32,
                    ((cell.1 - 0.8 * size) / 2.0) as i32,
                );
                chart.draw_series(std::iter::once(
                    EmptyElement::at(corner)
                        + Text::new(text.clone(), at, (FONT, size).into_font().color(&colour)),
                ))?;
            }
        }
    }
    Ok(())
}

/// The colour key: a bar from 1 (top) to 0 on the heatmap's √ scale, ticks
/// spelled like the cells, and what the dot means.
fn overlap_key(area: &Area) -> DrawResult {
    let (x0, top, bar_w, bar_h) = (8, 46, 14, 220);
    let steps = 44;
    for s in 0..steps {
        // t runs down the bar from 1 to 0; the value at t is t² (√ scale).
        let t = 1.0 - (s as f64 + 0.5) / steps as f64;
        let y = top + bar_h * s / steps;
        area.draw(&Rectangle::new(
            [(x0, y), (x0 + bar_w, top + bar_h * (s + 1) / steps)],
            heat(t * t).filled(),
        ))?;
    }
    area.draw(&Rectangle::new(
        [(x0, top), (x0 + bar_w, top + bar_h)],
        MUTED.stroke_width(1),
    ))?;
    for v in [1.0, 0.3, 0.1, 0.03, OVERLAP_FLOOR] {
        let y = top + ((1.0 - v.sqrt()) * bar_h as f64) as i32;
        area.draw(&PathElement::new(
            vec![(x0 + bar_w, y), (x0 + bar_w + 4, y)],
            MUTED.stroke_width(1),
        ))?;
        area.draw(&Text::new(
            overlap_text(v),
            (x0 + bar_w + 7, y - 5),
            (FONT, 10).into_font().color(&INK),
        ))?;
    }
    area.draw(&Text::new(
        format!("{OVERLAP_DOT} below"),
        (x0, top + bar_h + 12),
        (FONT, 10).into_font().color(&MUTED),
    ))?;
    area.draw(&Text::new(
        overlap_text(OVERLAP_FLOOR),
        (x0, top + bar_h + 25),
        (FONT, 10).into_font().color(&MUTED),
    ))?;
    Ok(())
}

/// The windows grouped by λ component, in first-appearance order, keeping only
/// finite points; single-component legs give one group.
fn by_component(windows: &[WindowSummary]) -> Vec<(String, Vec<&WindowSummary>)> {
    let mut groups: Vec<(String, Vec<&WindowSummary>)> = Vec::new();
    for w in windows
        .iter()
        .filter(|w| w.lambda.is_finite() && w.dudl_mean.is_finite())
    {
        let name = w.component.clone().unwrap_or_else(|| "lambda".into());
        match groups.iter_mut().find(|g| g.0 == name) {
            Some(g) => g.1.push(w),
            None => groups.push((name, vec![w])),
        }
    }
    groups
}

/// Colours of the λ components' series, in order.
const SERIES: [RGBColor; 4] = [
    TEAL,
    ORANGE,
    RGBColor(0x5b, 0x4b, 0x9a),
    RGBColor(0x8a, 0x6d, 0x1f),
];

/// The title of the ⟨dU/dλ⟩ plot: the TI value the analysis reported for the
/// leg (never recomputed from the points shown).
fn dudl_title(leg: &LegReplica, unit: &str) -> String {
    match &leg.ti {
        Some(t) if t.dg.is_finite() => {
            let name = if t.method == "ti_spline" {
                "TI (spline)"
            } else {
                "TI"
            };
            format!(
                "⟨dU/dλ⟩ against λ — {name} {} ± {} {unit}",
                super::format::f2(t.dg),
                super::format::f2(t.sigma)
            )
        }
        _ => "⟨dU/dλ⟩ against λ".to_string(),
    }
}

/// Mean dU/dλ against λ with ±SEM bars and the area under it shaded, one series
/// per λ component; the title names the leg's reported TI estimate.
pub fn dudl(leg: &LegReplica, unit: &str) -> Result<Option<String>, PlotError> {
    let groups = by_component(&leg.windows);
    if groups.iter().all(|g| g.1.len() < 2) {
        return Ok(None);
    }
    let all = || groups.iter().flat_map(|g| g.1.iter());
    let (ylo, yhi) = range(all().flat_map(|w| {
        [
            w.dudl_mean - w.dudl_sem.abs(),
            w.dudl_mean + w.dudl_sem.abs(),
            0.0,
        ]
    }));
    let (xlo, xhi) = range(all().map(|w| w.lambda));
    let title = dudl_title(leg, unit);
    render("dU/dλ", (380, 330), |root| {
        let mut chart = ChartBuilder::on(root)
            .caption(title, (FONT, 15).into_font().color(&INK))
            .margin(12)
            .x_label_area_size(38)
            .y_label_area_size(60)
            .build_cartesian_2d(xlo..xhi, ylo..yhi)?;
        chart
            .configure_mesh()
            .light_line_style(TRANSPARENT)
            .bold_line_style(RGBColor(0xe2, 0xe5, 0xe9))
            .axis_style(MUTED)
            .x_desc("λ")
            .y_desc(format!("⟨dU/dλ⟩ ({unit})"))
            .label_style((FONT, 11).into_font().color(&INK))
            .draw()?;
        chart.draw_series(LineSeries::new(
            [(xlo, 0.0), (xhi, 0.0)],
            MUTED.stroke_width(1),
        ))?;
        for (k, (name, ws)) in groups.iter().enumerate() {
            let label = (groups.len() > 1).then_some(name.as_str());
            dudl_series(&mut chart, ws, SERIES[k % SERIES.len()], label)?;
        }
        if groups.len() > 1 {
            series_key(&mut chart)?;
        }
        Ok(())
    })
    .map(Some)
}

/// One λ component: shaded area, line, ±SEM bars and points.
fn dudl_series(
    chart: &mut Chart,
    ws: &[&WindowSummary],
    colour: RGBColor,
    label: Option<&str>,
) -> DrawResult {
    let pts: Vec<(f64, f64)> = ws.iter().map(|w| (w.lambda, w.dudl_mean)).collect();
    chart.draw_series(AreaSeries::new(pts.clone(), 0.0, colour.mix(0.16)))?;
    let line = chart.draw_series(LineSeries::new(pts.clone(), colour.stroke_width(2)))?;
    if let Some(name) = label {
        line.label(name).legend(move |(x, y)| {
            PathElement::new(vec![(x, y), (x + 18, y)], colour.stroke_width(2))
        });
    }
    for w in ws {
        let s = w.dudl_sem.abs();
        error_bar(chart, w.lambda, w.dudl_mean - s, w.dudl_mean + s, 3)?;
    }
    chart.draw_series(pts.iter().map(|&p| Circle::new(p, 3, colour.filled())))?;
    Ok(())
}

/// The series' key in the upper right corner.
fn series_key<'a, 'b: 'a>(chart: &mut Chart<'a, 'b>) -> DrawResult {
    chart
        .configure_series_labels()
        .background_style(PAPER.mix(0.9))
        .border_style(MUTED)
        .label_font((FONT, 11).into_font().color(&INK))
        .position(SeriesLabelPosition::UpperRight)
        .draw()
}

/// ΔG from growing fractions of the data, forward (from the start) and reverse
/// (from the end), with ±σ bands; they should meet well before the full data.
pub fn convergence(c: &Convergence, unit: &str) -> Result<Option<String>, PlotError> {
    let n = c.fractions.len().min(c.forward.len()).min(c.reverse.len());
    if n == 0 {
        return Ok(None);
    }
    let (ylo, yhi) = range((0..n).flat_map(|i| {
        [
            c.forward[i] - sig(&c.forward_sigma, i),
            c.forward[i] + sig(&c.forward_sigma, i),
            c.reverse[i] - sig(&c.reverse_sigma, i),
            c.reverse[i] + sig(&c.reverse_sigma, i),
        ]
    }));
    render("convergence", (380, 330), |root| {
        let mut chart = ChartBuilder::on(root)
            .caption(
                "Forward and reverse convergence",
                (FONT, 15).into_font().color(&INK),
            )
            .margin(12)
            .x_label_area_size(38)
            .y_label_area_size(60)
            .build_cartesian_2d(0.0..1.02, ylo..yhi)?;
        chart
            .configure_mesh()
            .light_line_style(TRANSPARENT)
            .bold_line_style(RGBColor(0xe2, 0xe5, 0xe9))
            .axis_style(MUTED)
            .x_desc("fraction of the data used")
            .y_desc(format!("ΔG ({unit})"))
            .label_style((FONT, 11).into_font().color(&INK))
            .draw()?;
        let fractions = &c.fractions[..n];
        let forward = (&c.forward[..n], &c.forward_sigma[..]);
        let reverse = (&c.reverse[..n], &c.reverse_sigma[..]);
        convergence_series(
            &mut chart,
            fractions,
            forward,
            TEAL,
            "forward (from the start)",
        )?;
        convergence_series(
            &mut chart,
            fractions,
            reverse,
            ORANGE,
            "reverse (from the end)",
        )?;
        let final_value = c.forward[n - 1];
        chart.draw_series(DashedLineSeries::new(
            [(0.0, final_value), (1.02, final_value)],
            4,
            4,
            MUTED.stroke_width(1),
        ))?;
        series_key(&mut chart)
    })
    .map(Some)
}

/// The i-th σ of a series, 0 when missing or undefined.
fn sig(v: &[f64], i: usize) -> f64 {
    v.get(i)
        .copied()
        .filter(|s| s.is_finite())
        .unwrap_or(0.0)
        .abs()
}

/// One convergence series (values and their σ) as a ±σ band, a line and points.
fn convergence_series(
    chart: &mut Chart,
    fractions: &[f64],
    (values, sigmas): (&[f64], &[f64]),
    colour: RGBColor,
    label: &'static str,
) -> DrawResult {
    let n = fractions.len();
    let upper = (0..n).map(|i| (fractions[i], values[i] + sig(sigmas, i)));
    let lower = (0..n)
        .rev()
        .map(|i| (fractions[i], values[i] - sig(sigmas, i)));
    chart.draw_series(std::iter::once(Polygon::new(
        upper.chain(lower).collect::<Vec<_>>(),
        colour.mix(0.15).filled(),
    )))?;
    let line: Vec<(f64, f64)> = (0..n).map(|i| (fractions[i], values[i])).collect();
    chart
        .draw_series(LineSeries::new(line.clone(), colour.stroke_width(2)))?
        .label(label)
        .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], colour.stroke_width(2)));
    chart.draw_series(line.iter().map(|&p| Circle::new(p, 3, colour.filled())))?;
    Ok(())
}
