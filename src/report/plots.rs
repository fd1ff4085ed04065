//! The report's SVG plots (plotters, SVG backend), each returned as a string.

use super::results::{Convergence, LegReplica, Results, WindowSummary};
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

/// The network drawn on a circle, edges coloured by |residual|/σ (or, before the
/// network is solved, by σ relative to the largest σ).
pub fn network(r: &Results) -> Result<String, PlotError> {
    let (w, h) = (540u32, 500u32);
    render("network", (w, h), |root| {
        let names: Vec<&str> = r.ligands.iter().map(|l| l.ligand.as_str()).collect();
        let n = names.len().max(1) as f64;
        let (cx, cy, rad) = (
            w as f64 / 2.0,
            h as f64 / 2.0 + 6.0,
            (h as f64 / 2.0) - 80.0,
        );
        let pos = |name: &str| -> Option<(i32, i32)> {
            let i = names.iter().position(|x| *x == name)? as f64;
            let a = 2.0 * PI * i / n - PI / 2.0;
            Some(((cx + rad * a.cos()) as i32, (cy + rad * a.sin()) as i32))
        };
        root.draw(&Text::new(
            "Network: edge colour = |residual| / σ",
            (16, 14),
            (FONT, 16).into_font().color(&INK),
        ))?;
        let max_sigma = r.edges.iter().map(|e| e.sigma).fold(0.0, f64::max);
        let mut drawn: Vec<(String, String)> = Vec::new();
        for e in &r.edges {
            let Some(b) = e.ligand_b.as_deref() else {
                continue;
            };
            let (Some(p), Some(q)) = (pos(&e.ligand_a), pos(b)) else {
                continue;
            };
            // Edges run more than once (e.g. both directions) are drawn side by side.
            let key = if e.ligand_a.as_str() < b {
                (e.ligand_a.clone(), b.to_string())
            } else {
                (b.to_string(), e.ligand_a.clone())
            };
            let repeat = drawn.iter().filter(|k| **k == key).count() as f64;
            drawn.push(key);
            let shift = if repeat == 0.0 { 0.0 } else { 6.0 * repeat };
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
        for (i, name) in names.iter().enumerate() {
            let Some((x, y)) = pos(name) else { continue };
            root.draw(&Circle::new((x, y), 9, PAPER.filled()))?;
            root.draw(&Circle::new((x, y), 9, INK.stroke_width(2)))?;
            let a = 2.0 * PI * i as f64 / n - PI / 2.0;
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
        let legend = [(GOOD, "≤ 1σ"), (FAIR, "1–2σ"), (BAD, "> 2σ")];
        for (k, (c, label)) in legend.iter().enumerate() {
            let x = 16 + 90 * k as i32;
            let y = h as i32 - 22;
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
            (290, h as i32 - 29),
            (FONT, 13).into_font().color(&MUTED),
        ))?;
        Ok(())
    })
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

/// A leg replica's overlap matrix as a heatmap (state 0 top left).
pub fn overlap(leg: &LegReplica) -> Result<Option<String>, PlotError> {
    let k = leg.overlap.len();
    if k == 0 {
        return Ok(None);
    }
    let ki = k as i32;
    render("overlap", (330, 340), |root| {
        // Rows are drawn bottom-up, so row i of the matrix sits at y = k − 1 − i.
        let mut chart = ChartBuilder::on(root)
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
        let (cw, ch) = (pw as f64 / k as f64, ph as f64 / k as f64);
        for (i, row) in leg.overlap.iter().enumerate() {
            let y = ki - 1 - i as i32;
            for (j, &v) in row.iter().enumerate() {
                let x = j as i32;
                chart.draw_series(std::iter::once(Rectangle::new(
                    [
                        (SegmentValue::Exact(x), SegmentValue::Exact(y + 1)),
                        (SegmentValue::Exact(x + 1), SegmentValue::Exact(y)),
                    ],
                    heat(v).filled(),
                )))?;
                if k <= 14 && v >= 0.005 {
                    let colour = if v.sqrt() > 0.55 { PAPER } else { INK };
                    let size = if k <= 8 { 12.0 } else { 9.0 };
                    let text = format!("{v:.2}").trim_start_matches('0').to_string();
                    let w = 0.6 * size * text.len() as f64;
                    chart.draw_series(std::iter::once(
                        EmptyElement::at((SegmentValue::Exact(x), SegmentValue::Exact(y + 1)))
                            + Text::new(
                                text,
                                (((cw - w) / 2.0) as i32, ((ch - 0.8 * size) / 2.0) as i32),
                                (FONT, size).into_font().color(&colour),
                            ),
                    ))?;
                }
            }
        }
        Ok(())
    })
    .map(Some)
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

/// Trapezoid-rule TI estimate (Kirkwood 1935): Σ over λ components of
/// ∫ ⟨∂U/∂λ_c⟩ dλ_c, each along the states in order.
pub fn trapezoid(windows: &[WindowSummary]) -> f64 {
    by_component(windows)
        .iter()
        .map(|(_, ws)| {
            ws.windows(2)
                .map(|w| 0.5 * (w[0].dudl_mean + w[1].dudl_mean) * (w[1].lambda - w[0].lambda))
                .sum::<f64>()
        })
        .sum()
}

/// Mean dU/dλ against λ with ±SEM bars and the TI area shaded, one series per
/// λ component.
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
    let area = trapezoid(&leg.windows);
    let colours = [
        TEAL,
        ORANGE,
        RGBColor(0x5b, 0x4b, 0x9a),
        RGBColor(0x8a, 0x6d, 0x1f),
    ];
    render("dU/dλ", (380, 330), |root| {
        let mut chart = ChartBuilder::on(root)
            .caption(
                format!("⟨dU/dλ⟩ against λ — TI area {area:.2} {unit}"),
                (FONT, 15).into_font().color(&INK),
            )
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
            let colour = colours[k % colours.len()];
            let pts: Vec<(f64, f64)> = ws.iter().map(|w| (w.lambda, w.dudl_mean)).collect();
            chart.draw_series(AreaSeries::new(pts.clone(), 0.0, colour.mix(0.16)))?;
            let line = chart.draw_series(LineSeries::new(pts.clone(), colour.stroke_width(2)))?;
            if groups.len() > 1 {
                line.label(name.clone()).legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 18, y)], colour.stroke_width(2))
                });
            }
            for w in ws {
                let s = w.dudl_sem.abs();
                error_bar(&mut chart, w.lambda, w.dudl_mean - s, w.dudl_mean + s, 3)?;
            }
            chart.draw_series(pts.iter().map(|&p| Circle::new(p, 3, colour.filled())))?;
        }
        if groups.len() > 1 {
            chart
                .configure_series_labels()
                .background_style(PAPER.mix(0.9))
                .border_style(MUTED)
                .label_font((FONT, 11).into_font().color(&INK))
                .position(SeriesLabelPosition::UpperRight)
                .draw()?;
        }
        Ok(())
    })
    .map(Some)
}

