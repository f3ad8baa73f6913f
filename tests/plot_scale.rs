//! The axis transforms of `deepdry plot`: symmetric log, log, tick labels.

use deepdry::plot::scale::{format_real, Axis, Scale, SymLog};

#[test]
fn symlog_values_at_chosen_points() {
    let s = SymLog::new(1e-3);
    let cases = [
        (0.0, 0.0),
        (5e-4, 0.5),
        (-5e-4, -0.5),
        (1e-3, 1.0),
        (-1e-3, -1.0),
        (1e-2, 2.0),
        (-1e-1, -3.0),
        (10.0, 5.0),
        (-1e3, -7.0),
    ];
    for (x, y) in cases {
        assert!(
            (s.forward(x) - y).abs() < 1e-12,
            "forward({x}) = {}, expected {y}",
            s.forward(x)
        );
        assert!(
            (s.inverse(y) - x).abs() <= 1e-12 * x.abs().max(1e-3),
            "inverse({y}) = {}, expected {x}",
            s.inverse(y)
        );
    }
}

#[test]
fn symlog_is_monotone_odd_and_invertible() {
    for c in [1e-9, 1e-3, 1.0, 250.0] {
        let s = SymLog::new(c);
        let mut prev = f64::NEG_INFINITY;
        // x from -1e6 c to 1e6 c, through the band, on a fine log-and-linear grid.
        let mut xs: Vec<f64> = (-600..=600)
            .map(|k| {
                let e = k as f64 / 100.0;
                if e.abs() < 1.0 {
                    e * c
                } else {
                    e.signum() * c * 10f64.powf(e.abs() - 1.0)
                }
            })
            .collect();
        xs.extend([
            -c * 1.0000001,
            -c,
            -c * 0.9999999,
            c * 0.9999999,
            c,
            c * 1.0000001,
        ]);
        xs.sort_by(|a, b| a.total_cmp(b));
        xs.dedup();
        for &x in &xs {
            let y = s.forward(x);
            assert!(y > prev, "not increasing at x = {x} (c = {c})");
            prev = y;
            assert_eq!(s.forward(-x), -y, "not odd at x = {x}");
            let back = s.inverse(y);
            assert!(
                (back - x).abs() <= 1e-10 * x.abs().max(c),
                "inverse(forward({x})) = {back} (c = {c})"
            );
        }
        // Continuous at the band edge.
        assert!((s.forward(c * (1.0 + 1e-12)) - 1.0).abs() < 1e-9);
    }
}

#[test]
fn symlog_band_follows_the_data() {
    assert_eq!(SymLog::for_data(0.0158, 4).linear, 1e-6);
    assert_eq!(SymLog::for_data(0.0, 4).linear, 1.0);
    assert_eq!(SymLog::for_data(f64::NAN, 4).linear, 1.0);
    assert!((SymLog::for_data(350.0, 3).linear - 0.1).abs() < 1e-15);
}

#[test]
fn symlog_ticks_are_labelled_in_real_values() {
    let s = SymLog::new(1e-6);
    let axis = Axis::new(Scale::SymLog(s), -0.1, 0.01);
    let ticks = axis.ticks(12, false);
    assert!(ticks.contains(&0.0));
    for t in [-0.1, -1e-3, 1e-6, 1e-4, 0.01] {
        assert!(
            ticks.iter().any(|v| (v - t).abs() < 1e-12 * t.abs()),
            "{t} missing from {ticks:?}"
        );
    }
    let labels: Vec<String> = ticks.iter().map(|v| axis.label(*v)).collect();
    for l in ["−0.1", "−0.001", "0", "10⁻⁶", "10⁻⁴", "0.01"] {
        assert!(labels.iter().any(|x| x == l), "{l} missing from {labels:?}");
    }
    // Every tick lies on the axis and ticks increase.
    assert!(ticks.windows(2).all(|w| w[0] < w[1]));
    assert!(ticks.iter().all(|t| axis.contains(*t)));
}

