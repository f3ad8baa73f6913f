//! `deepdry export RESULTS.h5 --out DIR`: the results file as CSV files that pandas
//! (`pd.read_csv(path)`) and spreadsheets read with no options.
//!
//! - `series.csv`: one row per series record (time step), one column per `/series` dataset;
//! - `profiles_cells.csv`: profiles in long form, one row per (snapshot, cell): `time_year`,
//!   `depth_m` and one column per cell-centred quantity;
//! - `profiles_faces.csv`: the same per (snapshot, face) for the face fluxes;
//! - `mesh.csv`: one row per cell: index, centre, top and bottom face, thickness, layer;
//! - `README.txt`: what every column is (long name, units), the sign and time conventions.
//!
//! No comment or units rows (they break a plain `read_csv`): the units are part of each
//! column name, `NAME_UNITS` (`surface_water_flux_kg_per_m2_s`, see [`units_suffix`]), and a
//! dimensionless column has no suffix. Numbers are written in the shortest form that reads
//! back to the same f64 (plain decimals from 1e-4 to 1e15, else `1.5e-7`); a missing value
//! (NaN) is an empty field.

use crate::error::{Error, Result};
use crate::output::h5util::{io_error, read_attr_str};
use crate::output::results::{PROFILE_CELL, PROFILE_FACE, RESULTS_KIND, TIME_COMMENT};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// One column: its name in the CSV (with units), its dataset name, units and long name.
#[derive(Debug, Clone, PartialEq)]
pub struct Column {
    pub header: String,
    pub dataset: String,
    pub units: String,
    pub long_name: String,
}

/// The column-name suffix for UDUNITS-style `units`: `kg m-2 s-1` → `kg_per_m2_s`,
/// `W m-2` → `W_per_m2`, `degC` → `degC`, `year` → `year`; empty for `1` (dimensionless).
pub fn units_suffix(units: &str) -> String {
    let (mut num, mut den) = (Vec::new(), Vec::new());
    for tok in units.split_whitespace() {
        if tok == "1" {
            continue;
        }
        // A symbol followed by an optional signed integer exponent.
        let split = tok
            .find(|c: char| c == '-' || c.is_ascii_digit())
            .unwrap_or(tok.len());
        let (sym, exp) = tok.split_at(split);
        let e: i32 = if exp.is_empty() {
            1
        } else {
            exp.parse().unwrap_or(1)
        };
        let part = |p: i32| {
            if p == 1 {
                sym.to_string()
            } else {
                format!("{sym}{p}")
            }
        };
        if e < 0 {
            den.push(part(-e));
        } else {
            num.push(part(e));
        }
    }
    match (num.is_empty(), den.is_empty()) {
        (true, true) => String::new(),
        (false, true) => num.join("_"),
        (true, false) => format!("per_{}", den.join("_")),
        (false, false) => format!("{}_per_{}", num.join("_"), den.join("_")),
    }
}

/// `name_suffix`, or `name` for a dimensionless quantity.
fn header(name: &str, units: &str) -> String {
    match units_suffix(units) {
        s if s.is_empty() => name.to_string(),
        s => format!("{name}_{s}"),
    }
}

/// A layer name as part of a column name: letters, digits and `_` only.
fn safe_name(s: &str) -> String {
    s.chars()
        .map(|c| if c.is_ascii_alphanumeric() { c } else { '_' })
        .collect()
}

/// A number as the CSV holds it: shortest round-trip decimal; NaN as an empty field.
pub fn number(x: f64) -> String {
    if x.is_nan() {
        String::new()
    } else if x == 0.0 || (1e-4..1e15).contains(&x.abs()) {
        format!("{x}")
    } else {
        format!("{x:e}")
    }
}

struct Reader<'a> {
    path: &'a Path,
    file: hdf5::File,
}

impl Reader<'_> {
    fn err(&self) -> impl Fn(hdf5::Error) -> Error + '_ {
        move |e| io_error(self.path, e)
    }
    fn column(&self, group: &str, name: &str) -> Result<Column> {
        let ds = self
            .file
            .dataset(&format!("{group}/{name}"))
            .map_err(self.err())?;
        let units = read_attr_str(&ds, "units").unwrap_or_else(|_| "1".into());
        let long_name = read_attr_str(&ds, "long_name").unwrap_or_default();
        Ok(Column {
            header: header(name, &units),
            dataset: format!("{group}/{name}"),
            units,
            long_name,
        })
    }
    fn d1(&self, name: &str) -> Result<Vec<f64>> {
        self.file
            .dataset(name)
            .and_then(|d| d.read_raw::<f64>())
            .map_err(self.err())
    }
    /// A 1-D string dataset (empty when absent).
    fn strings(&self, name: &str) -> Vec<String> {
        self.file
            .dataset(name)
            .and_then(|d| d.read_raw::<hdf5::types::VarLenUnicode>())
            .map(|v| v.iter().map(|s| s.as_str().to_string()).collect())
            .unwrap_or_default()
    }
    /// A 2-D dataset as (rows, columns, row-major values).
    fn d2(&self, name: &str) -> Result<(usize, usize, Vec<f64>)> {
        let a = self
            .file
            .dataset(name)
            .and_then(|d| d.read_2d::<f64>())
            .map_err(self.err())?;
        let (r, c) = a.dim();
        Ok((r, c, a.iter().copied().collect()))
    }
    /// The datasets of `group` in the order of `known` (the writer's), then any others
    /// (written by another version) by name; `skip` left out.
    fn names(&self, group: &str, known: &[&str], skip: &[&str]) -> Result<Vec<String>> {
        let g = self.file.group(group).map_err(self.err())?;
        let present = g.member_names().map_err(self.err())?;
        let mut out: Vec<String> = known
            .iter()
            .filter(|k| present.iter().any(|p| p == *k))
            .map(|k| k.to_string())
            .collect();
        for p in present {
            if !out.contains(&p) && !skip.contains(&p.as_str()) {
                out.push(p);
            }
        }
        Ok(out)
    }
}

