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
