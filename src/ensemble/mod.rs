//! Ensembles: many runs of one case with parameters drawn by a plan, on the cores of one
//! machine or as the tasks of a batch scheduler's job array (`--shard K/N`), merged into
//! one file afterwards. deepdry schedules nothing across machines itself.
//!
//! - [`plan`]: the plan file and the sampling (member i's parameters are a pure function
//!   of the plan, its seed and i).
//! - [`run`]: the members of a shard on worker threads (each member single-threaded, in
//!   memory); each member writes `members/member-NNNNNN.txt` atomically; members already
//!   written are skipped, so a killed ensemble resumes; a failed member records its error.
//! - [`collect`]: all member files into `ensemble.h5` (member × time series, parameters,
//!   status, quantiles over the members that ran), identical whatever the workers or
//!   shards were.
//! - [`status`]: what is done, failed and missing.
//! - [`figures`]: fan charts of the kept series and parameter–outcome scatter plots.

pub mod figures;
pub mod plan;

use crate::error::{Error, Result};
use crate::output::diagnostics::SeriesRecord;
use crate::output::results::PROFILE_CELL;
use crate::solve::linear::SolverKind;
use plan::Plan;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};

/// Quantiles stored by [`collect`] (probabilities).
pub const QUANTILES: [f64; 5] = [0.05, 0.25, 0.5, 0.75, 0.95];

/// The file of member `i`.
pub fn member_file(dir: &Path, i: usize) -> PathBuf {
    dir.join("members").join(format!("member-{i:06}.txt"))
}

/// What a member's run left.
#[derive(Debug, Clone, PartialEq)]
pub enum Member {
    /// Kept series at the plan's times, one row per kept series; cell depths and the
    /// kept profiles (one row per profile and time, profile-major).
    Done {
        parameters: Vec<f64>,
        series: Vec<Vec<f64>>,
        depth: Vec<f64>,
        profiles: Vec<Vec<f64>>,
    },
    Failed {
        parameters: Vec<f64>,
        error: String,
    },
    Missing,
}

/// Shortest text that reads back to the same f64.
fn num(x: f64) -> String {
    format!("{x:?}")
}

/// A series at `times` [year] from the run's records, linearly interpolated in time
/// (held constant before the first and after the last record).
fn sample(records: &[SeriesRecord], field: usize, times: &[f64]) -> Vec<f64> {
    let t: Vec<f64> = records.iter().map(|r| r.time_year).collect();
    let v: Vec<f64> = records.iter().map(|r| r.values()[field]).collect();
    times
        .iter()
        .map(|&x| crate::fit::compare::interpolate(&t, &v, x))
        .collect()
}

/// Runs member `i`: its kept series, or the error.
pub fn run_member(plan: &Plan, case_text: &str, i: usize) -> Member {
    let parameters = plan.member(i);
    type Kept = (Vec<Vec<f64>>, Vec<f64>, Vec<Vec<f64>>);
    let result = (|| -> Result<Kept> {
        let ovs = plan.overrides(i)?;
        let base = plan.case.parent().unwrap_or(Path::new("."));
        let model = crate::case::parse_with_overrides(
            case_text,
            &plan.case.display().to_string(),
            base,
            &ovs,
        )?;
        let (rec, _) = crate::sim::run_in_memory(&model, SolverKind::BlockThomas)?;
        let series = plan
            .series
            .iter()
            .map(|name| {
                let field = SeriesRecord::FIELDS
                    .iter()
                    .position(|f| f.0 == name)
                    .unwrap_or(0);
                sample(&rec.series, field, &plan.times_year)
            })
            .collect();
        let times: Vec<f64> = rec.snapshots.iter().map(|s| s.time_year).collect();
        let mut profiles = Vec::new();
        for name in &plan.profiles {
            let k = PROFILE_CELL.iter().position(|f| f.0 == name).unwrap_or(0);
            for &t in &plan.profile_times_year {
                let j = crate::fit::compare::profile_at(&times, t)
                    .ok_or_else(|| Error::Numerical(format!("no profile written at {t} yr")))?;
                profiles.push(rec.snapshots[j].profile.cells()[k].to_vec());
            }
        }
        Ok((series, model.mesh.centers.clone(), profiles))
    })();
    match result {
        Ok((series, depth, profiles)) => Member::Done {
            parameters,
            series,
            depth,
            profiles,
        },
        Err(e) => Member::Failed {
            parameters,
            error: e.to_string(),
        },
    }
}

