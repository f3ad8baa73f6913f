//! Checkpoint files (HDF5): everything needed to continue a run exactly.
//!
//! A checkpoint holds the stepper state ([`StepState`]: time, proposed Δt, unknowns,
//! balance accumulators, counters), the run-loop position (series rows since the last
//! record, rows and snapshots in the results file), the mesh, the full case text, hashes
//! of the case content and the software version. Files are written atomically: to a
//! temporary file in the same folder, flushed and fsynced, then renamed over the target
//! and the folder fsynced, so a crash at any moment leaves the previous checkpoint intact.

use crate::error::{Error, Result};
use crate::model::Model;
use crate::output::h5util::{attr_f64, attr_str, describe, read_attr_str};
use crate::props::constants::SECONDS_PER_YEAR;
use crate::solute::SoluteState;
use crate::solve::envelope::{EnvelopeState, PeriodPoint};
use crate::solve::stepper::{Counters, HistoryPoint, StepState};
use hdf5::File;
use ndarray::Array1;
use std::path::{Path, PathBuf};

/// Attribute value of `kind` that marks a checkpoint file.
pub const CHECKPOINT_KIND: &str = "deepdry-checkpoint";
/// Format version of checkpoint files; a file of another version is refused.
pub const CHECKPOINT_FORMAT: &str = "3";
/// Root attribute holding the checksum of everything else in the file.
pub const CHECKSUM_ATTR: &str = "checksum";
/// Prefix of the checksum value: the method, so that a later method can be told apart.
pub const CHECKSUM_METHOD: &str = "fnv1a-64";

/// `path` made absolute against the current folder (not resolved through links, so it
/// names the file as the user gave it); `path` itself when the current folder is unknown.
pub fn absolute(path: &Path) -> PathBuf {
    std::path::absolute(path).unwrap_or_else(|_| path.to_path_buf())
}

/// Incremental FNV-1a 64-bit hash over bytes.
struct Fnv(u64);

impl Fnv {
    fn new() -> Fnv {
        Fnv(0xcbf2_9ce4_8422_2325)
    }
    fn bytes(&mut self, b: &[u8]) {
        for x in b {
            self.0 ^= *x as u64;
            self.0 = self.0.wrapping_mul(0x0100_0000_01b3);
        }
    }
    /// A length-prefixed field, so that no two different sequences of fields feed the
    /// same bytes.
    fn field(&mut self, b: &[u8]) {
        self.bytes(&(b.len() as u64).to_le_bytes());
        self.bytes(b);
    }
}

/// Feeds the name, type, shape and values of a dataset or attribute (`dataset` false) to
/// the hash. A 2-D float dataset is read row by row (the same bytes in the same order): a
/// checkpoint's largest datasets are the history's rows of unknowns and storages, and
/// reading one whole would add 48 B per cell and history point to the peak memory of the
/// write.
fn hash_container(h: &mut Fnv, name: &str, c: &hdf5::Container, dataset: bool) -> hdf5::Result<()> {
    use hdf5::types::{TypeDescriptor, VarLenUnicode};
    h.field(name.as_bytes());
    let shape = c.shape();
    h.bytes(&(shape.len() as u64).to_le_bytes());
    for d in &shape {
        h.bytes(&(*d as u64).to_le_bytes());
    }
    match c.dtype()?.to_descriptor()? {
        TypeDescriptor::Float(_) if dataset && shape.len() == 2 => {
            h.bytes(b"f");
            for r in 0..shape[0] {
                for x in c.read_slice_1d::<f64, _>(ndarray::s![r, ..])? {
                    h.bytes(&x.to_le_bytes());
                }
            }
        }
        TypeDescriptor::Float(_) if dataset && shape.len() == 1 => {
            // In blocks, not whole: the largest 1-D datasets hold 6 values per cell.
            h.bytes(b"f");
            const BLOCK: usize = 1 << 16;
            for start in (0..shape[0]).step_by(BLOCK) {
                let end = (start + BLOCK).min(shape[0]);
                for x in c.read_slice_1d::<f64, _>(ndarray::s![start..end])? {
                    h.bytes(&x.to_le_bytes());
                }
            }
        }
        TypeDescriptor::Float(_) => {
            h.bytes(b"f");
            for x in c.read_raw::<f64>()? {
                h.bytes(&x.to_le_bytes());
            }
        }
        TypeDescriptor::Unsigned(_) => {
            h.bytes(b"u");
            for x in c.read_raw::<u64>()? {
                h.bytes(&x.to_le_bytes());
            }
        }
        TypeDescriptor::Integer(_) => {
            h.bytes(b"i");
            for x in c.read_raw::<i64>()? {
                h.bytes(&x.to_le_bytes());
            }
        }
        TypeDescriptor::VarLenUnicode => {
            h.bytes(b"s");
            for x in c.read_raw::<VarLenUnicode>()? {
                h.field(x.as_str().as_bytes());
            }
        }
        other => {
            return Err(hdf5::Error::from(format!(
                "{name}: unexpected type {other:?}"
            )))
        }
    }
    Ok(())
}

/// Feeds every attribute of `loc` (sorted by name; the checksum itself left out).
fn hash_attrs(h: &mut Fnv, loc: &hdf5::Location) -> hdf5::Result<()> {
    let mut names = loc.attr_names()?;
    names.sort();
    for n in names.iter().filter(|n| *n != CHECKSUM_ATTR) {
        let a = loc.attr(n)?;
        hash_container(h, n, &a, false)?;
    }
    Ok(())
}

/// Checksum of a checkpoint's content: FNV-1a 64 over the values as read (every root
/// attribute and every dataset with its attributes, sorted by name, each with its type
/// and shape), as `fnv1a-64:` and 16 hex digits. The same function runs on the open file
/// after writing and on reading, so what is verified is exactly what a resume reads.
/// Every step of FNV-1a is a bijection of the hash state for a given byte, so any change
/// confined to one byte of the content (any single flipped bit) always changes the sum;
/// wider damage goes unnoticed with a chance of about 2^-64.
pub fn content_checksum(file: &File) -> hdf5::Result<String> {
    let mut h = Fnv::new();
    let root = file.as_group()?;
    hash_attrs(&mut h, &root)?;
    let mut names = file.member_names()?;
    names.sort();
    for n in &names {
        let ds = file.dataset(n)?;
        hash_container(&mut h, n, &ds, true)?;
        hash_attrs(&mut h, &ds)?;
    }
    Ok(format!("{CHECKSUM_METHOD}:{:016x}", h.0))
}

