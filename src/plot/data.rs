//! Reading a results file for plotting, with one-line errors for anything that is not a
//! readable deepdry results file.

use crate::error::{Error, Result};
use crate::output::h5util::read_attr_str;
use crate::output::results::RESULTS_KIND;
use hdf5::File;
use std::path::{Path, PathBuf};

/// Snapshot profiles, [snapshots][cells] or [snapshots][faces].
#[derive(Debug, Clone, Default)]
pub struct Profiles {
    /// Snapshot times [year].
    pub time: Vec<f64>,
    /// [degC]
    pub temperature: Vec<Vec<f64>>,
    /// [m]
    pub head: Vec<Vec<f64>>,
    /// [1]
    pub liquid_content: Vec<Vec<f64>>,
    /// [1]
    pub relative_humidity: Vec<Vec<f64>>,
    /// Face water fluxes [kg m-2 s-1], positive downward.
    pub liquid_flux_isothermal: Vec<Vec<f64>>,
    pub liquid_flux_thermal: Vec<Vec<f64>>,
    pub vapor_flux_isothermal: Vec<Vec<f64>>,
    pub vapor_flux_thermal: Vec<Vec<f64>>,
}

/// The time series, one value per record.
#[derive(Debug, Clone, Default)]
pub struct Series {
    /// [year]
    pub time: Vec<f64>,
    /// [kg m-2 s-1], positive downward.
    pub surface_water_flux: Vec<f64>,
    pub bottom_water_flux: Vec<f64>,
    /// [kg m-2]
    pub water_storage: Vec<f64>,
    /// [1]
    pub water_balance_relative_error: Vec<f64>,
    pub energy_balance_relative_error: Vec<f64>,
    /// [m]
    pub drying_front_depth: Vec<f64>,
    /// Root water uptake and potential transpiration [kg m-2 s-1], and their cumulative
    /// totals [kg m-2] (empty without vegetation).
    pub root_water_uptake: Vec<f64>,
    pub potential_transpiration: Vec<f64>,
    pub root_water_uptake_cumulative: Vec<f64>,
    pub potential_transpiration_cumulative: Vec<f64>,
    /// Ponding depth [m] and cumulative runoff [kg m-2] (empty without a ponding surface).
    pub ponding_depth: Vec<f64>,
    pub runoff_cumulative: Vec<f64>,
}

/// What the plots need from a results file.
#[derive(Debug, Clone, Default)]
pub struct Results {
    pub path: PathBuf,
    pub title: String,
    /// Cell-centre and face depths [m].
    pub depth: Vec<f64>,
    pub face_depth: Vec<f64>,
    pub profiles: Profiles,
    pub series: Series,
    /// The case's `output.log_origin_year` [year] (after its `--set` overrides), when it
    /// has one: the default origin of a log time axis.
    pub log_origin_year: Option<f64>,
    /// The case's `output.times_year` [year] (after its overrides): the snapshot times
    /// the user asked for, drawn first by default.
    pub asked_times: Vec<f64>,
    /// The solutes' profiles (empty when the run has none).
    pub solutes: Vec<SoluteProfiles>,
    /// Root water uptake [kg m-3 s-1], [snapshots][cells] (None without vegetation).
    pub root_water_uptake: Option<Vec<Vec<f64>>>,
    /// The parent's results file and the branch year, when the series of a branch were
    /// joined to its parent's ([`join_parent`]).
    pub parent: Option<(PathBuf, f64)>,
}

/// One solute's profiles, [snapshots][cells].
#[derive(Debug, Clone, Default)]
pub struct SoluteProfiles {
    pub name: String,
    /// Concentration in the liquid [g m-3].
    pub concentration: Vec<Vec<f64>>,
    /// Accumulation age [year] (None without deposition).
    pub accumulation_age: Option<Vec<Vec<f64>>>,
}

/// The value of `output.KEY` in the case text a results file keeps, with the last
/// `--set output.KEY=...` among `overrides` (one `KEY=VALUE` per line) applied; `None`
/// when neither has it or the text cannot be read (old or hand-made files).
pub fn case_output_key(case_text: &str, overrides: &str, key: &str) -> Option<toml::Value> {
    let path = format!("output.{key}");
    let mut value = case_text
        .parse::<toml::Table>()
        .ok()
        .and_then(|t| t.get("output")?.get(key).cloned());
    for line in overrides.lines() {
        if let Some((k, v)) = line.split_once('=') {
            if k.trim() == path {
                value = format!("v = {}", v.trim())
                    .parse::<toml::Table>()
                    .ok()
                    .and_then(|t| t.get("v").cloned());
            }
        } else if line.trim() == format!("{path} (removed)") {
            value = None;
        }
    }
    value
}

