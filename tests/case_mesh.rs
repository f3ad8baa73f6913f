//! The graded mesh generator.

use deepdry::mesh::{Grading, Mesh, MeshError, Resolution};

fn graded(surface: f64, bottom: f64, interface: Option<f64>, growth: f64) -> Grading {
    Grading {
        growth,
        surface_cell: Some(surface),
        bottom_cell: Some(bottom),
        interface_cell: interface,
    }
}

/// "300 m column, 600 cells, geometric growth 1.05 from 0.01 m at the surface and from
/// 0.05 m at the bottom, uniform in between."
#[test]
fn benchmark_mesh() {
    let m = Mesh::graded(
        &[0.0, 300.0],
        &graded(0.01, 0.05, None, 1.05),
        Resolution::Cells(600),
    )
    .unwrap();
    let w = &m.widths;
    assert_eq!(m.n_cells(), 600);
    assert_eq!(w[0], 0.01);
    assert!((w[599] - 0.05).abs() < 1e-9);
    assert!((w.iter().sum::<f64>() - 300.0).abs() < 1e-9);
    assert_eq!(m.faces[600], 300.0);
    // Graded runs with ratio exactly 1.05 from both ends …
    let (_, u) = m.width_range();
    let top_run = w.iter().take_while(|&&x| x < u * (1.0 - 1e-9)).count();
    let bottom_run = w
        .iter()
        .rev()
        .take_while(|&&x| x < u * (1.0 - 1e-9))
        .count();
    for k in 0..top_run - 1 {
        assert!((w[k + 1] / w[k] - 1.05).abs() < 1e-12);
    }
    for k in 0..bottom_run - 1 {
        assert!((w[598 - k] / w[599 - k] - 1.05).abs() < 1e-9);
    }
    // … and uniform in between, reached with a step no larger than the growth factor.
    for x in &w[top_run..600 - bottom_run] {
        assert!((x - u).abs() < 1e-9 * u);
    }
    assert!(u / w[top_run - 1] <= 1.05 + 1e-12 && u / w[top_run - 1] > 1.0);
    assert!(u / w[599 - bottom_run + 1] <= 1.05 + 1e-9);
    // Centres are midpoints.
    assert_eq!(m.centers[0], 0.005);
}

#[test]
fn layer_interfaces_are_faces_and_refined() {
    let b = [0.0, 12.5, 40.0, 100.0];
    let m = Mesh::graded(
        &b,
        &graded(0.01, 0.05, Some(0.02), 1.08),
        Resolution::Cells(400),
    )
    .unwrap();
    assert_eq!(m.n_cells(), 400);
    for z in [12.5, 40.0] {
        let i = m
            .faces
            .iter()
            .position(|&f| f == z)
            .expect("interface is a face");
        assert!((m.widths[i - 1] - 0.02).abs() < 1e-9);
        assert!((m.widths[i] - 0.02).abs() < 1e-9);
    }
    for w in m.widths.windows(2) {
        let r = w[1] / w[0];
        assert!((1.0 / 1.08 - 1e-9..=1.08 + 1e-9).contains(&r), "{r}");
    }
}

#[test]
fn maximum_cell_size() {
    let b = [0.0, 30.0, 300.0];
    let m = Mesh::graded(
        &b,
        &graded(0.01, 0.05, Some(0.05), 1.05),
        Resolution::MaxCell(1.0),
    )
    .unwrap();
    let (lo, hi) = m.width_range();
    assert!(hi <= 1.0 + 1e-12);
    assert!(hi > 0.9, "uses the allowance: {hi}");
    assert_eq!(lo, 0.01);
    assert!(m.faces.contains(&30.0));
}

#[test]
fn uniform_cells() {
    let m = Mesh::graded(&[0.0, 10.0], &Grading::uniform(), Resolution::Cells(40)).unwrap();
    assert!(m.widths.iter().all(|w| (w - 0.25).abs() < 1e-12));
    // Two layers: counts follow the thicknesses.
    let m = Mesh::graded(&[0.0, 2.0, 10.0], &Grading::uniform(), Resolution::Cells(5)).unwrap();
    assert_eq!(m.faces, vec![0.0, 2.0, 4.0, 6.0, 8.0, 10.0]);
}

#[test]
fn grading_that_cannot_fit() {
    let g = graded(0.01, 0.05, None, 1.05);
    match Mesh::graded(&[0.0, 300.0], &g, Resolution::Cells(100)) {
        Err(MeshError::TooFewCells {
            requested: 100,
            needed,
        }) => assert!(needed > 100),
        other => panic!("{other:?}"),
    }
    match Mesh::graded(&[0.0, 300.0], &g, Resolution::Cells(20_000)) {
        Err(MeshError::TooManyCells { allowed, .. }) => assert!(allowed < 20_000),
        other => panic!("{other:?}"),
    }
    // A layer thinner than its two interface cells.
    let g = graded(0.01, 0.05, Some(0.5), 1.05);
    assert!(matches!(
        Mesh::graded(&[0.0, 10.0, 10.3, 20.0], &g, Resolution::Cells(200)),
        Err(MeshError::SegmentTooThin { .. })
    ));
    assert!(matches!(
        Mesh::graded(
            &[0.0, 10.0],
            &graded(0.01, 0.05, None, 1.05),
            Resolution::MaxCell(0.02)
        ),
        Err(MeshError::MaxCellBelowEndSize { .. })
    ));
}

/// Every count between the least and the most the grading allows is met exactly.
#[test]
fn every_feasible_count_is_met() {
    let b = [0.0, 3.0, 7.0, 20.0];
    let g = graded(0.01, 0.04, Some(0.02), 1.15);
    let least = match Mesh::graded(&b, &g, Resolution::Cells(1)) {
        Err(MeshError::TooFewCells { needed, .. }) => needed,
        other => panic!("{other:?}"),
    };
    for n in least..least + 300 {
        let m = Mesh::graded(&b, &g, Resolution::Cells(n)).unwrap();
        assert_eq!(m.n_cells(), n);
        assert!((m.faces[n] - 20.0).abs() == 0.0);
        assert!(m.widths.iter().all(|&w| w > 0.0));
        for z in [3.0, 7.0] {
            assert!(m.faces.contains(&z));
        }
    }
}
