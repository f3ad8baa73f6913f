//! `deepdry fit FIT.toml`: the parameters of a case that best explain an observation
//! file, by weighted least squares ([`super::lm`]).
//!
//! ```toml
//! case = "quickstart.toml"          # relative to the fit file
//! observations = "borehole.csv"     # relative to the fit file
//! max_iterations = 30               # optional (default 30)
//! rtol = 1e-6                       # optional: time.rtol of the model runs (default 1e-6)
//!
//! [[parameters]]
//! key = "soils.sandy_loam.van_genuchten.n"   # any key `--set` accepts
//! initial = 1.5
//! min = 1.1
//! max = 4.0
//! log = false                       # optional: fit ln(value) (min must be > 0)
//! ```
//!
//! Each evaluation runs the case in memory with the parameters as overrides and the
//! observation times as its output times (`output.times_year`); the residuals are the
//! weighted residuals of [`super::compare`]. The runs use the local-error tolerance
//! `rtol` (default 1e-6) instead of the case's: at the case default (1e-3) the profiles
//! carry time-discretisation errors of ~1e-4 that change irregularly with the
//! parameters (the step sequence changes), which made χ² jump by ~1 between nearby
//! parameter values and stopped a two-parameter fit 3.7 standard errors from the truth;
//! at 1e-7 the same fit ends 0.3 standard errors from it. The finite-difference runs of an iteration
//! run in parallel on the machine's cores, one single-threaded run each.

use super::compare::match_observations;
use super::lm::{minimize_from, LmEvent, LmOptions, LmResult, ParamSpec, Residuals};
use super::observations::Observations;
use crate::case::tree::{Source, Value};
use crate::case::Override;
use crate::error::{Error, Result};
use crate::model::Model;
use crate::plot::data::{Profiles, Results};
use crate::sim::observers::Recorder;
use crate::solve::linear::SolverKind;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// One fitted parameter.
#[derive(Debug, Clone, PartialEq)]
pub struct FitParameter {
    pub key: String,
    pub spec: ParamSpec,
}

/// A fit file.
#[derive(Debug, Clone)]
pub struct FitFile {
    pub path: PathBuf,
    pub case: PathBuf,
    pub observations: PathBuf,
    pub parameters: Vec<FitParameter>,
    pub max_iterations: usize,
    /// Local-error tolerance of the model runs (`time.rtol`).
    pub rtol: f64,
}

const FIT_KEYS: &[&str] = &[
    "case",
    "observations",
    "max_iterations",
    "rtol",
    "parameters",
];
const PARAM_KEYS: &[&str] = &["key", "initial", "min", "max", "log"];

/// Reads and checks a fit file (one-line errors with file:line:column).
pub fn read_fit_file(path: &Path) -> Result<FitFile> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| Error::input(format!("{}: cannot read the fit file: {e}", path.display())))?;
    let base = path.parent().unwrap_or(Path::new("."));
    let origin = path.display().to_string();
    let src = Source {
        origin: &origin,
        text: &text,
        base_dir: base,
        overrides: &[],
    };
    let node = src.parse()?;
    let root = Value::root(&src, &node).table(FIT_KEYS)?;
    let case = src.resolve(root.req("case", "the case file to fit")?.str()?);
    let observations = src.resolve(
        root.req("observations", "the observation file (CSV)")?
            .str()?,
    );
    let max_iterations = match root.get("max_iterations") {
        Some(v) => {
            let n = v.usize()?;
            if n == 0 {
                return Err(v.err("must be ≥ 1"));
            }
            n
        }
        None => 30,
    };
    let rtol = match root.get("rtol") {
        Some(v) => {
            let x = v.f64()?;
            if !(x > 0.0 && x < 1.0) {
                return Err(v.err("must lie in (0, 1)"));
            }
            x
        }
        None => 1e-6,
    };
    let list = root
        .req("parameters", "[[parameters]] tables, one per fitted key")?
        .array()?;
    if list.is_empty() {
        return Err(root.err("parameters: at least one [[parameters]] table is needed"));
    }
    let mut parameters = Vec::new();
    for item in list {
        let t = item.table(PARAM_KEYS)?;
        let key = t.req("key", "a case key as `--set` takes it")?;
        let key_text = key.str()?.to_string();
        Override::set(&key_text, "0.0").map_err(|e| key.err(e))?;
        let initial = t.req("initial", "the starting value")?.f64()?;
        let min = t.req("min", "the lower bound")?.f64()?;
        let max = t.req("max", "the upper bound")?.f64()?;
        let log = t.bool_or("log", false)?;
        if min >= max || !(min..=max).contains(&initial) {
            return Err(t.err(format!(
                "need min < max and min ≤ initial ≤ max (min {min}, initial {initial}, max {max})"
            )));
        }
        if log && min <= 0.0 {
            return Err(t.err(format!("log = true needs min > 0 (min {min})")));
        }
        if parameters.iter().any(|p: &FitParameter| p.key == key_text) {
            return Err(key.err("the same key is fitted twice"));
        }
        parameters.push(FitParameter {
            key: key_text,
            spec: ParamSpec {
                initial,
                min,
                max,
                log,
            },
        });
    }
    Ok(FitFile {
        path: path.to_path_buf(),
        case,
        observations,
        parameters,
        max_iterations,
        rtol,
    })
}

