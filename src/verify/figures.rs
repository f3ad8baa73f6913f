//! SVG figures of the verification report (plotters, SVG backend only): model values as
//! markers, references as lines drawn over them, each series in its own colour, marker
//! shape or dash pattern ([`crate::plot::palette`]), and the legend below the chart, where
//! it cannot cover data.

use super::{Figure, Style};
use crate::error::{Error, Result};
use crate::plot::palette::{self, Marker};
use plotters::coord::ranged1d::{AsRangedCoord, ValueFormatter};
use plotters::coord::Shift;
use plotters::prelude::*;

/// Size of the chart [px]; the legend adds [`LEGEND_ROW`] per series below it.
const CHART: (u32, u32) = (720, 480);
const LEGEND_ROW: u32 = 22;
/// Left edge of the legend [px] (about the chart's y-axis).
const LEGEND_X: i32 = 82;

/// Draws `marker` centred on the pixel `(x, y)` of `area` (filled shapes get a thin dark
/// outline so that the light colours show on white).
fn draw_marker<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    marker: Marker,
    (x, y): (i32, i32),
    color: RGBColor,
) -> std::result::Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    let fill = color.filled();
    let edge = RGBColor(40, 40, 40).stroke_width(1);
    let stroke = color.stroke_width(2);
    let outline = |pts: Vec<(i32, i32)>| {
        let mut closed = pts.clone();
        closed.push(pts[0]);
        PathElement::new(closed, edge)
    };
    match marker {
        Marker::Circle => {
            area.draw(&Circle::new((x, y), 4, fill))?;
            area.draw(&Circle::new((x, y), 4, edge))
        }
        Marker::Square => {
            let p = vec![
                (x - 4, y - 4),
                (x + 4, y - 4),
                (x + 4, y + 4),
                (x - 4, y + 4),
            ];
            area.draw(&Polygon::new(p.clone(), fill))?;
            area.draw(&outline(p))
        }
        Marker::Triangle => {
            let p = vec![(x, y - 5), (x + 5, y + 4), (x - 5, y + 4)];
            area.draw(&Polygon::new(p.clone(), fill))?;
            area.draw(&outline(p))
        }
        Marker::Diamond => {
            let p = vec![(x, y - 5), (x + 5, y), (x, y + 5), (x - 5, y)];
            area.draw(&Polygon::new(p.clone(), fill))?;
            area.draw(&outline(p))
        }
        Marker::Cross => {
            area.draw(&PathElement::new(
                vec![(x - 4, y - 4), (x + 4, y + 4)],
                stroke,
            ))?;
            area.draw(&PathElement::new(
                vec![(x - 4, y + 4), (x + 4, y - 4)],
                stroke,
            ))
        }
        Marker::Plus => {
            area.draw(&PathElement::new(vec![(x - 5, y), (x + 5, y)], stroke))?;
            area.draw(&PathElement::new(vec![(x, y - 5), (x, y + 5)], stroke))
        }
    }
}

/// A dashed (or solid) line through pixel points on `area`.
fn draw_line<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    pts: Vec<(i32, i32)>,
    dash: Option<(u32, u32)>,
    color: RGBColor,
) -> std::result::Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    let style = color.stroke_width(2);
    match dash {
        None => area.draw(&PathElement::new(pts, style)),
        Some((on, off)) => area.draw(&plotters::element::DashedPathElement::new(
            pts, on, off, style,
        )),
    }
}

fn bounds(values: impl Iterator<Item = f64>, log: bool) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values {
        if v.is_finite() && (!log || v > 0.0) {
            lo = lo.min(v);
            hi = hi.max(v);
        }
    }
    if !lo.is_finite() {
        return if log { (1e-3, 1.0) } else { (0.0, 1.0) };
    }
    if log {
        if hi <= lo {
            return (lo / 2.0, hi * 2.0);
        }
        let f = (hi / lo).powf(0.05);
        (lo / f, hi * f)
    } else {
        let pad = if hi > lo {
            0.05 * (hi - lo)
        } else {
            0.5 * lo.abs().max(1e-12)
        };
        (lo - pad, hi + pad)
    }
}