/// FNV-1a 64-bit hash of a string, as 16 hex digits.
pub fn fnv1a(text: &str) -> String {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in text.as_bytes() {
        h ^= *b as u64;
        h = h.wrapping_mul(0x0100_0000_01b3);
    }
    format!("{h:016x}")
}

/// FNV-1a 64 fed by formatting (`write!`): the hash of the text without the text (the
/// mesh and the cell soils print ~100 B per cell).
struct FnvText(u64);

impl std::fmt::Write for FnvText {
    fn write_str(&mut self, s: &str) -> std::fmt::Result {
        for b in s.as_bytes() {
            self.0 ^= *b as u64;
            self.0 = self.0.wrapping_mul(0x0100_0000_01b3);
        }
        Ok(())
    }
}

/// Hash of what fixes the discretised column: mesh, soils and layers (as [`fnv1a`] of
/// their debug text).
pub fn column_hash(m: &Model) -> String {
    use std::fmt::Write;
    let mut h = FnvText(0xcbf2_9ce4_8422_2325);
    let _ = write!(
        h,
        "{:?}|{:?}|{:?}|{:?}",
        m.mesh, m.soils, m.layers, m.cell_soil
    );
    format!("{:016x}", h.0)
}

/// Hash of the physics-relevant content: column, physics, boundary conditions, initial
/// state and the step control (everything that changes the computed sequence, except
/// the end time and the outputs).
pub fn physics_hash(m: &Model) -> String {
    let t = &m.time;
    // The solutes join the hashed text only when there are some, so the hashes of cases
    // without solutes are those of earlier versions.
    let solutes = if m.solutes.is_empty() {
        String::new()
    } else {
        format!("|{:?}", m.solutes)
    };
    let base = fnv1a(&format!(
        "{}|{:?}|{:?}|{:?}|{:?}|{:?}|{:?}|{:?}|{:?}|{:?}|{:?}",
        column_hash(m),
        m.physics,
        m.surface,
        m.bottom,
        m.initial,
        (
            t.epoch_year * SECONDS_PER_YEAR + t.start,
            t.dt_initial,
            t.dt_min,
            t.dt_max,
            t.max_newton,
            t.newton_tolerance
        ),
        t.method,
        (
            t.rtol,
            t.atol_temperature,
            t.atol_head,
            t.atol_vapor,
            t.atol_theta
        ),
        m.output.snapshot_times,
        m.output.series_every,
        m.checkpoint.every
    ));
    // Cycle skipping joins likewise only when it is on.
    let skipping = match &t.cycle_skipping {
        Some(c) => format!("|{c:?}"),
        None => String::new(),
    };
    if solutes.is_empty() && skipping.is_empty() {
        base
    } else {
        fnv1a(&format!("{base}{solutes}{skipping}"))
    }
}

/// Run-loop position stored alongside the stepper state.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct LoopPosition {
    /// Accepted steps since the last series record.
    pub since_series: u64,
    /// Rows in `/series` and snapshots in `/profiles` of the results file at this point.
    pub series_rows: u64,
    pub snapshots: u64,
}

/// What a checkpoint records besides the state, for `inspect` and for the checks made on
/// resume. Every field is optional on reading (older checkpoints of format 1 lack them).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CheckpointInfo {
    /// Balance errors at the checkpoint: absolute [energy J m⁻², water kg m⁻²] and relative.
    pub balance_abs: Option<[f64; 2]>,
    pub balance_rel: Option<[f64; 2]>,
    /// Time [yr] of the last `/series` row and of the last snapshot in the results file at
    /// this point (NaN when there is none): resume checks that the results file agrees.
    pub last_series_year: Option<f64>,
    pub last_snapshot_year: Option<f64>,
    /// The checkpoint a branched run started from, and its time [yr].
    pub parent: Option<(String, f64)>,
    /// The end year of the run that wrote the checkpoint (read back only: written from the
    /// model; absent in checkpoints of earlier versions). A run extended past its case's
    /// end (`--extend-to`) records the later end here.
    pub run_end_year: Option<f64>,
}

/// A checkpoint read back from disk.
#[derive(Debug, Clone)]
pub struct Checkpoint {
    pub path: PathBuf,
    pub state: StepState,
    pub position: LoopPosition,
    pub case_text: String,
    pub title: String,
    pub software_version: String,
    pub physics_hash: String,
    pub column_hash: String,
    pub results_file: String,
    /// The year `state.t` counts seconds from (see [`crate::model::time_origin_year`]).
    pub epoch_year: f64,
    pub faces: Vec<f64>,
    pub created: String,
    pub format: String,
    pub info: CheckpointInfo,
    /// The solute state (None: the run has no solutes).
    pub solutes: Option<SoluteState>,
    /// Where cycle skipping stands (None: the run has none).
    pub envelope: Option<EnvelopeState>,
}

fn e(path: &Path) -> impl Fn(hdf5::Error) -> Error + '_ {
    move |err| crate::output::h5util::io_error(path, err)
}

/// Writes a checkpoint atomically to `path`: the stepper state and the states of the
/// problem's kept evaluations (`kept`: cells, faces, as [`crate::solve::problem::Problem::kept_states`]).
/// On failure (e.g. a full disk) the partial temporary file is removed and any earlier
/// file at `path` is left as it was.
#[allow(clippy::too_many_arguments)]
pub fn write(
    path: &Path,
    model: &Model,
    state: &StepState,
    kept: (&[f64], &[f64]),
    position: LoopPosition,
    results_file: &Path,
    info: &CheckpointInfo,
    solutes: Option<&SoluteState>,
    envelope: Option<&EnvelopeState>,
) -> Result<()> {
    let tmp = path.with_extension("h5.tmp");
    write_via(
        &tmp,
        path,
        model,
        state,
        kept,
        position,
        results_file,
        info,
        solutes,
        envelope,
    )
    .map_err(|err| {
        let _ = std::fs::remove_file(&tmp);
        Error::Io(format!(
            "{}: checkpoint not written (earlier checkpoints are kept): {err}",
            path.display()
        ))
    })
}

