//! Time at any epoch: model time counts seconds from the case's start year, so a one-year
//! run with a snapshot every 1e-4 yr writes exactly 10 001 snapshots and ends exactly on
//! `end_year` whether it starts at year 0, 1e6, −2.6e6 (Pleistocene) or 4.5e9. Before,
//! at start year 1e6 the run wrote 911 snapshots and stopped at 1000000.9991 (sync times
//! within 1e-9 of the absolute time in seconds were merged).

mod support;

use support::*;

/// Runs the small column for one year from `start` with a snapshot every 1e-4 yr and
/// checks the snapshot times.
fn one_year_from(start: f64, name: &str) {
    let dir = Scratch::new(name);
    let end = start + 1.0;
    assert_eq!(end - start, 1.0, "the test's end year is not exact");
    let small = Small {
        cells: 8,
        end_year: end,
        snapshot_every: 1.0e-4,
        checkpoint_every: 0.5,
        extra_time: format!("start_year = {start:?}\n"),
        ..Small::default()
    };
    let text = small
        .text()
        .replace("[output]\n", "[output]\nseries_every = 100000\n");
    let case = dir.write("case.toml", &text);
    let out = dir.join("out");
    let o = run_ok(&case, &out, &[]);
    let d = datasets(&out.join("results.h5")).unwrap();
    let t = d["profiles/time"].floats();
    assert_eq!(t.len(), 10_001, "start {start}: {} snapshots", t.len());
    assert_eq!(t[0], start, "first snapshot");
    assert_eq!(
        *t.last().unwrap(),
        end,
        "last snapshot must be end_year exactly"
    );
    // Every snapshot on the grid start + k·1e-4, to the resolution of the years
    // themselves (a few units in the last place of |start|, 1e-12 yr at year 0).
    let resolution = 4.0 * f64::EPSILON * start.abs().max(1.0);
    for (k, y) in t.iter().enumerate() {
        let want = start + k as f64 * 1.0e-4;
        assert!(
            (y - want).abs() <= resolution.max(1e-12),
            "start {start}: snapshot {k} at {y:?}, want {want:?}"
        );
    }
    for w in t.windows(2) {
        assert!(w[1] > w[0], "start {start}: times not increasing: {w:?}");
    }
    let series = d["series/time"].floats();
    assert_eq!(*series.last().unwrap(), end, "last series row");
    assert!(
        stdout(&o).contains(&format!("to {} yr", deepdry::output::years(end))),
        "start {start}: {}",
        stdout(&o)
    );
    // The final checkpoint is named by year, and a checkpoint in the middle resumes to the
    // same end.
    let mid = checkpoint_at(&out, start + 0.5);
    run_ok(&case, &out, &["--resume", arg(&mid)]);
    let t2 = datasets(&out.join("results.h5")).unwrap()["profiles/time"].floats();
    assert_eq!(t2, t, "start {start}: resumed run's snapshot times");
}

#[test]
fn one_year_from_year_zero() {
    one_year_from(0.0, "epoch0");
}

#[test]
fn one_year_from_a_million_years() {
    one_year_from(1.0e6, "epoch1e6");
}

#[test]
fn one_year_from_the_pleistocene() {
    one_year_from(-2.6e6, "epoch-pleistocene");
}

#[test]
fn one_year_from_the_age_of_the_earth() {
    one_year_from(4.5e9, "epoch4.5e9");
}
