//! `[initial] state = "periodic"`: the periodic steady state found by shooting over
//! single periods, against the state a long integration settles into, and its input
//! checks. (The linear case against the steady-periodic solution of Carslaw & Jaeger is
//! the verification case `periodic-state`.)

use std::path::Path;

use deepdry::sim::run_in_memory;
use deepdry::solve::linear::SolverKind;

/// The demo case edited by `edit`, at the default rtol (1e-3; the demo sets 1e-5): the
/// bounds below are derived from the default's error weights.
fn case_text(edit: impl Fn(String) -> String) -> String {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases");
    let text = std::fs::read_to_string(dir.join("harrow-dunes-periodic.toml")).unwrap();
    assert!(text.contains("\nrtol = 1e-5\n"));
    edit(text.replace("\nrtol = 1e-5\n", "\n"))
}

fn parse(text: &str) -> deepdry::error::Result<deepdry::model::Model> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases");
    deepdry::case::parse(text, "harrow-dunes-periodic.toml", &dir)
}

fn max_diff(a: &[f64], b: &[f64]) -> f64 {
    a.iter()
        .zip(b)
        .map(|(x, y)| (x - y).abs())
        .fold(0.0f64, f64::max)
}

/// Runs `long` (from a state far from periodic, its last snapshot where it settled) and
/// `periodic` (from the periodic state); checks that the long run moved (the comparison
/// is not trivial) and that the periodic state is within a few of the integrations' error
/// weights of where it settled: both integrate at rtol 1e-3, whose liquid-content weight
/// is atol 1e-5 + 1e-3 θ ≈ 4e-5 at the wettest unsaturated cells (common practice), and
/// its water within 1e-3 relative. Returns the recorders (long, periodic).
fn check_settles(
    long: &deepdry::model::Model,
    periodic: &deepdry::model::Model,
) -> (deepdry::sim::Recorder, deepdry::sim::Recorder) {
    let (long_rec, _) = run_in_memory(long, SolverKind::BlockThomas).unwrap();
    let (rec, _) = run_in_memory(periodic, SolverKind::BlockThomas).unwrap();
    let settled = &long_rec.snapshots.last().unwrap().profile;
    let start = &long_rec.snapshots.first().unwrap().profile;
    let found = &rec.snapshots.first().unwrap().profile;
    assert!(max_diff(&start.liquid_content, &settled.liquid_content) > 1e-2);
    let dtheta = max_diff(&found.liquid_content, &settled.liquid_content);
    let dtemp = max_diff(&found.temperature_c, &settled.temperature_c);
    assert!(dtheta < 2.0e-4, "liquid content {dtheta:.3e}");
    assert!(dtemp < 2.0e-3, "temperature {dtemp:.3e} K");
    let (w_long, w_found) = (
        long_rec.series.last().unwrap().water_storage,
        rec.series.first().unwrap().water_storage,
    );
    assert!(
        ((w_found - w_long) / w_long).abs() < 1e-3,
        "{w_found} vs {w_long}"
    );
    (long_rec, rec)
}

/// The demo column shortened to 4 m, where an integration from the hydrostatic state
/// settles within a few hundred years (its storage changes by < 1e-5 relative from
/// 1 000 to 2 000 years, measured when this test was written).
fn short_column(text: String) -> String {
    text.replace("depth_m = 20.0", "depth_m = 4.0")
        .replace("cells = 150", "cells = 92")
        .replace("bottom_cell_m = 0.2", "bottom_cell_m = 0.1")
        .replace("bottom_m = 20.0", "bottom_m = 4.0")
}

#[test]
fn the_periodic_state_is_where_a_long_integration_settles() {
    // The long integration: 1 000 annual cycles from the hydrostatic state.
    let long = parse(&case_text(|t| {
        short_column(t)
            .replace(
                "state = \"periodic\"\nperiod_year = 1.0",
                "state = \"hydrostatic\"",
            )
            .replace("end_year = 100.0", "end_year = 1000.0")
            .replace(
                "times_year = [0.5, 1.0, 10.0, 100.0]",
                "times_year = [1000.0]",
            )
    }))
    .unwrap();
    // The periodic state, and one period from it. Measured: liquid content within
    // 8.1e-5, temperature 2.3e-4 K, water 2.4e-4 relative.
    let periodic = parse(&case_text(|t| {
        short_column(t)
            .replace("end_year = 100.0", "end_year = 1.0")
            .replace("times_year = [0.5, 1.0, 10.0, 100.0]", "times_year = [1.0]")
    }))
    .unwrap();
    let (_, rec) = check_settles(&long, &periodic);
    // The state found returns after one period.
    let found = &rec.snapshots.first().unwrap().profile;
    let after = &rec.snapshots.last().unwrap().profile;
    let back = max_diff(&after.liquid_content, &found.liquid_content);
    assert!(back < 4.0e-5, "change over one period {back:.3e}");
}

