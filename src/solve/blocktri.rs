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
        if B < 2 {
            return false;
        }
        let m = B - 1;
        let off = |b: &Block<B>| b[m].iter().all(|&x| x == 0.0) && b.iter().all(|r| r[m] == 0.0);
        let n = self.blocks();
        (0..n).all(|i| self.diag(i)[..m].iter().all(|r| r[m] == 0.0))
            && (0..n).all(|i| off(&self.lower(i)))
            && (0..n).all(|i| off(&self.upper(i)))
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
    pub a: &'a BlockTri<B>,
    pub s: &'a [Block<B>],
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
        let mut d = self.a.diag[i];
        if self.dc != 0.0 {
            for (x, y) in d.iter_mut().zip(self.s[i].iter()) {
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
        Self::scaled(&self.a.lower[i], rs, &self.col[B * (i - 1)..B * i])
    }
    #[inline(always)]
    fn upper(&self, i: usize) -> Block<B> {
        if i + 1 >= self.a.n {
            return zero_block();
        }
        let rs = &self.row[B * i..B * i + B];
        Self::scaled(&self.a.upper[i], rs, &self.col[B * (i + 1)..B * i + 2 * B])
    }
    /// From the unscaled blocks (the row and column scales are nonzero): a zero of
    /// A + dc·S is a zero of the scaled matrix.
    fn last_decoupled(&self) -> bool {
        if B < 2 {
            return false;
        }
        let m = B - 1;
        let off = |b: &Block<B>| b[m].iter().all(|&x| x == 0.0) && b.iter().all(|r| r[m] == 0.0);
        let a = self.a;
        (0..a.n).all(|i| self.shifted_diag(i)[..m].iter().all(|r| r[m] == 0.0))
            && a.lower[1..].iter().all(off)
            && a.upper[..a.n.saturating_sub(1)].iter().all(off)
    }
    fn entry(&self, kind: u8, i: usize, r: usize, c: usize) -> f64 {
        let (v, cb) = match kind {
            0 if i > 0 => (self.a.lower[i][r][c], i - 1),
            1 => (self.shifted_diag(i)[r][c], i),
            2 if i + 1 < self.a.n => (self.a.upper[i][r][c], i + 1),
            _ => return 0.0,
        };
        v * (self.row[B * i + r] * self.col[B * cb + c])
    }
}
