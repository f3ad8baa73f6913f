//! A small figure description (panels of lines on [`Axis`] coordinates) and its drawing
//! with plotters onto any backend, so SVG and PNG come from the same code.

use super::scale::Axis;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::sync::Once;

/// Font family name used for every text (registered from the embedded font).
const FAMILY: &str = "sans-serif";

/// Makes the embedded font known to plotters (once per process). Plotters needs it for
/// laying out text in both backends and for drawing glyphs into PNGs; no system font is
/// looked up.
pub fn register_fonts() {
    static ONCE: Once = Once::new();
    ONCE.call_once(|| {
        // The embedded fonts are valid TrueType files; a failure would leave text out of
        // PNGs only, so it is not worth an error path.
        let _ = plotters::style::register_font(FAMILY, FontStyle::Normal, dejavu::sans::regular());
        let _ = plotters::style::register_font(FAMILY, FontStyle::Bold, dejavu::sans::bold());
    });
}

/// One drawn line.
#[derive(Debug, Clone)]
pub struct Line {
    /// Legend entry.
    pub label: String,
    pub color: RGBColor,
    /// Stroke width [px]; earlier lines drawn wider show beside later ones on top.
    pub width: u32,
    /// (x, y) in data units; points an axis cannot show split the line.
    pub points: Vec<(f64, f64)>,
}

/// One chart of a figure.
#[derive(Debug, Clone)]
pub struct Panel {
    /// Heading above the chart (may be empty).
    pub heading: String,
    pub x: Axis,
    pub y: Axis,
    pub x_label: String,
    pub y_label: String,
    pub lines: Vec<Line>,
    /// Draw the line x = 0 (for axes through zero, e.g. signed fluxes).
    pub x_zero: bool,
    pub y_zero: bool,
}

/// A figure: title lines, a grid of panels and one legend for all of them.
#[derive(Debug, Clone)]
pub struct Figure {
    pub title: String,
    pub subtitle: String,
    pub panels: Vec<Panel>,
    pub columns: usize,
    pub size: (u32, u32),
    pub legend_heading: String,
}

impl Figure {
    /// Legend entries: the distinct (label, colour) pairs in drawing order.
    pub fn legend(&self) -> Vec<(String, RGBColor, u32)> {
        let mut out: Vec<(String, RGBColor, u32)> = Vec::new();
        for p in &self.panels {
            for l in &p.lines {
                if !out.iter().any(|(s, c, _)| *s == l.label && *c == l.color) {
                    out.push((l.label.clone(), l.color, l.width));
                }
            }
        }
        out
    }
}

fn font(size: f64) -> TextStyle<'static> {
    (FAMILY, size).into_font().color(&BLACK)
}

/// Draws `fig` onto `root` (which it fills). The caller presents the backend.
pub fn draw<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    fig: &Figure,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    root.fill(&WHITE)?;
    let (w, _h) = root.dim_in_pixel();
    let (head, body) = root.split_vertically(78);
    let centre = Pos::new(HPos::Center, VPos::Center);
    head.draw_text(
        &fig.title,
        &(FAMILY, 24.0)
            .into_font()
            .style(FontStyle::Bold)
            .color(&BLACK)
            .pos(centre),
        (w as i32 / 2, 28),
    )?;
    head.draw_text(&fig.subtitle, &font(17.0).pos(centre), (w as i32 / 2, 58))?;

    let legend = fig.legend();
    let legend_w = legend
        .iter()
        .map(|(s, _, _)| {
            root.estimate_text_size(s, &font(15.0))
                .map(|(tw, _)| tw)
                .unwrap_or(8 * s.len() as u32)
        })
        .chain(std::iter::once(
            root.estimate_text_size(&fig.legend_heading, &font(15.0))
                .map(|(tw, _)| tw)
                .unwrap_or(100),
        ))
        .max()
        .unwrap_or(100)
        + 70;
    let (grid, key) = body.split_horizontally(w.saturating_sub(legend_w));

    let cols = fig.columns.max(1);
    let rows = fig.panels.len().div_ceil(cols).max(1);
    let cells = grid.split_evenly((rows, cols));
    for (panel, area) in fig.panels.iter().zip(cells.iter()) {
        draw_panel(area, panel)?;
    }

    // The legend, top-aligned with the first row of panels.
    let left = Pos::new(HPos::Left, VPos::Center);
    let mut y = 40;
    key.draw_text(
        &fig.legend_heading,
        &(FAMILY, 15.0)
            .into_font()
            .style(FontStyle::Bold)
            .color(&BLACK)
            .pos(left),
        (10, y),
    )?;
    for (label, color, width) in &legend {
        y += 26;
        key.draw(&PathElement::new(
            vec![(10, y), (44, y)],
            color.stroke_width((*width).max(3)),
        ))?;
        key.draw_text(label, &font(15.0).pos(left), (52, y))?;
    }
    Ok(())
}

