//! Newton's method and the variable-order BDF stepper on problems with known answers and
//! no soil physics, through the same `Problem` trait the soil column implements:
//!
//! - a nonlinear algebraic chain with a root known by construction (Newton alone);
//! - y' = −λ y with exact starting values: BDF-k at a fixed step converges at order k
//!   (the classical result for the k-step backward differentiation formulas, k ≤ 6;
//!   common practice);
//! - Robertson's stiff chemical kinetics, against reference values at t = 10¹¹.

#![allow(clippy::needless_range_loop)] // matrix code reads best with indices

use deepdry::solve::blocktri::{zero_block, Block, BlockRows};
use deepdry::solve::linear::{make_solver, SolverKind};
use deepdry::solve::newton::{self, NewtonOptions, NewtonWork};
use deepdry::solve::problem::{BalanceScales, Conserved, ErrorTest, NonFinite, Problem};
use deepdry::solve::stepper::{HistoryPoint, Integrator, StepOptions, Stepper};

mod support;
use support::ode::{scales_from_terms, Ode, OdeProblem};

/// y' = −λ y.
struct Decay {
    lambda: f64,
}

impl Ode<1> for Decay {
    fn rhs(&self, _t: f64, y: &[f64; 1]) -> [f64; 1] {
        [-self.lambda * y[0]]
    }
    fn magnitudes(&self, _t: f64, y: &[f64; 1]) -> [f64; 1] {
        [(self.lambda * y[0]).abs()]
    }
    fn jacobian(&self, _t: f64, _y: &[f64; 1]) -> Block<1> {
        [[-self.lambda]]
    }
    fn atol(&self) -> [f64; 1] {
        [1e-300]
    }
}

/// Global error at t = 1 of BDF-k at the fixed step h = 2^-m (exactly representable, so
/// the steps land on t = 1 without a shortened last step), started from the exact
/// solution at the k earlier points.
fn decay_error(k: usize, m: i32) -> f64 {
    let lambda = 2.0;
    let h = 2f64.powi(-m);
    let exact = |t: f64| (-lambda * t).exp();
    let mut p = OdeProblem::new(Decay { lambda });
    let mut state = Stepper::<1>::initial_state(&mut p, 0.0, h, vec![1.0]);
    state.history = (1..=k)
        .map(|j| {
            let t = -(j as f64) * h;
            HistoryPoint {
                t,
                u: vec![exact(t)],
                storage: vec![exact(t)],
                inflow: vec![],
                throughput: vec![],
                top_inflow: vec![],
                sink: vec![],
                runoff: vec![],
            }
        })
        .collect();
    state.order = k;
    let opts = StepOptions {
        dt_min: 1e-6 * h,
        dt_max: h,
        max_growth: 2.0,
        // A relative tolerance so loose that the error test never intervenes: the step
        // stays at dt_max and the order at k (no higher order allowed, a lower one
        // promises no larger step).
        integrator: Integrator::Bdf {
            max_order: k,
            rtol: 1e6,
        },
        // Newton's error must stay far below the truncation error (1e-9 of the terms
        // would show at BDF-5's level).
        newton: NewtonOptions {
            residual_tol: 1e-14,
            ..Default::default()
        },
    };
    let mut st = Stepper::new(&mut p, state, opts, make_solver(SolverKind::BlockThomas, 1));
    while st.state.t < 1.0 {
        let info = st.step(&mut p, 1.0).expect("step");
        assert_eq!(info.order, k, "order changed");
        assert_eq!(info.dt, h, "step changed");
    }
    assert_eq!(st.state.t, 1.0);
    (st.state.u[0] - exact(1.0)).abs()
}

#[test]
fn bdf_k_converges_at_order_k_on_exponential_decay() {
    for k in 1..=5 {
        let (e1, e2) = (decay_error(k, 5), decay_error(k, 6));
        let observed = (e1 / e2).log2();
        assert!(
            (observed - k as f64).abs() < 0.2,
            "BDF-{k}: errors {e1:.3e} at h = 1/32, {e2:.3e} at h = 1/64: observed order {observed:.3}"
        );
    }
}

/// Robertson's chemical kinetics (Robertson 1966; the stiff test problem of Hairer &
/// Wanner, Solving ODEs II, §IV.1, from memory):
/// y1' = −0.04 y1 + 1e4 y2 y3, y2' = 0.04 y1 − 1e4 y2 y3 − 3e7 y2², y3' = 3e7 y2².
struct Robertson;

