//! The periodic steady state (`[initial] state = "periodic"`) of a yearly surface wave on
//! linear heat conduction, against the steady-periodic solution (Carslaw & Jaeger): the
//! start state itself, with no spin-up integrated by the case, and its return after one
//! period.

use super::periodic_surface::{wave_budget, FAST_WAVE};
use super::*;

pub(super) const FILES: Files = files!("periodic-state");

/// Case values: Tm = 15 °C, A = 5 K, G = 0.03 K/m, period 1 yr.
const TM: f64 = 15.0;
const AMPLITUDE: f64 = 5.0;
const GRADIENT: f64 = 0.03;

pub(super) fn periodic_state(v: Variant) -> Result<CaseResult> {
    let (model, _scratch) = load_variant(&FILES, v, FAST_WAVE)?;
    let kappa = constant_lambda(&model) / saturated_heat_capacity(&model);
    let omega = 2.0 * std::f64::consts::PI / SECONDS_PER_YEAR;
    let d = r::damping_depth(kappa, omega);
    let (rec, _) = crate::sim::run_in_memory(&model, SolverKind::BlockThomas)?;
    let (first, last) = match (rec.snapshots.first(), rec.snapshots.last()) {
        (Some(a), Some(b)) if b.time_year > a.time_year => (a, b),
        _ => {
            return Err(Error::Internal(
                "periodic-state: the run gave no snapshots at both ends".into(),
            ))
        }
    };
    let InitialState::Periodic { spin_up, .. } = &model.initial else {
        return Err(Error::Internal(
            "periodic-state: the case does not start from the periodic state".into(),
        ));
    };
    // What the spin-up's own convergence test allows in temperature: the error test's
    // weight at the spin-up tolerance (the distance estimate ≤ 1 of it).
    let t_max = TM + GRADIENT * model.mesh.depth() + AMPLITUDE + 273.15;
    let converged = model.time.atol_temperature + spin_up.tolerance * t_max;
    let dt = model.time.dt_max;
    let widths: Vec<f64> = model.mesh.faces.windows(2).map(|w| w[1] - w[0]).collect();
    let (mut err, mut tol, mut back, mut pts, mut exact_pts) =
        (0.0f64, 0.0f64, 0.0f64, Vec::new(), Vec::new());
    let t0 = first.time_year * SECONDS_PER_YEAR;
    for (i, &z) in model.mesh.centers.iter().enumerate() {
        let exact = r::periodic(TM, GRADIENT, AMPLITUDE, kappa, omega, z, t0);
        let got = first.profile.temperature_c[i];
        back = back.max((last.profile.temperature_c[i] - got).abs());
        if z > 3.0 * d {
            continue;
        }
        err = err.max((got - exact).abs());
        // A-priori budget of the periodic part at this depth (as in periodic-surface):
        // backward Euler's modified wavenumber and the second-order spatial error of the
        // wavenumber, as amplitude and phase errors of the wave (|a e^{iφ} − a′ e^{iφ′}|
        // ≤ |a − a′| + a |φ − φ′|, derived), plus the spin-up's convergence allowance.
        let (amp_err, lag_err) = wave_budget(kappa, omega, dt, &widths, i, z);
        // 25 % margin on the a-priori estimates for the terms they neglect.
        tol = tol.max(1.25 * AMPLITUDE * (amp_err + lag_err) * (-z / d).exp() + converged);
        pts.push((got, z));
        exact_pts.push((exact, z));
    }
    let fig = Figure::profile(
        "Periodic steady state: temperature at the start",
        "temperature [°C]",
    )
    .with(Series::line("Tm + Gz + A e^(−z/d) sin(−z/d)", exact_pts))
    .with(Series::points("deepdry (state = \"periodic\")", pts));
    Ok(CaseResult {
        checks: vec![
            Check::new(
                "start temperature to z = 3d [K]",
                "Carslaw & Jaeger 1959 §2.6",
                err,
                tol,
            ),
            // The state returns after one period to within what the spin-up converged
            // to: a deviation e shrinks over a period by a factor in [0, 1) on a linear
            // problem, so |Φ(x) − x| ≤ |e| (derived).
            Check::new(
                "change over one period, whole column [K]",
                "derived: fixed point of the period map",
                back,
                converged,
            ),
        ],
        figures: vec![fig],
        notes: vec![format!(
            "d = {d:.4} m; Δt = {:.4} yr; spin-up tolerance {:.0e} ({converged:.2e} K)",
            dt / SECONDS_PER_YEAR,
            spin_up.tolerance
        )],
    })
}
