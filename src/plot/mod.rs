//! `deepdry plot`: pictures of a results file, as SVG and PNG.
//!
//! Profiles against depth (surface at the top) at a few snapshot times, one line per
//! time: temperature, suction (log), liquid content, relative humidity and the four parts
//! of the water flux (symmetric log, mm/yr). Time series: water flux at the surface and
//! the bottom, drying-front depth, water storage and relative balance errors.
//!
//! Every text is laid out with a font embedded in the binary (see [`chart`]), so the
//! pictures do not depend on the fonts a machine has.

pub mod chart;
pub mod data;
pub mod palette;
pub mod scale;
pub mod solutes;
pub mod times;

use crate::error::{Error, Result};
use chart::{Figure, Line, Panel};
use plotters::prelude::*;
use scale::{Axis, Scale, SymLog};
use std::path::{Path, PathBuf};

/// Seconds in a year (365.25 days); the results file's time unit.
pub const YEAR: f64 = 365.25 * 86_400.0;
/// kg m-2 s-1 of water to mm/yr (1 kg m-2 of water is 1 mm).
pub const FLUX_TO_MM_PER_YEAR: f64 = YEAR;
/// Smallest suction drawn [m]: heads above −SUCTION_FLOOR (wetter, including h ≥ 0)
/// are drawn at this suction on the log axis.
pub const SUCTION_FLOOR: f64 = 1e-3;
/// Decades between the largest flux and the edge of the symmetric-log linear band.
pub const SYMLOG_DECADES: i32 = 4;
/// The time axis is logarithmic when the run spans more than this many decades.
pub const AUTO_LOG_TIME_DECADES: f64 = 3.0;
/// Lines of the time series are thinned to about twice this many points.
const SERIES_BUCKETS: usize = 1500;

/// Options of `deepdry plot`.
#[derive(Debug, Clone, Default)]
pub struct PlotOptions {
    /// Output folder (default: the results file's folder); created when missing.
    pub out: Option<PathBuf>,
    /// Snapshot times to draw [year]; the nearest snapshots are drawn. Default: up to
    /// [`times::DEFAULT_COUNT`] snapshots spread in log time.
    pub times: Option<Vec<f64>>,
    /// Logarithmic time axis for the series (also chosen automatically for long runs).
    pub log_time: bool,
    /// The year a log time axis counts from [year] (the axis shows years after it).
    /// Default: the case's `output.log_origin_year` when it has one, else the first
    /// time of the series (the run's start).
    pub time_origin: Option<f64>,
    /// For the results of a branch: the series of its parent run (found through the
    /// branch's `parent_checkpoint`) before the branch year, joined in front of the
    /// branch's own; the profiles stay the branch's.
    pub with_parent: bool,
}

/// What `deepdry plot` wrote, and notes for the user (one line each).
#[derive(Debug, Clone, Default)]
pub struct Plotted {
    pub files: Vec<PathBuf>,
    pub notes: Vec<String>,
}

/// Draws every plot of the results file `path`; returns the files written (SVG and PNG
/// of each plot).
pub fn plot_results(path: &Path, opts: &PlotOptions) -> Result<Vec<PathBuf>> {
    plot_results_with_notes(path, opts).map(|p| p.files)
}

