//! Initial states: hydrostatic, a given profile, or the steady state of the initial
//! boundary conditions (by pseudo-transient continuation).

use crate::error::{Error, Result};
use crate::model::{
    BottomBc, BottomHeat, BottomWater, InitialState, Model, PeriodicSpinUp, Periods,
    ProfileMoisture, SurfaceBc, SurfaceHeat, SurfaceWater,
};
use crate::physics::cell::equilibrium_vapor;
use crate::physics::dual::D3;
use crate::physics::{ColumnStepper as Stepper, System, H, RV, T};
use crate::schedule::Schedule;
use crate::solve::blocktri::BlockTri;
use crate::solve::linear::{make_solver, SolverKind};
use crate::solve::problem::{weighted_change, Problem};
use crate::solve::stepper::StepOptions;

use super::period::{
    add_jacobian_sample, corrected, one_period, periodic_model, weights_of, Anderson,
    MeanLinearization,
};
use super::simulation::numerical_message;

fn frozen(s: &Schedule, t: f64) -> Schedule {
    Schedule::Constant(s.value(t))
}

/// The surface condition with every schedule replaced by `f` of it.
pub fn map_surface(bc: &SurfaceBc, f: &dyn Fn(&Schedule) -> Schedule) -> SurfaceBc {
    SurfaceBc {
        heat: match &bc.heat {
            SurfaceHeat::Temperature(s) => SurfaceHeat::Temperature(f(s)),
            SurfaceHeat::Flux(s) => SurfaceHeat::Flux(f(s)),
        },
        water: match &bc.water {
            SurfaceWater::Head(s) => SurfaceWater::Head(f(s)),
            SurfaceWater::Flux { flux, ponding_head } => SurfaceWater::Flux {
                flux: f(flux),
                ponding_head: *ponding_head,
            },
            SurfaceWater::Atmosphere {
                relative_humidity,
                resistance,
            } => SurfaceWater::Atmosphere {
                relative_humidity: f(relative_humidity),
                resistance: resistance.as_ref().map(f),
            },
            SurfaceWater::Pond {
                inflow,
                max_depth,
                air,
            } => SurfaceWater::Pond {
                inflow: f(inflow),
                max_depth: *max_depth,
                air: air.as_ref().map(|(rh, r)| (f(rh), f(r))),
            },
            SurfaceWater::NoFlow => SurfaceWater::NoFlow,
        },
    }
}

/// The bottom condition with every schedule replaced by `f` of it.
pub fn map_bottom(bc: &BottomBc, f: &dyn Fn(&Schedule) -> Schedule) -> BottomBc {
    BottomBc {
        heat: match &bc.heat {
            BottomHeat::Temperature(s) => BottomHeat::Temperature(f(s)),
            BottomHeat::GeothermalFlux(s) => BottomHeat::GeothermalFlux(f(s)),
        },
        water: match &bc.water {
            BottomWater::WaterTable(s) => BottomWater::WaterTable(f(s)),
            BottomWater::FreeDrainage => BottomWater::FreeDrainage,
            BottomWater::NoFlow => BottomWater::NoFlow,
        },
    }
}

/// The surface condition with every schedule held at its value at `t`.
pub fn freeze_surface(bc: &SurfaceBc, t: f64) -> SurfaceBc {
    map_surface(bc, &|s| frozen(s, t))
}

/// The bottom condition with every schedule held at its value at `t`.
pub fn freeze_bottom(bc: &BottomBc, t: f64) -> BottomBc {
    map_bottom(bc, &|s| frozen(s, t))
}

/// Bottom head at time t for the hydrostatic profile (0 unless a water table is given).
fn bottom_head(model: &Model, t: f64) -> f64 {
    match &model.bottom.at(t).water {
        BottomWater::WaterTable(s) => s.value(t),
        _ => 0.0,
    }
}

/// Sets rv to its equilibrium value in every cell.
pub fn equilibrate_vapor(u: &mut [f64]) {
    for i in 0..u.len() / 3 {
        let (_, _, _, rveq) = equilibrium_vapor(D3::cst(u[3 * i + T]), D3::cst(u[3 * i + H]));
        u[3 * i + RV] = rveq.v;
    }
}

