//! Helpers for the restart and robustness tests: scratch folders, small case files, running
//! the binary, and a bitwise comparison of every dataset in two HDF5 files.
#![allow(dead_code)]

pub mod fit;
pub mod ode;

use hdf5::types::{FloatSize, IntSize, TypeDescriptor, VarLenUnicode};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// Serialises starting child processes against HDF5 files open in this test process.
///
/// The HDF5 library opens files without close-on-exec, so a child started while another
/// test thread has an HDF5 file open inherits that descriptor, and with it the file's
/// lock, for its whole life; a deepdry child that then opens the same file fails with
/// "unable to lock file". Every in-process HDF5 use and every spawn takes this lock.
pub fn h5_guard() -> std::sync::MutexGuard<'static, ()> {
    static LOCK: std::sync::Mutex<()> = std::sync::Mutex::new(());
    LOCK.lock().unwrap_or_else(|e| e.into_inner())
}

/// Starts `cmd` (under [`h5_guard`]).
pub fn spawn(cmd: &mut Command) -> std::process::Child {
    let _g = h5_guard();
    cmd.spawn().unwrap()
}

/// Reads a checkpoint in this process (under [`h5_guard`]).
pub fn read_checkpoint(path: &Path) -> deepdry::error::Result<deepdry::checkpoint::Checkpoint> {
    let _g = h5_guard();
    deepdry::checkpoint::read(path)
}

/// The `deepdry` binary built for these tests.
pub fn bin() -> &'static str {
    env!("CARGO_BIN_EXE_deepdry")
}

/// A scratch folder under the system temporary folder, emptied when created and removed
/// when dropped (kept when the test fails, for a look).
pub struct Scratch {
    pub path: PathBuf,
}

impl Scratch {
    pub fn new(name: &str) -> Scratch {
        let path = std::env::temp_dir().join(format!("deepdry-test-{}-{name}", std::process::id()));
        let _ = std::fs::remove_dir_all(&path);
        std::fs::create_dir_all(&path).unwrap();
        Scratch { path }
    }
    pub fn join(&self, p: &str) -> PathBuf {
        self.path.join(p)
    }
    /// Writes `text` to `name` in this folder and returns its path.
    pub fn write(&self, name: &str, text: &str) -> PathBuf {
        let p = self.path.join(name);
        std::fs::write(&p, text).unwrap();
        p
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        if !std::thread::panicking() {
            let _ = std::fs::remove_dir_all(&self.path);
        }
    }
}

/// Parameters of the small test column.
#[derive(Clone, Debug)]
pub struct Small {
    pub cells: usize,
    pub depth: f64,
    pub end_year: f64,
    pub snapshot_every: f64,
    pub checkpoint_every: f64,
    pub keep: usize,
    /// `"backward-euler"` or `"bdf"`.
    pub method: &'static str,
    /// The surface relative humidity (a TOML value: a number or a schedule table).
    pub humidity: String,
    pub extra_time: String,
    pub soil_extra: String,
}

impl Default for Small {
    fn default() -> Self {
        Small {
            cells: 30,
            depth: 10.0,
            end_year: 10.0,
            snapshot_every: 2.0,
            checkpoint_every: 1.0,
            keep: 50,
            method: "backward-euler",
            humidity: "0.25".into(),
            extra_time: String::new(),
            soil_extra: String::new(),
        }
    }
}

impl Small {
    /// The case text: sandy loam with a dry end between a water table and dry air, a
    /// sinusoidal surface temperature, graded cells.
    pub fn text(&self) -> String {
        let bdf = if self.method == "bdf" {
            "max_order = 3\n"
        } else {
            ""
        };
        format!(
            r#"title = "small test column"
[column]
depth_m = {depth}
[mesh]
cells = {cells}
[soils.sl]
van_genuchten = {{ theta_r = 0.065, theta_s = 0.41, alpha_per_m = 7.5, n = 1.89 }}
dry_end = "fayer-simmons"
saturated_conductivity_m_per_s = 1.23e-5
campbell = {{ a = 1.46, b = 1.652, c = 9.222, d = 0.274 }}
solid_heat_capacity_J_per_m3_K = 1.18e6
{soil_extra}
[[layers]]
soil = "sl"
top_m = 0.0
bottom_m = {depth}
[surface]
temperature_C = {{ mean = 22.0, amplitude = 2.0, period_year = 3.0 }}
relative_humidity = {humidity}
[bottom]
head_m = 0.0
temperature_C = 23.0
[time]
end_year = {end}
method = "{method}"
{bdf}{extra_time}
[output]
every_year = {snap}
[checkpoint]
every_year = {ck}
keep = {keep}
"#,
            depth = self.depth,
            cells = self.cells,
            soil_extra = self.soil_extra,
            humidity = self.humidity,
            end = self.end_year,
            method = self.method,
            bdf = bdf,
            extra_time = self.extra_time,
            snap = self.snapshot_every,
            ck = self.checkpoint_every,
            keep = self.keep,
        )
    }
}