/// [`plot_results`], with the notes the user should see (points a log time axis leaves
/// out).
pub fn plot_results_with_notes(path: &Path, opts: &PlotOptions) -> Result<Plotted> {
    if let Some(o) = opts.time_origin {
        if !o.is_finite() {
            return Err(Error::input(format!(
                "--time-origin: {o}: must be a finite year"
            )));
        }
    }
    let mut res = data::read(path)?;
    let mut notes = Vec::new();
    if opts.with_parent {
        let (parent_path, year) = data::parent_of(path)?;
        let parent = data::read(&parent_path)?;
        data::join_parent(&mut res, &parent, year)?;
        notes.push(format!(
            "series joined with the parent run's {} up to year {} (the branch year)",
            parent_path.display(),
            format_years(year).replace('−', "-")
        ));
    }
    let snaps = match &opts.times {
        Some(t) if !t.is_empty() => times::pick_nearest(&res.profiles.time, t)
            .map_err(|e| Error::input(format!("{}: {e}", path.display())))?,
        _ => times::pick_default_with(&res.profiles.time, times::DEFAULT_COUNT, &res.asked_times),
    };
    if snaps.is_empty() {
        return Err(Error::input(format!(
            "{}: the results file has no snapshots to plot",
            path.display()
        )));
    }
    let out = out_folder(path, opts.out.as_deref())?;
    let mut figures = profile_figures(&res, &snaps);
    figures.extend(solutes::solute_figures(&res, &snaps));
    let origin = opts
        .time_origin
        .or(res.log_origin_year)
        .unwrap_or_else(|| res.series.time.first().copied().unwrap_or(0.0));
    if !res.series.time.is_empty() {
        let t = series_time_axis(&res.series.time, origin, opts.log_time);
        let left_out = t.left_out(&res.series.time);
        if left_out > 0 {
            notes.push(format!(
                "{left_out} of {} series records are at or before the time origin, year {}, \
                 and are left out of the log time axis (--time-origin sets the origin)",
                res.series.time.len(),
                format_years(origin).replace('−', "-")
            ));
        }
        figures.extend(series_figures_on(&res, t));
    }
    chart::register_fonts();
    let mut files = Vec::new();
    for (name, fig) in &figures {
        files.extend(write_figure(&out, name, fig)?);
    }
    Ok(Plotted { files, notes })
}

/// The output folder, created when missing; an [`Error::Io`] when it cannot be.
fn out_folder(results: &Path, out: Option<&Path>) -> Result<PathBuf> {
    let dir = match out {
        Some(d) => d.to_path_buf(),
        None => match results.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        },
    };
    if dir.exists() && !dir.is_dir() {
        return Err(Error::io(&dir, "output folder is not a folder"));
    }
    std::fs::create_dir_all(&dir)
        .map_err(|e| Error::io(&dir, format!("cannot create the output folder: {e}")))?;
    // Writing is checked up front so that a read-only folder gives one clear error
    // before any picture is drawn.
    let probe = dir.join(".deepdry-plot-write-test");
    std::fs::write(&probe, b"")
        .map_err(|e| Error::io(&dir, format!("cannot write to the output folder: {e}")))?;
    let _ = std::fs::remove_file(&probe);
    Ok(dir)
}

/// Writes `NAME.svg` and `NAME.png` into `dir`.
pub fn write_figure(dir: &Path, name: &str, fig: &Figure) -> Result<Vec<PathBuf>> {
    chart::register_fonts();
    let svg = dir.join(format!("{name}.svg"));
    let png = dir.join(format!("{name}.png"));
    {
        let root = SVGBackend::new(&svg, fig.size).into_drawing_area();
        chart::draw(&root, fig).map_err(|e| Error::io(&svg, e))?;
        root.present().map_err(|e| Error::io(&svg, e))?;
    }
    {
        let root = BitMapBackend::new(&png, fig.size).into_drawing_area();
        chart::draw(&root, fig).map_err(|e| Error::io(&png, e))?;
        root.present().map_err(|e| Error::io(&png, e))?;
    }
    Ok(vec![svg, png])
}

