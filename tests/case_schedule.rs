//! Schedules: values, breakpoints, unit mapping and bounds.

use deepdry::schedule::Schedule;
use std::f64::consts::PI;

fn steps() -> Schedule {
    Schedule::Steps {
        times: vec![10.0, 20.0, 30.0],
        values: vec![1.0, 2.0, 3.0],
    }
}

fn table() -> Schedule {
    Schedule::Table {
        times: vec![0.0, 10.0, 30.0],
        values: vec![5.0, 15.0, 5.0],
    }
}

#[test]
fn constant_holds_one_value_at_all_times() {
    let s = Schedule::Constant(4.5);
    assert_eq!(s.value(-1e12), 4.5);
    assert_eq!(s.value(1e12), 4.5);
    assert!(s.breakpoints().is_empty());
}

#[test]
fn steps_hold_from_each_time() {
    let s = steps();
    assert_eq!(s.value(0.0), 1.0); // before the first time: the first value
    assert_eq!(s.value(10.0), 1.0);
    assert_eq!(s.value(19.999), 1.0);
    assert_eq!(s.value(20.0), 2.0); // a step applies from its time on
    assert_eq!(s.value(29.0), 2.0);
    assert_eq!(s.value(30.0), 3.0);
    assert_eq!(s.value(1e9), 3.0);
    // The value only jumps at the later times.
    assert_eq!(s.breakpoints(), vec![20.0, 30.0]);
}

#[test]
fn table_interpolates_and_holds() {
    let s = table();
    assert_eq!(s.value(-5.0), 5.0);
    assert_eq!(s.value(0.0), 5.0);
    assert_eq!(s.value(5.0), 10.0);
    assert_eq!(s.value(10.0), 15.0);
    assert_eq!(s.value(25.0), 7.5);
    assert_eq!(s.value(30.0), 5.0);
    assert_eq!(s.value(100.0), 5.0);
    assert_eq!(s.breakpoints(), vec![0.0, 10.0, 30.0]);
}

#[test]
fn sine_has_its_mean_amplitude_period_and_phase() {
    let s = Schedule::Sine {
        mean: 10.0,
        amplitude: 2.0,
        period: 4.0,
        phase: 1.0,
    };
    assert!((s.value(1.0) - 10.0).abs() < 1e-12);
    assert!((s.value(2.0) - 12.0).abs() < 1e-12);
    assert!((s.value(4.0) - 8.0).abs() < 1e-12);
    assert!((s.value(0.3) - (10.0 + 2.0 * (2.0 * PI * (0.3 - 1.0) / 4.0).sin())).abs() < 1e-12);
    assert!(s.breakpoints().is_empty());
    assert_eq!(s.bounds(), (8.0, 12.0));
}

#[test]
fn sum_adds_values_and_merges_breakpoints() {
    let s = Schedule::Sum(vec![
        Schedule::Constant(100.0),
        steps(),
        table(),
        Schedule::Sine {
            mean: 0.0,
            amplitude: 1.0,
            period: 8.0,
            phase: 0.0,
        },
    ]);
    assert!((s.value(2.0) - (100.0 + 1.0 + 7.0 + 1.0)).abs() < 1e-12);
    assert!((s.value(25.0) - (100.0 + 2.0 + 7.5 + (2.0 * PI * 25.0 / 8.0).sin())).abs() < 1e-12);
    // Union of 20, 30 and 0, 10, 30: sorted, deduplicated.
    assert_eq!(s.breakpoints(), vec![0.0, 10.0, 20.0, 30.0]);
    assert_eq!(
        s.bounds(),
        (100.0 + 1.0 + 5.0 - 1.0, 100.0 + 3.0 + 15.0 + 1.0)
    );
}

#[test]
fn affine_applies_the_offset_once() {
    let c = Schedule::Sum(vec![Schedule::Constant(15.0), steps(), table()]);
    let k = c.affine(1.0, 273.15);
    for t in [0.0, 5.0, 15.0, 22.0, 40.0] {
        assert!((k.value(t) - (c.value(t) + 273.15)).abs() < 1e-9);
    }
    let s = Schedule::Sine {
        mean: 1.0,
        amplitude: -2.0,
        period: 3.0,
        phase: 0.5,
    };
    let m = s.affine(2.0, 10.0);
    for t in [0.0, 0.7, 1.9] {
        assert!((m.value(t) - (2.0 * s.value(t) + 10.0)).abs() < 1e-12);
    }
    assert_eq!(m.breakpoints(), s.breakpoints());
}

#[test]
fn empty_tables_do_not_panic() {
    let s = Schedule::Table {
        times: vec![],
        values: vec![],
    };
    assert!(s.value(1.0).is_nan());
    let s = Schedule::Steps {
        times: vec![],
        values: vec![],
    };
    assert!(s.value(1.0).is_nan());
}
