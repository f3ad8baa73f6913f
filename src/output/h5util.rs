//! Small helpers over the hdf5 crate: string attributes, growable datasets.

use hdf5::types::VarLenUnicode;
use hdf5::{Dataset, Group, Location};
use ndarray::{s, Array1, Array2};

/// Writes a scalar string attribute.
pub fn attr_str(loc: &Location, name: &str, value: &str) -> hdf5::Result<()> {
    let v: VarLenUnicode = value
        .parse()
        .map_err(|e| hdf5::Error::from(format!("attribute {name}: {e}")))?;
    if loc.attr(name).is_ok() {
        loc.delete_attr(name)?;
    }
    loc.new_attr::<VarLenUnicode>()
        .shape(())
        .create(name)?
        .write_scalar(&v)
}

/// Reads a scalar string attribute.
pub fn read_attr_str(loc: &Location, name: &str) -> hdf5::Result<String> {
    let v: VarLenUnicode = loc.attr(name)?.read_scalar()?;
    Ok(v.as_str().to_string())
}

/// Writes a scalar f64 attribute.
pub fn attr_f64(loc: &Location, name: &str, value: f64) -> hdf5::Result<()> {
    if loc.attr(name).is_ok() {
        loc.delete_attr(name)?;
    }
    loc.new_attr::<f64>()
        .shape(())
        .create(name)?
        .write_scalar(&value)
}

/// Sets `units` and `long_name` on a dataset.
pub fn describe(ds: &Dataset, units: &str, long_name: &str) -> hdf5::Result<()> {
    attr_str(ds, "units", units)?;
    attr_str(ds, "long_name", long_name)
}

/// A fixed 1-D f64 dataset with units.
pub fn write_1d(
    g: &Group,
    name: &str,
    data: &[f64],
    units: &str,
    long_name: &str,
) -> hdf5::Result<Dataset> {
    let ds = g
        .new_dataset_builder()
        .with_data(&Array1::from_vec(data.to_vec()))
        .create(name)?;
    describe(&ds, units, long_name)?;
    Ok(ds)
}

/// A growable 1-D f64 dataset (chunked, unlimited).
pub fn growable_1d(g: &Group, name: &str, units: &str, long_name: &str) -> hdf5::Result<Dataset> {
    let ds = g
        .new_dataset::<f64>()
        .chunk(SERIES_CHUNK_ROWS)
        .shape(0..)
        .create(name)?;
    describe(&ds, units, long_name)?;
    Ok(ds)
}

/// Rows per chunk of a growable series dataset (1-D, or 2-D with a few columns per row).
pub const SERIES_CHUNK_ROWS: usize = 256;

/// A growable 2-D f64 dataset with `width` columns, chunked by `rows_per_chunk` rows: 1
/// for profiles (a row per snapshot, as wide as the mesh), [`SERIES_CHUNK_ROWS`] for a
/// series with a few values per record (one-row chunks there gave every series record a
/// chunk of its own: ~7 kB of HDF5's bookkeeping per record while a batch of queued
/// records was written, and a chunk index as long as the run).
pub fn growable_2d(
    g: &Group,
    name: &str,
    width: usize,
    rows_per_chunk: usize,
    units: &str,
    long_name: &str,
) -> hdf5::Result<Dataset> {
    let ds = g
        .new_dataset::<f64>()
        .chunk((rows_per_chunk.max(1), width.max(1)))
        .shape((0.., width))
        .create(name)?;
    describe(&ds, units, long_name)?;
    Ok(ds)
}

/// Bytes of the raw-data chunk cache of each dataset of a results file: the chunks of
/// the series (256 values) stay cached between appends, while a profile row (a chunk of
/// 8 bytes per cell, written once) larger than this goes straight to the file instead of
/// being held in a cache of HDF5's default 1 MiB per dataset (at 100 000 cells, ~0.8 MB
/// per profile dataset, ~100 B per cell in all).
pub const RESULTS_CHUNK_CACHE_BYTES: usize = 64 * 1024;

/// File options with the chunk cache of [`RESULTS_CHUNK_CACHE_BYTES`] per dataset.
pub fn with_small_chunk_cache() -> hdf5::FileBuilder {
    let mut b = hdf5::File::with_options();
    b.with_fapl(|p| p.chunk_cache(521, RESULTS_CHUNK_CACHE_BYTES, 0.75));
    b
}

/// Appends values to a growable 1-D dataset.
pub fn append_1d(ds: &Dataset, values: &[f64]) -> hdf5::Result<()> {
    if values.is_empty() {
        return Ok(());
    }
    let old = ds.shape()[0];
    ds.resize(old + values.len())?;
    ds.write_slice(
        &Array1::from_vec(values.to_vec()),
        s![old..old + values.len()],
    )
}

