//! Newton's method on all unknowns at once, knowing nothing about time: it solves
//! `R(u; t, c, hist) = 0` for the system and integrator coefficients it is given.
//!
//! Convergence is judged per equation on scaled residuals (|R| against the magnitude of
//! the terms that make up the row, see [`System::residual_scale_into`]) and on the update
//! size per variable, and globally on the balance: the water and energy residuals summed
//! over the column (the step's balance error) must be small against what the step moves.
//! The linear system is row- and column-scaled before factorisation.
//!
//! **Modified Newton.** The Jacobian (the expensive part: property laws in dual numbers)
//! and its factorisation are kept across iterations, and across calls until the caller
//! invalidates them, while the iteration contracts fast; iterations in between evaluate
//! the residual alone (values only, about 0.4× the cost of a Jacobian evaluation). The
//! Jacobian is kept in two parts, `J(c) = J(c_J) + (c − c_J) S` with `S` the cell-local
//! storage derivatives, so a new coefficient `c` (a retry with another Δt or BDF order)
//! only costs a refactorisation, not a new evaluation. The Jacobian is evaluated afresh
//! when the residual contracts by less than `refresh_rate` per iteration, when the linear
//! solve fails, and when the caller invalidates it (the stepper does at every step).

use super::blocktri::{Block, BlockTri};
use super::linear::{LinearError, LinearSolver};
use crate::physics::{NonFinite, System, ENERGY, H, RV, T, WATER};

/// Default Newton residual tolerance (scaled, see [`NewtonOptions::residual_tol`]).
/// Measured on the benchmark case: 1e-11 needs ~30 % more iterations for no gain in
/// accuracy; it closes the balance of the `balance-closure` verification case to 1e-12
/// of the throughput instead of 1e-10 (README, performance).
pub const DEFAULT_RESIDUAL_TOL: f64 = 1e-9;

/// Newton settings.
#[derive(Debug, Clone)]
pub struct NewtonOptions {
    /// Iteration limit.
    pub max_iter: usize,
    /// Converged when every |R| ≤ `residual_tol` × its row scale ...
    pub residual_tol: f64,
    /// ... or when the update is below these (temperature [K], head relative [-] with an
    /// absolute floor [m], vapour density relative [-] with floor [kg m⁻³]) and the
    /// residual is below `residual_tol_loose`.
    pub update_t: f64,
    pub update_h_rel: f64,
    pub update_h_abs: f64,
    pub update_rv_rel: f64,
    pub update_rv_abs: f64,
    pub residual_tol_loose: f64,
    /// ... and when the water and energy residuals sum over the column (the step's
    /// balance error) to at most this fraction of what the step moves (boundary
    /// throughput plus the cells' storage changes), or to their round-off.
    pub balance_tol: f64,
    /// Largest change per iteration: temperature [K]; head by a factor in |h| plus [m].
    pub max_dt_per_iter: f64,
    pub max_dh_factor: f64,
    pub max_dh_abs: f64,
    /// Keep the Jacobian across iterations and steps (modified Newton); false evaluates it
    /// at every iteration (full Newton).
    pub reuse_jacobian: bool,
    /// With a kept Jacobian: evaluate it afresh when the worst scaled residual falls by
    /// less than this factor in one iteration.
    pub refresh_rate: f64,
}

impl Default for NewtonOptions {
    fn default() -> Self {
        NewtonOptions {
            max_iter: 12,
            residual_tol: DEFAULT_RESIDUAL_TOL,
            update_t: 1e-9,
            update_h_rel: 1e-10,
            update_h_abs: 1e-9,
            update_rv_rel: 1e-10,
            update_rv_abs: 1e-16,
            residual_tol_loose: 1e-7,
            // A safeguard for columns whose storage terms dwarf their fluxes (a single thick
            // cell, the first seconds of a run), where rows can pass their test with a
            // step balance error of 1e-4 of the flow. Free on the benchmark case (the same
            // iterations; its cumulative balance errors are 5e-11 water, 2e-11 energy).
            balance_tol: 1e-6,
            max_dt_per_iter: 5.0,
            max_dh_factor: 10.0,
            max_dh_abs: 2.0,
            reuse_jacobian: true,
            refresh_rate: 0.05,
        }
    }
}