fn draw_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    p: &Panel,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    let mut builder = ChartBuilder::on(area);
    builder
        .margin_top(8)
        .margin_right(24)
        .margin_left(8)
        .margin_bottom(4)
        .x_label_area_size(56)
        .y_label_area_size(74);
    if !p.heading.is_empty() {
        builder.caption(&p.heading, font(17.0));
    }
    let mut chart = builder.build_cartesian_2d(p.x.with_ticks(11), p.y.with_ticks(9))?;
    chart
        .configure_mesh()
        .x_desc(p.x_label.as_str())
        .y_desc(p.y_label.as_str())
        .axis_desc_style(font(16.0))
        .label_style(font(14.0))
        .x_labels(11)
        .y_labels(9)
        .bold_line_style(RGBColor(200, 200, 200).stroke_width(1))
        .light_line_style(RGBColor(236, 236, 236).stroke_width(1))
        .axis_style(BLACK.stroke_width(1))
        .draw()?;

    let zero = RGBColor(90, 90, 90).stroke_width(1);
    if p.x_zero && p.x.contains(0.0) {
        chart.draw_series(std::iter::once(PathElement::new(
            vec![(0.0, p.y.lo), (0.0, p.y.hi)],
            zero,
        )))?;
    }
    if p.y_zero && p.y.contains(0.0) {
        chart.draw_series(std::iter::once(PathElement::new(
            vec![(p.x.lo, 0.0), (p.x.hi, 0.0)],
            zero,
        )))?;
    }

    for line in &p.lines {
        for seg in segments(&line.points, &p.x, &p.y) {
            if seg.len() == 1 {
                chart.draw_series(std::iter::once(Circle::new(
                    seg[0],
                    line.width.max(2),
                    line.color.filled(),
                )))?;
            } else {
                // Thick lines are joined with mitres, which at a hairpin turn (a flux
                // spike at a layer interface) reach far across the figure in the raster
                // output: draw the line in runs that turn by at most 90° at each point.
                let px: Vec<(i32, i32)> = seg.iter().map(|&q| chart.backend_coord(&q)).collect();
                for (a, b) in gentle_runs(&px) {
                    chart.draw_series(LineSeries::new(
                        seg[a..=b].iter().copied(),
                        line.color.stroke_width(line.width),
                    ))?;
                }
            }
        }
    }
    Ok(())
}

/// Index ranges `(first, last)` (inclusive, consecutive ranges share their end point)
/// that split a polyline in pixel coordinates wherever it turns by more than 90°
/// (consecutive segment vectors with a negative dot product). Repeated points are
/// skipped when judging the turn. A line of fewer than two points gives one range.
pub fn gentle_runs(px: &[(i32, i32)]) -> Vec<(usize, usize)> {
    let mut out = Vec::new();
    if px.len() < 2 {
        out.push((0, px.len().saturating_sub(1)));
        return out;
    }
    let mut start = 0;
    // Direction of the last segment of non-zero length in the current run.
    let mut last: Option<(i64, i64)> = None;
    for i in 1..px.len() {
        let d = (
            i64::from(px[i].0) - i64::from(px[i - 1].0),
            i64::from(px[i].1) - i64::from(px[i - 1].1),
        );
        if d == (0, 0) {
            continue;
        }
        if let Some(l) = last {
            if l.0 * d.0 + l.1 * d.1 < 0 {
                out.push((start, i - 1));
                start = i - 1;
            }
        }
        last = Some(d);
    }
    out.push((start, px.len() - 1));
    out
}