/// A value as TOML text (floats always with a point or an exponent).
fn toml_number(x: f64) -> String {
    format!("{x:?}")
}

/// What every model run of a fit sets besides the parameters: the fit's local-error
/// tolerance and the observation times as output times.
fn run_overrides(rtol: f64, obs: &Observations) -> Result<Vec<Override>> {
    let times: Vec<String> = obs.times().iter().map(|t| toml_number(*t)).collect();
    Ok(vec![
        Override::set("time.rtol", &toml_number(rtol))?,
        Override::set("output.times_year", &format!("[{}]", times.join(", ")))?,
    ])
}

/// The results of an in-memory run in the form `compare` reads.
pub fn results_of(model: &Model, rec: &Recorder) -> Results {
    let mut p = Profiles::default();
    for s in &rec.snapshots {
        p.time.push(s.time_year);
        p.temperature.push(s.profile.temperature_c.clone());
        p.head.push(s.profile.head.clone());
        p.liquid_content.push(s.profile.liquid_content.clone());
        p.relative_humidity
            .push(s.profile.relative_humidity.clone());
    }
    let solutes = model
        .solutes
        .iter()
        .enumerate()
        .map(|(k, sol)| crate::plot::data::SoluteProfiles {
            name: sol.name.clone(),
            concentration: rec
                .snapshots
                .iter()
                .map(|s| {
                    s.profile
                        .solutes
                        .get(k)
                        .map(|p| p.concentration.clone())
                        .unwrap_or_default()
                })
                .collect(),
            accumulation_age: Some(
                rec.snapshots
                    .iter()
                    .map(|s| {
                        s.profile
                            .solutes
                            .get(k)
                            .map(|p| p.accumulation_age.clone())
                            .unwrap_or_default()
                    })
                    .collect(),
            ),
        })
        .collect();
    Results {
        path: PathBuf::from("(in memory)"),
        title: model.title.clone(),
        depth: model.mesh.centers.clone(),
        face_depth: model.mesh.faces.clone(),
        profiles: p,
        solutes,
        ..Default::default()
    }
}

/// The case evaluated at parameter vectors: runs in memory, weighted residuals.
struct CaseResiduals<'a> {
    fit: &'a FitFile,
    text: String,
    obs: &'a Observations,
    workers: usize,
    runs: usize,
}

impl CaseResiduals<'_> {
    fn overrides(&self, p: &[f64]) -> Result<Vec<Override>> {
        let mut ovs = Vec::new();
        for (par, v) in self.fit.parameters.iter().zip(p) {
            ovs.push(Override::set(&par.key, &toml_number(*v))?);
        }
        ovs.extend(run_overrides(self.fit.rtol, self.obs)?);
        Ok(ovs)
    }

    fn evaluate(&self, p: &[f64]) -> std::result::Result<Vec<f64>, String> {
        let ovs = self.overrides(p).map_err(|e| e.to_string())?;
        let base = self.fit.case.parent().unwrap_or(Path::new("."));
        let origin = self.fit.case.display().to_string();
        let model = crate::case::parse_with_overrides(&self.text, &origin, base, &ovs)
            .map_err(|e| e.to_string())?;
        let (rec, _) = crate::sim::run_in_memory(&model, SolverKind::BlockThomas)
            .map_err(|e| e.to_string())?;
        let res = results_of(&model, &rec);
        let matched = match_observations(&res, self.obs).map_err(|e| e.to_string())?;
        Ok(matched.iter().map(|m| m.weighted()).collect())
    }
}

