//! The notes `deepdry check` and `run` print for a case that will run but poorly: a water
//! table moving through cells that take their liquid content at the centre, and periodic
//! surface forcing over a soil whose plain van Genuchten curve keeps a residual content.
//! What the notes warn of is measured in README, "Performance" (the moving table's
//! pulsing bottom flux; the periodic case's ~2 700 steps per year without a dry end).

mod support;

use std::path::Path;
use support::{arg, deepdry, stdout, Scratch};

fn model(file: &str, edit: impl Fn(String) -> String) -> deepdry::model::Model {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases");
    let text = edit(std::fs::read_to_string(dir.join(file)).unwrap());
    deepdry::case::parse(&text, file, &dir).unwrap()
}

#[test]
fn periodic_forcing_over_a_plain_van_genuchten_soil_is_noted() {
    let m = model("annual-wave.toml", |t| t);
    let note = m.periodic_dry_end_note().expect("a note");
    assert!(
        note.contains("soil sand") && note.contains("fayer-simmons"),
        "{note}"
    );
    // With the dry end: no note.
    let m = model("annual-wave.toml", |t| {
        t.replace(
            "enhancement = {",
            "dry_end = \"fayer-simmons\"\nenhancement = {",
        )
    });
    assert_eq!(m.periodic_dry_end_note(), None);
    // Without the wave (amplitude 0): no note.
    let m = model("annual-wave.toml", |t| {
        t.replace("amplitude = 10.0", "amplitude = 0.0")
    });
    assert_eq!(m.periodic_dry_end_note(), None);
    // The note reaches `deepdry check`.
    let case = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases/annual-wave.toml");
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_deepdry"))
        .args(["check", case.to_str().unwrap()])
        .output()
        .unwrap();
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(
        out.contains("note: soil sand: plain van Genuchten"),
        "{out}"
    );
}

#[test]
fn a_water_table_moving_through_centre_valued_cells_is_noted() {
    // The demo's table falls below the column: nothing moves through its cells.
    assert_eq!(
        model("falling-water-table.toml", |t| t).moving_table_note(),
        None
    );
    // Rising 10 m into the column instead.
    let rising = |t: String| t.replace("end = -30.0", "end = 10.0");
    let m = model("falling-water-table.toml", rising);
    let note = m.moving_table_note().expect("a note");
    assert!(note.contains("cell_average_retention"), "{note}");
    let m = model("falling-water-table.toml", |t| {
        rising(t).replace("[mesh]", "[mesh]\ncell_average_retention = true")
    });
    assert_eq!(m.moving_table_note(), None);
}

/// A surface cycle repeated at least 100 times at an rtol above 2e-5 is noted: the water
/// exchanged through the boundaries adds up each period's integration error (measured in
/// README, "Periodic forcing: the water exchanged over many periods").
#[test]
fn many_cycles_at_a_loose_tolerance_are_noted() {
    let loose = |t: String| t.replace("rtol = 1e-5\n", "");
    // The demo sets rtol = 1e-5: no note.
    assert_eq!(
        model("harrow-dunes.toml", |t| t).periodic_exchange_note(),
        None
    );
    // At the default rtol (1e-3), 10 000 annual cycles are noted.
    let m = model("harrow-dunes.toml", loose);
    assert_eq!(m.time.rtol, 1e-3);
    let note = m.periodic_exchange_note().expect("a note");
    assert!(
        note.contains("repeats 10000 times") && note.contains("time.rtol = 1e-5"),
        "{note}"
    );
    // 50 cycles: no note; 100: a note.
    for (end, noted) in [("50.0", false), ("100.0", true)] {
        let m = model("harrow-dunes.toml", |t| {
            loose(t)
                .replace("end_year = 10000.0", &format!("end_year = {end}"))
                .replace(
                    "times_year = [1.0, 10.0, 100.0, 1000.0, 3000.0, 10000.0]",
                    "times_year = [1.0]",
                )
        });
        assert_eq!(m.periodic_exchange_note().is_some(), noted, "{end} years");
    }
    // Without the wave (amplitude 0): no note.
    let m = model("harrow-dunes.toml", |t| {
        loose(t).replace("amplitude = 10.0", "amplitude = 0.0")
    });
    assert_eq!(m.periodic_exchange_note(), None);
    // A daily cycle over 1 000 years at rtol 1e-4 is noted (365 250 periods).
    let m = model("harrow-dunes-daily.toml", |t| {
        t.replace("rtol = 1e-5\n", "rtol = 1e-4\n")
    });
    let note = m.periodic_exchange_note().expect("a note");
    assert!(note.contains("repeats 365250 times"), "{note}");
    // The note reaches `deepdry check`.
    let dir = Scratch::new("notes");
    let text = loose(
        std::fs::read_to_string(
            Path::new(env!("CARGO_MANIFEST_DIR")).join("cases/harrow-dunes.toml"),
        )
        .unwrap(),
    );
    let case = dir.write("harrow-dunes-loose.toml", &text);
    let o = deepdry(&["check", arg(&case)]);
    let out = stdout(&o);
    assert!(
        o.status.success() && out.contains("note: the surface cycle repeats 10000 times"),
        "{out}"
    );
}
