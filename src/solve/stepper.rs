//! Time stepping: backward Euler on the conserved quantities with adaptive Δt.
//!
//! Each step solves `w (M(u) − M(u_old))/Δt + F_below − F_above = 0` by Newton. Δt grows
//! after easy steps and is limited by the largest change of temperature and liquid
//! content per step; a failed step is cut by 4 and retried; steps are clipped to land
//! exactly on the stop time the caller gives (schedule breakpoints, outputs, the end).
//! The cumulative boundary inflow is integrated with the same formula, so the balance
//! `storage − initial storage − inflow` closes to the Newton tolerance.

use super::linear::LinearSolver;
use super::newton::{self, NewtonFailure, NewtonOptions, NewtonWork};
use crate::physics::{System, H, T};

/// Step-size control settings.
#[derive(Debug, Clone)]
pub struct StepOptions {
    pub dt_min: f64,
    pub dt_max: f64,
    /// Target largest temperature change per step [K].
    pub target_dt_change: f64,
    /// Target largest liquid-content change per step [m³ m⁻³].
    pub target_theta_change: f64,
    /// Largest growth factor per step.
    pub max_growth: f64,
    pub newton: NewtonOptions,
}

impl Default for StepOptions {
    fn default() -> Self {
        StepOptions {
            dt_min: 1e-3,
            dt_max: 1e12,
            target_dt_change: 0.5,
            target_theta_change: 0.02,
            max_growth: 2.0,
            newton: NewtonOptions::default(),
        }
    }
}

/// Counters printed at the end of a run and stored in checkpoints.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Counters {
    pub steps: u64,
    pub rejected: u64,
    pub newton_iterations: u64,
    pub factorizations: u64,
}

/// A step that could not be taken even at the smallest Δt (fatal).
#[derive(Debug, Clone)]
pub struct StepFailure {
    pub t: f64,
    pub dt: f64,
    pub failure: NewtonFailure,
}

/// What an accepted step did.
#[derive(Debug, Clone, Copy)]
pub struct StepInfo {
    pub dt: f64,
    pub newton_iterations: usize,
}

/// The stepper's state: everything needed to continue a run exactly.
#[derive(Debug, Clone, PartialEq)]
pub struct StepState {
    /// Time [s].
    pub t: f64,
    /// Proposed next step [s].
    pub dt: f64,
    /// Unknowns, 3 per cell (T, h, rv).
    pub u: Vec<f64>,
    /// Cumulative net boundary inflow since the start: [energy J m⁻², water kg m⁻²].
    pub inflow: [f64; 2],
    /// Cumulative |top flux| + |bottom flux| (for relative balance errors).
    pub throughput: [f64; 2],
    /// Column totals at the start: [energy J m⁻², water kg m⁻²].
    pub initial_totals: [f64; 2],
    pub counters: Counters,
}

pub struct Stepper {
    pub state: StepState,
    pub opts: StepOptions,
    lin: Box<dyn LinearSolver>,
    work: NewtonWork,
    u_old: Vec<f64>,
    m_old: Vec<f64>,
    hist: Vec<f64>,
}

impl Stepper {
    /// A stepper at `state`; evaluates the system once to make its workspace current.
    pub fn new(
        sys: &mut System,
        state: StepState,
        opts: StepOptions,
        lin: Box<dyn LinearSolver>,
    ) -> Self {
        let n = sys.n;
        sys.evaluate(state.t, &state.u);
        Stepper {
            state,
            opts,
            lin,
            work: NewtonWork::new(n),
            u_old: vec![0.0; 3 * n],
            m_old: vec![0.0; 3 * n],
            hist: vec![0.0; 3 * n],
        }
    }

    /// Fresh state at time `t` from unknowns `u`.
    pub fn initial_state(sys: &mut System, t: f64, dt: f64, u: Vec<f64>) -> StepState {
        sys.evaluate(t, &u);
        StepState {
            t,
            dt,
            initial_totals: sys.totals(),
            u,
            inflow: [0.0; 2],
            throughput: [0.0; 2],
            counters: Counters::default(),
        }
    }

