//! Bad input to `deepdry plot` gives one clear line, never a panic.

mod common;
mod plot_support;

use deepdry::error::Error;
use deepdry::plot::{plot_results, PlotOptions};
use plot_support::*;

fn input_error(r: deepdry::error::Result<Vec<std::path::PathBuf>>) -> String {
    match r {
        Err(Error::Input(m)) => {
            assert!(!m.contains('\n'), "more than one line: {m}");
            m
        }
        other => panic!("expected an input error, got {other:?}"),
    }
}

#[test]
fn missing_file() {
    let dir = scratch("missing");
    let m = input_error(plot_results(&dir.join("nope.h5"), &PlotOptions::default()));
    assert!(m.contains("nope.h5") && m.contains("no such file"), "{m}");
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn not_an_hdf5_file() {
    let dir = scratch("text");
    let f = dir.join("case.toml");
    std::fs::write(&f, "title = \"not results\"\n").unwrap();
    let m = input_error(plot_results(&f, &PlotOptions::default()));
    assert!(
        m.contains("case.toml") && m.contains("not a deepdry results file"),
        "{m}"
    );
    let m = input_error(plot_results(&dir, &PlotOptions::default()));
    assert!(m.contains("folder"), "{m}");
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn hdf5_file_of_another_kind() {
    let dir = scratch("other-h5");
    let f = dir.join("other.h5");
    {
        let file = hdf5::File::create(&f).unwrap();
        file.create_group("profiles").unwrap();
    }
    let m = input_error(plot_results(&f, &PlotOptions::default()));
    assert!(m.contains("not a deepdry results file"), "{m}");
    assert!(m.contains("kind"), "{m}");
    // Right kind, but a dataset missing.
    {
        let file = hdf5::File::open_rw(&f).unwrap();
        deepdry::output::h5util::attr_str(&file, "kind", "deepdry-results").unwrap();
    }
    let m = input_error(plot_results(&f, &PlotOptions::default()));
    assert!(m.contains("/mesh/face_depth"), "{m}");
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn requested_time_outside_the_run() {
    let dir = scratch("late");
    let f = dir.join("r.h5");
    write_synthetic(&f, "late");
    let m = input_error(plot_results(
        &f,
        &PlotOptions {
            times: Some(vec![1.0, 2e4]),
            ..Default::default()
        },
    ));
    assert!(
        m.contains("r.h5") && m.contains("20000") && m.contains("outside"),
        "{m}"
    );
    // Nothing was drawn.
    assert!(!dir.join("profiles-temperature.svg").exists());
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn unwritable_output_folder() {
    let dir = scratch("unwritable");
    let f = dir.join("r.h5");
    write_synthetic(&f, "unwritable");
    // A folder below a plain file cannot be made, even by root.
    let blocker = dir.join("plain-file");
    std::fs::write(&blocker, "x").unwrap();
    for out in [blocker.join("pictures"), blocker.clone()] {
        match plot_results(
            &f,
            &PlotOptions {
                out: Some(out.clone()),
                ..Default::default()
            },
        ) {
            Err(Error::Io(m)) => {
                assert!(!m.contains('\n'), "{m}");
                assert!(m.contains("plain-file"), "{m}");
            }
            other => panic!("expected an I/O error for {}, got {other:?}", out.display()),
        }
    }
    let _ = std::fs::remove_dir_all(&dir);
}
