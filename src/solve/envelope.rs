//! Cycle skipping (envelope following) under periodic forcing, for any [`Problem`].
//!
//! When the forcing repeats with period P and the state responds on time scales much
//! longer than P, the states at the period boundaries t_k = t_0 + kP lie on a slowly
//! varying envelope (Petzold 1981, SIAM J. Numer. Anal. 18: "An efficient numerical
//! method for highly oscillatory ordinary differential equations"). A block of whole
//! periods is integrated exactly; the change of the state over the last one, the drift
//! ∇y = y_k − y_{k−1}, is then extrapolated over m periods: y_{k+m} ≈ y_k + m ∇y (the
//! projective forward Euler step of Gear & Kevrekidis 2003, SIAM J. Sci. Comput. 24).
//!
//! **Error control.** With the boundary states y_{k−2}, y_{k−1}, y_k of the block, the
//! change of the drift ∇²y = y_k − 2 y_{k−1} + y_{k−2} estimates the envelope's second
//! derivative times P²; the linear extrapolation over m periods then errs by
//! ½ m (m + 1) ∇²y (Taylor expansion of the envelope about t_k, derived: the drift is the
//! backward difference y'P − ½ y''P², so y_k + m ∇y − y(t_k + mP) = −½ (mP)² y'' −
//! ½ m P² y''). That error, measured like a step's local error (the problem's
//! [`Problem::error_tests`] with the skipping tolerance as the relative tolerance), must
//! be ≤ 1: m is the largest whole number with ½ m (m + 1) ‖∇²y‖ ≤ 1. The method is of
//! first order in the jump: on an envelope decaying as e^{−bt} the relative errors of
//! the jumps add up to Σ ½ m (m + 1) (bP)² (derived; checked on a linear problem with a
//! known solution, `tests/envelope_analytic.rs`). The quadratic through the three points
//! (adding ½ m (m + 1) ∇²y) was tried: 1e-3 instead of 5e-2 on that problem, but on the
//! soil column, where ∇²y is mostly the integration's period-to-period scatter, it moved
//! the water exchanged with the water table over 10⁴ years by 36 % against 7 %.
//!
//! **Stability** (derived for a linear mode with multiplier μ ∈ [0, 1) over one period,
//! the mode's deviation from the periodic orbit decaying as μᵏ): after a block of E exact
//! periods and a jump of m, the deviation is multiplied by G(μ) = μ^{E−1} (μ − m (1 − μ)).
//! Slow modes (μ = 1 − ε, mε ≪ 1) get G ≈ 1 − (m + E) ε, the right decay over the m + E
//! periods; fast modes need m μ^{E−1} (1 − μ) ≤ 1 — the exact periods after each jump
//! damp what the jump disturbed. The worst μ, (E − 1) m / (E (m + 1)), gives
//! |G| ≈ m / (e E) for large m: modes between the two classes are amplified when m > e E.
//! They are what Δd sees: a mode of amplitude a contributes ≈ a/(E² e) to Δd at that μ, so
//! the error test bounds a by 2 E² e/m² of the tolerance and its amplified value after the
//! jump by ≈ 2E/m of it. The error control is thus also the stability control (as for an
//! explicit method on a stiff problem), and m is limited by the intermediate modes.
//!
//! **Conservation.** The conserved storages of every block and the cumulative boundary
//! flows are extrapolated by the same formula, so the content of each conserved quantity
//! moves by what the extrapolated flows bring (each period's storage change equals its
//! net inflow to the Newton tolerance, and the formula is linear); the unknowns are then
//! found from the extrapolated storages (Newton, block by block). What that inversion
//! leaves, storage change − net inflow over the jump, is the jump's own balance error:
//! kept as a term of its own ([`EnvelopeState::mismatch`]) and added to the stepper's net
//! inflow, so that the stepper's balance (and Newton's cumulative balance window) go on
//! measuring the integration alone. (Extrapolating the unknowns instead put 0.18 kg m⁻²
//! of water into a sealed 20 m column in 11 jumps, 14 % of what it took from its water
//! table, and moved that exchange by 25 %.) After a jump the multistep history restarts
//! (order 1, from the first step size).

use super::linear::solve_dense;
use super::problem::{weighted_change, Problem, MAX_CONSERVED};
use super::stepper::{StepState, Stepper};

