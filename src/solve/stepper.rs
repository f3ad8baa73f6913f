//! Time stepping on the conserved quantities, with adaptive Δt, for any [`Problem`].
//!
//! Two integrators share one step loop:
//! - **Backward Euler** with heuristic control: Δt grows after easy steps and is limited
//!   by what the problem says of the changes over the step ([`Problem::change_factor`]).
//! - **Variable-step BDF** of orders 1..=max_order with local-error control: the
//!   derivative of the storages M at t_{n+1} is the derivative of the Lagrange polynomial
//!   through the last k+1 points, `dM/dt ≈ Σ_j ℓ_j'(t_{n+1}) M_{n+1−j}`; the local error is
//!   estimated from the corrector–predictor difference, `LTE ≈ Δt/(t_{n+1} − t_{n−k}) ·
//!   (u − u_pred)`, with the predictor extrapolating the last k+1 points; the step is
//!   accepted when the weighted max norm (weights and measures from
//!   [`Problem::error_tests`]) is ≤ 1.
//!
//! Every step solves `V (c·M(u) − hist) − f(t, u) = 0` by Newton. A failed step is cut
//! and retried; steps are clipped to land exactly on the stop time the caller gives. The
//! cumulative boundary inflow W of each conserved quantity is integrated with the same
//! formula as the storages, so `storage − initial storage − W` stays at the Newton
//! tolerance whatever the order (the BDF weights sum to zero).

use super::linear::LinearSolver;
use super::newton::{self, BalanceWindow, NewtonFailure, NewtonOptions, NewtonStats, NewtonWork};
use super::problem::{Conserved, ErrorTest, Problem, MAX_CONSERVED};

/// Which integrator and its relative tolerance (the absolute ones are the problem's).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Integrator {
    BackwardEuler,
    Bdf { max_order: usize, rtol: f64 },
}

