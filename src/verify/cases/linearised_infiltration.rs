//! Infiltration from a saturated surface into an exponential (Gardner) soil: Richards'
//! equation linear in K (the linearised problem of Philip 1969 and Warrick 1975; solution
//! re-derived in the case's README).

use super::*;
use crate::sim::run_in_memory;

const FILES: Files = files!("linearised-infiltration", "initial.csv");

/// Snapshot times of the case file [yr].
const CHECK_YEARS: [f64; 3] = [0.001, 0.004, 0.008];

/// One run: max |Δθ|/(θs − θr) over the cells at the check times, max relative error of
/// the cumulative infiltration there, and what the figures need.
struct Level {
    cells: usize,
    theta_err: f64,
    infiltration_err: f64,
    /// Cumulative infiltration at the last check time [m].
    infiltration_end: f64,
    steps: u64,
    centers: Vec<f64>,
    /// [check time][cell] liquid content.
    theta: Vec<Vec<f64>>,
    /// (yr, mm) cumulative infiltration series.
    infiltration: Vec<(f64, f64)>,
}

fn run_level(cells: usize, averaging: &str) -> Result<(Level, r::LinearisedInfiltration, f64)> {
    let n = cells.to_string();
    let avg = format!("\"{averaging}\"");
    let (model, _scratch) = load(
        &FILES,
        &sets(&[("mesh.cells", &n), ("physics.face_averaging", &avg)])?,
    )?;
    let s = &model.soils[0];
    let alpha = exponential_alpha(&s.retention).expect("exponential soil");
    let (theta_r, theta_s) = (s.retention.theta_r(), s.retention.theta_s());
    let h_initial = match &model.initial {
        InitialState::Profile { moisture, .. } => match moisture {
            ProfileMoisture::Head(h) => h[0],
            _ => return Err(Error::Internal("initial profile in head expected".into())),
        },
        _ => return Err(Error::Internal("initial profile expected".into())),
    };
    let p = r::LinearisedInfiltration {
        ks: s.saturated_conductivity,
        alpha,
        dtheta: theta_s - theta_r,
        h_initial,
    };
    let theta_i = theta_r + p.dtheta * (alpha * h_initial).exp();
    let (rec, finish) = run_in_memory(&model, SolverKind::BlockThomas)?;
    let centers = model.mesh.centers.clone();
    let mut theta_err: f64 = 0.0;
    let mut theta = Vec::new();
    for ty in CHECK_YEARS {
        let snap = snapshot_at(&rec, ty)?;
        let t = ty * SECONDS_PER_YEAR;
        for (z, th) in centers.iter().zip(&snap.profile.liquid_content) {
            let ex = theta_i + p.theta_gain(*z, t);
            theta_err = theta_err.max((th - ex).abs() / p.dtheta);
        }
        theta.push(snap.profile.liquid_content.clone());
    }
    let mut infiltration_err: f64 = 0.0;
    let mut infiltration_end = 0.0;
    for ty in CHECK_YEARS {
        let r = record_at(&rec, ty)?;
        let ex = p.infiltration(ty * SECONDS_PER_YEAR);
        let m = r.surface_water_cumulative / WATER_DENSITY;
        infiltration_err = infiltration_err.max((m - ex).abs() / ex);
        infiltration_end = m;
    }
    let infiltration = rec
        .series
        .iter()
        .map(|r| {
            (
                r.time_year,
                r.surface_water_cumulative / WATER_DENSITY * 1000.0,
            )
        })
        .collect();
    Ok((
        Level {
            cells,
            theta_err,
            infiltration_err,
            infiltration_end,
            steps: finish.counters.steps,
            centers,
            theta,
            infiltration,
        },
        p,
        theta_i,
    ))
}

/// The three meshes of one face averaging, coarse to fine.
fn levels(
    cells: [usize; 3],
    averaging: &str,
) -> Result<(Vec<Level>, r::LinearisedInfiltration, f64)> {
    let mut out = Vec::new();
    let mut last = None;
    for n in cells {
        let (l, p, theta_i) = run_level(n, averaging)?;
        out.push(l);
        last = Some((p, theta_i));
    }
    let (p, theta_i) = last.expect("three meshes");
    Ok((out, p, theta_i))
}

