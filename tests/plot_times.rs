//! The snapshot picker of `deepdry plot`.

use deepdry::error::Error;
use deepdry::plot::times::{pick_default, pick_default_with, pick_nearest};

const TIMES: [f64; 6] = [0.0, 0.1, 1.0, 10.0, 100.0, 1000.0];

#[test]
fn picks_the_nearest_snapshot_for_each_request() {
    assert_eq!(pick_nearest(&TIMES, &[0.9]).unwrap(), vec![2]);
    assert_eq!(pick_nearest(&TIMES, &[6.0]).unwrap(), vec![3]);
    assert_eq!(pick_nearest(&TIMES, &[0.04]).unwrap(), vec![0]);
    assert_eq!(pick_nearest(&TIMES, &[1000.0]).unwrap(), vec![5]);
    // Sorted by time, without repeats.
    assert_eq!(
        pick_nearest(&TIMES, &[600.0, 0.0, 1.2, 0.8, 45.0]).unwrap(),
        vec![0, 2, 3, 5]
    );
}

#[test]
fn a_time_outside_the_file_is_an_input_error() {
    for t in [1500.0, -1.0, f64::NAN] {
        match pick_nearest(&TIMES, &[1.0, t]) {
            Err(Error::Input(msg)) => {
                assert!(msg.contains("outside"), "{msg}");
                assert!(msg.contains("0 to 1000 yr"), "{msg}");
                assert!(!msg.contains('\n'));
            }
            other => panic!("expected an input error for {t}, got {other:?}"),
        }
    }
    assert!(matches!(pick_nearest(&[], &[1.0]), Err(Error::Input(_))));
}

#[test]
fn default_spreads_in_log_time_and_keeps_the_initial_and_last_snapshot() {
    // 0, then 1e-3 ... 1e4 yr in 71 steps of 0.1 decade.
    let mut t = vec![0.0];
    t.extend((0..=70).map(|k| 10f64.powf(-3.0 + 0.1 * k as f64)));
    let picked = pick_default(&t, 6);
    assert_eq!(picked.len(), 6);
    assert_eq!(picked[0], 0);
    assert_eq!(*picked.last().unwrap(), t.len() - 1);
    // The five positive ones are 1e-3, 1e-1.25, 10^0.5, 10^2.25, 1e4 (nearest in log).
    let logs: Vec<f64> = picked[1..].iter().map(|&i| t[i].log10()).collect();
    for (got, want) in logs.iter().zip([-3.0, -1.25, 0.5, 2.25, 4.0]) {
        assert!((got - want).abs() <= 0.05 + 1e-9, "{logs:?}");
    }
}

#[test]
fn default_takes_everything_from_a_short_file() {
    assert_eq!(pick_default(&TIMES, 6), vec![0, 1, 2, 3, 4, 5]);
    assert_eq!(pick_default(&[5.0], 6), vec![0]);
    assert!(pick_default(&[], 6).is_empty());
}

#[test]
fn default_without_an_initial_snapshot() {
    let t: Vec<f64> = (0..20).map(|k| 10f64.powi(k - 5)).collect();
    let picked = pick_default(&t, 6);
    assert_eq!(picked.len(), 6);
    assert_eq!(picked[0], 0);
    assert_eq!(picked[5], 19);
}

/// The snapshot times of the synthetic results files (tests/plot_support).
const SYNTHETIC: [f64; 8] = [0.0, 0.01, 0.1, 1.0, 10.0, 100.0, 1000.0, 10000.0];

#[test]
fn default_puts_the_asked_for_times_first() {
    // Spread in log time alone, six of the eight leave out 1 and 1000 yr.
    assert_eq!(pick_default(&SYNTHETIC, 6), vec![0, 1, 2, 4, 5, 7]);
    // Asked for in output.times_year: both are drawn, and the rest is filled up to six.
    let picked = pick_default_with(&SYNTHETIC, 6, &[1000.0, 1.0]);
    assert_eq!(picked.len(), 6, "{picked:?}");
    assert!(picked.contains(&3) && picked.contains(&6), "{picked:?}");
    assert!(picked.windows(2).all(|w| w[0] < w[1]));
    // Asked-for times the file does not have (a run that stopped early) are skipped.
    assert_eq!(
        pick_default_with(&SYNTHETIC, 6, &[3.0, 2e4]),
        pick_default(&SYNTHETIC, 6)
    );
    // More asked for than drawn: six of them, spread over the list, ends included.
    let picked = pick_default_with(&SYNTHETIC, 6, &SYNTHETIC);
    assert_eq!(picked.len(), 6);
    assert_eq!((picked[0], picked[5]), (0, 7));
    // A single asked time with a short file: everything.
    assert_eq!(
        pick_default_with(&TIMES, 6, &[10.0]),
        vec![0, 1, 2, 3, 4, 5]
    );
}
