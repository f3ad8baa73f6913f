//! The implicit jump of cycle skipping (`[time.cycle_skipping] jump = "implicit"`):
//! variable-step BDF2 on the envelope (backward Euler for the first jump of a run).
//!
//! **Why.** The explicit jump y_{k+m} = y_k + m ∇y multiplies a mode of per-period
//! multiplier μ by G(μ) = μ^{E−1}(μ − m(1 − μ)) over a block of E exact periods and a
//! jump of m ([`crate::solve::envelope`], derived there): modes between the slow and the
//! fast ones (the thermal modes of the top metres under a daily wave, decaying over days
//! to months) grow for m > e·E, and the error test, which sees them, holds the jumps near
//! that length (measured: 12–15 periods with E = 4 on a daily wave over `harrow-dunes`,
//! whatever the time steps within the periods).
//!
//! **The step** (derived here). Backward Euler over m periods on the envelope asks for
//! the contents C of the landing state y with
//!
//!   G(C) = C − C_k − m ΔS(C) = 0,
//!
//! C_k the contents at the block's last boundary and ΔS(C) the contents' change over one
//! period integrated from y (per cell, volume-weighted). A mode of per-period multiplier
//! μ is multiplied by 1/(1 + m(1 − μ)) ∈ (0, 1]: stable for any m. Newton's method, one
//! integrated trial period per iteration, with the period's map approximated by one
//! backward-Euler step over the period under the period-mean Jacobian F̄
//! ([`super::period::JACOBIAN_SAMPLES`] midpoints, as for the periodic steady state):
//! see `Work::newton_step`. The first iterate is one such step from the block's last
//! state (linearly implicit Euler).
//!
//! **Second order.** Backward Euler's error, ½ m² C″ per jump, has one sign while the
//! envelope's drift slows: summed over a run's jumps it biased the water exchanged with
//! the water table over 10⁵ annual cycles by −1.2 % (jumps of ≤ 1 000 periods) and −4.2 %
//! (≤ 10 000). Every jump after the first therefore takes the two-step formula through
//! the boundary state the last jump started from, h periods before C_k ([`Formula`]):
//!
//!   G(C) = C − a₁ C_k + a₂ C_{k−h} − β m ΔS(C) = 0,
//!
//! solved as above with β m in place of m; the cumulative flows are combined alike. A
//! stiff mode is still damped (by → 0 as m grows), and the step ratio m/h is held below
//! [`crate::solve::envelope::MAX_STEP_RATIO`] for zero-stability. Its error estimate
//! compares the landing with the quadratic through the two points and the first period
//! (`Formula::second_order_error_into`), and the jumps are sized by its cube root. Where that
//! estimate grows only as m (the drift's change from one period to the next, which the
//! quadratic extrapolates twice over: on the daily wave after the first centuries it held
//! the jumps at ~2 200 days, backward Euler's at ~7 000), backward Euler's estimate along
//! the same drift is taken instead when it allows the longer jump: the jump is accepted
//! when either estimate allows it (measured: the same accuracy, and on 10⁴ years of
//! days 1 102 jumps instead of 1 645; README, "Periodic forcing: second-order implicit
//! jumps").
//!
//! **One grid.** Integrated by the error test, a period's end scatters with the step
//! sequence, which changes with the state: Newton then stalls at that scatter times m.
//! The first trial period, from the block's last state, records its steps; every later
//! one replays them ([`crate::solve::stepper::Replay`]), so that the map whose fixed point
//! Newton seeks is smooth.
//!
//! **Landing and convergence.** After each trial period the landing is taken as
//! C* = a₁ C_k − a₂ C_{k−h} + β m ΔS(C_j), the cumulative flows as the same combination
//! of the two points' plus β m times the period's: storages and flows then agree exactly
//! as in the explicit jump (each period's storage change equals its net inflow, and
//! a₁ − a₂ = 1), so the jump's balance error is again only what the inversion leaves.
//! C* differs from the formula's solution by at most G_j in every linear mode (derived:
//! with e the iterate's error, G_j = (1 + βmλP) e per mode and C* − C = −βmλP e), so
//! the iteration stops when C* is within [`ITERATION_TOLERANCE`] of C_j by the run's
//! error tests at the skipping tolerance. The error estimate is
//! `Work::error_estimate`; a jump whose estimate exceeds 1 is tried shorter.
//!
//! **Failure.** A trial period that fails or leaves the grid, an iteration that
//! contracts by less than [`SLOWEST_CONTRACTION`] or does not converge in
//! [`MAX_ITERATIONS`], or [`MAX_ATTEMPTS`] sizes rejected, abandon the jump: the caller
//! takes the explicit jump instead (and for the next blocks, `Simulation::run_skipping`).

