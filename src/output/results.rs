//! The results file (HDF5), one per run, written as the run goes.
//!
//! Layout (the names are the contract downstream scripts use):
//! - root attributes `title`, `software_version`, `created`, `case_text`, `overrides` (the
//!   `--set KEY=VALUE` overrides applied to the case text, one a line; empty when none),
//!   `time_unit` = `year`, `kind` = `deepdry-results`
//! - `/mesh/depth` [cells], `/mesh/face_depth` [cells+1], `/mesh/layer` [cells],
//!   `/mesh/layer_names`
//! - `/profiles/time` [snapshots] and [snapshots × cells] `temperature`, `head`,
//!   `liquid_content`, `vapor_density`, `relative_humidity`; [snapshots × faces]
//!   `liquid_flux_isothermal`, `liquid_flux_thermal`, `vapor_flux_isothermal`,
//!   `vapor_flux_thermal` (kg m-2 s-1), `heat_flux` (W m-2); fluxes positive downward
//! - `/series/time` [records] and one dataset per [`SeriesRecord`] field.
//!
//! Series rows are buffered and written at every snapshot and at [`ResultsFile::flush`];
//! the file is flushed to disk at every snapshot, so a killed run leaves a readable file.

use super::diagnostics::{Profile, SeriesRecord};
use super::h5util::{
    append_1d, append_row, attach_scale, attr_str, growable_1d, growable_2d, in_use_message,
    set_scale, write_1d,
};
use crate::error::{Error, Result};
use crate::model::Model;
use crate::physics::System;
use hdf5::types::VarLenUnicode;
use hdf5::{Dataset, File};
use std::path::{Path, PathBuf};

/// Attribute value of `kind` that marks a results file.
pub const RESULTS_KIND: &str = "deepdry-results";

/// Series rows queued in memory at most before they are written out (and the file
/// flushed) between snapshots and checkpoints (~0.4 kB per queued row).
pub const SERIES_QUEUE_ROWS: usize = 4096;

/// The cell-centred profiles: dataset name, units, long name.
pub const PROFILE_CELL: [(&str, &str, &str); 5] = [
    ("temperature", "degC", "temperature"),
    ("head", "m", "pressure (matric) head"),
    ("liquid_content", "1", "volumetric liquid water content"),
    (
        "vapor_density",
        "kg m-3",
        "water vapour density in the pore air",
    ),
    (
        "relative_humidity",
        "1",
        "relative humidity of the pore air",
    ),
];
/// The face profiles: dataset name, units, long name.
pub const PROFILE_FACE: [(&str, &str, &str); 5] = [
    (
        "liquid_flux_isothermal",
        "kg m-2 s-1",
        "liquid water flux driven by head and gravity, positive downward",
    ),
    (
        "liquid_flux_thermal",
        "kg m-2 s-1",
        "liquid water flux driven by the temperature gradient, positive downward",
    ),
    (
        "vapor_flux_isothermal",
        "kg m-2 s-1",
        "vapour flux not due to the temperature gradient, positive downward",
    ),
    (
        "vapor_flux_thermal",
        "kg m-2 s-1",
        "vapour flux driven by the temperature gradient (with enhancement), positive downward",
    ),
    (
        "heat_flux",
        "W m-2",
        "total energy flux (conduction and advected enthalpy), positive downward",
    ),
];

/// Which profile of a solute a dataset holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum SoluteProfileKind {
    Concentration,
    Flux,
    Age,
    Precipitate,
    /// Not a solute's: the root water uptake profile.
    RootUptake,
}

/// The solute profile datasets of `solutes`: (name, units, long name, kind, solute index).
/// Accumulation ages only for solutes with a deposition, precipitate only with a
/// solubility limit.
fn solute_profile_sets(
    solutes: &[crate::model::Solute],
    vegetation: bool,
) -> Vec<(String, &'static str, String, SoluteProfileKind, usize)> {
    use crate::model::SoluteSurface;
    let mut out = Vec::new();
    if vegetation {
        out.push((
            "root_water_uptake".to_string(),
            "kg m-3 s-1",
            "root water uptake per bulk volume (Feddes-reduced potential transpiration times the root distribution)".to_string(),
            SoluteProfileKind::RootUptake,
            0,
        ));
    }
    for (k, s) in solutes.iter().enumerate() {
        let n = &s.name;
        out.push((
            format!("concentration_{n}"),
            "g m-3",
            format!("concentration of {n} in the liquid water (g per m3 of liquid = mg/L)"),
            SoluteProfileKind::Concentration,
            k,
        ));
        out.push((
            format!("flux_{n}"),
            "g m-2 s-1",
            format!("flux of {n} (advection, diffusion, dispersion), positive downward"),
            SoluteProfileKind::Flux,
            k,
        ));
        if matches!(s.surface, SoluteSurface::Deposition(_)) {
            out.push((
                format!("accumulation_age_{n}"),
                "year",
                format!(
                    "accumulation age of {n}: mass stored from the surface to the cell centre divided by the mean deposition over the run (assumes a known, steady deposition)"
                ),
                SoluteProfileKind::Age,
                k,
            ));
        }
        if s.solubility.is_some() {
            out.push((
                format!("precipitate_{n}"),
                "g m-3",
                format!("{n} precipitated as a solid above its solubility (g per m3 of bulk soil)"),
                SoluteProfileKind::Precipitate,
                k,
            ));
        }
    }
    out
}