/// Why Newton failed (all recoverable: the stepper cuts the step).
#[derive(Debug, Clone, PartialEq)]
pub enum NewtonFailure {
    /// Not converged within the iteration limit; worst scaled residual at `cell`, `row`.
    NotConverged {
        cell: usize,
        row: usize,
        residual: f64,
    },
    /// The residual grew for several iterations.
    Diverged {
        cell: usize,
        row: usize,
        residual: f64,
    },
    /// NaN or Inf in the residual or Jacobian.
    NonFinite(NonFinite),
    /// The linear system could not be solved.
    Linear(LinearError),
}

/// Work arrays, allocated once per run.
pub struct NewtonWork {
    pub res: Vec<f64>,
    pub scale: Vec<f64>,
    pub dx: Vec<f64>,
    pub row: Vec<f64>,
    pub col: Vec<f64>,
    /// The scaled matrix handed to the linear solver.
    pub jac: BlockTri,
    /// The last (clipped) update.
    pub step: Vec<f64>,
    /// The kept Jacobian, unscaled, evaluated with coefficient `jac_c`, and the storage
    /// derivative blocks `S` of the same evaluation.
    jac_raw: BlockTri,
    storage: Vec<Block>,
    jac_c: Option<f64>,
    /// Coefficient of the current factorisation (None: no valid factorisation).
    factor_c: Option<f64>,
    /// Coefficient for which `scale` and `balance_scales` were computed, at the state of
    /// the kept Jacobian's evaluation (None: to be computed).
    scale_c: Option<f64>,
    balance_scales: ([f64; 2], [f64; 2]),
}

impl NewtonWork {
    pub fn new(n: usize) -> Self {
        NewtonWork {
            res: vec![0.0; 3 * n],
            scale: vec![0.0; 3 * n],
            dx: vec![0.0; 3 * n],
            row: vec![0.0; 3 * n],
            col: vec![0.0; 3 * n],
            jac: BlockTri::new(n),
            step: vec![0.0; 3 * n],
            jac_raw: BlockTri::new(n),
            storage: vec![[0.0; 9]; n],
            jac_c: None,
            factor_c: None,
            scale_c: None,
            balance_scales: ([0.0; 2], [0.0; 2]),
        }
    }

    /// Forgets the kept Jacobian and factorisation: the next iteration evaluates afresh.
    pub fn invalidate(&mut self) {
        self.jac_c = None;
        self.factor_c = None;
        self.scale_c = None;
    }
}

/// What one solve cost.
#[derive(Debug, Clone, Copy, Default)]
pub struct NewtonStats {
    /// Linear solves (Newton updates).
    pub iterations: usize,
    pub factorizations: usize,
    /// Evaluations of the Jacobian (residual with derivatives).
    pub jacobians: usize,
}

/// Worst scaled residual, given the reciprocal row scales: (value, cell, row).
fn worst(res: &[f64], inv_scale: &[f64]) -> (f64, usize, usize) {
    let mut best = (0.0, 0, 0);
    for (k, (r, s)) in res.iter().zip(inv_scale.iter()).enumerate() {
        let v = r.abs() * s;
        // (The residual is finite here: `System::assemble` refuses NaN and Inf.)
        if v > best.0 {
            best = (v, k / 3, k % 3);
        }
    }
    best
}

