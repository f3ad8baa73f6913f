//! Surface temperature step on a linear geotherm: erfc solution.

use super::*;

const FILES: Files = files!("surface-step");

pub(super) fn surface_step(v: Variant) -> Result<CaseResult> {
    let (model, scratch) = load_variant(
        &FILES,
        v,
        &[
            ("mesh.cells", "120"),
            ("mesh.growth", "1.1"),
            ("time.max_step_year", "0.01"),
        ],
    )?;
    let kappa = constant_lambda(&model) / saturated_heat_capacity(&model);
    // Case values: T0 = 15 °C, G = 0.03 K/m, surface 20 °C from t = 0.
    let (t0, g, dtemp) = (15.0, 0.03, 5.0);
    let (_, res) = simulate(&model, &scratch)?;
    let check_times = [1.0, 3.0, 10.0];
    let mut err: f64 = 0.0;
    let mut fig = Figure::profile("Surface step on a linear geotherm", "temperature [°C]");
    let zmax = 40.0;
    for &ty in &check_times {
        let k = res.at(ty);
        let t = ty * SECONDS_PER_YEAR;
        for (z, tm) in res.depth.iter().zip(&res.temperature_c[k]) {
            err = err.max((tm - r::surface_step(t0, g, dtemp, kappa, *z, t)).abs() / dtemp);
        }
        fig.series.push(Series::line(
            format!("erfc solution, {ty} yr"),
            line_of(
                |z| r::surface_step(t0, g, dtemp, kappa, z, t),
                0.0,
                zmax,
                200,
            ),
        ));
        let pts: Vec<(f64, f64)> = prof(&res.temperature_c[k], &res.depth)
            .into_iter()
            .filter(|p| p.1 <= zmax)
            .collect();
        fig.series
            .push(Series::points(format!("deepdry, {ty} yr"), pts));
    }
    let tol = match v {
        Variant::Full => 5e-3,
        Variant::Fast => 1e-2,
    };
    Ok(CaseResult {
        checks: vec![Check::new(
            "temperature at 1, 3, 10 yr, max |ΔT|/ΔT",
            "Carslaw & Jaeger 1959 §2.4 (erfc)",
            err,
            tol,
        )],
        figures: vec![fig],
        notes: vec![format!(
            "κ = {kappa:.4e} m² s⁻¹; {} cells; max step {:.3} yr",
            res.depth.len(),
            model.time.dt_max / SECONDS_PER_YEAR
        )],
    })
}
