//! Linear solvers for the Newton systems, behind one trait.
//!
//! - [`BlockThomas`]: block-tridiagonal LU (3×3 blocks, partial pivoting inside each block);
//!   the fast path for the 1-D pattern.
//! - [`SparseLu`]: faer's sparse LU with the symbolic analysis done once per pattern; the
//!   general path and the reference the fast path is tested against.

use super::blocktri::{Block, BlockTri};
use faer::dyn_stack::{MemBuffer, MemStack};
use faer::sparse::linalg::lu::{factorize_symbolic_lu, NumericLu, SymbolicLu};
use faer::sparse::{SparseColMatRef, SymbolicSparseColMatRef};
use faer::{Conj, MatMut, Par};

/// A failed factorisation or solve: recoverable (the step is cut).
#[derive(Debug, Clone, PartialEq)]
pub enum LinearError {
    /// A zero or non-finite pivot at unknown `index`.
    Singular { index: usize },
    /// The solution contains NaN or Inf.
    NonFinite,
}

/// Factor once, solve many times.
pub trait LinearSolver {
    /// Numeric factorisation of `a` (same pattern on every call).
    fn factor(&mut self, a: &BlockTri) -> Result<(), LinearError>;
    /// Solves A x = b in place (b becomes x) with the last factorisation.
    fn solve(&mut self, b: &mut [f64]) -> Result<(), LinearError>;
    fn name(&self) -> &'static str;
}

/// Which linear solver a run uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SolverKind {
    BlockThomas,
    SparseLu,
}

/// Creates the solver for `n` cells.
pub fn make_solver(kind: SolverKind, n: usize) -> Box<dyn LinearSolver> {
    match kind {
        SolverKind::BlockThomas => Box::new(BlockThomas::new(n)),
        SolverKind::SparseLu => Box::new(SparseLu::new(n)),
    }
}

/// LU of a 3×3 block with partial pivoting.
#[derive(Debug, Clone, Copy, Default)]
struct Lu3 {
    lu: Block,
    piv: [usize; 3],
}

impl Lu3 {
    fn factor(a: &Block, base: usize) -> Result<Lu3, LinearError> {
        let mut lu = *a;
        let mut piv = [0usize, 1, 2];
        for k in 0..3 {
            let mut p = k;
            let mut best = lu[k * 3 + k].abs();
            for r in k + 1..3 {
                let v = lu[r * 3 + k].abs();
                if v > best {
                    best = v;
                    p = r;
                }
            }
            if best == 0.0 || !best.is_finite() {
                return Err(LinearError::Singular { index: base + k });
            }
            if p != k {
                for c in 0..3 {
                    lu.swap(k * 3 + c, p * 3 + c);
                }
                piv.swap(k, p);
            }
            let d = lu[k * 3 + k];
            for r in k + 1..3 {
                let f = lu[r * 3 + k] / d;
                lu[r * 3 + k] = f;
                for c in k + 1..3 {
                    lu[r * 3 + c] -= f * lu[k * 3 + c];
                }
            }
        }
        Ok(Lu3 { lu, piv })
    }
    #[inline]
    fn solve(&self, b: [f64; 3]) -> [f64; 3] {
        let lu = &self.lu;
        let mut y = [b[self.piv[0]], b[self.piv[1]], b[self.piv[2]]];
        y[1] -= lu[3] * y[0];
        y[2] -= lu[6] * y[0] + lu[7] * y[1];
        y[2] /= lu[8];
        y[1] = (y[1] - lu[5] * y[2]) / lu[4];
        y[0] = (y[0] - lu[1] * y[1] - lu[2] * y[2]) / lu[0];
        y
    }
}

/// `NonFinite` when the solution holds NaN or ±Inf (x·0 is 0 for finite x and NaN
/// otherwise: one branch-free pass).
fn all_finite(x: &[f64]) -> Result<(), LinearError> {
    if x.iter().fold(0.0, |a: f64, v| a + v * 0.0) == 0.0 {
        Ok(())
    } else {
        Err(LinearError::NonFinite)
    }
}

#[inline]
fn mat_mul(a: &Block, b: &Block) -> Block {
    let mut c = [0.0; 9];
    for r in 0..3 {
        for k in 0..3 {
            let a_rk = a[r * 3 + k];
            for col in 0..3 {
                c[r * 3 + col] += a_rk * b[k * 3 + col];
            }
        }
    }
    c
}

