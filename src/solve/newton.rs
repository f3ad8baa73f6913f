//! Newton's method on all unknowns at once, knowing nothing about time: it solves
//! `R(u; t, c, hist) = 0` for the system and integrator coefficients it is given.
//!
//! Convergence is judged per equation on scaled residuals (|R| against the magnitude of
//! the terms that make up the row, see [`System::residual_scale_into`]) and on the update
//! size per variable. The linear system is row- and column-scaled before factorisation.

use super::blocktri::BlockTri;
use super::linear::{LinearError, LinearSolver};
use crate::physics::{NonFinite, System, H, RV, T};

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
    /// Largest change per iteration: temperature [K]; head by a factor in |h| plus [m].
    pub max_dt_per_iter: f64,
    pub max_dh_factor: f64,
    pub max_dh_abs: f64,
}

impl Default for NewtonOptions {
    fn default() -> Self {
        NewtonOptions {
            max_iter: 12,
            residual_tol: 1e-11,
            update_t: 1e-9,
            update_h_rel: 1e-10,
            update_h_abs: 1e-9,
            update_rv_rel: 1e-10,
            update_rv_abs: 1e-16,
            residual_tol_loose: 1e-7,
            max_dt_per_iter: 5.0,
            max_dh_factor: 10.0,
            max_dh_abs: 2.0,
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
    pub jac: BlockTri,
    /// The last (clipped) update.
    pub step: Vec<f64>,
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
        }
    }
}

/// What one solve cost.
#[derive(Debug, Clone, Copy, Default)]
pub struct NewtonStats {
    pub iterations: usize,
    pub factorizations: usize,
}

/// Worst scaled residual: (value, cell, row).
fn worst(res: &[f64], scale: &[f64]) -> (f64, usize, usize) {
    let mut best = (0.0, 0, 0);
    for (k, (r, s)) in res.iter().zip(scale.iter()).enumerate() {
        let v = r.abs() / s;
        if v > best.0 || v.is_nan() {
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
    let mut last = f64::INFINITY;
    let mut growth = 0;
    let mut small_update = false;
    for it in 0..=opts.max_iter {
        sys.assemble(t, u, c, hist, &mut w.res, Some(&mut w.jac))
            .map_err(NewtonFailure::NonFinite)?;
        sys.residual_scale_into(c, hist, &mut w.scale);
        let (r, cell, row) = worst(&w.res, &w.scale);
        log::trace!(
            "newton t {t:.6e} it {it} worst scaled residual {r:.3e} at cell {cell} row {row}"
        );
        if r.is_nan() {
            return Err(NewtonFailure::NonFinite(NonFinite { cell, row }));
        }
        if r <= opts.residual_tol || (small_update && r <= opts.residual_tol_loose) {
            stats.iterations = it;
            return Ok(stats);
        }
        if it == opts.max_iter {
            return Err(NewtonFailure::NotConverged {
                cell,
                row,
                residual: r,
            });
        }
        if r > last {
            growth += 1;
            if growth >= 3 {
                return Err(NewtonFailure::Diverged {
                    cell,
                    row,
                    residual: r,
                });
            }
        } else {
            growth = 0;
        }
        last = r;
        // Row scaling by the row magnitudes, column scaling by typical variable sizes.
        let n = sys.n;
        for i in 0..n {
            for k in 0..3 {
                w.row[3 * i + k] = 1.0 / w.scale[3 * i + k];
            }
            w.col[3 * i + T] = 1.0;
            w.col[3 * i + H] = 1.0 + u[3 * i + H].abs();
            w.col[3 * i + RV] = 1e-3 + u[3 * i + RV].abs();
        }
        w.jac.scale(&w.row, &w.col);
        lin.factor(&w.jac).map_err(NewtonFailure::Linear)?;
        stats.factorizations += 1;
        for k in 0..3 * n {
            w.dx[k] = -w.res[k] * w.row[k];
        }
        lin.solve(&mut w.dx).map_err(NewtonFailure::Linear)?;
        small_update = true;
        for i in 0..n {
            let kt = 3 * i + T;
            let kh = 3 * i + H;
            let kv = 3 * i + RV;
            let mut dt = w.dx[kt] * w.col[kt];
            let mut dh = w.dx[kh] * w.col[kh];
            let mut drv = w.dx[kv] * w.col[kv];
            dt = dt.clamp(-opts.max_dt_per_iter, opts.max_dt_per_iter);
            // Heads move at most by the factor `max_dh_factor` per iteration in |h| (dry
            // soil spans decades), plus `max_dh_abs` near saturation.
            let h = u[kh];
            let lo = h.min(0.0) * opts.max_dh_factor - opts.max_dh_abs;
            let hi = if h < 0.0 { h / opts.max_dh_factor } else { h } + opts.max_dh_abs;
            dh = dh.clamp(lo - h, hi - h);
            // Vapour density stays positive.
            if u[kv] + drv < 0.1 * u[kv] {
                drv = -0.9 * u[kv];
            }
            if dt.abs() > opts.update_t
                || dh.abs() > opts.update_h_abs + opts.update_h_rel * u[kh].abs()
                || drv.abs() > opts.update_rv_abs + opts.update_rv_rel * u[kv].abs()
            {
                small_update = false;
            }
            w.step[kt] = dt;
            w.step[kh] = dh;
            w.step[kv] = drv;
        }
        for k in 0..u.len() {
            u[k] += w.step[k];
        }
    }
    Err(NewtonFailure::NotConverged {
        cell: 0,
        row: 0,
        residual: f64::INFINITY,
    })
}