/// The series datasets beyond [`SeriesRecord`]: (name, units, long name), solute after
/// solute in the order of [`crate::solute::SERIES_FIELDS`], then the vegetation's, then
/// the surface store's.
fn extra_series_sets(
    solutes: &[crate::model::Solute],
    extras: Extras,
) -> Vec<(String, &'static str, String)> {
    let mut out: Vec<(String, &'static str, String)> = solutes
        .iter()
        .flat_map(|s| {
            crate::solute::SERIES_FIELDS
                .iter()
                .map(move |(prefix, units, long)| {
                    (
                        format!("{prefix}_{}", s.name),
                        *units,
                        format!("{long} ({})", s.name),
                    )
                })
        })
        .collect();
    if extras.vegetation {
        out.extend(
            crate::sim::simulation::VEGETATION_SERIES
                .iter()
                .map(|(n, u, l)| (n.to_string(), *u, l.to_string())),
        );
    }
    if extras.surface_store {
        out.extend(
            crate::sim::simulation::SURFACE_STORE_SERIES
                .iter()
                .map(|(n, u, l)| (n.to_string(), *u, l.to_string())),
        );
    }
    if extras.cycle_skipping {
        out.extend(
            crate::sim::simulation::CYCLE_SKIPPING_SERIES
                .iter()
                .map(|(n, u, l)| (n.to_string(), *u, l.to_string())),
        );
    }
    out
}

/// Which optional parts of the model have results datasets of their own besides the
/// solutes: plants (root water uptake) and a surface store (ponding and runoff).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Extras {
    pub vegetation: bool,
    pub surface_store: bool,
    /// Cycle skipping (its jumps and their balance error).
    pub cycle_skipping: bool,
}

impl Extras {
    pub fn of(model: &crate::model::Model) -> Self {
        Extras {
            vegetation: model.has_plants(),
            surface_store: model.has_surface_store(),
            cycle_skipping: model.time.cycle_skipping.is_some(),
        }
    }
}
pub struct ResultsFile {
    pub path: PathBuf,
    file: File,
    sets: Sets,
    pending: Vec<SeriesRecord>,
    /// Water stored per layer of the queued rows, row after row.
    pending_layers: Vec<f64>,
    /// Solute series values of the queued rows, row after row.
    pending_solutes: Vec<f64>,
    /// The layer of each cell and the number of layers.
    pub cell_layer: Vec<usize>,
    pub layers: usize,
    pub snapshots: usize,
    pub records: usize,
    /// Time [yr] of the last series row and of the last snapshot written to the file.
    pub last_series_year: Option<f64>,
    pub last_snapshot_year: Option<f64>,
    /// Opened to continue a run ([`ResultsFile::open_append`]) and not yet written to: a
    /// file damaged by a kill can pass every check there and fail only at its first write
    /// (seen: "addr overflow" at the first flush), which then gets the same guided message.
    continued: bool,
}

/// How to go on when a results file cannot be continued.
pub const CONTINUE_ADVICE: &str =
    "run again from the start with --overwrite (deterministic: the same results), \
     or branch from the checkpoint into a new folder with --start-from CHECKPOINT --out FOLDER";

/// The one-line error for a results file `path` that cannot be continued because of `what`.
fn cannot_continue(path: &Path, what: &str) -> Error {
    Error::Io(format!(
        "{}: the results file cannot be continued: {what}; {CONTINUE_ADVICE}",
        path.display()
    ))
}

/// The last value of a 1-D f64 dataset of `len` rows.
fn last_value(ds: &Dataset, len: usize) -> hdf5::Result<Option<f64>> {
    if len == 0 {
        return Ok(None);
    }
    let v = ds.read_slice_1d::<f64, _>(ndarray::s![len - 1..len])?;
    Ok(v.first().copied())
}

/// Exact equality of two recorded times, NaN-free (both written by the same run).
fn same_time(a: Option<f64>, b: Option<f64>) -> bool {
    match (a, b) {
        (Some(x), Some(y)) => x.to_bits() == y.to_bits(),
        (None, None) => true,
        _ => false,
    }
}

fn h5(path: &Path) -> impl Fn(hdf5::Error) -> Error + '_ {
    move |e| super::h5util::io_error(path, e)
}