fn write_member(dir: &Path, i: usize, m: &Member) -> Result<()> {
    let mut s = String::new();
    match m {
        Member::Done {
            parameters,
            series,
            depth,
            profiles,
        } => {
            s.push_str("status,done\n");
            s.push_str(&format!(
                "parameters,{}\n",
                parameters
                    .iter()
                    .map(|x| num(*x))
                    .collect::<Vec<_>>()
                    .join(",")
            ));
            let line = |tag: &str, row: &[f64]| {
                format!(
                    "{tag},{}\n",
                    row.iter().map(|x| num(*x)).collect::<Vec<_>>().join(",")
                )
            };
            for row in series {
                s.push_str(&line("series", row));
            }
            if !profiles.is_empty() {
                s.push_str(&line("depth", depth));
            }
            for row in profiles {
                s.push_str(&line("profile", row));
            }
        }
        Member::Failed { parameters, error } => {
            s.push_str("status,failed\n");
            s.push_str(&format!(
                "parameters,{}\n",
                parameters
                    .iter()
                    .map(|x| num(*x))
                    .collect::<Vec<_>>()
                    .join(",")
            ));
            s.push_str(&format!("error,{}\n", crate::case::tree::one_line(error)));
        }
        Member::Missing => return Ok(()),
    }
    let path = member_file(dir, i);
    let tmp = path.with_extension("tmp");
    std::fs::write(&tmp, s).map_err(|e| Error::io(&tmp, e))?;
    std::fs::rename(&tmp, &path).map_err(|e| Error::io(&path, e))
}

/// Reads member `i`'s file (Missing when absent or incomplete).
pub fn read_member(dir: &Path, i: usize, plan: &Plan) -> Member {
    let Ok(text) = std::fs::read_to_string(member_file(dir, i)) else {
        return Member::Missing;
    };
    let nums = |line: &str| -> Option<Vec<f64>> {
        line.split(',')
            .skip(1)
            .map(|x| x.parse::<f64>().ok())
            .collect()
    };
    let lines: Vec<&str> = text.lines().collect();
    match lines.first().copied() {
        Some("status,done") => {
            let tagged = |tag: &str| -> Option<Vec<Vec<f64>>> {
                lines
                    .iter()
                    .filter(|l| l.split(',').next() == Some(tag))
                    .map(|l| nums(l))
                    .collect()
            };
            let parameters = lines.get(1).and_then(|l| nums(l));
            let series = tagged("series");
            let profiles = tagged("profile");
            let depth = tagged("depth").map(|d| d.into_iter().next().unwrap_or_default());
            let n_profiles = plan.profiles.len() * plan.profile_times_year.len();
            match (parameters, series, profiles, depth) {
                (Some(p), Some(s), Some(pr), Some(d))
                    if s.len() == plan.series.len()
                        && s.iter().all(|r| r.len() == plan.times_year.len())
                        && pr.len() == n_profiles
                        && pr.iter().all(|r| r.len() == d.len()) =>
                {
                    Member::Done {
                        parameters: p,
                        series: s,
                        depth: d,
                        profiles: pr,
                    }
                }
                _ => Member::Missing,
            }
        }
        Some("status,failed") => Member::Failed {
            parameters: lines.get(1).and_then(|l| nums(l)).unwrap_or_default(),
            error: lines
                .get(2)
                .and_then(|l| l.strip_prefix("error,"))
                .unwrap_or("")
                .to_string(),
        },
        _ => Member::Missing,
    }
}