#[allow(clippy::too_many_arguments)]
fn write_via(
    tmp: &Path,
    path: &Path,
    model: &Model,
    state: &StepState,
    kept: (&[f64], &[f64]),
    position: LoopPosition,
    results_file: &Path,
    info: &CheckpointInfo,
    solutes: Option<&SoluteState>,
    envelope: Option<&EnvelopeState>,
) -> Result<()> {
    {
        let file = File::create(tmp).map_err(e(tmp))?;
        let root = file.as_group().map_err(e(tmp))?;
        let er = e(tmp);
        attr_str(&root, "kind", CHECKPOINT_KIND).map_err(&er)?;
        attr_str(&root, "format", CHECKPOINT_FORMAT).map_err(&er)?;
        attr_str(&root, "title", &model.title).map_err(&er)?;
        attr_str(&root, "software_version", env!("CARGO_PKG_VERSION")).map_err(&er)?;
        attr_str(&root, "created", &crate::output::now_utc()).map_err(&er)?;
        attr_str(&root, "case_text", &model.case_text).map_err(&er)?;
        attr_str(&root, "overrides", &model.overrides.join("\n")).map_err(&er)?;
        attr_str(&root, "physics_hash", &physics_hash(model)).map_err(&er)?;
        attr_str(&root, "column_hash", &column_hash(model)).map_err(&er)?;
        attr_str(&root, "results_file", &results_file.display().to_string()).map_err(&er)?;
        attr_str(
            &root,
            "results_file_absolute",
            &absolute(results_file).display().to_string(),
        )
        .map_err(&er)?;
        attr_f64(&root, "time_origin_year", model.time.epoch_year).map_err(&er)?;
        attr_f64(&root, "time_year", model.time.year(state.t)).map_err(&er)?;
        attr_f64(&root, "end_year", model.time.year(model.time.end)).map_err(&er)?;
        let n = model.mesh.faces.len().saturating_sub(1);
        let per_cell = "per cell, ordered temperature [K], pressure head [m], vapour density [kg m-3] (interleaved by cell)";
        f64s(
            &file,
            "time_s",
            &[state.t],
            "s",
            "simulated time of the state (seconds since year 0 of the case's time axis)",
        )
        .map_err(&er)?;
        f64s(&file, "dt_s", &[state.dt], "s", "proposed next time step").map_err(&er)?;
        f64s(
            &file,
            "unknowns",
            &state.u,
            "mixed: K, m, kg m-3",
            &format!("state unknowns of the {n} cells, {per_cell}"),
        )
        .map_err(&er)?;
        f64s(
            &file,
            "storage",
            &state.storage,
            "mixed: J m-3, kg m-3, kg m-3",
            "storages per cell at the state: energy, total water, vapour (interleaved by cell)",
        )
        .map_err(&er)?;
        f64s(
            &file,
            "linearization_cells",
            kept.0,
            "mixed",
            "cell states of the kept evaluations with derivatives (linearisation points)",
        )
        .map_err(&er)?;
        f64s(
            &file,
            "linearization_faces",
            kept.1,
            "mixed",
            "face states of the kept evaluations with derivatives (linearisation points)",
        )
        .map_err(&er)?;
        f64s(
            &file,
            "inflow",
            &state.inflow,
            "J m-2, kg m-2",
            "cumulative net inflow since the start: energy, water",
        )
        .map_err(&er)?;
        f64s(
            &file,
            "throughput",
            &state.throughput,
            "J m-2, kg m-2",
            "cumulative absolute boundary flow since the start: energy, water",
        )
        .map_err(&er)?;
        f64s(
            &file,
            "top_inflow",
            &state.top_inflow,
            "J m-2, kg m-2",
            "cumulative inflow through the top boundary since the start: energy, water",
        )
        .map_err(&er)?;
        f64s(
            &file,
            "initial_totals",
            &state.initial_totals,
            "J m-2, kg m-2",
            "column totals at the start: energy, water",
        )
        .map_err(&er)?;
        f64s(
            &file,
            "initial_storage",
            &state.initial_storage,
            "mixed: J m-3, kg m-3, kg m-3",
            "storages per cell at the start: energy, total water, vapour (interleaved by cell)",
        )
        .map_err(&er)?;
        f64s(
            &file,
            "face_depth",
            &model.mesh.faces,
            "m",
            "depth of the cell faces (positive down)",
        )
        .map_err(&er)?;
        if let (Some(a), Some(r)) = (info.balance_abs, info.balance_rel) {
            f64s(
                &file,
                "balance_error",
                &[a[0], a[1], r[0], r[1]],
                "J m-2, kg m-2, 1, 1",
                "cumulative balance error: energy, water (absolute), energy, water (relative)",
            )
            .map_err(&er)?;
        }
        f64s(
            &file,
            "results_last_times",
            &[
                info.last_series_year.unwrap_or(f64::NAN),
                info.last_snapshot_year.unwrap_or(f64::NAN),
            ],
            "year",
            "time of the last series row and of the last snapshot in the results file (NaN: none)",
        )
        .map_err(&er)?;
        if let Some((p, t)) = &info.parent {
            attr_str(&root, "parent_checkpoint", p).map_err(&er)?;
            attr_f64(&root, "parent_time_year", *t).map_err(&er)?;
        }
        // Multistep history, newest first.
        let hlen = state.history.len();
        let width = state.u.len();
        let mut hmeta = Vec::with_capacity(hlen * 5);
        for hp in &state.history {
            hmeta.extend_from_slice(&[
                hp.t,
                hp.inflow[0],
                hp.inflow[1],
                hp.throughput[0],
                hp.throughput[1],
            ]);
        }
        // A 2-D dataset of `rows` rows from row-major values.
        let table = |name: &str,
                     rows: usize,
                     cols: usize,
                     v: Vec<f64>,
                     units: &str,
                     long: &str|
         -> Result<()> {
            let a = ndarray::Array2::from_shape_vec((rows, cols), v)
                .map_err(|x| Error::Internal(x.to_string()))?;
            let ds = file
                .new_dataset_builder()
                .with_data(&a)
                .create(name)
                .map_err(&er)?;
            describe(&ds, units, long).map_err(&er)?;
            Ok(())
        };
        // A 2-D dataset written row by row from the history points' own arrays (no
        // gathered copy: at 5 points, 2 × 120 B per cell at the peak of a run's memory).
        let rows = |name: &str,
                    row: &dyn Fn(&HistoryPoint) -> &[f64],
                    units: &str,
                    long: &str|
         -> Result<()> {
            let ds = file
                .new_dataset::<f64>()
                .shape((hlen, width))
                .create(name)
                .map_err(&er)?;
            for (k, hp) in state.history.iter().enumerate() {
                ds.write_slice(ndarray::ArrayView1::from(row(hp)), ndarray::s![k, ..])
                    .map_err(&er)?;
            }
            describe(&ds, units, long).map_err(&er)?;
            Ok(())
        };
        rows(
            "history_unknowns",
            &|hp| &hp.u,
            "mixed: K, m, kg m-3",
            "unknowns of the multistep history points, newest first (rows), laid out as unknowns",
        )?;
        if state.history.iter().all(|hp| hp.storage.len() == width) {
            rows(
                "history_storage",
                &|hp| &hp.storage,
                "mixed: J m-3, kg m-3, kg m-3",
                "storages of the multistep history points, newest first",
            )?;
        }
        table("history_time_inflow", hlen, 5, hmeta, "s, J m-2, kg m-2, J m-2, kg m-2", "per history point: time, cumulative inflow (energy, water), cumulative throughput (energy, water)")?;
        // Per history point, the cumulative flows carried with it (energy, water).
        type Flows = fn(&crate::solve::stepper::HistoryPoint) -> &Vec<f64>;
        let per_point: [(&str, usize, Flows, &str); 3] = [
            (
                "history_top_inflow",
                state.top_inflow.len(),
                |hp| &hp.top_inflow,
                "per history point: cumulative inflow through the top boundary (energy, water)",
            ),
            (
                "history_sink",
                state.sink.len(),
                |hp| &hp.sink,
                "per history point: cumulative outflow through internal sinks (root water uptake): energy, water",
            ),
            (
                "history_runoff",
                state.runoff.len(),
                |hp| &hp.runoff,
                "per history point: cumulative runoff from the surface store: energy, water",
            ),
        ];
        for (name, width, flows, long) in per_point {
            let values: Vec<f64> = state
                .history
                .iter()
                .flat_map(|hp| flows(hp).iter().copied())
                .collect();
            table(name, hlen, width, values, "J m-2, kg m-2", long)?;
        }
        f64s(
            &file,
            "sink",
            &state.sink,
            "J m-2, kg m-2",
            "cumulative outflow through internal sinks (root water uptake) since the start: energy, water",
        )
        .map_err(&er)?;
        f64s(
            &file,
            "runoff",
            &state.runoff,
            "J m-2, kg m-2",
            "cumulative runoff from the surface store since the start: energy, water",
        )
        .map_err(&er)?;
        let c = &state.counters;
        let ints: Vec<u64> = vec![
            c.steps,
            c.rejected,
            c.newton_iterations,
            c.factorizations,
            position.since_series,
            position.series_rows,
            position.snapshots,
            state.order as u64,
            state.steps_at_order as u64,
            c.jacobians,
        ];
        let ds = file
            .new_dataset_builder()
            .with_data(&Array1::from_vec(ints))
            .create("counters")
            .map_err(&er)?;
        describe(&ds, "1", "counts: steps, rejected steps, Newton iterations, factorisations, steps since the last series row, series rows, snapshots, BDF order, steps at that order, Jacobian evaluations").map_err(&er)?;
        f64s(
            &file,
            "last_error_estimate",
            &[state.last_error],
            "1",
            "last local error estimate of the step control (scaled)",
        )
        .map_err(&er)?;
        if let Some(sol) = solutes {
            write_solutes(&file, sol).map_err(&er)?;
        }
        if let Some(env) = envelope {
            write_envelope(&file, env).map_err(&er)?;
        }
        // The checksum over everything above (every dataset and attribute, as read back).
        let sum = content_checksum(&file).map_err(&er)?;
        attr_str(&root, CHECKSUM_ATTR, &sum).map_err(&er)?;
        file.flush().map_err(&er)?;
        // Every handle is dropped at the end of this block, which closes the file.
    }
    let f = std::fs::File::open(tmp).map_err(|err| Error::io(tmp, err))?;
    f.sync_all().map_err(|err| Error::io(tmp, err))?;
    drop(f);
    std::fs::rename(tmp, path)
        .map_err(|err| Error::io(path, format!("cannot rename checkpoint: {err}")))?;
    if let Some(dir) = path.parent() {
        if let Ok(d) = std::fs::File::open(if dir.as_os_str().is_empty() {
            Path::new(".")
        } else {
            dir
        }) {
            let _ = d.sync_all();
        }
    }
    Ok(())
}