impl Residuals for CaseResiduals<'_> {
    fn eval_batch(&mut self, params: &[Vec<f64>]) -> Vec<std::result::Result<Vec<f64>, String>> {
        self.runs += params.len();
        let mut out: Vec<std::result::Result<Vec<f64>, String>> =
            (0..params.len()).map(|_| Err(String::new())).collect();
        let this = &*self;
        for (chunk_p, chunk_o) in params
            .chunks(this.workers.max(1))
            .zip(out.chunks_mut(this.workers.max(1)))
        {
            std::thread::scope(|s| {
                let handles: Vec<_> = chunk_p
                    .iter()
                    .map(|p| s.spawn(move || this.evaluate(p)))
                    .collect();
                for (h, o) in handles.into_iter().zip(chunk_o.iter_mut()) {
                    *o = h
                        .join()
                        .unwrap_or_else(|_| Err("a model run panicked".into()));
                }
            });
        }
        out
    }
}

/// What a fit found.
#[derive(Debug, Clone)]
pub struct FitReport {
    pub fit: FitFile,
    pub result: LmResult,
    pub runs: usize,
    pub observations: usize,
    pub warnings: Vec<String>,
}

/// How a fit runs.
#[derive(Debug, Clone, Default)]
pub struct FitOptions {
    /// Model runs at once.
    pub workers: usize,
    /// The output folder: when given, the state after each accepted iteration is written
    /// there ([`super::progress`]).
    pub out: Option<PathBuf>,
    /// Continue from the progress file in `out` instead of the initial values.
    pub restart: bool,
    /// A progress line on stderr when it is a terminal.
    pub progress: bool,
}

/// Runs the fit (no progress file, no progress line).
pub fn fit(fit: &FitFile, workers: usize) -> Result<FitReport> {
    fit_with(
        fit,
        &FitOptions {
            workers,
            ..Default::default()
        },
    )
}

/// The progress line on a terminal (hidden elsewhere).
fn progress_bar(show: bool, max_iterations: usize) -> indicatif::ProgressBar {
    use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
    let bar = ProgressBar::with_draw_target(None, ProgressDrawTarget::stderr());
    if !show || !std::io::IsTerminal::is_terminal(&std::io::stderr()) {
        bar.set_draw_target(ProgressDrawTarget::hidden());
    }
    if let Ok(style) = ProgressStyle::with_template("{spinner} fit {msg}") {
        bar.set_style(style);
    }
    bar.set_message(format!("iteration 0/{max_iterations}: first run"));
    bar.enable_steady_tick(std::time::Duration::from_millis(250));
    bar
}

