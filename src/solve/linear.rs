//! Linear solvers for the Newton systems, behind one trait.
//!
//! - [`BlockThomas`]: block-tridiagonal LU (B×B blocks, partial pivoting inside each
//!   block); the fast path for the 1-D pattern.
//! - [`SparseLu`]: faer's sparse LU with the symbolic analysis done once per pattern; the
//!   general path (any sparsity pattern, assembled with `sprs`) and the reference the
//!   fast path is tested against.

use super::blocktri::{zero_block, Block, BlockSource, BlockTri, Scaled};
use faer::dyn_stack::{MemBuffer, MemStack};
use faer::sparse::linalg::lu::{factorize_symbolic_lu, NumericLu, SymbolicLu};
use faer::sparse::{SparseColMatRef, SymbolicSparseColMatRef};
use faer::{Conj, MatMut, Par};
use sprs::{CsMat, TriMat};

/// A failed factorisation or solve: recoverable (the step is cut).
#[derive(Debug, Clone, PartialEq)]
pub enum LinearError {
    /// A zero or non-finite pivot at unknown `index`.
    Singular { index: usize },
    /// The solution contains NaN or Inf.
    NonFinite,
    /// A matrix whose sparsity pattern differs from the one the solver was built for.
    Pattern,
}

/// Factor once, solve many times, for block-tridiagonal matrices with B×B blocks.
pub trait LinearSolver<const B: usize> {
    /// Numeric factorisation of `a` (same pattern on every call).
    fn factor(&mut self, a: &BlockTri<B>) -> Result<(), LinearError>;
    /// Numeric factorisation of the scaled Newton matrix `m`, read block by block (the
    /// same result as factorising it stored, without storing it).
    fn factor_scaled(&mut self, m: &Scaled<B>) -> Result<(), LinearError>;
    /// Solves A x = b in place (b becomes x) with the last factorisation.
    fn solve(&mut self, b: &mut [f64]) -> Result<(), LinearError>;
    /// Whether [`LinearSolver::factor_scaled`] may leave out of its factors what the
    /// solve can read again from the matrix it factorised (which must then be given to
    /// [`LinearSolver::solve_scaled`] unchanged): less memory, a little more work per
    /// solve. Default: ignored.
    fn borrow_from_matrix(&mut self, _borrow: bool) {}
    /// [`LinearSolver::solve`] after [`LinearSolver::factor_scaled`] of `m` (the same
    /// matrix, unchanged).
    fn solve_scaled(&mut self, _m: &Scaled<B>, b: &mut [f64]) -> Result<(), LinearError> {
        self.solve(b)
    }
    fn name(&self) -> &'static str;
    /// The heap arrays of the solver (see [`crate::memory`]).
    fn arrays(&self, out: &mut Vec<crate::memory::ArrayCost>);
}

/// Solves a small dense system by Gaussian elimination with partial pivoting: `a` holds
/// its n rows, each augmented with its right-hand side in column n; the solution goes into
/// `x` (n values). False, with `x` unspecified, when a pivot is zero or not finite or the
/// solution is not finite. (Cycle skipping's per-block inversion, Anderson acceleration's
/// least squares.)
pub fn solve_dense<R: AsRef<[f64]> + AsMut<[f64]>>(a: &mut [R], x: &mut [f64]) -> bool {
    let n = a.len();
    for c in 0..n {
        let Some(p) =
            (c..n).max_by(|&i, &j| a[i].as_ref()[c].abs().total_cmp(&a[j].as_ref()[c].abs()))
        else {
            return false;
        };
        let pivot = a[p].as_ref()[c];
        if pivot == 0.0 || !pivot.is_finite() {
            return false;
        }
        a.swap(c, p);
        let (top, rest) = a.split_at_mut(c + 1);
        let pivot_row = top[c].as_ref();
        for row in rest.iter_mut() {
            let row = row.as_mut();
            let f = row[c] / pivot_row[c];
            for k in c..=n {
                row[k] -= f * pivot_row[k];
            }
        }
    }
    for c in (0..n).rev() {
        let row = a[c].as_ref();
        let mut v = row[n];
        for k in c + 1..n {
            v -= row[k] * x[k];
        }
        x[c] = v / row[c];
        if !x[c].is_finite() {
            return false;
        }
    }
    true
}