/// The growable datasets of a results file: `/profiles/time`, the cell and face profiles
/// (in the order of [`PROFILE_CELL`] and [`PROFILE_FACE`]), `/series/time` and one per
/// [`SeriesRecord`] field.
struct Sets {
    profile_time: Dataset,
    cells: Vec<Dataset>,
    faces: Vec<Dataset>,
    series_time: Dataset,
    series: Vec<Dataset>,
    /// `/series/layer_water_storage` [records × layers].
    layer_storage: Dataset,
    /// Solute profiles (with what each holds) and solute series.
    solute_profiles: Vec<(Dataset, SoluteProfileKind, usize)>,
    extra_series: Vec<Dataset>,
}

/// Strings as HDF5 variable-length UTF-8.
fn var_len(v: &[String]) -> Vec<VarLenUnicode> {
    v.iter().map(|s| s.parse().unwrap_or_default()).collect()
}

/// The layer index of every cell of `model` (into `model.layers`).
pub fn layer_of_cell(model: &Model) -> Vec<usize> {
    model
        .mesh
        .centers
        .iter()
        .map(|z| {
            model
                .layers
                .iter()
                .position(|l| *z >= l.top && *z <= l.bottom)
                .unwrap_or(0)
        })
        .collect()
}

/// CF standard names (CF standard name table) of the datasets that have one; the rest
/// carry `long_name` only.
fn standard_name(name: &str) -> Option<&'static str> {
    Some(match name {
        "temperature" => "soil_temperature",
        "liquid_content" => "volume_fraction_of_condensed_water_in_soil",
        "surface_heat_flux" => "downward_heat_flux_in_soil",
        "depth" | "face_depth" => "depth",
        _ => return None,
    })
}

/// What the time axis of a results file means (attribute `comment` of every `time`).
pub const TIME_COMMENT: &str = "years of 365.25 days (31 557 600 s) on the case's time axis \
     (start_year to end_year); float years, not calendar dates";

/// Sets the CF attributes of a time coordinate.
fn describe_time(ds: &Dataset) -> hdf5::Result<()> {
    attr_str(ds, "axis", "T")?;
    attr_str(ds, "comment", TIME_COMMENT)
}

/// Sets the CF attributes of a depth coordinate.
fn describe_depth(ds: &Dataset) -> hdf5::Result<()> {
    attr_str(ds, "positive", "down")?;
    attr_str(ds, "axis", "Z")?;
    attr_str(ds, "standard_name", "depth")
}

/// Adds `standard_name` when CF has one for the dataset `name`.
fn add_standard_name(ds: &Dataset, name: &str) -> hdf5::Result<()> {
    match standard_name(name) {
        Some(sn) => attr_str(ds, "standard_name", sn),
        None => Ok(()),
    }
}

