//! The Levenberg–Marquardt optimiser on problems with known minima and, for a linear
//! model, a known exact covariance.

use deepdry::fit::lm::{minimize, LmOptions, ParamSpec};

fn spec(initial: f64, min: f64, max: f64) -> ParamSpec {
    ParamSpec {
        initial,
        min,
        max,
        log: false,
    }
}

/// Rosenbrock's function (Rosenbrock 1960) in least-squares form, r = (10 (x2 − x1²),
/// 1 − x1), from the standard start (−1.2, 1): minimum 0 at (1, 1) (Moré, Garbow &
/// Hillstrom 1981, problem 1; from memory).
#[test]
fn rosenbrock_reaches_its_minimum() {
    let mut f = |p: &[f64]| Ok(vec![10.0 * (p[1] - p[0] * p[0]), 1.0 - p[0]]);
    let r = minimize(
        &[spec(-1.2, -5.0, 5.0), spec(1.0, -5.0, 5.0)],
        &mut f,
        &LmOptions::default(),
    )
    .unwrap();
    assert!((r.estimate[0] - 1.0).abs() < 1e-6, "{:?}", r.estimate);
    assert!((r.estimate[1] - 1.0).abs() < 1e-6, "{:?}", r.estimate);
    assert!(r.objective < 1e-12, "objective {}", r.objective);
    assert!(!r.near_singular);
}

/// y = a + b x with known σ: the weighted least-squares estimate and its covariance
/// (XᵀWX)⁻¹ are exact (derived: the normal equations of a linear model).
#[test]
fn a_linear_model_gives_the_exact_estimate_and_covariance() {
    let xs: Vec<f64> = (0..20).map(|i| i as f64 * 0.5).collect();
    // Deterministic "noise" and unequal σ.
    let sig: Vec<f64> = (0..20).map(|i| 0.1 + 0.02 * (i % 5) as f64).collect();
    let ys: Vec<f64> = xs
        .iter()
        .enumerate()
        .map(|(i, x)| 2.0 + 0.7 * x + sig[i] * ((i * 7 % 11) as f64 / 5.0 - 1.0))
        .collect();
    // Exact: normal equations of the weighted problem.
    let (mut s00, mut s01, mut s11, mut t0, mut t1) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for i in 0..20 {
        let w = 1.0 / (sig[i] * sig[i]);
        s00 += w;
        s01 += w * xs[i];
        s11 += w * xs[i] * xs[i];
        t0 += w * ys[i];
        t1 += w * xs[i] * ys[i];
    }
    let det = s00 * s11 - s01 * s01;
    let a = (s11 * t0 - s01 * t1) / det;
    let b = (s00 * t1 - s01 * t0) / det;
    let (var_a, var_b, cov_ab) = (s11 / det, s00 / det, -s01 / det);
    let mut f = |p: &[f64]| {
        Ok((0..20)
            .map(|i| (p[0] + p[1] * xs[i] - ys[i]) / sig[i])
            .collect::<Vec<_>>())
    };
    let r = minimize(
        &[spec(0.0, -10.0, 10.0), spec(0.0, -10.0, 10.0)],
        &mut f,
        &LmOptions::default(),
    )
    .unwrap();
    assert!(
        (r.estimate[0] - a).abs() < 1e-8 * a.abs(),
        "a {} vs {a}",
        r.estimate[0]
    );
    assert!(
        (r.estimate[1] - b).abs() < 1e-8 * b.abs(),
        "b {} vs {b}",
        r.estimate[1]
    );
    let rel = |x: f64, y: f64| (x - y).abs() / y.abs();
    assert!(rel(r.standard_error[0], var_a.sqrt()) < 1e-5);
    assert!(rel(r.standard_error[1], var_b.sqrt()) < 1e-5);
    let corr = cov_ab / (var_a * var_b).sqrt();
    assert!(
        (r.correlation[1] - corr).abs() < 1e-5,
        "{} vs {corr}",
        r.correlation[1]
    );
    assert!(r.unidentifiable.is_empty());
}

/// Two parameters that enter only as their product cannot be told apart: reported as
/// not identifiable, not as a confident answer.
#[test]
fn parameters_that_trade_off_are_reported_unidentifiable() {
    let xs: Vec<f64> = (1..=10).map(|i| i as f64).collect();
    let mut f = |p: &[f64]| {
        Ok(xs
            .iter()
            .map(|x| (p[0] * p[1] * x - 3.0 * x) / 0.1)
            .collect::<Vec<_>>())
    };
    let r = minimize(
        &[spec(1.0, 0.1, 10.0), spec(1.0, 0.1, 10.0)],
        &mut f,
        &LmOptions::default(),
    )
    .unwrap();
    assert!((r.estimate[0] * r.estimate[1] - 3.0).abs() < 1e-6);
    assert!(r.near_singular || !r.unidentifiable.is_empty(), "{r:?}");
    assert_eq!(r.unidentifiable, vec![(0, 1)]);
}

/// A minimum outside the box: the estimate stops on the bound.
#[test]
fn bounds_are_respected() {
    let mut f = |p: &[f64]| Ok(vec![p[0] - 3.0]);
    let r = minimize(&[spec(0.5, 0.0, 2.0)], &mut f, &LmOptions::default()).unwrap();
    assert_eq!(r.estimate[0], 2.0);
}

/// A rate fitted in its logarithm: y = exp(−k t) sampled without noise recovers k, and
/// the log transform keeps k positive from a start two decades off.
#[test]
fn a_log_parameter_is_recovered() {
    let ts: Vec<f64> = (0..15).map(|i| i as f64 * 0.3).collect();
    let k_true = 0.8;
    let mut f = |p: &[f64]| {
        Ok(ts
            .iter()
            .map(|t| ((-p[0] * t).exp() - (-k_true * t).exp()) / 0.01)
            .collect::<Vec<_>>())
    };
    let r = minimize(
        &[ParamSpec {
            initial: 0.01,
            min: 1e-4,
            max: 100.0,
            log: true,
        }],
        &mut f,
        &LmOptions::default(),
    )
    .unwrap();
    assert!((r.estimate[0] - k_true).abs() < 1e-7, "{:?}", r.estimate);
}

#[test]
fn an_initial_value_outside_its_bounds_is_refused() {
    let mut f = |p: &[f64]| Ok(vec![p[0]]);
    let e = minimize(&[spec(5.0, 0.0, 2.0)], &mut f, &LmOptions::default()).unwrap_err();
    assert!(e.contains("must lie in [min, max]"), "{e}");
}
