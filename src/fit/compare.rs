//! `deepdry compare RESULTS.h5 OBS.csv`: model values at the observed times and depths,
//! and per quantity the count, bias, RMSE, weighted RMSE and χ².
//!
//! Model values are taken from the profile written at exactly the observed time (a run
//! writes profiles at the times its case asks for: `output.times_year`, which `--set`
//! can extend), and interpolated linearly in depth between cell centres in the
//! quantity's own scale — temperature in °C, head in m, liquid content in m³ m⁻³, log
//! suction in log10(m) (suctions below [`SUCTION_FLOOR`] m, including saturated soil,
//! read as that floor). Above the first and below the last cell centre the nearest
//! centre's value is taken.
//!
//! Residuals are model − observation; weighted residuals divide by σ. χ² = Σ weighted
//! residual², weighted RMSE = √(χ²/count).

use super::observations::{Observation, Observations, Quantity};
use crate::error::{Error, Result};
use crate::plot::chart::{sequence, Figure, Line, Panel};
use crate::plot::data::Results;
use crate::plot::scale::Scale;
use crate::plot::{axis_for, depth_axis, format_years, write_figure};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// Smallest suction whose logarithm is compared [m] (wetter soil reads as this).
pub const SUCTION_FLOOR: f64 = 1e-3;

/// An observation with the model's value at its time and depth.
#[derive(Debug, Clone)]
pub struct Matched {
    pub obs: Observation,
    pub model: f64,
}

impl Matched {
    pub fn residual(&self) -> f64 {
        self.model - self.obs.value
    }
    pub fn weighted(&self) -> f64 {
        self.residual() / self.obs.sigma
    }
}

/// Statistics of one quantity.
#[derive(Debug, Clone, PartialEq)]
pub struct Stats {
    pub quantity: String,
    pub unit: &'static str,
    pub count: usize,
    pub bias: f64,
    pub rmse: f64,
    pub weighted_rmse: f64,
    pub chi_square: f64,
}

/// Index of the profile written at `t` [year] (within 1e-9 relative), if any.
pub fn profile_at(times: &[f64], t: f64) -> Option<usize> {
    times
        .iter()
        .position(|&x| (x - t).abs() <= 1e-9 * t.abs().max(1.0))
}

/// Linear interpolation of `v` (at increasing `z`) at `x`, constant beyond the ends.
pub fn interpolate(z: &[f64], v: &[f64], x: f64) -> f64 {
    let n = z.len();
    if n == 0 {
        return f64::NAN;
    }
    if x <= z[0] {
        return v[0];
    }
    if x >= z[n - 1] {
        return v[n - 1];
    }
    let k = z.partition_point(|&zz| zz <= x).clamp(1, n - 1);
    let (z0, z1) = (z[k - 1], z[k]);
    let w = (x - z0) / (z1 - z0);
    v[k - 1] + w * (v[k] - v[k - 1])
}

/// The model profile of a quantity at snapshot `k`, in the quantity's scale.
fn model_profile(res: &Results, q: &Quantity, k: usize) -> Option<Vec<f64>> {
    let p = &res.profiles;
    Some(match q {
        Quantity::TemperatureC => p.temperature[k].clone(),
        Quantity::HeadM => p.head[k].clone(),
        Quantity::LiquidContent => p.liquid_content[k].clone(),
        Quantity::Log10SuctionM => p.head[k]
            .iter()
            .map(|h| (-h).max(SUCTION_FLOOR).log10())
            .collect(),
        Quantity::Concentration(name) => res
            .solutes
            .iter()
            .find(|s| &s.name == name)?
            .concentration
            .get(k)?
            .clone(),
    })
}

/// Matches every observation with the model (errors name the observation's line).
pub fn match_observations(res: &Results, obs: &Observations) -> Result<Vec<Matched>> {
    let file = obs.path.display();
    let mut out = Vec::with_capacity(obs.rows.len());
    for o in &obs.rows {
        let k = profile_at(&res.profiles.time, o.time_year).ok_or_else(|| {
            Error::input(format!(
                "{file}:{}: time_year = {}: {} has no profile at that time; run the case with the observation times among its output times, e.g. --set 'output.times_year=[{}]'",
                o.line,
                o.time_year,
                res.path.display(),
                obs.times()
                    .iter()
                    .map(|t| format!("{t}"))
                    .collect::<Vec<_>>()
                    .join(", ")
            ))
        })?;
        let bottom = res.face_depth.last().copied().unwrap_or(0.0);
        if o.depth_m > bottom {
            return Err(Error::input(format!(
                "{file}:{}: depth_m = {}: below the column (depth {bottom} m)",
                o.line, o.depth_m
            )));
        }
        let prof = model_profile(res, &o.quantity, k).ok_or_else(|| {
            Error::input(format!(
                "{file}:{}: quantity = {}: {} has no such profile (its solutes: {})",
                o.line,
                o.quantity.name(),
                res.path.display(),
                if res.solutes.is_empty() {
                    "none".to_string()
                } else {
                    res.solutes
                        .iter()
                        .map(|s| s.name.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                }
            ))
        })?;
        out.push(Matched {
            obs: o.clone(),
            model: interpolate(&res.depth, &prof, o.depth_m),
        });
    }
    Ok(out)
}

/// Statistics per quantity, in the order quantities first appear.
pub fn statistics(matched: &[Matched]) -> Vec<Stats> {
    let mut names: Vec<Quantity> = Vec::new();
    for m in matched {
        if !names.contains(&m.obs.quantity) {
            names.push(m.obs.quantity.clone());
        }
    }
    names
        .iter()
        .map(|q| {
            let rows: Vec<&Matched> = matched.iter().filter(|m| m.obs.quantity == *q).collect();
            let n = rows.len() as f64;
            let bias = rows.iter().map(|m| m.residual()).sum::<f64>() / n;
            let mse = rows.iter().map(|m| m.residual().powi(2)).sum::<f64>() / n;
            let chi = rows.iter().map(|m| m.weighted().powi(2)).sum::<f64>();
            Stats {
                quantity: q.name(),
                unit: q.unit(),
                count: rows.len(),
                bias,
                rmse: mse.sqrt(),
                weighted_rmse: (chi / n).sqrt(),
                chi_square: chi,
            }
        })
        .collect()
}

/// The statistics as an aligned text table.
pub fn table(stats: &[Stats]) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "{:<22} {:>6} {:>12} {:>12} {:>14} {:>12}  unit",
        "quantity", "count", "bias", "RMSE", "weighted RMSE", "chi-square"
    );
    for st in stats {
        let _ = writeln!(
            s,
            "{:<22} {:>6} {:>12.4e} {:>12.4e} {:>14.4} {:>12.4e}  {}",
            st.quantity, st.count, st.bias, st.rmse, st.weighted_rmse, st.chi_square, st.unit
        );
    }
    s
}