/// Appends one row to a growable 2-D dataset.
pub fn append_row(ds: &Dataset, row: &[f64]) -> hdf5::Result<()> {
    let shape = ds.shape();
    let old = shape[0];
    let width = shape[1];
    ds.resize((old + 1, width))?;
    let a = Array2::from_shape_vec((1, width), row.to_vec())
        .map_err(|e| hdf5::Error::from(e.to_string()))?;
    ds.write_slice(&a, s![old..old + 1, ..])
}

/// Appends rows to a growable 2-D dataset of as many columns.
pub fn append_rows(ds: &Dataset, rows: &Array2<f64>) -> hdf5::Result<()> {
    let (n, width) = rows.dim();
    if n == 0 {
        return Ok(());
    }
    let old = ds.shape()[0];
    ds.resize((old + n, width))?;
    ds.write_slice(rows, s![old..old + n, ..])
}

/// Truncates a growable dataset to `len` rows.
pub fn truncate(ds: &Dataset, len: usize) -> hdf5::Result<()> {
    let mut shape = ds.shape();
    if shape[0] > len {
        shape[0] = len;
        ds.resize(shape)?;
    }
    Ok(())
}

/// HDF5 refuses to open a file that another process has open for writing (file locking).
/// Returns the one-line message for that case, or `None` for any other error.
pub fn in_use_message(path: &std::path::Path, err: &hdf5::Error) -> Option<String> {
    let text = err.to_string();
    if text.contains("unable to lock file") {
        Some(format!(
            "{}: the file is open in another process (a deepdry run still going, or a program reading it); wait until that run has stopped or close the reader (the checkpoints can be inspected meanwhile)",
            path.display()
        ))
    } else {
        None
    }
}

/// A short one-line form of an HDF5 error: the library's own chain of reasons without the
/// low-level details it appends (time, file descriptor, buffer address, …), followed by
/// the operating system's message when there is one, e.g.
/// `H5Fflush(): unable to flush file's cached information: file write failed: No space left on device`.
pub fn short_error(err: &hdf5::Error) -> String {
    let text = err.to_string().replace(['\n', '\r'], " ");
    let cut = [": time = ", ": name = ", ", errno = ", ": errno = "]
        .iter()
        .filter_map(|m| text.find(m))
        .min()
        .unwrap_or(text.len());
    let head = text[..cut].trim_end();
    let os = text
        .split("error message = '")
        .nth(1)
        .and_then(|r| r.split('\'').next());
    match os {
        Some(m) if !m.is_empty() => format!("{head}: {m}"),
        _ => head.to_string(),
    }
}

/// An I/O error on `path` from an HDF5 error, in one line.
pub fn io_error(path: &std::path::Path, err: hdf5::Error) -> crate::error::Error {
    crate::error::Error::io(path, short_error(&err))
}

/// The two dimension-scale calls of the HDF5 high-level library (libhdf5_hl, linked through
/// the `hl` feature of the sys crate; hdf5-metno does not wrap them).
mod dimension_scales {
    use std::ffi::{c_char, c_int, c_uint};
    extern "C" {
        pub fn H5DSset_scale(dsid: i64, dimname: *const c_char) -> c_int;
        pub fn H5DSattach_scale(did: i64, dsid: i64, idx: c_uint) -> c_int;
    }
}

/// Marks the 1-D dataset `ds` as the dimension scale (netCDF-4: the dimension and its
/// coordinate variable) named `name`.
pub fn set_scale(ds: &Dataset, name: &str) -> hdf5::Result<()> {
    let c = std::ffi::CString::new(name).map_err(|e| hdf5::Error::from(e.to_string()))?;
    let rc = hdf5::sync::sync(|| unsafe { dimension_scales::H5DSset_scale(ds.id(), c.as_ptr()) });
    if rc < 0 {
        return Err(hdf5::Error::from(format!(
            "{}: cannot make it the dimension scale {name}",
            ds.name()
        )));
    }
    Ok(())
}

/// Attaches the dimension scale `scale` to axis `axis` of `ds`.
pub fn attach_scale(ds: &Dataset, scale: &Dataset, axis: usize) -> hdf5::Result<()> {
    let rc = hdf5::sync::sync(|| unsafe {
        dimension_scales::H5DSattach_scale(ds.id(), scale.id(), axis as std::ffi::c_uint)
    });
    if rc < 0 {
        return Err(hdf5::Error::from(format!(
            "{}: cannot attach the dimension scale {} to axis {axis}",
            ds.name(),
            scale.name()
        )));
    }
    Ok(())
}
