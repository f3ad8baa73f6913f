//! `deepdry plot` from the command line.
//!
//! Kept in its own test binary: a child process inherits the HDF5 file descriptors (and
//! their locks) that other test threads of the same process hold open at that moment.

mod common;
mod plot_support;

use plot_support::*;
use std::process::Command;

#[test]
fn command_line_prints_paths_and_reports_errors_on_one_line() {
    let dir = scratch("cli");
    let f = dir.join("r.h5");
    write_synthetic(&f, "cli");
    let exe = env!("CARGO_BIN_EXE_deepdry");
    let out = Command::new(exe)
        .args(["plot", f.to_str().unwrap(), "--out"])
        .arg(dir.join("pics"))
        .args(["--times", "0.1,100", "--log-time"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let stdout = String::from_utf8(out.stdout).unwrap();
    assert_eq!(stdout.lines().count(), 2 * PLOT_NAMES.len(), "{stdout}");
    assert!(stdout.lines().all(|l| std::path::Path::new(l).is_file()));

    let out = Command::new(exe)
        .args(["plot", dir.join("absent.h5").to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(deepdry::error::exit::INPUT));
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(stderr.contains("absent.h5: no such file"), "{stderr}");

    let out = Command::new(exe)
        .args(["plot", f.to_str().unwrap(), "--times", "99999"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(deepdry::error::exit::INPUT));
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(stderr.contains("outside"), "{stderr}");

    // A file that a writer holds open (as a running `deepdry run` does) is locked.
    let writer = hdf5::File::open_rw(&f).unwrap();
    let out = Command::new(exe)
        .args(["plot", f.to_str().unwrap()])
        .output()
        .unwrap();
    drop(writer);
    assert_eq!(out.status.code(), Some(deepdry::error::exit::IO));
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(stderr.contains("locked"), "{stderr}");
    let _ = std::fs::remove_dir_all(&dir);
}
