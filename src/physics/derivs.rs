//! The evaluation with derivatives and what is built from it: the Jacobian blocks, the
//! storage-derivative blocks and the linearised value evaluations (see
//! [`System::evaluate`]).
//!
//! `N` derivative slots per cell and `M` = 2N per face: 3 and 6 (T, h, rv) in kinetic
//! mode; 2 and 4 (T, h) in equilibrium mode, where the vapour density inside the physics
//! is the function rveq(T, h) (see [`cell_props`]): no property depends on the vapour
//! unknown, whose row is the algebraic `rv − rveq(T, h)`. The Jacobian keeps its 3×3
//! blocks; in equilibrium mode their vapour column is zero outside that row, which the
//! block-tridiagonal solver exploits.

use super::cell::{cell_props, CellProps};
use super::dual::Dual;
use super::flux::FaceFlux;
use super::{evaluate_into, System, ENERGY, H, RV, T, VAPOR, WATER};
use crate::model::VaporMode;
use crate::solve::blocktri::{Block, BlockTri};

/// Largest relative change of a cell's unknowns since the evaluation with derivatives for
/// which its properties are taken by linearisation from that evaluation (head: relative
/// to max(|h|, 0.01 m)).
pub(super) const LINEAR_CHANGE: f64 = 1e-8;

/// Cell properties, face fluxes and face totals with `N` (`M`) derivative slots, and the
/// state they were evaluated at (empty before the first evaluation).
#[derive(Debug, Clone)]
pub(super) struct Derivs<const N: usize, const M: usize> {
    cells: Vec<CellProps<N>>,
    faces: Vec<FaceFlux<M>>,
    totals: Vec<[Dual<M>; 3]>,
    state: Vec<f64>,
}

impl<const N: usize, const M: usize> Default for Derivs<N, M> {
    fn default() -> Self {
        Derivs {
            cells: Vec::new(),
            faces: Vec::new(),
            totals: Vec::new(),
            state: Vec::new(),
        }
    }
}

impl<const N: usize, const M: usize> Derivs<N, M> {
    /// Forgets the state (the next value evaluation is direct).
    pub fn forget(&mut self) {
        self.state.clear();
    }

    /// Evaluates `sys` at (t, u) with derivatives and copies the values into its value
    /// workspace (so both agree bitwise).
    pub fn evaluate(&mut self, sys: &mut System, t: f64, u: &[f64]) {
        let n = sys.n;
        if self.cells.len() != n {
            let any = cell_props(
                sys.soil_of(0),
                &sys.physics,
                Dual::cst(293.15),
                Dual::cst(-1.0),
                Dual::cst(0.01),
            );
            self.cells = vec![any; n];
            self.faces = vec![FaceFlux::zero(); n + 1];
            self.totals = vec![[Dual::cst(0.0); 3]; n + 1];
        }
        evaluate_into(
            sys,
            t,
            u,
            &mut self.cells,
            &mut self.faces,
            &mut self.totals,
        );
        for (v, d) in sys.cells.iter_mut().zip(self.cells.iter()) {
            *v = d.values();
        }
        for (v, d) in sys.faces.iter_mut().zip(self.faces.iter()) {
            *v = d.values();
        }
        for (v, d) in sys.face_totals.iter_mut().zip(self.totals.iter()) {
            *v = [d[0].value_only(), d[1].value_only(), d[2].value_only()];
        }
        self.state.clear();
        self.state.extend_from_slice(u);
    }