/// A path as a command-line argument.
pub fn arg(p: &Path) -> &str {
    p.to_str().unwrap()
}

/// The binary with `args`, stdin closed, stdout and stderr captured.
fn command(args: &[&str]) -> Command {
    let mut cmd = Command::new(bin());
    cmd.args(args)
        .stdin(std::process::Stdio::null())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped());
    cmd
}

/// The arguments of `deepdry run CASE --out OUT --quiet EXTRA…`.
fn run_args<'a>(case: &'a Path, out: &'a Path, extra: &[&'a str]) -> Vec<&'a str> {
    let mut args = vec!["run", arg(case), "--out", arg(out), "--quiet"];
    args.extend_from_slice(extra);
    args
}

/// Runs the binary with `args` and returns its output.
pub fn deepdry(args: &[&str]) -> Output {
    spawn(&mut command(args)).wait_with_output().unwrap()
}

/// `deepdry run CASE --out OUT --quiet EXTRA…`, waited for.
pub fn run_deepdry(case: &Path, out: &Path, extra: &[&str]) -> Output {
    deepdry(&run_args(case, out, extra))
}

/// `deepdry run CASE --out OUT --quiet EXTRA…`, started and not waited for (its standard
/// output discarded).
pub fn spawn_run(case: &Path, out: &Path, extra: &[&str]) -> std::process::Child {
    spawn(command(&run_args(case, out, extra)).stdout(std::process::Stdio::null()))
}

/// Sends `sig` (as `kill` spells it: `-TERM`, `-STOP`, …) to `child`.
pub fn signal(child: &std::process::Child, sig: &str) {
    let st = Command::new("kill")
        .args([sig, &child.id().to_string()])
        .status()
        .unwrap();
    assert!(st.success(), "kill {sig}");
}

pub fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).to_string()
}

pub fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).to_string()
}

/// `deepdry run CASE --out OUT --quiet EXTRA…`; panics unless it exits 0.
pub fn run_ok(case: &Path, out: &Path, extra: &[&str]) -> Output {
    let o = run_deepdry(case, out, extra);
    assert_eq!(
        o.status.code(),
        Some(0),
        "deepdry {:?}: {}",
        run_args(case, out, extra),
        stderr(&o)
    );
    o
}

/// Asserts the process failed with `code` and exactly one line on stderr that starts with
/// `deepdry: error: ` and contains every fragment; returns the line.
pub fn assert_one_line_error(o: &Output, code: i32, fragments: &[&str]) -> String {
    let e = stderr(o);
    assert_eq!(o.status.code(), Some(code), "exit code; stderr: {e}");
    assert_eq!(e.lines().count(), 1, "not one line: {e}");
    assert!(e.starts_with("deepdry: error: "), "{e}");
    assert!(!e.contains("panicked"), "{e}");
    for f in fragments {
        assert!(e.contains(f), "message lacks `{f}`: {e}");
    }
    e.trim_end().to_string()
}

/// Checkpoints `checkpoint-<t>yr.h5` in `dir`, oldest first.
pub fn checkpoints(dir: &Path) -> Vec<(f64, PathBuf)> {
    deepdry::checkpoint::list(dir)
}

pub fn newest_checkpoint(dir: &Path) -> Option<PathBuf> {
    checkpoints(dir).pop().map(|(_, p)| p)
}

/// The checkpoint at year `t` in `dir` (panics when absent).
pub fn checkpoint_at(dir: &Path, t: f64) -> PathBuf {
    checkpoints(dir)
        .into_iter()
        .find(|(s, _)| (s - t).abs() <= 1e-9 * t.abs().max(1.0))
        .unwrap_or_else(|| panic!("no checkpoint at year {t} in {}", dir.display()))
        .1
}

/// The content of one dataset: its shape and its values (floats as bit patterns, so NaN
/// and −0 compare exactly).
#[derive(Debug, Clone, PartialEq)]
pub enum Data {
    Float(Vec<usize>, Vec<u64>),
    Int(Vec<usize>, Vec<i64>),
    UInt(Vec<usize>, Vec<u64>),
    Str(Vec<usize>, Vec<String>),
}

impl Data {
    pub fn len(&self) -> usize {
        match self {
            Data::Float(_, v) | Data::UInt(_, v) => v.len(),
            Data::Int(_, v) => v.len(),
            Data::Str(_, v) => v.len(),
        }
    }
    pub fn floats(&self) -> Vec<f64> {
        match self {
            Data::Float(_, v) => v.iter().map(|b| f64::from_bits(*b)).collect(),
            _ => panic!("not a float dataset"),
        }
    }
}

