//! Checkpoints carry a checksum of everything a resume reads, verified on reading: one
//! flipped bit in any dataset or attribute of a checkpoint is refused (exit 2, one line
//! naming the file and the previous checkpoint as the remedy), never resumed.
//!
//! The bytes to flip are found in the file itself: a dataset's values at the file address
//! HDF5 reports for it (or, for layouts without one, where its raw values occur in the
//! file); an attribute's value where its bytes occur in the file.

mod support;

use std::path::Path;
use support::*;

/// Offsets in `bytes` where `needle` occurs.
fn occurrences(bytes: &[u8], needle: &[u8]) -> Vec<usize> {
    if needle.is_empty() || needle.len() > bytes.len() {
        return Vec::new();
    }
    (0..=bytes.len() - needle.len())
        .filter(|&i| &bytes[i..i + needle.len()] == needle)
        .collect()
}

/// (name, file offset, length) of the stored values of every dataset and of every string
/// or number attribute of the checkpoint at `path`.
fn value_locations(path: &Path) -> Vec<(String, usize, usize)> {
    let _g = h5_guard();
    let bytes = std::fs::read(path).unwrap();
    let f = hdf5::File::open(path).unwrap();
    let mut out = Vec::new();
    for name in f.member_names().unwrap() {
        let ds = f.dataset(&name).unwrap();
        let size = ds.storage_size() as usize;
        if size == 0 {
            continue;
        }
        let at = match ds.offset() {
            Some(o) => o as usize,
            None => {
                let raw: Vec<u8> = match ds.dtype().unwrap().to_descriptor().unwrap() {
                    hdf5::types::TypeDescriptor::Unsigned(_) => ds
                        .read_raw::<u64>()
                        .unwrap()
                        .iter()
                        .flat_map(|x| x.to_le_bytes())
                        .collect(),
                    _ => ds
                        .read_raw::<f64>()
                        .unwrap()
                        .iter()
                        .flat_map(|x| x.to_le_bytes())
                        .collect(),
                };
                let found = occurrences(&bytes, &raw);
                assert_eq!(found.len(), 1, "{name}: values found {} times", found.len());
                found[0]
            }
        };
        out.push((name, at, size));
    }
    let root = f.as_group().unwrap();
    for name in root.attr_names().unwrap() {
        let a = root.attr(&name).unwrap();
        let raw: Vec<u8> = match a.dtype().unwrap().to_descriptor().unwrap() {
            hdf5::types::TypeDescriptor::Float(_) => {
                a.read_scalar::<f64>().unwrap().to_le_bytes().to_vec()
            }
            _ => {
                let v: hdf5::types::VarLenUnicode = a.read_scalar().unwrap();
                v.as_str().as_bytes().to_vec()
            }
        };
        if raw.is_empty() {
            continue;
        }
        // A value found a few times (the results path stored as given and absolute, the
        // title inside the case text) is flipped at each place in turn: every one is
        // content a resume reads. A value found many times (the format "3") cannot be
        // located and is reported.
        let found = occurrences(&bytes, &raw);
        assert!(
            !found.is_empty(),
            "attribute {name}: value not found in the file"
        );
        if found.len() <= 4 {
            for at in found {
                out.push((format!("@{name}"), at, raw.len()));
            }
        } else {
            eprintln!(
                "attribute {name}: value found {} times, not flipped",
                found.len()
            );
        }
    }
    out
}

#[test]
fn a_flipped_bit_anywhere_a_resume_reads_is_refused() {
    let dir = Scratch::new("bitflip");
    // A start year away from year 0, so that the time origin (1e5) and the times are
    // values that occur once in the file.
    let small = Small {
        method: "bdf",
        end_year: 123_466.0,
        extra_time: "start_year = 123456.0\n".into(),
        ..Small::default()
    };
    let case = dir.write("case.toml", &small.text());
    let out = dir.join("out");
    run_ok(&case, &out, &[]);
    let good = checkpoint_at(&out, 123_461.0);
    let pristine = std::fs::read(&good).unwrap();

    // Control: an unchanged copy resumes.
    let copy = dir.join("copy.h5");
    std::fs::write(&copy, &pristine).unwrap();
    run_ok(&case, &out, &["--resume", arg(&copy)]);

    let places = value_locations(&good);
    let names: Vec<&str> = places.iter().map(|p| p.0.as_str()).collect();
    for must in [
        "unknowns",
        "storage",
        "history_unknowns",
        "history_storage",
        "history_time_inflow",
        "counters",
        "time_s",
        "dt_s",
        "inflow",
        "throughput",
        "initial_totals",
        "initial_storage",
        "linearization_cells",
        "linearization_faces",
        "last_error_estimate",
        "face_depth",
        "@case_text",
        "@physics_hash",
        "@column_hash",
        "@results_file",
        "@results_file_absolute",
        "@time_origin_year",
        "@time_year",
        "@checksum",
    ] {
        assert!(names.contains(&must), "{must} not located: {names:?}");
    }
    let mut flips = 0;
    for (name, at, len) in &places {
        // First, middle and last byte of the value; bit 0 keeps strings valid text, bit
        // 6 changes an f64's exponent or a mantissa byte.
        for (k, pos) in [0, len / 2, len - 1].into_iter().enumerate() {
            let bit = if name.starts_with('@') {
                0
            } else {
                [0, 6, 3][k]
            };
            let mut b = pristine.clone();
            b[at + pos] ^= 1 << bit;
            let damaged = dir.join("damaged.h5");
            std::fs::write(&damaged, &b).unwrap();
            let o = run_deepdry(&case, &out, &["--resume", arg(&damaged)]);
            let e = stderr(&o);
            assert_eq!(
                o.status.code(),
                Some(2),
                "{name} byte {pos} bit {bit}: resumed or wrong exit: {e}"
            );
            if name == "@kind" {
                // Not recognised as a deepdry file at all.
                assert_one_line_error(&o, 2, &["damaged.h5", "not written by deepdry"]);
            } else {
                assert_one_line_error(
                    &o,
                    2,
                    &["damaged.h5", "damaged checkpoint", "previous checkpoint"],
                );
            }
            flips += 1;
        }
    }
    eprintln!("{} values, {flips} flips, each refused", places.len());
    assert!(flips >= 3 * 30, "only {flips} flips");
}