    /// The value evaluation at (t, u) by linearisation where the cells moved less than
    /// [`LINEAR_CHANGE`] from this evaluation's state, directly elsewhere, into `cells`,
    /// `faces`, `totals` (`linear`: per cell, whether it was linearised). False, and
    /// nothing written, when there is no evaluation of this system to start from.
    #[allow(clippy::too_many_arguments)]
    pub fn linearised(
        &self,
        sys: &System,
        t: f64,
        u: &[f64],
        cells: &mut [super::CellProps<0>],
        faces: &mut [FaceFlux<0>],
        totals: &mut [[Dual<0>; 3]],
        linear: &mut [bool],
    ) -> bool {
        let n = sys.n;
        if self.state.len() != u.len() || self.cells.len() != n {
            return false;
        }
        let rv_unknown = N > RV;
        for (i, c) in cells.iter_mut().enumerate() {
            let x = &u[3 * i..3 * i + 3];
            let x0 = &self.state[3 * i..3 * i + 3];
            let mut du = [0.0; N];
            for (k, d) in du.iter_mut().enumerate() {
                *d = x[k] - x0[k];
            }
            let small = (x[T] - x0[T]).abs() <= LINEAR_CHANGE * x0[T].abs()
                && (x[H] - x0[H]).abs() <= LINEAR_CHANGE * x0[H].abs().max(1e-2)
                && (!rv_unknown || (x[RV] - x0[RV]).abs() <= LINEAR_CHANGE * x0[RV].abs());
            linear[i] = small;
            *c = if small {
                self.cells[i].taylor(x[T], x[H], rv_unknown.then_some(x[RV]), &du)
            } else {
                cell_props(
                    sys.soil_of(i),
                    &sys.physics,
                    Dual::var(x[T], 0),
                    Dual::var(x[H], 1),
                    Dual::var(x[RV], 2),
                )
            };
        }
        let avg = sys.physics.face_conductivity;
        for j in 1..n {
            if linear[j - 1] && linear[j] {
                let mut du = [0.0; M];
                for k in 0..N {
                    du[k] = u[3 * (j - 1) + k] - self.state[3 * (j - 1) + k];
                    du[N + k] = u[3 * j + k] - self.state[3 * j + k];
                }
                faces[j] = self.faces[j].taylor(&du);
                let td = &self.totals[j];
                totals[j] = [td[0].taylor(&du), td[1].taylor(&du), td[2].taylor(&du)];
            } else {
                let f = super::flux::face_flux(
                    &cells[j - 1],
                    &cells[j],
                    0,
                    0,
                    sys.d_below[j - 1],
                    sys.d_above[j],
                    avg,
                );
                totals[j] = [f.energy(), f.water(), f.vapor()];
                faces[j] = f;
            }
        }
        for (j, f) in [
            (0, sys.top_face(t, &cells[0])),
            (n, sys.bottom_face(t, &cells[n - 1])),
        ] {
            totals[j] = [f.energy(), f.water(), f.vapor()];
            faces[j] = f;
        }
        true
    }

    /// The Jacobian of the residual of [`System::assemble`] with coefficient `c` into
    /// `jac` (zeroed first).
    pub fn jacobian_into(&self, sys: &System, c: f64, jac: &mut BlockTri) {
        let n = sys.n;
        let rate = match sys.physics.vapor_mode {
            VaporMode::Kinetic { rate } => Some(rate),
            VaporMode::Equilibrium => None,
        };
        jac.zero();
        for i in 0..n {
            let w = sys.widths[i];
            let cp = &self.cells[i];
            let d = &mut jac.diag[i];
            let energy = cp.energy * (c * w);
            let water = cp.water * (c * w);
            for col in 0..N {
                d[ENERGY * 3 + col] += energy.d[col];
                d[WATER * 3 + col] += water.d[col];
            }
            match rate {
                Some(b) => {
                    let vapor = cp.vapor * (c * w) - (cp.rveq - cp.rv) * (b * w);
                    for col in 0..N {
                        d[VAPOR * 3 + col] += vapor.d[col];
                    }
                }
                None => {
                    // rv − rveq(T, h): 1 for the vapour unknown, −∂rveq for T and h.
                    for col in 0..N {
                        d[VAPOR * 3 + col] -= cp.rveq.d[col];
                    }
                    d[VAPOR * 3 + RV] += 1.0;
                }
            }
        }
        let rows = if rate.is_some() { 3 } else { 2 };
        for j in 0..=n {
            let vals = &self.totals[j];
            let col_up = if j == 0 { 0 } else { j - 1 };
            let col_dn = if j == n { n - 1 } else { j };
            for (rb, sign) in [(j.wrapping_sub(1), 1.0), (j, -1.0)] {
                if rb >= n {
                    continue;
                }
                for (r, v) in vals.iter().enumerate().take(rows) {
                    {
                        let b = jac.block_mut(rb, col_up);
                        for col in 0..N {
                            b[r * 3 + col] += sign * v.d[col];
                        }
                    }
                    let b = jac.block_mut(rb, col_dn);
                    for col in 0..N {
                        b[r * 3 + col] += sign * v.d[N + col];
                    }
                }
            }
        }
    }

    /// The storage-derivative blocks (see [`System::storage_jacobian_into`]).
    pub fn storage_blocks_into(&self, sys: &System, out: &mut [Block]) {
        let kinetic = matches!(sys.physics.vapor_mode, VaporMode::Kinetic { .. });
        for (i, b) in out.iter_mut().enumerate().take(sys.n) {
            let w = sys.widths[i];
            let cp = &self.cells[i];
            *b = [0.0; 9];
            let rows = [cp.energy, cp.water, cp.vapor];
            let used = if kinetic { 3 } else { 2 };
            for (r, row) in rows.iter().enumerate().take(used) {
                for col in 0..N {
                    b[r * 3 + col] = w * row.d[col];
                }
            }
        }
    }
}