impl Sets {
    /// Creates them, empty, in a new file with the cell centres and faces `mesh`
    /// (netCDF-4 layout: `time`, `depth` and `face_depth` are dimension scales of their
    /// group, attached to every profile and series dataset); or, with `mesh` = `None`,
    /// opens them in an existing file.
    fn get(
        file: &File,
        mesh: Option<(&[f64], &[f64], &[String])>,
        solutes: &[crate::model::Solute],
        extras: Extras,
    ) -> hdf5::Result<Sets> {
        let create = mesh.is_some();
        let group = |name: &str| {
            if create {
                file.create_group(name)
            } else {
                file.group(name)
            }
        };
        let (prof, ser) = (group("profiles")?, group("series")?);
        let one = |g: &hdf5::Group, name: &str, units: &str, long: &str| {
            if create {
                let ds = growable_1d(g, name, units, long)?;
                add_standard_name(&ds, name)?;
                Ok(ds)
            } else {
                g.dataset(name)
            }
        };
        let rows = |width: usize, list: &[(&str, &str, &str)]| -> hdf5::Result<Vec<Dataset>> {
            list.iter()
                .map(|(name, units, long)| {
                    if create {
                        let ds = growable_2d(&prof, name, width, 1, units, long)?;
                        add_standard_name(&ds, name)?;
                        Ok(ds)
                    } else {
                        prof.dataset(name)
                    }
                })
                .collect()
        };
        let cells = mesh.map_or(0, |(c, _, _)| c.len());
        let layer_storage = match mesh {
            Some((_, _, names)) => growable_2d(
                &ser,
                "layer_water_storage",
                names.len(),
                super::h5util::SERIES_CHUNK_ROWS,
                "kg m-2",
                "water (liquid and vapour) stored in each layer of the column",
            )?,
            None => ser.dataset("layer_water_storage")?,
        };
        let sets = Sets {
            profile_time: one(&prof, "time", "year", "snapshot time")?,
            cells: rows(cells, &PROFILE_CELL)?,
            faces: rows(cells + 1, &PROFILE_FACE)?,
            series_time: one(&ser, "time", "year", "time at the end of the step")?,
            series: SeriesRecord::FIELDS
                .iter()
                .map(|(name, units, long)| one(&ser, name, units, long))
                .collect::<hdf5::Result<_>>()?,
            layer_storage,
            solute_profiles: solute_profile_sets(solutes, extras.vegetation)
                .into_iter()
                .map(|(name, units, long, kind, k)| {
                    let width = if kind == SoluteProfileKind::Flux {
                        cells + 1
                    } else {
                        cells
                    };
                    let ds = if create {
                        growable_2d(&prof, &name, width, 1, units, &long)?
                    } else {
                        prof.dataset(&name)?
                    };
                    Ok((ds, kind, k))
                })
                .collect::<hdf5::Result<_>>()?,
            extra_series: extra_series_sets(solutes, extras)
                .iter()
                .map(|(name, units, long)| one(&ser, name, units, long))
                .collect::<hdf5::Result<_>>()?,
        };
        if let Some((centers, faces, layer_names)) = mesh {
            let depth = write_1d(&prof, "depth", centers, "m", "depth of the cell centres")?;
            let face_depth = write_1d(&prof, "face_depth", faces, "m", "depth of the cell faces")?;
            for (ds, name) in [(&depth, "depth"), (&face_depth, "face_depth")] {
                describe_depth(ds)?;
                set_scale(ds, name)?;
            }
            for t in [&sets.profile_time, &sets.series_time] {
                describe_time(t)?;
                set_scale(t, "time")?;
            }
            for ds in &sets.cells {
                attach_scale(ds, &sets.profile_time, 0)?;
                attach_scale(ds, &depth, 1)?;
            }
            for ds in &sets.faces {
                attach_scale(ds, &sets.profile_time, 0)?;
                attach_scale(ds, &face_depth, 1)?;
            }
            for ds in sets.series.iter().chain(&sets.extra_series) {
                attach_scale(ds, &sets.series_time, 0)?;
            }
            for (ds, kind, _) in &sets.solute_profiles {
                attach_scale(ds, &sets.profile_time, 0)?;
                let z = if *kind == SoluteProfileKind::Flux {
                    &face_depth
                } else {
                    &depth
                };
                attach_scale(ds, z, 1)?;
            }
            attr_str(
                &sets.layer_storage,
                "standard_name",
                "moisture_content_of_soil_layer",
            )?;
            let layer = ser
                .new_dataset_builder()
                .with_data(&ndarray::Array1::from_vec(var_len(layer_names)))
                .create("layer")?;
            super::h5util::describe(&layer, "1", "layer names (the case's layers, from the top)")?;
            set_scale(&layer, "layer")?;
            attach_scale(&sets.layer_storage, &sets.series_time, 0)?;
            attach_scale(&sets.layer_storage, &layer, 1)?;
        }
        Ok(sets)
    }

    /// The cell and face profile datasets, [snapshots × cells or faces].
    fn profiles(&self) -> impl Iterator<Item = &Dataset> {
        self.cells
            .iter()
            .chain(self.faces.iter())
            .chain(self.solute_profiles.iter().map(|(d, _, _)| d))
    }

    /// Every series dataset besides `/series/time` (one value per row).
    fn all_series(&self) -> impl Iterator<Item = &Dataset> {
        self.series.iter().chain(self.extra_series.iter())
    }

    /// Drops the rows after `snapshots` snapshots and `series_rows` series rows.
    fn truncate(&self, snapshots: usize, series_rows: usize) -> hdf5::Result<()> {
        use super::h5util::truncate;
        truncate(&self.profile_time, snapshots)?;
        for d in self.profiles() {
            truncate(d, snapshots)?;
        }
        truncate(&self.series_time, series_rows)?;
        truncate(&self.layer_storage, series_rows)?;
        for d in self.all_series() {
            truncate(d, series_rows)?;
        }
        Ok(())
    }
}

