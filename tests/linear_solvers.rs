//! The block-tridiagonal solver and faer's sparse LU give the same solution of the same
//! system, for every block size, and that solution satisfies A x = b (exact linear
//! algebra; common practice). The sparse LU also takes a general pattern assembled with
//! `sprs`, checked against the dense solution of the same system.

use deepdry::solve::blocktri::{Block, BlockRows, BlockTri, PackedTri, Scaled};
use deepdry::solve::linear::{BlockThomas, LinearError, LinearSolver, SparseLu};
use sprs::TriMat;

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

fn random_system<const B: usize>(n: usize, seed: u64) -> (BlockTri<B>, Vec<f64>) {
    let mut rng = Rng(seed);
    let mut a = BlockTri::<B>::new(n);
    for i in 0..n {
        for r in 0..B {
            for c in 0..B {
                a.diag[i][r][c] = rng.next();
                if i > 0 {
                    a.lower[i][r][c] = 0.3 * rng.next();
                }
                if i + 1 < n {
                    a.upper[i][r][c] = 0.3 * rng.next();
                }
            }
        }
        // Diagonally dominant blocks, with (for B ≥ 2) one row that needs pivoting
        // inside the block (zero leading entry), as the algebraic vapour row can.
        for r in 0..B {
            a.diag[i][r][r] += 4.0 * (1.0 + r as f64);
        }
        if B >= 2 {
            a.diag[i][0][0] = 0.0;
            a.diag[i][0][1] = 5.0;
            a.diag[i][1][0] = 6.0;
        }
    }
    let b = (0..B * n).map(|_| rng.next()).collect();
    (a, b)
}

/// The pattern of equilibrium mode: the last unknown of each block appears only in its
/// own row, which couples only within the block (the algebraic vapour row).
fn decoupled_system<const B: usize>(n: usize, seed: u64) -> (BlockTri<B>, Vec<f64>) {
    let (mut a, b) = random_system::<B>(n, seed);
    let m = B - 1;
    for i in 0..n {
        for r in 0..m {
            a.diag[i][r][m] = 0.0;
        }
        for r in 0..B {
            for c in 0..B {
                if r == m || c == m {
                    a.lower[i][r][c] = 0.0;
                    a.upper[i][r][c] = 0.0;
                }
            }
        }
        // Keep the leading block regular without pivoting beyond it.
        a.diag[i][0][0] = 3.0;
    }
    (a, b)
}

/// max |A x − b|.
fn residual<const B: usize>(a: &BlockTri<B>, x: &[f64], b: &[f64]) -> f64 {
    let mut ax = vec![0.0; x.len()];
    a.mul_vec_into(x, &mut ax);
    ax.iter()
        .zip(b)
        .map(|(p, q)| (p - q).abs())
        .fold(0.0, f64::max)
}

fn max_diff(x: &[f64], y: &[f64]) -> f64 {
    x.iter()
        .zip(y)
        .map(|(p, q)| (p - q).abs())
        .fold(0.0, f64::max)
}

/// Both solvers on the full and the decoupled pattern of block size B.
fn agree<const B: usize>() {
    let cases = [(1usize, 7u64), (2, 11), (50, 13), (600, 17)];
    let mut systems: Vec<(usize, (BlockTri<B>, Vec<f64>))> = cases
        .iter()
        .map(|&(n, seed)| (n, random_system::<B>(n, seed)))
        .collect();
    if B >= 2 {
        systems.extend(
            cases
                .iter()
                .map(|&(n, seed)| (n, decoupled_system::<B>(n, seed + 100))),
        );
    }
    for (n, (a, b)) in systems {
        let mut x1 = b.clone();
        let mut bt = BlockThomas::<B>::new(n);
        bt.factor(&a).unwrap();
        bt.solve(&mut x1).unwrap();
        let mut x2 = b.clone();
        let mut lu = SparseLu::block_tridiagonal(B, n);
        LinearSolver::<B>::factor(&mut lu, &a).unwrap();
        LinearSolver::<B>::solve(&mut lu, &mut x2).unwrap();
        let res = residual(&a, &x1, &b);
        let diff = max_diff(&x1, &x2);
        let scale = x1.iter().map(|v| v.abs()).fold(0.0, f64::max);
        assert!(res < 1e-12, "B = {B}, n = {n}: residual {res}");
        assert!(
            diff < 1e-11 * scale.max(1.0),
            "B = {B}, n = {n}: solvers differ by {diff}"
        );
    }
}

