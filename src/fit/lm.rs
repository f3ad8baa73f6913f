//! Weighted nonlinear least squares by Levenberg–Marquardt (Levenberg 1944; Marquardt
//! 1963), with box bounds and a finite-difference Jacobian whose evaluations come in
//! batches (so that the caller can run them in parallel).
//!
//! The caller gives residuals already weighted, `r_i(p) = (model_i(p) − obs_i)/σ_i`; the
//! objective is `S(p) = Σ r_i²` (χ²). Parameters are worked on in a transformed space
//! `x` (identity, or `x = ln p` for parameters marked `log`), where the bounds are boxes
//! and steps are projected onto them. A step solves
//!
//! `(JᵀJ + λ D) δ = −Jᵀ r`,  `D = diag(JᵀJ)` (Marquardt's scaling),
//!
//! limited so that no component moves by more than max(|x|, 1), and is accepted when S
//! decreases; λ shrinks by 3 after an accepted step and grows by 2
//! (then 4, 8, …) after a rejected one (common practice). The covariance of the estimate
//! is `(JᵀJ)⁻¹` in `x` (σ are taken as known), mapped to the parameters by the chain rule
//! (`∂p/∂x = p` for log parameters); the reduced χ² `S/(m − n)` is reported beside it.
//!
//! [`minimize_from`] reports each trial and each accepted point ([`LmState`]: everything
//! the iteration carries from one iteration to the next) and starts from such a state,
//! so an interrupted fit continues exactly as it would have gone on.

/// One parameter: start, bounds, and whether it is fitted in its logarithm.
#[derive(Debug, Clone, PartialEq)]
pub struct ParamSpec {
    pub initial: f64,
    pub min: f64,
    pub max: f64,
    pub log: bool,
}

impl ParamSpec {
    fn to_x(&self, p: f64) -> f64 {
        if self.log {
            p.ln()
        } else {
            p
        }
    }
    fn to_p(&self, x: f64) -> f64 {
        if self.log {
            x.exp()
        } else {
            x
        }
    }
    /// dp/dx at x.
    fn dp_dx(&self, x: f64) -> f64 {
        if self.log {
            x.exp()
        } else {
            1.0
        }
    }
    fn x_bounds(&self) -> (f64, f64) {
        (self.to_x(self.min), self.to_x(self.max))
    }
}

/// Settings of the iteration.
#[derive(Debug, Clone)]
pub struct LmOptions {
    pub max_iterations: usize,
    /// Stop when an accepted step lowers S by less than this fraction.
    pub f_tol: f64,
    /// Stop when every step component is below this (in x, relative to max(|x|, 1)).
    pub x_tol: f64,
    /// Initial damping.
    pub lambda0: f64,
    /// Relative finite-difference step in x (absolute where |x| < 1).
    pub fd_step: f64,
}

impl Default for LmOptions {
    fn default() -> Self {
        LmOptions {
            max_iterations: 50,
            f_tol: 1e-10,
            x_tol: 1e-10,
            lambda0: 1e-3,
            fd_step: 1e-6,
        }
    }
}

/// The result of a fit.
#[derive(Debug, Clone)]
pub struct LmResult {
    pub estimate: Vec<f64>,
    /// Standard errors of the parameters (NaN where JᵀJ is singular).
    pub standard_error: Vec<f64>,
    /// Correlation matrix of the parameters (row-major, n×n; NaN where undefined).
    pub correlation: Vec<f64>,
    /// S = Σ r² at the estimate, and S/(m − n) (NaN when m ≤ n).
    pub objective: f64,
    pub reduced_chi_square: f64,
    pub iterations: usize,
    /// Evaluations of the residual vector (model runs).
    pub evaluations: usize,
    /// Reciprocal condition number of the scaled JᵀJ (1: orthogonal columns, 0: singular).
    pub rcond: f64,
    /// Parameters that are not identifiable from these data: near-singular JᵀJ or a
    /// correlation above 0.95 in magnitude with another parameter (pairs, by index).
    pub unidentifiable: Vec<(usize, usize)>,
    pub near_singular: bool,
    /// Why the iteration stopped.
    pub stop: &'static str,
}

