//! `deepdry export`: the CSV files hold exactly the values of the results file (every
//! number reads back bitwise), with units in the column names and no comment lines;
//! bad input gets one line and exit 2.

mod support;

use deepdry::export::{number, units_suffix};
use std::path::{Path, PathBuf};
use support::*;

fn bits(v: &[f64]) -> Vec<u64> {
    v.iter().map(|x| x.to_bits()).collect()
}

/// The columns of a CSV file by header, parsed as f64 (empty = NaN); and the headers.
fn read_csv(path: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    let text = std::fs::read_to_string(path).unwrap();
    assert!(
        !text.lines().any(|l| l.starts_with('#')),
        "{}: a comment line breaks pandas' read_csv",
        path.display()
    );
    let mut r = csv::Reader::from_reader(text.as_bytes());
    let headers: Vec<String> = r.headers().unwrap().iter().map(String::from).collect();
    let mut cols = vec![Vec::new(); headers.len()];
    for rec in r.records() {
        let rec = rec.unwrap();
        assert_eq!(rec.len(), headers.len());
        for (c, f) in cols.iter_mut().zip(rec.iter()) {
            c.push(f.to_string());
        }
    }
    (headers, cols)
}

fn floats(col: &[String]) -> Vec<f64> {
    col.iter()
        .map(|s| {
            if s.is_empty() {
                f64::NAN
            } else {
                s.parse().unwrap()
            }
        })
        .collect()
}

fn exported() -> (Scratch, PathBuf, PathBuf) {
    let case = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases/quickstart.toml");
    let dir = Scratch::new("export");
    let out = dir.join("out");
    run_ok(&case, &out, &[]);
    let results = out.join("results.h5");
    let csv = dir.join("csv");
    let o = deepdry(&["export", arg(&results), "--out", arg(&csv)]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    (dir, results, csv)
}

#[test]
fn series_profiles_and_mesh_read_back_bitwise() {
    let (_dir, results, csv) = exported();
    let d = datasets(&results).unwrap();

    let (h, cols) = read_csv(&csv.join("series.csv"));
    assert_eq!(h[0], "time_year");
    assert!(h.contains(&"surface_water_flux_kg_per_m2_s".to_string()));
    assert!(h.contains(&"surface_water_cumulative_kg_per_m2".to_string()));
    assert!(h.contains(&"newton_iterations".to_string()));
    // One column per 1-D series dataset, and one per layer of the water per layer.
    let series: Vec<&String> = d
        .keys()
        .filter(|k| k.starts_with("series/") && !k.starts_with("series/layer"))
        .collect();
    let layers = d["series/layer"].len();
    assert_eq!(h.len(), series.len() + layers, "{h:?}");
    for (name, col) in h.iter().zip(&cols) {
        if name.starts_with("layer_water_storage_") {
            continue;
        }
        // The dataset is the column name less its units suffix.
        let ds = series
            .iter()
            .filter(|k| name.starts_with(&k["series/".len()..]))
            .max_by_key(|k| k.len())
            .unwrap_or_else(|| panic!("{name}: no dataset"));
        assert_eq!(bits(&floats(col)), bits(&d[*ds].floats()), "{name}");
    }
    // quickstart has one layer, sandy_loam: its column is the whole dataset.
    let k = h
        .iter()
        .position(|c| c == "layer_water_storage_sandy_loam_kg_per_m2")
        .expect("the layer's column");
    assert_eq!(
        bits(&floats(&cols[k])),
        bits(&d["series/layer_water_storage"].floats())
    );

    let times = d["profiles/time"].floats();
    let depth = d["mesh/depth"].floats();
    let (h, cols) = read_csv(&csv.join("profiles_cells.csv"));
    assert_eq!(&h[..3], ["time_year", "depth_m", "temperature_degC"]);
    assert_eq!(cols[0].len(), times.len() * depth.len());
    let t = floats(&cols[0]);
    let z = floats(&cols[1]);
    for (k, (tk, zk)) in t.iter().zip(&z).enumerate() {
        assert_eq!(tk.to_bits(), times[k / depth.len()].to_bits());
        assert_eq!(zk.to_bits(), depth[k % depth.len()].to_bits());
    }
    // Long form is the row-major order of the [snapshots × cells] dataset.
    assert_eq!(
        bits(&floats(&cols[2])),
        bits(&d["profiles/temperature"].floats())
    );
    let (h, cols) = read_csv(&csv.join("profiles_faces.csv"));
    assert_eq!(h[1], "face_depth_m");
    let k = h
        .iter()
        .position(|c| c == "heat_flux_W_per_m2")
        .expect("heat flux column");
    assert_eq!(
        bits(&floats(&cols[k])),
        bits(&d["profiles/heat_flux"].floats())
    );

    let (h, cols) = read_csv(&csv.join("mesh.csv"));
    assert_eq!(h[1], "depth_m");
    assert_eq!(bits(&floats(&cols[1])), bits(&depth));
    let faces = d["mesh/face_depth"].floats();
    assert_eq!(bits(&floats(&cols[3])), bits(&faces[1..]));
    let readme = std::fs::read_to_string(csv.join("README.txt")).unwrap();
    assert!(readme.contains("kg m-2 s-1") && readme.contains("365.25 days"));
}

#[test]
fn units_become_column_suffixes_and_numbers_round_trip() {
    assert_eq!(units_suffix("kg m-2 s-1"), "kg_per_m2_s");
    assert_eq!(units_suffix("W m-2"), "W_per_m2");
    assert_eq!(units_suffix("kg m-3"), "kg_per_m3");
    assert_eq!(units_suffix("degC"), "degC");
    assert_eq!(units_suffix("1"), "");
    assert_eq!(units_suffix("s-1"), "per_s");
    for x in [
        0.0,
        -0.0,
        1e-4,
        9.99e-5,
        1.0 / 3.0,
        -2.5e-300,
        1e15,
        123456789.125,
        f64::MAX,
    ] {
        let s = number(x);
        assert_eq!(s.parse::<f64>().unwrap().to_bits(), x.to_bits(), "{s}");
    }
    assert_eq!(number(f64::NAN), "");
}

#[test]
fn export_refuses_what_is_not_a_results_file() {
    let dir = Scratch::new("export-bad");
    let missing = dir.join("nothing.h5");
    let o = deepdry(&["export", arg(&missing)]);
    assert_one_line_error(&o, 2, &["no such file"]);
    let text = dir.write("case.toml", "not hdf5");
    let o = deepdry(&["export", arg(&text)]);
    assert_one_line_error(&o, 2, &["not a readable HDF5 file"]);
    // A checkpoint is a deepdry file, but not a results file.
    let case = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases/quickstart.toml");
    let out = dir.join("out");
    run_ok(&case, &out, &[]);
    let ck = newest_checkpoint(&out).expect("a checkpoint");
    let o = deepdry(&["export", arg(&ck)]);
    assert_one_line_error(&o, 2, &["not a results file"]);
}
