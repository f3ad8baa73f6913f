//! The results file follows the netCDF-4 data model (dimension scales `time`, `depth`,
//! `face_depth` attached to every profile and series dataset, CF attributes), and its
//! cumulative boundary totals close the balance that the run reports.
//!
//! (Real readers — xarray with h5netcdf and netCDF4, pandas — open the same files in
//! `scripts/readers.sh`, a step of the README's test command.)

mod support;

use hdf5::types::VarLenUnicode;
use std::path::{Path, PathBuf};
use support::*;

fn quickstart(dir: &Scratch) -> PathBuf {
    let case = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases/quickstart.toml");
    let out = dir.join("out");
    run_ok(&case, &out, &[]);
    out.join("results.h5")
}

fn attr(loc: &hdf5::Location, name: &str) -> Option<String> {
    let v: VarLenUnicode = loc.attr(name).ok()?.read_scalar().ok()?;
    Some(v.as_str().to_string())
}

#[test]
fn profiles_and_series_carry_dimension_scales_and_cf_attributes() {
    let dir = Scratch::new("layout-scales");
    let path = quickstart(&dir);
    let _g = h5_guard();
    let f = hdf5::File::open(&path).unwrap();
    assert_eq!(attr(&f, "Conventions").as_deref(), Some("CF-1.8"));
    let mut attached = 0;
    for (group, scales) in [
        ("profiles", &["time", "depth", "face_depth"][..]),
        ("series", &["time", "layer"][..]),
    ] {
        let g = f.group(group).unwrap();
        for s in scales {
            let ds = g.dataset(s).unwrap();
            // H5DS marks a scale with CLASS = "DIMENSION_SCALE" and its NAME.
            assert!(
                ds.attr("CLASS").is_ok(),
                "{group}/{s} is not a dimension scale"
            );
            assert!(
                ds.attr("REFERENCE_LIST").is_ok(),
                "{group}/{s} is attached to nothing"
            );
        }
        for name in g.member_names().unwrap() {
            let ds = g.dataset(&name).unwrap();
            assert!(attr(&ds, "units").is_some(), "{group}/{name}: no units");
            assert!(
                attr(&ds, "long_name").is_some(),
                "{group}/{name}: no long_name"
            );
            if scales.contains(&name.as_str()) {
                continue;
            }
            assert!(
                ds.attr("DIMENSION_LIST").is_ok(),
                "{group}/{name}: no dimension scales attached"
            );
            attached += 1;
        }
    }
    // 10 profiles, one series dataset per record field and the water per layer.
    let series = deepdry::output::diagnostics::SeriesRecord::FIELDS.len();
    assert_eq!(attached, 10 + series + 1);
    let depth = f.dataset("profiles/depth").unwrap();
    assert_eq!(attr(&depth, "positive").as_deref(), Some("down"));
    assert_eq!(attr(&depth, "standard_name").as_deref(), Some("depth"));
    // The profiles' depth is the mesh's.
    let a = depth.read_raw::<f64>().unwrap();
    let b = f.dataset("mesh/depth").unwrap().read_raw::<f64>().unwrap();
    assert_eq!(a, b);
    let t = f.dataset("profiles/temperature").unwrap();
    assert_eq!(
        attr(&t, "standard_name").as_deref(),
        Some("soil_temperature")
    );
    let time = f.dataset("series/time").unwrap();
    assert!(attr(&time, "comment").unwrap().contains("365.25 days"));
}

