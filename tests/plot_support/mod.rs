//! Synthetic results files for the plot tests, written with the real results writer from
//! made-up smooth profiles (no solver involved).
#![allow(dead_code)]

use crate::common;
use deepdry::output::diagnostics::{Profile, SeriesRecord};
use deepdry::output::results::ResultsFile;
use std::path::{Path, PathBuf};

pub const SNAPSHOT_TIMES: [f64; 8] = [0.0, 0.01, 0.1, 1.0, 10.0, 100.0, 1000.0, 10000.0];
pub const DEPTH: f64 = 50.0;
pub const CELLS: usize = 40;

/// A fresh, empty folder for one test.
pub fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("deepdry-plot-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn profile(t: f64, centers: &[f64], faces: &[f64]) -> Profile {
    // Drying front moving down like sqrt(t); surface suction of 1e5 m above it.
    let front = 0.3 + 0.4 * t.sqrt();
    let temp = |z: f64| 18.0 + 0.03 * z + 8.0 * (-z / (1.0 + 0.2 * t.sqrt())).exp();
    let head = |z: f64| {
        if z > DEPTH - 0.7 {
            0.2 // ponded/saturated cell at the bottom: h >= 0 must be handled
        } else {
            -(DEPTH - z) - 1e5 * (-(z / front).powi(2)).exp()
        }
    };
    let theta = |h: f64| {
        let s = if h >= 0.0 {
            1.0
        } else {
            (1.0 + (7.5 * -h).powf(1.89)).powf(-(1.0 - 1.0 / 1.89))
        };
        0.065 + (0.41 - 0.065) * s
    };
    let mut p = Profile::default();
    for &z in centers {
        let h = head(z);
        let tc = temp(z);
        p.temperature_c.push(tc);
        p.head.push(h);
        p.liquid_content.push(theta(h));
        let rh = (h * 9.81 * 0.018015 / (8.314 * (tc + 273.15))).exp();
        p.relative_humidity.push(rh);
        p.vapor_density.push(0.017 * rh);
    }
    for &z in faces {
        // Upward liquid flow below the front, downward above; upward vapour near the top.
        p.liquid_iso
            .push(2e-10 * ((z - front) / 5.0).tanh() * (-z / 30.0).exp());
        p.liquid_th.push(-3e-12 * (-z / 10.0).exp());
        p.vapor_iso.push(-5e-10 * (-z / front).exp());
        p.vapor_th
            .push(1e-10 * (-z / 3.0).exp() * (1.0 + t).powf(-0.2));
        p.heat.push(-0.5 * (-z / 5.0).exp());
    }
    p
}

/// Writes a synthetic results file at `path`: 8 snapshots from 0 to 10⁴ yr and 301
/// series records (t = 0, then log-spaced from 10⁻³ to 10⁴ yr).
pub fn write_synthetic(path: &Path, title: &str) {
    write_synthetic_with(path, title, "title = \"synthetic\"\n", 0.0);
}

/// [`write_synthetic`] with the given case text kept in the file and every time
/// (snapshots and series) shifted by `year0` years: the run starts at year `year0`.
pub fn write_synthetic_with(path: &Path, title: &str, case_text: &str, year0: f64) {
    let mut model = common::column(
        common::uniform_mesh(DEPTH, CELLS),
        common::sandy_loam(),
        common::dry_surface(300.0, 0.2),
        common::water_table(295.0),
        300.0,
        295.0,
        1e4 * common::YEAR,
    );
    model.title = title.into();
    model.case_text = case_text.into();
    let centers = model.mesh.centers.clone();
    let faces = model.mesh.faces.clone();
    let mut rf = ResultsFile::create(path, &model, true).unwrap();
    let mut times: Vec<f64> = vec![0.0];
    times.extend((0..300).map(|k| 10f64.powf(-3.0 + 7.0 * k as f64 / 299.0)));
    let mut next_snapshot = 0;
    for (k, &t) in times.iter().enumerate() {
        let err = if k % 7 == 0 {
            0.0
        } else {
            1e-10 * (1.0 + (k as f64).sin())
        };
        rf.push_series(SeriesRecord {
            time_year: year0 + t,
            surface_water_flux: -3e-9 / (1.0 + t).sqrt() + 1e-11,
            bottom_water_flux: 2e-12 * (t / 100.0).ln().tanh().max(-1.0),
            surface_heat_flux: -1.0,
            bottom_heat_flux: 0.05,
            water_storage: 8000.0 - 400.0 * (1.0 - 1.0 / (1.0 + t).sqrt()),
            water_balance_error: err * 1e3,
            energy_balance_error: err * 1e6,
            water_balance_relative: err,
            energy_balance_relative: -3.0 * err,
            drying_front_depth: 0.3 + 0.4 * t.sqrt(),
            dt: 100.0,
            newton_iterations: 3.0,
            ..Default::default()
        })
        .unwrap();
        while next_snapshot < SNAPSHOT_TIMES.len() && SNAPSHOT_TIMES[next_snapshot] <= t {
            let ts = SNAPSHOT_TIMES[next_snapshot];
            rf.write_snapshot(year0 + ts, &profile(ts, &centers, &faces))
                .unwrap();
            next_snapshot += 1;
        }
    }
    rf.flush().unwrap();
}

/// The plot names `deepdry plot` writes (each as .svg and .png).
pub const PLOT_NAMES: [&str; 9] = [
    "profiles-temperature",
    "profiles-suction",
    "profiles-liquid-content",
    "profiles-relative-humidity",
    "profiles-water-fluxes",
    "series-water-fluxes",
    "series-drying-front",
    "series-water-storage",
    "series-balance-errors",
];

/// A results file with a single snapshot of uniform profiles (h = 0, zero fluxes, a NaN
/// in the temperature) and no series rows: every axis range is degenerate.
pub fn write_flat(path: &Path) {
    let model = common::column(
        common::uniform_mesh(2.0, 5),
        common::sandy_loam(),
        common::dry_surface(300.0, 0.2),
        common::water_table(300.0),
        300.0,
        300.0,
        common::YEAR,
    );
    let mut rf = ResultsFile::create(path, &model, true).unwrap();
    let mut p = Profile::default();
    let n = 5;
    p.temperature_c = vec![20.0; n];
    p.temperature_c[2] = f64::NAN;
    p.head = vec![0.0; n];
    p.liquid_content = vec![0.41; n];
    p.vapor_density = vec![0.017; n];
    p.relative_humidity = vec![1.0; n];
    for v in [
        &mut p.liquid_iso,
        &mut p.liquid_th,
        &mut p.vapor_iso,
        &mut p.vapor_th,
        &mut p.heat,
    ] {
        *v = vec![0.0; n + 1];
    }
    rf.write_snapshot(0.0, &p).unwrap();
    rf.flush().unwrap();
}
