//! Block-tridiagonal matrices with 3×3 blocks: the Jacobian's pattern on a 1-D mesh.

/// A 3×3 block, row-major: entry (r, c) at `r * 3 + c`.
pub type Block = [f64; 9];

/// Block-tridiagonal matrix. Row block i couples cell i to cells i−1 (`lower[i]`),
/// i (`diag[i]`) and i+1 (`upper[i]`); `lower[0]` and `upper[n−1]` are unused (zero).
#[derive(Debug, Clone)]
pub struct BlockTri {
    pub n: usize,
    pub lower: Vec<Block>,
    pub diag: Vec<Block>,
    pub upper: Vec<Block>,
}

impl BlockTri {
    pub fn new(n: usize) -> Self {
        BlockTri {
            n,
            lower: vec![[0.0; 9]; n],
            diag: vec![[0.0; 9]; n],
            upper: vec![[0.0; 9]; n],
        }
    }
    pub fn zero(&mut self) {
        for b in self
            .lower
            .iter_mut()
            .chain(self.diag.iter_mut())
            .chain(self.upper.iter_mut())
        {
            *b = [0.0; 9];
        }
    }
    /// The block coupling row block `row` to column block `col` (|row − col| ≤ 1).
    #[inline]
    pub fn block_mut(&mut self, row: usize, col: usize) -> &mut Block {
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
            for r in 0..3 {
                let mut s = 0.0;
                for c in 0..3 {
                    s += self.diag[i][r * 3 + c] * x[3 * i + c];
                    if i > 0 {
                        s += self.lower[i][r * 3 + c] * x[3 * (i - 1) + c];
                    }
                    if i + 1 < n {
                        s += self.upper[i][r * 3 + c] * x[3 * (i + 1) + c];
                    }
                }
                y[3 * i + r] = s;
            }
        }
    }
    /// Scales rows by `row[k]` and columns by `col[k]`: A ← diag(row) A diag(col).
    pub fn scale(&mut self, row: &[f64], col: &[f64]) {
        let n = self.n;
        for i in 0..n {
            for r in 0..3 {
                let rs = row[3 * i + r];
                for c in 0..3 {
                    self.diag[i][r * 3 + c] *= rs * col[3 * i + c];
                    if i > 0 {
                        self.lower[i][r * 3 + c] *= rs * col[3 * (i - 1) + c];
                    }
                    if i + 1 < n {
                        self.upper[i][r * 3 + c] *= rs * col[3 * (i + 1) + c];
                    }
                }
            }
        }
    }
}
