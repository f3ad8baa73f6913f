//! The small dense solve shared by cycle skipping's per-block inversion and Anderson
//! acceleration (`solve::linear::solve_dense`), on systems whose solutions are known by
//! construction (b = A x for a chosen x).

use deepdry::solve::linear::solve_dense;

#[test]
fn a_system_that_needs_pivoting_is_solved() {
    // A zero first pivot; x = (1, 2, 3), so b = (7, 3, 11).
    let mut a = [
        [0.0, 2.0, 1.0, 7.0],
        [1.0, 1.0, 0.0, 3.0],
        [2.0, 0.0, 3.0, 11.0],
    ];
    let mut x = [0.0; 3];
    assert!(solve_dense(&mut a, &mut x));
    for (got, want) in x.iter().zip([1.0, 2.0, 3.0]) {
        assert!((got - want).abs() < 1e-14, "{x:?}");
    }
    // Rows as vectors (Anderson's normal equations), of a system of two.
    let mut a = vec![vec![4.0, 1.0, 6.0], vec![1.0, 3.0, 7.0]];
    let mut x = vec![0.0; 2];
    assert!(solve_dense(&mut a, &mut x));
    assert!(
        (x[0] - 1.0).abs() < 1e-14 && (x[1] - 2.0).abs() < 1e-14,
        "{x:?}"
    );
}

#[test]
fn a_singular_or_non_finite_system_is_refused() {
    let mut a = [[1.0, 2.0, 3.0], [2.0, 4.0, 6.0]];
    assert!(!solve_dense(&mut a, &mut [0.0; 2]));
    let mut a = [[f64::NAN, 1.0, 1.0], [1.0, 1.0, 2.0]];
    assert!(!solve_dense(&mut a, &mut [0.0; 2]));
}
