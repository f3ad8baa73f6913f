//! Periodic surface temperature: amplitude e^(-z/d), phase lag z/d. The time-order case
//! reuses its case file.

use super::*;

pub(super) const FILES: Files = files!("periodic-surface");

/// Case values: Tm = 15 °C, A = amplitude, G = 0.03 K/m, period 1 yr.
const PERIODIC_TM: f64 = 15.0;
const PERIODIC_G: f64 = 0.03;

/// Starts the model from the exact steady-periodic state at its start time (cell-centre
/// values: the profile interpolation is then exact).
pub(super) fn start_periodic(model: &mut Model, amp: f64, kappa: f64, omega: f64) {
    let t = model.time.start;
    let z = model.mesh.centers.clone();
    let temperature = z
        .iter()
        .map(|&z| {
            kelvin_of(r::periodic(
                PERIODIC_TM,
                PERIODIC_G,
                amp,
                kappa,
                omega,
                z,
                t,
            ))
        })
        .collect();
    // Saturated hydrostatic head of the case (bottom head = depth L): h = hb − (L − z) = z.
    let head = z.clone();
    model.initial = InitialState::Profile {
        depth: z,
        temperature,
        moisture: ProfileMoisture::Head(head),
    };
}

/// The fast variant's overrides of the cases that reuse a yearly wave on 100 cells:
/// 250 fixed steps per period.
pub(super) const FAST_WAVE: &[(&str, &str)] = &[
    ("mesh.cells", "100"),
    ("mesh.growth", "1.06"),
    ("time.max_step_year", "0.004"),
    ("time.initial_step_year", "0.004"),
];

/// The a-priori errors of the periodic part at depth `z` (cell `i` of cells of `widths`)
/// with backward-Euler steps `dt`, as (amplitude ratio, phase lag [rad]) errors:
/// backward Euler's modified wavenumber (`reference::periodic_backward_euler`) and the
/// second-order spatial error of the wavenumber, (|k| dz)²/24 relative with |k| = √2/d
/// and dz the largest cell above z, times z/d (derived; see validation/periodic-surface).
pub(super) fn wave_budget(
    kappa: f64,
    omega: f64,
    dt: f64,
    widths: &[f64],
    i: usize,
    z: f64,
) -> (f64, f64) {
    let d = r::damping_depth(kappa, omega);
    let (be_ratio, be_lag) = r::periodic_backward_euler(kappa, omega, dt, z);
    let exact_ratio = (-z / d).exp();
    let dzmax = widths[..=i].iter().cloned().fold(0.0, f64::max);
    let space = (2.0f64.sqrt() * dzmax / d).powi(2) / 24.0 * (z / d) * 2.0f64.sqrt();
    (
        (be_ratio - exact_ratio).abs() / exact_ratio + space,
        (be_lag - z / d).abs() + space,
    )
}

pub(super) fn periodic_surface(v: Variant) -> Result<CaseResult> {
    let (steps_per_period, cells) = match v {
        Variant::Full => (1000.0, "200"),
        Variant::Fast => (250.0, "100"),
    };
    let dt_year = 1.0 / steps_per_period;
    let growth = match v {
        Variant::Full => "1.03",
        Variant::Fast => "1.06",
    };
    let dt = format!("{dt_year}");
    let (mut model, scratch) = load(
        &FILES,
        &sets(&[
            ("mesh.cells", cells),
            ("mesh.growth", growth),
            ("time.max_step_year", &dt),
            ("time.initial_step_year", &dt),
        ])?,
    )?;
    let amp = 5.0;
    let kappa = constant_lambda(&model) / saturated_heat_capacity(&model);
    let omega = 2.0 * std::f64::consts::PI / SECONDS_PER_YEAR;
    let d = r::damping_depth(kappa, omega);
    start_periodic(&mut model, amp, kappa, omega);
    let (_, res) = simulate(&model, &scratch)?;
    // Harmonic analysis over the last period: snapshots at 1 + k/50 yr, k = 1..=50.
    let n_s = 50;
    let idx: Vec<usize> = (1..=n_s)
        .map(|k| res.at(1.0 + k as f64 / n_s as f64))
        .collect();
    let mut amp_err: f64 = 0.0;
    let mut lag_err: f64 = 0.0;
    let mut tol_amp: f64 = 0.0;
    let mut tol_lag: f64 = 0.0;
    let (mut a_pts, mut l_pts) = (Vec::new(), Vec::new());
    let dt = dt_year * SECONDS_PER_YEAR;
    let widths: Vec<f64> = res.face_depth.windows(2).map(|w| w[1] - w[0]).collect();
    for (i, &z) in res.depth.iter().enumerate() {
        if z > 3.0 * d {
            break;
        }
        let mean: f64 = idx.iter().map(|&k| res.temperature_c[k][i]).sum::<f64>() / n_s as f64;
        let (mut a, mut b) = (0.0, 0.0);
        for &k in &idx {
            let ph = omega * res.times[k] * SECONDS_PER_YEAR;
            let x = res.temperature_c[k][i] - mean;
            a += 2.0 / n_s as f64 * x * ph.sin();
            b += 2.0 / n_s as f64 * x * ph.cos();
        }
        let ratio = (a * a + b * b).sqrt() / amp;
        let lag = -b.atan2(a);
        let exact_ratio = (-z / d).exp();
        amp_err = amp_err.max((ratio - exact_ratio).abs() / exact_ratio);
        lag_err = lag_err.max((lag - z / d).abs());
        // A-priori error budget at this depth: backward Euler (modified wavenumber, see
        // reference::periodic_backward_euler) plus the second-order spatial error of the
        // wavenumber, (k dz)²/24 relative, |k| = √2/d, times z/d.
        let (amp_budget, lag_budget) = wave_budget(kappa, omega, dt, &widths, i, z);
        tol_amp = tol_amp.max(amp_budget);
        tol_lag = tol_lag.max(lag_budget);
        a_pts.push((ratio, z));
        l_pts.push((lag, z));
    }
    // 25 % margin on the a-priori estimates for the terms they neglect.
    let (tol_amp, tol_lag) = (1.25 * tol_amp, 1.25 * tol_lag);
    let fig_a = Figure::profile("Periodic surface temperature: amplitude", "amplitude ratio")
        .with(Series::line(
            "e^(−z/d)",
            line_of(|z| (-z / d).exp(), 0.0, 3.0 * d, 100),
        ))
        .with(Series::points("deepdry", a_pts));
    let fig_l = Figure::profile("Periodic surface temperature: phase lag", "phase lag [rad]")
        .with(Series::line("z/d", line_of(|z| z / d, 0.0, 3.0 * d, 100)))
        .with(Series::points("deepdry", l_pts));
    Ok(CaseResult {
        checks: vec![
            Check::new(
                "amplitude ratio to z = 3d, relative",
                "Carslaw & Jaeger 1959 §2.6",
                amp_err,
                tol_amp,
            ),
            Check::new(
                "phase lag to z = 3d [rad]",
                "Carslaw & Jaeger 1959 §2.6",
                lag_err,
                tol_lag,
            ),
        ],
        figures: vec![fig_a, fig_l],
        notes: vec![format!(
            "d = {d:.4} m; Δt = period/{steps_per_period}; tolerances = 1.25 × (backward-Euler modified-wavenumber error + spatial estimate), computed per depth"
        )],
    })
}