/// The settings of cycle skipping.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EnvelopeOptions {
    /// The forcing period [s].
    pub period: f64,
    /// Whole periods integrated exactly in each block before a jump (≥ 3: the
    /// estimate needs two drifts, and the first after a jump carries its disturbance).
    pub exact_periods: u64,
    /// Most periods one jump may skip.
    pub max_jump: u64,
    /// Relative tolerance of a jump's error (the absolute ones are the problem's).
    pub tolerance: f64,
    /// Step size [s] the integration restarts with after a jump (at most).
    pub dt_after_jump: f64,
    /// Jumps by BDF2 on the envelope, solved by the driver (which integrates
    /// trial periods), instead of [`explicit_landing`].
    pub implicit: bool,
}

/// A state at a period boundary: unknowns, storages and the cumulative flows
/// (net inflow, throughput, top inflow, sinks, runoff; each per conserved quantity).
#[derive(Debug, Clone, PartialEq)]
pub struct PeriodPoint {
    pub u: Vec<f64>,
    pub storage: Vec<f64>,
    pub flows: Vec<f64>,
}

impl PeriodPoint {
    /// The point of a stepper state.
    pub fn of(s: &StepState) -> Self {
        let mut flows = Vec::with_capacity(5 * s.inflow.len());
        Self::flows_into(s, &mut flows);
        PeriodPoint {
            u: s.u.clone(),
            storage: s.storage.clone(),
            flows,
        }
    }

    /// The cumulative flows of a stepper state in a point's layout into `out` (cleared
    /// first): the [`FLOW_PARTS`] parts net inflow, throughput, top inflow, sinks,
    /// runoff, one after the other.
    pub fn flows_into(s: &StepState, out: &mut Vec<f64>) {
        out.clear();
        for v in [&s.inflow, &s.throughput, &s.top_inflow, &s.sink, &s.runoff] {
            out.extend_from_slice(v);
        }
    }

    /// The reverse of [`PeriodPoint::flows_into`]: the stepper state's cumulative flows
    /// set from `flows` in a point's layout (each part as long as the state's).
    pub fn flows_onto(flows: &[f64], s: &mut StepState) {
        let q = s.inflow.len();
        for (part, dst) in [
            &mut s.inflow,
            &mut s.throughput,
            &mut s.top_inflow,
            &mut s.sink,
            &mut s.runoff,
        ]
        .into_iter()
        .enumerate()
        {
            dst.copy_from_slice(&flows[part * q..(part + 1) * q]);
        }
    }
}

/// The parts of a point's cumulative flows ([`PeriodPoint::flows_into`]).
pub const FLOW_PARTS: usize = 5;

/// Where cycle skipping stands: part of a run's state (checkpointed).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct EnvelopeState {
    /// Index k of the last period boundary t_0 + kP reached (or passed).
    pub period: u64,
    /// Periods integrated exactly since the current block began.
    pub exact: u64,
    /// The boundary states of the current block, oldest first (the last three at most).
    pub points: Vec<PeriodPoint>,
    /// Periods skipped by the last jump (0: none yet).
    pub last_jump: u64,
    /// Jumps made and periods skipped so far.
    pub jumps: u64,
    pub skipped: u64,
    /// Cumulative balance error of the jumps per conserved quantity (storage change of
    /// the extrapolated state − extrapolated net inflow).
    pub mismatch: Vec<f64>,
    /// The last error estimate ‖Δd‖ (scaled; per period²).
    pub last_error: f64,
    /// Trial periods the implicit jumps integrated (their Newton iterations), and their
    /// time steps; not part of the run's own steps.
    pub trial_periods: u64,
    pub trial_steps: u64,
    /// Implicit jumps abandoned in a row, and the blocks left before the next is tried
    /// (explicit jumps meanwhile).
    pub implicit_failures: u64,
    pub implicit_pause: u64,
    /// Whether the last jump was implicit (its error estimate sizes the next).
    pub last_implicit: bool,
    /// The boundary state the last jump started from, with its period index: the older
    /// point of the implicit jump's second-order step (see
    /// [`crate::sim::implicit_jump`]). None before the first jump.
    pub origin: Option<(u64, PeriodPoint)>,
}

impl EnvelopeState {
    /// A fresh state at time `t` for boundaries at `t0 + kP`.
    pub fn new(t: f64, t0: f64, period: f64, conserved: usize) -> Self {
        EnvelopeState {
            period: ((t - t0) / period).floor().max(0.0) as u64,
            mismatch: vec![0.0; conserved],
            ..Default::default()
        }
    }

    /// The older point of the next implicit jump: the last jump's start, with the
    /// periods from it to the last boundary reached (None before the first jump).
    pub fn older_point(&self) -> Option<(u64, &PeriodPoint)> {
        self.origin
            .as_ref()
            .map(|(k0, p)| (self.period.saturating_sub(*k0), p))
    }

