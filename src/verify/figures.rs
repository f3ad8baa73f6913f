//! SVG figures of the verification report (plotters, SVG backend only): model values as
//! markers, references as lines.

use super::{Figure, Style};
use crate::error::{Error, Result};
use plotters::coord::ranged1d::{AsRangedCoord, ValueFormatter};
use plotters::prelude::*;

const COLORS: [RGBColor; 6] = [
    RGBColor(31, 119, 180),
    RGBColor(214, 39, 40),
    RGBColor(44, 160, 44),
    RGBColor(148, 103, 189),
    RGBColor(255, 127, 14),
    RGBColor(23, 190, 207),
];

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
        let root = SVGBackend::with_string(&mut out, (720, 480)).into_drawing_area();
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
    let mut chart = ChartBuilder::on(root)
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
    let yfmt = move |v: &f64| fmt(&(v * sign + 0.0));
    chart
        .configure_mesh()
        .x_desc(fig.x_label.as_str())
        .y_desc(fig.y_label.as_str())
        .x_label_formatter(&fmt)
        .y_label_formatter(&yfmt)
        .light_line_style(RGBColor(235, 235, 235))
        .draw()
        .map_err(e)?;
    for (k, s) in fig.series.iter().enumerate() {
        let color = COLORS[k % COLORS.len()];
        let pts: Vec<(f64, f64)> = s
            .points
            .iter()
            .filter(|p| p.0.is_finite() && p.1.is_finite())
            .filter(|p| (!fig.log_x || p.0 > 0.0) && (!fig.log_y || p.1 * sign > 0.0))
            .map(|p| (p.0, p.1 * sign))
            .collect();
        match s.style {
            Style::Line => {
                chart
                    .draw_series(LineSeries::new(pts, color.stroke_width(2)))
                    .map_err(e)?
                    .label(s.label.as_str())
                    .legend(move |(x, y)| {
                        PathElement::new(vec![(x, y), (x + 18, y)], color.stroke_width(2))
                    });
            }
            Style::Points => {
                chart
                    .draw_series(pts.into_iter().map(|p| Circle::new(p, 3, color.filled())))
                    .map_err(e)?
                    .label(s.label.as_str())
                    .legend(move |(x, y)| Circle::new((x + 9, y), 3, color.filled()));
            }
        }
    }
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .position(SeriesLabelPosition::UpperRight)
        .draw()
        .map_err(e)?;
    Ok(())
}