/// Runs of consecutive points both axes can show and that lie on the axes.
pub fn segments(points: &[(f64, f64)], x: &Axis, y: &Axis) -> Vec<Vec<(f64, f64)>> {
    let mut out = Vec::new();
    let mut cur: Vec<(f64, f64)> = Vec::new();
    for &(a, b) in points {
        if x.contains(a) && y.contains(b) {
            cur.push((a, b));
        } else if !cur.is_empty() {
            out.push(std::mem::take(&mut cur));
        }
    }
    if !cur.is_empty() {
        out.push(cur);
    }
    out
}

/// At most about `2 * buckets` points of a line with many points: the first and the last
/// point and, in each of `buckets` equal slices of the x axis, the points with the
/// smallest and largest y (in their order). Lines no longer than that are unchanged.
pub fn thin(points: &[(f64, f64)], x: &Axis, buckets: usize) -> Vec<(f64, f64)> {
    if points.len() <= 2 * buckets + 2 {
        return points.to_vec();
    }
    let mut out = Vec::with_capacity(2 * buckets + 2);
    let mut i = 0;
    while i < points.len() {
        let b = bucket(x, points[i].0, buckets);
        let mut j = i;
        let (mut lo, mut hi) = (i, i);
        while j < points.len() && bucket(x, points[j].0, buckets) == b {
            if points[j].1 < points[lo].1 {
                lo = j;
            }
            if points[j].1 > points[hi].1 {
                hi = j;
            }
            j += 1;
        }
        let mut keep = vec![i, lo, hi, j - 1];
        keep.sort_unstable();
        keep.dedup();
        out.extend(keep.into_iter().map(|k| points[k]));
        i = j;
    }
    out
}

fn bucket(x: &Axis, v: f64, buckets: usize) -> i64 {
    let f = x.fraction(v);
    if f.is_finite() {
        (f * buckets as f64).floor() as i64
    } else {
        i64::MIN
    }
}

/// Stroke widths for `n` lines drawn in order: from 5 px down to 2 px, so that a line
/// hidden under a later one still shows at its edges.
pub fn widths(n: usize) -> Vec<u32> {
    (0..n)
        .map(|i| {
            if n <= 1 {
                2
            } else {
                (5.0 - 3.0 * i as f64 / (n - 1) as f64).round() as u32
            }
        })
        .collect()
}

/// `n` colours running from dark blue through green and amber to dark red: a line's
/// colour tells its place in time order.
pub fn sequence(n: usize) -> Vec<RGBColor> {
    const STOPS: [(f64, f64, f64); 6] = [
        (32.0, 48.0, 140.0),
        (20.0, 120.0, 190.0),
        (30.0, 150.0, 90.0),
        (200.0, 160.0, 20.0),
        (220.0, 90.0, 30.0),
        (150.0, 20.0, 50.0),
    ];
    (0..n)
        .map(|i| {
            let f = if n <= 1 {
                0.0
            } else {
                i as f64 / (n - 1) as f64
            } * (STOPS.len() - 1) as f64;
            let k = (f.floor() as usize).min(STOPS.len() - 2);
            let t = f - k as f64;
            let (a, b) = (STOPS[k], STOPS[k + 1]);
            let mix = |p: f64, q: f64| (p + t * (q - p)).round() as u8;
            RGBColor(mix(a.0, b.0), mix(a.1, b.1), mix(a.2, b.2))
        })
        .collect()
}