    /// Keeps the point of state `s` (at a period boundary), dropping the oldest beyond 3.
    pub fn push(&mut self, s: &StepState) {
        if self.points.len() == 3 {
            let mut old = self.points.remove(0);
            old.u.clone_from(&s.u);
            old.storage.clone_from(&s.storage);
            PeriodPoint::flows_into(s, &mut old.flows);
            self.points.push(old);
        } else {
            self.points.push(PeriodPoint::of(s));
        }
    }
}

/// Boundary time t_0 + kP [s] (one formula everywhere, so that resumes land bitwise).
pub fn boundary(t0: f64, period: f64, k: u64) -> f64 {
    t0 + k as f64 * period
}

/// ‖Δd‖: the change of the drift over the last three boundary states, measured by the
/// problem's error tests at relative tolerance `rtol` (the problem evaluated at the newest
/// point). NaN when fewer than three points are kept.
pub fn drift_change<const B: usize, P: Problem<B> + ?Sized>(
    sys: &P,
    points: &[PeriodPoint],
    rtol: f64,
) -> f64 {
    let [p0, p1, p2] = match points {
        [a, b, c] => [a, b, c],
        _ => return f64::NAN,
    };
    // A NaN estimate takes the block to no jump.
    weighted_change(
        sys,
        &p2.u,
        &p1.u,
        rtol,
        |j| p2.u[j] - 2.0 * p1.u[j] + p0.u[j],
        |j| p2.storage[j] - 2.0 * p1.storage[j] + p0.storage[j],
    )
}

/// The jump [periods] for error estimate `err` (‖Δd‖): the largest m with
/// ½ m (m + 1) err ≤ 1, at most `opts.max_jump`, at most twice the last jump plus the
/// exact periods of a block (the estimate extrapolates itself only so far), and at most
/// `room` (the periods before the next time the run must land on).
pub fn jump_size(err: f64, opts: &EnvelopeOptions, last_jump: u64, room: u64) -> u64 {
    if !err.is_finite() {
        return 0;
    }
    let by_error = if err > 0.0 {
        // Root of ½ m² + ½ m − 1/err = 0.
        (-0.5 + (0.25 + 2.0 / err).sqrt()).floor()
    } else {
        f64::INFINITY
    };
    let growth = 2 * last_jump + opts.exact_periods;
    let cap = opts.max_jump.min(growth).min(room);
    if by_error >= cap as f64 {
        cap
    } else {
        by_error as u64
    }
}

/// The size [periods] of the next implicit jump: after an implicit jump, that jump
/// grown or shrunk by its error estimate (by 0.9/err^(1/p), at most 4× and at least
/// 0.2×, p = 2 for backward Euler, whose error grows as m², 3 for the two-step formula
/// of every later jump); after an explicit jump, twice that jump; at
/// the start, the exact periods of a block; at most `opts.max_jump`, `room`, and
/// [`MAX_STEP_RATIO`] times the periods since the last jump's start.
pub fn implicit_jump_size(opts: &EnvelopeOptions, env: &EnvelopeState, room: u64) -> u64 {
    let m = if env.last_jump == 0 {
        opts.exact_periods
    } else if env.last_implicit && env.last_error.is_finite() {
        // The last jump took the two-step formula if a jump came before it.
        let power = if env.jumps >= 2 { 3.0 } else { 2.0 };
        let factor = (0.9 / env.last_error.max(1e-12).powf(1.0 / power)).clamp(0.2, 4.0);
        ((env.last_jump as f64 * factor).floor() as u64).max(1)
    } else {
        2 * env.last_jump
    };
    // The two-step formula is zero-stable for step ratios below 1 + √2.
    let ratio_cap = env.older_point().map_or(u64::MAX, |(h, _)| {
        (MAX_STEP_RATIO * h as f64).floor() as u64
    });
    m.min(ratio_cap).min(opts.max_jump).min(room)
}

/// Largest ratio of an implicit jump to the periods between its two starting points
/// (the last jump and the block after it): variable-step BDF2 is zero-stable below
/// 1 + √2, its parasitic root ω²/(1 + 2ω) = 0.8 at 2 (derived from its characteristic
/// polynomial (1 + 2ω)ρ² − (1 + ω)²ρ + ω² for y′ = 0).
pub const MAX_STEP_RATIO: f64 = 2.0;

/// Most Newton iterations of the inversion of the extrapolated storages.
pub const INVERSION_ITERATIONS: usize = 30;
/// The inversion stops when every conserved storage is within this fraction of its
/// value (or of its change over the jump, where that is larger).
pub const INVERSION_TOLERANCE: f64 = 1.0e-12;