fn collect(g: &hdf5::Group, prefix: &str, out: &mut BTreeMap<String, Data>) -> hdf5::Result<()> {
    for name in g.member_names()? {
        let full = format!("{prefix}{name}");
        if let Ok(sub) = g.group(&name) {
            collect(&sub, &format!("{full}/"), out)?;
            continue;
        }
        let ds = g.dataset(&name)?;
        let shape = ds.shape();
        let data = match ds.dtype()?.to_descriptor()? {
            TypeDescriptor::Float(FloatSize::U8) => Data::Float(
                shape,
                ds.read_raw::<f64>()?.iter().map(|x| x.to_bits()).collect(),
            ),
            TypeDescriptor::Integer(IntSize::U4) | TypeDescriptor::Integer(IntSize::U8) => {
                Data::Int(shape, ds.read_raw::<i64>()?)
            }
            TypeDescriptor::Unsigned(_) => Data::UInt(shape, ds.read_raw::<u64>()?),
            TypeDescriptor::VarLenUnicode => Data::Str(
                shape,
                ds.read_raw::<VarLenUnicode>()?
                    .iter()
                    .map(|s| s.as_str().to_string())
                    .collect(),
            ),
            other => panic!("{full}: unexpected type {other:?}"),
        };
        out.insert(full, data);
    }
    Ok(())
}

/// Every dataset in the HDF5 file at `path`, by full name, read completely.
pub fn datasets(path: &Path) -> hdf5::Result<BTreeMap<String, Data>> {
    let _g = h5_guard();
    hdf5::silence_errors(true);
    let f = hdf5::File::open(path)?;
    let mut out = BTreeMap::new();
    collect(&f, "", &mut out)?;
    Ok(out)
}

/// A root string attribute of an HDF5 file.
pub fn root_attr(path: &Path, name: &str) -> Option<String> {
    let _g = h5_guard();
    hdf5::silence_errors(true);
    let f = hdf5::File::open(path).ok()?;
    let v: VarLenUnicode = f.attr(name).ok()?.read_scalar().ok()?;
    Some(v.as_str().to_string())
}

/// A scalar f64 attribute of the root group (None when missing or not a number).
pub fn root_attr_f64(path: &Path, name: &str) -> Option<f64> {
    let _g = h5_guard();
    hdf5::silence_errors(true);
    let f = hdf5::File::open(path).ok()?;
    f.attr(name).ok()?.read_scalar::<f64>().ok()
}

/// Asserts that the two files hold the same datasets with bitwise-equal contents; returns
/// the number of datasets and of values compared.
pub fn assert_same_datasets(a: &Path, b: &Path) -> (usize, usize) {
    let (sets, values, added) = compare_datasets(a, b);
    assert!(
        added.is_empty(),
        "dataset names differ: {} vs {}: {added:?} only in the second",
        a.display(),
        b.display()
    );
    (sets, values)
}

/// Asserts that every dataset of the file `old` (a baseline of an earlier build) is in
/// `new` with bitwise-equal contents; returns the number of datasets and of values
/// compared, and the names of the datasets only `new` has (added since).
pub fn assert_baseline_datasets(old: &Path, new: &Path) -> (usize, usize, Vec<String>) {
    compare_datasets(old, new)
}

fn compare_datasets(a: &Path, b: &Path) -> (usize, usize, Vec<String>) {
    let da = datasets(a).unwrap_or_else(|e| panic!("{}: {e}", a.display()));
    let db = datasets(b).unwrap_or_else(|e| panic!("{}: {e}", b.display()));
    let missing: Vec<&String> = da.keys().filter(|k| !db.contains_key(*k)).collect();
    assert!(
        missing.is_empty(),
        "dataset names differ: {} vs {}: {missing:?} missing in the second",
        a.display(),
        b.display()
    );
    let added: Vec<String> = db
        .keys()
        .filter(|k| !da.contains_key(*k))
        .cloned()
        .collect();
    let mut values = 0;
    for (name, x) in &da {
        let y = &db[name];
        if x != y {
            let detail = match (x, y) {
                (Data::Float(sx, vx), Data::Float(sy, vy)) if sx == sy => {
                    let k = vx.iter().zip(vy).position(|(p, q)| p != q).unwrap();
                    format!(
                        "first difference at flat index {k}: {:e} vs {:e}",
                        f64::from_bits(vx[k]),
                        f64::from_bits(vy[k])
                    )
                }
                _ => format!("{x:?} vs {y:?}"),
            };
            panic!(
                "{name} differs between {} and {}: {detail}",
                a.display(),
                b.display()
            );
        }
        values += x.len();
    }
    (da.len(), values, added)
}