fn number(v: &toml::Value) -> Option<f64> {
    match v {
        toml::Value::Float(x) if x.is_finite() => Some(*x),
        toml::Value::Integer(i) => Some(*i as f64),
        _ => None,
    }
}

fn not_results(path: &Path, why: impl std::fmt::Display) -> Error {
    Error::input(format!(
        "{}: not a deepdry results file ({why})",
        path.display()
    ))
}

fn read_vec(file: &File, path: &Path, name: &str, len: Option<usize>) -> Result<Vec<f64>> {
    let ds = file
        .dataset(name)
        .map_err(|_| not_results(path, format!("no dataset /{name}")))?;
    let v = ds
        .read_1d::<f64>()
        .map_err(|e| not_results(path, format!("/{name}: {e}")))?
        .to_vec();
    if let Some(n) = len {
        if v.len() != n {
            return Err(not_results(
                path,
                format!("/{name} has {} values, expected {n}", v.len()),
            ));
        }
    }
    Ok(v)
}

fn read_rows(
    file: &File,
    path: &Path,
    name: &str,
    rows: usize,
    cols: usize,
) -> Result<Vec<Vec<f64>>> {
    let ds = file
        .dataset(name)
        .map_err(|_| not_results(path, format!("no dataset /{name}")))?;
    let a = ds
        .read_2d::<f64>()
        .map_err(|e| not_results(path, format!("/{name}: {e}")))?;
    if a.nrows() != rows || a.ncols() != cols {
        return Err(not_results(
            path,
            format!(
                "/{name} is {}×{}, expected {rows}×{cols}",
                a.nrows(),
                a.ncols()
            ),
        ));
    }
    Ok(a.outer_iter().map(|r| r.to_vec()).collect())
}

/// Whether `path` starts with the HDF5 signature (at 0, 512, 1024, ... bytes).
fn has_hdf5_signature(path: &Path) -> bool {
    use std::io::{Read, Seek, SeekFrom};
    const SIG: [u8; 8] = [0x89, b'H', b'D', b'F', b'\r', b'\n', 0x1a, b'\n'];
    let Ok(mut f) = std::fs::File::open(path) else {
        return false;
    };
    let len = f.metadata().map(|m| m.len()).unwrap_or(0);
    let mut at = 0u64;
    while at + 8 <= len {
        let mut buf = [0u8; 8];
        if f.seek(SeekFrom::Start(at)).is_err() || f.read_exact(&mut buf).is_err() {
            return false;
        }
        if buf == SIG {
            return true;
        }
        at = if at == 0 { 512 } else { at * 2 };
    }
    false
}