/// Parses `K/N` (0 ≤ K < N).
pub fn parse_shard(s: &str) -> Result<(usize, usize)> {
    let bad = || {
        Error::input(format!(
            "--shard {s}: expected K/N with 0 ≤ K < N (e.g. $SLURM_ARRAY_TASK_ID/$SLURM_ARRAY_TASK_COUNT)"
        ))
    };
    let (k, n) = s.split_once('/').ok_or_else(bad)?;
    let (k, n): (usize, usize) = (
        k.trim().parse().map_err(|_| bad())?,
        n.trim().parse().map_err(|_| bad())?,
    );
    if n == 0 || k >= n {
        return Err(bad());
    }
    Ok((k, n))
}

/// Prepares `dir` for `plan`: a copy of the plan (refusing a folder of another plan).
fn prepare(plan: &Plan, dir: &Path) -> Result<()> {
    std::fs::create_dir_all(dir.join("members")).map_err(|e| Error::io(dir, e))?;
    let copy = dir.join("plan.toml");
    match std::fs::read_to_string(&copy) {
        Ok(t) if t == plan.text => Ok(()),
        Ok(_) => Err(Error::input(format!(
            "{}: the folder holds the members of another plan; use a new --out folder",
            dir.display()
        ))),
        Err(_) => {
            // Tasks of a job array start together: each writes its own temporary file
            // and renames it over the copy (atomic; the contents are the same), then
            // checks what is there.
            let tmp = dir.join(format!("plan.toml.{}.tmp", std::process::id()));
            std::fs::write(&tmp, &plan.text).map_err(|e| Error::io(&tmp, e))?;
            std::fs::rename(&tmp, &copy).map_err(|e| Error::io(&copy, e))?;
            match std::fs::read_to_string(&copy) {
                Ok(t) if t == plan.text => Ok(()),
                _ => Err(Error::input(format!(
                    "{}: the folder holds the members of another plan; use a new --out folder",
                    dir.display()
                ))),
            }
        }
    }
}

/// Refuses a plan whose keys the case reader does not know (a member whose values the
/// case refuses is a failed member, not a bad plan).
fn check_keys(plan: &Plan, case_text: &str) -> Result<()> {
    let base = plan.case.parent().unwrap_or(Path::new("."));
    for (p, v) in plan.parameters.iter().zip(plan.member(0)) {
        let ov = crate::case::Override::set(&p.key, &format!("{v:?}"))?;
        if let Err(e) = crate::case::parse_with_overrides(
            case_text,
            &plan.case.display().to_string(),
            base,
            &[ov],
        ) {
            let msg = e.to_string();
            if msg.starts_with(&format!("--set {}=", p.key)) && msg.contains("unknown key") {
                return Err(Error::input(format!("{}: {msg}", plan.path.display())));
            }
        }
    }
    Ok(())
}

/// Counts of a run.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct RunCounts {
    pub ran: usize,
    pub skipped: usize,
    pub failed: usize,
}