/// The cycle-skipping datasets of a checkpoint (root level, so that the checksum covers
/// them).
/// Writes `v` as the 1-D dataset `name` of `file`, with its units and long name.
fn f64s(file: &File, name: &str, v: &[f64], units: &str, long: &str) -> hdf5::Result<()> {
    let ds = file
        .new_dataset_builder()
        .with_data(ndarray::ArrayView1::from(v))
        .create(name)?;
    describe(&ds, units, long)
}

/// The 1-D f64 dataset `name` of `file`; Err: its name (the part of a checkpoint that is
/// missing or unreadable).
fn read_f64s(file: &File, name: &'static str) -> std::result::Result<Vec<f64>, &'static str> {
    file.dataset(name)
        .and_then(|d| d.read_raw::<f64>())
        .map_err(|_| name)
}

/// A boundary state of cycle skipping as a row of its checkpoint datasets, appended to
/// `out`: its unknowns, storages and cumulative flows (read back by `read_envelope`).
fn point_row(p: &PeriodPoint, out: &mut Vec<f64>) {
    out.extend_from_slice(&p.u);
    out.extend_from_slice(&p.storage);
    out.extend_from_slice(&p.flows);
}

fn write_envelope(file: &File, env: &EnvelopeState) -> hdf5::Result<()> {
    let counts = vec![
        env.period,
        env.exact,
        env.last_jump,
        env.jumps,
        env.skipped,
        env.points.len() as u64,
    ];
    let ds = file
        .new_dataset_builder()
        .with_data(&Array1::from_vec(counts))
        .create("cycle_skipping_counts")?;
    describe(&ds, "1", "cycle skipping: index of the last period boundary reached, periods integrated in the current block, periods of the last jump, jumps, periods skipped, boundary states kept")?;
    if env.trial_periods > 0 || env.implicit_pause > 0 || env.last_implicit {
        let implicit = vec![
            env.trial_periods,
            env.trial_steps,
            env.implicit_failures,
            env.implicit_pause,
            u64::from(env.last_implicit),
        ];
        let ds = file
            .new_dataset_builder()
            .with_data(&Array1::from_vec(implicit))
            .create("cycle_skipping_implicit")?;
        describe(&ds, "1", "cycle skipping's implicit jumps: trial periods integrated, their time steps, jumps abandoned in a row, blocks of explicit jumps left before the next try, whether the last jump was implicit (1)")?;
    }
    let mut values = vec![env.last_error];
    values.extend_from_slice(&env.mismatch);
    f64s(file, "cycle_skipping_values", &values, "1, J m-2, kg m-2", "cycle skipping: last error estimate (scaled), then the jumps' cumulative balance error (energy, water)")?;
    if !env.points.is_empty() {
        let mut points = Vec::new();
        for p in &env.points {
            point_row(p, &mut points);
        }
        f64s(file, "cycle_skipping_points", &points, "mixed", "cycle skipping: the boundary states of the current block, oldest first, each its unknowns, storages and cumulative flows (net inflow, throughput, top inflow, sinks, runoff; energy, water)")?;
    }
    if let Some((k0, p)) = &env.origin {
        let ds = file
            .new_dataset_builder()
            .with_data(&Array1::from_vec(vec![*k0]))
            .create("cycle_skipping_origin_period")?;
        describe(
            &ds,
            "1",
            "cycle skipping: index of the period boundary the last jump started from",
        )?;
        let mut row = Vec::new();
        point_row(p, &mut row);
        f64s(file, "cycle_skipping_origin", &row, "mixed", "cycle skipping: the boundary state the last jump started from, as a point of cycle_skipping_points")?;
    }
    Ok(())
}

/// The cycle-skipping state of a checkpoint (None when it has none); `len` unknowns per
/// state, `nq` conserved quantities.
fn read_envelope(
    file: &File,
    len: usize,
    nq: usize,
) -> std::result::Result<Option<EnvelopeState>, &'static str> {
    let Ok(counts) = file.dataset("cycle_skipping_counts") else {
        return Ok(None);
    };
    let c = counts
        .read_raw::<u64>()
        .map_err(|_| "cycle_skipping_counts")?;
    let v = read_f64s(file, "cycle_skipping_values")?;
    if c.len() != 6 || v.len() != 1 + nq || c[5] > 3 {
        return Err("cycle skipping state");
    }
    // Written only once an implicit jump was tried.
    let implicit = match file.dataset("cycle_skipping_implicit") {
        Ok(d) => d.read_raw::<u64>().map_err(|_| "cycle_skipping_implicit")?,
        Err(_) => vec![0; 5],
    };
    if implicit.len() != 5 || implicit[4] > 1 {
        return Err("cycle_skipping_implicit");
    }
    let width = 2 * len + 5 * nq;
    let point = |w: &[f64]| PeriodPoint {
        u: w[..len].to_vec(),
        storage: w[len..2 * len].to_vec(),
        flows: w[2 * len..].to_vec(),
    };
    let count = c[5] as usize;
    let points = if count == 0 {
        Vec::new()
    } else {
        let raw = read_f64s(file, "cycle_skipping_points")?;
        if raw.len() != count * width {
            return Err("cycle_skipping_points");
        }
        raw.chunks_exact(width).map(point).collect()
    };
    // Written once a jump was made (checkpoints of earlier versions have none: their
    // next implicit jump is then one of backward Euler).
    let origin = match file.dataset("cycle_skipping_origin_period") {
        Err(_) => None,
        Ok(d) => {
            let k0 = d
                .read_raw::<u64>()
                .map_err(|_| "cycle_skipping_origin_period")?;
            let raw = read_f64s(file, "cycle_skipping_origin")?;
            if k0.len() != 1 || k0[0] > c[0] {
                return Err("cycle_skipping_origin_period");
            }
            if raw.len() != width {
                return Err("cycle_skipping_origin");
            }
            Some((k0[0], point(&raw)))
        }
    };
    Ok(Some(EnvelopeState {
        period: c[0],
        exact: c[1],
        points,
        last_jump: c[2],
        jumps: c[3],
        skipped: c[4],
        mismatch: v[1..].to_vec(),
        last_error: v[0],
        trial_periods: implicit[0],
        trial_steps: implicit[1],
        implicit_failures: implicit[2],
        implicit_pause: implicit[3],
        last_implicit: implicit[4] == 1,
        origin,
    }))
}