/// Which linear solver a run uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SolverKind {
    BlockThomas,
    SparseLu,
}

/// Creates the solver for `n` blocks of B unknowns.
pub fn make_solver<const B: usize>(kind: SolverKind, n: usize) -> Box<dyn LinearSolver<B>> {
    match kind {
        SolverKind::BlockThomas => Box::new(BlockThomas::<B>::new(n)),
        SolverKind::SparseLu => Box::new(SparseLu::block_tridiagonal(B, n)),
    }
}

/// LU of a B×B block with partial pivoting.
#[derive(Debug, Clone, Copy)]
struct LuBlock<const B: usize> {
    lu: Block<B>,
    piv: [usize; B],
}

impl<const B: usize> LuBlock<B> {
    /// Factorises `a`; `base` is the index of its first unknown (for the error).
    fn factor(a: &Block<B>, base: usize) -> Result<Self, LinearError> {
        let mut lu = *a;
        let mut piv = [0usize; B];
        for (k, p) in piv.iter_mut().enumerate() {
            *p = k;
        }
        for k in 0..B {
            let mut p = k;
            let mut best = lu[k][k].abs();
            for (r, row) in lu.iter().enumerate().skip(k + 1) {
                let v = row[k].abs();
                if v > best {
                    best = v;
                    p = r;
                }
            }
            if best == 0.0 || !best.is_finite() {
                return Err(LinearError::Singular { index: base + k });
            }
            if p != k {
                lu.swap(k, p);
                piv.swap(k, p);
            }
            let pivot_row = lu[k];
            let d = pivot_row[k];
            for row in lu.iter_mut().skip(k + 1) {
                let f = row[k] / d;
                row[k] = f;
                for c in k + 1..B {
                    row[c] -= f * pivot_row[c];
                }
            }
        }
        Ok(LuBlock { lu, piv })
    }

    /// Solves with the factorisation: forward substitution with the unit lower factor,
    /// then back substitution, each row's terms subtracted in column order.
    #[inline]
    fn solve(&self, b: [f64; B]) -> [f64; B] {
        let lu = &self.lu;
        let mut y = [0.0; B];
        for r in 0..B {
            y[r] = b[self.piv[r]];
        }
        for r in 1..B {
            let mut s = lu[r][0] * y[0];
            for c in 1..r {
                s += lu[r][c] * y[c];
            }
            y[r] -= s;
        }
        for r in (0..B).rev() {
            let mut s = y[r];
            for c in r + 1..B {
                s -= lu[r][c] * y[c];
            }
            y[r] = s / lu[r][r];
        }
        y
    }

