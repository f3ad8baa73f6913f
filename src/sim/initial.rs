//! Initial states: hydrostatic, a given profile, or the steady state of the initial
//! boundary conditions (by pseudo-transient continuation).

use crate::error::{Error, Result};
use crate::model::{
    BottomBc, BottomHeat, BottomWater, InitialState, Model, Periods, ProfileMoisture, SurfaceBc,
    SurfaceHeat, SurfaceWater,
};
use crate::physics::cell::equilibrium_vapor;
use crate::physics::dual::D3;
use crate::physics::{ColumnStepper as Stepper, System, H, RV, T};
use crate::schedule::Schedule;
use crate::solve::linear::{make_solver, SolverKind};
use crate::solve::stepper::StepOptions;

use super::simulation::numerical_message;

fn frozen(s: &Schedule, t: f64) -> Schedule {
    Schedule::Constant(s.value(t))
}

/// The surface condition with every schedule held at its value at `t`.
pub fn freeze_surface(bc: &SurfaceBc, t: f64) -> SurfaceBc {
    SurfaceBc {
        heat: match &bc.heat {
            SurfaceHeat::Temperature(s) => SurfaceHeat::Temperature(frozen(s, t)),
            SurfaceHeat::Flux(s) => SurfaceHeat::Flux(frozen(s, t)),
        },
        water: match &bc.water {
            SurfaceWater::Head(s) => SurfaceWater::Head(frozen(s, t)),
            SurfaceWater::Flux { flux, ponding_head } => SurfaceWater::Flux {
                flux: frozen(flux, t),
                ponding_head: *ponding_head,
            },
            SurfaceWater::Atmosphere {
                relative_humidity,
                resistance,
            } => SurfaceWater::Atmosphere {
                relative_humidity: frozen(relative_humidity, t),
                resistance: resistance.as_ref().map(|r| frozen(r, t)),
            },
            SurfaceWater::Pond {
                inflow,
                max_depth,
                air,
            } => SurfaceWater::Pond {
                inflow: frozen(inflow, t),
                max_depth: *max_depth,
                air: air.as_ref().map(|(rh, r)| (frozen(rh, t), frozen(r, t))),
            },
            SurfaceWater::NoFlow => SurfaceWater::NoFlow,
        },
    }
}

/// The bottom condition with every schedule held at its value at `t`.
pub fn freeze_bottom(bc: &BottomBc, t: f64) -> BottomBc {
    BottomBc {
        heat: match &bc.heat {
            BottomHeat::Temperature(s) => BottomHeat::Temperature(frozen(s, t)),
            BottomHeat::GeothermalFlux(s) => BottomHeat::GeothermalFlux(frozen(s, t)),
        },
        water: match &bc.water {
            BottomWater::WaterTable(s) => BottomWater::WaterTable(frozen(s, t)),
            BottomWater::FreeDrainage => BottomWater::FreeDrainage,
            BottomWater::NoFlow => BottomWater::NoFlow,
        },
    }
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
    match &model.initial {
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
    }
}

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