use crate::error::{Error, Result};
use crate::model::Model;
use crate::physics::{System, RV};
use crate::solve::blocktri::BlockTri;
use crate::solve::envelope::{
    inversion_scale, unknowns_of_storages, EnvelopeOptions, Landing, PeriodPoint,
};
use crate::solve::linear::SolverKind;
use crate::solve::problem::{weighted_change, Problem};

use super::initial::equilibrate_vapor;
use super::period::{
    add_jacobian_sample, moved_contents, one_period_on_grid, periodic_model, Grid, GridSteps,
    MeanLinearization, PeriodEnd,
};

/// Most trial periods (Newton iterations) per jump size tried.
pub const MAX_ITERATIONS: u64 = 6;
/// The iteration is given up when a step does not shrink the distance at least by this
/// factor.
pub const SLOWEST_CONTRACTION: f64 = 0.5;
/// Most jump sizes tried (each smaller than the last) before the jump is abandoned.
pub const MAX_ATTEMPTS: u64 = 3;
/// The iteration stops when the landing is within this fraction of the skipping
/// tolerance of the iterate (by the run's error tests).
pub const ITERATION_TOLERANCE: f64 = 0.1;

/// What an implicit jump cost.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct TrialWork {
    /// Trial periods integrated (the recorded one and one per Newton iteration).
    pub periods: u64,
    /// Their time steps.
    pub steps: u64,
}

/// An implicit jump found.
#[derive(Debug, Clone, PartialEq)]
pub struct ImplicitJump {
    pub landing: Landing,
    /// Periods jumped (at most those asked).
    pub periods: u64,
    /// Its error estimate (see [`Formula`], filtered) by the error tests
    /// at the skipping tolerance (≤ 1).
    pub error: f64,
}

/// The implicit jump of at most `m` periods from the newest of `points` (the block's
/// boundary states), landing at `time_of(m)`, with the trial periods it took. The run's
/// own system is not touched (its kept evaluations are part of the run's state): the
/// trial periods, the linearisation, the inversions and the error tests use systems of
/// their own. Err: the jump is abandoned (the message says why; the work done so far
/// is in the second part).
pub fn implicit_jump(
    model: &Model,
    points: &[PeriodPoint],
    origin: Option<(u64, &PeriodPoint)>,
    opts: &EnvelopeOptions,
    m: u64,
    time_of: &dyn Fn(u64) -> f64,
    solver: SolverKind,
) -> std::result::Result<(ImplicitJump, TrialWork), (String, TrialWork)> {
    let mut work = TrialWork::default();
    match solve(model, points, origin, opts, m, time_of, solver, &mut work) {
        Ok(j) => Ok((j, work)),
        Err(e) => Err((e.to_string(), work)),
    }
}