/// The iteration after an accepted step (or at its start): everything the iteration
/// reads from its past, so that [`minimize_from`] continues from it exactly as the
/// uninterrupted iteration would have.
#[derive(Debug, Clone, PartialEq)]
pub struct LmState {
    /// The parameters in the transformed space (ln p for log parameters).
    pub x: Vec<f64>,
    /// The weighted residuals at `x`.
    pub residuals: Vec<f64>,
    /// S = Σ r² at `x`.
    pub objective: f64,
    /// The damping for the next iteration.
    pub lambda: f64,
    /// Iterations done.
    pub iterations: usize,
    /// Evaluations of the residual vector so far.
    pub evaluations: usize,
    /// Set when the iteration has stopped (the reason).
    pub stop: Option<&'static str>,
}

/// The reasons the iteration stops (the `stop` of [`LmResult`] and [`LmState`]).
pub const STOP_REASONS: &[&str] = &[
    "iteration limit",
    "objective converged",
    "step converged",
    "damping limit",
];

/// What the iteration reports as it goes.
#[derive(Debug)]
pub enum LmEvent<'a> {
    /// A trial step was evaluated (accepted or not).
    Trial {
        iteration: usize,
        lambda: f64,
        objective: f64,
        trial_objective: f64,
        evaluations: usize,
    },
    /// A step was accepted (or the iteration stopped at an accepted point).
    Accepted(&'a LmState),
}

/// Evaluates residual vectors for a batch of parameter vectors; an Err marks a failed
/// evaluation (treated as an infinite objective).
pub trait Residuals {
    fn eval_batch(&mut self, params: &[Vec<f64>]) -> Vec<Result<Vec<f64>, String>>;
}

impl<F: FnMut(&[f64]) -> Result<Vec<f64>, String>> Residuals for F {
    fn eval_batch(&mut self, params: &[Vec<f64>]) -> Vec<Result<Vec<f64>, String>> {
        params.iter().map(|p| self(p)).collect()
    }
}

fn sum_sq(r: &[f64]) -> f64 {
    r.iter().map(|v| v * v).sum()
}

/// Cholesky factorisation of a symmetric n×n matrix (row-major) in place; false when not
/// positive definite.
fn cholesky(a: &mut [f64], n: usize) -> bool {
    for j in 0..n {
        let mut d = a[j * n + j];
        for k in 0..j {
            d -= a[j * n + k] * a[j * n + k];
        }
        if d.is_nan() || d <= 0.0 || !d.is_finite() {
            return false;
        }
        let d = d.sqrt();
        a[j * n + j] = d;
        for i in j + 1..n {
            let mut s = a[i * n + j];
            for k in 0..j {
                s -= a[i * n + k] * a[j * n + k];
            }
            a[i * n + j] = s / d;
        }
    }
    true
}

/// Solves L Lᵀ x = b with the factor from [`cholesky`].
fn cholesky_solve(l: &[f64], n: usize, b: &mut [f64]) {
    for i in 0..n {
        let mut s = b[i];
        for k in 0..i {
            s -= l[i * n + k] * b[k];
        }
        b[i] = s / l[i * n + i];
    }
    for i in (0..n).rev() {
        let mut s = b[i];
        for k in i + 1..n {
            s -= l[k * n + i] * b[k];
        }
        b[i] = s / l[i * n + i];
    }
}

/// JᵀJ (n×n) and Jᵀr from the Jacobian (m×n, column-major: column j at j·m).
fn normal_equations(jac: &[f64], r: &[f64], m: usize, n: usize) -> (Vec<f64>, Vec<f64>) {
    let mut jtj = vec![0.0; n * n];
    let mut jtr = vec![0.0; n];
    for a in 0..n {
        let ca = &jac[a * m..(a + 1) * m];
        jtr[a] = ca.iter().zip(r).map(|(x, y)| x * y).sum();
        for b in 0..=a {
            let cb = &jac[b * m..(b + 1) * m];
            let v: f64 = ca.iter().zip(cb).map(|(x, y)| x * y).sum();
            jtj[a * n + b] = v;
            jtj[b * n + a] = v;
        }
    }
    (jtj, jtr)
}