/// Where a jump lands: the storages of every block (all rows; the conserved ones are
/// matched by the unknowns), the cumulative flows (as [`PeriodPoint::flows`]), and the
/// unknowns the inversion starts from.
#[derive(Debug, Clone, PartialEq)]
pub struct Landing {
    pub u: Vec<f64>,
    pub storage: Vec<f64>,
    pub flows: Vec<f64>,
}

/// The explicit jump's landing: `m` periods along the drift of the last kept points,
/// x₂ + m ∇x, for the unknowns (kept admissible by [`Problem::limit_prediction`]), the
/// storages and the cumulative flows alike. (The quadratic through the three points,
/// x₂ + m ∇x + ½ m (m + 1) ∇²x, is more accurate on a smooth envelope but amplifies the
/// integration's period-to-period scatter by m²: on `cases/harrow-dunes.toml` over 10⁴
/// years it moved the water taken in from the water table by 36 % against 7 % for the
/// linear one; see DEVELOPERS.md.)
pub fn explicit_landing<const B: usize, P: Problem<B> + ?Sized>(
    sys: &P,
    points: &[PeriodPoint],
    m: u64,
) -> Landing {
    let n = points.len();
    assert!(
        n >= 3,
        "a jump follows an error estimate from three boundary states"
    );
    let (p1, p2) = (&points[n - 2], &points[n - 1]);
    let mf = m as f64;
    let ext = |a: &[f64], b: &[f64]| -> Vec<f64> {
        a.iter().zip(b).map(|(&x, &y)| x + mf * (x - y)).collect()
    };
    let mut u = ext(&p2.u, &p1.u);
    sys.limit_prediction(&mut u, &p2.u);
    Landing {
        u,
        storage: ext(&p2.storage, &p1.storage),
        flows: ext(&p2.flows, &p1.flows),
    }
}

/// Jumps `m` periods along the drift of the last kept points (the newest is the stepper's
/// state) to time `t_new` ([`explicit_landing`], then [`land`]). Returns the largest
/// relative storage residual the inversion left.
pub fn jump<const B: usize, P: Problem<B> + ?Sized>(
    sys: &mut P,
    st: &mut Stepper<B>,
    env: &mut EnvelopeState,
    opts: &EnvelopeOptions,
    m: u64,
    t_new: f64,
) -> f64 {
    let landing = explicit_landing(sys, &env.points, m);
    land(sys, st, env, opts, m, t_new, landing)
}

/// Puts the stepper's state at the end of a jump of `m` periods from the newest kept
/// point to time `t_new`, at `landing`: the unknowns are found from the landing's
/// storages by Newton's method on M(u) = M* block by block ([`unknowns_of_storages`],
/// from the landing's unknowns; storages are block-local), the other unknowns keep the
/// landing's; the cumulative flows are the landing's. What the inversion leaves (a
/// block that did not converge, round-off), storage change − net inflow over the jump,
/// is the jump's balance error: added to the net inflow and to `env.mismatch`. The
/// multistep history restarts with a step of at most `opts.dt_after_jump`; the new state
/// becomes the first point of the next block. Returns the largest relative storage
/// residual the inversion left.
pub fn land<const B: usize, P: Problem<B> + ?Sized>(
    sys: &mut P,
    st: &mut Stepper<B>,
    env: &mut EnvelopeState,
    opts: &EnvelopeOptions,
    m: u64,
    t_new: f64,
    landing: Landing,
) -> f64 {
    let p2 = env
        .points
        .last()
        .expect("a jump starts from a kept boundary state");
    let rows: Vec<usize> = sys.conserved_rows().to_vec();
    let nq = rows.len().min(MAX_CONSERVED);
    let s = &mut st.state;
    let Landing {
        u,
        storage: target,
        flows,
    } = landing;
    s.u = u;
    s.t = t_new;
    let scale = inversion_scale(&target, &p2.storage);
    let worst = unknowns_of_storages(sys, t_new, &mut s.u, &target, &scale, &p2.u);
    sys.evaluate(t_new, &s.u);
    sys.storage_into(&mut s.storage);
    // Storage change over the jump per conserved quantity, summed block by block.
    let mut change = [0.0; MAX_CONSERVED];
    for (i, (m_new, m_old)) in s
        .storage
        .chunks_exact(B)
        .zip(p2.storage.chunks_exact(B))
        .enumerate()
    {
        let v = sys.volumes()[i];
        for (ch, &row) in change[..nq].iter_mut().zip(&rows) {
            *ch += v * (m_new[row] - m_old[row]);
        }
    }
    PeriodPoint::flows_onto(&flows, s);
    let q = s.inflow.len();
    for k in 0..nq.min(q) {
        let mismatch = change[k] - (s.inflow[k] - p2.flows[k]);
        s.inflow[k] += mismatch;
        env.mismatch[k] += mismatch;
    }
    s.dt = s.dt.min(opts.dt_after_jump);
    st.restart_history();
    env.period += m;
    env.exact = 0;
    env.last_jump = m;
    env.jumps += 1;
    env.skipped += m;
    // The jump's start becomes the older point of the next implicit jump.
    env.origin = env.points.pop().map(|p| (env.period - m, p));
    env.points.clear();
    env.points.push(PeriodPoint::of(&st.state));
    worst
}