/// Solves for `u` (in place, starting from its value) at time `t` with integrator
/// coefficient `c` and history `hist`.
#[allow(clippy::too_many_arguments)]
pub fn solve(
    sys: &mut System,
    lin: &mut dyn LinearSolver,
    t: f64,
    c: f64,
    hist: &[f64],
    u: &mut [f64],
    opts: &NewtonOptions,
    w: &mut NewtonWork,
) -> Result<NewtonStats, NewtonFailure> {
    let mut stats = NewtonStats::default();
    if !opts.reuse_jacobian {
        w.invalidate();
    }
    // Worst scaled residual of the previous iterate, and whether the Jacobian was fresh
    // (evaluated at that iterate) when its update was computed.
    let mut last = f64::INFINITY;
    let mut last_fresh = false;
    let mut growth = 0;
    let mut small_update = false;
    let n = sys.n;
    loop {
        if !opts.reuse_jacobian {
            w.invalidate();
        }
        let fresh = w.jac_c.is_none();
        if fresh {
            sys.assemble(t, u, c, hist, &mut w.res, Some(&mut w.jac_raw))
                .map_err(NewtonFailure::NonFinite)?;
            sys.storage_jacobian_into(&mut w.storage);
            w.jac_c = Some(c);
            w.factor_c = None;
            stats.jacobians += 1;
        } else {
            sys.assemble(t, u, c, hist, &mut w.res, None)
                .map_err(NewtonFailure::NonFinite)?;
        }
        // Each row converges at tol × its scale or at its round-off floor, whichever is
        // larger: folded into the scale. The scales are magnitudes, taken at the state
        // where the Jacobian was evaluated and kept over the iterations that reuse it
        // (for the same coefficient), as an error weight is kept over a step.
        if fresh || w.scale_c != Some(c) {
            w.balance_scales =
                sys.convergence_scales_into(c, hist, opts.residual_tol, &mut w.scale);
            w.scale_c = Some(c);
            for (r, s) in w.row.iter_mut().zip(w.scale.iter()) {
                *r = 1.0 / s;
            }
        }
        let (floor_sum, moved) = w.balance_scales;
        let (r, cell, row) = worst(&w.res, &w.row);
        let balanced = balance_closed(sys, &w.res, floor_sum, moved, opts.balance_tol);
        log::trace!(
            "newton t {t:.6e} it {} worst scaled residual {r:.3e} at cell {cell} row {row} (fresh Jacobian: {fresh})",
            stats.iterations
        );
        if r.is_nan() {
            return Err(NewtonFailure::NonFinite(NonFinite { cell, row }));
        }
        if (r <= opts.residual_tol && balanced) || (small_update && r <= opts.residual_tol_loose) {
            // The accepted state's evaluation complete (fluxes by mechanism for output).
            sys.complete_face_parts(u);
            return Ok(stats);
        }
        if stats.iterations >= opts.max_iter {
            return Err(NewtonFailure::NotConverged {
                cell,
                row,
                residual: r,
            });
        }
        if !fresh && stats.iterations > 0 && r > opts.refresh_rate * last {
            // A kept Jacobian that no longer contracts well: evaluate it here, afresh.
            w.invalidate();
            continue;
        }
        if r > last && last_fresh {
            growth += 1;
            if growth >= 3 {
                return Err(NewtonFailure::Diverged {
                    cell,
                    row,
                    residual: r,
                });
            }
        } else if r <= last {
            growth = 0;
        }
        last = r;
        last_fresh = fresh;
        if w.factor_c != Some(c) {
            // J(c) from the kept parts, row scaling by the row magnitudes, column scaling
            // by typical variable sizes; then factorise.
            let jc = w.jac_c.unwrap_or(c);
            for i in 0..n {
                w.col[3 * i + T] = 1.0;
                w.col[3 * i + H] = 1.0 + u[3 * i + H].abs();
                w.col[3 * i + RV] = 1e-3 + u[3 * i + RV].abs();
            }
            scaled_copy(&w.jac_raw, &w.storage, c - jc, &w.row, &w.col, &mut w.jac);
            if let Err(e) = lin.factor(&w.jac) {
                w.invalidate();
                if fresh {
                    return Err(NewtonFailure::Linear(e));
                }
                continue;
            }
            w.factor_c = Some(c);
            stats.factorizations += 1;
        }
        for ((d, r), s) in w.dx.iter_mut().zip(w.res.iter()).zip(w.row.iter()) {
            *d = -r * s;
        }
        if let Err(e) = lin.solve(&mut w.dx) {
            w.invalidate();
            if fresh {
                return Err(NewtonFailure::Linear(e));
            }
            continue;
        }
        stats.iterations += 1;
        small_update = true;
        let shrink = 1.0 / opts.max_dh_factor;
        for (((x, d), c), s) in u
            .chunks_exact_mut(3)
            .zip(w.dx.chunks_exact(3))
            .zip(w.col.chunks_exact(3))
            .zip(w.step.chunks_exact_mut(3))
        {
            let dt = (d[T] * c[T]).clamp(-opts.max_dt_per_iter, opts.max_dt_per_iter);
            // Heads move at most by the factor `max_dh_factor` per iteration in |h| (dry
            // soil spans decades), plus `max_dh_abs` near saturation.
            let h = x[H];
            let lo = h.min(0.0) * opts.max_dh_factor - opts.max_dh_abs;
            let hi = if h < 0.0 { h * shrink } else { h } + opts.max_dh_abs;
            let dh = (d[H] * c[H]).clamp(lo - h, hi - h);
            // Vapour density stays positive.
            let rv = x[RV];
            let mut drv = d[RV] * c[RV];
            if rv + drv < 0.1 * rv {
                drv = -0.9 * rv;
            }
            if dt.abs() > opts.update_t
                || dh.abs() > opts.update_h_abs + opts.update_h_rel * h.abs()
                || drv.abs() > opts.update_rv_abs + opts.update_rv_rel * rv.abs()
            {
                small_update = false;
            }
            s[T] = dt;
            s[H] = dh;
            s[RV] = drv;
            x[T] += dt;
            x[H] += dh;
            x[RV] += drv;
        }
    }
}