/// The solute datasets of a checkpoint (root level, so that the checksum covers them).
fn write_solutes(file: &File, sol: &SoluteState) -> hdf5::Result<()> {
    let ns = sol.names.len();
    let names: Vec<hdf5::types::VarLenUnicode> = sol
        .names
        .iter()
        .map(|s| s.parse().unwrap_or_default())
        .collect();
    let ds = file
        .new_dataset_builder()
        .with_data(&Array1::from_vec(names))
        .create("solute_names")?;
    describe(&ds, "1", "names of the solutes, in the case's order")?;
    let h = sol.history.len();
    let mut times = vec![sol.now.t];
    let mut mass = sol.now.mass.clone();
    let mut cum = sol.now.cumulative.clone();
    for p in &sol.history {
        times.push(p.t);
        mass.extend_from_slice(&p.mass);
        cum.extend_from_slice(&p.cumulative);
    }
    let table = |name: &str, cols: usize, v: Vec<f64>, units: &str, long: &str| {
        let a = ndarray::Array2::from_shape_vec((h + 1, cols), v)
            .map_err(|x| hdf5::Error::from(x.to_string()))?;
        let ds = file.new_dataset_builder().with_data(&a).create(name)?;
        describe(&ds, units, long)
    };
    f64s(
        file,
        "solute_time_s",
        &times,
        "s",
        "time of the current solute point, then of the history points (newest first)",
    )?;
    table(
        "solute_mass",
        sol.now.mass.len(),
        mass,
        "g m-3",
        "solute mass per bulk volume (dissolved and precipitated) of each solute (cells, solute after solute): current point, then history points",
    )?;
    table(
        "solute_cumulative",
        crate::solute::CUMULATIVE * ns,
        cum,
        "g m-2",
        "per solute: cumulative surface inflow, bottom outflow, throughput and root uptake: current point, then history points",
    )?;
    let ds = file
        .new_dataset_builder()
        .with_data(&Array1::from_vec(sol.initial_mass.clone()))
        .create("solute_initial_mass")?;
    describe(
        &ds,
        "g m-3",
        "solute mass per bulk volume at the start of the run",
    )?;
    if !sol.osmotic_head.is_empty() {
        let ds = file
            .new_dataset_builder()
            .with_data(&Array1::from_vec(sol.osmotic_head.clone()))
            .create("solute_osmotic_head")?;
        describe(
            &ds,
            "m",
            "osmotic head of the pore water in each cell at the state (the first guess of the next step's coupling)",
        )?;
    }
    Ok(())
}

