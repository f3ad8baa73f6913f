//! Time stepping on the conserved quantities, with adaptive Δt.
//!
//! Two integrators share one step loop:
//! - **Backward Euler** with heuristic control: Δt grows after easy steps and is limited
//!   by the largest change of temperature and liquid content per step.
//! - **Variable-step BDF** of orders 1..=max_order with local-error control: the
//!   derivative of the storages M at t_{n+1} is the derivative of the Lagrange polynomial
//!   through the last k+1 points, `dM/dt ≈ Σ_j ℓ_j'(t_{n+1}) M_{n+1−j}`; the local error is
//!   estimated from the corrector–predictor difference, `LTE ≈ Δt/(t_{n+1} − t_{n−k}) ·
//!   (u − u_pred)`, with the predictor extrapolating the last k+1 points; the step is
//!   accepted when the weighted max norm with `rtol` and per-variable `atol` is ≤ 1.
//!
//! Every step solves `w (c·M(u) − hist) + F_below − F_above = 0` by Newton. A failed step
//! is cut and retried; steps are clipped to land exactly on the stop time the caller
//! gives. The cumulative boundary inflow W is integrated with the same formula as the
//! storages, so `storage − initial storage − W` stays at the Newton tolerance whatever the
//! order (the BDF weights sum to zero).

use super::linear::LinearSolver;
use super::newton::{self, NewtonFailure, NewtonOptions, NewtonWork};
use crate::physics::{System, ENERGY, H, RV, T, WATER};
use crate::props::constants::WATER_DENSITY;

/// Which integrator and its tolerances.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Integrator {
    BackwardEuler,
    Bdf {
        max_order: usize,
        rtol: f64,
        atol_t: f64,
        atol_h: f64,
        atol_rv: f64,
        atol_theta: f64,
    },
}

/// Step-size control settings.
#[derive(Debug, Clone)]
pub struct StepOptions {
    pub dt_min: f64,
    pub dt_max: f64,
    /// Backward Euler only: target largest temperature change per step [K].
    pub target_dt_change: f64,
    /// Backward Euler only: target largest liquid-content change per step [m³ m⁻³].
    pub target_theta_change: f64,
    /// Largest growth factor per step.
    pub max_growth: f64,
    pub integrator: Integrator,
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
            integrator: Integrator::BackwardEuler,
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
    /// Jacobian evaluations (the rest of the Newton iterations reuse a kept one).
    pub jacobians: u64,
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
    pub order: usize,
}

/// An earlier accepted point kept for the multistep formula.
#[derive(Debug, Clone, PartialEq)]
pub struct HistoryPoint {
    pub t: f64,
    pub u: Vec<f64>,
    /// Storages at `u` (3 per cell, as [`StepState::storage`]); empty when not known
    /// (checkpoints written before they were kept), then recomputed.
    pub storage: Vec<f64>,
    pub inflow: [f64; 2],
    pub throughput: [f64; 2],
}

impl HistoryPoint {
    fn empty(len: usize) -> Self {
        HistoryPoint {
            t: 0.0,
            u: vec![0.0; len],
            storage: vec![0.0; len],
            inflow: [0.0; 2],
            throughput: [0.0; 2],
        }
    }
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
    /// Storages at `u` (3 per cell, as [`System::storage_into`]) from the evaluation that
    /// accepted it: the multistep formula advances these, so they are part of the state
    /// (a re-evaluation may differ in the last bits, see `System::evaluate`). Empty when
    /// not known (older checkpoints), then recomputed.
    pub storage: Vec<f64>,
    /// Cumulative net boundary inflow since the start: [energy J m⁻², water kg m⁻²].
    pub inflow: [f64; 2],
    /// Cumulative |top flux| + |bottom flux| (for relative balance errors).
    pub throughput: [f64; 2],
    /// Column totals at the start: [energy J m⁻², water kg m⁻²].
    pub initial_totals: [f64; 2],
    /// Storages of every cell at the start (3 per cell, as [`System::storage_into`]):
    /// the storage change is summed cell by cell from these, so its round-off is that of
    /// the change, not of the whole column's content.
    pub initial_storage: Vec<f64>,
    pub counters: Counters,
    /// Earlier accepted points, newest first (BDF only; at most max_order + 1).
    pub history: Vec<HistoryPoint>,
    /// Current BDF order and the number of steps taken at it.
    pub order: usize,
    pub steps_at_order: usize,
    /// Error estimate of the last accepted BDF step (0: none since the last restart),
    /// for the predictive step controller.
    pub last_error: f64,
    /// The states at which the system's kept evaluations with derivatives were made
    /// (cells, faces; see `System::linearization_states`): part of the state because
    /// later steps linearise from them. Filled by [`Stepper::sync_state`]; empty: none.
    pub linearization_cells: Vec<f64>,
    pub linearization_faces: Vec<f64>,
}