impl Ode<3> for Robertson {
    fn rhs(&self, _t: f64, y: &[f64; 3]) -> [f64; 3] {
        let a = 0.04 * y[0];
        let b = 1e4 * y[1] * y[2];
        let c = 3e7 * y[1] * y[1];
        [-a + b, a - b - c, c]
    }
    fn magnitudes(&self, _t: f64, y: &[f64; 3]) -> [f64; 3] {
        let a = (0.04 * y[0]).abs();
        let b = (1e4 * y[1] * y[2]).abs();
        let c = 3e7 * y[1] * y[1];
        [a + b, a + b + c, c]
    }
    fn jacobian(&self, _t: f64, y: &[f64; 3]) -> Block<3> {
        [
            [-0.04, 1e4 * y[2], 1e4 * y[1]],
            [0.04, -1e4 * y[2] - 6e7 * y[1], -1e4 * y[1]],
            [0.0, 6e7 * y[1], 0.0],
        ]
    }
    fn atol(&self) -> [f64; 3] {
        // y2 stays below ~4e-5 and ends near 8e-14: its absolute tolerance is far
        // smaller (common practice for this problem).
        [1e-14, 1e-20, 1e-14]
    }
}

#[test]
fn robertson_kinetics_matches_its_reference_solution() {
    let rtol = 1e-8;
    let mut p = OdeProblem::new(Robertson);
    let state = Stepper::<3>::initial_state(&mut p, 0.0, 1e-6, vec![1.0, 0.0, 0.0]);
    let opts = StepOptions {
        dt_min: 1e-12,
        dt_max: 1e12,
        max_growth: 2.0,
        integrator: Integrator::Bdf { max_order: 5, rtol },
        // At least one Newton update per step (see `NewtonOptions::min_iterations`):
        // with 0 this problem took 28 879 steps with 13 232 rejections (the predictor
        // passing the residual test gave zero error estimates), with 1 it takes 1 418
        // steps and 4 rejections.
        newton: NewtonOptions {
            min_iterations: 1,
            ..Default::default()
        },
    };
    let mut st = Stepper::new(&mut p, state, opts, make_solver(SolverKind::BlockThomas, 1));
    let t_end = 1e11;
    while st.state.t < t_end {
        st.step(&mut p, t_end).expect("step");
        // y1 + y2 + y3 = 1 at all times: the right-hand sides sum to zero (derived), and
        // BDF preserves linear invariants up to the Newton tolerance (1e-9 of the rows'
        // terms per step).
        let s: f64 = st.state.u.iter().sum();
        assert!((s - 1.0).abs() < 1e-9, "sum {s} at t = {:e}", st.state.t);
        assert!(st.state.counters.steps < 20_000, "too many steps");
    }
    // Regression guard on the work (measured: 1 418 steps, 4 rejected).
    let c = st.state.counters;
    assert!(c.steps < 2_000 && c.rejected < 20, "{c:?}");
    // Reference at t = 1e11 from the Test Set for IVP Solvers (Mazzia, Magherini et al.,
    // University of Bari; problem ROBER), from memory. Measured agreement at rtol 1e-8:
    // 1.1e-6 relative in y1 and y2.
    let reference = [
        2.083340149701255e-08,
        8.333360770334713e-14,
        0.999_999_979_166_505,
    ];
    for (r, (got, want)) in st.state.u.iter().zip(reference).enumerate() {
        let rel = (got - want).abs() / want;
        assert!(
            rel < 1e-5,
            "y{}: {got:.15e} vs reference {want:.15e} (relative {rel:.2e})",
            r + 1
        );
    }
}

// ---------------------------------------------------------------------------------------
// Newton alone on a chain of n blocks of 2 unknowns with a root known by construction:
// R_i = [x_i³ + 0.1 (x_i − x_{i−1}) − a_i, y_i − x_i²], the second unknown of each block
// decoupled (appears only in its own algebraic row, as the vapour row of equilibrium
// mode). a_i is chosen so that x*_i = 1 + 0.5 sin i, y*_i = x*_i² is the root.

struct Chain {
    a: Vec<f64>,
    ones: Vec<f64>,
    terms: Vec<f64>,
    /// Whether it declares its last unknown decoupled (it is: y = x² in its own row).
    decoupled: bool,
}

fn chain_root(i: usize) -> f64 {
    1.0 + 0.5 * (i as f64).sin()
}

impl Chain {
    fn new(n: usize) -> Self {
        let a = (0..n)
            .map(|i| {
                let x = chain_root(i);
                let prev = if i > 0 { chain_root(i - 1) } else { 0.0 };
                x * x * x + 0.1 * (x - prev)
            })
            .collect();
        Chain {
            a,
            ones: vec![1.0; n],
            terms: vec![0.0; 2 * n],
            decoupled: false,
        }
    }
}