#[allow(clippy::too_many_arguments)]
fn solve(
    model: &Model,
    points: &[PeriodPoint],
    origin: Option<(u64, &PeriodPoint)>,
    opts: &EnvelopeOptions,
    m_asked: u64,
    time_of: &dyn Fn(u64) -> f64,
    solver: SolverKind,
    work: &mut TrialWork,
) -> Result<ImplicitJump> {
    let pk = points
        .last()
        .ok_or_else(|| Error::Internal("an implicit jump without a boundary state".into()))?;
    let mut sys = System::new(model);
    let n = sys.n;
    let len = B * n;
    let period = opts.period;
    let dt = opts.dt_after_jump;
    // Trial periods start where the first jump asked lands, under the conditions in
    // force there (cycle skipping has checked that they repeat with the period); all
    // start there, so that the recorded steps fit every one of them.
    let t_trial = time_of(m_asked);
    let mut shifted = model.clone();
    shifted.time.start = t_trial;
    let trial = periodic_model(
        &shifted,
        model.surface.at(t_trial),
        model.bottom.at(t_trial),
        period,
    );
    let mut w = Work::new(n);

    // The period from the boundary state, by the error test, its steps recorded (the
    // grid of every trial period after it), with the period-mean Jacobian.
    let mut lin_k = MeanLinearization::new(n, solver);
    let (end_k, (grid, _)) = w.period(
        &mut sys,
        &trial,
        &pk.u,
        dt,
        solver,
        Grid::Record,
        &mut lin_k,
    )?;
    work.periods += 1;
    work.steps += end_k.steps;
    let mut s_k = vec![0.0; len];
    w.linearize(&mut sys, &mut lin_k, t_trial, &pk.u, &mut s_k, model)?;
    let mut s_end = vec![0.0; len];
    w.storage_at(&mut sys, t_trial, &end_k.u, &mut s_end);
    // ΔS(y_k): the drift of the contents over that period.
    let drift_k: Vec<f64> = s_end.iter().zip(&s_k).map(|(b, a)| b - a).collect();

    let mut lin = MeanLinearization::new(n, solver);
    let (mut s_y, mut s_land, mut e) = (vec![0.0; len], vec![0.0; len], vec![0.0; len]);
    let mut m = m_asked.max(1);
    for attempt in 0..MAX_ATTEMPTS {
        let mf = m as f64;
        let t_new = time_of(m);
        let f = Formula::new(m, origin.map(|(h, _)| h));
        let older = origin.map(|(_, p)| p);
        // C_k + a₂ (C_k − C_k−h): what the landing adds m β ΔS(y) to.
        let base: Vec<f64> = f.combine(&pk.storage, older.map(|p| &p.storage[..]));
        let step = f.beta * mf;
        // The first iterate: a Newton step from the boundary state itself, where
        // G = C_k − base − mβ ΔS(y_k) (linearly implicit on the envelope: the modes
        // faster than the jump start near their landing, not m drifts away).
        let s_first: Vec<f64> = base
            .iter()
            .zip(&drift_k)
            .map(|(c, d)| c + step * d)
            .collect();
        let mut y = w.newton_step(
            &mut sys, &mut lin_k, t_new, &pk.u, &s_k, &s_first, step, period,
        )?;
        let mut last = f64::NAN;
        for it in 0..MAX_ITERATIONS {
            let (end, (_, kept)) = w.period(
                &mut sys,
                &trial,
                &y,
                dt,
                solver,
                Grid::Replay(&grid),
                &mut lin,
            )?;
            work.periods += 1;
            work.steps += end.steps;
            if !kept {
                return Err(Error::Numerical(
                    "a trial period could not keep to the recorded steps".into(),
                ));
            }
            w.linearize(&mut sys, &mut lin, t_trial, &y, &mut s_y, model)?;
            w.storage_at(&mut sys, t_trial, &end.u, &mut s_end);
            // The landing along this period's drift, C* = base + mβ ΔS(y_j), its
            // unknowns.
            for j in 0..len {
                s_land[j] = base[j] + step * (s_end[j] - s_y[j]);
            }
            let mut u_land = y.clone();
            let scale = inversion_scale(&s_land, &pk.storage);
            unknowns_of_storages(&mut sys, t_new, &mut u_land, &s_land, &scale, &pk.u);
            if sys.last_unknown_decoupled() {
                equilibrate_vapor(&mut u_land);
            }
            sys.evaluate(t_new, &u_land);
            let distance = weighted_change(
                &sys,
                &u_land,
                &y,
                opts.tolerance,
                |j| u_land[j] - y[j],
                |j| s_land[j] - s_y[j],
            );
            log::debug!(
                "implicit jump of {m} periods: iteration {} ({} steps), distance {distance:.3e}",
                it + 1,
                end.steps
            );
            if distance <= ITERATION_TOLERANCE {
                first_order_error_into(mf, &drift_k, &s_end, &s_y, &mut e);
                let first = w.error_estimate(&sys, &mut lin, &u_land, &e, period, opts)?;
                let error = match older.filter(|_| f.error_power() > 2.0) {
                    Some(o) => {
                        f.second_order_error_into(&s_land, pk, o, &drift_k, &mut e);
                        let second = w.error_estimate(&sys, &mut lin, &u_land, &e, period, opts)?;
                        log::debug!(
                            "implicit jump of {m} periods: error estimates {second:.3e} (second order), {first:.3e} (first)"
                        );
                        // Backward Euler's on the cube-root scale (its e^{3/2} sizes the
                        // next jump by 0.9/√e, as it would), where it is the smaller.
                        second.min(first.powf(1.5))
                    }
                    None => first,
                };
                log::debug!("implicit jump of {m} periods: error estimate {error:.3e}");
                if error <= 1.0 {
                    let mut flows = f.combine(&pk.flows, older.map(|p| &p.flows[..]));
                    for (a, d) in flows.iter_mut().zip(&end.flows) {
                        *a += step * d;
                    }
                    return Ok(ImplicitJump {
                        landing: Landing {
                            u: u_land,
                            storage: s_land,
                            flows,
                        },
                        periods: m,
                        error,
                    });
                }
                // Too long: the error grows as m² (backward Euler) or m³.
                let shorter = ((mf * (0.9 * 0.9 / error).powf(1.0 / f.error_power())).floor()
                    as u64)
                    .min(m - 1);
                if shorter == 0 || attempt + 1 == MAX_ATTEMPTS {
                    return Err(Error::Numerical(format!(
                        "the error estimate {error:.3e} of a jump of {m} periods exceeds the tolerance"
                    )));
                }
                m = shorter;
                break;
            }
            // Each iteration costs a period: one that contracts by less than half is
            // given up (the jump is too nonlinear for the period-mean Jacobian).
            if it > 0 && (distance.is_nan() || distance > SLOWEST_CONTRACTION * last) {
                return Err(Error::Numerical(format!(
                    "the iteration contracts too slowly (distance {distance:.3e} after {last:.3e})"
                )));
            }
            last = distance;
            if it + 1 == MAX_ITERATIONS {
                return Err(Error::Numerical(format!(
                    "not converged in {MAX_ITERATIONS} trial periods (last distance {distance:.3e})"
                )));
            }
            y = w.newton_step(&mut sys, &mut lin, t_new, &y, &s_y, &s_land, step, period)?;
        }
    }
    Err(Error::Numerical("no jump size was accepted".into()))
}