#[inline]
fn mat_vec(a: &Block, x: &[f64]) -> [f64; 3] {
    [
        a[0] * x[0] + a[1] * x[1] + a[2] * x[2],
        a[3] * x[0] + a[4] * x[1] + a[5] * x[2],
        a[6] * x[0] + a[7] * x[1] + a[8] * x[2],
    ]
}

/// Block-tridiagonal LU (block Thomas algorithm):
/// B'_0 = B_0; E_i = B'_i⁻¹ C_i; B'_i = B_i − A_i E_{i−1};
/// forward y_i = B'_i⁻¹ (r_i − A_i y_{i−1}); back x_i = y_i − E_i x_{i+1}.
///
/// When the third unknown of every cell is decoupled — it appears in no other row than its
/// own, and its own row couples only within the cell (the algebraic vapour row of
/// equilibrium mode) — the first two unknowns form a block-tridiagonal system with 2×2
/// blocks, solved alone, and the third follows cell by cell from its row.
#[derive(Debug, Clone)]
pub struct BlockThomas {
    n: usize,
    /// Explicit inverses of the pivot blocks B'_i (from their pivoted LU): the solve is
    /// then mat-vec products only, without the division chain of triangular solves.
    inv: Vec<Block>,
    e: Vec<Block>,
    lower: Vec<Block>,
    /// The same for the decoupled pattern: 2×2 blocks (row-major) and, per cell, the
    /// third row (a, b, 1/c) of x₂ = (r₂ − a x₀ − b x₁)/c.
    reduced: bool,
    inv2: Vec<[f64; 4]>,
    e2: Vec<[f64; 4]>,
    lower2: Vec<[f64; 4]>,
    third: Vec<[f64; 3]>,
}

impl BlockThomas {
    pub fn new(n: usize) -> Self {
        BlockThomas {
            n,
            inv: vec![[0.0; 9]; n],
            e: vec![[0.0; 9]; n],
            lower: vec![[0.0; 9]; n],
            reduced: false,
            inv2: vec![[0.0; 4]; n],
            e2: vec![[0.0; 4]; n],
            lower2: vec![[0.0; 4]; n],
            third: vec![[0.0; 3]; n],
        }
    }

    /// Whether the third unknown of every cell is decoupled (see the type's doc).
    fn decoupled(a: &BlockTri) -> bool {
        let off =
            |b: &Block| b[2] == 0.0 && b[5] == 0.0 && b[6] == 0.0 && b[7] == 0.0 && b[8] == 0.0;
        (0..a.n).all(|i| a.diag[i][2] == 0.0 && a.diag[i][5] == 0.0)
            && a.lower.iter().all(off)
            && a.upper.iter().all(off)
    }

    fn factor_reduced(&mut self, a: &BlockTri) -> Result<(), LinearError> {
        let n = self.n;
        let sub = |b: &Block| [b[0], b[1], b[3], b[4]];
        for i in 0..n {
            let mut bp = sub(&a.diag[i]);
            let low = sub(&a.lower[i]);
            if i > 0 {
                let e = &self.e2[i - 1];
                bp[0] -= low[0] * e[0] + low[1] * e[2];
                bp[1] -= low[0] * e[1] + low[1] * e[3];
                bp[2] -= low[2] * e[0] + low[3] * e[2];
                bp[3] -= low[2] * e[1] + low[3] * e[3];
            }
            // Inverse by the adjugate, with the determinant's size judged against the
            // entries (a zero or non-finite pivot block is singular).
            let det = bp[0] * bp[3] - bp[1] * bp[2];
            let size = bp.iter().fold(0.0f64, |m, x| m.max(x.abs()));
            if !(det.is_finite() && det.abs() > f64::EPSILON * f64::EPSILON * size * size) {
                return Err(LinearError::Singular { index: 3 * i });
            }
            let r = 1.0 / det;
            let inv = [bp[3] * r, -bp[1] * r, -bp[2] * r, bp[0] * r];
            if i + 1 < n {
                let c = sub(&a.upper[i]);
                self.e2[i] = [
                    inv[0] * c[0] + inv[1] * c[2],
                    inv[0] * c[1] + inv[1] * c[3],
                    inv[2] * c[0] + inv[3] * c[2],
                    inv[2] * c[1] + inv[3] * c[3],
                ];
            }
            self.inv2[i] = inv;
            self.lower2[i] = low;
            let d = &a.diag[i];
            if d[8] == 0.0 || !d[8].is_finite() {
                return Err(LinearError::Singular { index: 3 * i + 2 });
            }
            self.third[i] = [d[6], d[7], 1.0 / d[8]];
        }
        Ok(())
    }

