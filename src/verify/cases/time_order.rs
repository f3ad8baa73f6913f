//! Observed order in time: 1 for backward Euler, 2 for BDF2 (the periodic-surface case
//! file at a series of fixed steps).

use super::periodic_surface::{start_periodic, FILES};
use super::*;

pub(super) fn time_order(v: Variant) -> Result<CaseResult> {
    // Amplitude 1 K keeps every step below the backward-Euler change limit (0.5 K), so
    // the steps are the fixed max_step_year = initial_step_year.
    let amp = 1.0;
    let levels: Vec<f64> = match v {
        Variant::Full => vec![25.0, 50.0, 100.0, 200.0, 400.0],
        Variant::Fast => vec![20.0, 40.0, 80.0, 160.0],
    };
    let mut checks = Vec::new();
    let mut fig = Figure::new(
        "Time refinement: max |T(Δt) − T(Δt/2)| after one period",
        "Δt [yr]",
        "difference [K]",
    );
    fig.log_x = true;
    fig.log_y = true;
    let mut notes = Vec::new();
    for (method, expected, label) in [
        ("\"backward-euler\"", 1.0, "backward Euler"),
        ("\"bdf\"", 2.0, "BDF2"),
    ] {
        let mut finals: Vec<Vec<f64>> = Vec::new();
        for &n in &levels {
            let dt = format!("{}", 1.0 / n);
            let surface = format!("{{ mean = 15.0, amplitude = {amp}, period_year = 1.0 }}");
            let (mut model, scratch) = load(
                &FILES,
                &sets(&[
                    ("mesh.cells", "80"),
                    ("mesh.growth", "1.1"),
                    ("surface.temperature_C", &surface),
                    ("time.end_year", "1.0"),
                    ("time.max_step_year", &dt),
                    ("time.initial_step_year", &dt),
                    ("output.every_year", "1.0"),
                    ("time.method", method),
                ])?,
            )?;
            if let crate::model::Method::Bdf { .. } = model.time.method {
                // Error control off in effect: the largest rtol and atol, so every step
                // is the fixed Δt (the order rises from 1 to 2 after two steps).
                model.time.method = crate::model::Method::Bdf { max_order: 2 };
                model.time.rtol = 0.9;
                model.time.atol_temperature = 100.0;
            }
            let kappa = constant_lambda(&model) / saturated_heat_capacity(&model);
            let omega = 2.0 * std::f64::consts::PI / SECONDS_PER_YEAR;
            start_periodic(&mut model, amp, kappa, omega);
            let (summary, res) = simulate(&model, &scratch)?;
            let steps = summary.counters.steps as f64;
            if (steps - n).abs() > 0.5 {
                return Err(Error::Internal(format!(
                    "time-order: {label} took {steps} steps for Δt = 1/{n} yr (fixed steps expected)"
                )));
            }
            finals.push(res.temperature_c[res.at(1.0)].clone());
        }
        let diffs: Vec<f64> = finals
            .windows(2)
            .map(|w| max_abs(w[0].iter().zip(&w[1]).map(|(a, b)| a - b)))
            .collect();
        let orders = r::observed_orders(&diffs, 2.0);
        let worst = orders
            .iter()
            .map(|p| (p - expected).abs())
            .fold(0.0, f64::max);
        notes.push(format!(
            "{label}: differences {} K; observed orders {}",
            diffs
                .iter()
                .map(|d| format!("{d:.3e}"))
                .collect::<Vec<_>>()
                .join(", "),
            orders
                .iter()
                .map(|p| format!("{p:.3}"))
                .collect::<Vec<_>>()
                .join(", ")
        ));
        fig.series.push(Series::points(
            label,
            levels
                .iter()
                .map(|n| 1.0 / n)
                .zip(diffs.iter().cloned())
                .collect(),
        ));
        let d0 = diffs[0];
        let dt0 = 1.0 / levels[0];
        fig.series.push(Series::line(
            format!("slope {expected}"),
            levels
                .iter()
                .map(|n| (1.0 / n, d0 * ((1.0 / n) / dt0).powf(expected)))
                .collect(),
        ));
        checks.push(Check::new(
            format!("{label}: |observed order − {expected}|"),
            "Taylor expansion of the integrator (common practice)",
            worst,
            0.1 * expected,
        ));
    }
    Ok(CaseResult {
        checks,
        figures: vec![fig],
        notes,
    })
}