const B: usize = 3;

/// Backward Euler's local error over a jump of `m` periods in the contents, into `e`:
/// against forward Euler, e = ½ m (ΔS(y_k) − ΔS(y*)) ≈ ½ m² C″, with ΔS(y_k) = `drift`
/// and ΔS(y*) = `s_end` − `s_y` (the period integrated from the landing's iterate).
fn first_order_error_into(m: f64, drift: &[f64], s_end: &[f64], s_y: &[f64], e: &mut [f64]) {
    for (j, x) in e.iter_mut().enumerate() {
        *x = 0.5 * m * (drift[j] - (s_end[j] - s_y[j]));
    }
}

/// The two-step formula of a jump of m periods whose older point lies h periods before
/// the newest (variable-step BDF2 on the envelope, ω = m/h):
///
///   C − a₁ C_k + a₂ C_{k−h} = β m ΔS(C),
///   a₁ = (1 + ω)²/(1 + 2ω), a₂ = ω²/(1 + 2ω), β = (1 + ω)/(1 + 2ω)
///
/// (derived: the quadratic through the three points, differentiated at the new one and
/// multiplied by m(1 + ω)/(1 + 2ω)). a₁ − a₂ = 1, so storages and cumulative flows,
/// combined alike, keep agreeing exactly. Without an older point, backward Euler
/// (a₁ = 1, a₂ = 0, β = 1).
#[derive(Debug, Clone, Copy, PartialEq)]
struct Formula {
    a1: f64,
    a2: f64,
    beta: f64,
    /// The jump m and the periods h back to the older point (0: none) [periods].
    m: f64,
    h: f64,
}

