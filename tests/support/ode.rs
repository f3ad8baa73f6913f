//! An ODE system y' = g(t, y) as a [`Problem`] of one block, for tests of Newton's method,
//! the BDF stepper and cycle skipping on problems with known answers and no soil physics,
//! through the same trait the soil column implements.

#![allow(clippy::needless_range_loop)] // matrix code reads best with indices

use deepdry::solve::blocktri::{zero_block, Block, BlockRows};
use deepdry::solve::problem::{BalanceScales, Conserved, ErrorTest, NonFinite, Problem};

/// Residual-magnitude scales shared by the test problems: |terms| per row, with the
/// round-off floor of 16 ε times the terms (as the soil column does).
pub fn scales_from_terms(terms: &[f64], tol: f64, scale: &mut [f64]) {
    for (s, t) in scale.iter_mut().zip(terms) {
        *s = t.max(16.0 * f64::EPSILON * t / tol).max(1e-300);
    }
}

// ---------------------------------------------------------------------------------------
// An ODE system y' = g(y) in one block of B unknowns: storage M = y, weight 1, residual
// R = c y − hist − g(y). No conserved rows (nothing flows through ends).

pub trait Ode<const B: usize> {
    /// g(t, y).
    fn rhs(&self, t: f64, y: &[f64; B]) -> [f64; B];
    /// Sum of the magnitudes of the terms of each right-hand side (the scale against
    /// which a residual is small; the net value may cancel).
    fn magnitudes(&self, t: f64, y: &[f64; B]) -> [f64; B];
    /// ∂g/∂y.
    fn jacobian(&self, t: f64, y: &[f64; B]) -> Block<B>;
    fn atol(&self) -> [f64; B];
}

pub struct OdeProblem<const B: usize, O: Ode<B>> {
    pub ode: O,
    pub y: [f64; B],
    /// Magnitudes of the residual terms at the last evaluation.
    terms: [f64; B],
}

impl<const B: usize, O: Ode<B>> OdeProblem<B, O> {
    pub fn new(ode: O) -> Self {
        OdeProblem {
            ode,
            y: [0.0; B],
            terms: [0.0; B],
        }
    }
}

const ONE: [f64; 1] = [1.0];

impl<const B: usize, O: Ode<B>> Problem<B> for OdeProblem<B, O> {
    fn blocks(&self) -> usize {
        1
    }
    fn volumes(&self) -> &[f64] {
        &ONE
    }
    fn conserved_rows(&self) -> &[usize] {
        &[]
    }
    fn evaluate(&mut self, _t: f64, u: &[f64]) {
        self.y.copy_from_slice(u);
    }
    fn storage(&self, _i: usize) -> [f64; B] {
        self.y
    }
    fn boundary_flows(&self) -> (Conserved, Conserved) {
        (Conserved::default(), Conserved::default())
    }
    fn assemble(
        &mut self,
        t: f64,
        u: &[f64],
        c: f64,
        hist: &[f64],
        res: &mut [f64],
        jac: Option<&mut dyn BlockRows<B>>,
    ) -> Result<(), NonFinite> {
        self.evaluate(t, u);
        let g = self.ode.rhs(t, &self.y);
        let m = self.ode.magnitudes(t, &self.y);
        for r in 0..B {
            res[r] = c * self.y[r] - hist[r] - g[r];
            self.terms[r] = (c * self.y[r]).abs() + hist[r].abs() + m[r];
            if !res[r].is_finite() {
                return Err(NonFinite { cell: 0, row: r });
            }
        }
        if let Some(jac) = jac {
            let dg = self.ode.jacobian(t, &self.y);
            let mut d = zero_block::<B>();
            for r in 0..B {
                for q in 0..B {
                    d[r][q] = -dg[r][q] + if r == q { c } else { 0.0 };
                }
            }
            jac.set_row(0, &zero_block(), &d, &zero_block());
        }
        Ok(())
    }
    fn storage_jacobian_into(&self, out: &mut dyn BlockRows<B>) {
        let mut s: Block<B> = zero_block();
        for r in 0..B {
            s[r][r] = 1.0;
        }
        out.set_diag(0, &s);
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
        let atol = self.ode.atol();
        let mut small = true;
        for r in 0..B {
            let d = dx[r] * col[r];
            dx[r] = d;
            u[r] += d;
            if d.abs() > 1e-14 * u[r].abs().max(atol[r]) {
                small = false;
            }
        }
        small
    }
    fn error_tests(
        &self,
        _i: usize,
        new: &[f64],
        old: &[f64],
        rtol: f64,
    ) -> [(usize, ErrorTest); B] {
        let atol = self.ode.atol();
        let mut out = [(0, ErrorTest::Unknown { den: 1.0 }); B];
        for r in 0..B {
            let den = atol[r] + rtol * new[r].abs().max(old[r].abs());
            out[r] = (r, ErrorTest::Unknown { den });
        }
        out
    }
}