/// Inverse of a symmetric positive definite matrix, or None.
fn spd_inverse(a: &[f64], n: usize) -> Option<Vec<f64>> {
    let mut l = a.to_vec();
    if !cholesky(&mut l, n) {
        return None;
    }
    let mut inv = vec![0.0; n * n];
    for j in 0..n {
        let mut e = vec![0.0; n];
        e[j] = 1.0;
        cholesky_solve(&l, n, &mut e);
        for i in 0..n {
            inv[i * n + j] = e[i];
        }
    }
    Some(inv)
}

/// Largest and smallest eigenvalue ratio of the diagonally scaled matrix, by Jacobi
/// rotations (n is small): the reciprocal condition number.
fn rcond_scaled(a: &[f64], n: usize) -> f64 {
    let mut s = vec![0.0; n * n];
    for i in 0..n {
        for j in 0..n {
            let d = (a[i * n + i] * a[j * n + j]).sqrt();
            s[i * n + j] = if d > 0.0 { a[i * n + j] / d } else { 0.0 };
        }
    }
    // Cyclic Jacobi eigenvalue iteration on the symmetric matrix.
    for _ in 0..100 {
        let mut off = 0.0;
        for p in 0..n {
            for q in p + 1..n {
                off += s[p * n + q] * s[p * n + q];
            }
        }
        if off < 1e-30 {
            break;
        }
        for p in 0..n {
            for q in p + 1..n {
                let apq = s[p * n + q];
                if apq.abs() < 1e-300 {
                    continue;
                }
                let theta = (s[q * n + q] - s[p * n + p]) / (2.0 * apq);
                let t = theta.signum() / (theta.abs() + (theta * theta + 1.0).sqrt());
                let t = if theta == 0.0 { 1.0 } else { t };
                let c = 1.0 / (t * t + 1.0).sqrt();
                let sn = t * c;
                for k in 0..n {
                    let akp = s[k * n + p];
                    let akq = s[k * n + q];
                    s[k * n + p] = c * akp - sn * akq;
                    s[k * n + q] = sn * akp + c * akq;
                }
                for k in 0..n {
                    let apk = s[p * n + k];
                    let aqk = s[q * n + k];
                    s[p * n + k] = c * apk - sn * aqk;
                    s[q * n + k] = sn * apk + c * aqk;
                }
            }
        }
    }
    let eig: Vec<f64> = (0..n).map(|i| s[i * n + i]).collect();
    let max = eig.iter().cloned().fold(0.0f64, f64::max);
    let min = eig.iter().cloned().fold(f64::INFINITY, f64::min);
    if max > 0.0 {
        (min / max).max(0.0)
    } else {
        0.0
    }
}

/// The Jacobian of the residuals at `x` (column-major, m×n) by forward differences of
/// `step`·max(|x_j|, 1) in one batch of n evaluations; a step that would leave the box
/// goes backward.
#[allow(clippy::too_many_arguments)]
fn fd_jacobian(
    residuals: &mut dyn Residuals,
    to_p: &dyn Fn(&[f64]) -> Vec<f64>,
    x: &[f64],
    bounds: &[(f64, f64)],
    r: &[f64],
    step: f64,
    jac: &mut [f64],
) -> Result<(), String> {
    let (n, m) = (x.len(), r.len());
    let mut points = Vec::with_capacity(n);
    let mut steps = Vec::with_capacity(n);
    for j in 0..n {
        let mut h = step * x[j].abs().max(1.0);
        if x[j] + h > bounds[j].1 {
            h = -h;
        }
        let mut xp = x.to_vec();
        xp[j] += h;
        points.push(to_p(&xp));
        steps.push(h);
    }
    for (j, col) in residuals.eval_batch(&points).into_iter().enumerate() {
        let rj = col.map_err(|e| format!("the model failed in a derivative run: {e}"))?;
        if rj.len() != m {
            return Err("residual vectors of different lengths".into());
        }
        for i in 0..m {
            jac[j * m + i] = (rj[i] - r[i]) / steps[j];
        }
    }
    Ok(())
}

/// Minimises Σ r(p)² from `specs[k].initial` within the bounds.
pub fn minimize(
    specs: &[ParamSpec],
    residuals: &mut dyn Residuals,
    opts: &LmOptions,
) -> Result<LmResult, String> {
    minimize_from(specs, residuals, opts, None, &mut |_| Ok(()))
}

