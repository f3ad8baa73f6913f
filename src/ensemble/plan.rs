//! Plan files and sampling: member i's parameters are a pure function of (plan, seed, i).
//!
//! ```toml
//! [ensemble]
//! case = "../glacial-to-arid.toml"   # relative to the plan file
//! members = 64                       # ignored by sampling = "grid" (the grid's size)
//! seed = 20261204
//! sampling = "latin-hypercube"       # or "random", "grid", "table"
//! series = ["surface_water_flux", "drying_front_depth"]  # kept per member
//! times_year = [0.0, 1000.0, 5000.0] # where kept series are sampled
//!
//! [[ensemble.parameters]]
//! key = "soils.sandy_loam.van_genuchten.n"   # any key `--set` accepts
//! distribution = "uniform"           # uniform | log-uniform | normal | truncated-normal | values
//! min = 1.5                          # uniform, log-uniform, truncated-normal
//! max = 2.3
//! # mean = …, sd = …                 # normal, truncated-normal
//! # values = [1.6, 1.9, 2.2]        # values (and every parameter of a grid)
//! # column = "n"                     # column (every parameter of sampling = "table",
//! #                                  # with table = "members.csv" in [ensemble])
//! ```

use crate::case::tree::{Source, Value};
use crate::case::Override;
use crate::error::{Error, Result};
use crate::output::diagnostics::SeriesRecord;
use crate::output::results::PROFILE_CELL;
use std::path::{Path, PathBuf};

/// How a parameter's values are drawn.
#[derive(Debug, Clone, PartialEq)]
pub enum Distribution {
    Uniform {
        min: f64,
        max: f64,
    },
    LogUniform {
        min: f64,
        max: f64,
    },
    Normal {
        mean: f64,
        sd: f64,
    },
    TruncatedNormal {
        mean: f64,
        sd: f64,
        min: f64,
        max: f64,
    },
    Values(Vec<f64>),
    /// Member i takes row i of this column of the plan's table.
    Column(Vec<f64>),
}

/// How members are placed in the parameter space.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Sampling {
    /// Independent uniform draws per member and parameter.
    Random,
    /// Latin hypercube (McKay, Beckman & Conover 1979): each parameter's range cut into
    /// `members` strata of equal probability, each stratum used once.
    LatinHypercube,
    /// Every combination of the parameters' `values` (full factorial).
    Grid,
    /// One member per row of a CSV table (`table = "…"`), parameters from its columns.
    Table,
}

#[derive(Debug, Clone, PartialEq)]
pub struct PlanParameter {
    pub key: String,
    pub distribution: Distribution,
}

/// A plan file, read and checked.
#[derive(Debug, Clone)]
pub struct Plan {
    pub path: PathBuf,
    pub text: String,
    pub case: PathBuf,
    pub members: usize,
    pub seed: u64,
    pub sampling: Sampling,
    pub series: Vec<String>,
    pub times_year: Vec<f64>,
    /// Kept profiles (names as in the results file's /profiles) at `profile_times_year`.
    pub profiles: Vec<String>,
    pub profile_times_year: Vec<f64>,
    pub parameters: Vec<PlanParameter>,
    /// Latin hypercube: per parameter, the stratum of each member (a permutation of
    /// 0..members drawn from the seed once, when the plan is read).
    strata: Vec<Vec<usize>>,
}

/// SplitMix64 (Steele, Lea & Flood 2014): a tiny generator whose output is a fixed
/// function of its seed on every platform.
fn splitmix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// A uniform number in (0, 1) from the key (seed, a, b, c).
fn uniform(seed: u64, a: u64, b: u64, c: u64) -> f64 {
    let h = splitmix(splitmix(splitmix(splitmix(seed) ^ a) ^ b) ^ c);
    ((h >> 11) as f64 + 0.5) / (1u64 << 53) as f64
}

/// The standard normal CDF, Φ(x) = erfc(−x/√2)/2.
fn phi(x: f64) -> f64 {
    0.5 * crate::verify::reference::erfc(-x / std::f64::consts::SQRT_2)
}

/// Φ⁻¹(p) for 0 < p < 1 by bisection on Φ (60 halvings of [−40, 40]: below 1e-16).
fn phi_inv(p: f64) -> f64 {
    let (mut lo, mut hi) = (-40.0f64, 40.0f64);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if phi(mid) < p {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi - lo < 1e-15 * mid.abs().max(1.0) {
            break;
        }
    }
    0.5 * (lo + hi)
}