impl ResultsFile {
    /// Creates the results file for `model`. Refuses an existing file unless `overwrite`.
    pub fn create(path: &Path, model: &Model, overwrite: bool) -> Result<Self> {
        if path.exists() && !overwrite {
            return Err(Error::Io(format!(
                "{}: results file exists already; use --overwrite to replace it, or --out to write elsewhere",
                path.display()
            )));
        }
        let e = h5(path);
        let file = super::h5util::with_small_chunk_cache()
            .create(path)
            .map_err(|err| match in_use_message(path, &err) {
                Some(m) => Error::Io(m),
                None => e(err),
            })?;
        let root = file.as_group().map_err(&e)?;
        attr_str(&root, "kind", RESULTS_KIND).map_err(&e)?;
        attr_str(&root, "title", &model.title).map_err(&e)?;
        attr_str(&root, "software_version", env!("CARGO_PKG_VERSION")).map_err(&e)?;
        attr_str(&root, "created", &crate::output::now_utc()).map_err(&e)?;
        attr_str(&root, "case_text", &model.case_text).map_err(&e)?;
        attr_str(&root, "overrides", &model.overrides.join("\n")).map_err(&e)?;
        attr_str(&root, "time_unit", "year").map_err(&e)?;
        attr_str(&root, "Conventions", "CF-1.8").map_err(&e)?;
        attr_str(
            &root,
            "source",
            concat!("deepdry ", env!("CARGO_PKG_VERSION")),
        )
        .map_err(&e)?;

        let mesh = file.create_group("mesh").map_err(&e)?;
        let depth = write_1d(
            &mesh,
            "depth",
            &model.mesh.centers,
            "m",
            "depth of the cell centres",
        )
        .map_err(&e)?;
        let face_depth = write_1d(
            &mesh,
            "face_depth",
            &model.mesh.faces,
            "m",
            "depth of the cell faces",
        )
        .map_err(&e)?;
        for (ds, name) in [(&depth, "depth"), (&face_depth, "face_depth")] {
            describe_depth(ds).map_err(&e)?;
            set_scale(ds, name).map_err(&e)?;
        }
        let cell_layer = layer_of_cell(model);
        let layer_of_cell: Vec<i32> = cell_layer.iter().map(|&l| l as i32).collect();
        let ds = mesh
            .new_dataset_builder()
            .with_data(&ndarray::Array1::from_vec(layer_of_cell))
            .create("layer")
            .map_err(&e)?;
        super::h5util::describe(&ds, "1", "layer index of each cell (into layer_names)")
            .map_err(&e)?;
        attach_scale(&ds, &depth, 0).map_err(&e)?;
        let layer_names: Vec<String> = model.layers.iter().map(|l| l.name.clone()).collect();
        let names = var_len(&layer_names);
        let ds = mesh
            .new_dataset_builder()
            .with_data(&ndarray::Array1::from_vec(names))
            .create("layer_names")
            .map_err(&e)?;
        super::h5util::describe(&ds, "1", "layer names").map_err(&e)?;
        set_scale(&ds, "layer_names").map_err(&e)?;

        let sets = Sets::get(
            &file,
            Some((&model.mesh.centers, &model.mesh.faces, &layer_names)),
            &model.solutes,
            Extras::of(model),
        )
        .map_err(&e)?;
        Ok(Self::writer(path, file, sets, cell_layer))
    }

    /// The writer of a new `file` at `path` with its datasets `sets`.
    fn writer(path: &Path, file: File, sets: Sets, cell_layer: Vec<usize>) -> Self {
        ResultsFile {
            path: path.to_path_buf(),
            file,
            layers: sets.layer_storage.shape()[1],
            sets,
            cell_layer,
            pending: Vec::new(),
            pending_layers: Vec::new(),
            pending_solutes: Vec::new(),
            snapshots: 0,
            records: 0,
            last_series_year: None,
            last_snapshot_year: None,
            continued: false,
        }
    }

