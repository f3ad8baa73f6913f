//! Block-tridiagonal matrices with B×B blocks: the Jacobian's pattern on a 1-D mesh of
//! blocks of B unknowns each.

/// A B×B block, row-major: entry (r, c) at `[r][c]`.
pub type Block<const B: usize> = [[f64; B]; B];

/// The zero block.
#[inline]
pub const fn zero_block<const B: usize>() -> Block<B> {
    [[0.0; B]; B]
}

/// Block-tridiagonal matrix. Row block i couples block i to blocks i−1 (`lower[i]`),
/// i (`diag[i]`) and i+1 (`upper[i]`); `lower[0]` and `upper[n−1]` are unused (zero).
#[derive(Debug, Clone)]
pub struct BlockTri<const B: usize> {
    pub n: usize,
    pub lower: Vec<Block<B>>,
    pub diag: Vec<Block<B>>,
    pub upper: Vec<Block<B>>,
}

impl<const B: usize> BlockTri<B> {
    pub fn new(n: usize) -> Self {
        BlockTri {
            n,
            lower: vec![zero_block(); n],
            diag: vec![zero_block(); n],
            upper: vec![zero_block(); n],
        }
    }
    pub fn zero(&mut self) {
        for b in self
            .lower
            .iter_mut()
            .chain(self.diag.iter_mut())
            .chain(self.upper.iter_mut())
        {
            *b = zero_block();
        }
    }
    /// The block coupling row block `row` to column block `col` (|row − col| ≤ 1).
    #[inline]
    pub fn block_mut(&mut self, row: usize, col: usize) -> &mut Block<B> {
        if col == row {
            &mut self.diag[row]
        } else if col + 1 == row {
            &mut self.lower[row]
        } else {
            debug_assert_eq!(col, row + 1);
            &mut self.upper[row]
        }
    }
    /// y = A x.
    pub fn mul_vec_into(&self, x: &[f64], y: &mut [f64]) {
        let n = self.n;
        for i in 0..n {
            for r in 0..B {
                let mut s = 0.0;
                for c in 0..B {
                    s += self.diag[i][r][c] * x[B * i + c];
                    if i > 0 {
                        s += self.lower[i][r][c] * x[B * (i - 1) + c];
                    }
                    if i + 1 < n {
                        s += self.upper[i][r][c] * x[B * (i + 1) + c];
                    }
                }
                y[B * i + r] = s;
            }
        }
    }
    /// Scales rows by `row[k]` and columns by `col[k]`: A ← diag(row) A diag(col).
    pub fn scale(&mut self, row: &[f64], col: &[f64]) {
        let n = self.n;
        for i in 0..n {
            for r in 0..B {
                let rs = row[B * i + r];
                for c in 0..B {
                    self.diag[i][r][c] *= rs * col[B * i + c];
                    if i > 0 {
                        self.lower[i][r][c] *= rs * col[B * (i - 1) + c];
                    }
                    if i + 1 < n {
                        self.upper[i][r][c] *= rs * col[B * (i + 1) + c];
                    }
                }
            }
        }
    }
}

/// Where a problem writes its Jacobian: block row by block row.
pub trait BlockRows<const B: usize> {
    /// Sets block row `i`: the blocks coupling it to blocks i − 1 (`lower`, zero for
    /// i = 0), i (`diag`) and i + 1 (`upper`, zero for the last).
    fn set_row(&mut self, i: usize, lower: &Block<B>, diag: &Block<B>, upper: &Block<B>);
    /// Sets diagonal block `i` alone (a block-diagonal matrix, e.g. storage derivatives).
    fn set_diag(&mut self, i: usize, diag: &Block<B>);
}

impl<const B: usize> BlockRows<B> for BlockTri<B> {
    #[inline]
    fn set_row(&mut self, i: usize, lower: &Block<B>, diag: &Block<B>, upper: &Block<B>) {
        self.lower[i] = *lower;
        self.diag[i] = *diag;
        self.upper[i] = *upper;
    }
    #[inline]
    fn set_diag(&mut self, i: usize, diag: &Block<B>) {
        self.diag[i] = *diag;
    }
}

/// Diagonal blocks alone.
impl<const B: usize> BlockRows<B> for Vec<Block<B>> {
    fn set_row(&mut self, i: usize, _lower: &Block<B>, diag: &Block<B>, _upper: &Block<B>) {
        self[i] = *diag;
    }
    #[inline]
    fn set_diag(&mut self, i: usize, diag: &Block<B>) {
        self[i] = *diag;
    }
}