/// The solute state of a checkpoint (None when it has none).
fn read_solutes(file: &File) -> std::result::Result<Option<SoluteState>, &'static str> {
    use hdf5::types::VarLenUnicode;
    let Ok(names) = file.dataset("solute_names") else {
        return Ok(None);
    };
    let names: Vec<String> = names
        .read_raw::<VarLenUnicode>()
        .map_err(|_| "solute_names")?
        .iter()
        .map(|s| s.as_str().to_string())
        .collect();
    let times = read_f64s(file, "solute_time_s")?;
    let mass = file
        .dataset("solute_mass")
        .and_then(|d| d.read_2d::<f64>())
        .map_err(|_| "solute_mass")?;
    let cum = file
        .dataset("solute_cumulative")
        .and_then(|d| d.read_2d::<f64>())
        .map_err(|_| "solute_cumulative")?;
    let initial_mass = read_f64s(file, "solute_initial_mass")?;
    if times.is_empty()
        || mass.nrows() != times.len()
        || cum.nrows() != times.len()
        || cum.ncols() != crate::solute::CUMULATIVE * names.len()
        || initial_mass.len() != mass.ncols()
    {
        return Err("solute state");
    }
    let mut points = (0..times.len()).map(|k| crate::solute::SolutePoint {
        t: times[k],
        mass: mass.row(k).to_vec(),
        cumulative: cum.row(k).to_vec(),
    });
    let now = points.next().ok_or("solute state")?;
    let osmotic_head = match file.dataset("solute_osmotic_head") {
        Ok(d) => d.read_raw::<f64>().map_err(|_| "solute_osmotic_head")?,
        Err(_) => Vec::new(),
    };
    Ok(Some(SoluteState {
        names,
        now,
        initial_mass,
        history: points.collect(),
        osmotic_head,
    }))
}

/// What kind of deepdry file `path` is: `Some("deepdry-results")`, `Some("deepdry-checkpoint")`
/// or an error naming why it is neither.
pub fn file_kind(path: &Path) -> Result<String> {
    if !path.exists() {
        return Err(Error::input(format!("{}: no such file", path.display())));
    }
    let meta = std::fs::metadata(path).map_err(|err| Error::io(path, err))?;
    if meta.len() == 0 {
        return Err(Error::input(format!(
            "{}: the file is empty (not a deepdry results or checkpoint file)",
            path.display()
        )));
    }
    let file = File::open(path).map_err(|err| {
        if let Some(m) = crate::output::h5util::in_use_message(path, &err) {
            return Error::Io(m);
        }
        Error::input(format!(
            "{}: not a readable HDF5 file (truncated or of another format); expected a deepdry results or checkpoint file",
            path.display()
        ))
    })?;
    let root = file.as_group().map_err(e(path))?;
    match read_attr_str(&root, "kind") {
        Ok(k) if k == CHECKPOINT_KIND || k == crate::output::results::RESULTS_KIND => Ok(k),
        _ => Err(Error::input(format!(
            "{}: an HDF5 file not written by deepdry (no 'kind' attribute of a results or checkpoint file)",
            path.display()
        ))),
    }
}

