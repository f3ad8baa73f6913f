//! A simulation run in memory (`sim::run_in_memory`: a recorder as its only observer, no
//! files) records bitwise the series and profiles that `deepdry run` writes to its
//! results file for the same case.

mod support;

use deepdry::output::diagnostics::{Profile, SeriesRecord};
use deepdry::solve::linear::SolverKind;
use std::path::Path;
use support::*;

fn bits(v: &[f64]) -> Vec<u64> {
    v.iter().map(|x| x.to_bits()).collect()
}

/// The cell and face profiles by their dataset names in `/profiles`.
fn profile_columns(p: &Profile) -> [(&'static str, &Vec<f64>); 10] {
    [
        ("temperature", &p.temperature_c),
        ("head", &p.head),
        ("liquid_content", &p.liquid_content),
        ("vapor_density", &p.vapor_density),
        ("relative_humidity", &p.relative_humidity),
        ("liquid_flux_isothermal", &p.liquid_iso),
        ("liquid_flux_thermal", &p.liquid_th),
        ("vapor_flux_isothermal", &p.vapor_iso),
        ("vapor_flux_thermal", &p.vapor_th),
        ("heat_flux", &p.heat),
    ]
}

#[test]
fn in_memory_series_and_profiles_are_bitwise_those_of_the_results_file() {
    let case = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases/quickstart.toml");
    let dir = Scratch::new("in-memory");
    let out = dir.join("out");
    run_ok(&case, &out, &[]);
    let file = datasets(&out.join("results.h5")).unwrap();

    let model = deepdry::case::load(&case).unwrap();
    let (rec, finish) = deepdry::sim::run_in_memory(&model, SolverKind::BlockThomas).unwrap();
    assert!(finish.counters.steps > 0);
    // The file holds no more and no fewer series rows or snapshots than the recorder.
    let rows = rec.series.len();
    assert!(rows > 10, "{rows} series records: too few to test");
    let times: Vec<f64> = rec.series.iter().map(|r| r.time_year).collect();
    assert_eq!(file["series/time"].floats().len(), rows);
    assert_eq!(bits(&file["series/time"].floats()), bits(&times));
    for (k, (name, _, _)) in SeriesRecord::FIELDS.iter().enumerate() {
        let col: Vec<f64> = rec.series.iter().map(|r| r.values()[k]).collect();
        assert_eq!(
            bits(&file[&format!("series/{name}")].floats()),
            bits(&col),
            "series/{name}"
        );
    }

    let snaps = rec.snapshots.len();
    assert_eq!(
        snaps,
        model.output.snapshot_times.len() + 1,
        "start + each output time"
    );
    let snap_times: Vec<f64> = rec.snapshots.iter().map(|s| s.time_year).collect();
    assert_eq!(bits(&file["profiles/time"].floats()), bits(&snap_times));
    let empty = Profile::default();
    for (c, (name, _)) in profile_columns(&empty).iter().enumerate() {
        let flat: Vec<f64> = rec
            .snapshots
            .iter()
            .flat_map(|s| profile_columns(&s.profile)[c].1.clone())
            .collect();
        let stored = file[&format!("profiles/{name}")].floats();
        assert!(!stored.is_empty(), "profiles/{name} is empty");
        assert_eq!(bits(&stored), bits(&flat), "profiles/{name}");
    }
    // The coordinates of the profiles are the model's mesh.
    assert_eq!(
        bits(&file["profiles/depth"].floats()),
        bits(&model.mesh.centers)
    );
    assert_eq!(
        bits(&file["profiles/face_depth"].floats()),
        bits(&model.mesh.faces)
    );
    // Every series and profile dataset of the file was compared above, but the water per
    // layer and its layer coordinate (the file's only: the recorder keeps no per-layer
    // storage; tests/results_layout.rs checks them).
    let compared = 1 + SeriesRecord::FIELDS.len() + 1 + profile_columns(&empty).len() + 2 + 2;
    let in_file = file
        .keys()
        .filter(|k| k.starts_with("series/") || k.starts_with("profiles/"))
        .count();
    assert_eq!(compared, in_file, "datasets in /series and /profiles");
}