impl Formula {
    fn new(m: u64, older: Option<u64>) -> Self {
        let mf = m as f64;
        match older {
            Some(h) if h > 0 => {
                let w = mf / h as f64;
                let d = 1.0 + 2.0 * w;
                Formula {
                    a1: (1.0 + w) * (1.0 + w) / d,
                    a2: w * w / d,
                    beta: (1.0 + w) / d,
                    m: mf,
                    h: h as f64,
                }
            }
            _ => Formula {
                a1: 1.0,
                a2: 0.0,
                beta: 1.0,
                m: mf,
                h: 0.0,
            },
        }
    }

    /// The power of m that the local error grows with: 2 for backward Euler, 3 for the
    /// two-step formula.
    fn error_power(&self) -> f64 {
        if self.h > 0.0 {
            3.0
        } else {
            2.0
        }
    }

    /// The two-step formula's local error of the landing `landing` (C*) in the
    /// contents, into `e`, from the newest point (C_k, and `drift` = ΔS(y_k), the period
    /// integrated from it) and the older one (derived here, t in periods from the newest
    /// point; Milne's device, common practice for predictor–corrector pairs): the
    /// predictor q is the quadratic through C_{k−h} at −h, C_k at 0 and C_k + ΔS(y_k) at
    /// 1 (the drift is the change over the period, not a derivative),
    /// q(m) = C_k + m ΔS(y_k) + m(m − 1) c, c = (C_{k−h} − C_k + h ΔS(y_k))/(h(h + 1)).
    /// For a cubic envelope y, the interpolation error is y(m) − q(m) =
    /// y‴ m(m − 1)(m + h)/6, and the formula's residual at the exact values is
    /// y‴ m³ K with K = 1/6 − 1/(6ω(1 + 2ω)) − (1 + ω)/(2(1 + 2ω)) (−2/9 at ω = 1, the
    /// error constant of BDF2), so C* − y(m) = −K m³ y‴ where ΔS does not depend on the
    /// state, and e = C* − y(m) = r (C* − q), r = −K m³/(−K m³ + m(m − 1)(m + h)/6).
    /// (Backward Euler's is [`first_order_error_into`].)
    fn second_order_error_into(
        &self,
        landing: &[f64],
        newest: &PeriodPoint,
        older: &PeriodPoint,
        drift: &[f64],
        e: &mut [f64],
    ) {
        let (m, h) = (self.m, self.h);
        let ck = &newest.storage;
        let w = m / h;
        let k = 1.0 / 6.0 - 1.0 / (6.0 * w * (1.0 + 2.0 * w)) - (1.0 + w) / (2.0 * (1.0 + 2.0 * w));
        let corrector = -k * m * m * m;
        let r = corrector / (corrector + m * (m - 1.0) * (m + h) / 6.0);
        for (j, x) in e.iter_mut().enumerate() {
            let c = (older.storage[j] - ck[j] + h * drift[j]) / (h * (h + 1.0));
            let q = ck[j] + m * drift[j] + m * (m - 1.0) * c;
            *x = r * (landing[j] - q);
        }
    }

    /// a₁ x_k − a₂ x_{k−h}, written as x_k + a₂ (x_k − x_{k−h}) (x_k itself without an
    /// older point).
    fn combine(&self, newest: &[f64], older: Option<&[f64]>) -> Vec<f64> {
        match older {
            Some(o) if self.a2 != 0.0 => newest
                .iter()
                .zip(o)
                .map(|(x, y)| x + self.a2 * (x - y))
                .collect(),
            _ => newest.to_vec(),
        }
    }
}

/// Work arrays of an implicit jump.
struct Work {
    zeros: Vec<f64>,
    res: Vec<f64>,
    jac: BlockTri<B>,
    acc: BlockTri<B>,
    delta: Vec<f64>,
    flux_change: Vec<f64>,
    change: Vec<f64>,
}

impl Work {
    fn new(n: usize) -> Self {
        let zeros = vec![0.0; B * n];
        Work {
            res: zeros.clone(),
            jac: BlockTri::new(n),
            acc: BlockTri::new(n),
            delta: zeros.clone(),
            flux_change: zeros.clone(),
            change: zeros.clone(),
            zeros,
        }
    }

