//! Ponded infiltration into a dry column against Green & Ampt (1911): a late-time
//! consistency check of a sharp-front approximation, not an exact solution.

use super::*;
use crate::sim::run_in_memory;

const FILES: Files = files!("green-ampt", "initial.csv");

/// Wetting-front suction ψ = ∫_{hi}^{0} Kr(h) dh [m] (Neuman 1976, from memory), by
/// composite Simpson quadrature with the soil's own Kr (20 000 intervals; Kr is smooth
/// away from the air-entry head, where it is continuous).
fn front_suction(ret: &crate::props::retention::Retention, h_initial: f64) -> f64 {
    let n = 20_000;
    let dh = -h_initial / n as f64;
    let kr = |h: f64| ret.relative_conductivity(h).0;
    let mut s = kr(h_initial) + kr(0.0);
    for k in 1..n {
        let w = if k % 2 == 1 { 4.0 } else { 2.0 };
        s += w * kr(h_initial + k as f64 * dh);
    }
    s * dh / 3.0
}

pub(super) fn green_ampt(v: Variant) -> Result<CaseResult> {
    let (model, _scratch) = load_variant(&FILES, v, &[("mesh.cells", "300")])?;
    let s = &model.soils[0];
    let ks = s.saturated_conductivity;
    let h_initial = match &model.initial {
        InitialState::Profile {
            moisture: ProfileMoisture::Head(h),
            ..
        } => h[0],
        _ => return Err(Error::Internal("initial profile in head expected".into())),
    };
    let h0 = match &model.surface.at(model.time.start).water {
        crate::model::SurfaceWater::Head(s) => s.value(model.time.start),
        _ => return Err(Error::Internal("the case needs a surface head".into())),
    };
    let psi = front_suction(&s.retention, h_initial);
    let dtheta = s.retention.theta_s() - s.retention.theta(h_initial).0;
    let big_s = (psi + h0) * dtheta;
    let (rec, finish) = run_in_memory(&model, SolverKind::BlockThomas)?;
    let ki = ks * s.retention.relative_conductivity(h_initial).0;
    let mut errs = Vec::new();
    // The comparison times: the case's snapshot times.
    let check_years: Vec<f64> = rec
        .snapshots
        .iter()
        .map(|s| s.time_year)
        .filter(|t| *t > 0.0)
        .collect();
    for &ty in &check_years {
        let r = record_at(&rec, ty)?;
        let t = ty * SECONDS_PER_YEAR;
        // The model's inflow less the gravity drainage Ki t of the initial state (which
        // Green & Ampt's dry soil at rest does not have; Ki/Ks is ~4e-7 here).
        let m = r.surface_water_cumulative / WATER_DENSITY - ki * t;
        let ga = r::green_ampt_infiltration(ks, big_s, t);
        errs.push((m - ga) / ga);
    }
    let late = errs.last().copied().unwrap_or(f64::NAN).abs();
    let first = errs.first().copied().unwrap_or(f64::NAN).abs();
    let i_end =
        r::green_ampt_infiltration(ks, big_s, check_years.last().unwrap() * SECONDS_PER_YEAR);
    // GA's capillary term S ln(1 + I/S) as a share of I at the end (the part of GA that is
    // approximate; the gravity part Ks t is the exact late-time rate).
    let capillary = big_s * (i_end / big_s).ln_1p() / i_end;
    let t_end = *check_years.last().unwrap();
    let mm = 1000.0 / WATER_DENSITY;
    let pts: Vec<(f64, f64)> = rec
        .series
        .iter()
        .filter(|r| r.time_year > 0.0 && r.time_year <= t_end)
        .map(|r| (r.time_year, r.surface_water_cumulative * mm))
        .collect();
    let fig = Figure::new(
        "Ponded infiltration",
        "time [yr]",
        "cumulative infiltration [mm]",
    )
    .with(Series::line(
        "Green & Ampt 1911",
        (1..=200)
            .map(|k| {
                let ty = t_end * k as f64 / 200.0;
                (
                    ty,
                    r::green_ampt_infiltration(ks, big_s, ty * SECONDS_PER_YEAR) * 1000.0,
                )
            })
            .collect(),
    ))
    .with(Series::points(
        "deepdry",
        pts.iter()
            .cloned()
            .step_by((pts.len() / 60).max(1))
            .collect(),
    ));
    let mut fig_h = Figure::profile("Ponded infiltration: head", "pressure head [m]");
    for snap in rec.snapshots.iter().filter(|s| s.time_year > 0.0) {
        fig_h.series.push(Series::points(
            format!("deepdry, {} yr", snap.time_year),
            prof(&snap.profile.head, &model.mesh.centers)
                .into_iter()
                .step_by((model.mesh.n_cells() / 100).max(1))
                .collect(),
        ));
    }
    let tol = 0.03;
    Ok(CaseResult {
        checks: vec![
            Check::new(
                format!("cumulative infiltration at {t_end} yr, relative"),
                "Green & Ampt 1911 (sharp front), ψ = ∫Kr dh (Neuman 1976)",
                late,
                tol,
            ),
            Check::new(
                format!(
                    "relative difference at {t_end} yr over that at {} yr (must shrink)",
                    check_years[0]
                ),
                "Green & Ampt 1911: late-time consistency",
                late / first,
                1.0,
            ),
        ],
        figures: vec![fig, fig_h],
        notes: vec![format!(
            "{} cells; ψ = {psi:.4} m, h0 = {h0} m, Δθ = {dtheta:.4}, S = {big_s:.4e} m; capillary share of I at the end {capillary:.3}; relative I errors at {check_years:?} yr: {}; steps {} (rejected {})",
            model.mesh.n_cells(),
            fmt_list(&errs),
            finish.counters.steps,
            finish.counters.rejected
        )],
    })
}