#[test]
fn symlog_range_is_whole_decades_and_includes_zero() {
    let sc = Scale::SymLog(SymLog::new(1e-3));
    let (lo, hi) = sc.range_for([0.02, 0.5, 3.0]).unwrap();
    assert_eq!(lo, 0.0);
    assert!((hi - 10.0).abs() < 1e-12);
    let (lo, hi) = sc.range_for([-0.02, 0.5]).unwrap();
    assert!((lo + 0.1).abs() < 1e-12 && (hi - 1.0).abs() < 1e-12);
}

#[test]
fn log_axis_drops_nonpositive_values_and_snaps_to_decades() {
    let (lo, hi) = Scale::Log.range_for([0.0, -1.0, 3e-3, 2e4]).unwrap();
    assert!((lo - 1e-3).abs() < 1e-15 && (hi - 1e5).abs() < 1e-6);
    assert!(Scale::Log.range_for([0.0, -2.0]).is_none());
    assert!(!Scale::Log.shows(0.0));
    let axis = Axis::new(Scale::Log, 1e-3, 1e6);
    let ticks = axis.ticks(12, false);
    assert_eq!(ticks.len(), 10);
    assert_eq!(axis.label(1e-3), "0.001");
    assert_eq!(axis.label(1e4), "10⁴");
}

#[test]
fn reversed_axis_puts_the_surface_at_the_top() {
    let depth = Axis::new(Scale::Linear, 0.0, 50.0).reversed();
    assert_eq!(depth.fraction(0.0), 1.0);
    assert_eq!(depth.fraction(50.0), 0.0);
    // plotters maps y from the bottom pixel (first) to the top pixel (second).
    use plotters::coord::ranged1d::Ranged;
    assert_eq!(depth.map(&0.0, (700, 100)), 100);
    assert_eq!(depth.map(&50.0, (700, 100)), 700);
}

#[test]
fn linear_ticks_are_round_numbers() {
    let axis = Axis::new(Scale::Linear, 17.6, 26.3);
    let ticks = axis.ticks(8, false);
    assert_eq!(ticks, vec![18.0, 20.0, 22.0, 24.0, 26.0]);
    assert_eq!(axis.label(20.0), "20");
    // Labels carry the decimals the tick spacing needs, the same on every tick.
    let axis = Axis::new(Scale::Linear, 0.05, 0.42).with_ticks(9);
    let labels: Vec<String> = axis
        .ticks(axis.max_ticks, false)
        .iter()
        .map(|v| axis.label(*v))
        .collect();
    assert_eq!(
        labels,
        ["0.05", "0.10", "0.15", "0.20", "0.25", "0.30", "0.35", "0.40"]
    );
    let axis = axis.with_ticks(5);
    let labels: Vec<String> = axis
        .ticks(axis.max_ticks, false)
        .iter()
        .map(|v| axis.label(*v))
        .collect();
    assert_eq!(labels, ["0.1", "0.2", "0.3", "0.4"]);
}

#[test]
fn real_value_labels() {
    assert_eq!(format_real(0.0), "0");
    assert_eq!(format_real(1e-6), "10⁻⁶");
    assert_eq!(format_real(-1e-5), "−10⁻⁵");
    assert_eq!(format_real(2.5e7), "2.5×10⁷");
    assert_eq!(format_real(0.25), "0.25");
    assert_eq!(format_real(1000.0), "1000");
    assert_eq!(deepdry::plot::format_years(0.0), "0");
    assert_eq!(deepdry::plot::format_years(0.01), "0.01");
    assert_eq!(deepdry::plot::format_years(12345.0), "12345");
    assert_eq!(deepdry::plot::format_years(1.23456), "1.235");
    assert_eq!(deepdry::plot::format_years(3e6), "3×10⁶");
}