/// Reads `path`. Missing file, a file that is not HDF5, or an HDF5 file without the
/// results layout give an [`Error::Input`] naming the file and what is wrong.
pub fn read(path: &Path) -> Result<Results> {
    if !path.exists() {
        return Err(Error::input(format!("{}: no such file", path.display())));
    }
    if path.is_dir() {
        return Err(Error::input(format!(
            "{}: is a folder, not a results file",
            path.display()
        )));
    }
    let file = File::open(path).map_err(|e| {
        if has_hdf5_signature(path) {
            let e = e.to_string();
            if e.contains("lock") {
                Error::io(
                    path,
                    "cannot open: the file is locked by another program (a run still \
                     writing it?); wait for it, or set HDF5_USE_FILE_LOCKING=FALSE to read it anyway",
                )
            } else {
                Error::io(path, format!("cannot open the results file: {e}"))
            }
        } else {
            not_results(path, "not an HDF5 file")
        }
    })?;
    let kind =
        read_attr_str(&file, "kind").map_err(|_| not_results(path, "no `kind` attribute"))?;
    if kind != RESULTS_KIND {
        return Err(not_results(path, format!("kind is `{kind}`")));
    }
    let title = read_attr_str(&file, "title").unwrap_or_default();
    let case_text = read_attr_str(&file, "case_text").unwrap_or_default();
    let overrides = read_attr_str(&file, "overrides").unwrap_or_default();
    let log_origin_year =
        case_output_key(&case_text, &overrides, "log_origin_year").and_then(|v| number(&v));
    let asked_times = match case_output_key(&case_text, &overrides, "times_year") {
        Some(toml::Value::Array(a)) => a.iter().filter_map(number).collect(),
        _ => Vec::new(),
    };

    let face_depth = read_vec(&file, path, "mesh/face_depth", None)?;
    if face_depth.len() < 2 {
        return Err(not_results(path, "the mesh has no cells"));
    }
    let cells = face_depth.len() - 1;
    let depth = read_vec(&file, path, "mesh/depth", Some(cells))?;

    let time = read_vec(&file, path, "profiles/time", None)?;
    let s = time.len();
    let cell = |name: &str| read_rows(&file, path, &format!("profiles/{name}"), s, cells);
    let face = |name: &str| read_rows(&file, path, &format!("profiles/{name}"), s, cells + 1);
    let profiles = Profiles {
        temperature: cell("temperature")?,
        head: cell("head")?,
        liquid_content: cell("liquid_content")?,
        relative_humidity: cell("relative_humidity")?,
        liquid_flux_isothermal: face("liquid_flux_isothermal")?,
        liquid_flux_thermal: face("liquid_flux_thermal")?,
        vapor_flux_isothermal: face("vapor_flux_isothermal")?,
        vapor_flux_thermal: face("vapor_flux_thermal")?,
        time,
    };

    let stime = read_vec(&file, path, "series/time", None)?;
    let r = Some(stime.len());
    let ser = |name: &str| read_vec(&file, path, &format!("series/{name}"), r);
    // A series that only some runs have (empty when absent).
    let optional_ser = |name: &str| -> Result<Vec<f64>> {
        if file.dataset(&format!("series/{name}")).is_ok() {
            ser(name)
        } else {
            Ok(Vec::new())
        }
    };
    let series = Series {
        surface_water_flux: ser("surface_water_flux")?,
        bottom_water_flux: ser("bottom_water_flux")?,
        water_storage: ser("water_storage")?,
        water_balance_relative_error: ser("water_balance_relative_error")?,
        energy_balance_relative_error: ser("energy_balance_relative_error")?,
        drying_front_depth: ser("drying_front_depth")?,
        root_water_uptake: optional_ser("root_water_uptake")?,
        potential_transpiration: optional_ser("potential_transpiration")?,
        root_water_uptake_cumulative: optional_ser("root_water_uptake_cumulative")?,
        potential_transpiration_cumulative: optional_ser("potential_transpiration_cumulative")?,
        ponding_depth: optional_ser("ponding_depth")?,
        runoff_cumulative: optional_ser("runoff_cumulative")?,
        time: stime,
    };
    let root_water_uptake = if file.dataset("profiles/root_water_uptake").is_ok() {
        Some(cell("root_water_uptake")?)
    } else {
        None
    };
    // Solutes: every `profiles/concentration_<name>`.
    let mut names: Vec<String> = file
        .group("profiles")
        .and_then(|g| g.member_names())
        .unwrap_or_default()
        .into_iter()
        .filter_map(|n| n.strip_prefix("concentration_").map(str::to_string))
        .collect();
    names.sort();
    let mut solutes = Vec::new();
    for name in names {
        let age_name = format!("accumulation_age_{name}");
        let accumulation_age = if file.dataset(&format!("profiles/{age_name}")).is_ok() {
            Some(cell(&age_name)?)
        } else {
            None
        };
        solutes.push(SoluteProfiles {
            concentration: cell(&format!("concentration_{name}"))?,
            accumulation_age,
            name,
        });
    }
    Ok(Results {
        path: path.to_path_buf(),
        title,
        depth,
        face_depth,
        profiles,
        series,
        solutes,
        root_water_uptake,
        log_origin_year,
        asked_times,
        parent: None,
    })
}