    /// One trial period from `u` on `grid`, its period-mean Jacobian into `lin`; with
    /// the steps recorded and whether it kept to those given ([`GridSteps`]).
    #[allow(clippy::too_many_arguments)]
    fn period(
        &mut self,
        sys: &mut System,
        trial: &Model,
        u: &[f64],
        dt: f64,
        solver: SolverKind,
        grid: Grid,
        lin: &mut MeanLinearization,
    ) -> Result<(PeriodEnd, GridSteps)> {
        self.acc.zero();
        let (zeros, res, jac, acc) = (&self.zeros, &mut self.res, &mut self.jac, &mut self.acc);
        let mut sample = |t: f64, u: &[f64]| -> Result<()> {
            add_jacobian_sample(sys, t, u, zeros, res, jac, acc)
        };
        let out = one_period_on_grid(trial, u, dt, solver, &mut sample, grid)?;
        std::mem::swap(&mut lin.mean_jac, &mut self.acc);
        Ok(out)
    }

    /// The storages `s` at `u`, and the storage Jacobian and the scales of `lin` there.
    fn linearize(
        &mut self,
        sys: &mut System,
        lin: &mut MeanLinearization,
        t: f64,
        u: &[f64],
        s: &mut [f64],
        model: &Model,
    ) -> Result<()> {
        sys.forget_kept();
        sys.assemble(t, u, 0.0, &self.zeros, &mut self.res, Some(&mut self.jac))
            .map_err(|nf| {
                Error::Numerical(format!(
                    "the Jacobian is not finite at cell {} row {}",
                    nf.cell, nf.row
                ))
            })?;
        sys.storage_into(s);
        sys.storage_jacobian_into(&mut lin.stor);
        sys.convergence_scales_into(0.0, &self.zeros, model.time.newton_tolerance, &mut lin.row);
        for r in lin.row.iter_mut() {
            *r = 1.0 / *r;
        }
        sys.column_scales_into(u, &mut lin.col);
        Ok(())
    }

    /// The storages `s` at `u`, evaluated directly.
    fn storage_at(&mut self, sys: &mut System, t: f64, u: &[f64], s: &mut [f64]) {
        sys.forget_kept();
        sys.evaluate(t, u);
        sys.storage_into(s);
    }

    /// The Newton step from `y` (storages `s_y`, linearisation `lin` there) towards the
    /// landing `s_land` = C_k + m ΔS(y): G = C(y) − C*, and with the period's monodromy
    /// approximated by one backward-Euler step over the period under the period-mean
    /// Jacobian, M ≈ (S − P F̄)⁻¹ S (a mode faster than the period is forgotten within
    /// it, M → 0, where the linear I + P F̄ S⁻¹ would overshoot by P λ), the Jacobian of
    /// G is S − m S (M − I); with S δ = (S − P F̄) w (derived),
    ///   (S − (m + 1) P F̄) w = −G,   the contents moving by S w − P F̄ w.
    #[allow(clippy::too_many_arguments)]
    fn newton_step(
        &mut self,
        sys: &mut System,
        lin: &mut MeanLinearization,
        t: f64,
        y: &[f64],
        s_y: &[f64],
        s_land: &[f64],
        m: f64,
        period: f64,
    ) -> Result<Vec<f64>> {
        let tau = (m + 1.0) * period;
        let rhs: Vec<f64> = (0..s_y.len()).map(|j| s_land[j] - s_y[j]).collect();
        self.solve_scaled(sys, lin, &rhs, tau)?;
        // −P F̄ w (mean_jac holds −F̄), then the contents' change per unit volume.
        lin.mean_jac
            .mul_vec_into(&self.delta, &mut self.flux_change);
        let volumes = sys.volumes().to_vec();
        for (j, c) in self.change.iter_mut().enumerate() {
            *c = lin.content_change(&self.delta, &volumes, j)
                + period * self.flux_change[j] / volumes[j / B];
        }
        Ok(moved_contents(
            sys,
            t,
            y,
            s_y,
            &self.change,
            &mut self.delta,
        ))
    }

