//! The block-tridiagonal solver and faer's sparse LU give the same solution of the same
//! system, and that solution satisfies A x = b (exact linear algebra; common practice).

use deepdry::solve::blocktri::BlockTri;
use deepdry::solve::linear::{BlockThomas, LinearSolver, SparseLu};

/// A deterministic pseudo-random generator (xorshift64*), so the test is repeatable.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        let v = self.0.wrapping_mul(0x2545_F491_4F6C_DD1D);
        (v >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
    }
}

fn random_system(n: usize, seed: u64) -> (BlockTri, Vec<f64>) {
    let mut rng = Rng(seed);
    let mut a = BlockTri::new(n);
    for i in 0..n {
        for k in 0..9 {
            a.diag[i][k] = rng.next();
            if i > 0 {
                a.lower[i][k] = 0.3 * rng.next();
            }
            if i + 1 < n {
                a.upper[i][k] = 0.3 * rng.next();
            }
        }
        // Diagonally dominant blocks, with one row that needs pivoting inside the block
        // (zero leading entry), as the algebraic vapour row can.
        for r in 0..3 {
            a.diag[i][r * 3 + r] += 4.0 * (1.0 + r as f64);
        }
        a.diag[i][0] = 0.0;
        a.diag[i][1] = 5.0;
        a.diag[i][3] = 6.0;
    }
    let b = (0..3 * n).map(|_| rng.next()).collect();
    (a, b)
}

/// The pattern of equilibrium mode: the third unknown of each cell appears only in its own
/// row, which couples only within the cell (the algebraic vapour row).
fn decoupled_system(n: usize, seed: u64) -> (BlockTri, Vec<f64>) {
    let (mut a, b) = random_system(n, seed);
    for i in 0..n {
        for k in [2, 5] {
            a.diag[i][k] = 0.0;
        }
        for k in [2, 5, 6, 7, 8] {
            a.lower[i][k] = 0.0;
            a.upper[i][k] = 0.0;
        }
        // Rows 0 and 1 need no pivoting beyond the 2×2 block here; keep them regular.
        a.diag[i][0] = 3.0;
    }
    (a, b)
}

/// max |A x − b|.
fn residual(a: &BlockTri, x: &[f64], b: &[f64]) -> f64 {
    let mut ax = vec![0.0; x.len()];
    a.mul_vec_into(x, &mut ax);
    ax.iter()
        .zip(b)
        .map(|(p, q)| (p - q).abs())
        .fold(0.0, f64::max)
}

#[test]
fn block_thomas_and_sparse_lu_agree() {
    let cases = [(1usize, 7u64), (2, 11), (50, 13), (600, 17)];
    let systems = cases
        .iter()
        .map(|&(n, seed)| (n, random_system(n, seed)))
        .chain(
            cases
                .iter()
                .map(|&(n, seed)| (n, decoupled_system(n, seed + 100))),
        );
    for (n, (a, b)) in systems {
        let mut x1 = b.clone();
        let mut bt = BlockThomas::new(n);
        bt.factor(&a).unwrap();
        bt.solve(&mut x1).unwrap();
        let mut x2 = b.clone();
        let mut lu = SparseLu::new(n);
        lu.factor(&a).unwrap();
        lu.solve(&mut x2).unwrap();
        let res = residual(&a, &x1, &b);
        let diff = x1
            .iter()
            .zip(&x2)
            .map(|(p, q)| (p - q).abs())
            .fold(0.0, f64::max);
        let scale = x1.iter().map(|v| v.abs()).fold(0.0, f64::max);
        assert!(res < 1e-12, "n = {n}: residual {res}");
        assert!(
            diff < 1e-11 * scale.max(1.0),
            "n = {n}: solvers differ by {diff}"
        );
    }
}

#[test]
fn refactor_reuses_the_pattern() {
    // A second factorisation with new values must give the new solution (no stale state).
    let n = 40;
    let (a1, b) = random_system(n, 3);
    let (a2, _) = random_system(n, 5);
    let (d1, _) = decoupled_system(n, 7);
    let (d2, _) = decoupled_system(n, 9);
    // Also from one pattern to the other (the block solver switches its method).
    for (first, second) in [(&a1, &a2), (&d1, &d2), (&d1, &a2), (&a1, &d2)] {
        for solver in [
            Box::new(BlockThomas::new(n)) as Box<dyn LinearSolver>,
            Box::new(SparseLu::new(n)),
        ] {
            let mut s = solver;
            s.factor(first).unwrap();
            s.factor(second).unwrap();
            let mut x = b.clone();
            s.solve(&mut x).unwrap();
            let res = residual(second, &x, &b);
            assert!(res < 1e-12, "{}: residual {res}", s.name());
        }
    }
}

#[test]
fn singular_block_is_an_error_not_a_panic() {
    let n = 3;
    let a = BlockTri::new(n); // all zeros
    let mut bt = BlockThomas::new(n);
    assert!(bt.factor(&a).is_err());
    let mut lu = SparseLu::new(n);
    let r = lu.factor(&a);
    let mut x = vec![1.0; 3 * n];
    assert!(r.is_err() || lu.solve(&mut x).is_err());
}