    fn solve_reduced(&self, b: &mut [f64]) {
        let n = self.n;
        let mut prev = [0.0; 2];
        for i in 0..n {
            let mut r = [b[3 * i], b[3 * i + 1]];
            if i > 0 {
                let l = &self.lower2[i];
                r[0] -= l[0] * prev[0] + l[1] * prev[1];
                r[1] -= l[2] * prev[0] + l[3] * prev[1];
            }
            let v = &self.inv2[i];
            prev = [v[0] * r[0] + v[1] * r[1], v[2] * r[0] + v[3] * r[1]];
            b[3 * i] = prev[0];
            b[3 * i + 1] = prev[1];
        }
        let mut next = prev;
        for i in (0..n.saturating_sub(1)).rev() {
            let e = &self.e2[i];
            b[3 * i] -= e[0] * next[0] + e[1] * next[1];
            b[3 * i + 1] -= e[2] * next[0] + e[3] * next[1];
            next = [b[3 * i], b[3 * i + 1]];
        }
        for i in 0..n {
            let [p, q, rc] = self.third[i];
            b[3 * i + 2] = (b[3 * i + 2] - p * b[3 * i] - q * b[3 * i + 1]) * rc;
        }
    }
}

impl LinearSolver for BlockThomas {
    fn factor(&mut self, a: &BlockTri) -> Result<(), LinearError> {
        self.reduced = Self::decoupled(a);
        if self.reduced {
            return self.factor_reduced(a);
        }
        let n = self.n;
        for i in 0..n {
            let mut bp = a.diag[i];
            if i > 0 {
                let ae = mat_mul(&a.lower[i], &self.e[i - 1]);
                for k in 0..9 {
                    bp[k] -= ae[k];
                }
            }
            let lu = Lu3::factor(&bp, 3 * i)?;
            let mut inv = [0.0; 9];
            for col in 0..3 {
                let mut unit = [0.0; 3];
                unit[col] = 1.0;
                let x = lu.solve(unit);
                inv[col] = x[0];
                inv[3 + col] = x[1];
                inv[6 + col] = x[2];
            }
            if i + 1 < n {
                // E_i = B'_i⁻¹ C_i.
                self.e[i] = mat_mul(&inv, &a.upper[i]);
            }
            self.inv[i] = inv;
            self.lower[i] = a.lower[i];
        }
        Ok(())
    }

    fn solve(&mut self, b: &mut [f64]) -> Result<(), LinearError> {
        if self.reduced {
            self.solve_reduced(b);
            return all_finite(b);
        }
        let n = self.n;
        let mut prev = [0.0; 3];
        for i in 0..n {
            let mut r = [b[3 * i], b[3 * i + 1], b[3 * i + 2]];
            if i > 0 {
                let ay = mat_vec(&self.lower[i], &prev);
                for k in 0..3 {
                    r[k] -= ay[k];
                }
            }
            prev = mat_vec(&self.inv[i], &r);
            b[3 * i..3 * i + 3].copy_from_slice(&prev);
        }
        let mut next = prev;
        for i in (0..n.saturating_sub(1)).rev() {
            let ex = mat_vec(&self.e[i], &next);
            for k in 0..3 {
                b[3 * i + k] -= ex[k];
                next[k] = b[3 * i + k];
            }
        }
        all_finite(b)
    }

    fn name(&self) -> &'static str {
        "block-tridiagonal"
    }
}

/// faer sparse LU over the CSC form of the block-tridiagonal pattern. The pattern and the
/// symbolic analysis are built once; each factorisation copies the block values into the
/// CSC value array and refactors numerically (no allocation after the first call).
pub struct SparseLu {
    n: usize,
    col_ptr: Vec<usize>,
    row_idx: Vec<usize>,
    values: Vec<f64>,
    /// For each stored value: (block kind 0 lower / 1 diag / 2 upper, block index, entry).
    source: Vec<(u8, usize, usize)>,
    symbolic: Option<SymbolicLu<usize>>,
    numeric: NumericLu<usize, f64>,
    factor_mem: MemBuffer,
    solve_mem: MemBuffer,
    factored: bool,
}