#[test]
fn periodic_keys_are_checked() {
    // The period is required.
    let e = parse(&case_text(|t| {
        t.replace("period_year = 1.0\n\n[time]", "\n[time]")
    }))
    .unwrap_err()
    .to_string();
    assert!(e.contains("period_year"), "{e}");
    // Its keys only with state = "periodic".
    let e = parse(&case_text(|t| {
        t.replace("\nstate = \"periodic\"\n", "\nstate = \"steady\"\n")
    }))
    .unwrap_err()
    .to_string();
    assert!(
        e.contains("period_year") && e.contains("only allowed with state = \"periodic\""),
        "{e}"
    );
    // A period must be positive; the tolerance within its range.
    let e = parse(&case_text(|t| {
        t.replace(
            "period_year = 1.0\n\n[time]",
            "period_year = -1.0\n\n[time]",
        )
    }))
    .unwrap_err()
    .to_string();
    assert!(e.contains("period_year") && e.contains("positive"), "{e}");
    let e = parse(&case_text(|t| {
        t.replace(
            "period_year = 1.0\n\n[time]",
            "period_year = 1.0\nperiodic_tolerance = 2.0\n\n[time]",
        )
    }))
    .unwrap_err()
    .to_string();
    assert!(
        e.contains("periodic_tolerance") && e.contains("1e-8 to 1"),
        "{e}"
    );
}

#[test]
fn a_spin_up_that_does_not_converge_says_so() {
    let m = parse(&case_text(|t| {
        t.replace(
            "period_year = 1.0\n\n[time]",
            "period_year = 1.0\nmax_periods = 3\n\n[time]",
        )
    }))
    .unwrap();
    let e = deepdry::sim::initial::initial_unknowns(&m, SolverKind::BlockThomas)
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("not converged in 3 periods") && e.contains("max_periods"),
        "{e}"
    );
}

#[test]
fn a_column_closed_at_both_ends_is_refused() {
    let e = parse(&case_text(|t| {
        t.replace("[bottom]\nhead_m = 0.0", "[bottom]\nno_flow = true")
            .replace(
                "\nstate = \"periodic\"\n",
                "\nstate = \"periodic\"\nsurface_temperature_C = 20.0\ngradient_K_per_m = 0.0\n",
            )
    }))
    .unwrap_err()
    .to_string();
    assert!(e.contains("closed to water at both ends"), "{e}");
}

/// `cases/seasonal-cycle.toml` shortened to 3 m: a surface open to air whose humidity and
/// temperature follow the year, evaporating what rises from the water table. An
/// integration from the hydrostatic state settles within 100 years (its storage equal to
/// 7 digits from 100 to 400 years, measured when this test was written).
#[test]
fn an_evaporating_column_settles_where_the_periodic_state_is() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases");
    let text = std::fs::read_to_string(dir.join("seasonal-cycle.toml"))
        .unwrap()
        .replace("depth_m = 10.0", "depth_m = 3.0")
        .replace("bottom_m = 10.0", "bottom_m = 3.0")
        .replace("cells = 150", "cells = 80");
    let model = |t: String| deepdry::case::parse(&t, "seasonal-cycle.toml", &dir).unwrap();
    let long = model(
        text.replace("end_year = 20.0", "end_year = 200.0")
            .replace("every_year = 0.125", "times_year = [200.0]"),
    );
    let periodic = model(
        text.replace(
            "\nstate = \"hydrostatic\"\n",
            "\nstate = \"periodic\"\nperiod_year = 1.0\n",
        )
        .replace("end_year = 20.0", "end_year = 1.0")
        .replace("every_year = 0.125", "times_year = [1.0]"),
    );
    // Measured: liquid content within 1.5e-6, temperature 1.8e-5 K.
    let (_, rec) = check_settles(&long, &periodic);
    // The report: over a period of the periodic state the column evaporates what rises
    // from the water table (its storage repeats; derived), and its water is the run's.
    let (_, report) =
        deepdry::sim::initial::initial_unknowns_reported(&periodic, SolverKind::BlockThomas)
            .unwrap();
    let r = report.expect("a report of the periodic state");
    assert!(r.surface_water < 0.0, "evaporation: {}", r.surface_water);
    assert!(
        ((r.surface_water - r.bottom_water) / r.surface_water).abs() < 1e-3,
        "in {} vs out {}",
        r.surface_water,
        r.bottom_water
    );
    let w0 = rec.series.first().unwrap().water_storage;
    assert!(((r.water - w0) / w0).abs() < 1e-12, "{} vs {w0}", r.water);
}