impl StepState {
    /// The times of the current point and the `count − 1` newest history points (at most
    /// 7 in all), newest first: the nodes of the extrapolation polynomials.
    fn nodes(&self, count: usize) -> [f64; 7] {
        let mut tau = [0.0f64; 7];
        tau[0] = self.t;
        for j in 1..count {
            tau[j] = self.history[j - 1].t;
        }
        tau
    }
}

pub struct Stepper {
    pub state: StepState,
    pub opts: StepOptions,
    lin: Box<dyn LinearSolver>,
    work: NewtonWork,
    u_old: Vec<f64>,
    hist: Vec<f64>,
}

/// Largest step ratio Δt_{n+1}/Δt_n for the BDF order (index = order).
const BDF_MAX_RATIO: [f64; 6] = [2.0, 2.0, 2.0, 1.5, 1.2, 1.08];

/// Derivative at τ[0] of the Lagrange basis polynomials through τ[0..=k].
fn bdf_weights(tau: &[f64], out: &mut [f64]) {
    let k = tau.len() - 1;
    out[0] = (1..=k).map(|m| 1.0 / (tau[0] - tau[m])).sum();
    for j in 1..=k {
        let mut num = 1.0;
        let mut den = 1.0;
        for m in 0..=k {
            if m != j {
                den *= tau[j] - tau[m];
                if m != 0 {
                    num *= tau[0] - tau[m];
                }
            }
        }
        out[j] = num / den;
    }
}