impl SparseLu {
    pub fn new(n: usize) -> Self {
        let dim = 3 * n;
        let mut col_ptr = Vec::with_capacity(dim + 1);
        let mut row_idx = Vec::new();
        let mut source = Vec::new();
        col_ptr.push(0);
        // Column j = 3·cb + c couples to rows of blocks cb−1, cb, cb+1.
        for cb in 0..n {
            for c in 0..3 {
                for rb in cb.saturating_sub(1)..(cb + 2).min(n) {
                    for r in 0..3 {
                        let kind = if rb == cb {
                            1u8
                        } else if rb == cb + 1 {
                            0 // row block cb+1 sees column block cb through its lower block
                        } else {
                            2 // row block cb−1 sees column block cb through its upper block
                        };
                        row_idx.push(3 * rb + r);
                        source.push((kind, rb, r * 3 + c));
                    }
                }
                col_ptr.push(row_idx.len());
            }
        }
        let values = vec![0.0; row_idx.len()];
        let symbolic = {
            let sym = SymbolicSparseColMatRef::new_checked(dim, dim, &col_ptr, None, &row_idx);
            factorize_symbolic_lu(sym, Default::default()).ok()
        };
        let (factor_mem, solve_mem) = match &symbolic {
            Some(s) => (
                MemBuffer::new(s.factorize_numeric_lu_scratch::<f64>(Par::Seq, Default::default())),
                MemBuffer::new(s.solve_in_place_scratch::<f64>(1, Par::Seq)),
            ),
            None => (
                MemBuffer::new(faer::dyn_stack::StackReq::empty()),
                MemBuffer::new(faer::dyn_stack::StackReq::empty()),
            ),
        };
        SparseLu {
            n,
            col_ptr,
            row_idx,
            values,
            source,
            symbolic,
            numeric: NumericLu::new(),
            factor_mem,
            solve_mem,
            factored: false,
        }
    }
}

impl LinearSolver for SparseLu {
    fn factor(&mut self, a: &BlockTri) -> Result<(), LinearError> {
        debug_assert_eq!(a.n, self.n);
        for (v, &(kind, b, e)) in self.values.iter_mut().zip(self.source.iter()) {
            *v = match kind {
                0 => a.lower[b][e],
                1 => a.diag[b][e],
                _ => a.upper[b][e],
            };
        }
        if let Some(k) = self.values.iter().position(|x| !x.is_finite()) {
            return Err(LinearError::Singular {
                index: self.row_idx[k],
            });
        }
        let symbolic = self
            .symbolic
            .as_ref()
            .ok_or(LinearError::Singular { index: 0 })?;
        let dim = 3 * self.n;
        let sym =
            SymbolicSparseColMatRef::new_checked(dim, dim, &self.col_ptr, None, &self.row_idx);
        let m = SparseColMatRef::new(sym, &self.values);
        self.factored = false;
        symbolic
            .factorize_numeric_lu(
                &mut self.numeric,
                m,
                Par::Seq,
                MemStack::new(&mut self.factor_mem),
                Default::default(),
            )
            .map_err(|_| LinearError::Singular { index: 0 })?;
        self.factored = true;
        Ok(())
    }

    fn solve(&mut self, b: &mut [f64]) -> Result<(), LinearError> {
        let symbolic = self
            .symbolic
            .as_ref()
            .ok_or(LinearError::Singular { index: 0 })?;
        if !self.factored {
            return Err(LinearError::Singular { index: 0 });
        }
        let lu = faer::sparse::linalg::lu::LuRef::new_unchecked(symbolic, &self.numeric);
        let dim = b.len();
        let rhs = MatMut::from_column_major_slice_mut(b, dim, 1);
        lu.solve_in_place_with_conj(Conj::No, rhs, Par::Seq, MemStack::new(&mut self.solve_mem));
        if b.iter().all(|x| x.is_finite()) {
            Ok(())
        } else {
            Err(LinearError::NonFinite)
        }
    }

    fn name(&self) -> &'static str {
        "sparse-lu"
    }
}