/// Runs the members `i` with `i mod n == k` not yet written, on `workers` threads.
pub fn run(
    plan: &Plan,
    dir: &Path,
    workers: usize,
    shard: (usize, usize),
    progress: bool,
) -> Result<RunCounts> {
    prepare(plan, dir)?;
    let case_text = std::fs::read_to_string(&plan.case).map_err(|e| {
        Error::input(format!(
            "{}: case = {}: cannot read: {e}",
            plan.path.display(),
            plan.case.display()
        ))
    })?;
    check_keys(plan, &case_text)?;
    let (k, n) = shard;
    let all: Vec<usize> = (0..plan.member_count()).filter(|i| i % n == k).collect();
    let todo: Vec<usize> = all
        .iter()
        .copied()
        .filter(|&i| read_member(dir, i, plan) == Member::Missing)
        .collect();
    let skipped = all.len() - todo.len();
    let bar = indicatif::ProgressBar::with_draw_target(
        Some(todo.len() as u64),
        indicatif::ProgressDrawTarget::stderr(),
    );
    if !progress || !std::io::IsTerminal::is_terminal(&std::io::stderr()) {
        bar.set_draw_target(indicatif::ProgressDrawTarget::hidden());
    }
    let next = AtomicUsize::new(0);
    let failed = AtomicUsize::new(0);
    let first_error: std::sync::Mutex<Option<Error>> = std::sync::Mutex::new(None);
    std::thread::scope(|s| {
        for _ in 0..workers.max(1).min(todo.len().max(1)) {
            s.spawn(|| loop {
                let j = next.fetch_add(1, Ordering::Relaxed);
                let Some(&i) = todo.get(j) else { break };
                let m = run_member(plan, &case_text, i);
                if matches!(m, Member::Failed { .. }) {
                    failed.fetch_add(1, Ordering::Relaxed);
                }
                if let Err(e) = write_member(dir, i, &m) {
                    let mut f = first_error.lock().unwrap_or_else(|e| e.into_inner());
                    f.get_or_insert(e);
                    break;
                }
                bar.inc(1);
            });
        }
    });
    bar.finish_and_clear();
    if let Some(e) = first_error.into_inner().unwrap_or_else(|e| e.into_inner()) {
        return Err(e);
    }
    Ok(RunCounts {
        ran: todo.len(),
        skipped,
        failed: failed.into_inner(),
    })
}

/// Done, failed and missing members of the plan copied into `dir`.
pub fn status(dir: &Path) -> Result<(Plan, Vec<Member>)> {
    let plan = plan::read(&dir.join("plan.toml")).map_err(|e| {
        Error::input(format!(
            "{}: not an ensemble folder (no readable plan.toml: {e})",
            dir.display()
        ))
    })?;
    let members = (0..plan.member_count())
        .map(|i| read_member(dir, i, &plan))
        .collect();
    Ok((plan, members))
}

