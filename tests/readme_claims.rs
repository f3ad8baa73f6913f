//! The figures README.md states for the main demo (`cases/glacial-to-arid.toml`) agree
//! with a run of it: each number is read from the README text and compared with the
//! results to the last digit it is written with (a trailing zero of a whole number is not
//! a digit: "about −290" means tens). A change that moves the demo's output fails here
//! until the README is brought up to date.

mod support;

use std::path::Path;
use support::*;

/// README.md with its whitespace collapsed and the minus signs made ASCII.
fn readme() -> String {
    let text =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md")).unwrap();
    text.split_whitespace()
        .collect::<Vec<_>>()
        .join(" ")
        .replace('−', "-")
}

/// The last `n` numbers written just before `anchor` (its first occurrence).
fn numbers_before(text: &str, anchor: &str, n: usize) -> Vec<String> {
    let at = text
        .find(anchor)
        .unwrap_or_else(|| panic!("README.md no longer says `{anchor}`"));
    let mut from = at.saturating_sub(60);
    while !text.is_char_boundary(from) {
        from += 1;
    }
    let head = &text[from..at];
    let mut found: Vec<String> = head
        .split([' ', '(', ','])
        .filter(|t| !t.is_empty() && t.parse::<f64>().is_ok())
        .map(str::to_string)
        .collect();
    assert!(found.len() >= n, "no {n} numbers before `{anchor}`: {head}");
    found.split_off(found.len() - n)
}

/// Whether `measured` rounds to `stated` at the last digit `stated` is written with.
fn agrees(stated: &str, measured: f64) -> bool {
    let value: f64 = stated.parse().unwrap();
    let unit = match stated.split_once('.') {
        Some((_, decimals)) => 10f64.powi(-(decimals.len() as i32)),
        None => {
            let digits = stated.trim_start_matches('-');
            let zeros = digits.len() - digits.trim_end_matches('0').len();
            10f64.powi(zeros.min(digits.len() - 1) as i32)
        }
    };
    (measured - value).abs() <= 0.5 * unit * (1.0 + 1e-12)
}

#[test]
fn the_main_demo_gives_the_figures_the_readme_states() {
    let dir = Scratch::new("readme-claims");
    let case = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases/glacial-to-arid.toml");
    let out = dir.join("out");
    let o = run_ok(&case, &out, &[]);
    let d = datasets(&out.join("results.h5")).unwrap();
    let t = d["series/time"].floats();
    let mm_yr = 365.25 * 86_400.0;
    let q: Vec<f64> = d["series/surface_water_flux"]
        .floats()
        .iter()
        .map(|x| x * mm_yr)
        .collect();
    let front = d["series/drying_front_depth"].floats();
    let at = |y: f64| {
        let k = (0..t.len())
            .min_by(|&a, &b| (t[a] - y).abs().total_cmp(&(t[b] - y).abs()))
            .unwrap();
        assert!(
            (t[k] - y).abs() <= 1e-6 * y.abs().max(1.0),
            "no record at {y}"
        );
        k
    };
    let text = readme();
    let check = |anchor: &str, measured: f64| {
        let stated = numbers_before(&text, anchor, 1).remove(0);
        assert!(
            agrees(&stated, measured),
            "README.md says {stated} before `{anchor}`; the run gives {measured}"
        );
    };

    // The glacial spin-up: near balance.
    let before = t.iter().rposition(|&x| x < 0.0).unwrap();
    check("mm/yr, a slight upward loss", q[before]);
    // The jump at the shift: its first value and its range over the first 0.001 year.
    let first = t.iter().position(|&x| x > 0.0).unwrap();
    check("mm/yr of upward loss", q[first]);
    let early: Vec<f64> = (0..t.len())
        .filter(|&k| t[k] > 0.0 && t[k] <= 1e-3)
        .map(|k| q[k])
        .collect();
    assert!(
        early.len() >= 5,
        "{} records in the first 0.001 yr",
        early.len()
    );
    let range = numbers_before(&text, "mm/yr over the first 0.001 year", 2);
    let (least, most) = (
        early.iter().cloned().fold(f64::NEG_INFINITY, f64::max),
        early.iter().cloned().fold(f64::INFINITY, f64::min),
    );
    assert!(
        agrees(&range[0], least) && agrees(&range[1], most),
        "README.md says {} to {} mm/yr over the first 0.001 yr; the run gives {least} to {most}",
        range[0],
        range[1]
    );
    // The decay.
    check("mm/yr after 1 year,", q[at(1.0)]);
    check("mm/yr after 1 000,", q[at(1000.0)]);
    check("mm/yr after 50 000;", q[at(50_000.0)]);
    // The drying front.
    check(" m after 1 year,", front[at(1.0)]);
    check(" m after 100,", front[at(100.0)]);
    check(" m after 1 000,", front[at(1000.0)]);
    check(" m after 10 000", front[at(10_000.0)]);
    check(" m after 50 000 years", front[at(50_000.0)]);
    // The summary's flux line, as printed.
    let line = std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md"))
        .unwrap()
        .lines()
        .find(|l| l.starts_with("water flux at the surface"))
        .unwrap()
        .to_string();
    assert!(
        stdout(&o).contains(&line),
        "README.md shows `{line}`; the run prints:\n{}",
        stdout(&o)
    );
}

#[test]
fn agreement_is_to_the_last_written_digit() {
    assert!(agrees("-6", -5.88));
    assert!(!agrees("-6", -5.4));
    assert!(agrees("-290", -289.2));
    assert!(!agrees("-290", -296.0));
    assert!(agrees("-0.085", -0.08502));
    assert!(!agrees("-0.085", -0.0856));
    assert!(agrees("30", 30.14));
    assert!(agrees("0.3", 0.2887));
    assert!(!agrees("-54", -289.2));
}