/// The figure as an SVG document.
pub fn svg(fig: &Figure) -> Result<String> {
    // Plotters lays out text with the font the plot module embeds (no system fonts).
    crate::plot::chart::register_fonts();
    let mut out = String::new();
    {
        let size = (CHART.0, CHART.1 + 14 + LEGEND_ROW * fig.series.len() as u32);
        let root = SVGBackend::with_string(&mut out, size).into_drawing_area();
        let xs = fig.series.iter().flat_map(|s| s.points.iter().map(|p| p.0));
        let ys = fig.series.iter().flat_map(|s| s.points.iter().map(|p| p.1));
        let (x0, x1) = bounds(xs, fig.log_x);
        let (y0, y1) = bounds(ys, fig.log_y);
        // Depth axes: plot −depth so that depth grows downward, labelled with |y|.
        let (y0, y1, sign) = if fig.y_down {
            (-y1, -y0, -1.0)
        } else {
            (y0, y1, 1.0)
        };
        let r = match (fig.log_x, fig.log_y) {
            (false, false) => draw(&root, fig, x0..x1, y0..y1, sign),
            (true, false) => draw(&root, fig, (x0..x1).log_scale(), y0..y1, sign),
            (false, true) => draw(&root, fig, x0..x1, (y0..y1).log_scale(), sign),
            (true, true) => draw(&root, fig, (x0..x1).log_scale(), (y0..y1).log_scale(), sign),
        };
        r.map_err(|e| Error::Internal(format!("figure '{}': {e}", fig.title)))?;
        root.present()
            .map_err(|e| Error::Internal(format!("figure '{}': {e}", fig.title)))?;
    }
    Ok(out)
}

fn draw<X, Y>(
    root: &DrawingArea<SVGBackend, plotters::coord::Shift>,
    fig: &Figure,
    x: X,
    y: Y,
    sign: f64,
) -> std::result::Result<(), String>
where
    X: AsRangedCoord<Value = f64>,
    Y: AsRangedCoord<Value = f64>,
    X::CoordDescType: ValueFormatter<f64>,
    Y::CoordDescType: ValueFormatter<f64>,
{
    let e = |err: DrawingAreaErrorKind<std::io::Error>| err.to_string();
    root.fill(&WHITE).map_err(e)?;
    let (top, _) = root.split_vertically(CHART.1);
    let mut chart = ChartBuilder::on(&top)
        .caption(&fig.title, ("sans-serif", 18))
        .margin(12)
        .x_label_area_size(44)
        .y_label_area_size(70)
        .build_cartesian_2d(x, y)
        .map_err(e)?;
    let fmt = |v: &f64| {
        let a = v.abs();
        if a != 0.0 && !(1e-3..1e5).contains(&a) {
            format!("{v:.1e}")
        } else {
            format!("{}", (v * 1e6).round() / 1e6)
        }
    };
    // `+ 0.0` turns −0 into 0.
    let yfmt = move |v: &f64| {
        let y = v * sign + 0.0;
        // Depth labels: round-off near the surface reads as 0.
        if sign < 0.0 && y.abs() < 1e-9 {
            "0".to_string()
        } else {
            fmt(&y)
        }
    };
    chart
        .configure_mesh()
        .x_desc(fig.x_label.as_str())
        .y_desc(fig.y_label.as_str())
        .x_label_formatter(&fmt)
        .y_label_formatter(&yfmt)
        .light_line_style(RGBColor(235, 235, 235))
        .draw()
        .map_err(e)?;
    // Markers first, then the reference lines over them (a line hidden under markers
    // would hide the comparison it is there for).
    let pixels = |s: &super::Series| -> Vec<(i32, i32)> {
        s.points
            .iter()
            .filter(|p| p.0.is_finite() && p.1.is_finite())
            .filter(|p| (!fig.log_x || p.0 > 0.0) && (!fig.log_y || p.1 * sign > 0.0))
            .map(|p| chart.backend_coord(&(p.0, p.1 * sign)))
            .collect()
    };
    for pass in [Style::Points, Style::Line] {
        for (k, s) in fig.series.iter().enumerate() {
            if s.style != pass {
                continue;
            }
            let (color, marker, dash) = palette::style(k);
            let pts = pixels(s);
            match s.style {
                Style::Points => {
                    for p in pts {
                        draw_marker(root, marker, p, color).map_err(e)?;
                    }
                }
                Style::Line => draw_line(root, pts, dash, color).map_err(e)?,
            }
        }
    }
    // The legend, below the chart.
    let font = ("sans-serif", 14).into_font().color(&BLACK);
    for (k, s) in fig.series.iter().enumerate() {
        let (color, marker, dash) = palette::style(k);
        let y = CHART.1 as i32 + 12 + LEGEND_ROW as i32 * k as i32;
        match s.style {
            Style::Points => draw_marker(root, marker, (LEGEND_X + 14, y), color).map_err(e)?,
            Style::Line => {
                draw_line(root, vec![(LEGEND_X, y), (LEGEND_X + 30, y)], dash, color).map_err(e)?
            }
        }
        root.draw_text(
            &s.label,
            &font.pos(plotters::style::text_anchor::Pos::new(
                plotters::style::text_anchor::HPos::Left,
                plotters::style::text_anchor::VPos::Center,
            )),
            (LEGEND_X + 40, y),
        )
        .map_err(e)?;
    }
    Ok(())
}