/// A time in years for legends and titles: `0`, `0.25`, `1500`, `2.5×10⁶`.
pub fn format_years(t: f64) -> String {
    let a = t.abs();
    if a == 0.0 {
        return "0".into();
    }
    if !(1e-3..1e6).contains(&a) {
        return scale::format_real(t);
    }
    // Four significant digits (all integer digits from 10⁴ on), trailing zeros dropped.
    let decimals = (3 - a.log10().floor() as i32).max(0) as usize;
    let s = format!("{t:.decimals$}");
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

pub(crate) fn title_of(res: &Results) -> String {
    if res.title.trim().is_empty() {
        res.path
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_default()
    } else {
        res.title.clone()
    }
}

use data::Results;

/// The depth axis: surface at the top, linear, over the whole column.
pub(crate) fn depth_axis(res: &Results) -> Axis {
    let bottom = res.face_depth.last().copied().unwrap_or(1.0);
    let top = res.face_depth.first().copied().unwrap_or(0.0);
    let (top, bottom) = if bottom > top {
        (top, bottom)
    } else {
        (0.0, 1.0)
    };
    Axis::new(Scale::Linear, top, bottom).reversed()
}

pub(crate) fn axis_for(scale: Scale, values: impl IntoIterator<Item = f64>) -> Axis {
    let (lo, hi) = scale.range_for(values).unwrap_or(match scale {
        Scale::Linear => (0.0, 1.0),
        Scale::Log => (1e-3, 1.0),
        Scale::SymLog(s) => (-s.linear, s.linear),
    });
    Axis::new(scale, lo, hi)
}

pub(crate) fn times_text(res: &Results, snaps: &[usize]) -> String {
    let t: Vec<f64> = snaps.iter().map(|&i| res.profiles.time[i]).collect();
    match t.len() {
        1 => format!("at t = {} yr", format_years(t[0])),
        n => format!(
            "at {n} times, t = {} to {} yr",
            format_years(t[0]),
            format_years(t[n - 1])
        ),
    }
}

pub(crate) fn time_lines(
    res: &Results,
    snaps: &[usize],
    depth: &[f64],
    rows: &[Vec<f64>],
    f: impl Fn(f64) -> f64,
) -> Vec<Line> {
    let colors = chart::sequence(snaps.len());
    let widths = chart::widths(snaps.len());
    snaps
        .iter()
        .zip(colors.into_iter().zip(widths))
        .map(|(&i, (color, width))| Line {
            label: format!("t = {} yr", format_years(res.profiles.time[i])),
            color,
            width,
            points: rows[i]
                .iter()
                .zip(depth)
                .map(|(v, z)| (f(*v), *z))
                .collect(),
        })
        .collect()
}

pub(crate) fn values<'a>(lines: &'a [Line]) -> impl Iterator<Item = f64> + 'a {
    lines.iter().flat_map(|l| l.points.iter().map(|p| p.0))
}

/// One panel of profiles against depth (surface at the top), one line per snapshot of
/// `snaps`, titled with the run and `what` at those times.
pub(crate) fn depth_figure(
    res: &Results,
    snaps: &[usize],
    what: &str,
    x: Axis,
    x_label: String,
    lines: Vec<Line>,
    x_zero: bool,
) -> Figure {
    Figure {
        title: title_of(res),
        subtitle: format!("{what} {}", times_text(res, snaps)),
        panels: vec![Panel {
            heading: String::new(),
            x,
            y: depth_axis(res),
            x_label,
            y_label: "depth [m]".into(),
            lines,
            x_zero,
            y_zero: false,
        }],
        columns: 1,
        size: (1000, 760),
        legend_heading: "snapshot".into(),
    }
}