/// Reads a checkpoint, refusing files that are not deepdry checkpoints of this format.
pub fn read(path: &Path) -> Result<Checkpoint> {
    let kind = file_kind(path)?;
    if kind != CHECKPOINT_KIND {
        return Err(Error::input(format!(
            "{}: a deepdry {} file, not a checkpoint",
            path.display(),
            kind.strip_prefix("deepdry-").unwrap_or(&kind)
        )));
    }
    let bad = |what: &str| {
        Error::input(format!(
            "{}: damaged checkpoint ({what} missing or unreadable); resume from the previous checkpoint in the folder",
            path.display()
        ))
    };
    let inner = || -> Result<Checkpoint> {
        let file = File::open(path).map_err(|_| bad("file"))?;
        let root = file.as_group().map_err(|_| bad("root group"))?;
        let s = |name: &str| read_attr_str(&root, name).map_err(|_| bad(name));
        // The checksum first: a damaged file is reported as damaged, whichever value the
        // damage hit. A file without one is of an older format (refused just below).
        if let Ok(stored) = read_attr_str(&root, CHECKSUM_ATTR) {
            let actual = content_checksum(&file).map_err(|_| bad("content"))?;
            if stored != actual {
                return Err(Error::input(format!(
                    "{}: damaged checkpoint: its content does not match its checksum (stored {stored}, computed {actual}); resume from the previous checkpoint in the folder",
                    path.display()
                )));
            }
        }
        let format = s("format")?;
        if format != CHECKPOINT_FORMAT {
            return Err(Error::input(format!(
                "{}: checkpoint format {format} written by deepdry {}; this deepdry ({}) reads format {CHECKPOINT_FORMAT}",
                path.display(),
                s("software_version").unwrap_or_else(|_| "?".into()),
                env!("CARGO_PKG_VERSION")
            )));
        }
        let v = |name: &str| -> Result<Vec<f64>> {
            file.dataset(name)
                .and_then(|d| d.read_1d::<f64>())
                .map(|a| a.to_vec())
                .map_err(|_| bad(name))
        };
        let one =
            |name: &str| -> Result<f64> { v(name)?.first().copied().ok_or_else(|| bad(name)) };
        let two = |name: &str| -> Result<[f64; 2]> {
            let x = v(name)?;
            if x.len() != 2 {
                return Err(bad(name));
            }
            Ok([x[0], x[1]])
        };
        let ints: Vec<u64> = file
            .dataset("counters")
            .and_then(|d| d.read_1d::<u64>())
            .map(|a| a.to_vec())
            .map_err(|_| bad("counters"))?;
        // Nine entries in files written before Jacobian evaluations were counted.
        if ints.len() != 9 && ints.len() != 10 {
            return Err(bad("counters"));
        }
        let hu = file
            .dataset("history_unknowns")
            .and_then(|d| d.read_2d::<f64>())
            .map_err(|_| bad("history_unknowns"))?;
        let hm = file
            .dataset("history_time_inflow")
            .and_then(|d| d.read_2d::<f64>())
            .map_err(|_| bad("history_time_inflow"))?;
        if hu.nrows() != hm.nrows() || hm.ncols() != 5 {
            return Err(bad("history"));
        }
        // Storages of the history points (absent in older checkpoints: recomputed).
        let hs = match file.dataset("history_storage") {
            Ok(d) => {
                let a = d.read_2d::<f64>().map_err(|_| bad("history_storage"))?;
                if a.dim() != hu.dim() {
                    return Err(bad("history_storage"));
                }
                Some(a)
            }
            Err(_) => None,
        };
        // Top-boundary inflow (absent in older checkpoints: unknown, NaN).
        let nq = two("inflow")?.len();
        let ht = file
            .dataset("history_top_inflow")
            .and_then(|d| d.read_2d::<f64>())
            .ok()
            .filter(|a| a.dim() == (hu.nrows(), nq));
        // Sink outflow (absent in checkpoints written before sinks: none, 0).
        let hk = file
            .dataset("history_sink")
            .and_then(|d| d.read_2d::<f64>())
            .ok()
            .filter(|a| a.dim() == (hu.nrows(), nq));
        // Runoff (absent in checkpoints written before the surface store: none, 0).
        let hr = file
            .dataset("history_runoff")
            .and_then(|d| d.read_2d::<f64>())
            .ok()
            .filter(|a| a.dim() == (hu.nrows(), nq));
        let history = (0..hu.nrows())
            .map(|k| crate::solve::stepper::HistoryPoint {
                t: hm[[k, 0]],
                u: hu.row(k).to_vec(),
                storage: hs.as_ref().map(|a| a.row(k).to_vec()).unwrap_or_default(),
                inflow: vec![hm[[k, 1]], hm[[k, 2]]],
                throughput: vec![hm[[k, 3]], hm[[k, 4]]],
                top_inflow: ht
                    .as_ref()
                    .map_or_else(|| vec![f64::NAN; nq], |a| a.row(k).to_vec()),
                sink: hk
                    .as_ref()
                    .map_or_else(|| vec![0.0; nq], |a| a.row(k).to_vec()),
                runoff: hr
                    .as_ref()
                    .map_or_else(|| vec![0.0; nq], |a| a.row(k).to_vec()),
            })
            .collect();
        let state = StepState {
            t: one("time_s")?,
            dt: one("dt_s")?,
            u: v("unknowns")?,
            // Absent in older checkpoints: recomputed by the stepper.
            storage: match file.dataset("storage") {
                Ok(_) => v("storage")?,
                Err(_) => Vec::new(),
            },
            // Absent in older checkpoints: no kept evaluations.
            linearization_cells: v("linearization_cells").unwrap_or_default(),
            linearization_faces: v("linearization_faces").unwrap_or_default(),
            inflow: two("inflow")?.to_vec(),
            throughput: two("throughput")?.to_vec(),
            top_inflow: v("top_inflow")
                .ok()
                .filter(|w| w.len() == nq)
                .unwrap_or_else(|| vec![f64::NAN; nq]),
            sink: v("sink")
                .ok()
                .filter(|w| w.len() == nq)
                .unwrap_or_else(|| vec![0.0; nq]),
            runoff: v("runoff")
                .ok()
                .filter(|w| w.len() == nq)
                .unwrap_or_else(|| vec![0.0; nq]),
            initial_totals: two("initial_totals")?.to_vec(),
            initial_storage: v("initial_storage")?,
            counters: Counters {
                steps: ints[0],
                rejected: ints[1],
                newton_iterations: ints[2],
                factorizations: ints[3],
                jacobians: ints.get(9).copied().unwrap_or(0),
            },
            history,
            order: ints[7] as usize,
            steps_at_order: ints[8] as usize,
            // Absent in checkpoints written before the predictive controller: no estimate.
            last_error: v("last_error_estimate")
                .ok()
                .and_then(|x| x.first().copied())
                .unwrap_or(0.0),
        };
        // Optional records (absent in older checkpoints of this format).
        let mut info = CheckpointInfo::default();
        if let Ok(b) = v("balance_error") {
            if b.len() == 4 {
                info.balance_abs = Some([b[0], b[1]]);
                info.balance_rel = Some([b[2], b[3]]);
            }
        }
        if let Ok(l) = v("results_last_times") {
            if l.len() == 2 {
                info.last_series_year = Some(l[0]).filter(|x| !x.is_nan());
                info.last_snapshot_year = Some(l[1]).filter(|x| !x.is_nan());
            }
        }
        if let Ok(p) = read_attr_str(&root, "parent_checkpoint") {
            let t = root
                .attr("parent_time_year")
                .and_then(|a| a.read_scalar::<f64>())
                .unwrap_or(f64::NAN);
            info.parent = Some((p, t));
        }
        info.run_end_year = root
            .attr("end_year")
            .and_then(|a| a.read_scalar::<f64>())
            .ok()
            .filter(|y| y.is_finite());
        if state.initial_storage.len() != state.u.len() {
            return Err(bad("initial_storage"));
        }
        if !state.storage.is_empty() && state.storage.len() != state.u.len() {
            return Err(bad("storage"));
        }
        if state.history.iter().any(|h| h.u.len() != state.u.len()) {
            return Err(bad("history"));
        }
        if state.u.iter().any(|x| !x.is_finite())
            || !state.t.is_finite()
            || state.dt.is_nan()
            || state.dt <= 0.0
        {
            return Err(bad("finite state"));
        }
        let envelope = read_envelope(&file, state.u.len(), nq).map_err(bad)?;
        Ok(Checkpoint {
            path: path.to_path_buf(),
            state,
            position: LoopPosition {
                since_series: ints[4],
                series_rows: ints[5],
                snapshots: ints[6],
            },
            case_text: s("case_text")?,
            title: s("title")?,
            software_version: s("software_version")?,
            physics_hash: s("physics_hash")?,
            column_hash: s("column_hash")?,
            results_file: s("results_file")?,
            epoch_year: root
                .attr("time_origin_year")
                .and_then(|a| a.read_scalar::<f64>())
                .ok()
                .filter(|y| y.is_finite())
                .ok_or_else(|| bad("time_origin_year"))?,
            faces: v("face_depth")?,
            created: s("created")?,
            format,
            info,
            solutes: read_solutes(&file).map_err(bad)?,
            envelope,
        })
    };
    inner()
}