#[test]
fn block_thomas_and_sparse_lu_agree_for_block_sizes_1_to_4() {
    agree::<1>();
    agree::<2>();
    agree::<3>();
    agree::<4>();
}

/// The scaled Newton matrix diag(row) (A + dc·S) diag(col), read block by block by
/// `factor_scaled`, gives bitwise the solution of the same matrix stored and factorised
/// with `factor`, for both solvers and both patterns (general and decoupled).
fn scaled_agrees<const B: usize>(decoupled: bool) {
    let n = 9;
    let (a, b) = if decoupled {
        decoupled_system::<B>(n, 17)
    } else {
        random_system::<B>(n, 17)
    };
    let mut rng = Rng(99);
    // Storage blocks with the pattern of the diagonal (zero where it is zero).
    let s: Vec<Block<B>> = a
        .diag
        .iter()
        .map(|d| d.map(|r| r.map(|x| if x == 0.0 { 0.0 } else { rng.next() })))
        .collect();
    let row: Vec<f64> = (0..B * n).map(|_| 1.5 + rng.next()).collect();
    let col: Vec<f64> = (0..B * n).map(|_| 1.5 + rng.next()).collect();
    // Stored in full blocks, and (for the decoupled pattern) packed: (B−1)×(B−1) blocks
    // plus the last row of the diagonal ones.
    let packings: &[bool] = if decoupled { &[false, true] } else { &[false] };
    for (dc, &packed) in [0.0, 0.7]
        .into_iter()
        .flat_map(|dc| packings.iter().map(move |p| (dc, p)))
    {
        let ap = PackedTri::from_matrix(&a, packed);
        // Packed storage blocks have no last row (an algebraic unknown has no storage).
        let s: Vec<Block<B>> = s
            .iter()
            .map(|si| {
                let mut si = *si;
                if packed {
                    si[B - 1] = [0.0; B];
                }
                si
            })
            .collect();
        let mut sp = PackedTri::storage(n, packed);
        for (i, si) in s.iter().enumerate() {
            sp.set_diag(i, si);
        }
        let m = Scaled {
            a: &ap,
            s: &sp,
            dc,
            row: &row,
            col: &col,
        };
        let mut stored = BlockTri::<B>::new(n);
        m.into_matrix(&mut stored);
        // The stored copy is what its definition says, entry by entry.
        for i in 0..n {
            for r in 0..B {
                for c in 0..B {
                    let d = (a.diag[i][r][c] + dc * s[i][r][c]) * row[B * i + r] * col[B * i + c];
                    assert!((stored.diag[i][r][c] - d).abs() <= 1e-14 * d.abs().max(1.0));
                }
            }
        }
        let solvers: Vec<Box<dyn Fn() -> Box<dyn LinearSolver<B>>>> = vec![
            Box::new(move || Box::new(BlockThomas::<B>::new(n))),
            Box::new(move || Box::new(SparseLu::block_tridiagonal(B, n))),
        ];
        for make in &solvers {
            let (mut one, mut two) = (make(), make());
            one.factor(&stored).unwrap();
            two.factor_scaled(&m).unwrap();
            let (mut x1, mut x2) = (b.clone(), b.clone());
            one.solve(&mut x1).unwrap();
            two.solve(&mut x2).unwrap();
            assert_eq!(x1, x2, "{} B = {B} dc = {dc} packed {packed}", one.name());
            assert!(residual(&stored, &x1, &b) < 1e-10);
            // Borrowing from the matrix (`memory = "lean"`): the factors leave out what
            // the solve reads from `m` again, with bitwise the same solution; a plain
            // solve without the matrix is refused where something was left out.
            let mut three = make();
            three.borrow_from_matrix(true);
            three.factor_scaled(&m).unwrap();
            let mut x3 = b.clone();
            three.solve_scaled(&m, &mut x3).unwrap();
            assert_eq!(x3, x1, "{} borrowing, B = {B} dc = {dc}", one.name());
            let mut x4 = b.clone();
            let plain = three.solve(&mut x4);
            let left_out = decoupled && one.name() == "block-tridiagonal";
            assert_eq!(plain.is_err(), left_out, "{} plain solve", one.name());
            let (mut full, mut lean) = (Vec::new(), Vec::new());
            two.arrays(&mut full);
            three.arrays(&mut lean);
            let bytes = |v: &[deepdry::memory::ArrayCost]| v.iter().map(|a| a.bytes).sum::<usize>();
            if left_out {
                // The lower blocks ((B−1)² values) and the algebraic rows (B) per block.
                let saved = n * 8 * ((B - 1) * (B - 1) + B);
                assert_eq!(bytes(&full) - bytes(&lean), saved);
            } else {
                assert_eq!(bytes(&full), bytes(&lean));
            }
        }
    }
}