    /// Reopens an existing results file to append after `snapshots` snapshots and
    /// `series_rows` series rows; anything written after those (by an interrupted run
    /// past its last checkpoint) is dropped.
    ///
    /// The file must belong to the checkpoint: the same mesh (`faces`), at least that many
    /// rows, and, where the checkpoint recorded them, the same times in its last series row
    /// and last snapshot. A file that is missing, cannot be opened or read (for example
    /// damaged by a kill during a flush), or does not match is refused with one line that
    /// says how to go on; the file is not modified then.
    #[allow(clippy::too_many_arguments)]
    pub fn open_append(
        path: &Path,
        faces: &[f64],
        solutes: &[crate::model::Solute],
        extras: Extras,
        snapshots: usize,
        series_rows: usize,
        last_series_year: Option<f64>,
        last_snapshot_year: Option<f64>,
    ) -> Result<Self> {
        if !path.exists() {
            return Err(Error::Io(format!(
                "{}: no such file; the checkpoint continues this results file; {CONTINUE_ADVICE}",
                path.display()
            )));
        }
        let damaged = |what: String| cannot_continue(path, &what);
        let h5err = |err: hdf5::Error| {
            damaged(format!(
                "damaged or not an HDF5 file ({})",
                super::h5util::short_error(&err)
            ))
        };
        let file = super::h5util::with_small_chunk_cache()
            .open_rw(path)
            .map_err(|err| match in_use_message(path, &err) {
                Some(m) => Error::Io(m),
                None => h5err(err),
            })?;
        let root = file.as_group().map_err(h5err)?;
        let kind = super::h5util::read_attr_str(&root, "kind").unwrap_or_default();
        if kind != RESULTS_KIND {
            return Err(Error::input(format!(
                "{}: not a deepdry results file",
                path.display()
            )));
        }
        let ds = |name: &str| file.dataset(name).map_err(h5err);
        let stored_faces = ds("mesh/face_depth")?.read_raw::<f64>().map_err(h5err)?;
        if stored_faces != faces {
            return Err(Error::input(format!(
                "{}: the results file has {} cells, the checkpoint {}, or other cell depths; it does not belong to this checkpoint",
                path.display(),
                stored_faces.len().saturating_sub(1),
                faces.len().saturating_sub(1)
            )));
        }
        // A file of an earlier version lacks the datasets added since (it cannot grow
        // them from the middle of a run).
        let missing = SeriesRecord::FIELDS
            .iter()
            .map(|f| format!("series/{}", f.0))
            .chain(["profiles/depth", "series/layer_water_storage"].map(String::from))
            .chain(
                solute_profile_sets(solutes, extras.vegetation)
                    .into_iter()
                    .map(|d| format!("profiles/{}", d.0)),
            )
            .chain(
                extra_series_sets(solutes, extras)
                    .into_iter()
                    .map(|d| format!("series/{}", d.0)),
            )
            .find(|n| file.dataset(n).is_err());
        if let Some(n) = missing {
            return Err(damaged(format!(
                "it was written by an earlier deepdry version and has no {n}"
            )));
        }
        let sets = Sets::get(&file, None, solutes, extras).map_err(h5err)?;
        let cell_layer: Vec<usize> = ds("mesh/layer")?
            .read_raw::<i32>()
            .map_err(h5err)?
            .iter()
            .map(|&l| l.max(0) as usize)
            .collect();
        let have_snap = sets.profile_time.shape()[0];
        let have_rows = sets.series_time.shape()[0];
        if have_snap < snapshots || have_rows < series_rows {
            return Err(Error::input(format!(
                "{}: the results file holds {have_snap} snapshots and {have_rows} series rows, fewer than the checkpoint recorded ({snapshots}, {series_rows}); it does not belong to this checkpoint",
                path.display()
            )));
        }
        // Every dataset must hold the rows the checkpoint counts on.
        let short = sets
            .profiles()
            .map(|d| (d, snapshots, "snapshots"))
            .chain(sets.all_series().map(|d| (d, series_rows, "series rows")))
            .chain(std::iter::once((
                &sets.layer_storage,
                series_rows,
                "series rows",
            )))
            .find(|(d, need, _)| d.shape()[0] < *need);
        if let Some((d, need, what)) = short {
            return Err(damaged(format!(
                "{} has {} rows, fewer than its {need} {what}",
                d.name(),
                d.shape()[0]
            )));
        }
        let last_row = last_value(&sets.series_time, series_rows).map_err(h5err)?;
        let last_snap = last_value(&sets.profile_time, snapshots).map_err(h5err)?;
        if (last_series_year.is_some() && !same_time(last_row, last_series_year))
            || (last_snapshot_year.is_some() && !same_time(last_snap, last_snapshot_year))
        {
            return Err(Error::input(format!(
                "{}: the results file's series row {series_rows} is at {:?} yr and snapshot {snapshots} at {:?} yr, the checkpoint recorded {:?} and {:?}; it does not belong to this checkpoint",
                path.display(),
                last_row,
                last_snap,
                last_series_year,
                last_snapshot_year
            )));
        }
        // A file damaged by a kill can pass every check above and still fail here (seen:
        // "addr overflow" on the first flush): the same guided message as any damage.
        sets.truncate(snapshots, series_rows).map_err(h5err)?;
        file.flush().map_err(h5err)?;
        Ok(ResultsFile {
            snapshots,
            records: series_rows,
            last_series_year: last_row,
            last_snapshot_year: last_snap,
            continued: true,
            ..Self::writer(path, file, sets, cell_layer)
        })
    }

    /// Sets a root string attribute (e.g. the parent checkpoint of a branch).
    pub fn set_attr(&self, name: &str, value: &str) -> Result<()> {
        let root = self.file.as_group().map_err(h5(&self.path))?;
        attr_str(&root, name, value).map_err(h5(&self.path))
    }

    /// Sets a number attribute on the root group.
    pub fn set_attr_f64(&self, name: &str, value: f64) -> Result<()> {
        let root = self.file.as_group().map_err(h5(&self.path))?;
        super::h5util::attr_f64(&root, name, value).map_err(h5(&self.path))
    }

    /// Queues one series row (written at the next snapshot or flush, or when
    /// [`SERIES_QUEUE_ROWS`] rows are queued), with no water storage per layer (NaN).
    pub fn push_series(&mut self, rec: SeriesRecord) -> Result<()> {
        let nan = vec![f64::NAN; self.layers];
        self.push_series_layers(rec, &nan, &[])
    }

