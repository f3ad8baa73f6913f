//! Numbers for people: the run summary and `inspect` print fluxes, balance errors and
//! times in plain decimals where they read best, in consistent units (years next to years).

mod support;

use deepdry::output::{human, years};
use std::path::Path;
use support::*;

#[test]
fn human_numbers_use_decimals_in_the_middle_range_and_scientific_outside() {
    assert_eq!(human(-8.502098e-2, 4), "-0.08502");
    assert_eq!(human(1.448, 4), "1.448");
    assert_eq!(human(1.448e-5, 4), "1.448e-5");
    assert_eq!(human(2.04e-9, 3), "2.04e-9");
    assert_eq!(human(12345.6, 4), "12350");
    // Rounding that reaches the next decade keeps `sig` digits.
    assert_eq!(human(9.99996, 4), "10.00");
    assert_eq!(human(0.00099996, 3), "0.00100");
    assert_eq!(human(0.0, 4), "0");
    assert_eq!(years(-1.0), "-1");
    assert_eq!(years(50000.0), "50000");
    assert_eq!(years(2e6), "2e6");
}

#[test]
fn run_summary_and_inspect_print_human_numbers_and_years() {
    let case = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases/quickstart.toml");
    let dir = Scratch::new("formats");
    let out = dir.join("out");
    let o = run_ok(&case, &out, &[]);
    let text = stdout(&o);
    assert!(
        text.starts_with("run finished: 0 yr to 1000 yr in "),
        "{text}"
    );
    let flux = text
        .lines()
        .find(|l| l.starts_with("water flux at the surface"))
        .unwrap();
    // Fluxes of a fraction of a mm/yr in decimals, never as "e-1" or "e0".
    assert!(!flux.contains("e-") && !flux.contains("e0"), "{flux}");
    let balance = text.lines().find(|l| l.contains("energy balance")).unwrap();
    assert!(!balance.contains("e0 "), "{balance}");

    let ck = newest_checkpoint(&out).unwrap();
    let o = deepdry(&["inspect", arg(&ck)]);
    let text = stdout(&o);
    let time = text.lines().find(|l| l.starts_with("time:")).unwrap();
    // The time and the next step in years, not a step in seconds next to years.
    assert!(time.starts_with("time: 1000 yr, next step "), "{time}");
    assert!(time.ends_with(" yr") && !time.contains(" s,"), "{time}");
}

#[test]
fn bench_from_another_folder_says_where_it_looked_and_what_to_pass() {
    let dir = Scratch::new("bench-elsewhere");
    let o = std::process::Command::new(bin())
        .args(["bench", "--repeat", "1"])
        .current_dir(dir.join(""))
        .stdin(std::process::Stdio::null())
        .output()
        .unwrap();
    assert_one_line_error(
        &o,
        2,
        &[
            "cases/benchmark-300m.toml: cannot read the case file",
            "current folder",
            "--case",
        ],
    );
}