impl Distribution {
    /// The value at probability u in (0, 1).
    pub fn quantile(&self, u: f64) -> f64 {
        match self {
            Distribution::Uniform { min, max } => min + u * (max - min),
            Distribution::LogUniform { min, max } => (min.ln() + u * (max.ln() - min.ln())).exp(),
            Distribution::Normal { mean, sd } => mean + sd * phi_inv(u),
            Distribution::TruncatedNormal { mean, sd, min, max } => {
                let (a, b) = (phi((min - mean) / sd), phi((max - mean) / sd));
                (mean + sd * phi_inv(a + u * (b - a))).clamp(*min, *max)
            }
            Distribution::Values(v) | Distribution::Column(v) => {
                let k = ((u * v.len() as f64) as usize).min(v.len() - 1);
                v[k]
            }
        }
    }
}

impl Plan {
    /// Number of members (the grid's size for a grid).
    pub fn member_count(&self) -> usize {
        match self.sampling {
            Sampling::Grid => self
                .parameters
                .iter()
                .map(|p| match &p.distribution {
                    Distribution::Values(v) => v.len(),
                    _ => 1,
                })
                .product(),
            Sampling::Table => self
                .parameters
                .iter()
                .map(|p| match &p.distribution {
                    Distribution::Column(v) => v.len(),
                    _ => 0,
                })
                .min()
                .unwrap_or(0),
            _ => self.members,
        }
    }

    /// The parameter values of member `i`: a pure function of (plan, seed, i).
    pub fn member(&self, i: usize) -> Vec<f64> {
        let m = self.member_count();
        match self.sampling {
            Sampling::Random => self
                .parameters
                .iter()
                .enumerate()
                .map(|(k, p)| {
                    p.distribution
                        .quantile(uniform(self.seed, i as u64, k as u64, 0))
                })
                .collect(),
            Sampling::LatinHypercube => self
                .parameters
                .iter()
                .enumerate()
                .map(|(k, p)| {
                    let stratum = self.strata[k][i];
                    let v = uniform(self.seed, i as u64, k as u64, 1);
                    p.distribution.quantile((stratum as f64 + v) / m as f64)
                })
                .collect(),
            Sampling::Table => self
                .parameters
                .iter()
                .map(|p| match &p.distribution {
                    Distribution::Column(v) => v[i],
                    d => d.quantile(0.5),
                })
                .collect(),
            Sampling::Grid => {
                let mut rest = i;
                self.parameters
                    .iter()
                    .map(|p| match &p.distribution {
                        Distribution::Values(v) => {
                            let x = v[rest % v.len()];
                            rest /= v.len();
                            x
                        }
                        d => d.quantile(0.5),
                    })
                    .collect()
            }
        }
    }

    /// The overrides of member `i`: its parameters, and the profile times as the run's
    /// output times when profiles are kept (series are kept from the run's records).
    pub fn overrides(&self, i: usize) -> Result<Vec<Override>> {
        let mut ovs: Vec<Override> = self
            .parameters
            .iter()
            .zip(self.member(i))
            .map(|(p, v)| Override::set(&p.key, &format!("{v:?}")))
            .collect::<Result<_>>()?;
        if !self.profiles.is_empty() {
            let t: Vec<String> = self
                .profile_times_year
                .iter()
                .map(|x| format!("{x:?}"))
                .collect();
            ovs.push(Override::set(
                "output.times_year",
                &format!("[{}]", t.join(", ")),
            )?);
        }
        Ok(ovs)
    }
}

/// The strata of parameter `k` for members 0..m: a permutation of 0..m drawn by
/// Fisher–Yates from (seed, k).
fn lhs_strata(seed: u64, k: u64, m: usize) -> Vec<usize> {
    let mut perm: Vec<usize> = (0..m).collect();
    for j in (1..m).rev() {
        let u = uniform(seed, k, j as u64, 2);
        let r = ((u * (j + 1) as f64) as usize).min(j);
        perm.swap(j, r);
    }
    perm
}

const PLAN_KEYS: &[&str] = &["ensemble"];

const ENSEMBLE_KEYS: &[&str] = &[
    "case",
    "table",
    "members",
    "seed",
    "sampling",
    "series",
    "times_year",
    "profiles",
    "profile_times_year",
    "parameters",
];
const PARAM_KEYS: &[&str] = &[
    "key",
    "distribution",
    "min",
    "max",
    "mean",
    "sd",
    "values",
    "column",
];