    /// Queues one series row, the water stored in each layer [kg m⁻²] (as many values
    /// as layers; missing ones are NaN) and the solute series values (as
    /// [`crate::solute::SoluteColumn::series_values`]; missing ones are NaN).
    pub fn push_series_layers(
        &mut self,
        rec: SeriesRecord,
        layer_water: &[f64],
        solutes: &[f64],
    ) -> Result<()> {
        self.pending.push(rec);
        self.pending_layers
            .extend((0..self.layers).map(|k| layer_water.get(k).copied().unwrap_or(f64::NAN)));
        let ns = self.sets.extra_series.len();
        self.pending_solutes
            .extend((0..ns).map(|k| solutes.get(k).copied().unwrap_or(f64::NAN)));
        // A run with few snapshots and checkpoints (10⁶ steps between them) must not
        // hold its series in memory: the queue is written out when it is long.
        if self.pending.len() >= SERIES_QUEUE_ROWS {
            self.flush()?;
        }
        Ok(())
    }

    /// Writes a snapshot at `time_year` of the profiles `p`, then everything queued, then
    /// flushes the file.
    pub fn write_snapshot(&mut self, time_year: f64, p: &Profile) -> Result<()> {
        self.write_snapshot_rows(time_year, &mut ProfileRows::Filled(p))
    }

    /// Whether [`ResultsFile::write_snapshot_of`] can write this file's snapshots: it has
    /// no solute profiles (which the solutes compute; root uptake is the system's).
    pub fn snapshots_from_system(&self) -> bool {
        self.sets
            .solute_profiles
            .iter()
            .all(|(_, kind, _)| *kind == SoluteProfileKind::RootUptake)
    }

    /// As [`ResultsFile::write_snapshot`], each profile computed from the last evaluation
    /// of `sys` as it is written, into one buffer: the same rows, bitwise, as from the
    /// [`Profile`] filled from `sys`, without holding all of them at once (80 B per cell).
    pub fn write_snapshot_of(&mut self, time_year: f64, sys: &System) -> Result<()> {
        self.write_snapshot_rows(
            time_year,
            &mut ProfileRows::System {
                sys,
                row: Vec::new(),
            },
        )
    }

    fn write_snapshot_rows(&mut self, time_year: f64, p: &mut ProfileRows) -> Result<()> {
        let e = self.write_error();
        append_1d(&self.sets.profile_time, &[time_year]).map_err(&e)?;
        for (k, ds) in self.sets.cells.iter().enumerate() {
            append_row(ds, p.cell(k)).map_err(&e)?;
        }
        for (k, ds) in self.sets.faces.iter().enumerate() {
            append_row(ds, p.face(k)).map_err(&e)?;
        }
        for (ds, kind, k) in &self.sets.solute_profiles {
            let v = p.other(*kind, *k).ok_or_else(|| {
                Error::Internal(format!("snapshot without the profiles of solute {k}"))
            })?;
            append_row(ds, v).map_err(&e)?;
        }
        self.snapshots += 1;
        self.last_snapshot_year = Some(time_year);
        self.flush()
    }

    /// Writes queued series rows and flushes the file to disk.
    pub fn flush(&mut self) -> Result<()> {
        let e = self.write_error();
        if !self.pending.is_empty() {
            let times: Vec<f64> = self.pending.iter().map(|r| r.time_year).collect();
            append_1d(&self.sets.series_time, &times).map_err(&e)?;
            for (k, ds) in self.sets.series.iter().enumerate() {
                let col: Vec<f64> = self.pending.iter().map(|r| r.values()[k]).collect();
                append_1d(ds, &col).map_err(&e)?;
            }
            let rows = ndarray::Array2::from_shape_vec(
                (self.pending.len(), self.layers),
                std::mem::take(&mut self.pending_layers),
            )
            .map_err(|x| Error::Internal(x.to_string()))?;
            super::h5util::append_rows(&self.sets.layer_storage, &rows).map_err(&e)?;
            let ns = self.sets.extra_series.len();
            let values = std::mem::take(&mut self.pending_solutes);
            for (k, ds) in self.sets.extra_series.iter().enumerate() {
                let col: Vec<f64> = values.iter().skip(k).step_by(ns).copied().collect();
                append_1d(ds, &col).map_err(&e)?;
            }
            self.records += self.pending.len();
            self.last_series_year = self.pending.last().map(|r| r.time_year);
            self.pending.clear();
        }
        self.file.flush().map_err(&e)?;
        self.continued = false;
        Ok(())
    }

