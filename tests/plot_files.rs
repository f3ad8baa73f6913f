//! `deepdry plot` on a synthetic results file: the expected pictures, with labels.

mod common;
mod plot_support;

use deepdry::plot::{plot_results, PlotOptions};
use plot_support::*;

#[test]
fn writes_every_plot_as_svg_and_png() {
    let dir = scratch("files");
    let file = dir.join("synthetic.h5");
    write_synthetic(&file, "Synthetic desert column");
    let out = dir.join("pictures");
    let written = plot_results(
        &file,
        &PlotOptions {
            out: Some(out.clone()),
            ..Default::default()
        },
    )
    .unwrap();

    let mut expected: Vec<_> = PLOT_NAMES
        .iter()
        .flat_map(|n| [out.join(format!("{n}.svg")), out.join(format!("{n}.png"))])
        .collect();
    let mut got = written.clone();
    expected.sort();
    got.sort();
    assert_eq!(got, expected);
    for p in &written {
        let bytes = std::fs::read(p).unwrap();
        assert!(bytes.len() > 1000, "{} is too small", p.display());
        if p.extension().unwrap() == "png" {
            assert_eq!(&bytes[1..4], b"PNG", "{}", p.display());
        } else {
            let text = String::from_utf8(bytes).unwrap();
            assert!(text.starts_with("<svg"), "{}", p.display());
            assert!(text.contains("Synthetic desert column"), "{}", p.display());
        }
    }

    let svg = |name: &str| std::fs::read_to_string(out.join(format!("{name}.svg"))).unwrap();
    let temp = svg("profiles-temperature");
    for needle in [
        "depth [m]",
        "temperature [°C]",
        "snapshot",
        // All 8 snapshots exceed the default count of 6: the picked ones include the
        // first and last, spread in log time.
        "t = 0 yr",
        "t = 10000 yr",
        "t = 0.01 yr",
    ] {
        assert!(temp.contains(needle), "temperature plot lacks {needle:?}");
    }
    let suction = svg("profiles-suction");
    assert!(suction.contains("suction −h [m], log scale"));
    assert!(suction.contains("incl. h ≥ 0"));
    assert!(svg("profiles-liquid-content").contains("[m³ m⁻³]"));
    assert!(svg("profiles-relative-humidity").contains("relative humidity [-]"));
    let fluxes = svg("profiles-water-fluxes");
    for needle in [
        "liquid, isothermal",
        "liquid, thermal",
        "vapour, isothermal",
        "vapour, thermal",
        "water flux [mm/yr]",
        "symmetric log",
    ] {
        assert!(fluxes.contains(needle), "flux profiles lack {needle:?}");
    }
    let series = svg("series-water-fluxes");
    for needle in [
        "surface",
        "bottom",
        "time [years after year 0], log scale",
        "mm/yr",
    ] {
        assert!(series.contains(needle), "flux series lack {needle:?}");
    }
    // One name for the scale, in words, on every figure.
    assert!(series.contains("symmetric log"));
    for name in PLOT_NAMES {
        assert!(!svg(name).contains("symlog"), "{name} says symlog");
    }
    assert!(svg("series-drying-front").contains("drying-front depth [m]"));
    assert!(svg("series-water-storage").contains("water storage [kg m⁻² = mm]"));
    let errs = svg("series-balance-errors");
    assert!(errs.contains("water") && errs.contains("energy"));
    assert!(errs.contains("relative balance error"));
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn default_output_folder_is_the_results_folder_and_times_are_honoured() {
    let dir = scratch("default-out");
    let file = dir.join("run.h5");
    write_synthetic(&file, "Times test");
    let written = plot_results(
        &file,
        &PlotOptions {
            times: Some(vec![0.9, 120.0]),
            ..Default::default()
        },
    )
    .unwrap();
    assert_eq!(written.len(), 2 * PLOT_NAMES.len());
    assert!(written.iter().all(|p| p.parent() == Some(dir.as_path())));
    let temp = std::fs::read_to_string(dir.join("profiles-temperature.svg")).unwrap();
    assert!(temp.contains("t = 1 yr"));
    assert!(temp.contains("t = 100 yr"));
    assert!(!temp.contains("t = 10 yr"));
    assert!(!temp.contains("t = 10000 yr"));
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn the_times_asked_for_in_the_case_are_drawn_by_default() {
    let dir = scratch("asked");
    let file = dir.join("asked.h5");
    write_synthetic_with(
        &file,
        "Asked times",
        "title = \"a\"\n[output]\ntimes_year = [1.0, 1000.0]\n",
        0.0,
    );
    plot_results(&file, &PlotOptions::default()).unwrap();
    let temp = std::fs::read_to_string(dir.join("profiles-temperature.svg")).unwrap();
    for needle in ["t = 1 yr", "t = 1000 yr", "at 6 times"] {
        assert!(temp.contains(needle), "temperature plot lacks {needle:?}");
    }
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn linear_time_axis_for_a_short_run() {
    let axis = deepdry::plot::time_axis(&[0.0, 1.0, 2.0, 5.0], false);
    assert_eq!(axis.scale, deepdry::plot::scale::Scale::Linear);
    let axis = deepdry::plot::time_axis(&[0.0, 1.0, 2.0, 5.0], true);
    assert_eq!(axis.scale, deepdry::plot::scale::Scale::Log);
    let axis = deepdry::plot::time_axis(&[0.0, 1e-3, 1.0, 10.0], false);
    assert_eq!(axis.scale, deepdry::plot::scale::Scale::Log);
}

#[test]
fn flat_single_snapshot_file_without_series() {
    let dir = scratch("flat");
    let file = dir.join("flat.h5");
    write_flat(&file);
    let written = plot_results(&file, &PlotOptions::default()).unwrap();
    // Profiles only: there are no series rows to draw.
    let names: Vec<String> = written
        .iter()
        .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names.len(), 10, "{names:?}");
    assert!(
        names.iter().all(|n| n.starts_with("profiles-")),
        "{names:?}"
    );
    for p in &written {
        assert!(std::fs::metadata(p).unwrap().len() > 1000);
    }
    let temp = std::fs::read_to_string(dir.join("profiles-temperature.svg")).unwrap();
    assert!(temp.contains("at t = 0 yr"));
    // The case title heads every picture.
    assert!(temp.contains("test column"));
    let _ = std::fs::remove_dir_all(&dir);
}