/// Hydrostatic head above the bottom head and a linear temperature profile.
pub fn hydrostatic(model: &Model, surface_temperature: f64, gradient: f64) -> Vec<f64> {
    let n = model.mesh.n_cells();
    let l = model.mesh.depth();
    let hb = bottom_head(model, model.time.start);
    let mut u = vec![0.0; 3 * n];
    for (i, z) in model.mesh.centers.iter().enumerate() {
        u[3 * i + T] = surface_temperature + gradient * z;
        u[3 * i + H] = hb - (l - z);
    }
    equilibrate_vapor(&mut u);
    u
}

fn interp(xs: &[f64], ys: &[f64], x: f64) -> f64 {
    if x <= xs[0] {
        return ys[0];
    }
    for k in 1..xs.len() {
        if x <= xs[k] {
            let f = (x - xs[k - 1]) / (xs[k] - xs[k - 1]);
            return ys[k - 1] + f * (ys[k] - ys[k - 1]);
        }
    }
    ys[ys.len() - 1]
}

/// Unknowns of the initial state (the steady state is solved for).
pub fn initial_unknowns(model: &Model, solver: SolverKind) -> Result<Vec<f64>> {
    initial_unknowns_reported(model, solver).map(|(u, _)| u)
}

/// [`initial_unknowns`], with how the periodic steady state was found when it is one.
pub fn initial_unknowns_reported(
    model: &Model,
    solver: SolverKind,
) -> Result<(Vec<f64>, Option<PeriodicReport>)> {
    if let InitialState::Periodic {
        surface,
        bottom,
        surface_temperature,
        gradient,
        spin_up,
    } = &model.initial
    {
        let m = periodic_model(model, surface, bottom, spin_up.period);
        // First guess: the steady state under the period means of the forcing.
        let (t0, t1) = (m.time.start, m.time.end);
        let mean = |s: &Schedule| Schedule::Constant(s.integral(t0, t1) / (t1 - t0));
        let mut ms = m.clone();
        ms.surface = Periods::single(map_surface(surface, &mean));
        ms.bottom = Periods::single(map_bottom(bottom, &mean));
        ms.vegetation = Periods::single(m.vegetation.at(t0).clone().map(|mut v| {
            v.transpiration = mean(&v.transpiration);
            v
        }));
        let guess = hydrostatic(&ms, *surface_temperature, *gradient);
        let mean_steady = steady_state(&ms, guess, solver)?;
        // The steady state under the means, for the report: what the cycle changes.
        let mut steady_sys = System::new(&ms);
        steady_sys.evaluate(t0, &mean_steady);
        let steady_water = steady_sys.totals()[1];
        let (top, bottom) = Problem::boundary_flows(&steady_sys);
        let (u, mut report) = periodic_steady_state(&m, mean_steady, solver, spin_up)?;
        report.steady_water = steady_water;
        report.steady_surface_water = top[1];
        report.steady_bottom_water = bottom[1];
        log::info!("{}", report.describe());
        return Ok((u, Some(report)));
    }
    let u = match &model.initial {
        InitialState::Hydrostatic {
            surface_temperature,
            gradient,
        } => Ok(hydrostatic(model, *surface_temperature, *gradient)),
        InitialState::Profile {
            depth,
            temperature,
            moisture,
        } => {
            let n = model.mesh.n_cells();
            let mut u = vec![0.0; 3 * n];
            for (i, z) in model.mesh.centers.iter().enumerate() {
                u[3 * i + T] = interp(depth, temperature, *z);
                u[3 * i + H] = match moisture {
                    ProfileMoisture::Head(h) => interp(depth, h, *z),
                    ProfileMoisture::LiquidContent(th) => {
                        let theta = interp(depth, th, *z);
                        let soil = &model.soils[model.cell_soil[i]];
                        soil.retention.head_from_theta(theta).ok_or_else(|| {
                            Error::input(format!(
                                "initial profile: liquid content {theta} at depth {z:.3} m is outside the retention curve of soil '{}'",
                                soil.name
                            ))
                        })?
                    }
                };
            }
            equilibrate_vapor(&mut u);
            Ok(u)
        }
        InitialState::Steady {
            surface,
            bottom,
            surface_temperature,
            gradient,
        } => {
            let guess = hydrostatic(model, *surface_temperature, *gradient);
            let mut m = model.clone();
            m.surface = Periods::single(freeze_surface(surface, model.time.start));
            m.bottom = Periods::single(freeze_bottom(bottom, model.time.start));
            // The plants of the start, at their transpiration of the start.
            let t0 = model.time.start;
            m.vegetation = Periods::single(model.vegetation.at(t0).clone().map(|mut v| {
                v.transpiration = crate::schedule::Schedule::Constant(v.transpiration.value(t0));
                v
            }));
            steady_state(&m, guess, solver)
        }
        InitialState::Periodic { .. } => Err(Error::Internal(
            "the periodic initial state is solved above".into(),
        )),
    };
    Ok((u?, None))
}