/// The profile figures (name, figure).
pub fn profile_figures(res: &Results, snaps: &[usize]) -> Vec<(String, Figure)> {
    let p = &res.profiles;
    let single = |what: &str, x: Axis, x_label: String, lines: Vec<Line>, x_zero: bool| {
        depth_figure(res, snaps, what, x, x_label, lines, x_zero)
    };
    let mut figs = Vec::new();

    let lines = time_lines(res, snaps, &res.depth, &p.temperature, |v| v);
    let x = axis_for(Scale::Linear, values(&lines));
    figs.push((
        "profiles-temperature".to_string(),
        single(
            "temperature profiles",
            x,
            "temperature [°C]".into(),
            lines,
            false,
        ),
    ));

    let lines = time_lines(res, snaps, &res.depth, &p.head, |h| {
        if h.is_finite() {
            (-h).max(SUCTION_FLOOR)
        } else {
            h
        }
    });
    let x = axis_for(Scale::Log, values(&lines));
    figs.push((
        "profiles-suction".to_string(),
        single(
            "water potential (suction) profiles",
            x,
            format!(
                "suction −h [m], log scale (h > −{} m, incl. h ≥ 0, drawn at {} m)",
                scale::format_real(SUCTION_FLOOR),
                scale::format_real(SUCTION_FLOOR)
            ),
            lines,
            false,
        ),
    ));

    let lines = time_lines(res, snaps, &res.depth, &p.liquid_content, |v| v);
    let x = axis_for(Scale::Linear, values(&lines));
    figs.push((
        "profiles-liquid-content".to_string(),
        single(
            "liquid water content profiles",
            x,
            "volumetric liquid content θ [m³ m⁻³]".into(),
            lines,
            false,
        ),
    ));

    let lines = time_lines(res, snaps, &res.depth, &p.relative_humidity, |v| v);
    let x = axis_for(Scale::Linear, values(&lines));
    figs.push((
        "profiles-relative-humidity".to_string(),
        single(
            "pore-air relative humidity profiles",
            x,
            "relative humidity [-]".into(),
            lines,
            false,
        ),
    ));

    // The four water-flux parts on one shared symmetric-log axis.
    let parts: [(&str, &Vec<Vec<f64>>); 4] = [
        (
            "liquid, isothermal (head and gravity)",
            &p.liquid_flux_isothermal,
        ),
        (
            "liquid, thermal (temperature gradient)",
            &p.liquid_flux_thermal,
        ),
        ("vapour, isothermal", &p.vapor_flux_isothermal),
        (
            "vapour, thermal (temperature gradient)",
            &p.vapor_flux_thermal,
        ),
    ];
    let part_lines: Vec<Vec<Line>> = parts
        .iter()
        .map(|(_, rows)| {
            time_lines(res, snaps, &res.face_depth, rows, |v| {
                v * FLUX_TO_MM_PER_YEAR
            })
        })
        .collect();
    let max_abs = part_lines
        .iter()
        .flat_map(|l| values(l).collect::<Vec<_>>())
        .filter(|v| v.is_finite())
        .fold(0.0f64, |m, v| m.max(v.abs()));
    let sl = SymLog::for_data(max_abs, SYMLOG_DECADES);
    let x = axis_for(
        Scale::SymLog(sl),
        part_lines
            .iter()
            .flat_map(|l| values(l).collect::<Vec<_>>()),
    );
    let x_label = format!(
        "water flux [mm/yr], + downward; symmetric log, linear within ±{}",
        scale::format_real(sl.linear)
    );
    let panels = parts
        .iter()
        .zip(part_lines)
        .map(|((name, _), lines)| Panel {
            heading: name.to_string(),
            x,
            y: depth_axis(res),
            x_label: x_label.clone(),
            y_label: "depth [m]".into(),
            lines,
            x_zero: true,
            y_zero: false,
        })
        .collect();
    figs.push((
        "profiles-water-fluxes".to_string(),
        Figure {
            title: title_of(res),
            subtitle: format!("water flux parts {}", times_text(res, snaps)),
            panels,
            columns: 2,
            size: (1500, 1150),
            legend_heading: "snapshot".into(),
        },
    ));
    figs
}

/// The time axis of the series and how a time maps onto it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TimeAxis {
    pub axis: Axis,
    /// On a log axis, the year it counts from (a time t is drawn at t − origin); `None`
    /// on a linear axis, which shows the years themselves.
    pub origin: Option<f64>,
}

