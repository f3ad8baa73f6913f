//! Drying front driven by vapour diffusion grows as sqrt(t). The kinetic-to-equilibrium
//! case reuses its case file.

use super::*;

pub(super) const FILES: Files = files!("drying-front", "initial.csv");

/// Reference quantities of the drying case: (Dv dry, Δrv, Δθ).
fn drying_reference(model: &Model) -> (f64, f64, f64, f64) {
    let s = &model.soils[0];
    let t = kelvin_of(20.0);
    let rvs = saturated_vapor_density(t).0;
    let hi = match &model.initial {
        InitialState::Profile {
            moisture: ProfileMoisture::Head(h),
            ..
        } => h[0],
        _ => panic!("drying case starts from a head profile"),
    };
    let theta_i = s.retention.theta(hi).0;
    let drv = rvs * (relative_humidity(hi, t).0 - 0.2);
    let dtheta = theta_i - s.retention.theta_r();
    let phi = s.retention.theta_s();
    let stefan = (phi - s.retention.theta_r()) * drv / (WATER_DENSITY * dtheta);
    (dry_diffusivity(model, t), drv, dtheta, stefan)
}

pub(super) fn drying_front(v: Variant) -> Result<CaseResult> {
    let (model, scratch) = load_variant(
        &FILES,
        v,
        &[
            ("mesh.cells", "25"),
            ("time.end_year", "1.0"),
            ("output.every_year", "0.05"),
        ],
    )?;
    let (dv, drv, dtheta, stefan) = drying_reference(&model);
    let dz = model.mesh.depth() / model.mesh.n_cells() as f64;
    let (_, res) = simulate(&model, &scratch)?;
    let w0 = res.series_storage[0];
    // Front depth from the water lost: δ = (W0 − W)/(ρw Δθ).
    let front = |w: f64| (w0 - w) / (WATER_DENSITY * dtheta);
    let (mut err, mut pts, mut fit) = (0.0f64, Vec::new(), Vec::new());
    let (dmin, dmax) = match v {
        Variant::Full => (0.2, 0.6),
        Variant::Fast => (0.2, 0.6),
    };
    let mut dmin_seen = f64::INFINITY;
    for (ty, w) in res.series_time.iter().zip(&res.series_storage) {
        if *ty <= 0.0 {
            continue;
        }
        let d = front(*w);
        let d_ref = r::drying_front_depth(dv, drv, dtheta, ty * SECONDS_PER_YEAR);
        pts.push((*ty, d));
        if d_ref >= dmin && d_ref <= dmax {
            err = err.max((d - d_ref).abs() / d_ref);
            fit.push((ty.ln(), d.ln()));
            dmin_seen = dmin_seen.min(d_ref);
        }
    }
    // Least-squares slope of ln δ against ln t.
    let n = fit.len() as f64;
    let (sx, sy) = fit.iter().fold((0.0, 0.0), |a, p| (a.0 + p.0, a.1 + p.1));
    let (mx, my) = (sx / n, sy / n);
    let (sxy, sxx) = fit.iter().fold((0.0, 0.0), |a, p| {
        (a.0 + (p.0 - mx) * (p.1 - my), a.1 + (p.0 - mx).powi(2))
    });
    let slope = if n >= 2.0 { sxy / sxx } else { f64::NAN };
    // Error budget (README): the drying cell's own half-cell resistance with its wetter
    // (less diffusive) air space, (dz/(4δ)) (Dv,dry/Dv,wet − 1); the cell quantisation of
    // the front, dz²/(8δ²); the pseudo-steady neglect of vapour storage, St/6.
    let s = &model.soils[0];
    let phi = s.retention.theta_s();
    let t = kelvin_of(20.0);
    let d = &model.physics.diffusivity;
    let da = r::binary_diffusivity(d.d0, d.t0, d.exponent, d.p0, t, model.physics.air_pressure);
    let theta_a_wet = phi - (s.retention.theta_r() + dtheta);
    let dv_wet = theta_a_wet * r::millington_quirk(theta_a_wet, phi) * da;
    let budget = dz / (4.0 * dmin_seen) * (dv / dv_wet - 1.0)
        + dz * dz / (8.0 * dmin_seen * dmin_seen)
        + stefan / 6.0;
    let tol = 1.25 * budget;
    let tmax = res.series_time.last().cloned().unwrap_or(1.0);
    let fig = Figure::new("Drying front depth", "time [yr]", "front depth [m]")
        .with(Series::line(
            "pseudo-steady √(2 Dv Δrv t/(ρw Δθ))",
            (0..=200)
                .map(|k| {
                    let ty = tmax * k as f64 / 200.0;
                    (
                        ty,
                        r::drying_front_depth(dv, drv, dtheta, ty * SECONDS_PER_YEAR),
                    )
                })
                .collect(),
        ))
        .with(Series::points(
            "deepdry (water lost / ρw Δθ)",
            pts.iter()
                .cloned()
                .step_by((pts.len() / 80).max(1))
                .collect(),
        ))
        .with(Series::points(
            "deepdry (θ threshold diagnostic)",
            res.series_time
                .iter()
                .cloned()
                .zip(res.series_front.iter().cloned())
                .step_by((pts.len() / 80).max(1))
                .collect(),
        ));
    Ok(CaseResult {
        checks: vec![
            Check::new(
                format!("front depth {dmin}-{dmax} m, relative"),
                "pseudo-steady front (Stefan limit, C&J 1959 §11.2)",
                err,
                tol,
            ),
            Check::new(
                "growth exponent d ln δ/d ln t − 1/2",
                "pseudo-steady front: δ ∝ √t",
                (slope - 0.5).abs(),
                tol / 2.0,
            ),
        ],
        figures: vec![fig],
        notes: vec![format!(
            "dz = {dz} m; Dv(dry) = {dv:.4e}, Dv(wet) = {dv_wet:.4e} m² s⁻¹; Δrv = {drv:.4e} kg m⁻³; Δθ = {dtheta:.4}; St = {stefan:.2e}; error budget {budget:.2e} (tolerance 1.25 ×)"
        )],
    })
}