/// [`minimize`] from a saved state (`start`, as reported by an earlier iteration's
/// [`LmEvent::Accepted`]) or from the initial values, reporting its progress to `on`
/// (an Err from `on` ends the iteration with that error).
pub fn minimize_from(
    specs: &[ParamSpec],
    residuals: &mut dyn Residuals,
    opts: &LmOptions,
    start: Option<LmState>,
    on: &mut dyn FnMut(&LmEvent) -> Result<(), String>,
) -> Result<LmResult, String> {
    let n = specs.len();
    if n == 0 {
        return Err("no parameters to fit".into());
    }
    for (k, s) in specs.iter().enumerate() {
        if s.min.is_nan()
            || s.max.is_nan()
            || s.min >= s.max
            || !(s.min..=s.max).contains(&s.initial)
        {
            return Err(format!(
                "parameter {}: initial {} must lie in [min, max] = [{}, {}] with min < max",
                k + 1,
                s.initial,
                s.min,
                s.max
            ));
        }
        if s.log && s.min <= 0.0 {
            return Err(format!(
                "parameter {}: a log parameter needs min > 0 (min = {})",
                k + 1,
                s.min
            ));
        }
    }
    let to_p = |x: &[f64]| -> Vec<f64> { x.iter().zip(specs).map(|(v, s)| s.to_p(*v)).collect() };
    let bounds: Vec<(f64, f64)> = specs.iter().map(|s| s.x_bounds()).collect();
    let state = match start {
        Some(st) => {
            if st.x.len() != n
                || st
                    .x
                    .iter()
                    .zip(&bounds)
                    .any(|(v, b)| !(b.0..=b.1).contains(v))
                || st.residuals.is_empty()
                || !st.objective.is_finite()
                || !(st.lambda > 0.0 && st.lambda.is_finite())
            {
                return Err(
                    "the saved state does not fit these parameters (count or bounds)".into(),
                );
            }
            st
        }
        None => {
            let x: Vec<f64> = specs.iter().map(|s| s.to_x(s.initial)).collect();
            let r = residuals
                .eval_batch(&[to_p(&x)])
                .pop()
                .ok_or("no evaluation")?
                .map_err(|e| format!("the model failed at the initial parameters: {e}"))?;
            LmState {
                x,
                objective: sum_sq(&r),
                residuals: r,
                lambda: opts.lambda0,
                iterations: 0,
                evaluations: 1,
                stop: None,
            }
        }
    };
    let LmState {
        mut x,
        residuals: mut r,
        objective: mut s_cur,
        mut lambda,
        mut iterations,
        mut evaluations,
        stop: stopped,
    } = state;
    let m = r.len();
    let mut stop = stopped.unwrap_or("iteration limit");
    let mut jac = vec![0.0; m * n];
    let mut final_reported = false;
    'outer: while stopped.is_none() && iterations < opts.max_iterations {
        iterations += 1;
        fd_jacobian(residuals, &to_p, &x, &bounds, &r, opts.fd_step, &mut jac)?;
        evaluations += n;
        let (jtj, jtr) = normal_equations(&jac, &r, m, n);
        // Damped steps until one lowers S.
        loop {
            let mut a = jtj.clone();
            for j in 0..n {
                a[j * n + j] += lambda * jtj[j * n + j].max(1e-12 * (1.0 + jtj[j * n + j]));
            }
            let mut delta: Vec<f64> = jtr.iter().map(|v| -v).collect();
            if !cholesky(&mut a, n) {
                lambda *= 10.0;
                if lambda > 1e16 {
                    stop = "damping limit";
                    break 'outer;
                }
                continue;
            }
            cholesky_solve(&a, n, &mut delta);
            // No component moves by more than max(|x|, 1) in one step (a decade and a
            // bit for a log parameter near 1): a first step from far off otherwise lands
            // on a bound in a flat region and stays there.
            let ratio = (0..n)
                .map(|j| delta[j].abs() / x[j].abs().max(1.0))
                .fold(0.0f64, f64::max);
            if ratio > 1.0 {
                for d in delta.iter_mut() {
                    *d /= ratio;
                }
            }
            let x_new: Vec<f64> = (0..n)
                .map(|j| (x[j] + delta[j]).clamp(bounds[j].0, bounds[j].1))
                .collect();
            let small = (0..n).all(|j| (x_new[j] - x[j]).abs() <= opts.x_tol * x[j].abs().max(1.0));
            let trial = residuals
                .eval_batch(&[to_p(&x_new)])
                .pop()
                .ok_or("no evaluation")?;
            evaluations += 1;
            let s_new = match &trial {
                Ok(rn) if rn.len() == m => sum_sq(rn),
                _ => f64::INFINITY,
            };
            log::debug!(
                "fit iteration {iterations}: lambda {lambda:.2e}, objective {s_cur:.6e} -> {s_new:.6e}"
            );
            on(&LmEvent::Trial {
                iteration: iterations,
                lambda,
                objective: s_cur,
                trial_objective: s_new,
                evaluations,
            })?;
            if s_new < s_cur {
                let gain = (s_cur - s_new) / s_cur.max(f64::MIN_POSITIVE);
                x = x_new;
                r = trial.unwrap_or_default();
                s_cur = s_new;
                lambda = (lambda / 3.0).max(1e-12);
                let done = if gain < opts.f_tol {
                    Some("objective converged")
                } else if small {
                    Some("step converged")
                } else {
                    None
                };
                on(&LmEvent::Accepted(&LmState {
                    x: x.clone(),
                    residuals: r.clone(),
                    objective: s_cur,
                    lambda,
                    iterations,
                    evaluations,
                    stop: done,
                }))?;
                if let Some(d) = done {
                    stop = d;
                    final_reported = true;
                    break 'outer;
                }
                break;
            }
            if small {
                stop = "step converged";
                break 'outer;
            }
            lambda *= 2.0;
            if lambda > 1e16 {
                stop = "damping limit";
                break 'outer;
            }
        }
    }
    if stopped.is_none() && !final_reported && stop != "iteration limit" {
        // Stopped without an accepted step: the last accepted point, marked as final.
        on(&LmEvent::Accepted(&LmState {
            x: x.clone(),
            residuals: r.clone(),
            objective: s_cur,
            lambda,
            iterations,
            evaluations,
            stop: Some(stop),
        }))?;
    }
    // Covariance from a Jacobian at the estimate itself (the last one was taken before
    // the final accepted step).
    fd_jacobian(residuals, &to_p, &x, &bounds, &r, opts.fd_step, &mut jac)?;
    evaluations += n;
    let (jtj, _) = normal_equations(&jac, &r, m, n);
    let rcond = rcond_scaled(&jtj, n);
    let near_singular = rcond < 1e-10;
    let cov_x = spd_inverse(&jtj, n);
    let mut standard_error = vec![f64::NAN; n];
    let mut correlation = vec![f64::NAN; n * n];
    let mut unidentifiable = Vec::new();
    if let Some(c) = &cov_x {
        for j in 0..n {
            let d = specs[j].dp_dx(x[j]);
            standard_error[j] = c[j * n + j].max(0.0).sqrt() * d;
        }
        for a in 0..n {
            for b in 0..n {
                let den = (c[a * n + a] * c[b * n + b]).sqrt();
                correlation[a * n + b] = if den > 0.0 {
                    c[a * n + b] / den
                } else {
                    f64::NAN
                };
            }
        }
        for a in 0..n {
            for b in a + 1..n {
                if correlation[a * n + b].abs() > 0.95 {
                    unidentifiable.push((a, b));
                }
            }
        }
    }
    if (near_singular || cov_x.is_none()) && unidentifiable.is_empty() && n > 1 {
        // Every pair is suspect when the matrix is singular; name the most correlated
        // columns of J.
        let mut best = (0, 1, -1.0);
        for a in 0..n {
            for b in a + 1..n {
                let den = (jtj[a * n + a] * jtj[b * n + b]).sqrt();
                let c = if den > 0.0 {
                    (jtj[a * n + b] / den).abs()
                } else {
                    1.0
                };
                if c > best.2 {
                    best = (a, b, c);
                }
            }
        }
        unidentifiable.push((best.0, best.1));
    }
    Ok(LmResult {
        estimate: to_p(&x),
        standard_error,
        correlation,
        objective: s_cur,
        reduced_chi_square: if m > n {
            s_cur / (m - n) as f64
        } else {
            f64::NAN
        },
        iterations,
        evaluations,
        rcond,
        unidentifiable,
        near_singular: near_singular || cov_x.is_none(),
        stop,
    })
}