/// Whether the residuals of the water and energy rows sum, over the column, to at most
/// `tol` times what the step moves — the boundary throughput (|top flux| + |bottom flux|)
/// plus the storage changes of the cells, Σ w |c M − hist| — plus the round-off of the
/// sum. The sum is the step's balance error: the storage change minus the net boundary
/// inflow (the face fluxes between cells cancel in it).
/// `floor` and `moved` per quantity [energy, water] as from
/// [`System::convergence_scales_into`].
fn balance_closed(sys: &System, res: &[f64], floor: [f64; 2], moved: [f64; 2], tol: f64) -> bool {
    let (top, bot) = sys.boundary_fluxes();
    let mut sum = [0.0; 2];
    for r in res.chunks_exact(3) {
        sum[0] += r[ENERGY];
        sum[1] += r[WATER];
    }
    (0..2).all(|k| sum[k].abs() <= tol * (moved[k] + top[k].abs() + bot[k].abs()) + floor[k])
}

/// `b = diag(row) (a + dc·S) diag(col)` in one pass, with `S` the diagonal storage blocks
/// (same size; no allocation).
fn scaled_copy(a: &BlockTri, s: &[Block], dc: f64, row: &[f64], col: &[f64], b: &mut BlockTri) {
    let n = a.n;
    // One block: out = diag(rs) blk diag(cs).
    let scaled = |blk: &Block, rs: &[f64], cs: &[f64], out: &mut Block| {
        for r in 0..3 {
            for q in 0..3 {
                out[r * 3 + q] = blk[r * 3 + q] * (rs[r] * cs[q]);
            }
        }
    };
    for i in 0..n {
        let rs = &row[3 * i..3 * i + 3];
        let cs = &col[3 * i..3 * i + 3];
        if dc != 0.0 {
            let mut d = a.diag[i];
            for (x, y) in d.iter_mut().zip(s[i].iter()) {
                *x += dc * y;
            }
            scaled(&d, rs, cs, &mut b.diag[i]);
        } else {
            scaled(&a.diag[i], rs, cs, &mut b.diag[i]);
        }
        if i > 0 {
            scaled(&a.lower[i], rs, &col[3 * (i - 1)..3 * i], &mut b.lower[i]);
        }
        if i + 1 < n {
            scaled(
                &a.upper[i],
                rs,
                &col[3 * (i + 1)..3 * i + 6],
                &mut b.upper[i],
            );
        }
    }
}
