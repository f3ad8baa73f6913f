//! Checkpoints are taken on the grid of whole multiples of `checkpoint.every_year` in the
//! case's years (not counted from the start year) and named by that year in full,
//! zero-padded so that they list in time order; the earlier names
//! (`checkpoint-1.234560000e5yr.h5`) are still listed and resume.

mod support;

use deepdry::checkpoint::{name_at, year_of_name, year_text};
use std::path::Path;
use support::*;

#[test]
fn years_are_written_in_full_padded_and_read_back() {
    let name = |y: f64, d: usize| name_at(Path::new(""), y, d).to_string_lossy().into_owned();
    assert_eq!(name(10000.0, 5), "checkpoint-10000yr.h5");
    assert_eq!(name(0.0, 5), "checkpoint-00000yr.h5");
    assert_eq!(name(5000.0, 5), "checkpoint-05000yr.h5");
    // A year a little off the grid by round-off is named by the grid year.
    assert_eq!(name(9999.999999999998, 5), "checkpoint-10000yr.h5");
    assert_eq!(name(20000.000000000004, 5), "checkpoint-20000yr.h5");
    // Off the grid (wall-clock and interrupt checkpoints): 10 significant digits.
    assert_eq!(name(12345.678912345, 5), "checkpoint-12345.67891yr.h5");
    assert_eq!(name(0.125, 2), "checkpoint-00.125yr.h5");
    assert_eq!(name(-15000.0, 5), "checkpoint--15000yr.h5");
    assert_eq!(name(-0.5, 1), "checkpoint--0.5yr.h5");
    assert_eq!(year_text(4.5e9, 10), "4500000000");
    // Every form reads back to its year, and so does the earlier one.
    for (y, d) in [
        (10000.0, 5),
        (0.125, 2),
        (-15000.0, 5),
        (-0.5, 1),
        (12345.67891, 5),
        (1.0e-7, 1),
    ] {
        let back = year_of_name(&name(y, d)).unwrap();
        assert!(
            (back - y).abs() <= 1e-9 * y.abs(),
            "{y} read back as {back}"
        );
    }
    assert_eq!(year_of_name("checkpoint-4.999900000e4yr.h5"), Some(49999.0));
    assert_eq!(year_of_name("checkpoint-latest.h5"), None);
    assert_eq!(year_of_name("checkpoint-nanyr.h5"), None);
    // Padded names of years ≥ 0 sort in time order as text.
    let mut names: Vec<String> = [50000.0, 0.0, 5000.0, 10000.0, 12345.5]
        .iter()
        .map(|&y| name(y, 5))
        .collect();
    names.sort();
    let years: Vec<f64> = names.iter().map(|n| year_of_name(n).unwrap()).collect();
    assert_eq!(years, vec![0.0, 5000.0, 10000.0, 12345.5, 50000.0]);
}

#[test]
fn checkpoints_fall_on_whole_multiples_of_the_interval_and_old_names_still_resume() {
    let dir = Scratch::new("ck-names");
    // From year −1: checkpoints every 5 years at years 0 and 5 (not 4 and 9), and the
    // final one at year 10.
    let small = Small {
        checkpoint_every: 5.0,
        snapshot_every: 5.0,
        extra_time: "start_year = -1.0\n".into(),
        ..Small::default()
    };
    let case = dir.write("case.toml", &small.text());
    let out = dir.join("out");
    run_ok(&case, &out, &[]);
    let mut names: Vec<String> = std::fs::read_dir(&out)
        .unwrap()
        .flatten()
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with("checkpoint-"))
        .collect();
    names.sort();
    assert_eq!(
        names,
        [
            "checkpoint-00yr.h5",
            "checkpoint-05yr.h5",
            "checkpoint-10yr.h5"
        ]
    );
    let years: Vec<f64> = checkpoints(&out).iter().map(|c| c.0).collect();
    assert_eq!(years, vec![0.0, 5.0, 10.0]);
    // Each holds the state of its year exactly.
    for y in [0.0, 5.0] {
        let ck = read_checkpoint(&checkpoint_at(&out, y)).unwrap();
        assert_eq!(ck.year(), y);
    }
    // A folder written by an earlier version (names in exponent form) resumes: the
    // checkpoint is listed, and the later ones are dropped on resume as before.
    let old = dir.join("old");
    std::fs::create_dir_all(&old).unwrap();
    std::fs::copy(out.join("results.h5"), old.join("results.h5")).unwrap();
    for (from, to) in [
        ("checkpoint-05yr.h5", "checkpoint-5.000000000e0yr.h5"),
        ("checkpoint-10yr.h5", "checkpoint-1.000000000e1yr.h5"),
    ] {
        std::fs::copy(out.join(from), old.join(to)).unwrap();
    }
    assert_eq!(
        checkpoints(&old).iter().map(|c| c.0).collect::<Vec<_>>(),
        vec![5.0, 10.0]
    );
    let ck = checkpoint_at(&old, 5.0);
    run_ok(&case, &old, &["--resume", arg(&ck)]);
    assert!(!old.join("checkpoint-1.000000000e1yr.h5").exists());
    assert!(old.join("checkpoint-10yr.h5").exists());
    assert_same_datasets(&out.join("results.h5"), &old.join("results.h5"));
}
