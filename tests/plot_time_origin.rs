//! The log time axis of `deepdry plot` counts from a time origin: the `--time-origin`
//! option, else the case's `output.log_origin_year`, else the run's start; records at or
//! before the origin are left out with a note. (The claims checked here are about the
//! picture's axis, not about the model, so no outside source is involved.)

mod common;
mod plot_support;

use deepdry::error::Error;
use deepdry::plot::data::case_output_key;
use deepdry::plot::scale::Scale;
use deepdry::plot::{plot_results_with_notes, series_time_axis, PlotOptions, Plotted};
use plot_support::*;
use std::path::Path;

/// The synthetic series times after the start (see `write_synthetic`): 0, then 300
/// log-spaced from 10⁻³ to 10⁴ yr.
fn offsets() -> Vec<f64> {
    let mut t = vec![0.0];
    t.extend((0..300).map(|k| 10f64.powf(-3.0 + 7.0 * k as f64 / 299.0)));
    t
}

fn plot(file: &Path, out: &Path, log_time: bool, origin: Option<f64>) -> Plotted {
    plot_results_with_notes(
        file,
        &PlotOptions {
            out: Some(out.to_path_buf()),
            log_time,
            time_origin: origin,
            ..Default::default()
        },
    )
    .unwrap()
}

fn svg(out: &Path, name: &str) -> String {
    std::fs::read_to_string(out.join(format!("{name}.svg"))).unwrap()
}

/// The texts of an SVG document, trimmed.
fn texts(svg: &str) -> Vec<String> {
    svg.split("</text>")
        .filter_map(|part| part.rsplit_once('>').map(|(_, t)| t.trim().to_string()))
        .collect()
}

#[test]
fn calendar_years_get_a_log_axis_in_years_after_the_start() {
    // A run from year 1900: log10 of the calendar years spans less than one decade
    // (1900 to 11900), the years after the start span seven (10⁻³ to 10⁴).
    let dir = scratch("origin-calendar");
    let file = dir.join("calendar.h5");
    write_synthetic_with(&file, "Calendar years", "title = \"c\"\n", 1900.0);
    let out = dir.join("log");
    let p = plot(&file, &out, true, None);
    let s = svg(&out, "series-water-fluxes");
    assert!(
        s.contains("time [years after year 1900], log scale"),
        "label"
    );
    let labels = texts(&s);
    for tick in ["0.001", "0.1", "10", "1000", "10⁴"] {
        assert!(
            labels.iter().any(|l| l == tick),
            "tick {tick} missing: {labels:?}"
        );
    }
    // Only the record at the start itself is at or before the origin.
    assert_eq!(p.notes.len(), 1, "{:?}", p.notes);
    assert!(
        p.notes[0].contains("1 of 301 series records"),
        "{:?}",
        p.notes
    );
    assert!(p.notes[0].contains("year 1900"), "{:?}", p.notes);
    assert!(!p.notes[0].contains('\n'));
    assert!(s.contains("1 record at or before year 1900 not on the log axis"));

    // Without --log-time the axis is still logarithmic: the years after the start span
    // more than three decades.
    let out = dir.join("auto");
    let p = plot(&file, &out, false, None);
    assert!(svg(&out, "series-drying-front").contains("years after year 1900"));
    assert_eq!(p.notes.len(), 1);
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn the_case_log_origin_is_the_default_and_the_option_overrides_it() {
    let dir = scratch("origin-case");
    let file = dir.join("case.h5");
    write_synthetic_with(
        &file,
        "Case origin",
        "title = \"c\"\n[output]\nlog_origin_year = 1950.0\n",
        1900.0,
    );
    let out = dir.join("case");
    let p = plot(&file, &out, true, None);
    assert!(svg(&out, "series-water-storage").contains("time [years after year 1950]"));
    let before = offsets().iter().filter(|t| 1900.0 + **t <= 1950.0).count();
    assert!(before > 1);
    assert!(
        p.notes[0].contains(&format!("{before} of 301 series records")),
        "{:?}",
        p.notes
    );
    assert!(p.notes[0].contains("year 1950"));

    let out = dir.join("option");
    let p = plot(&file, &out, true, Some(1800.0));
    assert!(svg(&out, "series-water-storage").contains("time [years after year 1800]"));
    assert!(p.notes.is_empty(), "{:?}", p.notes);

    // A linear axis (a short run without --log-time) shows the years themselves.
    let axis = series_time_axis(&[1900.0, 1901.0, 1905.0], 1900.0, false);
    assert_eq!(axis.axis.scale, Scale::Linear);
    assert_eq!(axis.label(), "time [yr]");
    assert_eq!(axis.left_out(&[1900.0, 1901.0]), 0);
    // A log axis with nothing after the origin falls back to linear.
    let axis = series_time_axis(&[1900.0, 1901.0], 1950.0, true);
    assert_eq!(axis.axis.scale, Scale::Linear);

    let m = match plot_results_with_notes(
        &file,
        &PlotOptions {
            out: Some(dir.join("bad")),
            time_origin: Some(f64::NAN),
            ..Default::default()
        },
    ) {
        Err(Error::Input(m)) => m,
        other => panic!("expected an input error, got {other:?}"),
    };
    assert!(m.contains("--time-origin") && m.contains("finite"), "{m}");
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn the_origin_is_read_from_the_case_text_with_its_overrides() {
    let text = "[output]\nlog_origin_year = 0.0\nlog_from_year = 0.01\n";
    let get = |o: &str| case_output_key(text, o, "log_origin_year");
    assert_eq!(get(""), Some(toml::Value::Float(0.0)));
    assert_eq!(
        get("time.end_year=3\noutput.log_origin_year=1950"),
        Some(toml::Value::Integer(1950))
    );
    assert_eq!(get("output.log_origin_year (removed)"), None);
    assert_eq!(case_output_key("not toml [", "", "log_origin_year"), None);
    assert_eq!(
        case_output_key("[time]\nend_year = 3.0\n", "", "log_origin_year"),
        None
    );
}