/// A block-tridiagonal matrix (or, without off-diagonal blocks, a block-diagonal one)
/// stored flat, m² values per block: m = B, or m = B − 1 when the last unknown of every
/// block is decoupled (it appears in no other row than its own, and its own row couples
/// only within the block): then the last row and column of the off-diagonal blocks and
/// the last column of the diagonal blocks above that row are zero by construction and
/// not stored, and the last row of each diagonal block is kept apart (B values). For
/// B = 3 that is 3 × 32 + 24 B per block row instead of 3 × 72 B. Storage derivatives
/// ([`PackedTri::storage`]) are diagonal blocks whose decoupled last unknown, being
/// algebraic, has no row at all (32 B instead of 72 B). Entries written where the
/// pattern has none are dropped (a broken promise of the problem; checked in debug
/// builds).
#[derive(Debug, Clone)]
pub struct PackedTri<const B: usize> {
    n: usize,
    m: usize,
    lower: Vec<f64>,
    diag: Vec<f64>,
    upper: Vec<f64>,
    last: Vec<[f64; B]>,
}

impl<const B: usize> PackedTri<B> {
    /// `n` zero block rows of a block-tridiagonal matrix; `decoupled`: the pattern above.
    pub fn new(n: usize, decoupled: bool) -> Self {
        let m = if decoupled && B >= 2 { B - 1 } else { B };
        PackedTri {
            n,
            m,
            lower: vec![0.0; m * m * n],
            diag: vec![0.0; m * m * n],
            upper: vec![0.0; m * m * n],
            last: if m < B { vec![[0.0; B]; n] } else { Vec::new() },
        }
    }

    /// `n` zero diagonal blocks of storage derivatives (the off-diagonal blocks read as
    /// zero and may not be set); `decoupled`: the last unknown is algebraic and
    /// decoupled, so the last row and column of every block are zero and not stored.
    pub fn storage(n: usize, decoupled: bool) -> Self {
        let m = if decoupled && B >= 2 { B - 1 } else { B };
        PackedTri {
            n,
            m,
            lower: Vec::new(),
            diag: vec![0.0; m * m * n],
            upper: Vec::new(),
            last: Vec::new(),
        }
    }

    /// A packed copy of `a` (entries outside the pattern dropped).
    pub fn from_matrix(a: &BlockTri<B>, decoupled: bool) -> Self {
        let mut p = PackedTri::new(a.n, decoupled);
        for i in 0..a.n {
            p.set_row(i, &a.lower[i], &a.diag[i], &a.upper[i]);
        }
        p
    }