fn write(path: &Path, text: &str) -> Result<()> {
    std::fs::write(path, text).map_err(|e| Error::io(path, e))
}

/// The figure of one quantity: the model profiles at the observed times and the
/// observations as value ± σ bars in the same colour.
fn figure(res: &Results, q: &Quantity, matched: &[Matched]) -> Option<Figure> {
    let rows: Vec<&Matched> = matched.iter().filter(|m| m.obs.quantity == *q).collect();
    let mut times: Vec<f64> = rows.iter().map(|m| m.obs.time_year).collect();
    times.sort_by(|a, b| a.total_cmp(b));
    times.dedup();
    let colors = sequence(times.len());
    let depth = depth_axis(res);
    let tick = 0.006 * (depth.hi - depth.lo).abs();
    let mut lines = Vec::new();
    let mut all = Vec::new();
    for (t, color) in times.iter().zip(colors) {
        let k = profile_at(&res.profiles.time, *t)?;
        let prof = model_profile(res, q, k)?;
        let when = format_years(*t);
        all.extend(prof.iter().cloned());
        lines.push(Line {
            label: format!("model, {when} yr"),
            color,
            width: 2,
            points: res.depth.iter().zip(&prof).map(|(z, v)| (*v, *z)).collect(),
        });
        let mut bars = Vec::new();
        for m in rows.iter().filter(|m| m.obs.time_year == *t) {
            let (v, s, z) = (m.obs.value, m.obs.sigma, m.obs.depth_m);
            all.extend([v - s, v + s]);
            bars.extend([(v - s, z), (v + s, z), (f64::NAN, f64::NAN)]);
            bars.extend([(v, z - tick), (v, z + tick), (f64::NAN, f64::NAN)]);
        }
        lines.push(Line {
            label: format!("observed ± σ, {when} yr"),
            color,
            width: 3,
            points: bars,
        });
    }
    let x = axis_for(Scale::Linear, all.into_iter().filter(|v| v.is_finite()));
    Some(Figure {
        title: res.title.clone(),
        subtitle: format!("{}: model against observations", q.name()),
        panels: vec![Panel {
            heading: String::new(),
            x,
            y: depth,
            x_label: format!("{} [{}]", q.name(), q.unit()),
            y_label: "depth [m]".into(),
            lines,
            x_zero: false,
            y_zero: false,
        }],
        columns: 1,
        size: (1000, 760),
        legend_heading: "profile".into(),
    })
}

/// What `deepdry compare` wrote.
#[derive(Debug)]
pub struct CompareOutput {
    pub stats: Vec<Stats>,
    pub files: Vec<PathBuf>,
}

/// Compares a results file with an observation file; writes into `out` the matched
/// observations (`compare-observations.csv`), the statistics (`compare-summary.csv`) and
/// one figure per quantity (`compare-<quantity>.svg/.png`).
pub fn compare(results: &Path, observations: &Path, out: &Path) -> Result<CompareOutput> {
    let res = crate::plot::data::read(results)?;
    let obs = super::observations::read(observations)?;
    let matched = match_observations(&res, &obs)?;
    let stats = statistics(&matched);
    std::fs::create_dir_all(out).map_err(|e| Error::io(out, e))?;
    let mut files = Vec::new();
    let mut rows =
        String::from("time_year,depth_m,quantity,value,sigma,model,residual,weighted_residual\n");
    for m in &matched {
        let _ = writeln!(
            rows,
            "{},{},{},{},{},{},{},{}",
            m.obs.time_year,
            m.obs.depth_m,
            m.obs.quantity.name(),
            m.obs.value,
            m.obs.sigma,
            m.model,
            m.residual(),
            m.weighted()
        );
    }
    let p = out.join("compare-observations.csv");
    write(&p, &rows)?;
    files.push(p);
    let mut summary = String::from("quantity,unit,count,bias,rmse,weighted_rmse,chi_square\n");
    for s in &stats {
        let _ = writeln!(
            summary,
            "{},{},{},{},{},{},{}",
            s.quantity, s.unit, s.count, s.bias, s.rmse, s.weighted_rmse, s.chi_square
        );
    }
    let p = out.join("compare-summary.csv");
    write(&p, &summary)?;
    files.push(p);
    let mut quantities: Vec<Quantity> = Vec::new();
    for m in &matched {
        if !quantities.contains(&m.obs.quantity) {
            quantities.push(m.obs.quantity.clone());
        }
    }
    for q in &quantities {
        if let Some(fig) = figure(&res, q, &matched) {
            files.extend(write_figure(out, &format!("compare-{}", q.name()), &fig)?);
        }
    }
    Ok(CompareOutput { stats, files })
}