    /// The explicit inverse, column by column.
    fn inverse(&self) -> Block<B> {
        let mut inv = zero_block::<B>();
        for col in 0..B {
            let mut unit = [0.0; B];
            unit[col] = 1.0;
            let x = self.solve(unit);
            for r in 0..B {
                inv[r][col] = x[r];
            }
        }
        inv
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

/// a b, each entry summed in the order of k.
#[inline]
fn mat_mul<const B: usize>(a: &Block<B>, b: &Block<B>) -> Block<B> {
    let mut c = zero_block::<B>();
    for r in 0..B {
        for k in 0..B {
            let a_rk = a[r][k];
            for col in 0..B {
                c[r][col] += a_rk * b[k][col];
            }
        }
    }
    c
}

/// a x over the first `m` rows and columns (m ≤ B), each row summed in column order.
#[inline]
fn mat_vec<const B: usize>(a: &Block<B>, x: &[f64; B], m: usize) -> [f64; B] {
    let mut y = [0.0; B];
    for r in 0..m {
        let mut s = a[r][0] * x[0];
        for c in 1..m {
            s += a[r][c] * x[c];
        }
        y[r] = s;
    }
    y
}

/// Block-tridiagonal LU (block Thomas algorithm):
/// B'_0 = B_0; E_i = B'_i⁻¹ C_i; B'_i = B_i − A_i E_{i−1};
/// forward y_i = B'_i⁻¹ (r_i − A_i y_{i−1}); back x_i = y_i − E_i x_{i+1}.
///
/// When the last unknown of every block is decoupled — it appears in no other row than
/// its own, and its own row couples only within the block (the algebraic vapour row of
/// equilibrium mode) — the other B − 1 unknowns form a block-tridiagonal system of
/// (B−1)×(B−1) blocks, solved alone, and the last follows block by block from its row.
///
/// The factors are stored flat, m² values per block (m = B, or B − 1 in the decoupled
/// pattern): sized at the first factorisation for the pattern it meets, grown (never
/// shrunk) if a later one needs full blocks, so no factorisation after the first of each
/// pattern allocates. In equilibrium mode (B = 3, m = 2) the three factor arrays cost
/// 3 × 32 B per block instead of 3 × 72 B.
#[derive(Debug, Clone)]
pub struct BlockThomas<const B: usize> {
    n: usize,
    /// Explicit inverses of the pivot blocks B'_i (from their pivoted LU): the solve is
    /// then mat-vec products only, without the division chain of triangular solves.
    inv: Vec<f64>,
    e: Vec<f64>,
    lower: Vec<f64>,
    /// Whether the last factorisation used the decoupled pattern; then `inv`, `e` and
    /// `lower` hold the reduced (B−1)×(B−1) blocks, and `last`, per block, the last row
    /// (a_0 … a_{B−2}, 1/a_{B−1}) of x_{B−1} = (r_{B−1} − Σ a_c x_c) / a_{B−1}.
    reduced: bool,
    last: Vec<[f64; B]>,
    /// Whether a factorisation of a scaled matrix in the decoupled pattern leaves its
    /// lower blocks and algebraic rows in the matrix (`lower` and `last` stay empty; the
    /// solve reads them from it, see [`LinearSolver::borrow_from_matrix`]).
    borrow: bool,
    /// Whether the last factorisation left them there.
    borrowed: bool,
}

/// Block `i` of a flat array of m×m blocks, into the leading part of a B×B block.
#[inline(always)]
fn load<const B: usize>(v: &[f64], i: usize, m: usize) -> Block<B> {
    let mut b = zero_block::<B>();
    let s = &v[m * m * i..m * m * (i + 1)];
    for r in 0..m {
        b[r][..m].copy_from_slice(&s[m * r..m * r + m]);
    }
    b
}

/// The leading m×m part of `b` into block `i` of a flat array of m×m blocks.
#[inline(always)]
fn store<const B: usize>(v: &mut [f64], i: usize, m: usize, b: &Block<B>) {
    let s = &mut v[m * m * i..m * m * (i + 1)];
    for r in 0..m {
        s[m * r..m * r + m].copy_from_slice(&b[r][..m]);
    }
}

impl<const B: usize> BlockThomas<B> {
    /// A solver for `n` blocks (its factor arrays are sized by the first factorisation).
    pub fn new(n: usize) -> Self {
        BlockThomas {
            n,
            inv: Vec::new(),
            e: Vec::new(),
            lower: Vec::new(),
            reduced: false,
            last: Vec::new(),
            borrow: false,
            borrowed: false,
        }
    }

    /// Sizes the factor arrays for blocks of m×m (and the last rows when reduced), but
    /// the lower blocks and last rows when they are `borrowed` from the matrix.
    fn reserve(&mut self, m: usize, reduced: bool, borrowed: bool) {
        let need = m * m * self.n;
        for v in [&mut self.inv, &mut self.e] {
            if v.len() < need {
                v.resize(need, 0.0);
            }
        }
        if !borrowed && self.lower.len() < need {
            self.lower.resize(need, 0.0);
        }
        if reduced && !borrowed && self.last.len() < self.n {
            self.last.resize(self.n, [0.0; B]);
        }
    }

    /// Inverse of the leading (B−1)×(B−1) part of `bp` (the rest zero), or `None` when
    /// it is singular. For 2×2: by the adjugate, with the determinant's size judged
    /// against the entries; otherwise by pivoted LU of the block with a unit last pivot.
    fn reduced_inverse(bp: &Block<B>) -> Option<Block<B>> {
        let m = B - 1;
        let mut inv = zero_block::<B>();
        if m == 2 {
            let det = bp[0][0] * bp[1][1] - bp[0][1] * bp[1][0];
            let size = [bp[0][0], bp[0][1], bp[1][0], bp[1][1]]
                .iter()
                .fold(0.0f64, |s, x| s.max(x.abs()));
            if !(det.is_finite() && det.abs() > f64::EPSILON * f64::EPSILON * size * size) {
                return None;
            }
            let r = 1.0 / det;
            inv[0][0] = bp[1][1] * r;
            inv[0][1] = -bp[0][1] * r;
            inv[1][0] = -bp[1][0] * r;
            inv[1][1] = bp[0][0] * r;
            return Some(inv);
        }
        let mut t = zero_block::<B>();
        for r in 0..m {
            t[r][..m].copy_from_slice(&bp[r][..m]);
        }
        t[m][m] = 1.0;
        let full = LuBlock::factor(&t, 0).ok()?.inverse();
        for r in 0..m {
            inv[r][..m].copy_from_slice(&full[r][..m]);
        }
        Some(inv)
    }

    fn factor_reduced<S: BlockSource<B>>(&mut self, a: &S) -> Result<(), LinearError> {
        let n = self.n;
        let m = B - 1;
        // The leading (m×m) part of a block.
        let sub = |b: &Block<B>| {
            let mut s = zero_block::<B>();
            for r in 0..m {
                s[r][..m].copy_from_slice(&b[r][..m]);
            }
            s
        };
        for i in 0..n {
            let d = a.diag(i);
            let mut bp = sub(&d);
            let low = sub(&a.lower(i));
            if i > 0 {
                let e = &load::<B>(&self.e, i - 1, m);
                for r in 0..m {
                    for c in 0..m {
                        let mut s = low[r][0] * e[0][c];
                        for k in 1..m {
                            s += low[r][k] * e[k][c];
                        }
                        bp[r][c] -= s;
                    }
                }
            }
            let inv = Self::reduced_inverse(&bp).ok_or(LinearError::Singular { index: B * i })?;
            if i + 1 < n {
                let c = sub(&a.upper(i));
                let mut e = zero_block::<B>();
                for r in 0..m {
                    for q in 0..m {
                        let mut s = inv[r][0] * c[0][q];
                        for k in 1..m {
                            s += inv[r][k] * c[k][q];
                        }
                        e[r][q] = s;
                    }
                }
                store(&mut self.e, i, m, &e);
            }
            store(&mut self.inv, i, m, &inv);
            if d[m][m] == 0.0 || !d[m][m].is_finite() {
                return Err(LinearError::Singular { index: B * i + m });
            }
            if !self.borrowed {
                store(&mut self.lower, i, m, &low);
                self.last[i] = last_row(&d);
            }
        }
        Ok(())
    }

    /// The solve in the decoupled pattern, with the lower block and the last row of
    /// block row i from `lower(i)` and `last(i)` (kept, or read from the matrix).
    fn solve_reduced(
        &self,
        b: &mut [f64],
        lower: impl Fn(usize) -> Block<B>,
        last: impl Fn(usize) -> [f64; B],
    ) {
        let n = self.n;
        let m = B - 1;
        let mut prev = [0.0; B];
        for i in 0..n {
            let mut r = [0.0; B];
            r[..m].copy_from_slice(&b[B * i..B * i + m]);
            if i > 0 {
                let ly = mat_vec(&lower(i), &prev, m);
                for k in 0..m {
                    r[k] -= ly[k];
                }
            }
            prev = mat_vec(&load::<B>(&self.inv, i, m), &r, m);
            b[B * i..B * i + m].copy_from_slice(&prev[..m]);
        }
        let mut next = prev;
        for i in (0..n.saturating_sub(1)).rev() {
            let ex = mat_vec(&load::<B>(&self.e, i, m), &next, m);
            for k in 0..m {
                b[B * i + k] -= ex[k];
                next[k] = b[B * i + k];
            }
        }
        for (i, x) in b.chunks_exact_mut(B).enumerate() {
            let l = last(i);
            let mut s = x[m];
            for c in 0..m {
                s -= l[c] * x[c];
            }
            x[m] = s * l[m];
        }
    }

    /// Whether `b` has this solver's size and a factorisation is there to solve with.
    fn ready(&self, b: &[f64]) -> Result<(), LinearError> {
        if b.len() != B * self.n {
            return Err(LinearError::Pattern);
        }
        let m = if self.reduced { B - 1 } else { B };
        if self.inv.len() < m * m * self.n {
            // Not factorised yet.
            return Err(LinearError::Singular { index: 0 });
        }
        Ok(())
    }
}

/// The last row of a diagonal block in the decoupled pattern, as the solve uses it:
/// (a_0 … a_{B−2}, 1/a_{B−1}).
#[inline(always)]
fn last_row<const B: usize>(d: &Block<B>) -> [f64; B] {
    let m = B - 1;
    let mut last = [0.0; B];
    last[..m].copy_from_slice(&d[m][..m]);
    last[m] = 1.0 / d[m][m];
    last
}

impl<const B: usize> BlockThomas<B> {
    /// The factorisation of the matrix whose blocks `a` gives; with `borrow`, in the
    /// decoupled pattern, without its lower blocks and last rows (read from `a` again by
    /// the solve).
    fn factor_from<S: BlockSource<B>>(&mut self, a: &S, borrow: bool) -> Result<(), LinearError> {
        if a.blocks() != self.n {
            return Err(LinearError::Pattern);
        }
        self.reduced = a.last_decoupled();
        if self.reduced {
            self.borrowed = borrow;
            if borrow {
                // Not filled by this factorisation: freed (no-op when empty).
                self.lower = Vec::new();
                self.last = Vec::new();
            }
            self.reserve(B - 1, true, borrow);
            return self.factor_reduced(a);
        }
        self.borrowed = false;
        self.reserve(B, false, false);
        let n = self.n;
        for i in 0..n {
            let mut bp = a.diag(i);
            let low = a.lower(i);
            if i > 0 {
                let ae = mat_mul(&low, &load::<B>(&self.e, i - 1, B));
                for (row, ae_row) in bp.iter_mut().zip(ae.iter()) {
                    for (x, y) in row.iter_mut().zip(ae_row.iter()) {
                        *x -= y;
                    }
                }
            }
            let inv = LuBlock::factor(&bp, B * i)?.inverse();
            if i + 1 < n {
                // E_i = B'_i⁻¹ C_i.
                store(&mut self.e, i, B, &mat_mul(&inv, &a.upper(i)));
            }
            store(&mut self.inv, i, B, &inv);
            store(&mut self.lower, i, B, &low);
        }
        Ok(())
    }
}

impl<const B: usize> LinearSolver<B> for BlockThomas<B> {
    fn factor(&mut self, a: &BlockTri<B>) -> Result<(), LinearError> {
        self.factor_from(a, false)
    }

    fn factor_scaled(&mut self, m: &Scaled<B>) -> Result<(), LinearError> {
        self.factor_from(m, self.borrow)
    }

    fn borrow_from_matrix(&mut self, borrow: bool) {
        self.borrow = borrow;
    }

    fn solve_scaled(&mut self, a: &Scaled<B>, b: &mut [f64]) -> Result<(), LinearError> {
        if !self.borrowed {
            return self.solve(b);
        }
        self.ready(b)?;
        // (The solve reads only the leading (B−1)×(B−1) part of a lower block.)
        self.solve_reduced(b, |i| a.lower(i), |i| last_row(&a.diag(i)));
        all_finite(b)
    }

    fn solve(&mut self, b: &mut [f64]) -> Result<(), LinearError> {
        self.ready(b)?;
        if self.borrowed {
            // The factors lack what the matrix holds (see `solve_scaled`).
            return Err(LinearError::Pattern);
        }
        if self.reduced {
            let m = B - 1;
            self.solve_reduced(b, |i| load::<B>(&self.lower, i, m), |i| self.last[i]);
            return all_finite(b);
        }
        let n = self.n;
        let mut prev = [0.0; B];
        for i in 0..n {
            let mut r = [0.0; B];
            r.copy_from_slice(&b[B * i..B * i + B]);
            if i > 0 {
                let ay = mat_vec(&load::<B>(&self.lower, i, B), &prev, B);
                for k in 0..B {
                    r[k] -= ay[k];
                }
            }
            prev = mat_vec(&load::<B>(&self.inv, i, B), &r, B);
            b[B * i..B * i + B].copy_from_slice(&prev);
        }
        let mut next = prev;
        for i in (0..n.saturating_sub(1)).rev() {
            let ex = mat_vec(&load::<B>(&self.e, i, B), &next, B);
            for k in 0..B {
                b[B * i + k] -= ex[k];
                next[k] = b[B * i + k];
            }
        }
        all_finite(b)
    }

    fn name(&self) -> &'static str {
        "block-tridiagonal"
    }

    fn arrays(&self, out: &mut Vec<crate::memory::ArrayCost>) {
        use crate::memory::push;
        const OWNER: &str = "block-tridiagonal LU";
        push(out, OWNER, "pivot inverses", &self.inv);
        push(out, OWNER, "upper factors", &self.e);
        push(out, OWNER, "lower blocks", &self.lower);
        push(out, OWNER, "algebraic rows", &self.last);
    }
}

/// Where a stored value of the sparse matrix comes from in a block-tridiagonal matrix:
/// the block (0 lower, 1 diagonal, 2 upper), its index and the entry's row and column.
#[derive(Debug, Clone, Copy)]
struct BlockEntry {
    kind: u8,
    block: usize,
    row: u16,
    col: u16,
}

/// faer's sparse LU for a fixed sparsity pattern, assembled in compressed-column form
/// with `sprs`. The pattern and the symbolic analysis are built once; each factorisation
/// copies the values into the CSC value array and refactors numerically (no allocation
/// after the first call).
///
/// Two ways in: [`SparseLu::factor_csc`] takes any `sprs` matrix of the pattern the
/// solver was built with ([`SparseLu::new`]), for coupled unknowns whose pattern is not
/// block-tridiagonal; as a [`LinearSolver`] it takes block-tridiagonal matrices
/// ([`SparseLu::block_tridiagonal`] builds that pattern).
pub struct SparseLu {
    dim: usize,
    col_ptr: Vec<usize>,
    row_idx: Vec<usize>,
    values: Vec<f64>,
    /// For each stored value, its place in a block-tridiagonal matrix (empty for a
    /// general pattern), and that matrix's block size and block count.
    source: Vec<BlockEntry>,
    block: usize,
    blocks: usize,
    symbolic: Option<SymbolicLu<usize>>,
    numeric: NumericLu<usize, f64>,
    factor_mem: MemBuffer,
    solve_mem: MemBuffer,
    factored: bool,
}

impl SparseLu {
    /// A solver for square matrices with the sparsity pattern of `pattern` (its stored
    /// entries; the values are not used). The symbolic analysis is done here.
    pub fn new(pattern: &CsMat<f64>) -> Self {
        let csc = if pattern.is_csc() {
            pattern.clone()
        } else {
            pattern.to_csc()
        };
        let dim = csc.cols();
        let col_ptr = csc.indptr().to_proper().into_owned();
        let row_idx = csc.indices().to_vec();
        let values = vec![0.0; row_idx.len()];
        let symbolic = if csc.rows() == dim {
            let sym = SymbolicSparseColMatRef::new_checked(dim, dim, &col_ptr, None, &row_idx);
            factorize_symbolic_lu(sym, Default::default()).ok()
        } else {
            None
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
            dim,
            col_ptr,
            row_idx,
            values,
            source: Vec::new(),
            block: 0,
            blocks: 0,
            symbolic,
            numeric: NumericLu::new(),
            factor_mem,
            solve_mem,
            factored: false,
        }
    }