    /// w with (S − τ F̄) w = V e (`e` per unit volume; the algebraic vapour row 0 where
    /// it is decoupled), into `self.delta`.
    fn solve_scaled(
        &mut self,
        sys: &System,
        lin: &mut MeanLinearization,
        e: &[f64],
        tau: f64,
    ) -> Result<()> {
        let decoupled = sys.last_unknown_decoupled();
        let volumes = sys.volumes();
        let mut lin_rhs = std::mem::take(&mut self.res);
        for (j, r) in lin_rhs.iter_mut().enumerate() {
            *r = if decoupled && j % B == RV {
                0.0
            } else {
                volumes[j / B] * e[j] / tau
            };
        }
        // MeanLinearization solves (S/τ − F̄) δ = rhs.
        let out = lin.solve_with(tau, &lin_rhs, &mut self.delta);
        self.res = lin_rhs;
        out.map_err(Error::Numerical)
    }

    /// The jump's error estimate: the local error `e` in the contents
    /// ([`first_order_error_into`], `Formula::second_order_error_into`), filtered through
    /// one backward-Euler step over the E exact periods that follow every landing before
    /// anything reads the state (an implicit jump lands at least E periods before a snapshot, checkpoint
    /// or the end), e' = (I − E P F̄ S⁻¹)⁻¹ e (the filtered estimate of stiff solvers,
    /// common practice; from memory): a mode that those periods forget (the top cells
    /// under the forcing), whose part of e is the landing's lag and not an error the run
    /// keeps, drops out; every slower mode keeps its part. Measured on `harrow-dunes` over
    /// 10⁴ years against full integration, the liquid content's largest difference and
    /// the wall time: filtered through the jump's own operator,
    /// (I − (m + 1) P F̄ S⁻¹)⁻¹, 1.4e-3 in 15 s (it also dropped the displacement of
    /// drying fronts, which the linearisation sees as fast local modes); through E = 4
    /// periods 9.5e-4 in 10.9 s; through one period 9.0e-4 in 12.1 s; unfiltered
    /// 6.7e-4 in 23 s (explicit jumps: 2.0e-4 in 48 s). In the unknowns, w with
    /// (S − E P F̄) w = e, e' = S w; measured by the run's error tests at the skipping
    /// tolerance (`sys` evaluated at `u`).
    #[allow(clippy::too_many_arguments)]
    fn error_estimate(
        &mut self,
        sys: &System,
        lin: &mut MeanLinearization,
        u: &[f64],
        e: &[f64],
        period: f64,
        opts: &EnvelopeOptions,
    ) -> Result<f64> {
        let filter = opts.exact_periods as f64 * period;
        self.solve_scaled(sys, lin, e, filter)?;
        let volumes = sys.volumes();
        for (j, c) in self.change.iter_mut().enumerate() {
            *c = lin.content_change(&self.delta, volumes, j);
        }
        Ok(weighted_change(
            sys,
            u,
            u,
            opts.tolerance,
            |j| self.delta[j],
            |j| self.change[j],
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::{first_order_error_into, Formula, PeriodPoint};

    /// At equal steps (ω = 1) the formula is the constant-step BDF2,
    /// y_{n+1} − 4/3 y_n + 1/3 y_{n−1} = 2/3 h f_{n+1} (Hairer & Wanner, Solving Ordinary
    /// Differential Equations II, Sect. III.1, the BDF formulas).
    #[test]
    fn equal_steps_give_the_constant_step_bdf2() {
        let f = Formula::new(10, Some(10));
        assert!((f.a1 - 4.0 / 3.0).abs() < 1e-15, "{f:?}");
        assert!((f.a2 - 1.0 / 3.0).abs() < 1e-15, "{f:?}");
        assert!((f.beta - 2.0 / 3.0).abs() < 1e-15, "{f:?}");
    }

    /// Second order at any step ratio: exact for every quadratic y = a + bt + ct²
    /// through the points at −h, 0 and m, with f = y′(m) (the formula's derivation).
    /// Storages and flows combined alike stay consistent: a₁ − a₂ = 1.
    #[test]
    fn the_formula_is_exact_for_quadratics_at_any_step_ratio() {
        let (a, b, c) = (0.7, -1.3, 0.45);
        let y = |t: f64| a + b * t + c * t * t;
        let dy = |t: f64| b + 2.0 * c * t;
        for (m, h) in [(1, 1), (3, 7), (1000, 504), (16, 8), (5, 100)] {
            let f = Formula::new(m, Some(h));
            let (mf, hf) = (m as f64, h as f64);
            let lhs = y(mf) - f.a1 * y(0.0) + f.a2 * y(-hf);
            let rhs = f.beta * mf * dy(mf);
            assert!(
                (lhs - rhs).abs() < 1e-9 * y(mf).abs().max(1.0),
                "m {m} h {h}: {lhs} vs {rhs}"
            );
            assert!((f.a1 - f.a2 - 1.0).abs() < 1e-12, "{f:?}");
            let combined = f.combine(&[y(0.0)], Some(&[y(-hf)]));
            assert!((combined[0] - (f.a1 * y(0.0) - f.a2 * y(-hf))).abs() < 1e-9);
        }
        // Backward Euler is not: its error is ½m²y″ (here c m²).
        let be = Formula::new(4, None);
        assert_eq!((be.a1, be.a2, be.beta), (1.0, 0.0, 1.0));
        let lhs = y(4.0) - y(0.0);
        assert!((lhs - 4.0 * dy(4.0) + c * 16.0).abs() < 1e-12);
        assert_eq!(be.combine(&[2.0], Some(&[5.0])), vec![2.0]);
    }

    fn point(c: f64) -> PeriodPoint {
        PeriodPoint {
            u: vec![],
            storage: vec![c],
            flows: vec![],
        }
    }

    /// The local error estimates are exact where their derivations are: for a cubic
    /// envelope whose drift does not depend on the state (y′ a function of t alone), the
    /// two-step landing's error at any step ratio, and for a quadratic one backward
    /// Euler's (derived in `Formula::second_order_error_into` and
    /// `first_order_error_into`).
    #[test]
    fn the_local_error_estimates_are_exact_for_low_degree_envelopes() {
        let (a, b, c, d) = (0.3, 1.1, -0.4, 0.07);
        let y = |t: f64| a + b * t + c * t * t + d * t * t * t;
        let dy = |t: f64| b + 2.0 * c * t + 3.0 * d * t * t;
        for (m, h) in [(1, 1), (4, 8), (16, 8), (1000, 600), (7, 3)] {
            let f = Formula::new(m, Some(h));
            let (mf, hf) = (m as f64, h as f64);
            let landing = f.combine(&[y(0.0)], Some(&[y(-hf)]))[0] + f.beta * mf * dy(mf);
            let drift = [y(1.0) - y(0.0)];
            let mut e = [0.0];
            f.second_order_error_into(&[landing], &point(y(0.0)), &point(y(-hf)), &drift, &mut e);
            let truth = landing - y(mf);
            assert!(
                (e[0] - truth).abs() <= 1e-9 * truth.abs(),
                "m {m} h {h}: {} vs {truth}",
                e[0]
            );
            assert_eq!(f.error_power(), 3.0);
        }
        // Backward Euler on a quadratic (d = 0): e = ½ m (ΔS(y_k) − ΔS(y*)) with the
        // drifts the period's changes; here y* is exact, so e = ½ m (y(1) − y(0) −
        // (y(m + 1) − y(m))) = −c m², exactly −½ m² y″.
        let q = |t: f64| a + b * t + c * t * t;
        let m = 6.0;
        let f = Formula::new(6, None);
        let mut e = [0.0];
        first_order_error_into(m, &[q(1.0) - q(0.0)], &[q(m + 1.0)], &[q(m)], &mut e);
        assert!((e[0] - 0.5 * m * ((q(1.0) - q(0.0)) - (q(m + 1.0) - q(m)))).abs() < 1e-12);
        assert!((e[0] + c * m * m).abs() < 1e-12, "{}", e[0]);
        assert_eq!(f.error_power(), 2.0);
    }
}