/// The scale of each storage of a jump's inversion: its `target` value, or its change
/// from the boundary state's (`from`) where larger.
pub fn inversion_scale(target: &[f64], from: &[f64]) -> Vec<f64> {
    target
        .iter()
        .zip(from)
        .map(|(t, a)| t.abs().max((t - a).abs()))
        .collect()
}

/// Finds the unknowns `u` (from their value on entry) whose storages of the conserved
/// rows are `target`, block by block (Newton with forward-difference derivatives,
/// [`INVERSION_ITERATIONS`] at most, each update limited to a tenth of the unknown's size
/// plus one unit; a singular or non-finite block keeps its unknowns), the other unknowns
/// kept admissible by [`Problem::limit_prediction`] against `old`. Converged when every
/// storage is within [`INVERSION_TOLERANCE`] of `scale`. Returns the largest relative
/// storage residual left.
pub fn unknowns_of_storages<const B: usize, P: Problem<B> + ?Sized>(
    sys: &mut P,
    t: f64,
    u: &mut [f64],
    target: &[f64],
    scale: &[f64],
    old: &[f64],
) -> f64 {
    let rows: Vec<usize> = sys.conserved_rows().to_vec();
    let nq = rows.len().min(MAX_CONSERVED);
    let len = u.len();
    let mut cur = vec![0.0; len];
    let mut pert = vec![0.0; len];
    let mut deriv = vec![0.0; len * nq];
    let mut u_try = vec![0.0; len];
    let mut worst = f64::INFINITY;
    for _ in 0..INVERSION_ITERATIONS {
        sys.evaluate(t, u);
        sys.storage_into(&mut cur);
        worst = 0.0f64;
        for i in 0..len / B {
            for &r in &rows[..nq] {
                let j = B * i + r;
                let e = (cur[j] - target[j]).abs() / scale[j].max(f64::MIN_POSITIVE);
                worst = worst.max(if e.is_nan() { f64::INFINITY } else { e });
            }
        }
        if worst <= INVERSION_TOLERANCE {
            break;
        }
        // Forward differences, one unknown of every block at a time (storages are
        // block-local).
        for (q, &r) in rows[..nq].iter().enumerate() {
            u_try.copy_from_slice(u);
            for i in 0..len / B {
                let x = u[B * i + r];
                u_try[B * i + r] = x + 1e-7 * (x.abs() + 1e-3);
            }
            sys.evaluate(t, &u_try);
            sys.storage_into(&mut pert);
            for i in 0..len / B {
                let j = B * i + r;
                let du = u_try[j] - u[j];
                for (c, &rc) in rows[..nq].iter().enumerate() {
                    let jc = B * i + rc;
                    deriv[(i * nq + c) * nq + q] = (pert[jc] - cur[jc]) / du;
                }
            }
        }
        // Per block: solve the nq × nq system (Gaussian elimination with partial
        // pivoting; nq ≤ MAX_CONSERVED), limited to a tenth of the unknown's size plus
        // one unit per iteration; a singular or non-finite block keeps its unknowns.
        for i in 0..len / B {
            let mut a = [[0.0f64; MAX_CONSERVED + 1]; MAX_CONSERVED];
            for c in 0..nq {
                for q in 0..nq {
                    a[c][q] = deriv[(i * nq + c) * nq + q];
                }
                let j = B * i + rows[c];
                a[c][nq] = target[j] - cur[j];
            }
            let mut dx = [0.0; MAX_CONSERVED];
            if !solve_dense(&mut a[..nq], &mut dx[..nq]) {
                continue;
            }
            for (q, &r) in rows[..nq].iter().enumerate() {
                let x = &mut u[B * i + r];
                let cap = 0.1 * x.abs() + 1.0;
                *x += dx[q].clamp(-cap, cap);
            }
        }
        u_try.copy_from_slice(u);
        sys.limit_prediction(&mut u_try, old);
        u.copy_from_slice(&u_try);
    }
    worst
}