#[test]
fn factorising_the_scaled_matrix_block_by_block_equals_factorising_it_stored() {
    scaled_agrees::<1>(false);
    scaled_agrees::<2>(false);
    scaled_agrees::<3>(false);
    scaled_agrees::<3>(true);
    scaled_agrees::<4>(true);
}

#[test]
fn refactor_reuses_the_pattern() {
    // A second factorisation with new values must give the new solution (no stale state).
    let n = 40;
    let (a1, b) = random_system::<3>(n, 3);
    let (a2, _) = random_system::<3>(n, 5);
    let (d1, _) = decoupled_system::<3>(n, 7);
    let (d2, _) = decoupled_system::<3>(n, 9);
    // Also from one pattern to the other (the block solver switches its method).
    for (first, second) in [(&a1, &a2), (&d1, &d2), (&d1, &a2), (&a1, &d2)] {
        for solver in [
            Box::new(BlockThomas::<3>::new(n)) as Box<dyn LinearSolver<3>>,
            Box::new(SparseLu::block_tridiagonal(3, n)),
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
    let a = BlockTri::<3>::new(n); // all zeros
    let mut bt = BlockThomas::<3>::new(n);
    assert!(bt.factor(&a).is_err());
    let mut lu = SparseLu::block_tridiagonal(3, n);
    let r = LinearSolver::<3>::factor(&mut lu, &a);
    let mut x = vec![1.0; 3 * n];
    assert!(r.is_err() || LinearSolver::<3>::solve(&mut lu, &mut x).is_err());
}

#[test]
fn a_matrix_of_another_size_is_refused() {
    let (a, _) = random_system::<3>(5, 1);
    let mut bt = BlockThomas::<3>::new(4);
    assert_eq!(bt.factor(&a), Err(LinearError::Pattern));
    let mut lu = SparseLu::block_tridiagonal(3, 4);
    assert_eq!(
        LinearSolver::<3>::factor(&mut lu, &a),
        Err(LinearError::Pattern)
    );
}

/// A general (not block-tridiagonal) pattern through `sprs` and the sparse LU: an arrow
/// matrix (dense last row and column, as a column-integrated unknown would couple to
/// every cell), solved and checked against A x = b computed by `sprs` itself.
#[test]
fn sparse_lu_solves_a_general_pattern_assembled_with_sprs() {
    let dim = 30;
    let mut rng = Rng(23);
    let mut tri = TriMat::new((dim, dim));
    for i in 0..dim {
        tri.add_triplet(i, i, 5.0 + rng.next());
        if i + 1 < dim {
            tri.add_triplet(i, i + 1, 0.5 * rng.next());
            tri.add_triplet(i + 1, i, 0.5 * rng.next());
        }
        if i + 1 < dim {
            tri.add_triplet(dim - 1, i, 0.2 * rng.next());
            tri.add_triplet(i, dim - 1, 0.2 * rng.next());
        }
    }
    let a = tri.to_csc::<usize>();
    let b: Vec<f64> = (0..dim).map(|_| rng.next()).collect();
    let mut lu = SparseLu::new(&a);
    lu.factor_csc(&a).unwrap();
    let mut x = b.clone();
    lu.solve_in_place(&mut x).unwrap();
    let ax = &a * &ndarray::Array1::from(x.clone());
    let res = max_diff(ax.as_slice().unwrap(), &b);
    assert!(res < 1e-13, "residual {res}");
    // Another pattern is refused, not misread.
    let mut other = TriMat::new((dim, dim));
    for i in 0..dim {
        other.add_triplet(i, i, 1.0);
    }
    assert_eq!(
        lu.factor_csc(&other.to_csc::<usize>()),
        Err(LinearError::Pattern)
    );
}