/// Step-size control settings.
#[derive(Debug, Clone)]
pub struct StepOptions {
    pub dt_min: f64,
    pub dt_max: f64,
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

impl Counters {
    fn add(&mut self, stats: &NewtonStats) {
        self.newton_iterations += stats.iterations as u64;
        self.factorizations += stats.factorizations as u64;
        self.jacobians += stats.jacobians as u64;
    }
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
    /// Order k of the step's formula and its derivative weights: the storages M at the
    /// new time satisfy `dM/dt ≈ Σ_{j=0..=k} alpha[j] M_{n+1−j}` (node 0 the new time,
    /// node 1 the previous state, nodes 2.. the history, newest first). Quantities carried
    /// along with the step (solutes) use the same formula.
    pub order: usize,
    pub alpha: [f64; 7],
}

/// An earlier accepted point kept for the multistep formula.
#[derive(Debug, Clone, PartialEq)]
pub struct HistoryPoint {
    pub t: f64,
    pub u: Vec<f64>,
    /// Storages at `u` (as [`StepState::storage`]); empty when not known (checkpoints
    /// written before they were kept), then recomputed.
    pub storage: Vec<f64>,
    /// Cumulative inflow and throughput at `t` (as [`StepState::inflow`]).
    pub inflow: Vec<f64>,
    pub throughput: Vec<f64>,
    /// Cumulative inflow through the top boundary at `t` (as [`StepState::top_inflow`]).
    pub top_inflow: Vec<f64>,
    /// Cumulative outflow through internal sinks at `t` (as [`StepState::sink`]).
    pub sink: Vec<f64>,
    /// Cumulative runoff at `t` (as [`StepState::runoff`]).
    pub runoff: Vec<f64>,
}

impl HistoryPoint {
    fn empty(len: usize, conserved: usize) -> Self {
        HistoryPoint {
            t: 0.0,
            u: vec![0.0; len],
            storage: vec![0.0; len],
            inflow: vec![0.0; conserved],
            throughput: vec![0.0; conserved],
            top_inflow: vec![0.0; conserved],
            sink: vec![0.0; conserved],
            runoff: vec![0.0; conserved],
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
    /// Unknowns, B per block.
    pub u: Vec<f64>,
    /// Storages at `u` (B per block, as [`Problem::storage_into`]) from the evaluation
    /// that accepted it: the multistep formula advances these, so they are part of the
    /// state (a re-evaluation may differ in the last bits when the problem keeps
    /// evaluations, see [`Problem::kept_states`]). Empty when not known (older
    /// checkpoints), then recomputed.
    pub storage: Vec<f64>,
    /// Cumulative net boundary inflow of each conserved quantity since the start (in the
    /// order of [`Problem::conserved_rows`]; for the soil column [energy J m⁻², water
    /// kg m⁻²]).
    pub inflow: Vec<f64>,
    /// Cumulative |top flow| + |bottom flow| (for relative balance errors).
    pub throughput: Vec<f64>,
    /// Cumulative inflow through the top boundary alone (the top flow of
    /// [`Problem::boundary_flows`]) of each conserved quantity, by the same formula as
    /// [`StepState::inflow`]; the bottom boundary's outflow is `top_inflow − inflow`.
    /// NaN when unknown (a run continued from a checkpoint written before it was kept).
    pub top_inflow: Vec<f64>,
    /// Cumulative outflow through internal sinks ([`Problem::sink_flows`]) of each
    /// conserved quantity, by the same formula; the net inflow is top − bottom − sink −
    /// runoff.
    pub sink: Vec<f64>,
    /// Cumulative runoff from a surface store ([`Problem::runoff_flows`]) of each
    /// conserved quantity, by the same formula.
    pub runoff: Vec<f64>,
    /// Content of each conserved quantity at the start (Σ V M).
    pub initial_totals: Vec<f64>,
    /// Storages of every block at the start: the storage change is summed block by
    /// block from these, so its round-off is that of the change, not of the content.
    pub initial_storage: Vec<f64>,
    pub counters: Counters,
    /// Earlier accepted points, newest first (BDF only; at most max_order: a step of
    /// order k reads k of them, for its predictor through k + 1 points and its error
    /// estimate, and the estimate of order k + 1 one more, which is wanted only below
    /// max_order).
    pub history: Vec<HistoryPoint>,
    /// Current BDF order and the number of steps taken at it.
    pub order: usize,
    pub steps_at_order: usize,
    /// Error estimate of the last accepted BDF step (0: none since the last restart),
    /// for the predictive step controller.
    pub last_error: f64,
    /// The states at which the problem's kept evaluations were made (see
    /// [`Problem::kept_states`]): part of a saved state because later steps build on
    /// them. Read from a checkpoint and handed to the problem by [`Stepper::new`], which
    /// empties them: during a run the problem holds its own, and a checkpoint writes
    /// those (no resident copy). Empty: none.
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

/// Time stepper for problems with blocks of B unknowns.
pub struct Stepper<const B: usize> {
    pub state: StepState,
    pub opts: StepOptions,
    lin: Box<dyn LinearSolver<B>>,
    work: NewtonWork<B>,
    u_old: Vec<f64>,
    hist: Vec<f64>,
    /// Time and storage change since the start (Σ V (M − M0) per conserved quantity) of
    /// the current point and the history points, newest first, for the balance window;
    /// recomputed where its times are not those of the points (after a restart, or a
    /// state set from outside, as the osmotic coupling does when it retries a step).
    changes: Vec<(f64, Conserved)>,
    /// Steps to take as given instead of by the error test (see [`Replay`]).
    pub replay: Option<Replay>,
}

/// A sequence of steps (size [s] and BDF order) taken as given, without the local error
/// test: the steps of another integration of the same interval from the same start time,
/// so that integrations from different states take the same steps and the map from the
/// start state to the end state is smooth (cycle skipping's implicit jumps). A step
/// whose Newton iteration fails ends the replay (`broken`), and the stepper goes on by
/// its error test.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Replay {
    pub steps: Vec<(f64, usize)>,
    pub next: usize,
    pub broken: bool,
}

/// One cumulative quantity of a history point (inflow, throughput, top inflow, sink,
/// runoff).
type PointFlows = fn(&HistoryPoint) -> &Vec<f64>;

/// α1·`current` + Σ_{j=2..k} αj·(entry `q` of `field` of history point j − 2): what the
/// points before the new one contribute to the step's formula for a cumulative quantity.
fn carried_sum(
    alpha: &[f64; 7],
    k: usize,
    current: f64,
    history: &[HistoryPoint],
    field: PointFlows,
    q: usize,
) -> f64 {
    let mut w = alpha[1] * current;
    for j in 2..=k {
        w += alpha[j] * field(&history[j - 2])[q];
    }
    w
}

/// Largest step ratio Δt_{n+1}/Δt_n for the BDF order (index = order).
const BDF_MAX_RATIO: [f64; 6] = [2.0, 2.0, 2.0, 1.5, 1.2, 1.08];

/// One try at a step: its size, end, order and BDF coefficients (nodes τ0 = t_new,
/// τ1 = t, τ2.. = history; `alpha` the derivative weights, `alpha[0]` = c).
struct Attempt {
    dt: f64,
    t_new: f64,
    k: usize,
    alpha: [f64; 7],
}

/// What the local error test decided.
enum Verdict {
    /// Retry with this step size.
    Reject { dt_try: f64 },
    /// Accept; the next step is this factor times the current one (before the caps).
    Accept { factor: f64 },
}

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

impl<const B: usize> Stepper<B> {
    /// The heap arrays of the stepper: its state (with the multistep history), Newton's
    /// work space and the linear solver (see [`crate::memory`]).
    pub fn arrays(&self, out: &mut Vec<crate::memory::ArrayCost>) {
        use crate::memory::push;
        const OWNER: &str = "stepper";
        let s = &self.state;
        push(out, OWNER, "unknowns", &s.u);
        push(out, OWNER, "storages", &s.storage);
        push(out, OWNER, "initial storages", &s.initial_storage);
        push(out, OWNER, "kept states (cells)", &s.linearization_cells);
        push(out, OWNER, "kept states (faces)", &s.linearization_faces);
        push(out, OWNER, "previous unknowns", &self.u_old);
        push(out, OWNER, "history sum", &self.hist);
        for hp in &s.history {
            push(out, OWNER, "history unknowns", &hp.u);
            push(out, OWNER, "history storages", &hp.storage);
        }
        self.work.arrays(out);
        self.lin.arrays(out);
    }

    /// A stepper at `state`; evaluates the problem once to make its workspace current.
    pub fn new<P: Problem<B> + ?Sized>(
        sys: &mut P,
        state: StepState,
        opts: StepOptions,
        lin: Box<dyn LinearSolver<B>>,
    ) -> Self {
        let len = B * sys.blocks();
        let mut state = state;
        // Storages not known (older checkpoints): from a full evaluation.
        sys.forget_kept();
        for hp in state.history.iter_mut() {
            if hp.storage.len() != len {
                sys.evaluate(hp.t, &hp.u);
                hp.storage = vec![0.0; len];
                sys.storage_into(&mut hp.storage);
            }
        }
        sys.evaluate(state.t, &state.u);
        if state.storage.len() != len {
            state.storage = vec![0.0; len];
            sys.storage_into(&mut state.storage);
        }
        // The kept evaluations of the run this state comes from; the problem holds them
        // from here on (a checkpoint writes them from it), so the state's copies go.
        sys.restore_kept(&state.linearization_cells, &state.linearization_faces);
        state.linearization_cells = Vec::new();
        state.linearization_faces = Vec::new();
        Stepper {
            state,
            opts,
            lin,
            work: NewtonWork::with_pattern(sys.blocks(), sys.last_unknown_decoupled()),
            u_old: vec![0.0; len],
            hist: vec![0.0; len],
            changes: Vec::new(),
            replay: None,
        }
    }

    /// Fresh state at time `t` from unknowns `u`.
    pub fn initial_state<P: Problem<B> + ?Sized>(
        sys: &mut P,
        t: f64,
        dt: f64,
        u: Vec<f64>,
    ) -> StepState {
        sys.evaluate(t, &u);
        let mut initial_storage = vec![0.0; B * sys.blocks()];
        sys.storage_into(&mut initial_storage);
        let nq = sys.conserved_rows().len();
        let mut initial_totals = vec![0.0; nq];
        for (i, m) in initial_storage.chunks_exact(B).enumerate() {
            let w = sys.volumes()[i];
            for (tot, &row) in initial_totals.iter_mut().zip(sys.conserved_rows()) {
                *tot += w * m[row];
            }
        }
        StepState {
            t,
            dt,
            initial_totals,
            storage: initial_storage.clone(),
            initial_storage,
            u,
            inflow: vec![0.0; nq],
            throughput: vec![0.0; nq],
            top_inflow: vec![0.0; nq],
            sink: vec![0.0; nq],
            runoff: vec![0.0; nq],
            counters: Counters::default(),
            history: Vec::new(),
            order: 1,
            steps_at_order: 0,
            last_error: 0.0,
            linearization_cells: Vec::new(),
            linearization_faces: Vec::new(),
        }
    }

    /// Forgets the multistep history (after a discontinuity in the forcing): the next
    /// step is of order 1.
    pub fn restart_history(&mut self) {
        self.state.history.clear();
        self.state.order = 1;
        self.state.steps_at_order = 0;
        self.state.last_error = 0.0;
    }

    /// Balance errors per conserved quantity (for the soil column [energy J m⁻², water
    /// kg m⁻²]): storage change − net inflow, and the same relative to max(|storage
    /// change|, throughput). Uses the last evaluation.
    pub fn balance<P: Problem<B> + ?Sized>(&self, sys: &P) -> (Vec<f64>, Vec<f64>) {
        let nq = sys.conserved_rows().len().min(MAX_CONSERVED);
        // Storage change summed block by block.
        let changes = Self::storage_change(sys, |i| sys.storage(i), &self.state.initial_storage);
        let mut abs = vec![0.0; nq];
        let mut rel = vec![0.0; nq];
        for k in 0..nq {
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

    /// Storage change since the start, Σ V (M − M0), of the storages `storage_of(i)` of
    /// the blocks against the start's `initial` (B per block), summed block by block: of
    /// the last evaluation for [`Stepper::balance`], of a kept point for the balance
    /// window.
    fn storage_change<P: Problem<B> + ?Sized>(
        sys: &P,
        storage_of: impl Fn(usize) -> [f64; B],
        initial: &[f64],
    ) -> Conserved {
        let rows = sys.conserved_rows();
        let nq = rows.len().min(MAX_CONSERVED);
        let mut change = [0.0; MAX_CONSERVED];
        for (i, m0) in initial.chunks_exact(B).enumerate() {
            let m = storage_of(i);
            let v = sys.volumes()[i];
            for (ch, &row) in change[..nq].iter_mut().zip(rows) {
                *ch += v * (m[row] - m0[row]);
            }
        }
        change
    }

    /// [`Stepper::storage_change`] of kept storages (B per block).
    fn kept_storage_change<P: Problem<B> + ?Sized>(
        sys: &P,
        storage: &[f64],
        initial: &[f64],
    ) -> Conserved {
        Self::storage_change(
            sys,
            |i| std::array::from_fn(|r| storage[B * i + r]),
            initial,
        )
    }

    /// The storage changes of the current and the history points into `self.changes`,
    /// where they are not known.
    fn update_changes<P: Problem<B> + ?Sized>(&mut self, sys: &P) {
        let s = &self.state;
        let known = self.changes.len() == s.history.len() + 1
            && self.changes[0].0.to_bits() == s.t.to_bits()
            && s.history
                .iter()
                .zip(&self.changes[1..])
                .all(|(h, c)| h.t.to_bits() == c.0.to_bits());
        if !known {
            self.changes.clear();
            let change = Self::kept_storage_change(sys, &s.storage, &s.initial_storage);
            self.changes.push((s.t, change));
            for h in &s.history {
                let change = Self::kept_storage_change(sys, &h.storage, &s.initial_storage);
                self.changes.push((h.t, change));
            }
        }
    }

    /// The cumulative balance a try `a` is held to (see [`BalanceWindow`]): the balance
    /// error E = storage change − net inflow and the throughput of the current and the
    /// history points, weighted with the try's BDF weights; E at most `tol` of the
    /// throughput. Needs `self.changes` up to date.
    fn balance_window(&self, a: &Attempt, tol: f64) -> BalanceWindow {
        let s = &self.state;
        let nq = s.inflow.len().min(MAX_CONSERVED);
        let mut w = BalanceWindow {
            tol,
            ..Default::default()
        };
        for j in 1..=a.k {
            let (inflow, throughput) = if j == 1 {
                (&s.inflow, &s.throughput)
            } else {
                let h = &s.history[j - 2];
                (&h.inflow, &h.throughput)
            };
            let change = &self.changes[j - 1].1;
            for q in 0..nq {
                w.past_error[q] += a.alpha[j] * (change[q] - inflow[q]);
                w.past_throughput[q] += a.alpha[j] * throughput[q];
            }
        }
        w
    }

    /// Weighted max norms of the local error estimates of the orders `orders` (at most
    /// three) for the step to `t_new` of size `dt` just solved (state in
    /// `self.state.u`, its evaluation in `sys`), in one pass over the blocks: for order
    /// q, the difference between the solution and the extrapolation through the q+1
    /// newest points, times `dt/(t_new − t_{n−q})`, each unknown measured as the problem
    /// says ([`Problem::error_tests`]). Needs every q ≤ history length + 1. Returns per
    /// order the norm and the worst (block, unknown).
    fn error_norms<P: Problem<B> + ?Sized>(
        &self,
        sys: &P,
        orders: &[usize],
        t_new: f64,
        dt: f64,
        rtol: f64,
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
        for i in 0..sys.blocks() {
            let base = B * i;
            let tests = sys.error_tests(i, &s.u[base..base + B], &self.u_old[base..base + B], rtol);
            for (var, how) in tests {
                match how {
                    ErrorTest::Unknown { den } => {
                        let k = base + var;
                        let points = gather(k, false);
                        test(&points, s.u[k], 1.0, den, (i, var));
                    }
                    ErrorTest::Storage { row, factor, den } => {
                        let points = gather(base + row, true);
                        let m = sys.storage(i)[row];
                        test(&points, m, factor, den, (i, var));
                    }
                }
            }
        }
        out
    }

    /// Sets up a try of size `dt_try` towards `t_stop`: the step, its order and BDF
    /// weights, the history term `self.hist`, and the predictor in the unknowns.
    fn prepare<P: Problem<B> + ?Sized>(
        &mut self,
        sys: &P,
        t_stop: f64,
        dt_try: f64,
        bdf: bool,
    ) -> Attempt {
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
        let k = if bdf {
            s.order.min(s.history.len() + 1).max(1)
        } else {
            1
        };
        let mut tau = [0.0f64; 7];
        let mut alpha = [0.0f64; 7];
        let mut lag = [0.0f64; 7];
        // Nodes τ0 = t_new, τ1 = t, τ2.. = history.
        tau[0] = t_new;
        tau[1] = s.t;
        for j in 2..=k {
            tau[j] = s.history[j - 2].t;
        }
        bdf_weights(&tau[..=k], &mut alpha);
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
        // ... and kept admissible.
        sys.limit_prediction(&mut s.u, &self.u_old);
        Attempt {
            dt,
            t_new,
            k,
            alpha,
        }
    }

    /// The local error test of a solved BDF step and the choice of the next order and
    /// step factor. `error_failures` counts this step's rejected tries so far.
    fn judge<P: Problem<B> + ?Sized>(
        &mut self,
        sys: &P,
        a: &Attempt,
        stats: &NewtonStats,
        max_order: usize,
        rtol: f64,
        error_failures: &mut usize,
    ) -> Verdict {
        let (k, dt, t_new) = (a.k, a.dt, a.t_new);
        let s = &self.state;
        let have_pred = s.history.len() + 1 > k; // k+1 points were available
                                                 // The estimates of orders k and, when the order is to be chosen after this step
                                                 // (see below), k + 1 and k − 1, in one pass.
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
            self.error_norms(sys, &orders[..count], t_new, dt, rtol)
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
                "t {:.6e} dt {dt:.3e} order {k} error {err:.3e} at block {} unknown {}",
                s.t,
                worst.0,
                worst.1
            );
            err
        } else {
            // The first step after a restart has no error estimate: keep it small by the
            // problem's change heuristics below and let the next steps judge.
            0.0
        };
        let s = &mut self.state;
        if err > 1.0 && dt > self.opts.dt_min * (1.0 + 1e-9) {
            s.counters.rejected += 1;
            *error_failures += 1;
            let f = (0.9 * err.powf(-1.0 / (k as f64 + 1.0))).clamp(0.1, 0.9);
            let dt_try =
                (dt * if *error_failures >= 2 { f.min(0.25) } else { f }).max(self.opts.dt_min);
            // Repeated failures: lower the order by one, then to 1.
            if *error_failures == 2 {
                s.order = k.saturating_sub(1).max(1);
                s.steps_at_order = 0;
            } else if *error_failures > 2 {
                s.order = 1;
                s.steps_at_order = 0;
            }
            return Verdict::Reject { dt_try };
        }
        if err > 1.0 {
            // Accepted only because the step cannot shrink further (Δt at its minimum):
            // the history is no base for a high-order formula here (a front entering
            // saturated soil gave order-5 estimates of 15–25 at the minimum step, and the
            // next predictor started Newton far off). Restart at order 1.
            s.order = 1;
            s.steps_at_order = 0;
            s.last_error = 0.0;
            return Verdict::Accept { factor: 1.0 };
        }
        let cap = self.opts.max_growth;
        let mut factor = growth_factor(err, k, cap);
        // Predictive control (Gustafsson 1994; Hairer & Wanner 1996, IV.8): when the
        // error grew from the last step, extrapolate that trend,
        // f = f_std · (Δt/Δt_prev) · (err_prev/err)^(1/(k+1)), and take the smaller
        // factor. It damps the grow–reject cycles of the standard rule; only near the
        // tolerance (err > 0.2), where a rejection is in reach (far below it, estimates
        // jump by decades and would stall the growth).
        if have_pred && s.last_error > 0.0 && err > 0.2 && !s.history.is_empty() {
            let dt_prev = s.t - s.history[0].t;
            if dt_prev > 0.0 {
                let f = factor * (dt / dt_prev) * (s.last_error / err).powf(1.0 / (k as f64 + 1.0));
                factor = factor.min(f);
            }
        }
        s.last_error = if have_pred { err } else { 0.0 };
        if !have_pred {
            factor = change_factor(sys, &s.u, &self.u_old, &self.opts, stats.iterations);
        }
        let (next_order, f) = if have_pred && s.steps_at_order + 1 > k {
            choose_order(k, factor, cap, up, down, estimate)
        } else {
            (s.order.max(k), factor)
        };
        factor = f;
        if next_order != s.order {
            s.order = next_order;
            s.steps_at_order = 0;
        } else {
            s.steps_at_order += 1;
        }
        // Newton trouble also limits growth.
        // No growth right after a rejected try: the error estimate was just shown to
        // be optimistic at this size.
        if *error_failures > 0 {
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
        Verdict::Accept { factor }
    }

    /// Accepts the solved try `a`: cumulative inflow by the step's formula, the history
    /// shifted, the next step proposed (`factor` before the caps, from `dt_try`
    /// when the step was shortened to land), the storages of the new state kept.
    fn accept<P: Problem<B> + ?Sized>(
        &mut self,
        sys: &P,
        a: &Attempt,
        dt_try: f64,
        factor: f64,
        keep: usize,
    ) {
        let (k, dt, alpha) = (a.k, a.dt, &a.alpha);
        let c = alpha[0];
        let len = self.u_old.len();
        let s = &mut self.state;
        // Variable-step BDF of order ≥ 3 is zero-stable only for bounded step ratios
        // (Grigorieff 1983; bounds of about 1.6, 1.3 and 1.1 for orders 3, 4, 5, from
        // memory): growth is capped below them for the order the next step will use.
        let cap = if matches!(self.opts.integrator, Integrator::Bdf { .. }) {
            BDF_MAX_RATIO[s.order.clamp(1, 5)]
        } else {
            f64::INFINITY
        };
        let factor = factor.clamp(0.2, self.opts.max_growth.max(1.0).min(cap));
        s.counters.steps += 1;
        // Cumulative inflow by the same formula as the storages:
        // α0 W_new + α1 W_old + Σ αj W_j = F_in(new).
        let (top, bot) = sys.boundary_flows();
        let sink = sys.sink_flows();
        let runoff = sys.runoff_flows();
        let nq = s.inflow.len();
        let mut new_inflow = [0.0; MAX_CONSERVED];
        let mut new_throughput = [0.0; MAX_CONSERVED];
        let mut new_top = [0.0; MAX_CONSERVED];
        let mut new_sink = [0.0; MAX_CONSERVED];
        let mut new_runoff = [0.0; MAX_CONSERVED];
        for q in 0..nq {
            // (x − 0.0 is x: without sinks and runoff the sums are those of before.)
            let fin = top[q] - bot[q] - sink[q] - runoff[q];
            let fabs = top[q].abs() + bot[q].abs() + sink[q].abs() + runoff[q].abs();
            // Each cumulative quantity W by the step's formula: α0 W_new = flow − carried.
            let carried = |current: &[f64], field: PointFlows| {
                carried_sum(alpha, k, current[q], &s.history, field, q)
            };
            new_inflow[q] = (fin - carried(&s.inflow, |h| &h.inflow)) / c;
            new_throughput[q] = (fabs - carried(&s.throughput, |h| &h.throughput)) / c;
            // The top boundary, the sinks and the runoff alone, by the same formula.
            new_top[q] = (top[q] - carried(&s.top_inflow, |h| &h.top_inflow)) / c;
            new_sink[q] = (sink[q] - carried(&s.sink, |h| &h.sink)) / c;
            new_runoff[q] = (runoff[q] - carried(&s.runoff, |h| &h.runoff)) / c;
        }
        {
            // Shift the history: the old current point becomes the newest history point,
            // reusing the oldest point's buffers once the history is full.
            let mut point = if s.history.len() >= keep {
                s.history
                    .pop()
                    .unwrap_or_else(|| HistoryPoint::empty(len, nq))
            } else {
                HistoryPoint::empty(len, nq)
            };
            point.t = s.t;
            point.u.copy_from_slice(&self.u_old);
            point.inflow.clone_from(&s.inflow);
            point.throughput.clone_from(&s.throughput);
            point.top_inflow.clone_from(&s.top_inflow);
            point.sink.clone_from(&s.sink);
            point.runoff.clone_from(&s.runoff);
            // The old storages go with the point; the new ones are filled below.
            std::mem::swap(&mut point.storage, &mut s.storage);
            s.history.insert(0, point);
            s.history.truncate(keep);
        }
        s.inflow.copy_from_slice(&new_inflow[..nq]);
        s.throughput.copy_from_slice(&new_throughput[..nq]);
        s.top_inflow.copy_from_slice(&new_top[..nq]);
        s.sink.copy_from_slice(&new_sink[..nq]);
        s.runoff.copy_from_slice(&new_runoff[..nq]);
        let base = if dt < dt_try { dt_try } else { dt };
        s.dt = (base * factor).clamp(self.opts.dt_min, self.opts.dt_max);
        s.t = a.t_new;
        // sys holds the evaluation at the new state (Newton's last assembly).
        sys.storage_into(&mut s.storage);
        // The balance window's storage changes shift with the points.
        if !self.changes.is_empty() {
            let points = s.history.len() + 1;
            let change = Self::kept_storage_change(sys, &s.storage, &s.initial_storage);
            self.changes.insert(0, (s.t, change));
            self.changes.truncate(points);
        }
    }

    /// Takes one accepted step that does not pass `t_stop` (retrying with smaller Δt).
    pub fn step<P: Problem<B> + ?Sized>(
        &mut self,
        sys: &mut P,
        t_stop: f64,
    ) -> Result<StepInfo, StepFailure> {
        self.u_old.copy_from_slice(&self.state.u);
        let bdf = match self.opts.integrator {
            Integrator::Bdf { max_order, rtol } => Some((max_order.clamp(1, 5), rtol)),
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
        // The step given by a replay, if one is going on.
        let mut given = match &self.replay {
            Some(r) if !r.broken && r.next < r.steps.len() => Some(r.steps[r.next]),
            _ => None,
        };
        loop {
            if let Some((dt_given, order)) = given {
                dt_try = dt_given;
                self.state.order = order;
            }
            let a = self.prepare(sys, t_stop, dt_try, bdf.is_some());
            self.work.balance_window = match self.opts.newton.cumulative_balance_tol {
                Some(tol) => {
                    self.update_changes(sys);
                    Some(self.balance_window(&a, tol))
                }
                None => None,
            };
            let dt = a.dt;
            let s = &mut self.state;
            let result = newton::solve(
                sys,
                self.lin.as_mut(),
                a.t_new,
                a.alpha[0],
                &self.hist,
                &mut s.u,
                &self.opts.newton,
                &mut self.work,
            );
            let stats = match result {
                Ok(stats) => stats,
                Err(failure) => {
                    s.counters.rejected += 1;
                    if given.take().is_some() {
                        if let Some(r) = self.replay.as_mut() {
                            r.broken = true;
                        }
                    }
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
            s.counters.add(&stats);
            let (factor, keep) = match (given, bdf) {
                // A given step is taken as it is (the next one is given too).
                (Some(_), _) => {
                    if let Some(r) = self.replay.as_mut() {
                        r.next += 1;
                    }
                    (1.0, bdf.map_or(1, |(max_order, _)| max_order))
                }
                (None, Some((max_order, rtol))) => {
                    match self.judge(sys, &a, &stats, max_order, rtol, &mut error_failures) {
                        Verdict::Reject { dt_try: next } => {
                            dt_try = next;
                            continue;
                        }
                        Verdict::Accept { factor } => (factor, max_order),
                    }
                }
                (None, None) => (
                    change_factor(sys, &s.u, &self.u_old, &self.opts, stats.iterations),
                    1,
                ),
            };
            self.accept(sys, &a, dt_try, factor, keep);
            return Ok(StepInfo {
                dt,
                newton_iterations: stats.iterations,
                order: a.k,
                alpha: a.alpha,
            });
        }
    }
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

/// Order control, after k+1 steps at order k: the order among k−1, k, k+1 whose error
/// estimate (`estimate(q)`, where computed) allows the largest next step, with that
/// step's factor. Another order must promise 20 % more; when the growth limit `cap`, not
/// the error, bounds the step at both k and k+1, the higher order is taken (it is the
/// more accurate). `up`/`down`: whether k+1 / k−1 may be chosen.
fn choose_order(
    k: usize,
    factor: f64,
    cap: f64,
    up: bool,
    down: bool,
    estimate: impl Fn(usize) -> Option<f64>,
) -> (usize, f64) {
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
    best
}

/// Growth factor of the backward-Euler heuristics: from the Newton iteration count and
/// what the problem says of the changes over the step.
fn change_factor<const B: usize, P: Problem<B> + ?Sized>(
    sys: &P,
    u: &[f64],
    u_old: &[f64],
    opts: &StepOptions,
    iterations: usize,
) -> f64 {
    let f = match iterations {
        0..=4 => opts.max_growth,
        5..=7 => 1.2,
        _ => 0.7,
    };
    f.min(sys.change_factor(u, u_old)).max(0.2)
}
