//! Pictures of an ensemble folder: a fan chart per kept series (the 5–95 % and 25–75 %
//! quantile lines and the median over the members that ran, against time) and, per kept
//! series, the value at the last kept time against each parameter (one point a member).

use super::{quantiles_of, status, Member, QUANTILES};
use crate::error::Result;
use crate::output::diagnostics::SeriesRecord;
use crate::plot::chart::{sequence, Figure, Line, Panel};
use crate::plot::scale::Scale;
use crate::plot::{axis_for, time_axis, write_figure};
use std::path::{Path, PathBuf};

/// Marker strokes for a point (a small cross in data units `dx`, `dy`), NaN-separated.
fn cross(x: f64, y: f64, dx: f64, dy: f64, out: &mut Vec<(f64, f64)>) {
    let nan = (f64::NAN, f64::NAN);
    out.extend([(x - dx, y), (x + dx, y), nan, (x, y - dy), (x, y + dy), nan]);
}

/// Writes `ensemble-fan-<series>` and `ensemble-scatter-<series>` (SVG and PNG) into
/// `out`; returns the files.
pub fn plot(dir: &Path, out: &Path) -> Result<Vec<PathBuf>> {
    let (plan, members) = status(dir)?;
    std::fs::create_dir_all(out).map_err(|e| crate::error::Error::io(out, e))?;
    let t = &plan.times_year;
    let nt = t.len();
    let done: Vec<(usize, &Vec<Vec<f64>>)> = members
        .iter()
        .enumerate()
        .filter_map(|(i, m)| match m {
            Member::Done { series, .. } => Some((i, series)),
            _ => None,
        })
        .collect();
    let mut files = Vec::new();
    let title = format!(
        "Ensemble of {} ({} of {} members ran)",
        plan.case
            .file_name()
            .map_or(String::new(), |f| f.to_string_lossy().into_owned()),
        done.len(),
        members.len()
    );
    for (s, name) in plan.series.iter().enumerate() {
        let unit = SeriesRecord::FIELDS
            .iter()
            .find(|f| f.0 == name)
            .map_or("1", |f| f.1);
        // Quantile lines over time.
        let colors = sequence(3);
        let mut lines = Vec::new();
        let mut all = Vec::new();
        let qs: Vec<_> = (0..nt)
            .map(|j| quantiles_of(done.iter().map(|(_, ser)| ser[s][j])))
            .collect();
        for k in 0..QUANTILES.len() {
            let pts: Vec<(f64, f64)> = (0..nt).map(|j| (t[j], qs[j][k])).collect();
            all.extend(pts.iter().map(|p| p.1));
            let band = k.min(QUANTILES.len() - 1 - k); // 0 outer, 1 inner, 2 median
            let label = match band {
                0 => "5 % and 95 %".to_string(),
                1 => "25 % and 75 %".to_string(),
                _ => "median".to_string(),
            };
            lines.push(Line {
                label,
                color: colors[band],
                width: 1 + band as u32,
                points: pts,
            });
        }
        let fig = Figure {
            title: title.clone(),
            subtitle: format!("{name}: quantiles over the members"),
            panels: vec![Panel {
                heading: String::new(),
                x: time_axis(t, false),
                y: axis_for(Scale::Linear, all.into_iter().filter(|v| v.is_finite())),
                x_label: "time [yr]".into(),
                y_label: format!("{name} [{unit}]"),
                lines,
                x_zero: false,
                y_zero: true,
            }],
            columns: 1,
            size: (1000, 700),
            legend_heading: "quantile".into(),
        };
        files.extend(write_figure(out, &format!("ensemble-fan-{name}"), &fig)?);
        // Outcome at the last kept time against each parameter.
        let mut panels = Vec::new();
        for (k, p) in plan.parameters.iter().enumerate() {
            let xs: Vec<f64> = done.iter().map(|(i, _)| plan.member(*i)[k]).collect();
            let ys: Vec<f64> = done.iter().map(|(_, ser)| ser[s][nt - 1]).collect();
            let log = matches!(p.distribution, super::plan::Distribution::LogUniform { .. });
            let x = axis_for(
                if log { Scale::Log } else { Scale::Linear },
                xs.iter().cloned(),
            );
            let y = axis_for(Scale::Linear, ys.iter().cloned().filter(|v| v.is_finite()));
            let dy = 0.012 * (y.hi - y.lo);
            let mut pts = Vec::new();
            for (a, b) in xs.iter().zip(&ys) {
                if b.is_finite() {
                    // The cross's arms: 1 % of the axis (in ln for a log axis).
                    let dx = if log {
                        a * 0.01 * (x.hi / x.lo).ln()
                    } else {
                        0.01 * (x.hi - x.lo)
                    };
                    cross(*a, *b, dx, dy, &mut pts);
                }
            }
            panels.push(Panel {
                heading: p.key.clone(),
                x,
                y,
                x_label: p.key.rsplit('.').next().unwrap_or(&p.key).to_string(),
                y_label: format!("{name} at {} yr [{unit}]", t[nt - 1]),
                lines: vec![Line {
                    label: "member".into(),
                    color: sequence(1)[0],
                    width: 2,
                    points: pts,
                }],
                x_zero: false,
                y_zero: false,
            });
        }
        let columns = panels.len().min(2);
        let rows = panels.len().div_ceil(2) as u32;
        let fig = Figure {
            title: title.clone(),
            subtitle: format!("{name} at {} yr against each parameter", t[nt - 1]),
            panels,
            columns,
            size: (1200, 120 + 420 * rows),
            legend_heading: String::new(),
        };
        files.extend(write_figure(
            out,
            &format!("ensemble-scatter-{name}"),
            &fig,
        )?);
    }
    Ok(files)
}