/// Lagrange basis values at `x` for the nodes `tau`.
fn lagrange_values(tau: &[f64], x: f64, out: &mut [f64]) {
    for j in 0..tau.len() {
        let mut v = 1.0;
        for m in 0..tau.len() {
            if m != j {
                v *= (x - tau[m]) / (tau[j] - tau[m]);
            }
        }
        out[j] = v;
    }
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
        let mut state = state;
        // Storages not known (older checkpoints): from a full evaluation.
        sys.forget_linearization();
        for hp in state.history.iter_mut() {
            if hp.storage.len() != 3 * n {
                sys.evaluate(hp.t, &hp.u);
                hp.storage = vec![0.0; 3 * n];
                sys.storage_into(&mut hp.storage);
            }
        }
        sys.evaluate(state.t, &state.u);
        if state.storage.len() != 3 * n {
            state.storage = vec![0.0; 3 * n];
            sys.storage_into(&mut state.storage);
        }
        // The kept evaluations with derivatives of the run this state comes from.
        sys.restore_linearization(&state.linearization_cells, &state.linearization_faces);
        Stepper {
            state,
            opts,
            lin,
            work: NewtonWork::new(n),
            u_old: vec![0.0; 3 * n],
            hist: vec![0.0; 3 * n],
        }
    }

    /// Fresh state at time `t` from unknowns `u`.
    pub fn initial_state(sys: &mut System, t: f64, dt: f64, u: Vec<f64>) -> StepState {
        sys.evaluate(t, &u);
        let mut initial_storage = vec![0.0; 3 * sys.n];
        sys.storage_into(&mut initial_storage);
        StepState {
            t,
            dt,
            initial_totals: sys.totals(),
            storage: initial_storage.clone(),
            initial_storage,
            u,
            inflow: [0.0; 2],
            throughput: [0.0; 2],
            counters: Counters::default(),
            history: Vec::new(),
            order: 1,
            steps_at_order: 0,
            last_error: 0.0,
            linearization_cells: Vec::new(),
            linearization_faces: Vec::new(),
        }
    }

    /// Copies into the state what it takes from the system (the states of its kept
    /// evaluations with derivatives), so that it continues the run exactly: call before
    /// saving the state.
    pub fn sync_state(&mut self, sys: &System) {
        let (cells, faces) = sys.linearization_states();
        self.state.linearization_cells = cells;
        self.state.linearization_faces = faces;
    }

    /// Forgets the multistep history (after a discontinuity in the forcing): the next
    /// step is of order 1.
    pub fn restart_history(&mut self) {
        self.state.history.clear();
        self.state.order = 1;
        self.state.steps_at_order = 0;
        self.state.last_error = 0.0;
    }

    /// Balance errors: [energy J m⁻², water kg m⁻²] = storage change − net inflow, and the
    /// same relative to max(|storage change|, throughput). Uses the last evaluation.
    pub fn balance(&self, sys: &System) -> ([f64; 2], [f64; 2]) {
        // Storage change summed cell by cell: [energy, water].
        let mut changes = [0.0; 2];
        let m0 = &self.state.initial_storage;
        for i in 0..sys.n {
            let m = sys.storage(i);
            let w = sys.widths[i];
            changes[0] += w * (m[ENERGY] - m0[3 * i + ENERGY]);
            changes[1] += w * (m[WATER] - m0[3 * i + WATER]);
        }
        let mut abs = [0.0; 2];
        let mut rel = [0.0; 2];
        for k in 0..2 {
            let change = changes[k];
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

    /// Weighted max norms of the local error estimates of the orders `orders` (at most
    /// three) for the step to `t_new` of size `dt` just solved (state in
    /// `self.state.u`, its evaluation in `sys`), in one pass over the cells: for order q,
    /// the difference between the solution and the extrapolation through the q+1 newest
    /// points, times `dt/(t_new − t_{n−q})`. Temperature and vapour density are tested
    /// directly; moisture in liquid content through the water storage (in head where the
    /// soil is saturated and θl is flat). Needs every q ≤ history length + 1. Returns per
    /// order the norm and the worst (cell, variable).
    fn error_norms(
        &self,
        sys: &System,
        orders: &[usize],
        t_new: f64,
        dt: f64,
        tol: &Tolerances,
    ) -> [(f64, (usize, usize)); 3] {
        let s = &self.state;
        let nq = orders.len().min(3);
        let mut lag = [[0.0f64; 7]; 3];
        let mut scale = [0.0f64; 3];
        let mut q_max = 0;
        for (o, &q) in orders.iter().take(nq).enumerate() {
            let ptau = s.nodes(q + 1);
            lagrange_values(&ptau[..=q], t_new, &mut lag[o]);
            scale[o] = dt / (t_new - ptau[q]);
            q_max = q_max.max(q);
        }
        // The largest ratio |error| / weight per order, compared by cross-multiplication
        // (a division only where a new largest is found).
        let mut out = [(0.0f64, (0usize, 0usize)); 3];
        // For each order: the solution `y` against the extrapolation of `points`
        // (current, then history), with weight `den`.
        #[inline(always)]
        #[allow(clippy::too_many_arguments)]
        fn test(
            out: &mut [(f64, (usize, usize)); 3],
            orders: &[usize],
            lag: &[[f64; 7]; 3],
            scale: &[f64; 3],
            points: &[f64; 7],
            y: f64,
            factor: f64,
            den: f64,
            at: (usize, usize),
        ) {
            for (o, &q) in orders.iter().enumerate() {
                let p = (1..=q).fold(lag[o][0] * points[0], |a, j| a + lag[o][j] * points[j]);
                let num = (scale[o] * (y - p) * factor).abs();
                let (err, worst) = &mut out[o];
                // (The state is finite here: Newton refuses NaN and Inf.)
                if num > *err * den {
                    *err = num / den;
                    *worst = at;
                }
            }
        }
        let orders = &orders[..nq];
        let mut test = |points: &[f64; 7], y: f64, factor: f64, den: f64, at: (usize, usize)| {
            test(&mut out, orders, &lag, &scale, points, y, factor, den, at)
        };
        // Entry `k` of the current point and the q_max newest history points, of the
        // unknowns or (`storage`) of the storages.
        let mut points = [0.0f64; 7];
        let mut gather = |k: usize, storage: bool| -> [f64; 7] {
            points[0] = if storage { s.storage[k] } else { self.u_old[k] };
            for j in 1..=q_max {
                let h = &s.history[j - 1];
                points[j] = if storage { h.storage[k] } else { h.u[k] };
            }
            points
        };
        for i in 0..sys.n {
            for (kk, atol) in [(T, tol.atol_t), (RV, tol.atol_rv)] {
                let k = 3 * i + kk;
                let points = gather(k, false);
                let y = s.u[k];
                let den = atol + tol.rtol * y.abs().max(self.u_old[k].abs());
                test(&points, y, 1.0, den, (i, kk));
            }
            let th = sys.cells[i].theta.v;
            if th >= sys.soil_of(i).retention.theta_s() {
                let k = 3 * i + H;
                let points = gather(k, false);
                let y = s.u[k];
                test(&points, y, 1.0, tol.atol_h + tol.rtol * y.abs(), (i, H));
            } else {
                let points = gather(3 * i + WATER, true);
                let m = sys.storage(i)[WATER];
                test(
                    &points,
                    m,
                    1.0 / WATER_DENSITY,
                    tol.atol_theta + tol.rtol * th,
                    (i, H),
                );
            }
        }
        out
    }

    /// Takes one accepted step that does not pass `t_stop` (retrying with smaller Δt).
    pub fn step(&mut self, sys: &mut System, t_stop: f64) -> Result<StepInfo, StepFailure> {
        let n = sys.n;
        self.u_old.copy_from_slice(&self.state.u);
        let bdf = match self.opts.integrator {
            Integrator::Bdf {
                max_order,
                rtol,
                atol_t,
                atol_h,
                atol_rv,
                atol_theta,
            } => Some((
                max_order.clamp(1, 5),
                rtol,
                atol_t,
                atol_h,
                atol_rv,
                atol_theta,
            )),
            Integrator::BackwardEuler => None,
        };
        // A fresh Jacobian at the start of every step, kept over its Newton iterations
        // (and over retries after an error-test failure, when it stays a good
        // approximation). Kept across steps it saved ~20 % of the evaluations on the
        // benchmark but no wall time (slower contraction, more refactorisations), and a
        // step that depends only on the saved state keeps restarts bitwise exact.
        self.work.invalidate();
        let mut dt_try = self.state.dt.min(self.opts.dt_max);
        let mut error_failures = 0usize;
        let mut tau = [0.0f64; 7];
        let mut alpha = [0.0f64; 7];
        let mut lag = [0.0f64; 7];
        loop {
            let s = &mut self.state;
            let remaining = t_stop - s.t;
            let landing = dt_try >= remaining * (1.0 - 1e-12);
            let dt = if landing {
                remaining
            } else if dt_try > 0.5 * remaining {
                0.5 * remaining
            } else {
                dt_try
            };
            let t_new = if landing { t_stop } else { s.t + dt };
            // Order of this step: limited by the history available.
            let k = match bdf {
                Some(_) => s.order.min(s.history.len() + 1).max(1),
                None => 1,
            };
            // Nodes τ0 = t_new, τ1 = t, τ2.. = history.
            tau[0] = t_new;
            tau[1] = s.t;
            for j in 2..=k {
                tau[j] = s.history[j - 2].t;
            }
            bdf_weights(&tau[..=k], &mut alpha);
            let c = alpha[0];
            // hist = −(α1 M_n + Σ αj M_{n+1−j}), accumulated point by point.
            for (h, m) in self.hist.iter_mut().zip(s.storage.iter()) {
                *h = alpha[1] * m;
            }
            for j in 2..=k {
                let a = alpha[j];
                for (h, m) in self.hist.iter_mut().zip(s.history[j - 2].storage.iter()) {
                    *h += a * m;
                }
            }
            for h in self.hist.iter_mut() {
                *h = -*h;
            }
            // Predictor: extrapolation through the last k+1 points (as many as exist).
            let np = (k + 1).min(s.history.len() + 1);
            let ptau = s.nodes(np);
            lagrange_values(&ptau[..np], t_new, &mut lag);
            // Newton starts from the predictor (backward Euler: linear extrapolation of the
            // last two points), accumulated point by point into the unknowns ...
            for (p, x) in s.u.iter_mut().zip(self.u_old.iter()) {
                *p = lag[0] * x;
            }
            for j in 1..np {
                let l = lag[j];
                for (p, x) in s.u.iter_mut().zip(s.history[j - 1].u.iter()) {
                    *p += l * x;
                }
            }
            // ... and kept physical: vapour density positive, head not above 0 where the
            // old head was below.
            for (p, old) in s.u.chunks_exact_mut(3).zip(self.u_old.chunks_exact(3)) {
                if p[RV].is_nan() || p[RV] <= 0.0 {
                    p[RV] = old[RV];
                }
                if old[H] < 0.0 && p[H] > 0.0 {
                    p[H] = 0.5 * old[H];
                }
            }
            let result = newton::solve(
                sys,
                self.lin.as_mut(),
                t_new,
                c,
                &self.hist,
                &mut s.u,
                &self.opts.newton,
                &mut self.work,
            );
            let stats = match result {
                Ok(stats) => stats,
                Err(failure) => {
                    s.counters.rejected += 1;
                    // The retry starts with a Jacobian evaluated at its own start.
                    self.work.invalidate();
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
                    if bdf.is_some() {
                        s.order = 1;
                        s.steps_at_order = 0;
                    }
                    log::debug!(
                        "step of {dt:.3e} s at t = {:.6e} s rejected: {failure:?}",
                        s.t
                    );
                    continue;
                }
            };
            s.counters.newton_iterations += stats.iterations as u64;
            s.counters.factorizations += stats.factorizations as u64;
            s.counters.jacobians += stats.jacobians as u64;
            // Local error test (BDF).
            let mut factor;
            if let Some((max_order, rtol, atol_t, atol_h, atol_rv, atol_theta)) = bdf {
                let tol = Tolerances {
                    rtol,
                    atol_t,
                    atol_h,
                    atol_rv,
                    atol_theta,
                };
                let have_pred = s.history.len() + 1 > k; // k+1 points were available
                                                         // The estimates of orders k and, when the order is to be chosen after
                                                         // this step (see below), k + 1 and k − 1, in one pass.
                let choose = have_pred && s.steps_at_order + 1 > k;
                let up = choose && k < max_order && s.history.len() > k;
                let down = choose && k > 1;
                let mut orders = [k, 0, 0];
                let mut count = 1;
                for (q, wanted) in [(k + 1, up), (k.saturating_sub(1), down)] {
                    if wanted {
                        orders[count] = q;
                        count += 1;
                    }
                }
                let norms = if have_pred {
                    self.error_norms(sys, &orders[..count], t_new, dt, &tol)
                } else {
                    [(0.0, (0, 0)); 3]
                };
                let estimate = |q: usize| {
                    orders[..count]
                        .iter()
                        .position(|&o| o == q)
                        .map(|p| norms[p].0)
                };
                let err = if have_pred {
                    let (err, worst) = norms[0];
                    log::trace!(
                        "t {:.6e} dt {dt:.3e} order {k} error {err:.3e} at cell {} variable {}",
                        self.state.t,
                        worst.0,
                        worst.1
                    );
                    err
                } else {
                    // The first step after a restart has no error estimate: keep it small
                    // by the change heuristics below and let the next steps judge.
                    0.0
                };
                let s = &mut self.state;
                if err > 1.0 && dt > self.opts.dt_min * (1.0 + 1e-9) {
                    s.counters.rejected += 1;
                    error_failures += 1;
                    let f = (0.9 * err.powf(-1.0 / (k as f64 + 1.0))).clamp(0.1, 0.9);
                    dt_try = (dt * if error_failures >= 2 { f.min(0.25) } else { f })
                        .max(self.opts.dt_min);
                    // Repeated failures: lower the order by one, then to 1.
                    if error_failures == 2 {
                        s.order = k.saturating_sub(1).max(1);
                        s.steps_at_order = 0;
                    } else if error_failures > 2 {
                        s.order = 1;
                        s.steps_at_order = 0;
                    }
                    continue;
                }
                let cap = self.opts.max_growth;
                factor = growth_factor(err, k, cap);
                // Predictive control (Gustafsson 1994; Hairer & Wanner 1996, IV.8): when
                // the error grew from the last step, extrapolate that trend,
                // f = f_std · (Δt/Δt_prev) · (err_prev/err)^(1/(k+1)), and take the
                // smaller factor. It damps the grow–reject cycles of the standard rule;
                // only near the tolerance (err > 0.2), where a rejection is in reach (far
                // below it, estimates jump by decades and would stall the growth).
                if have_pred && s.last_error > 0.0 && err > 0.2 && !s.history.is_empty() {
                    let dt_prev = s.t - s.history[0].t;
                    if dt_prev > 0.0 {
                        let f = factor
                            * (dt / dt_prev)
                            * (s.last_error / err).powf(1.0 / (k as f64 + 1.0));
                        factor = factor.min(f);
                    }
                }
                s.last_error = if have_pred { err } else { 0.0 };
                if !have_pred {
                    factor = change_factor(sys, &s.u, &self.u_old, &self.opts, stats.iterations);
                }
                // Order control, after k+1 steps at this order: the order among k−1, k,
                // k+1 whose error estimate allows the largest next step. Another order must
                // promise 20 % more; when the growth limit, not the error, bounds the step
                // at both k and k+1, the higher order is taken (it is the more accurate).
                let mut next_order = s.order.max(k);
                if have_pred && s.steps_at_order + 1 > k {
                    let mut best = (k, factor);
                    if let Some(e) = estimate(k + 1).filter(|_| up) {
                        let f = growth_factor(e, k + 1, cap);
                        if f >= 1.2 * factor || (f >= cap && factor >= cap) {
                            best = (k + 1, f);
                        }
                    }
                    if let Some(e) = estimate(k - 1).filter(|_| best.0 == k && down) {
                        let f = growth_factor(e, k - 1, cap);
                        if f > 1.2 * factor {
                            best = (k - 1, f);
                        }
                    }
                    next_order = best.0;
                    factor = best.1;
                }
                let s = &mut self.state;
                if next_order != s.order {
                    s.order = next_order;
                    s.steps_at_order = 0;
                } else {
                    s.steps_at_order += 1;
                }
                // Newton trouble also limits growth.
                // No growth right after a rejected try: the error estimate was just
                // shown to be optimistic at this size.
                if error_failures > 0 {
                    factor = factor.min(1.0);
                }
                let trouble = if self.opts.newton.reuse_jacobian {
                    stats.jacobians > 2
                } else {
                    stats.iterations > 6
                };
                if trouble {
                    factor = factor.min(0.8);
                }
            } else {
                factor = change_factor(sys, &s.u, &self.u_old, &self.opts, stats.iterations);
            }
            let s = &mut self.state;
            // Variable-step BDF of order ≥ 3 is zero-stable only for bounded step ratios
            // (Grigorieff 1983; bounds of about 1.6, 1.3 and 1.1 for orders 3, 4, 5, from
            // memory): growth is capped below them for the order the next step will use.
            let cap = if bdf.is_some() {
                BDF_MAX_RATIO[s.order.clamp(1, 5)]
            } else {
                f64::INFINITY
            };
            let factor = factor.clamp(0.2, self.opts.max_growth.max(1.0).min(cap));
            s.counters.steps += 1;
            // Cumulative inflow by the same formula as the storages:
            // α0 W_new + α1 W_old + Σ αj W_j = F_in(new).
            let (top, bot) = sys.boundary_fluxes();
            let fin = [top[0] - bot[0], top[1] - bot[1]];
            let fabs = [top[0].abs() + bot[0].abs(), top[1].abs() + bot[1].abs()];
            let mut new_inflow = [0.0; 2];
            let mut new_throughput = [0.0; 2];
            for q in 0..2 {
                let mut a = alpha[1] * s.inflow[q];
                let mut b = alpha[1] * s.throughput[q];
                for j in 2..=k {
                    a += alpha[j] * s.history[j - 2].inflow[q];
                    b += alpha[j] * s.history[j - 2].throughput[q];
                }
                new_inflow[q] = (fin[q] - a) / c;
                new_throughput[q] = (fabs[q] - b) / c;
            }
            {
                // Shift the history: the old current point becomes the newest history point.
                let keep = match bdf {
                    Some((max_order, ..)) => max_order + 1,
                    None => 1,
                };
                // Reuse the oldest point's buffers once the history is full.
                let mut point = if s.history.len() >= keep {
                    s.history
                        .pop()
                        .unwrap_or_else(|| HistoryPoint::empty(3 * n))
                } else {
                    HistoryPoint::empty(3 * n)
                };
                point.t = s.t;
                point.u.copy_from_slice(&self.u_old);
                point.inflow = s.inflow;
                point.throughput = s.throughput;
                // The old storages go with the point; the new ones are filled below.
                std::mem::swap(&mut point.storage, &mut s.storage);
                s.history.insert(0, point);
                s.history.truncate(keep);
            }
            s.inflow = new_inflow;
            s.throughput = new_throughput;
            let base = if dt < dt_try { dt_try } else { dt };
            s.dt = (base * factor).clamp(self.opts.dt_min, self.opts.dt_max);
            s.t = t_new;
            // sys holds the evaluation at the new state (Newton's last assembly).
            sys.storage_into(&mut s.storage);
            return Ok(StepInfo {
                dt,
                newton_iterations: stats.iterations,
                order: k,
            });
        }
    }
}

/// Tolerances of the local error test.
struct Tolerances {
    rtol: f64,
    atol_t: f64,
    atol_h: f64,
    atol_rv: f64,
    atol_theta: f64,
}

/// Step factor that brings an error estimate `err` of order `q` to 0.81 of the tolerance
/// (safety 0.9); `max_growth` when the estimate is zero.
fn growth_factor(err: f64, q: usize, max_growth: f64) -> f64 {
    if err > 0.0 {
        (0.9 * err.powf(-1.0 / (q as f64 + 1.0))).min(max_growth)
    } else {
        max_growth
    }
}

/// Growth factor of the backward-Euler heuristics: from the Newton iteration count and the
/// largest changes of temperature and liquid content over the step.
fn change_factor(
    sys: &System,
    u: &[f64],
    u_old: &[f64],
    opts: &StepOptions,
    iterations: usize,
) -> f64 {
    let mut max_dt = 0.0f64;
    let mut max_dth = 0.0f64;
    for i in 0..sys.n {
        max_dt = max_dt.max((u[3 * i + T] - u_old[3 * i + T]).abs());
        let soil = sys.soil_of(i);
        let th_new = soil.retention.theta(u[3 * i + H]).0;
        let th_old = soil.retention.theta(u_old[3 * i + H]).0;
        max_dth = max_dth.max((th_new - th_old).abs());
    }
    let mut f = match iterations {
        0..=4 => opts.max_growth,
        5..=7 => 1.2,
        _ => 0.7,
    };
    if max_dt > 0.0 {
        f = f.min(0.9 * opts.target_dt_change / max_dt);
    }
    if max_dth > 0.0 {
        f = f.min(0.9 * opts.target_theta_change / max_dth);
    }
    f.max(0.2)
}