/// How the periodic steady state was found.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct PeriodicReport {
    /// Periods integrated (each from a new estimate).
    pub periods: usize,
    /// Time steps over all of them.
    pub steps: u64,
    /// Size of each correction, measured by the run's error tests at the spin-up
    /// tolerance (≤ 1: converged), in order.
    pub corrections: Vec<f64>,
    /// Water [kg m⁻²] and energy [J m⁻²] that entered through the surface and left
    /// through the bottom over the last period integrated, per period length [s].
    pub surface_water: f64,
    pub bottom_water: f64,
    pub surface_energy: f64,
    pub bottom_energy: f64,
    /// Water taken up by roots and run off over the last period [kg m⁻²].
    pub root_water: f64,
    pub runoff_water: f64,
    pub period: f64,
    /// The column's water [kg m⁻²] in the periodic state at the start of the cycle, and
    /// in the steady state under the period means of the forcing (the first guess); the
    /// water flows of that steady state into the surface and out at the bottom
    /// [kg m⁻² s⁻¹]. Their differences are the long-term effect of the cycle itself.
    pub water: f64,
    pub steady_water: f64,
    pub steady_surface_water: f64,
    pub steady_bottom_water: f64,
}

impl PeriodicReport {
    /// The period-mean root uptake and runoff, where there are any (for [`Self::describe`]).
    fn other_flows(&self) -> String {
        let yr = crate::props::constants::SECONDS_PER_YEAR;
        let mut out = String::new();
        for (what, q) in [
            ("taken up by roots", self.root_water),
            ("run off", self.runoff_water),
        ] {
            if q != 0.0 {
                out += &format!(
                    "; over its last period, water {what} {} mm/yr",
                    crate::output::human(q / self.period * yr, 4)
                );
            }
        }
        out
    }

    /// One paragraph for the log and the run's summary.
    pub fn describe(&self) -> String {
        let yr = crate::props::constants::SECONDS_PER_YEAR;
        // kg m⁻² over the period → mm of water per year (1 kg m⁻² = 1 mm).
        let mm_yr = |q: f64| q / self.period * yr;
        format!(
            "initial state: periodic steady state after {} periods ({} steps; last distance {} of the tolerance); over its last period, water in at the surface {} mm/yr and out at the bottom {} mm/yr, heat in at the surface {} W m-2 and out at the bottom {} W m-2 (means); the column holds {} kg m-2 of water at the start of the cycle, against {} kg m-2 in the steady state under the period means (water in at the surface {} mm/yr, out at the bottom {} mm/yr)",
            self.periods,
            self.steps,
            crate::output::human(self.corrections.last().copied().unwrap_or(f64::NAN), 3),
            crate::output::human(mm_yr(self.surface_water), 4),
            crate::output::human(mm_yr(self.bottom_water), 4),
            crate::output::human(self.surface_energy / self.period, 4),
            crate::output::human(self.bottom_energy / self.period, 4),
            crate::output::human(self.water, 6),
            crate::output::human(self.steady_water, 6),
            crate::output::human(self.steady_surface_water * yr, 4),
            crate::output::human(self.steady_bottom_water * yr, 4),
        ) + &self.other_flows()
    }
}