/// What was written, for the command's output.
#[derive(Debug, Clone)]
pub struct Exported {
    pub files: Vec<PathBuf>,
    pub series_rows: usize,
    pub snapshots: usize,
    pub cells: usize,
}

/// Writes `text` to `dir/name`.
fn write(dir: &Path, name: &str, text: &str, files: &mut Vec<PathBuf>) -> Result<()> {
    let p = dir.join(name);
    std::fs::write(&p, text).map_err(|e| Error::io(&p, e))?;
    files.push(p);
    Ok(())
}

/// CSV text: a header line and the rows, fields quoted where they need it.
fn csv_text(headers: &[String], rows: impl Iterator<Item = Vec<String>>) -> Result<String> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let internal = |e: csv::Error| Error::Internal(format!("CSV: {e}"));
    w.write_record(headers).map_err(internal)?;
    for r in rows {
        w.write_record(&r).map_err(internal)?;
    }
    let bytes = w
        .into_inner()
        .map_err(|e| Error::Internal(format!("CSV: {e}")))?;
    String::from_utf8(bytes).map_err(|e| Error::Internal(e.to_string()))
}

/// Exports the results file `results` as CSV files into `out` (default: the folder
/// `csv` beside the results file), created if needed.
pub fn export(results: &Path, out: Option<&Path>) -> Result<Exported> {
    let kind = crate::checkpoint::file_kind(results)?;
    if kind != RESULTS_KIND {
        return Err(Error::input(format!(
            "{}: a {} file, not a results file; export reads the results.h5 that deepdry run writes",
            results.display(),
            if kind.is_empty() { "non-deepdry" } else { &kind }
        )));
    }
    let dir = match out {
        Some(d) => d.to_path_buf(),
        None => results
            .parent()
            .unwrap_or_else(|| Path::new("."))
            .join("csv"),
    };
    std::fs::create_dir_all(&dir)
        .map_err(|e| Error::io(&dir, format!("cannot create the output folder: {e}")))?;
    let file = hdf5::File::open(results).map_err(|e| io_error(results, e))?;
    let r = Reader {
        path: results,
        file,
    };
    let mut files = Vec::new();
    let mut readme = String::new();
    let title = read_attr_str(&r.file, "title").unwrap_or_default();
    let _ = writeln!(
        readme,
        "CSV export of {} (case: {title})\n\
         Written by deepdry export {}. Every file has one header line and one row per record;\n\
         units are part of the column names (NAME_UNITS, e.g. kg_per_m2_s = kg m-2 s-1;\n\
         no suffix = dimensionless). Empty fields are missing values.\n\
         Time: {TIME_COMMENT}.\n\
         Depths in metres, positive downward from the surface; fluxes positive downward.\n",
        results.display(),
        env!("CARGO_PKG_VERSION")
    );

    // Series.
    let known: Vec<&str> = std::iter::once("time")
        .chain(
            crate::output::diagnostics::SeriesRecord::FIELDS
                .iter()
                .map(|f| f.0),
        )
        .collect();
    let names = r.names("series", &known, &["layer"])?;
    let layer_names = r.strings("series/layer");
    let mut cols: Vec<Column> = Vec::new();
    let mut data: Vec<Vec<f64>> = Vec::new();
    for n in &names {
        let c = r.column("series", n)?;
        let shape = r
            .file
            .dataset(&c.dataset)
            .map(|d| d.shape())
            .map_err(r.err())?;
        if shape.len() == 1 {
            data.push(r.d1(&c.dataset)?);
            cols.push(c);
        } else if shape.len() == 2 {
            // One column per layer: NAME_LAYER_UNITS.
            let (rows, width, v) = r.d2(&c.dataset)?;
            for k in 0..width {
                let layer = layer_names
                    .get(k)
                    .map(|s| safe_name(s))
                    .unwrap_or_else(|| format!("layer{}", k + 1));
                let name = format!("{n}_{layer}");
                cols.push(Column {
                    header: header(&name, &c.units),
                    dataset: format!("{}[:, {k}]", c.dataset),
                    units: c.units.clone(),
                    long_name: format!(
                        "{} (layer {})",
                        c.long_name,
                        layer_names.get(k).map_or("?", |s| s.as_str())
                    ),
                });
                data.push((0..rows).map(|j| v[j * width + k]).collect());
            }
        }
    }
    let rows = data.iter().map(Vec::len).min().unwrap_or(0);
    let text = csv_text(
        &cols.iter().map(|c| c.header.clone()).collect::<Vec<_>>(),
        (0..rows).map(|k| data.iter().map(|d| number(d[k])).collect()),
    )?;
    write(&dir, "series.csv", &text, &mut files)?;
    describe(&mut readme, "series.csv", "one row per time step", &cols);

    // Profiles in long form, cells and faces.
    let times = r.d1("profiles/time")?;
    let time_col = r.column("profiles", "time")?;
    let mut cells = 0;
    for (fname, depth, list, what) in [
        (
            "profiles_cells.csv",
            "depth",
            &PROFILE_CELL,
            "one row per snapshot and cell centre",
        ),
        (
            "profiles_faces.csv",
            "face_depth",
            &PROFILE_FACE,
            "one row per snapshot and cell face",
        ),
    ] {
        let z = r.d1(&format!("mesh/{depth}"))?;
        if depth == "depth" {
            cells = z.len();
        }
        let known: Vec<&str> = list.iter().map(|f| f.0).collect();
        // Any other 2-D profile of this width (another version's) goes in too.
        let mut cols = vec![time_col.clone(), r.column("mesh", depth)?];
        let mut data = Vec::new();
        for n in r.names("profiles", &known, &["time", "depth", "face_depth"])? {
            let (rows, width, v) = r.d2(&format!("profiles/{n}")).unwrap_or((0, 0, vec![]));
            if width != z.len() || rows < times.len() {
                continue;
            }
            cols.push(r.column("profiles", &n)?);
            data.push(v);
        }
        let nz = z.len();
        let text = csv_text(
            &cols.iter().map(|c| c.header.clone()).collect::<Vec<_>>(),
            (0..times.len() * nz).map(|k| {
                let (s, j) = (k / nz, k % nz);
                let mut row = vec![number(times[s]), number(z[j])];
                row.extend(data.iter().map(|d| number(d[k])));
                row
            }),
        )?;
        write(&dir, fname, &text, &mut files)?;
        describe(&mut readme, fname, what, &cols);
    }

    // Mesh.
    let centers = r.d1("mesh/depth")?;
    let faces = r.d1("mesh/face_depth")?;
    let layer: Vec<i64> = r
        .file
        .dataset("mesh/layer")
        .and_then(|d| d.read_raw::<i64>())
        .unwrap_or_default();
    let layer_names = r.strings("mesh/layer_names");
    if faces.len() != centers.len() + 1 {
        return Err(Error::input(format!(
            "{}: mesh/face_depth has {} values for {} cells (expected one more)",
            results.display(),
            faces.len(),
            centers.len()
        )));
    }
    let mesh_cols: Vec<Column> = [
        ("cell", "1", "cell index, from 1 at the surface"),
        ("depth", "m", "depth of the cell centre"),
        ("top", "m", "depth of the cell's upper face"),
        ("bottom", "m", "depth of the cell's lower face"),
        ("thickness", "m", "cell thickness"),
        ("layer", "1", "layer name (the case's layers)"),
    ]
    .iter()
    .map(|(n, u, l)| Column {
        header: header(n, u),
        dataset: String::new(),
        units: u.to_string(),
        long_name: l.to_string(),
    })
    .collect();
    let text = csv_text(
        &mesh_cols
            .iter()
            .map(|c| c.header.clone())
            .collect::<Vec<_>>(),
        (0..centers.len()).map(|i| {
            let name = layer
                .get(i)
                .and_then(|&l| layer_names.get(usize::try_from(l).ok()?))
                .cloned()
                .unwrap_or_default();
            vec![
                (i + 1).to_string(),
                number(centers[i]),
                number(faces[i]),
                number(faces[i + 1]),
                number(faces[i + 1] - faces[i]),
                name,
            ]
        }),
    )?;
    write(&dir, "mesh.csv", &text, &mut files)?;
    describe(&mut readme, "mesh.csv", "one row per cell", &mesh_cols);
    let _ = writeln!(
        readme,
        "In Python: import pandas as pd; series = pd.read_csv(\"series.csv\")"
    );
    write(&dir, "README.txt", &readme, &mut files)?;
    Ok(Exported {
        files,
        series_rows: rows,
        snapshots: times.len(),
        cells,
    })
}

/// The README section of one CSV file.
fn describe(readme: &mut String, file: &str, what: &str, cols: &[Column]) {
    let _ = writeln!(readme, "{file}: {what}");
    for c in cols {
        let units = if c.units == "1" {
            "dimensionless".to_string()
        } else {
            c.units.clone()
        };
        let _ = writeln!(readme, "  {:<44} [{units}] {}", c.header, c.long_name);
    }
    let _ = writeln!(readme);
}
