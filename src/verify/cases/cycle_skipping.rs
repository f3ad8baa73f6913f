//! Cycle skipping on linear heat conduction: a uniform excess over the steady-periodic
//! state decays (Fourier series of the slab) while the surface follows its sinusoid
//! (Carslaw & Jaeger), and the run jumps over most periods.

use super::periodic_surface::{start_periodic, wave_budget, FAST_WAVE};
use super::*;

pub(super) const FILES: Files = files!("cycle-skipping");

/// Initial excess over the steady-periodic state [K].
const EXCESS: f64 = 2.0;
/// Surface amplitude [K] (the case's).
const AMPLITUDE: f64 = 5.0;
/// Fourier terms of the decaying excess summed (the first omitted decays by
/// e^{−κ λ² t} ≈ 0 at 10 years).
const TERMS: usize = 400;

/// The excess at depth z [m] and time t [s] in a slab 0 < z < L held at 0 on top and
/// insulated below, from a uniform `EXCESS` at t = 0 (separation of variables, derived:
/// sin λ_n z with λ_n = (2n − 1)π/(2L), coefficients 4/((2n − 1)π)).
fn excess(kappa: f64, length: f64, z: f64, t: f64) -> f64 {
    (1..=TERMS)
        .map(|n| {
            let k = (2 * n - 1) as f64;
            let lambda = k * std::f64::consts::PI / (2.0 * length);
            4.0 / (k * std::f64::consts::PI)
                * (lambda * z).sin()
                * (-kappa * lambda * lambda * t).exp()
        })
        .sum::<f64>()
        * EXCESS
}

pub(super) fn cycle_skipping(v: Variant) -> Result<CaseResult> {
    let (model, _scratch) = load_variant(&FILES, v, FAST_WAVE)?;
    let mut model = model;
    let kappa = constant_lambda(&model) / saturated_heat_capacity(&model);
    let omega = 2.0 * std::f64::consts::PI / SECONDS_PER_YEAR;
    start_periodic(&mut model, AMPLITUDE, kappa, omega);
    if let InitialState::Profile { temperature, .. } = &mut model.initial {
        temperature.iter_mut().for_each(|t| *t += EXCESS);
    }
    let length = model.mesh.depth();
    let period =
        model.time.cycle_skipping.map(|c| c.period).ok_or_else(|| {
            Error::Internal("cycle-skipping: the case has no cycle skipping".into())
        })?;
    let (rec, _) = crate::sim::run_in_memory(&model, SolverKind::BlockThomas)?;
    // The jumps (series records flagged with the periods they skipped) and their times.
    let jumps: Vec<(f64, f64)> = rec
        .series
        .iter()
        .zip(&rec.extra_series)
        .filter_map(|(r, e)| {
            let m = e[e.len() - 4];
            (m > 0.0).then_some((r.time_year * SECONDS_PER_YEAR, m))
        })
        .collect();
    let skipped: f64 = jumps.iter().map(|j| j.1).sum();
    // The error the jumps are derived to make (src/solve/envelope.rs): a jump of m
    // periods along the last drift of a mode decaying as e^{−b t} errs by
    // |1 + m (1 − e^{bP}) − e^{−bmP}| of the mode's value at the jump; summed over the
    // jumps before t and over the modes (amplitude 4 EXCESS/((2n − 1)π)), not decayed
    // after the jump (an upper bound for the modes the next exact periods damp).
    let bound_at = |t: f64| -> f64 {
        let mut total = 0.0;
        for &(tj, m) in jumps.iter().filter(|j| j.0 <= t) {
            let t0 = tj - m * period;
            for n in 1..=TERMS {
                let k = (2 * n - 1) as f64;
                let lambda = k * std::f64::consts::PI / (2.0 * length);
                let b = kappa * lambda * lambda;
                let amp = 4.0 * EXCESS / (k * std::f64::consts::PI) * (-b * t0).exp();
                let e = (1.0 + m * (1.0 - (b * period).exp()) - (-b * m * period).exp()).abs();
                if amp * e.min(1e300) < 1e-12 {
                    continue;
                }
                total += amp * e.min(2.0 * m);
            }
        }
        total
    };
    // The integration's own error on the periodic part (the a-priori budget of the
    // periodic-surface case: backward Euler's modified wavenumber and the spatial error,
    // as amplitude errors of the A = 5 K wave), at the worst depth.
    let dt = model.time.dt_max;
    let widths: Vec<f64> = model.mesh.faces.windows(2).map(|w| w[1] - w[0]).collect();
    let d = r::damping_depth(kappa, omega);
    let mut periodic_budget: f64 = 0.0;
    for (i, &z) in model.mesh.centers.iter().enumerate() {
        let (amp_err, lag_err) = wave_budget(kappa, omega, dt, &widths, i, z);
        periodic_budget = periodic_budget.max(AMPLITUDE * (amp_err + lag_err) * (-z / d).exp());
    }
    let mut err: f64 = 0.0;
    let mut tol: f64 = 0.0;
    let mut pts = Vec::new();
    let mut exact_line = Vec::new();
    // (The snapshot at the start is the initial state, whose uniform excess against the
    // surface value is a step the Fourier series does not resolve at the top cell.)
    for s in rec.snapshots.iter().filter(|s| s.time_year > 0.0) {
        let t = s.time_year * SECONDS_PER_YEAR;
        let mut worst: f64 = 0.0;
        for (i, &z) in model.mesh.centers.iter().enumerate() {
            let exact = 15.0
                + (r::periodic(15.0, 0.03, AMPLITUDE, kappa, omega, z, t) - 15.0)
                + excess(kappa, length, z, t);
            worst = worst.max((s.profile.temperature_c[i] - exact).abs());
        }
        // The excess decays by e^{-2} over the run: errors relative to its initial value.
        err = err.max(worst / EXCESS);
        // 25 % margin on the a-priori estimates for the terms they neglect.
        tol = tol.max(1.25 * (bound_at(t) + periodic_budget) / EXCESS);
        let mid = model.mesh.centers.len() / 2;
        let z = model.mesh.centers[mid];
        pts.push((s.time_year, s.profile.temperature_c[mid]));
        exact_line.push((
            s.time_year,
            r::periodic(15.0, 0.03, AMPLITUDE, kappa, omega, z, t) + excess(kappa, length, z, t),
        ));
    }
    let z_mid = model.mesh.centers[model.mesh.centers.len() / 2];
    let fig = Figure::new(
        "Cycle skipping: temperature at mid-depth, integrated snapshots",
        "time [yr]",
        "temperature [°C]",
    )
    .with(Series::line(
        "exact (periodic + decaying excess)",
        exact_line,
    ))
    .with(Series::points("deepdry with cycle skipping", pts));
    let years = (model.time.end - model.time.start) / period;
    Ok(CaseResult {
        checks: vec![
            Check::new(
                "temperature at every cell and snapshot, relative to the 2 K excess",
                "Carslaw & Jaeger 1959 §2.6 (periodic part); slab Fourier series (derived)",
                err,
                tol,
            ),
            Check::new(
                "fraction of the periods integrated (at most 1/2)",
                "project requirement (issue 23)",
                (years - skipped) / years,
                0.5,
            ),
        ],
        figures: vec![fig],
        notes: vec![format!(
            "{} jumps skipped {skipped} of {years} periods; mid-depth z = {z_mid:.2} m; tolerance = 1.25 × (Σ of the jumps' derived errors over the modes + the periodic part's a-priori discretisation error {periodic_budget:.2e} K), relative to the excess",
            jumps.len()
        )],
    })
}