/// ΔG from growing fractions of the data, forward (from the start) and reverse
/// (from the end), with ±σ bands; they should meet well before the full data.
pub fn convergence(c: &Convergence, unit: &str) -> Result<Option<String>, PlotError> {
    let n = c.fractions.len().min(c.forward.len()).min(c.reverse.len());
    if n == 0 {
        return Ok(None);
    }
    let sig = |v: &[f64], i: usize| {
        v.get(i)
            .copied()
            .filter(|s| s.is_finite())
            .unwrap_or(0.0)
            .abs()
    };
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
        for (values, sigmas, colour, label) in [
            (
                &c.forward,
                &c.forward_sigma,
                TEAL,
                "forward (from the start)",
            ),
            (
                &c.reverse,
                &c.reverse_sigma,
                ORANGE,
                "reverse (from the end)",
            ),
        ] {
            let upper = (0..n).map(|i| (c.fractions[i], values[i] + sig(sigmas, i)));
            let lower = (0..n)
                .rev()
                .map(|i| (c.fractions[i], values[i] - sig(sigmas, i)));
            chart.draw_series(std::iter::once(Polygon::new(
                upper.chain(lower).collect::<Vec<_>>(),
                colour.mix(0.15).filled(),
            )))?;
            let line: Vec<(f64, f64)> = (0..n).map(|i| (c.fractions[i], values[i])).collect();
            chart
                .draw_series(LineSeries::new(line.clone(), colour.stroke_width(2)))?
                .label(label)
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 18, y)], colour.stroke_width(2))
                });
            chart.draw_series(line.iter().map(|&p| Circle::new(p, 3, colour.filled())))?;
        }
        let final_value = c.forward[n - 1];
        chart.draw_series(DashedLineSeries::new(
            [(0.0, final_value), (1.02, final_value)],
            4,
            4,
            MUTED.stroke_width(1),
        ))?;
        chart
            .configure_series_labels()
            .background_style(PAPER.mix(0.9))
            .border_style(MUTED)
            .label_font((FONT, 11).into_font().color(&INK))
            .position(SeriesLabelPosition::UpperRight)
            .draw()?;
        Ok(())
    })
    .map(Some)
}