impl Problem<2> for Chain {
    fn blocks(&self) -> usize {
        self.a.len()
    }
    fn volumes(&self) -> &[f64] {
        &self.ones
    }
    fn conserved_rows(&self) -> &[usize] {
        &[]
    }
    fn evaluate(&mut self, _t: f64, _u: &[f64]) {}
    fn storage(&self, _i: usize) -> [f64; 2] {
        [0.0; 2]
    }
    fn boundary_flows(&self) -> (Conserved, Conserved) {
        (Conserved::default(), Conserved::default())
    }
    fn assemble(
        &mut self,
        _t: f64,
        u: &[f64],
        _c: f64,
        _hist: &[f64],
        res: &mut [f64],
        jac: Option<&mut dyn BlockRows<2>>,
    ) -> Result<(), NonFinite> {
        let n = self.a.len();
        for i in 0..n {
            let x = u[2 * i];
            let prev = if i > 0 { u[2 * (i - 1)] } else { 0.0 };
            res[2 * i] = x * x * x + 0.1 * (x - prev) - self.a[i];
            res[2 * i + 1] = u[2 * i + 1] - x * x;
            self.terms[2 * i] = (x * x * x).abs() + 0.1 * (x.abs() + prev.abs()) + self.a[i];
            self.terms[2 * i + 1] = u[2 * i + 1].abs() + x * x;
        }
        if let Some(jac) = jac {
            for i in 0..n {
                let x = u[2 * i];
                let (mut lower, mut diag) = (zero_block(), zero_block());
                diag[0][0] = 3.0 * x * x + 0.1;
                diag[1][0] = -2.0 * x;
                diag[1][1] = 1.0;
                if i > 0 {
                    lower[0][0] = -0.1;
                }
                jac.set_row(i, &lower, &diag, &zero_block());
            }
        }
        Ok(())
    }
    fn last_unknown_decoupled(&self) -> bool {
        // y = x² appears in its own row alone.
        self.decoupled
    }
    fn storage_jacobian_into(&self, out: &mut dyn BlockRows<2>) {
        for i in 0..self.a.len() {
            out.set_diag(i, &zero_block());
        }
    }
    fn convergence_scales_into(
        &self,
        _c: f64,
        _hist: &[f64],
        tol: f64,
        scale: &mut [f64],
    ) -> BalanceScales {
        scales_from_terms(&self.terms, tol, scale);
        BalanceScales::default()
    }
    fn column_scales_into(&self, _u: &[f64], col: &mut [f64]) {
        col.fill(1.0);
    }
    fn apply_update(&self, u: &mut [f64], dx: &mut [f64], col: &[f64]) -> bool {
        let mut small = true;
        for ((x, d), c) in u.iter_mut().zip(dx.iter_mut()).zip(col) {
            *d *= c;
            *x += *d;
            small &= d.abs() < 1e-14;
        }
        small
    }
    fn error_tests(&self, _i: usize, _n: &[f64], _o: &[f64], _r: f64) -> [(usize, ErrorTest); 2] {
        [
            (0, ErrorTest::Unknown { den: 1.0 }),
            (1, ErrorTest::Unknown { den: 1.0 }),
        ]
    }
}

#[test]
fn newton_finds_a_known_root_with_full_and_modified_jacobians() {
    let n = 50;
    for (reuse, kind) in [
        (false, SolverKind::BlockThomas),
        (true, SolverKind::BlockThomas),
        (false, SolverKind::SparseLu),
    ] {
        // The Jacobian kept in full 2×2 blocks, then packed (the decoupled pattern: 1×1
        // blocks and the algebraic row): the same iterates bitwise.
        let mut solutions = Vec::new();
        for decoupled in [false, true] {
            let mut p = Chain::new(n);
            p.decoupled = decoupled;
            let mut lin = make_solver::<2>(kind, n);
            let mut work = NewtonWork::<2>::with_pattern(n, p.last_unknown_decoupled());
            let opts = NewtonOptions {
                max_iter: 30,
                residual_tol: 1e-13,
                reuse_jacobian: reuse,
                ..Default::default()
            };
            // Start 30 % off the root.
            let mut u: Vec<f64> = (0..n)
                .flat_map(|i| [1.3 * chain_root(i), 0.7 * chain_root(i).powi(2)])
                .collect();
            let hist = vec![0.0; 2 * n];
            let stats = newton::solve(
                &mut p,
                lin.as_mut(),
                0.0,
                0.0,
                &hist,
                &mut u,
                &opts,
                &mut work,
            )
            .expect("Newton converges");
            for i in 0..n {
                let x = chain_root(i);
                assert!(
                    (u[2 * i] - x).abs() < 1e-12,
                    "block {i}: x {} vs {x}",
                    u[2 * i]
                );
                assert!((u[2 * i + 1] - x * x).abs() < 1e-12, "block {i}: y");
            }
            if !reuse {
                // Quadratic convergence from 30 % off: a handful of iterations (common
                // practice; 6 measured).
                assert!(stats.iterations <= 8, "{} iterations", stats.iterations);
                assert_eq!(stats.jacobians, stats.iterations + 1);
            } else {
                assert!(
                    stats.jacobians < stats.iterations + 1,
                    "no Jacobian was reused"
                );
            }
            solutions.push((u, stats.iterations));
        }
        assert_eq!(
            solutions[0], solutions[1],
            "packed Jacobian: other iterates"
        );
    }
}