pub(super) fn linearised_infiltration(v: Variant) -> Result<CaseResult> {
    // Three uniform meshes, each twice as fine as the one before, with the case file's
    // (default) arithmetic face conductivity and with the geometric one; the finest is the
    // one judged against the reference, the sequence shows the order in space.
    let cells: [usize; 3] = match v {
        Variant::Full => [100, 200, 400],
        Variant::Fast => [50, 100, 200],
    };
    let (arith, p, theta_i) = levels(cells, "arithmetic")?;
    let (geom, _, _) = levels(cells, "geometric")?;
    let t_end = CHECK_YEARS[2];
    let i_exact = p.infiltration(t_end * SECONDS_PER_YEAR);
    let errs = |ls: &[Level]| -> (Vec<f64>, Vec<f64>) {
        (
            ls.iter().map(|l| l.theta_err).collect(),
            ls.iter().map(|l| l.infiltration_err).collect(),
        )
    };
    let (th_a, i_a) = errs(&arith);
    let (th_g, i_g) = errs(&geom);
    let ord_a = r::observed_orders(&th_a, 2.0);
    let ord_g = r::observed_orders(&th_g, 2.0);
    // Richardson extrapolation of the arithmetic runs' infiltration at the end, from the
    // model alone (observed order of the three meshes): where the mesh sequence converges.
    let ends: Vec<f64> = arith.iter().map(|l| l.infiltration_end).collect();
    let p_obs = ((ends[0] - ends[1]) / (ends[1] - ends[2])).ln() / 2f64.ln();
    let extrapolated = ends[2] + (ends[2] - ends[1]) / (2f64.powf(p_obs) - 1.0);
    let (tol_a_theta, tol_a_i, tol_g) = match v {
        Variant::Full => (2e-3, 4e-3, 5e-4),
        Variant::Fast => (6e-3, 1.2e-2, 2e-3),
    };
    let fine = arith.last().expect("three meshes");
    let fine_g = geom.last().expect("three meshes");
    let mut fig = Figure::profile(
        "Linearised infiltration: liquid content",
        "liquid content [m3/m3]",
    );
    for (k, ty) in CHECK_YEARS.iter().enumerate() {
        let t = ty * SECONDS_PER_YEAR;
        fig.series.push(Series::line(
            format!("exact, {ty} yr"),
            line_of(|z| theta_i + p.theta_gain(z, t), 0.0, 4.0, 400),
        ));
        fig.series.push(Series::points(
            format!("deepdry, {ty} yr"),
            prof(&fine.theta[k], &fine.centers)
                .into_iter()
                .filter(|(_, z)| *z <= 4.0)
                .step_by((fine.cells / 100).max(1))
                .collect(),
        ));
    }
    let fig_i = Figure::new("Cumulative infiltration", "time [yr]", "infiltration [mm]")
        .with(Series::line(
            "exact",
            (1..=200)
                .map(|k| {
                    let ty = t_end * k as f64 / 200.0;
                    (ty, p.infiltration(ty * SECONDS_PER_YEAR) * 1000.0)
                })
                .collect(),
        ))
        .with(Series::points(
            "deepdry",
            fine.infiltration
                .iter()
                .cloned()
                .step_by((fine.infiltration.len() / 60).max(1))
                .collect(),
        ));
    let src = "advection–diffusion in K (Philip 1969; Warrick 1975), derived";
    let n = fine.cells;
    Ok(CaseResult {
        checks: vec![
            Check::new(
                format!("liquid content, max |Δθ|/(θs − θr), {n} cells"),
                src,
                fine.theta_err,
                tol_a_theta,
            ),
            Check::new(
                format!("cumulative infiltration, relative, {n} cells"),
                src,
                fine.infiltration_err,
                tol_a_i,
            ),
            Check::new(
                "infiltration extrapolated from 3 meshes (Richardson), relative",
                src,
                (extrapolated - i_exact).abs() / i_exact,
                tol_a_i / 10.0,
            ),
            Check::new(
                format!("geometric mean K: max |Δθ|/(θs − θr), {n} cells"),
                src,
                fine_g.theta_err,
                tol_g,
            ),
            Check::new(
                "geometric mean K: observed order of the θ error, |p − 2|",
                "second-order finite volumes (common practice)",
                ord_g.iter().fold(0.0f64, |m, o| m.max((o - 2.0).abs())),
                0.2,
            ),
        ],
        figures: vec![fig, fig_i],
        notes: vec![
            format!(
                "cells {cells:?}, arithmetic: θ errors {}, orders {:.2}, {:.2}; infiltration errors {}; infiltration order {p_obs:.2}, extrapolated {:.6e} m (exact {i_exact:.6e}); steps {:?}",
                fmt_list(&th_a),
                ord_a[0],
                ord_a[1],
                fmt_list(&i_a),
                extrapolated,
                arith.iter().map(|l| l.steps).collect::<Vec<_>>(),
            ),
            format!(
                "geometric: θ errors {}, orders {:.2}, {:.2}; infiltration errors {}",
                fmt_list(&th_g),
                ord_g[0],
                ord_g[1],
                fmt_list(&i_g),
            ),
            format!(
                "c = {:.4e} m/s, D = {:.4e} m2/s, Ki/Ks = {:.3e}",
                p.drift(),
                p.diffusivity(),
                p.k_initial() / p.ks
            ),
        ],
    })
}