#[test]
fn cumulative_water_closes_to_the_reported_balance_error() {
    let dir = Scratch::new("layout-cumulative");
    let path = quickstart(&dir);
    let d = datasets(&path).unwrap();
    let col = |n: &str| d[&format!("series/{n}")].floats();
    let (storage, err) = (col("water_storage"), col("water_balance_error"));
    let (top, bottom) = (
        col("surface_water_cumulative"),
        col("bottom_water_cumulative"),
    );
    let (time, q_top) = (col("time"), col("surface_water_flux"));
    assert!(storage.len() > 100, "{} rows", storage.len());
    assert_eq!(top[0], 0.0);
    assert_eq!(bottom[0], 0.0);
    let mut worst = 0.0f64;
    for k in 0..storage.len() {
        let change = storage[k] - storage[0];
        // The storage column is the content summed cell by cell, the balance error the
        // change summed cell by cell: they differ by the round-off of the sum (n cells
        // × ε × content; 120 cells here, 256 ε allowed).
        let tol = 256.0 * f64::EPSILON * (storage[k].abs() + top[k].abs() + bottom[k].abs());
        let gap = (change - (top[k] - bottom[k]) - err[k]).abs();
        assert!(
            gap <= tol,
            "row {k} (t = {} yr): storage change {change:e} − net cumulative inflow {:e} = {:e}, reported error {:e}",
            time[k],
            top[k] - bottom[k],
            change - (top[k] - bottom[k]),
            err[k]
        );
        worst = worst.max(gap);
    }
    // The cumulative surface water is the time integral of the surface flux
    // [kg m-2 s-1] over seconds: a trapezoid over the series agrees to its own error
    // (measured 2e-5 relative on the main demo; 1e-3 allowed).
    let year = 365.25 * 86400.0;
    let mut trap = 0.0;
    for k in 1..time.len() {
        trap += 0.5 * (q_top[k] + q_top[k - 1]) * (time[k] - time[k - 1]) * year;
    }
    let last = *top.last().unwrap();
    assert!(last.abs() > 0.0);
    assert!(
        (trap - last).abs() <= 1e-3 * last.abs(),
        "trapezoid {trap:e} vs cumulative {last:e}"
    );
    eprintln!("worst closure gap {worst:e} kg m-2; trapezoid {trap:e} vs {last:e}");
}

#[test]
fn a_results_file_of_the_earlier_layout_is_not_continued() {
    let dir = Scratch::new("layout-old-file");
    let case = dir.write("case.toml", &Small::default().text());
    let out = dir.join("out");
    run_ok(&case, &out, &[]);
    let results = out.join("results.h5");
    {
        // What a results file of the earlier layout lacks.
        let _g = h5_guard();
        let f = hdf5::File::open_rw(&results).unwrap();
        f.group("series")
            .unwrap()
            .unlink("surface_water_cumulative")
            .unwrap();
    }
    let o = run_deepdry(&case, &out, &["--resume", arg(&checkpoint_at(&out, 5.0))]);
    assert_one_line_error(
        &o,
        4,
        &[
            "cannot be continued",
            "earlier deepdry version",
            "series/surface_water_cumulative",
        ],
    );
}

#[test]
fn layer_water_storage_sums_to_the_column_storage() {
    let dir = Scratch::new("layout-layers");
    let case = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases/glacial-to-arid.toml");
    let out = dir.join("out");
    run_ok(&case, &out, &[]);
    let path = out.join("results.h5");
    let d = datasets(&path).unwrap();
    let total = d["series/water_storage"].floats();
    let Data::Float(shape, _) = &d["series/layer_water_storage"] else {
        panic!("layer_water_storage is not a float dataset")
    };
    // Two layers in this case (sandy loam over loamy sand).
    assert_eq!(shape, &vec![total.len(), 2]);
    let layers = d["series/layer_water_storage"].floats();
    for (k, t) in total.iter().enumerate() {
        let (a, b) = (layers[2 * k], layers[2 * k + 1]);
        assert!(a > 0.0 && b > 0.0, "row {k}: {a} {b}");
        // The same cells summed in another grouping: equal to the round-off of the sum.
        assert!(
            (a + b - t).abs() <= 1e-12 * t.abs(),
            "row {k}: {a} + {b} vs {t}"
        );
    }
    // The upper layer dries after the shift, the deep one hardly changes.
    let last = total.len() - 1;
    assert!(layers[2 * last] < layers[0]);
    let _g = h5_guard();
    let f = hdf5::File::open(&path).unwrap();
    let ds = f.dataset("series/layer_water_storage").unwrap();
    assert!(ds.attr("DIMENSION_LIST").is_ok());
    assert_eq!(f.dataset("series/layer").unwrap().shape(), vec![2]);
}