impl TimeAxis {
    /// Where time `t` [year] is drawn.
    pub fn x(&self, t: f64) -> f64 {
        match self.origin {
            Some(o) => t - o,
            None => t,
        }
    }

    /// How many of `time` a log axis leaves out (finite times at or before the origin).
    pub fn left_out(&self, time: &[f64]) -> usize {
        match self.origin {
            Some(o) => time.iter().filter(|t| t.is_finite() && **t <= o).count(),
            None => 0,
        }
    }

    /// The axis label: "time [yr]", or "time [years after year O], log scale".
    pub fn label(&self) -> String {
        match self.origin {
            Some(o) => format!("time [years after year {}], log scale", format_years(o)),
            None => "time [yr]".into(),
        }
    }
}

/// The time axis of the series for times counted from `origin` [year]: log (years after
/// the origin; times at or before it cannot be shown) when asked for or when the times
/// after the origin span more than [`AUTO_LOG_TIME_DECADES`] decades, else linear in
/// years. A log axis needs a time after the origin; without one the axis is linear.
pub fn series_time_axis(time: &[f64], origin: f64, log_time: bool) -> TimeAxis {
    let after: Vec<f64> = time
        .iter()
        .filter(|t| t.is_finite())
        .map(|t| t - origin)
        .collect();
    let pos_min = after
        .iter()
        .cloned()
        .filter(|t| *t > 0.0)
        .fold(f64::INFINITY, f64::min);
    let max = after.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
    let spans = pos_min.is_finite() && max > 0.0 && (max / pos_min).log10() > AUTO_LOG_TIME_DECADES;
    if (log_time || spans) && pos_min.is_finite() {
        return TimeAxis {
            axis: axis_for(Scale::Log, after),
            origin: Some(origin),
        };
    }
    TimeAxis {
        axis: linear_time_axis(time),
        origin: None,
    }
}

/// A linear axis in years over the finite times of `time`.
fn linear_time_axis(time: &[f64]) -> Axis {
    let (min, max) = finite_range(time);
    if min.is_finite() && max > min {
        Axis::new(Scale::Linear, min, max)
    } else {
        axis_for(Scale::Linear, time.iter().cloned())
    }
}

/// The smallest and largest finite values of `v` (∞, −∞ when there are none).
fn finite_range(v: &[f64]) -> (f64, f64) {
    v.iter()
        .filter(|x| x.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &x| {
            (lo.min(x), hi.max(x))
        })
}

/// [`series_time_axis`] counted from year 0.
pub fn time_axis(time: &[f64], log_time: bool) -> Axis {
    series_time_axis(time, 0.0, log_time).axis
}

/// The time-series figures (name, figure) on a time axis counted from year 0; none when
/// the file has no series rows.
pub fn series_figures(res: &Results, log_time: bool) -> Vec<(String, Figure)> {
    if res.series.time.is_empty() {
        return Vec::new();
    }
    series_figures_on(res, series_time_axis(&res.series.time, 0.0, log_time))
}