impl Checkpoint {
    /// The year of the checkpoint's state.
    pub fn year(&self) -> f64 {
        self.epoch_year + self.state.t / SECONDS_PER_YEAR
    }
}

/// File name of the checkpoint at `year` in `folder`: `checkpoint-<year>yr.h5`, the year
/// written in full (`checkpoint-20000yr.h5`), with its integer part zero-padded to
/// `digits` (see [`name_digits`]) so that the checkpoints of a run in years ≥ 0 list in
/// time order, and with as many decimals as 10 significant digits need (trailing zeros
/// dropped: a year on the checkpoint grid has none).
pub fn name_at(folder: &Path, year: f64, digits: usize) -> PathBuf {
    folder.join(format!("checkpoint-{}yr.h5", year_text(year, digits)))
}

/// The digits of the integer part of the largest year of `model`'s run (its start or its
/// end, whichever is farther from year 0): the width of the years in checkpoint names.
pub fn name_digits(model: &Model) -> usize {
    let t = &model.time;
    let largest = t.year(t.start).abs().max(t.year(t.end).abs());
    largest.round().max(1.0).log10().floor().clamp(0.0, 30.0) as usize + 1
}

/// `year` as written in a checkpoint name (see [`name_at`]).
pub fn year_text(year: f64, digits: usize) -> String {
    if !year.is_finite() {
        return format!("{year}");
    }
    let a = year.abs();
    let magnitude = if a > 0.0 { a.log10().floor() } else { 0.0 };
    let decimals = (9.0 - magnitude).clamp(0.0, 15.0) as usize;
    let width = if decimals > 0 {
        digits + 1 + decimals
    } else {
        digits
    };
    let mut s = format!("{a:0width$.decimals$}");
    if s.contains('.') {
        let kept = s.trim_end_matches('0').trim_end_matches('.').len();
        s.truncate(kept);
    }
    if year < 0.0 && s.chars().any(|c| c.is_ascii_digit() && c != '0') {
        s.insert(0, '-');
    }
    s
}

/// The year in a checkpoint's file name (the names of [`name_at`] and the earlier
/// `checkpoint-1.234560000e5yr.h5`); None for other files.
pub fn year_of_name(name: &str) -> Option<f64> {
    name.strip_prefix("checkpoint-")
        .and_then(|r| r.strip_suffix("yr.h5"))
        .and_then(|m| m.parse::<f64>().ok())
        .filter(|y| y.is_finite())
}

/// Checkpoints in `folder` (named as by [`name_at`], or in the earlier form), sorted
/// oldest first by the year in their names.
pub fn list(folder: &Path) -> Vec<(f64, PathBuf)> {
    let mut out = Vec::new();
    if let Ok(rd) = std::fs::read_dir(folder) {
        for entry in rd.flatten() {
            let name = entry.file_name().to_string_lossy().to_string();
            if let Some(t) = year_of_name(&name) {
                out.push((t, entry.path()));
            }
        }
    }
    out.sort_by(|a, b| a.0.total_cmp(&b.0));
    out
}

/// Removes all but the newest `keep` checkpoints in `folder`.
pub fn prune(folder: &Path, keep: usize) {
    let all = list(folder);
    let excess = all.len().saturating_sub(keep.max(1));
    for (_, p) in all.into_iter().take(excess) {
        let _ = std::fs::remove_file(p);
    }
}

/// Removes temporary files left by checkpoint writes that were killed (`*.h5.tmp` next to
/// checkpoints). Returns how many were removed.
pub fn remove_temporaries(folder: &Path) -> usize {
    let mut n = 0;
    if let Ok(rd) = std::fs::read_dir(folder) {
        for entry in rd.flatten() {
            let name = entry.file_name().to_string_lossy().to_string();
            if (name.starts_with("checkpoint-") || name.starts_with("failed-state"))
                && name.ends_with(".h5.tmp")
                && std::fs::remove_file(entry.path()).is_ok()
            {
                n += 1;
            }
        }
    }
    n
}

fn same_file(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    }
}

/// Removes the checkpoints in `folder` later than `year` (by the times in their names),
/// except `keep`. Returns how many were removed.
pub fn remove_after(folder: &Path, year: f64, keep: &Path) -> usize {
    // Compared at the precision of the names (10 significant digits).
    let limit =
        year_of_name(&format!("checkpoint-{}yr.h5", year_text(year, 1))).unwrap_or(f64::INFINITY);
    let mut n = 0;
    for (tf, p) in list(folder) {
        if tf > limit && !same_file(&p, keep) && std::fs::remove_file(&p).is_ok() {
            n += 1;
        }
    }
    n
}

/// Removes every checkpoint in `folder` and its `failed-state.h5`, except `keep`.
/// Returns how many files were removed.
pub fn remove_all(folder: &Path, keep: Option<&Path>) -> usize {
    let mut paths: Vec<PathBuf> = list(folder).into_iter().map(|(_, p)| p).collect();
    let failed = folder.join("failed-state.h5");
    if failed.exists() {
        paths.push(failed);
    }
    let mut n = 0;
    for p in paths {
        if keep.is_some_and(|k| same_file(&p, k)) {
            continue;
        }
        if std::fs::remove_file(&p).is_ok() {
            n += 1;
        }
    }
    n
}