    /// Its heap arrays (see [`crate::memory`]), named by `names`: the lower, diagonal and
    /// upper blocks and the diagonal blocks' last rows (arrays left empty are listed
    /// with 0 B).
    pub fn arrays(
        &self,
        out: &mut Vec<crate::memory::ArrayCost>,
        owner: &'static str,
        names: [&'static str; 4],
    ) {
        use crate::memory::push;
        push(out, owner, names[0], &self.lower);
        push(out, owner, names[1], &self.diag);
        push(out, owner, names[2], &self.upper);
        push(out, owner, names[3], &self.last);
    }

    /// Whether the last unknown of every block is decoupled (see the type).
    #[inline]
    pub fn decoupled(&self) -> bool {
        self.m < B
    }

    /// The leading m×m part of `b` into block `i` of `v` (m a constant where inlined,
    /// see [`PackedTri::pack`]).
    #[inline(always)]
    fn pack_m(v: &mut [f64], m: usize, i: usize, b: &Block<B>) {
        let s = &mut v[m * m * i..m * m * (i + 1)];
        for r in 0..m {
            for c in 0..m {
                s[m * r + c] = b[r][c];
            }
        }
    }

    /// Block `i` of `v` as a B×B block (zero outside the leading m×m part).
    #[inline(always)]
    fn unpack_m(v: &[f64], m: usize, i: usize) -> Block<B> {
        let mut b = zero_block::<B>();
        let s = &v[m * m * i..m * m * (i + 1)];
        for r in 0..m {
            for c in 0..m {
                b[r][c] = s[m * r + c];
            }
        }
        b
    }

    /// [`PackedTri::pack_m`] with the block size a constant in each branch.
    #[inline(always)]
    fn pack(v: &mut [f64], m: usize, i: usize, b: &Block<B>) {
        if m == B {
            Self::pack_m(v, B, i, b)
        } else {
            Self::pack_m(v, B - 1, i, b)
        }
    }

    /// [`PackedTri::unpack_m`] with the block size a constant in each branch.
    #[inline(always)]
    fn unpack(v: &[f64], m: usize, i: usize) -> Block<B> {
        if m == B {
            Self::unpack_m(v, B, i)
        } else {
            Self::unpack_m(v, B - 1, i)
        }
    }

    /// Whether `b` has entries only where an off-diagonal (`diag` false) or diagonal
    /// block of the decoupled pattern may.
    fn fits(b: &Block<B>, m: usize, diag: bool) -> bool {
        m == B
            || (b[..m].iter().all(|r| r[m..].iter().all(|&x| x == 0.0))
                && (diag || b[m..].iter().all(|r| r.iter().all(|&x| x == 0.0))))
    }
}

impl<const B: usize> BlockRows<B> for PackedTri<B> {
    #[inline]
    fn set_diag(&mut self, i: usize, d: &Block<B>) {
        let m = self.m;
        debug_assert!(
            Self::fits(d, m, !self.last.is_empty()),
            "diagonal block {i} outside the pattern"
        );
        Self::pack(&mut self.diag, m, i, d);
        if m < B && !self.last.is_empty() {
            self.last[i] = d[m];
        }
    }
    #[inline]
    fn set_row(&mut self, i: usize, lower: &Block<B>, diag: &Block<B>, upper: &Block<B>) {
        let m = self.m;
        self.set_diag(i, diag);
        if self.lower.is_empty() {
            debug_assert!(lower
                .iter()
                .chain(upper.iter())
                .flatten()
                .all(|&x| x == 0.0));
            return;
        }
        debug_assert!(Self::fits(lower, m, false) && Self::fits(upper, m, false));
        Self::pack(&mut self.lower, m, i, lower);
        Self::pack(&mut self.upper, m, i, upper);
    }
}

impl<const B: usize> BlockSource<B> for PackedTri<B> {
    #[inline]
    fn blocks(&self) -> usize {
        self.n
    }
    #[inline(always)]
    fn diag(&self, i: usize) -> Block<B> {
        let mut b = Self::unpack(&self.diag, self.m, i);
        if self.m < B && !self.last.is_empty() {
            b[self.m] = self.last[i];
        }
        b
    }
    #[inline(always)]
    fn lower(&self, i: usize) -> Block<B> {
        if self.lower.is_empty() {
            return zero_block();
        }
        Self::unpack(&self.lower, self.m, i)
    }
    #[inline(always)]
    fn upper(&self, i: usize) -> Block<B> {
        if self.upper.is_empty() {
            return zero_block();
        }
        Self::unpack(&self.upper, self.m, i)
    }
    fn entry(&self, kind: u8, i: usize, r: usize, c: usize) -> f64 {
        match kind {
            0 => self.lower(i)[r][c],
            1 => self.diag(i)[r][c],
            _ => self.upper(i)[r][c],
        }
    }
    fn last_decoupled(&self) -> bool {
        if self.m < B {
            return true;
        }
        default_last_decoupled(self)
    }
}

/// [`BlockSource::last_decoupled`] by inspection of every block.
fn default_last_decoupled<const B: usize, S: BlockSource<B> + ?Sized>(s: &S) -> bool {
    if B < 2 {
        return false;
    }
    let m = B - 1;
    let off = |b: &Block<B>| b[m].iter().all(|&x| x == 0.0) && b.iter().all(|r| r[m] == 0.0);
    let n = s.blocks();
    (0..n).all(|i| s.diag(i)[..m].iter().all(|r| r[m] == 0.0))
        && (0..n).all(|i| off(&s.lower(i)))
        && (0..n).all(|i| off(&s.upper(i)))
}

/// Where a block-tridiagonal factorisation reads its blocks from: a stored matrix or one
/// computed block by block (see [`Scaled`]). `lower(0)` and `upper(n − 1)` are zero.
pub trait BlockSource<const B: usize> {
    /// The number of block rows.
    fn blocks(&self) -> usize;
    fn diag(&self, i: usize) -> Block<B>;
    fn lower(&self, i: usize) -> Block<B>;
    fn upper(&self, i: usize) -> Block<B>;
    /// One entry: of the lower (`kind` 0), diagonal (1) or upper (2) block `i`, at row
    /// `r` and column `c`.
    fn entry(&self, kind: u8, i: usize, r: usize, c: usize) -> f64;
    /// Whether the last unknown of every block is decoupled: it appears in no other row
    /// than its own, and its own row couples only within the block.
    fn last_decoupled(&self) -> bool {
        default_last_decoupled(self)
    }
}

impl<const B: usize> BlockSource<B> for BlockTri<B> {
    #[inline]
    fn blocks(&self) -> usize {
        self.n
    }
    #[inline]
    fn diag(&self, i: usize) -> Block<B> {
        self.diag[i]
    }
    #[inline]
    fn lower(&self, i: usize) -> Block<B> {
        self.lower[i]
    }
    #[inline]
    fn upper(&self, i: usize) -> Block<B> {
        self.upper[i]
    }
    #[inline]
    fn entry(&self, kind: u8, i: usize, r: usize, c: usize) -> f64 {
        match kind {
            0 => self.lower[i][r][c],
            1 => self.diag[i][r][c],
            _ => self.upper[i][r][c],
        }
    }
}

/// The matrix diag(row) (A + dc·S) diag(col) of a Newton iteration, with S the diagonal
/// blocks of the storage derivatives, computed block by block where a factorisation reads
/// it: the scaled matrix is never stored (it would cost a second B×B block-tridiagonal
/// matrix per run, 3B² values per block row).
pub struct Scaled<'a, const B: usize> {
    pub a: &'a PackedTri<B>,
    /// Diagonal blocks only.
    pub s: &'a PackedTri<B>,
    pub dc: f64,
    pub row: &'a [f64],
    pub col: &'a [f64],
}