/// The time-series figures on the time axis `ta`; none when the file has no series rows.
pub fn series_figures_on(res: &Results, ta: TimeAxis) -> Vec<(String, Figure)> {
    let s = &res.series;
    if s.time.is_empty() {
        return Vec::new();
    }
    let title = title_of(res);
    let t = ta.axis;
    let left_out = ta.left_out(&s.time);
    let span = format!(
        "t = {} to {} yr{}",
        format_years(s.time.iter().cloned().fold(f64::INFINITY, f64::min)),
        format_years(s.time.iter().cloned().fold(f64::NEG_INFINITY, f64::max)),
        match ta.origin {
            Some(o) if left_out > 0 => format!(
                " ({left_out} record{} at or before year {} not on the log axis)",
                if left_out == 1 { "" } else { "s" },
                format_years(o)
            ),
            _ => String::new(),
        }
    ) + &match &res.parent {
        Some((_, y)) => format!(
            "; the parent run's up to year {}, this branch's after",
            format_years(*y)
        ),
        None => String::new(),
    };
    // Two colours of the palette two lightness steps apart (dark navy, light orange),
    // distinct in grey as in colour; the first line is drawn wider so that it shows
    // beside the second where they overlap.
    let blue = palette::PALETTE[0];
    let red = palette::PALETTE[3];
    // A series line on the time axis `axis`, the record times mapped by `x_of`.
    let line_on = |axis: &Axis,
                   x_of: &dyn Fn(f64) -> f64,
                   label: &str,
                   color: RGBColor,
                   v: &[f64],
                   f: &dyn Fn(f64) -> f64| Line {
        label: label.into(),
        color,
        width: if color == blue { 3 } else { 2 },
        points: chart::thin(
            &s.time
                .iter()
                .zip(v)
                .map(|(t_, v)| (x_of(*t_), f(*v)))
                .filter(|(x, _)| axis.scale.shows(*x))
                .collect::<Vec<_>>(),
            axis,
            SERIES_BUCKETS,
        ),
    };
    let line = |label: &str, color: RGBColor, v: &[f64], f: &dyn Fn(f64) -> f64| {
        line_on(&t, &|x| ta.x(x), label, color, v, f)
    };
    let single =
        |what: &str, y: Axis, y_label: &str, lines: Vec<Line>, y_zero: bool, key: &str| Figure {
            title: title.clone(),
            subtitle: format!("{what}, {span}"),
            panels: vec![Panel {
                heading: String::new(),
                x: t,
                y,
                x_label: ta.label(),
                y_label: y_label.into(),
                lines,
                x_zero: false,
                y_zero,
            }],
            columns: 1,
            size: (1100, 720),
            legend_heading: key.into(),
        };
    let yvalues = |lines: &[Line]| -> Vec<f64> {
        lines
            .iter()
            .flat_map(|l| l.points.iter().map(|p| p.1))
            .collect()
    };
    let mut figs = Vec::new();

    let mm = |v: f64| v * FLUX_TO_MM_PER_YEAR;
    let lines = vec![
        line("surface", blue, &s.surface_water_flux, &mm),
        line("bottom", red, &s.bottom_water_flux, &mm),
    ];
    let vals = yvalues(&lines);
    let max_abs = vals
        .iter()
        .filter(|v| v.is_finite())
        .fold(0.0f64, |m, v| m.max(v.abs()));
    let sl = SymLog::for_data(max_abs, SYMLOG_DECADES);
    let y = axis_for(Scale::SymLog(sl), vals);
    figs.push((
        "series-water-fluxes".to_string(),
        single(
            "net water flux at the boundaries",
            y,
            &format!(
                "water flux [mm/yr], + downward; symmetric log, linear within ±{}",
                scale::format_real(sl.linear)
            ),
            lines,
            true,
            "boundary",
        ),
    ));

    if !s.root_water_uptake.is_empty() && !s.potential_transpiration.is_empty() {
        let lines = vec![
            line(
                "actual (root water uptake)",
                blue,
                &s.root_water_uptake,
                &mm,
            ),
            line("potential", red, &s.potential_transpiration, &mm),
        ];
        let y = axis_for(Scale::Linear, yvalues(&lines));
        figs.push((
            "series-transpiration".to_string(),
            single(
                "transpiration: actual (root water uptake) and potential",
                y,
                "transpiration [mm/yr]",
                lines,
                true,
                "transpiration",
            ),
        ));
        let same = |v: f64| v;
        let lines = vec![
            line("actual", blue, &s.root_water_uptake_cumulative, &same),
            line(
                "potential",
                red,
                &s.potential_transpiration_cumulative,
                &same,
            ),
        ];
        let y = axis_for(Scale::Linear, yvalues(&lines));
        figs.push((
            "series-transpiration-cumulative".to_string(),
            single(
                "cumulative transpiration: actual and potential",
                y,
                "cumulative transpiration [kg m⁻² = mm]",
                lines,
                true,
                "transpiration",
            ),
        ));
    }

    if !s.ponding_depth.is_empty() && !s.runoff_cumulative.is_empty() {
        // Floods are events in linear time (days within decades): this figure keeps a
        // linear time axis whatever the others use, and the pond (mm) and the runoff
        // (metres over a long run) get a panel each.
        let tl = linear_time_axis(&s.time);
        let (lo, hi) = finite_range(&s.time);
        let linear_line = |label: &str, color: RGBColor, v: &[f64], f: &dyn Fn(f64) -> f64| {
            line_on(&tl, &|x| x, label, color, v, f)
        };
        let pond = vec![linear_line("ponding depth", blue, &s.ponding_depth, &|v| {
            v * 1.0e3
        })];
        let runoff = vec![linear_line(
            "cumulative runoff",
            red,
            &s.runoff_cumulative,
            &|v| v * 1.0e-3,
        )];
        let panel = |heading: &str, y_label: &str, lines: Vec<Line>| Panel {
            heading: heading.into(),
            x: tl,
            y: axis_for(Scale::Linear, yvalues(&lines)),
            x_label: "time [yr]".into(),
            y_label: y_label.into(),
            lines,
            x_zero: false,
            y_zero: true,
        };
        let span_linear = format!(
            "t = {} to {} yr{}",
            format_years(lo),
            format_years(hi),
            match &res.parent {
                Some((_, y)) => format!(
                    "; the parent run's up to year {}, this branch's after",
                    format_years(*y)
                ),
                None => String::new(),
            }
        );
        figs.push((
            "series-ponding".to_string(),
            Figure {
                title: title.clone(),
                subtitle: format!(
                    "surface store: ponding depth and cumulative runoff, {span_linear}"
                ),
                panels: vec![
                    panel("water standing on the surface", "ponding depth [mm]", pond),
                    panel(
                        "water run off above the largest ponding depth",
                        "cumulative runoff [m of water]",
                        runoff,
                    ),
                ],
                columns: 1,
                size: (1100, 1000),
                legend_heading: "surface store".into(),
            },
        ));
    }

    let id = |v: f64| v;
    let lines = vec![line("drying front", blue, &s.drying_front_depth, &id)];
    let vals = yvalues(&lines);
    let bottom = res.face_depth.last().copied().unwrap_or(1.0);
    let hi = vals
        .iter()
        .cloned()
        .filter(|v| v.is_finite())
        .fold(0.0f64, f64::max);
    let hi = if hi > 0.0 {
        (hi * 1.05).min(bottom.max(hi))
    } else {
        bottom
    };
    let y = Axis::new(Scale::Linear, 0.0, hi).reversed();
    figs.push((
        "series-drying-front".to_string(),
        single(
            "drying-front depth",
            y,
            "drying-front depth [m] (gaps: no dry zone on top)",
            lines,
            false,
            "series",
        ),
    ));

    let lines = vec![line("water storage", blue, &s.water_storage, &id)];
    let y = axis_for(Scale::Linear, yvalues(&lines));
    figs.push((
        "series-water-storage".to_string(),
        single(
            "water stored in the column",
            y,
            "water storage [kg m⁻² = mm]",
            lines,
            false,
            "series",
        ),
    ));

    let abs = |v: f64| v.abs();
    let lines = vec![
        line("water", blue, &s.water_balance_relative_error, &abs),
        line("energy", red, &s.energy_balance_relative_error, &abs),
    ];
    let y = axis_for(Scale::Log, yvalues(&lines));
    figs.push((
        "series-balance-errors".to_string(),
        single(
            "relative balance errors",
            y,
            "|relative balance error| [-], log scale (zeros left out)",
            lines,
            false,
            "balance",
        ),
    ));
    figs
}