/// Runs the fit as `o` says.
pub fn fit_with(fit: &FitFile, o: &FitOptions) -> Result<FitReport> {
    let text = std::fs::read_to_string(&fit.case).map_err(|e| {
        Error::input(format!(
            "{}: case = {}: cannot read: {e}",
            fit.path.display(),
            fit.case.display()
        ))
    })?;
    let obs = super::observations::read(&fit.observations)?;
    let obs_bytes =
        std::fs::read(&fit.observations).map_err(|e| Error::io(&fit.observations, e))?;
    let identity = super::progress::FitIdentity::new(fit, &text, &obs_bytes);
    let start = match (&o.out, o.restart) {
        (Some(dir), true) => {
            let p = super::progress::read(dir)?;
            super::progress::check(&p, dir, fit, &identity)?;
            Some(p.state)
        }
        (None, true) => {
            return Err(Error::input(format!(
                "{}: --restart needs the output folder of the interrupted fit (--out DIR)",
                fit.path.display()
            )))
        }
        _ => None,
    };
    if let Some(dir) = &o.out {
        std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
    }
    let mut res = CaseResiduals {
        fit,
        text,
        obs: &obs,
        workers: o.workers,
        runs: 0,
    };
    if start.is_none() {
        // The starting point must run (its error names the cause).
        res.evaluate(
            &fit.parameters
                .iter()
                .map(|p| p.spec.initial)
                .collect::<Vec<_>>(),
        )
        .map_err(|e| {
            Error::input(format!(
                "{}: at the initial parameters: {e}",
                fit.path.display()
            ))
        })?;
    }
    if let Some(st) = &start {
        let path = o
            .out
            .as_deref()
            .unwrap_or(Path::new("."))
            .join(super::progress::PROGRESS_FILE);
        if st.residuals.len() != obs.rows.len() {
            return Err(Error::input(format!(
                "{}: {} residuals for {} observations; run the fit without --restart",
                path.display(),
                st.residuals.len(),
                obs.rows.len()
            )));
        }
        for (p, x) in fit.parameters.iter().zip(&st.x) {
            let s = &p.spec;
            let (lo, hi) = if s.log {
                (s.min.ln(), s.max.ln())
            } else {
                (s.min, s.max)
            };
            if !(lo..=hi).contains(x) {
                return Err(Error::input(format!(
                    "{}: x = {x} of {} lies outside its bounds [{lo}, {hi}]{}; run the fit without --restart",
                    path.display(),
                    p.key,
                    if s.log { " (in ln)" } else { "" }
                )));
            }
        }
    }
    let specs: Vec<ParamSpec> = fit.parameters.iter().map(|p| p.spec.clone()).collect();
    // A model run is a smooth function of its parameters only up to the noise of the
    // adaptive time stepping (the step sequence changes with them; ~1e-7 relative in the
    // profiles at the default tolerances): finite differences over 1e-3 of a parameter
    // stay far above that noise, and an iteration that gains less than 1e-6 of χ² is
    // within it.
    let opts = LmOptions {
        max_iterations: fit.max_iterations,
        f_tol: 1e-6,
        x_tol: 1e-6,
        fd_step: 1e-3,
        ..Default::default()
    };
    let bar = progress_bar(o.progress, fit.max_iterations);
    let mut write_error: Option<Error> = None;
    let mut on = |ev: &LmEvent| -> std::result::Result<(), String> {
        match ev {
            LmEvent::Trial {
                iteration,
                lambda,
                objective,
                trial_objective,
                evaluations,
            } => bar.set_message(format!(
                "iteration {iteration}/{}: objective {objective:.6e}, trial {trial_objective:.6e}, λ {lambda:.1e}, {} runs",
                fit.max_iterations,
                evaluations + 1
            )),
            LmEvent::Accepted(st) => {
                bar.set_message(format!(
                    "iteration {}/{}: objective {:.6e} accepted, λ {:.1e}, {} runs",
                    st.iterations,
                    fit.max_iterations,
                    st.objective,
                    st.lambda,
                    st.evaluations + 1
                ));
                if let Some(dir) = &o.out {
                    let p: Vec<f64> = st
                        .x
                        .iter()
                        .zip(&specs)
                        .map(|(x, s)| if s.log { x.exp() } else { *x })
                        .collect();
                    let text = super::progress::to_json(fit, &identity, st, &p);
                    if let Err(e) = super::progress::write(dir, &text) {
                        let msg = e.to_string();
                        write_error = Some(e);
                        return Err(msg);
                    }
                }
            }
        }
        Ok(())
    };
    let result = minimize_from(&specs, &mut res, &opts, start, &mut on);
    bar.finish_and_clear();
    if let Some(e) = write_error {
        return Err(e);
    }
    let result =
        result.map_err(|e| Error::Numerical(format!("{}: fit failed: {e}", fit.path.display())))?;
    let mut warnings = Vec::new();
    for &(a, b) in &result.unidentifiable {
        warnings.push(format!(
            "{} and {} are not identifiable from these observations (they trade off: {}); the estimates of both are not to be trusted",
            fit.parameters[a].key,
            fit.parameters[b].key,
            if result.near_singular {
                "JᵀWJ is near singular".to_string()
            } else {
                format!("correlation {:.3}", result.correlation[a * specs.len() + b])
            }
        ));
    }
    for (k, p) in fit.parameters.iter().enumerate() {
        let e = result.estimate[k];
        if e <= p.spec.min || e >= p.spec.max {
            warnings.push(format!(
                "{} = {e} is on its bound: the best value may lie outside [{}, {}]",
                p.key, p.spec.min, p.spec.max
            ));
        }
    }
    Ok(FitReport {
        fit: fit.clone(),
        // The first run (the check of the initial values) and the optimiser's runs, the
        // ones before a restart included.
        runs: result.evaluations + 1,
        observations: obs.rows.len(),
        result,
        warnings,
    })
}