/// The results file of the run the branch with results `path` started from, and the
/// year it branched: through the branch's `parent_checkpoint` attribute (as given to
/// `--start-from`: tried as it is, then against the branch's folder and its ancestors) to
/// that checkpoint's
/// `results_file_absolute` (then its `results_file`, and `results.h5` beside it). When the
/// parent checkpoint is gone (pruned), `results.h5` in its folder. One-line errors name
/// what was tried.
pub fn parent_of(path: &Path) -> Result<(PathBuf, f64)> {
    let file = File::open(path).map_err(|e| Error::io(path, format!("cannot open: {e}")))?;
    let Ok(given) = read_attr_str(&file, "parent_checkpoint") else {
        return Err(Error::input(format!(
            "{}: not the results of a branch (no parent_checkpoint attribute); --with-parent joins a branch's series to its parent's",
            path.display()
        )));
    };
    let year = file
        .attr("parent_time_year")
        .and_then(|a| a.read_scalar::<f64>())
        .ok()
        .or_else(|| {
            read_attr_str(&file, "parent_time_year")
                .ok()
                .and_then(|s| s.trim().parse().ok())
        })
        .filter(|y: &f64| y.is_finite())
        .ok_or_else(|| {
            Error::input(format!(
                "{}: parent_time_year is missing or not a year",
                path.display()
            ))
        })?;
    drop(file);
    let given = PathBuf::from(given);
    let branch_dir = path.parent().unwrap_or(Path::new("."));
    let mut checkpoints = vec![given.clone()];
    if given.is_relative() {
        // Relative to the folder the branch was run from: one of the branch folder's
        // ancestors, when that folder was given below it.
        let branch_dir = crate::checkpoint::absolute(branch_dir);
        for base in branch_dir.ancestors() {
            let c = base.join(&given);
            if c.exists() {
                checkpoints.push(c);
                break;
            }
        }
        checkpoints.push(branch_dir.join(&given));
    }
    let mut tried: Vec<PathBuf> = Vec::new();
    let is_results = |p: &Path| {
        File::open(p)
            .ok()
            .and_then(|f| read_attr_str(&f, "kind").ok())
            .is_some_and(|k| k == RESULTS_KIND)
    };
    let me = crate::checkpoint::absolute(path);
    for ck in &checkpoints {
        let ck_dir = ck.parent().unwrap_or(Path::new("."));
        let mut candidates = Vec::new();
        if let Ok(f) = File::open(ck) {
            for key in ["results_file_absolute", "results_file"] {
                if let Ok(r) = read_attr_str(&f, key) {
                    candidates.push(PathBuf::from(&r));
                    if let Some(name) = Path::new(&r).file_name() {
                        candidates.push(ck_dir.join(name));
                    }
                }
            }
        }
        candidates.push(ck_dir.join("results.h5"));
        for c in candidates {
            if c.exists() && is_results(&c) && crate::checkpoint::absolute(&c) != me {
                return Ok((c, year));
            }
            if !tried.contains(&c) {
                tried.push(c);
            }
        }
    }
    Err(Error::input(format!(
        "{}: the parent's results file was not found (parent checkpoint {}; tried {}); plot from the folder the branch was run in, or without --with-parent",
        path.display(),
        given.display(),
        tried
            .iter()
            .map(|p| p.display().to_string())
            .collect::<Vec<_>>()
            .join(", ")
    )))
}

/// Puts the parent's series records before `year` (the branch's start) in front of the
/// branch's series in `res`; the profiles stay the branch's. Refused when the parent has
/// another mesh (it is not this branch's parent).
pub fn join_parent(res: &mut Results, parent: &Results, year: f64) -> Result<()> {
    if parent.face_depth != res.face_depth {
        return Err(Error::input(format!(
            "{}: its mesh differs from the branch {}: not the branch's parent",
            parent.path.display(),
            res.path.display()
        )));
    }
    let tol = 1e-9 * year.abs().max(1.0);
    let n = parent
        .series
        .time
        .iter()
        .take_while(|t| **t < year - tol)
        .count();
    let (b, p) = (&mut res.series, &parent.series);
    let nb = b.time.len();
    // A series one of the two runs lacks (the vegetation's) is NaN over its part: a gap.
    let join = |mine: &mut Vec<f64>, theirs: &[f64]| {
        if mine.is_empty() && theirs.is_empty() {
            return;
        }
        let mut v = if theirs.len() >= n {
            theirs[..n].to_vec()
        } else {
            vec![f64::NAN; n]
        };
        if mine.len() == nb {
            v.append(mine);
        } else {
            v.resize(n + nb, f64::NAN);
        }
        *mine = v;
    };
    join(&mut b.surface_water_flux, &p.surface_water_flux);
    join(&mut b.bottom_water_flux, &p.bottom_water_flux);
    join(&mut b.water_storage, &p.water_storage);
    join(
        &mut b.water_balance_relative_error,
        &p.water_balance_relative_error,
    );
    join(
        &mut b.energy_balance_relative_error,
        &p.energy_balance_relative_error,
    );
    join(&mut b.drying_front_depth, &p.drying_front_depth);
    join(&mut b.root_water_uptake, &p.root_water_uptake);
    join(&mut b.potential_transpiration, &p.potential_transpiration);
    join(
        &mut b.root_water_uptake_cumulative,
        &p.root_water_uptake_cumulative,
    );
    join(
        &mut b.potential_transpiration_cumulative,
        &p.potential_transpiration_cumulative,
    );
    join(&mut b.ponding_depth, &p.ponding_depth);
    join(&mut b.runoff_cumulative, &p.runoff_cumulative);
    join(&mut b.time, &p.time);
    res.parent = Some((parent.path.clone(), year));
    Ok(())
}
