//! The drying-front diagnostic (`/series/drying_front_depth`): a front only where a dry
//! zone lies on top of wetter soil; NaN for a column that has not dried. The expected
//! depths are hand calculations of the documented definition (linear interpolation of the
//! liquid content between cell centres); the profiles are made up.

use deepdry::output::diagnostics::{drying_front_of, DRYING_FRONT_THRESHOLD};

const Z: [f64; 6] = [0.5, 1.5, 2.5, 3.5, 4.5, 5.5];

#[test]
fn a_dry_zone_on_top_has_its_front_where_the_content_crosses_the_level() {
    // min 0.02 at the top, level 0.03; crosses between 1.5 m (0.025) and 2.5 m (0.125):
    // 1.5 + (0.03 − 0.025)/(0.125 − 0.025) = 1.55 m.
    assert_eq!(DRYING_FRONT_THRESHOLD, 0.01);
    let d = drying_front_of(&[0.02, 0.025, 0.125, 0.2, 0.2, 0.2], &Z);
    assert!((d - 1.55).abs() < 1e-12, "{d}");
    // The driest cell need not be the surface cell (the surface re-wetted a little).
    let d = drying_front_of(&[0.026, 0.02, 0.025, 0.125, 0.2, 0.2], &Z);
    assert!((d - 2.55).abs() < 1e-12, "{d}");
}

#[test]
fn a_column_that_has_not_dried_has_no_front() {
    // Uniformly wet, and nearly uniform (spread below the threshold).
    assert!(drying_front_of(&[0.3; 6], &Z).is_nan());
    assert!(drying_front_of(&[0.3, 0.305, 0.301, 0.309, 0.3, 0.302], &Z).is_nan());
    // Wetter at the top (rain on a dry column): the surface cell exceeds the level.
    assert!(drying_front_of(&[0.3, 0.2, 0.1, 0.05, 0.05, 0.05], &Z).is_nan());
    // Wetter with depth in a fine layer, then a coarse layer holding less water (the
    // main demo before its climate shift, which showed a 56 m "front"): the driest cell
    // lies below the first cell above the level.
    assert!(drying_front_of(&[0.045, 0.05, 0.06, 0.071, 0.043, 0.044], &Z).is_nan());
    // Nothing finite, or no cells.
    assert!(drying_front_of(&[f64::NAN; 6], &Z).is_nan());
    assert!(drying_front_of(&[], &[]).is_nan());
}