    /// The pattern of a block-tridiagonal matrix of `n` blocks of size `b`, assembled
    /// with `sprs` (every entry of the three block diagonals stored).
    pub fn block_tridiagonal_pattern(b: usize, n: usize) -> CsMat<f64> {
        let dim = b * n;
        let mut tri = TriMat::with_capacity((dim, dim), 3 * b * b * n);
        for rb in 0..n {
            for cb in rb.saturating_sub(1)..(rb + 2).min(n) {
                for r in 0..b {
                    for c in 0..b {
                        tri.add_triplet(b * rb + r, b * cb + c, 1.0);
                    }
                }
            }
        }
        tri.to_csc()
    }

    /// The solver for block-tridiagonal matrices of `n` blocks of size `b`.
    pub fn block_tridiagonal(b: usize, n: usize) -> Self {
        let mut s = SparseLu::new(&Self::block_tridiagonal_pattern(b, n));
        for j in 0..s.dim {
            for &row in &s.row_idx[s.col_ptr[j]..s.col_ptr[j + 1]] {
                let (rb, cb) = (row / b, j / b);
                let kind = if rb == cb {
                    1
                } else if rb == cb + 1 {
                    0 // row block cb+1 sees column block cb through its lower block
                } else {
                    2 // row block cb−1 sees column block cb through its upper block
                };
                s.source.push(BlockEntry {
                    kind,
                    block: rb,
                    row: (row % b) as u16,
                    col: (j % b) as u16,
                });
            }
        }
        s.block = b;
        s.blocks = n;
        s
    }