/// A plain van Genuchten soil with a residual content under a periodic forcing
/// (`cases/annual-wave.toml`, which did not converge in 200 periods): the error says
/// what to change.
#[test]
fn a_spin_up_over_a_plain_van_genuchten_soil_points_to_the_dry_end() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases");
    let text = std::fs::read_to_string(dir.join("annual-wave.toml"))
        .unwrap()
        .replace(
            "\nstate = \"hydrostatic\"\n",
            "\nstate = \"periodic\"\nperiod_year = 1.0\nmax_periods = 2\n",
        );
    let m = deepdry::case::parse(&text, "annual-wave.toml", &dir).unwrap();
    let e = deepdry::sim::initial::initial_unknowns(&m, SolverKind::BlockThomas)
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("not converged in 2 periods") && e.contains("dry_end = \"fayer-simmons\""),
        "{e}"
    );
    assert!(!e.contains('\n'), "one line: {e}");
}

#[test]
fn a_sinusoid_that_does_not_repeat_with_the_period_is_refused() {
    let e = parse(&case_text(|t| {
        t.replace("period_year = 1.0\n\n[time]", "period_year = 1.5\n\n[time]")
    }))
    .unwrap_err()
    .to_string();
    assert!(
        e.contains("period_year")
            && e.contains("the surface temperature")
            && e.contains("does not divide it"),
        "{e}"
    );
    // Two years hold two whole periods of the yearly wave.
    parse(&case_text(|t| {
        t.replace("period_year = 1.0\n\n[time]", "period_year = 2.0\n\n[time]")
    }))
    .unwrap();
}

/// Plants with a seasonal transpiration over the 3 m column of the test above: at the
/// periodic state the period's water balance closes with the root uptake (surface inflow
/// − bottom outflow − uptake = 0, the storage repeating; derived), which the report must
/// count (the bottom's outflow is the top's inflow minus the net inflow, the sinks and the
/// runoff, as in the series).
#[test]
fn the_report_counts_root_uptake_in_the_period_balance() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases");
    let text = std::fs::read_to_string(dir.join("seasonal-cycle.toml"))
        .unwrap()
        .replace("depth_m = 10.0", "depth_m = 3.0")
        .replace("bottom_m = 10.0", "bottom_m = 3.0")
        .replace("cells = 150", "cells = 80")
        .replace(
            "\nstate = \"hydrostatic\"\n",
            "\nstate = \"periodic\"\nperiod_year = 1.0\n",
        )
        + "\n[[vegetation]]\n\
           transpiration_mm_per_year = { mean = 20.0, amplitude = 20.0, period_year = 1.0, phase_year = 0.0 }\n\
           root_depth_m = 1.0\n\
           root_distribution = \"uniform\"\n\
           stress_heads_m = [-0.1, -0.25, -100.0, -20000.0]\n";
    let m = deepdry::case::parse(&text, "seasonal-cycle.toml", &dir).unwrap();
    let (_, report) =
        deepdry::sim::initial::initial_unknowns_reported(&m, SolverKind::BlockThomas).unwrap();
    let r = report.expect("a report");
    // Measured: 0.163 mm/yr in at the surface, 2.079 up from the water table, 2.242 to roots.
    assert!(r.root_water > 0.0, "roots took {}", r.root_water);
    let closure = r.surface_water - r.bottom_water - r.root_water - r.runoff_water;
    assert!(
        closure.abs() < 1e-3 * r.root_water,
        "surface {} bottom {} roots {}: {closure:.3e}",
        r.surface_water,
        r.bottom_water,
        r.root_water
    );
    assert!(
        r.describe().contains("taken up by roots"),
        "{}",
        r.describe()
    );
}