/// Thick raster lines are joined with mitres; a hairpin turn (a flux spike at a layer
/// interface, out and back in one row of pixels) makes a mitre that reaches across the
/// figure. `gentle_runs` splits a line wherever it turns by more than 90° (geometry:
/// the dot product of consecutive direction vectors is negative), so no join is sharp.
#[test]
fn lines_split_at_hairpin_turns_only() {
    use deepdry::plot::chart::gentle_runs;
    // Straight and gently bending lines stay whole.
    assert_eq!(
        gentle_runs(&[(0, 0), (10, 1), (20, 3), (25, 10)]),
        vec![(0, 3)]
    );
    // A right angle is not a hairpin.
    assert_eq!(gentle_runs(&[(0, 0), (10, 0), (10, 10)]), vec![(0, 2)]);
    // A spike out to x = 478 and back, one pixel lower (as in a profile): split at its tip.
    let spike = [(300, 200), (322, 215), (478, 216), (322, 217), (300, 230)];
    assert_eq!(gentle_runs(&spike), vec![(0, 2), (2, 4)]);
    // Repeated pixels do not hide the reversal.
    let rep = [(0, 0), (10, 0), (10, 0), (0, 1)];
    assert_eq!(gentle_runs(&rep), vec![(0, 2), (2, 3)]);
    // Degenerate inputs.
    assert_eq!(gentle_runs(&[(1, 1)]), vec![(0, 0)]);
    assert_eq!(gentle_runs(&[(1, 1), (1, 1)]), vec![(0, 1)]);
}

/// The decades ±c·10^k of a symmetric-log axis (c = `band`) from k = 0 to `kmax`.
fn decades(band: f64, kmax: i32, sign: f64) -> Vec<f64> {
    (0..=kmax).map(|k| sign * band * 10f64.powi(k)).collect()
}

fn has(ticks: &[f64], v: f64) -> bool {
    ticks.iter().any(|t| (t - v).abs() <= 1e-9 * v.abs())
}

#[test]
fn symlog_ticks_label_every_decade_on_both_sides() {
    // A symmetric range, ±0.1 with the band at 10⁻⁶: five decades a side plus 0, and the
    // same decades on both sides, also with room for only nine labels (the series plots).
    let s = SymLog::new(1e-6);
    let axis = Axis::new(Scale::SymLog(s), -0.1, 0.1);
    for max in [9, 11, 12] {
        let ticks = axis.ticks(max, false);
        assert_eq!(ticks.len(), 13, "max {max}: {ticks:?}");
        for v in decades(1e-6, 5, 1.0)
            .into_iter()
            .chain(decades(1e-6, 5, -1.0))
        {
            assert!(has(&ticks, v), "max {max}: {v} missing from {ticks:?}");
        }
        assert!(ticks.iter().all(|t| has(&ticks, -t)), "lopsided: {ticks:?}");
    }
    // A lopsided range (down to −0.1, up to 10⁻⁴): every decade on each side, no gaps.
    let axis = Axis::new(Scale::SymLog(s), -0.1, 1e-4);
    let ticks = axis.ticks(9, false);
    let mut want = decades(1e-6, 5, -1.0);
    want.push(0.0);
    want.extend(decades(1e-6, 2, 1.0));
    want.sort_by(|a, b| a.total_cmp(b));
    assert_eq!(ticks.len(), want.len(), "{ticks:?}");
    assert!(want.iter().all(|v| has(&ticks, *v)), "{ticks:?}");
    // Far more decades than labels: a common stride from the band edge on both sides,
    // and the unlabelled decades still drawn as minor ticks.
    let axis = Axis::new(Scale::SymLog(SymLog::new(1e-12)), -1e12, 1e12);
    let major = axis.ticks(4, false);
    let minor = axis.ticks(4, true);
    assert!(major.iter().all(|t| has(&major, -t)), "{major:?}");
    for k in 0..=24 {
        let v = 1e-12 * 10f64.powi(k);
        assert!(has(&major, v) || has(&minor, v), "decade {v} not drawn");
    }
}