    /// Numeric factorisation of the values now in `self.values`.
    fn factor_values(&mut self) -> Result<(), LinearError> {
        if let Some(k) = self.values.iter().position(|x| !x.is_finite()) {
            return Err(LinearError::Singular {
                index: self.row_idx[k],
            });
        }
        let symbolic = self
            .symbolic
            .as_ref()
            .ok_or(LinearError::Singular { index: 0 })?;
        let dim = self.dim;
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

    /// Numeric factorisation of `a`, which must have the pattern the solver was built
    /// with (in CSC form: the same column pointers and row indices).
    pub fn factor_csc(&mut self, a: &CsMat<f64>) -> Result<(), LinearError> {
        if !a.is_csc()
            || a.rows() != self.dim
            || a.cols() != self.dim
            || a.indptr().to_proper().as_ref() != self.col_ptr.as_slice()
            || a.indices() != self.row_idx.as_slice()
        {
            return Err(LinearError::Pattern);
        }
        self.values.copy_from_slice(a.data());
        self.factor_values()
    }

    /// Solves A x = b in place with the last factorisation.
    pub fn solve_in_place(&mut self, b: &mut [f64]) -> Result<(), LinearError> {
        let symbolic = self
            .symbolic
            .as_ref()
            .ok_or(LinearError::Singular { index: 0 })?;
        if !self.factored {
            return Err(LinearError::Singular { index: 0 });
        }
        if b.len() != self.dim {
            return Err(LinearError::Pattern);
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
}

impl SparseLu {
    /// The factorisation of the block-tridiagonal matrix whose entries `a` gives.
    fn factor_from<const B: usize, S: BlockSource<B>>(&mut self, a: &S) -> Result<(), LinearError> {
        if self.block != B || self.blocks != a.blocks() {
            return Err(LinearError::Pattern);
        }
        for (v, s) in self.values.iter_mut().zip(self.source.iter()) {
            *v = a.entry(s.kind, s.block, s.row as usize, s.col as usize);
        }
        self.factor_values()
    }
}

impl<const B: usize> LinearSolver<B> for SparseLu {
    fn factor(&mut self, a: &BlockTri<B>) -> Result<(), LinearError> {
        self.factor_from(a)
    }

    fn factor_scaled(&mut self, m: &Scaled<B>) -> Result<(), LinearError> {
        self.factor_from(m)
    }

    fn solve(&mut self, b: &mut [f64]) -> Result<(), LinearError> {
        self.solve_in_place(b)
    }

    fn name(&self) -> &'static str {
        "sparse-lu"
    }

    fn arrays(&self, out: &mut Vec<crate::memory::ArrayCost>) {
        use crate::memory::push;
        const OWNER: &str = "sparse LU";
        push(out, OWNER, "pattern and values", &self.col_ptr);
        push(out, OWNER, "pattern and values", &self.row_idx);
        push(out, OWNER, "pattern and values", &self.values);
        push(out, OWNER, "pattern and values", &self.source);
        // (faer's numeric factors and work buffers are not counted here.)
    }
}