impl<const B: usize> Scaled<'_, B> {
    /// out = diag(rs) blk diag(cs).
    #[inline(always)]
    fn scaled(blk: &Block<B>, rs: &[f64], cs: &[f64]) -> Block<B> {
        let mut out = zero_block();
        for r in 0..B {
            for q in 0..B {
                out[r][q] = blk[r][q] * (rs[r] * cs[q]);
            }
        }
        out
    }
    /// The unscaled diagonal block A_ii + dc·S_i.
    #[inline(always)]
    fn shifted_diag(&self, i: usize) -> Block<B> {
        let mut d = self.a.diag(i);
        if self.dc != 0.0 {
            for (x, y) in d.iter_mut().zip(self.s.diag(i).iter()) {
                for (x, y) in x.iter_mut().zip(y.iter()) {
                    *x += self.dc * y;
                }
            }
        }
        d
    }
    /// The whole scaled matrix into `b` (same size).
    pub fn into_matrix(&self, b: &mut BlockTri<B>) {
        for i in 0..self.a.n {
            b.diag[i] = self.diag(i);
            b.lower[i] = self.lower(i);
            b.upper[i] = self.upper(i);
        }
    }
}

impl<const B: usize> BlockSource<B> for Scaled<'_, B> {
    #[inline]
    fn blocks(&self) -> usize {
        self.a.n
    }
    #[inline(always)]
    fn diag(&self, i: usize) -> Block<B> {
        let rs = &self.row[B * i..B * i + B];
        Self::scaled(&self.shifted_diag(i), rs, &self.col[B * i..B * i + B])
    }
    #[inline(always)]
    fn lower(&self, i: usize) -> Block<B> {
        if i == 0 {
            return zero_block();
        }
        let rs = &self.row[B * i..B * i + B];
        Self::scaled(&self.a.lower(i), rs, &self.col[B * (i - 1)..B * i])
    }
    #[inline(always)]
    fn upper(&self, i: usize) -> Block<B> {
        if i + 1 >= self.a.n {
            return zero_block();
        }
        let rs = &self.row[B * i..B * i + B];
        Self::scaled(&self.a.upper(i), rs, &self.col[B * (i + 1)..B * i + 2 * B])
    }
    /// From the unscaled blocks (the row and column scales are nonzero): a zero of
    /// A + dc·S is a zero of the scaled matrix.
    fn last_decoupled(&self) -> bool {
        if B < 2 {
            return false;
        }
        if self.a.decoupled() && (self.s.decoupled() || self.dc == 0.0) {
            // Zero by construction where the pattern has no entries.
            return true;
        }
        let m = B - 1;
        let off = |b: &Block<B>| b[m].iter().all(|&x| x == 0.0) && b.iter().all(|r| r[m] == 0.0);
        let a = self.a;
        (0..a.n).all(|i| self.shifted_diag(i)[..m].iter().all(|r| r[m] == 0.0))
            && (1..a.n).all(|i| off(&a.lower(i)))
            && (0..a.n.saturating_sub(1)).all(|i| off(&a.upper(i)))
    }
    fn entry(&self, kind: u8, i: usize, r: usize, c: usize) -> f64 {
        let (v, cb) = match kind {
            0 if i > 0 => (self.a.lower(i)[r][c], i - 1),
            1 => (self.shifted_diag(i)[r][c], i),
            2 if i + 1 < self.a.n => (self.a.upper(i)[r][c], i + 1),
            _ => return 0.0,
        };
        v * (self.row[B * i + r] * self.col[B * cb + c])
    }
}