/// A JSON string literal of `s`.
pub(super) fn json_str(s: &str) -> String {
    let mut o = String::from("\"");
    for c in s.chars() {
        match c {
            '"' => o.push_str("\\\""),
            '\\' => o.push_str("\\\\"),
            c if (c as u32) < 0x20 => {
                let _ = write!(o, "\\u{:04x}", c as u32);
            }
            c => o.push(c),
        }
    }
    o.push('"');
    o
}

/// A JSON number (shortest round-trip form), `null` when not finite.
pub(super) fn json_num(x: f64) -> String {
    if x.is_finite() {
        format!("{x:?}")
    } else {
        "null".into()
    }
}

/// The summary as JSON.
pub fn summary_json(r: &FitReport) -> String {
    let n = r.fit.parameters.len();
    let mut s = String::from("{\n  \"parameters\": [\n");
    for (k, p) in r.fit.parameters.iter().enumerate() {
        let _ = writeln!(
            s,
            "    {{\"key\": {}, \"estimate\": {}, \"standard_error\": {}, \"initial\": {}, \"min\": {}, \"max\": {}, \"log\": {}}}{}",
            json_str(&p.key),
            json_num(r.result.estimate[k]),
            json_num(r.result.standard_error[k]),
            json_num(p.spec.initial),
            json_num(p.spec.min),
            json_num(p.spec.max),
            p.spec.log,
            if k + 1 < n { "," } else { "" }
        );
    }
    let _ = writeln!(s, "  ],");
    let _ = writeln!(s, "  \"objective\": {},", json_num(r.result.objective));
    let _ = writeln!(
        s,
        "  \"reduced_chi_square\": {},",
        json_num(r.result.reduced_chi_square)
    );
    let _ = writeln!(s, "  \"observations\": {},", r.observations);
    let _ = writeln!(s, "  \"iterations\": {},", r.result.iterations);
    let _ = writeln!(s, "  \"runs\": {},", r.runs);
    let _ = writeln!(s, "  \"stop\": {},", json_str(r.result.stop));
    let _ = writeln!(
        s,
        "  \"reciprocal_condition\": {},",
        json_num(r.result.rcond)
    );
    let rows: Vec<String> = (0..n)
        .map(|a| {
            let row: Vec<String> = (0..n)
                .map(|b| json_num(r.result.correlation[a * n + b]))
                .collect();
            format!("[{}]", row.join(", "))
        })
        .collect();
    let _ = writeln!(s, "  \"correlation\": [{}],", rows.join(", "));
    let w: Vec<String> = r.warnings.iter().map(|x| json_str(x)).collect();
    let _ = writeln!(s, "  \"warnings\": [{}]", w.join(", "));
    s.push_str("}\n");
    s
}

/// Sets `path` (dotted, `[k]` for the k-th element from 1) to the number `v` in a TOML
/// document; the containers must exist (a key absent from its table is added).
fn set_in_document(doc: &mut toml_edit::DocumentMut, path: &str, v: f64) -> Option<()> {
    let mut segs: Vec<(String, Option<usize>)> = Vec::new();
    for seg in path.split('.') {
        match seg.find('[') {
            Some(i) => {
                let k: usize = seg[i + 1..].strip_suffix(']')?.parse().ok()?;
                segs.push((seg[..i].to_string(), Some(k.checked_sub(1)?)));
            }
            None => segs.push((seg.to_string(), None)),
        }
    }
    set_path(doc.as_table_mut(), &segs, v)
}