/// Reads and checks a plan file.
pub fn read(path: &Path) -> Result<Plan> {
    let text = std::fs::read_to_string(path).map_err(|e| {
        Error::input(format!(
            "{}: cannot read the plan file: {e}",
            path.display()
        ))
    })?;
    let base = path.parent().unwrap_or(Path::new("."));
    let origin = path.display().to_string();
    let src = Source {
        origin: &origin,
        text: &text,
        base_dir: base,
        overrides: &[],
    };
    let node = src.parse()?;
    let root = Value::root(&src, &node).table(PLAN_KEYS)?;
    let e = root
        .req("ensemble", "the [ensemble] section")?
        .table(ENSEMBLE_KEYS)?;
    let case = src.resolve(e.req("case", "the case file")?.str()?);
    let sampling = match e.get("sampling") {
        Some(v) => match v.choice(&["latin-hypercube", "random", "grid", "table"])? {
            "random" => Sampling::Random,
            "grid" => Sampling::Grid,
            "table" => Sampling::Table,
            _ => Sampling::LatinHypercube,
        },
        None => Sampling::LatinHypercube,
    };
    let members = match e.get("members") {
        Some(v) => {
            let n = v.usize()?;
            if !(1..=1_000_000).contains(&n) {
                return Err(v.err("must lie in 1 … 1 000 000"));
            }
            n
        }
        None if matches!(sampling, Sampling::Grid | Sampling::Table) => 0,
        None => return Err(e.err("members: missing key (the number of members)")),
    };
    let seed = match e.get("seed") {
        Some(v) => v.usize()? as u64,
        None => 1,
    };
    let series = match e.get("series") {
        Some(v) => {
            let mut out = Vec::new();
            for item in v.array()? {
                let s = item.str()?;
                if !SeriesRecord::FIELDS.iter().any(|f| f.0 == s) {
                    let names: Vec<&str> = SeriesRecord::FIELDS.iter().map(|f| f.0).collect();
                    return Err(item.err(format!("unknown series; allowed: {}", names.join(", "))));
                }
                out.push(s.to_string());
            }
            out
        }
        None => vec!["surface_water_flux".into(), "drying_front_depth".into()],
    };
    let times_year = {
        let v = e.req(
            "times_year",
            "the times [year] at which kept series are sampled",
        )?;
        let mut out = Vec::new();
        for item in v.array()? {
            out.push(item.f64()?);
        }
        if out.is_empty() || out.windows(2).any(|w| w[1] <= w[0]) {
            return Err(v.err("must be a non-empty list of increasing times"));
        }
        out
    };
    let profiles = match e.get("profiles") {
        Some(v) => {
            let mut out = Vec::new();
            for item in v.array()? {
                let s = item.str()?;
                if !PROFILE_CELL.iter().any(|f| f.0 == s) {
                    let names: Vec<&str> = PROFILE_CELL.iter().map(|f| f.0).collect();
                    return Err(item.err(format!("unknown profile; allowed: {}", names.join(", "))));
                }
                out.push(s.to_string());
            }
            out
        }
        None => Vec::new(),
    };
    let profile_times_year = match e.get("profile_times_year") {
        Some(v) => {
            let mut out = Vec::new();
            for item in v.array()? {
                out.push(item.f64()?);
            }
            if out.is_empty() || out.windows(2).any(|w| w[1] <= w[0]) {
                return Err(v.err("must be a non-empty list of increasing times"));
            }
            out
        }
        None if !profiles.is_empty() => {
            return Err(e.err("profiles need profile_times_year = [...] (the times to keep)"))
        }
        None => Vec::new(),
    };
    // The table of a "table" sampling: a header of column names, one member a row.
    let table: Option<(PathBuf, Vec<String>, Vec<Vec<f64>>)> = match e.get("table") {
        Some(v) => {
            let tp = src.resolve(v.str()?);
            Some(read_table(&tp)?)
        }
        None if sampling == Sampling::Table => {
            return Err(e.err("sampling = \"table\" needs table = \"file.csv\""))
        }
        None => None,
    };
    let list = e
        .req("parameters", "[[ensemble.parameters]] tables")?
        .array()?;
    if list.is_empty() {
        return Err(e.err("parameters: at least one [[ensemble.parameters]] table is needed"));
    }
    let mut parameters = Vec::new();
    for item in list {
        let t = item.table(PARAM_KEYS)?;
        let key = t.req("key", "a case key as `--set` takes it")?;
        let key_text = key.str()?.to_string();
        Override::set(&key_text, "0.0").map_err(|err| key.err(err))?;
        let dv = t.req("distribution", "how values are drawn")?;
        let num = |k: &str| -> Result<f64> { t.req(k, "a number")?.f64() };
        let distribution = match dv.choice(&[
            "uniform",
            "log-uniform",
            "normal",
            "truncated-normal",
            "values",
            "column",
        ])? {
            "column" => {
                let cv = t.req("column", "the column of the plan's table")?;
                let name = cv.str()?;
                let (tp, header, rows) = table.as_ref().ok_or_else(|| {
                    t.err("distribution = \"column\" needs table = \"file.csv\" in [ensemble]")
                })?;
                let k = header.iter().position(|h| h == name).ok_or_else(|| {
                    cv.err(format!(
                        "no column `{name}` in {}; its columns: {}",
                        tp.display(),
                        header.join(", ")
                    ))
                })?;
                Distribution::Column(rows.iter().map(|r| r[k]).collect())
            }
            "uniform" | "log-uniform" => {
                let (min, max) = (num("min")?, num("max")?);
                if min >= max {
                    return Err(t.err(format!("min {min} must be below max {max}")));
                }
                if dv.str()? == "log-uniform" {
                    if min <= 0.0 {
                        return Err(t.err(format!("log-uniform needs min > 0 (min {min})")));
                    }
                    Distribution::LogUniform { min, max }
                } else {
                    Distribution::Uniform { min, max }
                }
            }
            "normal" | "truncated-normal" => {
                let (mean, sd) = (num("mean")?, num("sd")?);
                if sd <= 0.0 {
                    return Err(t.err(format!("sd = {sd}: must be > 0")));
                }
                if dv.str()? == "normal" {
                    Distribution::Normal { mean, sd }
                } else {
                    let (min, max) = (num("min")?, num("max")?);
                    if min >= max {
                        return Err(t.err(format!("min {min} must be below max {max}")));
                    }
                    Distribution::TruncatedNormal { mean, sd, min, max }
                }
            }
            _ => {
                let v = t.req("values", "the list of values")?;
                let mut vals = Vec::new();
                for x in v.array()? {
                    vals.push(x.f64()?);
                }
                if vals.is_empty() {
                    return Err(v.err("must not be empty"));
                }
                Distribution::Values(vals)
            }
        };
        if sampling == Sampling::Table && !matches!(distribution, Distribution::Column(_)) {
            return Err(
                t.err("sampling = \"table\" needs distribution = \"column\" for every parameter")
            );
        }
        if sampling == Sampling::Grid && !matches!(distribution, Distribution::Values(_)) {
            return Err(
                t.err("sampling = \"grid\" needs distribution = \"values\" for every parameter")
            );
        }
        parameters.push(PlanParameter {
            key: key_text,
            distribution,
        });
    }
    let plan = Plan {
        path: path.to_path_buf(),
        text: text.clone(),
        case,
        members,
        seed,
        sampling,
        series,
        times_year,
        profiles,
        profile_times_year,
        parameters,
        strata: Vec::new(),
    };
    if plan.member_count() == 0 || plan.member_count() > 1_000_000 {
        return Err(e.err(format!(
            "{} members: allowed 1 … 1 000 000",
            plan.member_count()
        )));
    }
    let mut plan = plan;
    if plan.sampling == Sampling::LatinHypercube {
        let m = plan.member_count();
        plan.strata = (0..plan.parameters.len())
            .map(|k| lhs_strata(plan.seed, k as u64, m))
            .collect();
    }
    Ok(plan)
}