/// The quantile q of sorted values (linear between order statistics; "type 7", common
/// practice).
pub fn quantile(sorted: &[f64], q: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let h = q * (sorted.len() - 1) as f64;
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(sorted.len() - 1);
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

/// The [`QUANTILES`] of the finite values among `values`.
pub fn quantiles_of(values: impl Iterator<Item = f64>) -> [f64; QUANTILES.len()] {
    let mut col: Vec<f64> = values.filter(|v| v.is_finite()).collect();
    col.sort_by(|a, b| a.total_cmp(b));
    QUANTILES.map(|p| quantile(&col, p))
}

/// Merges the members in `dir` into `dir/ensemble.h5`; returns the file and the counts
/// (done, failed, missing).
pub fn collect(dir: &Path) -> Result<(PathBuf, [usize; 3])> {
    let (plan, members) = status(dir)?;
    let m = members.len();
    let (np, nt, ns) = (
        plan.parameters.len(),
        plan.times_year.len(),
        plan.series.len(),
    );
    let mut params = ndarray::Array2::<f64>::from_elem((m, np), f64::NAN);
    let mut state = ndarray::Array1::<i32>::zeros(m);
    let mut series = vec![ndarray::Array2::<f64>::from_elem((m, nt), f64::NAN); ns];
    let mut counts = [0usize; 3];
    // Kept profiles: member × time × depth, on the mesh of the first member that ran.
    let (npr, npt) = (plan.profiles.len(), plan.profile_times_year.len());
    let depth: Vec<f64> = members
        .iter()
        .find_map(|mem| match mem {
            Member::Done { depth, .. } if npr > 0 => Some(depth.clone()),
            _ => None,
        })
        .unwrap_or_default();
    let nz = depth.len();
    let mut prof = vec![ndarray::Array3::<f64>::from_elem((m, npt, nz), f64::NAN); npr];
    for (i, mem) in members.iter().enumerate() {
        // Parameters from the plan itself (also for members that never ran).
        for (k, v) in plan.member(i).into_iter().enumerate() {
            params[[i, k]] = v;
        }
        match mem {
            Member::Done {
                series: s,
                depth: d,
                profiles,
                ..
            } => {
                counts[0] += 1;
                for (arr, row) in series.iter_mut().zip(s) {
                    for (t, v) in row.iter().enumerate() {
                        arr[[i, t]] = *v;
                    }
                }
                if npr > 0 && d.len() != nz {
                    return Err(Error::input(format!(
                        "{}: member {i} has {} cells, the first member {nz}: profiles of members on different meshes cannot be merged",
                        dir.display(),
                        d.len()
                    )));
                }
                for (k, row) in profiles.iter().enumerate() {
                    for (z, v) in row.iter().enumerate() {
                        prof[k / npt][[i, k % npt, z]] = *v;
                    }
                }
            }
            Member::Failed { .. } => {
                counts[1] += 1;
                state[i] = 1;
            }
            Member::Missing => {
                counts[2] += 1;
                state[i] = 2;
            }
        }
    }
    let path = dir.join("ensemble.h5");
    let tmp = dir.join("ensemble.h5.tmp");
    let e = |err: hdf5::Error| Error::io(&tmp, err);
    {
        let f = hdf5::File::create(&tmp).map_err(e)?;
        let attr = |obj: &hdf5::Location, name: &str, v: &str| -> Result<()> {
            crate::output::h5util::attr_str(obj, name, v).map_err(e)
        };
        attr(&f, "kind", "deepdry-ensemble")?;
        attr(&f, "plan", &plan.text)?;
        attr(
            &f,
            "caution",
            "Model estimates, not a substitute for site investigation.",
        )?;
        use crate::output::h5util::{attach_scale, set_scale};
        // Dimension scales in every group that uses them (netCDF readers resolve a
        // dimension within its group): member, time, probability.
        let members_axis: Vec<i32> = (0..m as i32).collect();
        let time_scale = |g: &hdf5::Group| -> Result<hdf5::Dataset> {
            let t = g
                .new_dataset_builder()
                .with_data(&plan.times_year)
                .create("time")
                .map_err(e)?;
            attr(&t, "units", "year")?;
            attr(
                &t,
                "long_name",
                "times at which the kept series are sampled",
            )?;
            set_scale(&t, "time").map_err(e)?;
            Ok(t)
        };
        let member_scale = |g: &hdf5::Group| -> Result<hdf5::Dataset> {
            let d = g
                .new_dataset_builder()
                .with_data(&members_axis)
                .create("member")
                .map_err(e)?;
            attr(&d, "long_name", "ensemble member index (from 0)")?;
            set_scale(&d, "member").map_err(e)?;
            Ok(d)
        };
        time_scale(&f)?;
        let root_member = member_scale(&f)?;
        let ds = f
            .new_dataset_builder()
            .with_data(&params)
            .create("parameters")
            .map_err(e)?;
        let keys: Vec<&str> = plan.parameters.iter().map(|p| p.key.as_str()).collect();
        attr(&ds, "keys", &keys.join("\n"))?;
        attr(
            &ds,
            "long_name",
            "member × parameter values, in the order of the keys attribute",
        )?;
        attach_scale(&ds, &root_member, 0).map_err(e)?;
        let pidx: Vec<i32> = (0..np as i32).collect();
        let ps = f
            .new_dataset_builder()
            .with_data(&pidx)
            .create("parameter")
            .map_err(e)?;
        attr(&ps, "keys", &keys.join("\n"))?;
        attr(
            &ps,
            "long_name",
            "parameter index (from 0), keys in the keys attribute",
        )?;
        set_scale(&ps, "parameter").map_err(e)?;
        attach_scale(&ds, &ps, 1).map_err(e)?;
        let ds = f
            .new_dataset_builder()
            .with_data(&state)
            .create("status")
            .map_err(e)?;
        attr(
            &ds,
            "long_name",
            "member status: 0 done, 1 failed, 2 missing",
        )?;
        attach_scale(&ds, &root_member, 0).map_err(e)?;
        let g = f.create_group("series").map_err(e)?;
        let (g_time, g_member) = (time_scale(&g)?, member_scale(&g)?);
        let q = f.create_group("quantiles").map_err(e)?;
        let q_time = time_scale(&q)?;
        let qa = q
            .new_dataset_builder()
            .with_data(&QUANTILES[..])
            .create("probability")
            .map_err(e)?;
        attr(&qa, "units", "1")?;
        set_scale(&qa, "probability").map_err(e)?;
        for (name, arr) in plan.series.iter().zip(&series) {
            let (unit, long) = SeriesRecord::FIELDS
                .iter()
                .find(|f| f.0 == name)
                .map(|f| (f.1, f.2))
                .unwrap_or(("1", ""));
            let ds = g
                .new_dataset_builder()
                .with_data(arr)
                .create(name.as_str())
                .map_err(e)?;
            attr(&ds, "units", unit)?;
            attr(&ds, "long_name", &format!("{long} (member × time)"))?;
            attach_scale(&ds, &g_member, 0).map_err(e)?;
            attach_scale(&ds, &g_time, 1).map_err(e)?;
            let mut qs = ndarray::Array2::<f64>::from_elem((QUANTILES.len(), nt), f64::NAN);
            for t in 0..nt {
                for (k, v) in quantiles_of(arr.column(t).iter().copied())
                    .iter()
                    .enumerate()
                {
                    qs[[k, t]] = *v;
                }
            }
            let ds = q
                .new_dataset_builder()
                .with_data(&qs)
                .create(name.as_str())
                .map_err(e)?;
            attr(&ds, "units", unit)?;
            attr(
                &ds,
                "long_name",
                &format!("{long}: quantiles over the members that ran (probability × time)"),
            )?;
            attach_scale(&ds, &qa, 0).map_err(e)?;
            attach_scale(&ds, &q_time, 1).map_err(e)?;
        }
        if npr > 0 {
            let pg = f.create_group("profiles").map_err(e)?;
            let pm = member_scale(&pg)?;
            let pt = pg
                .new_dataset_builder()
                .with_data(&plan.profile_times_year)
                .create("time")
                .map_err(e)?;
            attr(&pt, "units", "year")?;
            attr(&pt, "long_name", "times of the kept profiles")?;
            set_scale(&pt, "time").map_err(e)?;
            let pz = pg
                .new_dataset_builder()
                .with_data(&depth)
                .create("depth")
                .map_err(e)?;
            attr(&pz, "units", "m")?;
            attr(&pz, "positive", "down")?;
            attr(&pz, "long_name", "depth of the cell centres")?;
            set_scale(&pz, "depth").map_err(e)?;
            for (name, arr) in plan.profiles.iter().zip(&prof) {
                let (unit, long) = PROFILE_CELL
                    .iter()
                    .find(|f| f.0 == name)
                    .map_or(("1", ""), |f| (f.1, f.2));
                let ds = pg
                    .new_dataset_builder()
                    .with_data(arr)
                    .create(name.as_str())
                    .map_err(e)?;
                attr(&ds, "units", unit)?;
                attr(&ds, "long_name", &format!("{long} (member × time × depth)"))?;
                attach_scale(&ds, &pm, 0).map_err(e)?;
                attach_scale(&ds, &pt, 1).map_err(e)?;
                attach_scale(&ds, &pz, 2).map_err(e)?;
            }
        }
    }
    std::fs::rename(&tmp, &path).map_err(|err| Error::io(&path, err))?;
    Ok((path, counts))
}
