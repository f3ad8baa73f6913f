//! `deepdry fit --restart` continues an interrupted fit from `fit-progress.json` (the
//! state after its last accepted iteration) and ends exactly where the uninterrupted fit
//! ends; it refuses, in one line, a missing or damaged progress file and one that belongs
//! to another fit. The progress line shows only on a terminal.

mod support;

use std::path::Path;
use support::fit::{summary_field, write_problem, FIT};
use support::{arg, assert_one_line_error, deepdry, stderr, Scratch};

fn fit_ok(f: &Path, out: &Path, extra: &[&str]) -> String {
    let mut args = vec!["fit", arg(f), "--out", arg(out), "--jobs", "2"];
    args.extend_from_slice(extra);
    let o = deepdry(&args);
    assert!(o.status.success(), "{args:?}: {}", stderr(&o));
    // Not a terminal: no progress line.
    assert_eq!(stderr(&o), "", "{args:?}");
    std::fs::read_to_string(out.join("fit-summary.json")).unwrap()
}

fn field(text: &str, name: &str) -> String {
    let line = text
        .lines()
        .find(|l| l.trim_start().starts_with(&format!("\"{name}\":")))
        .unwrap_or_else(|| panic!("{name} missing:\n{text}"));
    line.split_once(':')
        .unwrap()
        .1
        .trim()
        .trim_end_matches(',')
        .to_string()
}

#[test]
fn a_restarted_fit_ends_bitwise_where_the_uninterrupted_one_ends() {
    let dir = Scratch::new("fit-restart");
    let f = write_problem(&dir.path, 22, "");
    let whole = fit_ok(&f, &dir.join("whole"), &[]);
    let iterations: usize = field(&whole, "iterations").parse().unwrap();
    assert!(iterations > 3, "{whole}");
    // Interrupted after two iterations: the progress file holds the second accepted point.
    for k in [1, 2] {
        let out = dir.join(&format!("cut{k}"));
        std::fs::write(&f, format!("max_iterations = {k}\n{FIT}")).unwrap();
        let cut = fit_ok(&f, &out, &[]);
        assert_eq!(field(&cut, "stop"), "\"iteration limit\"");
        let progress = std::fs::read_to_string(out.join("fit-progress.json")).unwrap();
        assert_eq!(field(&progress, "iterations"), k.to_string(), "{progress}");
        assert_eq!(field(&progress, "stop"), "null", "{progress}");
        assert!(!out.join("fit-progress.json.tmp").exists());
        // Restarted with the fit file as it was (no iteration limit): the same summary,
        // every number to the last bit (they are written in shortest round-trip form),
        // the iteration and run counts included.
        std::fs::write(&f, FIT).unwrap();
        let resumed = fit_ok(&f, &out, &["--restart"]);
        assert_eq!(resumed, whole, "restarted after {k} iterations");
        let key = "surface[2].from_year";
        assert_ne!(
            summary_field(&cut, key, "estimate"),
            summary_field(&whole, key, "estimate")
        );
        // A restart of a finished fit finishes at once with the same answer.
        assert_eq!(fit_ok(&f, &out, &["--restart"]), whole);
    }
}

#[test]
fn a_restart_without_a_matching_progress_file_is_refused_in_one_line() {
    let dir = Scratch::new("fit-restart-refused");
    let f = write_problem(&dir.path, 22, "max_iterations = 1\n");
    let out = dir.join("out");
    let o = deepdry(&["fit", arg(&f), "--out", arg(&out), "--restart"]);
    assert_one_line_error(
        &o,
        2,
        &["fit-progress.json", "no fit progress", "without --restart"],
    );
    fit_ok(&f, &out, &[]);
    let progress = out.join("fit-progress.json");
    let saved = std::fs::read_to_string(&progress).unwrap();
    let restart = |words: &[&str]| {
        let o = deepdry(&["fit", arg(&f), "--out", arg(&out), "--restart"]);
        assert_one_line_error(&o, 2, words);
    };
    // Another fit file: a bound changed.
    std::fs::write(&f, FIT.replace("min = -490.0", "min = -480.0")).unwrap();
    restart(&["fit-progress.json", "a different fit file", "fit.toml"]);
    // Another parameter.
    std::fs::write(
        &f,
        FIT.replace("surface[2].from_year", "surface[2].temperature_C")
            .replace(
                "initial = -100.0\nmin = -490.0\nmax = -10.0",
                "initial = 15.0\nmin = 5.0\nmax = 25.0",
            ),
    )
    .unwrap();
    restart(&["a different fit file"]);
    // The iteration limit alone may change.
    std::fs::write(&f, format!("max_iterations = 2\n{FIT}")).unwrap();
    let case = dir.join("case.toml");
    let case_text = std::fs::read_to_string(&case).unwrap();
    std::fs::write(&case, format!("{case_text}# edited\n")).unwrap();
    restart(&["a different text of the case", "case.toml"]);
    std::fs::write(&case, &case_text).unwrap();
    let obs = dir.join("obs.csv");
    let obs_text = std::fs::read_to_string(&obs).unwrap();
    std::fs::write(&obs, obs_text.replacen(",0.", ",1.", 1)).unwrap();
    restart(&["a different observation file", "obs.csv"]);
    std::fs::write(&obs, &obs_text).unwrap();
    // Damaged progress files.
    let xs = saved.find("\"x\": [").unwrap() + 6;
    let end = xs + saved[xs..].find(',').unwrap();
    let out_of_bounds = format!("{}100.0{}", &saved[..xs], &saved[end..]);
    for (text, words) in [
        (out_of_bounds, vec!["x = 100", "outside its bounds"]),
        (
            saved[..saved.len() / 2].to_string(),
            vec!["not a fit progress file"],
        ),
        (
            saved.replace("\"lambda\": ", "\"lambda\": -"),
            vec!["lambda"],
        ),
        (
            saved.replace("\"iterations\": 1", "\"iterations\": 1.5"),
            vec!["iterations", "whole number"],
        ),
        (
            saved.replace("\"stop\": null", "\"stop\": \"tired\""),
            vec!["stop", "tired"],
        ),
        ("[]".to_string(), vec!["not a JSON object"]),
        (saved.replace("\"x\": [", "\"x\": [1e999, "), vec!["finite"]),
    ] {
        std::fs::write(&progress, text).unwrap();
        restart(&words);
    }
    // Intact again: the restart runs.
    std::fs::write(&progress, &saved).unwrap();
    fit_ok(&f, &out, &["--restart"]);
}

/// On a terminal (a pseudo-terminal from `script`, util-linux) the fit shows its
/// iteration, objective, damping and runs on stderr.
#[test]
fn the_progress_line_shows_on_a_terminal() {
    if std::process::Command::new("script")
        .arg("--version")
        .output()
        .is_err()
    {
        eprintln!("skipped: no `script` to give the fit a terminal");
        return;
    }
    let dir = Scratch::new("fit-progress-line");
    let f = write_problem(&dir.path, 22, "max_iterations = 2\n");
    let cmd = format!(
        "{} fit {} --out {} --jobs 2 >/dev/null",
        support::bin(),
        arg(&f),
        arg(&dir.join("out"))
    );
    let o = std::process::Command::new("script")
        .args(["-qec", &cmd, "/dev/null"])
        .stdin(std::process::Stdio::null())
        .output()
        .unwrap();
    let tty = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success(), "{tty}");
    for w in ["fit iteration", "objective", "λ", "runs"] {
        assert!(tty.contains(w), "`{w}` not on the terminal: {tty:?}");
    }
}