fn set_path(
    t: &mut dyn toml_edit::TableLike,
    segs: &[(String, Option<usize>)],
    v: f64,
) -> Option<()> {
    let ((key, idx), rest) = segs.split_first()?;
    if rest.is_empty() {
        match idx {
            None => {
                t.insert(key, toml_edit::value(v));
            }
            Some(i) => {
                let arr = t.get_mut(key)?.as_array_mut()?;
                if *i >= arr.len() {
                    return None;
                }
                arr.replace(*i, v);
            }
        }
        return Some(());
    }
    let item = t.get_mut(key)?;
    match idx {
        None => set_path(item.as_table_like_mut()?, rest, v),
        Some(i) => match item {
            toml_edit::Item::ArrayOfTables(a) => set_path(a.get_mut(*i)?, rest, v),
            toml_edit::Item::Value(toml_edit::Value::Array(arr)) => {
                set_path(arr.get_mut(*i)?.as_inline_table_mut()?, rest, v)
            }
            _ => None,
        },
    }
}

/// The case text with the estimates written in, or None where a key cannot be placed
/// (then the caller writes the overrides beside the unchanged case).
pub fn fitted_case_text(case_text: &str, r: &FitReport) -> Option<String> {
    let mut doc: toml_edit::DocumentMut = case_text.parse().ok()?;
    for (p, v) in r.fit.parameters.iter().zip(&r.result.estimate) {
        set_in_document(&mut doc, &p.key, *v)?;
    }
    Some(doc.to_string())
}

/// Writes `fit-summary.json`, `best.toml` (the fitted case) and the compare outputs at
/// the optimum into `out`; returns the files.
pub fn write_outputs(r: &FitReport, out: &Path) -> Result<Vec<PathBuf>> {
    std::fs::create_dir_all(out).map_err(|e| Error::io(out, e))?;
    let mut files = Vec::new();
    let p = out.join("fit-summary.json");
    std::fs::write(&p, summary_json(r)).map_err(|e| Error::io(&p, e))?;
    files.push(p);
    let text = std::fs::read_to_string(&r.fit.case).map_err(|e| Error::io(&r.fit.case, e))?;
    let sets: Vec<String> = r
        .fit
        .parameters
        .iter()
        .zip(&r.result.estimate)
        .map(|(p, v)| format!("--set {}={}", p.key, toml_number(*v)))
        .collect();
    let header = format!(
        "# Fitted by deepdry fit from {} against {} (objective {:.6e}); the estimates:\n#   {}\n# Model estimates for study, not a substitute for site investigation.\n",
        r.fit.case.display(),
        r.fit.observations.display(),
        r.result.objective,
        sets.join(" ")
    );
    let body = fitted_case_text(&text, r).unwrap_or_else(|| {
        format!("# (these keys could not be written into the text: run this case with the\n# --set options above)\n{text}")
    });
    let p = out.join("best.toml");
    std::fs::write(&p, format!("{header}{body}")).map_err(|e| Error::io(&p, e))?;
    files.push(p);
    Ok(files)
}

/// Runs the fitted case (`best.toml` in `out`, with the observation times as output
/// times) into `out/best-run` and compares it with the observations: the statistics,
/// CSV files and figures at the optimum.
pub fn compare_at_optimum(r: &FitReport, out: &Path) -> Result<super::compare::CompareOutput> {
    let obs = super::observations::read(&r.fit.observations)?;
    let ovs = run_overrides(r.fit.rtol, &obs)?;
    let best = out.join("best.toml");
    let text = std::fs::read_to_string(&best).map_err(|e| Error::io(&best, e))?;
    // Relative paths inside the case (CSV tables) stay relative to the original case.
    let base = r.fit.case.parent().unwrap_or(Path::new("."));
    let model = crate::case::parse_with_overrides(&text, &best.display().to_string(), base, &ovs)?;
    let folder = out.join("best-run");
    crate::run::run(
        &model,
        &crate::run::RunOptions {
            out: Some(folder.clone()),
            overwrite: true,
            progress: false,
            ..Default::default()
        },
    )?;
    super::compare::compare(&folder.join("results.h5"), &r.fit.observations, out)
}