    /// Closes the file and reads it back as a reader would (a fresh open, so nothing comes
    /// from this writer's caches): the `kind` attribute, every profile and series dataset
    /// with the rows this writer wrote, and `/profiles/time` and `/series/time` whole,
    /// finite, not decreasing and ending at the last times written. A foreign writer that
    /// damaged the file during the run shows here; the error says what is wrong (for
    /// [`crate::sim::observers::ResultsWriter`] to report).
    pub fn close_and_verify(self) -> std::result::Result<(), String> {
        let path = self.path.clone();
        let rows: Vec<(String, usize)> = std::iter::once((&self.sets.profile_time, self.snapshots))
            .chain(self.sets.profiles().map(|d| (d, self.snapshots)))
            .chain(std::iter::once((&self.sets.series_time, self.records)))
            .chain(std::iter::once((&self.sets.layer_storage, self.records)))
            .chain(self.sets.all_series().map(|d| (d, self.records)))
            .map(|(d, n)| (d.name(), n))
            .collect();
        let last = [
            ("/profiles/time", self.last_snapshot_year),
            ("/series/time", self.last_series_year),
        ];
        drop(self);
        let short = |e: &hdf5::Error| super::h5util::short_error(e);
        let file = File::open(&path).map_err(|e| format!("it no longer opens ({})", short(&e)))?;
        let root = file
            .as_group()
            .map_err(|e| format!("its root group cannot be read ({})", short(&e)))?;
        match super::h5util::read_attr_str(&root, "kind") {
            Ok(k) if k == RESULTS_KIND => {}
            Ok(k) => {
                return Err(format!(
                    "its `kind` attribute is {k:?}, not {RESULTS_KIND:?}"
                ))
            }
            Err(e) => {
                return Err(format!(
                    "its `kind` attribute cannot be read ({})",
                    short(&e)
                ))
            }
        }
        for (name, n) in &rows {
            let ds = file
                .dataset(name)
                .map_err(|e| format!("{name} cannot be opened ({})", short(&e)))?;
            let have = ds.shape().first().copied().unwrap_or(0);
            if have != *n {
                return Err(format!("{name} has {have} rows, the run wrote {n}"));
            }
        }
        for (name, want) in last {
            let v = file
                .dataset(name)
                .and_then(|d| d.read_raw::<f64>())
                .map_err(|e| format!("{name} cannot be read ({})", short(&e)))?;
            if v.iter().any(|t| !t.is_finite()) || v.windows(2).any(|w| w[1] < w[0]) {
                return Err(format!(
                    "{name} holds times that are not finite or decrease"
                ));
            }
            if v.last().map(|t| t.to_bits()) != want.map(f64::to_bits) {
                return Err(format!(
                    "{name} ends at {:?} yr, the run wrote {:?} yr last",
                    v.last(),
                    want
                ));
            }
        }
        Ok(())
    }

    /// How a failed write is reported: as an I/O error of the file, or, at the first write
    /// to a continued file, as a file that cannot be continued.
    fn write_error(&self) -> impl Fn(hdf5::Error) -> Error {
        let path = self.path.clone();
        let continued = self.continued;
        move |err| {
            if continued {
                cannot_continue(
                    &path,
                    &format!(
                        "damaged by an interruption ({})",
                        super::h5util::short_error(&err)
                    ),
                )
            } else {
                super::h5util::io_error(&path, err)
            }
        }
    }
}

/// Where the rows of a snapshot come from: a filled [`Profile`], or the last evaluation
/// of the system, one row at a time into `row`.
enum ProfileRows<'a> {
    Filled(&'a Profile),
    System { sys: &'a System, row: Vec<f64> },
}

impl ProfileRows<'_> {
    /// Cell profile `k` (order of [`PROFILE_CELL`]).
    fn cell(&mut self, k: usize) -> &[f64] {
        match self {
            ProfileRows::Filled(p) => p.cells()[k],
            ProfileRows::System { sys, row } => {
                crate::output::diagnostics::cell_profile(sys, k, row);
                row
            }
        }
    }

    /// Face profile `k` (order of [`PROFILE_FACE`]).
    fn face(&mut self, k: usize) -> &[f64] {
        match self {
            ProfileRows::Filled(p) => p.faces()[k],
            ProfileRows::System { sys, row } => {
                crate::output::diagnostics::face_profile(sys, k, row);
                row
            }
        }
    }

    /// A solute profile (of solute `k`) or the root uptake; None where it is not there.
    fn other(&mut self, kind: SoluteProfileKind, k: usize) -> Option<&[f64]> {
        match self {
            ProfileRows::Filled(p) => {
                if kind == SoluteProfileKind::RootUptake {
                    return Some(&p.root_water_uptake);
                }
                let sp = p.solutes.get(k)?;
                Some(match kind {
                    SoluteProfileKind::Concentration => &sp.concentration,
                    SoluteProfileKind::Flux => &sp.flux,
                    SoluteProfileKind::Age => &sp.accumulation_age,
                    SoluteProfileKind::Precipitate => &sp.precipitate,
                    SoluteProfileKind::RootUptake => &p.root_water_uptake,
                })
            }
            ProfileRows::System { sys, row } => {
                if kind != SoluteProfileKind::RootUptake {
                    return None;
                }
                crate::output::diagnostics::root_uptake_profile(sys, row);
                Some(row)
            }
        }
    }
}