    /// Balance errors: [energy J m⁻², water kg m⁻²] = storage change − net inflow, and the
    /// same relative to max(|storage change|, throughput). Uses the last evaluation.
    pub fn balance(&self, sys: &System) -> ([f64; 2], [f64; 2]) {
        let tot = sys.totals();
        let mut abs = [0.0; 2];
        let mut rel = [0.0; 2];
        for k in 0..2 {
            let change = tot[k] - self.state.initial_totals[k];
            abs[k] = change - self.state.inflow[k];
            let denom = change.abs().max(self.state.throughput[k]);
            rel[k] = if denom > 0.0 {
                abs[k].abs() / denom
            } else {
                0.0
            };
        }
        (abs, rel)
    }

    /// Takes one accepted step that does not pass `t_stop` (retrying with smaller Δt).
    pub fn step(&mut self, sys: &mut System, t_stop: f64) -> Result<StepInfo, StepFailure> {
        let n = sys.n;
        let s = &mut self.state;
        self.u_old.copy_from_slice(&s.u);
        sys.evaluate(s.t, &self.u_old);
        sys.storage_into(&mut self.m_old);
        let mut dt_try = s.dt.min(self.opts.dt_max);
        loop {
            let remaining = t_stop - s.t;
            let landing = dt_try >= remaining * (1.0 - 1e-12);
            let dt = if landing {
                remaining
            } else if dt_try > 0.5 * remaining {
                0.5 * remaining
            } else {
                dt_try
            };
            let c = 1.0 / dt;
            let t_new = if landing { t_stop } else { s.t + dt };
            // hist = M_old/Δt
            for (h, m) in self.hist.iter_mut().zip(self.m_old.iter()) {
                *h = m * c;
            }
            s.u.copy_from_slice(&self.u_old);
            match newton::solve(
                sys,
                self.lin.as_mut(),
                t_new,
                c,
                &self.hist,
                &mut s.u,
                &self.opts.newton,
                &mut self.work,
            ) {
                Ok(stats) => {
                    s.counters.newton_iterations += stats.iterations as u64;
                    s.counters.factorizations += stats.factorizations as u64;
                    s.counters.steps += 1;
                    // sys holds the evaluation at the new state.
                    let top = &sys.faces[0];
                    let bot = &sys.faces[n];
                    let (fe_t, fw_t) = (top.energy().v, top.water().v);
                    let (fe_b, fw_b) = (bot.energy().v, bot.water().v);
                    s.inflow[0] += dt * (fe_t - fe_b);
                    s.inflow[1] += dt * (fw_t - fw_b);
                    s.throughput[0] += dt * (fe_t.abs() + fe_b.abs());
                    s.throughput[1] += dt * (fw_t.abs() + fw_b.abs());
                    // Next step from the iteration count and the largest changes.
                    let mut max_dt = 0.0f64;
                    let mut max_dth = 0.0f64;
                    for i in 0..n {
                        max_dt = max_dt.max((s.u[3 * i + T] - self.u_old[3 * i + T]).abs());
                        let soil = sys.soil_of(i);
                        let th_new = soil.retention.theta(s.u[3 * i + H]).0;
                        let th_old = soil.retention.theta(self.u_old[3 * i + H]).0;
                        max_dth = max_dth.max((th_new - th_old).abs());
                    }
                    let mut f = match stats.iterations {
                        0..=4 => self.opts.max_growth,
                        5..=7 => 1.2,
                        _ => 0.7,
                    };
                    if max_dt > 0.0 {
                        f = f.min(0.9 * self.opts.target_dt_change / max_dt);
                    }
                    if max_dth > 0.0 {
                        f = f.min(0.9 * self.opts.target_theta_change / max_dth);
                    }
                    let f = f.max(0.2);
                    // A step clipped to land keeps the proposal it was clipped from.
                    let base = if dt < dt_try { dt_try } else { dt };
                    s.dt = (base * f).clamp(self.opts.dt_min, self.opts.dt_max);
                    s.t = t_new;
                    return Ok(StepInfo {
                        dt,
                        newton_iterations: stats.iterations,
                    });
                }
                Err(failure) => {
                    s.counters.rejected += 1;
                    if dt <= self.opts.dt_min * (1.0 + 1e-9) {
                        s.u.copy_from_slice(&self.u_old);
                        sys.evaluate(s.t, &s.u);
                        return Err(StepFailure {
                            t: s.t,
                            dt,
                            failure,
                        });
                    }
                    dt_try = (0.25 * dt).max(self.opts.dt_min);
                    log::debug!(
                        "step of {dt:.3e} s at t = {:.6e} s rejected: {failure:?}",
                        s.t
                    );
                }
            }
        }
    }
}