/// The periodic steady state of the spin-up model `m` (see [`periodic_model`]): the
/// state x at the start with Φ(x) = x, Φ the map over one period, from the first guess
/// `guess`.
///
/// **Method** (derived here). Newton on G(x) = Φ(x) − x needs the period's monodromy
/// matrix M = ∂Φ/∂x. It is approximated by that of one backward-Euler step of length τ
/// under the period-mean Jacobian, M ≈ (S − τ F̄)⁻¹ S (S the storage Jacobian
/// ∂(V M)/∂x at the period's end, F̄ = ∂f/∂x of the fluxes and sources averaged over the
/// period, [`JACOBIAN_SAMPLES`] midpoints). With τ = P (the period) and the storage
/// change to first order S r, r = Φ(x) − x, replaced by the exact change ΔS of the
/// contents over the period, the update is x ← Φ(x) + δ with (S/τ − F̄) δ = ΔS / P.
/// For τ → ∞ that is a steady-state Newton step for the period's mean imbalance,
/// which multiplies the deviation of a linear mode of rate −s/P by
/// e^{−s} − (1 − e^{−s})/s ∈ [−0.3, 0] (derived): the slow modes, which a plain
/// repetition of periods would take thousands of periods to settle, converge like the
/// fast ones. But the steady problem of a dry soil is far from linear (a small
/// imbalance asks for a large change of head), so τ starts at one period and grows 4×
/// after every period that succeeds, and shrinks 8× (the update taken again from the
/// period's end) after one that fails: pseudo-transient continuation, as for the steady
/// state. Updates are limited as a Newton update of the run is
/// ([`Problem::apply_update`]).
///
/// **Convergence.** The distance to the periodic state is estimated by the τ = ∞
/// update δ∞ (−F̄ δ∞ = ΔS / P), in temperature and in liquid content (S δ∞, where the
/// head is a poor measure), by the run's error tests at the spin-up tolerance: ≤ 1.
pub fn periodic_steady_state(
    m: &Model,
    guess: Vec<f64>,
    solver: SolverKind,
    spin: &PeriodicSpinUp,
) -> Result<(Vec<f64>, PeriodicReport)> {
    const B: usize = 3;
    let t0 = m.time.start;
    let period = spin.period;
    let mut sys = System::new(m);
    let n = sys.n;
    let decoupled = sys.last_unknown_decoupled();
    let mut jac = BlockTri::<B>::new(n);
    // The mean Jacobian being summed, the last period's, and the matrix solved.
    let mut acc = BlockTri::<B>::new(n);
    let zeros = vec![0.0; B * n];
    let mut lin_sys = MeanLinearization::new(n, solver);
    let (mut s0, mut s1, mut s_next) = (zeros.clone(), zeros.clone(), zeros.clone());
    let mut res = zeros.clone();
    let mut delta = zeros.clone();
    let mut report = PeriodicReport {
        period,
        ..Default::default()
    };
    // A soil whose plain van Genuchten curve stops at a residual content makes the period
    // map rough where the cycle dries cells to it (measured: `annual-wave` did not
    // converge in 200 periods, its fayer-simmons variant `harrow-dunes-periodic` in 60).
    let advice = if m.periodic_dry_end_note().is_some() {
        "; a soil here keeps its van Genuchten residual content, which makes the period map rough where the cycle dries cells to it: where it dries below, set dry_end = \"fayer-simmons\""
    } else {
        ""
    };
    let fail = |why: String| {
        Error::Numerical(format!(
            "initial state \"periodic\": {why}; try a larger max_periods or periodic_tolerance, or state = \"steady\"{advice}"
        ))
    };
    let list = |v: &[f64]| {
        v.iter()
            .map(|c| format!("{c:.2e}"))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let mut x = guess;
    // Every period starts as the run does, from the first step size: the first step
    // of a BDF start has no error estimate, so a large one would go unchecked.
    let dt = m.time.dt_initial;
    let mut tau = period;
    let tau_max = ANDERSON_TAU_SECONDS.max(1.0e3 * period);
    let mut anderson = Anderson::new(ANDERSON_DEPTH);
    // The last period's end, to take the update again from.
    let mut base: Option<(Vec<f64>, Vec<f64>)> = None;
    loop {
        if report.periods >= spin.max_periods {
            let last = &report.corrections[report.corrections.len().saturating_sub(5)..];
            return Err(fail(format!(
                "not converged in {} periods (last distances {}, converged at ≤ 1)",
                report.periods,
                list(last)
            )));
        }
        // The period-mean Jacobian of the fluxes, −F̄, summed from its samples.
        acc.zero();
        let mut sample = |t: f64, u: &[f64]| -> Result<()> {
            add_jacobian_sample(&mut sys, t, u, &zeros, &mut res, &mut jac, &mut acc)
        };
        let end = match one_period(m, &x, dt, solver, &mut sample) {
            Ok(e) => e,
            Err(Error::Numerical(msg)) => {
                report.periods += 1;
                let Some((phi, s_phi)) = &base else {
                    return Err(fail(format!(
                        "the first period from the mean steady state failed: {msg}"
                    )));
                };
                tau /= 8.0;
                anderson.clear();
                if tau < period / 64.0 {
                    return Err(fail(format!(
                        "a period failed after every shortened update: {msg}"
                    )));
                }
                log::debug!(
                    "periodic steady state: period failed ({msg}); τ {:.3e} periods",
                    tau / period
                );
                lin_sys.solve(tau, &mut delta).map_err(&fail)?;
                x = corrected(&mut sys, t0, phi, s_phi, &mut delta, &lin_sys);
                continue;
            }
            Err(e) => return Err(e),
        };
        report.periods += 1;
        report.steps += end.steps;
        // The bottom's outflow: the top's inflow minus the net inflow, the sinks' and
        // the runoff (as the series' cumulative bottom flows).
        let (inflow, top, sink, runoff) = (0, 2, 3, 4);
        let bottom = |q: usize| {
            end.flow(top, q) - end.flow(inflow, q) - end.flow(sink, q) - end.flow(runoff, q)
        };
        report.surface_water = end.flow(top, 1);
        report.bottom_water = bottom(1);
        report.surface_energy = end.flow(top, 0);
        report.bottom_energy = bottom(0);
        report.root_water = end.flow(sink, 1);
        report.runoff_water = end.flow(runoff, 1);
        std::mem::swap(&mut lin_sys.mean_jac, &mut acc);

        // The contents' change over the period; scales and storage Jacobian at its end.
        sys.forget_kept();
        sys.evaluate(t0, &x);
        sys.storage_into(&mut s0);
        sys.assemble(t0, &end.u, 0.0, &zeros, &mut res, Some(&mut jac))
            .map_err(|nf| {
                fail(format!(
                    "the Jacobian is not finite at cell {} row {}",
                    nf.cell, nf.row
                ))
            })?;
        sys.storage_into(&mut s1);
        sys.storage_jacobian_into(&mut lin_sys.stor);
        sys.convergence_scales_into(0.0, &zeros, m.time.newton_tolerance, &mut lin_sys.row);
        for r in lin_sys.row.iter_mut() {
            *r = 1.0 / *r;
        }
        sys.column_scales_into(&end.u, &mut lin_sys.col);
        let volumes = sys.volumes();
        for i in 0..n {
            for k in 0..B {
                let j = B * i + k;
                lin_sys.rhs[j] = if decoupled && k == RV {
                    0.0
                } else {
                    volumes[i] * (s1[j] - s0[j]) / period
                };
            }
        }
        // The distance to the periodic state: the τ = ∞ update, by the error tests
        // (temperature directly, liquid content through S δ∞).
        lin_sys.solve(f64::INFINITY, &mut delta).map_err(&fail)?;
        let moved: Vec<f64> = end.u.iter().zip(&delta).map(|(u, d)| u + d).collect();
        let distance = weighted_change(
            &sys,
            &moved,
            &end.u,
            spin.tolerance,
            |j| delta[j],
            |j| lin_sys.content_change(&delta, volumes, j),
        );
        report.corrections.push(distance);
        log::debug!(
            "periodic steady state: period {} ({} steps), τ {:.3e} periods, distance {distance:.3e}",
            report.periods,
            end.steps,
            tau / period
        );
        // The update of this period at τ.
        lin_sys.solve(tau, &mut delta).map_err(&fail)?;
        let next = corrected(&mut sys, t0, &end.u, &s1, &mut delta, &lin_sys);
        // Past the continuation, Anderson acceleration of x ← g(x) (g: a period and
        // its update at the final τ), whose slow modes the mean Jacobian alone
        // contracts slowly: the mean of the fluxes' Jacobians over a period is not the
        // derivative of the period's mean flux where the periodic response adjusts.
        let accelerated = if tau >= tau_max {
            let weights = weights_of(&x);
            anderson.next(&x, &next, &weights)
        } else {
            next.clone()
        };
        let mut step_state = accelerated;
        if decoupled {
            equilibrate_vapor(&mut step_state);
        }
        // The iterate's change (the storages of x are s0, from this period's start).
        sys.evaluate(t0, &step_state);
        sys.storage_into(&mut s_next);
        let step = weighted_change(
            &sys,
            &step_state,
            &x,
            spin.tolerance,
            |j| step_state[j] - x[j],
            |j| s_next[j] - s0[j],
        );
        log::debug!(
            "periodic steady state: step {step:.3e} (Anderson memory {})",
            anderson.len()
        );
        if distance <= 1.0 && step <= 1.0 && anderson.len() >= 2 {
            // The column's water in the state returned (evaluated above).
            report.water = sys.totals()[1];
            return Ok((step_state, report));
        }
        base = Some((end.u, s1.clone()));
        if tau < tau_max {
            tau = (tau * 4.0).min(tau_max);
        }
        x = step_state;
    }
}

/// The pseudo-time step of the continuation at which Anderson acceleration takes over
/// (with τ held) [s]: 10³ years, at least 10³ periods. Longer steps of the mean
/// Jacobian overshoot the slow modes of the sand columns we measured (`harrow-dunes`
/// did not converge in 200 periods with 10⁸ annual periods, and converges in ~60 with
/// 10³); a shorter one leaves the acceleration slower modes than it can take (a daily
/// wave over the same column did not converge in 200 periods with 10³ daily periods,
/// and converges in ~45 with 10⁸).
const ANDERSON_TAU_SECONDS: f64 = 1.0e3 * crate::props::constants::SECONDS_PER_YEAR;
/// Past iterates Anderson acceleration combines.
const ANDERSON_DEPTH: usize = 5;

/// Steady state of `model` (its boundary conditions must be time-independent) by
/// pseudo-transient continuation: backward-Euler steps from `guess` with Δt growing
/// without bound, until the state stops changing at Δt ≥ 10¹⁶ s.
pub fn steady_state(model: &Model, guess: Vec<f64>, solver: SolverKind) -> Result<Vec<f64>> {
    let mut sys = System::new(model);
    // Pseudo-transient continuation: large changes per step are fine.
    sys.rules.target_temperature_change = 20.0;
    sys.rules.target_liquid_content_change = 0.2;
    let n = sys.n;
    let t0 = model.time.start;
    let state = Stepper::initial_state(&mut sys, t0, 3600.0, guess);
    let opts = StepOptions {
        dt_min: 1e-3,
        dt_max: 1e30,
        max_growth: 4.0,
        integrator: crate::solve::stepper::Integrator::BackwardEuler,
        newton: crate::solve::newton::NewtonOptions {
            max_iter: model.time.max_newton,
            residual_tol: model.time.newton_tolerance,
            ..Default::default()
        },
    };
    let mut st = Stepper::new(&mut sys, state, opts, make_solver(solver, n));
    let mut prev = st.state.u.clone();
    for _ in 0..5000 {
        let info = st.step(&mut sys, f64::MAX).map_err(|f| {
            numerical_message(&sys, &f, "steady initial state", model.time.epoch_year)
        })?;
        let u = &st.state.u;
        let mut change = 0.0f64;
        for i in 0..n {
            change = change
                .max((u[3 * i + T] - prev[3 * i + T]).abs())
                .max((u[3 * i + H] - prev[3 * i + H]).abs() / (1.0 + u[3 * i + H].abs()));
        }
        prev.copy_from_slice(u);
        log::debug!(
            "steady state: pseudo-time {:.3e} s, dt {:.3e} s, largest change {change:.3e}, Newton {}",
            st.state.t - t0,
            info.dt,
            info.newton_iterations
        );
        if info.dt >= 1e16 && change < 1e-9 {
            return Ok(prev);
        }
    }
    Err(Error::Numerical(
        "steady initial state: pseudo-transient continuation did not settle in 5000 steps".into(),
    ))
}