/// Reads a plan's CSV table: a header of column names, then rows of numbers (lines
/// starting with `#` are comments). Errors name the file and line.
fn read_table(path: &Path) -> Result<(PathBuf, Vec<String>, Vec<Vec<f64>>)> {
    let p = path.display();
    let meta = std::fs::metadata(path)
        .map_err(|e| Error::input(format!("{p}: cannot read the table: {e}")))?;
    if !meta.is_file() || meta.len() > 64 * 1024 * 1024 {
        return Err(Error::input(format!(
            "{p}: not a regular file of at most 64 MiB"
        )));
    }
    let text = std::fs::read_to_string(path)
        .map_err(|e| Error::input(format!("{p}: cannot read the table: {e}")))?;
    let mut header: Option<Vec<String>> = None;
    let mut rows = Vec::new();
    for (k, raw) in text.lines().enumerate() {
        let l = raw.trim();
        if l.is_empty() || l.starts_with('#') {
            continue;
        }
        let cells: Vec<&str> = l.split(',').map(str::trim).collect();
        match &header {
            None => header = Some(cells.iter().map(|c| c.to_string()).collect()),
            Some(h) => {
                if cells.len() != h.len() {
                    return Err(Error::input(format!(
                        "{p}:{}: {} cells; the header has {}",
                        k + 1,
                        cells.len(),
                        h.len()
                    )));
                }
                let mut row = Vec::with_capacity(cells.len());
                for c in cells {
                    match c.parse::<f64>() {
                        Ok(v) if v.is_finite() => row.push(v),
                        _ => {
                            return Err(Error::input(format!(
                                "{p}:{}: `{}`: must be a finite number",
                                k + 1,
                                crate::case::tree::one_line(c)
                            )))
                        }
                    }
                }
                rows.push(row);
            }
        }
    }
    let header = header.ok_or_else(|| Error::input(format!("{p}: empty table")))?;
    if rows.is_empty() {
        return Err(Error::input(format!("{p}: no rows after the header")));
    }
    Ok((path.to_path_buf(), header, rows))
}
