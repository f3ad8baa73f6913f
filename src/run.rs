//! One simulation run: initial state, the time loop with its sync times, outputs and the
//! end-of-run summary. The loop only advances a plain [`StepState`]; the results file is
//! an observer of that state.

use crate::error::{Error, Result};
use crate::model::{
    BottomBc, BottomHeat, BottomWater, InitialState, Model, Periods, ProfileMoisture, SurfaceBc,
    SurfaceHeat, SurfaceWater,
};
use crate::output::diagnostics::{drying_front_depth, Profile, SeriesRecord};
use crate::output::results::ResultsFile;
use crate::physics::cell::equilibrium_vapor;
use crate::physics::dual::D3;
use crate::physics::{System, H, RV, T};
use crate::props::constants::SECONDS_PER_YEAR;
use crate::schedule::Schedule;
use crate::solve::linear::{make_solver, SolverKind};
use crate::solve::newton::NewtonFailure;
use crate::solve::stepper::{Counters, StepFailure, StepOptions, StepState, Stepper};
use std::path::PathBuf;
use std::time::Instant;

/// Options of one run that are not part of the case.
#[derive(Debug, Clone)]
pub struct RunOptions {
    /// Output folder (overrides the case's).
    pub out: Option<PathBuf>,
    /// Replace an existing results file.
    pub overwrite: bool,
    /// Show a progress bar (only drawn on a terminal).
    pub progress: bool,
    pub solver: SolverKind,
    pub start: Start,
}

impl Default for RunOptions {
    fn default() -> Self {
        RunOptions {
            out: None,
            overwrite: false,
            progress: true,
            solver: SolverKind::BlockThomas,
            start: Start::Fresh,
        }
    }
}

/// What a finished run reports.
#[derive(Debug, Clone)]
pub struct RunSummary {
    pub results: PathBuf,
    pub start: f64,
    pub end: f64,
    pub wall_seconds: f64,
    pub counters: Counters,
    /// Final balance errors, absolute [J m⁻², kg m⁻²] and relative.
    pub balance_abs: [f64; 2],
    pub balance_rel: [f64; 2],
    /// Final water fluxes at the surface and the bottom [mm/yr], positive downward.
    pub surface_flux_mm_yr: f64,
    pub bottom_flux_mm_yr: f64,
    pub final_state: StepState,
    /// The overrides applied to the case (`KEY=VALUE`; empty when none).
    pub overrides: Vec<String>,
}

impl RunSummary {
    /// The one-screen summary printed at the end of `deepdry run`.
    pub fn text(&self) -> String {
        let c = &self.counters;
        format!(
            "run finished: {:.6} yr to {:.6} yr in {:.2} s wall time\n\
             steps {} (rejected {}), Newton iterations {}, Jacobian evaluations {}, factorisations {}\n\
             water balance error {:.3e} kg m-2 (relative {:.2e}); energy balance error {:.3e} J m-2 (relative {:.2e})\n\
             water flux at the surface {:.6e} mm/yr, at the bottom {:.6e} mm/yr (positive downward)\n\
             results: {}\n{}",
            self.start / SECONDS_PER_YEAR,
            self.end / SECONDS_PER_YEAR,
            self.wall_seconds,
            c.steps,
            c.rejected,
            c.newton_iterations,
            c.jacobians,
            c.factorizations,
            self.balance_abs[1],
            self.balance_rel[1],
            self.balance_abs[0],
            self.balance_rel[0],
            self.surface_flux_mm_yr,
            self.bottom_flux_mm_yr,
            self.results.display(),
            if self.overrides.is_empty() {
                String::new()
            } else {
                format!("overrides: {}\n", self.overrides.join(", "))
            }
        )
    }
}

/// Converts a water mass flux [kg m⁻² s⁻¹] to mm of water per year.
pub fn mm_per_year(flux: f64) -> f64 {
    flux * SECONDS_PER_YEAR
}

fn frozen(s: &Schedule, t: f64) -> Schedule {
    Schedule::Constant(s.value(t))
}

/// The surface condition with every schedule held at its value at `t`.
pub fn freeze_surface(bc: &SurfaceBc, t: f64) -> SurfaceBc {
    SurfaceBc {
        heat: match &bc.heat {
            SurfaceHeat::Temperature(s) => SurfaceHeat::Temperature(frozen(s, t)),
            SurfaceHeat::Flux(s) => SurfaceHeat::Flux(frozen(s, t)),
        },
        water: match &bc.water {
            SurfaceWater::Head(s) => SurfaceWater::Head(frozen(s, t)),
            SurfaceWater::Flux { flux, ponding_head } => SurfaceWater::Flux {
                flux: frozen(flux, t),
                ponding_head: *ponding_head,
            },
            SurfaceWater::Atmosphere {
                relative_humidity,
                resistance,
            } => SurfaceWater::Atmosphere {
                relative_humidity: frozen(relative_humidity, t),
                resistance: resistance.as_ref().map(|r| frozen(r, t)),
            },
            SurfaceWater::NoFlow => SurfaceWater::NoFlow,
        },
    }
}

/// The bottom condition with every schedule held at its value at `t`.
pub fn freeze_bottom(bc: &BottomBc, t: f64) -> BottomBc {
    BottomBc {
        heat: match &bc.heat {
            BottomHeat::Temperature(s) => BottomHeat::Temperature(frozen(s, t)),
            BottomHeat::GeothermalFlux(s) => BottomHeat::GeothermalFlux(frozen(s, t)),
        },
        water: match &bc.water {
            BottomWater::WaterTable(s) => BottomWater::WaterTable(frozen(s, t)),
            BottomWater::FreeDrainage => BottomWater::FreeDrainage,
            BottomWater::NoFlow => BottomWater::NoFlow,
        },
    }
}

/// Bottom head at time t for the hydrostatic profile (0 unless a water table is given).
fn bottom_head(model: &Model, t: f64) -> f64 {
    match &model.bottom.at(t).water {
        BottomWater::WaterTable(s) => s.value(t),
        _ => 0.0,
    }
}

/// Sets rv to its equilibrium value in every cell.
pub fn equilibrate_vapor(u: &mut [f64]) {
    for i in 0..u.len() / 3 {
        let (_, _, _, rveq) = equilibrium_vapor(D3::cst(u[3 * i + T]), D3::cst(u[3 * i + H]));
        u[3 * i + RV] = rveq.v;
    }
}

/// Hydrostatic head above the bottom head and a linear temperature profile.
pub fn hydrostatic(model: &Model, surface_temperature: f64, gradient: f64) -> Vec<f64> {
    let n = model.mesh.n_cells();
    let l = model.mesh.depth();
    let hb = bottom_head(model, model.time.start);
    let mut u = vec![0.0; 3 * n];
    for (i, z) in model.mesh.centers.iter().enumerate() {
        u[3 * i + T] = surface_temperature + gradient * z;
        u[3 * i + H] = hb - (l - z);
    }
    equilibrate_vapor(&mut u);
    u
}

fn interp(xs: &[f64], ys: &[f64], x: f64) -> f64 {
    if x <= xs[0] {
        return ys[0];
    }
    for k in 1..xs.len() {
        if x <= xs[k] {
            let f = (x - xs[k - 1]) / (xs[k] - xs[k - 1]);
            return ys[k - 1] + f * (ys[k] - ys[k - 1]);
        }
    }
    ys[ys.len() - 1]
}

/// Unknowns of the initial state (the steady state is solved for).
pub fn initial_unknowns(model: &Model, solver: SolverKind) -> Result<Vec<f64>> {
    match &model.initial {
        InitialState::Hydrostatic {
            surface_temperature,
            gradient,
        } => Ok(hydrostatic(model, *surface_temperature, *gradient)),
        InitialState::Profile {
            depth,
            temperature,
            moisture,
        } => {
            let n = model.mesh.n_cells();
            let mut u = vec![0.0; 3 * n];
            for (i, z) in model.mesh.centers.iter().enumerate() {
                u[3 * i + T] = interp(depth, temperature, *z);
                u[3 * i + H] = match moisture {
                    ProfileMoisture::Head(h) => interp(depth, h, *z),
                    ProfileMoisture::LiquidContent(th) => {
                        let theta = interp(depth, th, *z);
                        let soil = &model.soils[model.cell_soil[i]];
                        soil.retention.head_from_theta(theta).ok_or_else(|| {
                            Error::input(format!(
                                "initial profile: liquid content {theta} at depth {z:.3} m is outside the retention curve of soil '{}'",
                                soil.name
                            ))
                        })?
                    }
                };
            }
            equilibrate_vapor(&mut u);
            Ok(u)
        }
        InitialState::Steady {
            surface,
            bottom,
            surface_temperature,
            gradient,
        } => {
            let guess = hydrostatic(model, *surface_temperature, *gradient);
            let mut m = model.clone();
            m.surface = Periods::single(freeze_surface(surface, model.time.start));
            m.bottom = Periods::single(freeze_bottom(bottom, model.time.start));
            steady_state(&m, guess, solver)
        }
    }
}

/// Steady state of `model` (its boundary conditions must be time-independent) by
/// pseudo-transient continuation: backward-Euler steps from `guess` with Δt growing
/// without bound, until the state stops changing at Δt ≥ 10¹⁶ s.
pub fn steady_state(model: &Model, guess: Vec<f64>, solver: SolverKind) -> Result<Vec<f64>> {
    let mut sys = System::new(model);
    let n = sys.n;
    let t0 = model.time.start;
    let state = Stepper::initial_state(&mut sys, t0, 3600.0, guess);
    let opts = StepOptions {
        dt_min: 1e-3,
        dt_max: 1e30,
        target_dt_change: 20.0,
        target_theta_change: 0.2,
        max_growth: 4.0,
        integrator: crate::solve::stepper::Integrator::BackwardEuler,
        newton: crate::solve::newton::NewtonOptions {
            max_iter: model.time.max_newton,
            residual_tol: model.time.newton_tolerance,
            ..Default::default()
        },
    };
    let mut st = Stepper::new(&mut sys, state, opts, make_solver(solver, n));
    let mut prev = st.state.u.clone();
    for _ in 0..5000 {
        let info = st
            .step(&mut sys, f64::MAX)
            .map_err(|f| numerical_message(&sys, &f, "steady initial state"))?;
        let u = &st.state.u;
        let mut change = 0.0f64;
        for i in 0..n {
            change = change
                .max((u[3 * i + T] - prev[3 * i + T]).abs())
                .max((u[3 * i + H] - prev[3 * i + H]).abs() / (1.0 + u[3 * i + H].abs()));
        }
        prev.copy_from_slice(u);
        log::debug!(
            "steady state: pseudo-time {:.3e} s, dt {:.3e} s, largest change {change:.3e}, Newton {}",
            st.state.t - t0,
            info.dt,
            info.newton_iterations
        );
        if info.dt >= 1e16 && change < 1e-9 {
            return Ok(prev);
        }
    }
    Err(Error::Numerical(
        "steady initial state: pseudo-transient continuation did not settle in 5000 steps".into(),
    ))
}

/// A one-line message for a step that failed at the minimum Δt.
pub fn numerical_message(sys: &System, f: &StepFailure, what: &str) -> Error {
    let names = ["energy balance", "water balance", "vapour equation"];
    let unknowns = ["temperature", "head", "vapour density"];
    let (cell, row, res) = match &f.failure {
        NewtonFailure::NotConverged {
            cell,
            row,
            residual,
        }
        | NewtonFailure::Diverged {
            cell,
            row,
            residual,
        } => (*cell, *row, *residual),
        NewtonFailure::NonFinite(nf) => (nf.cell, nf.row, f64::NAN),
        NewtonFailure::Linear(_) => (0, 0, f64::NAN),
    };
    let kind = match &f.failure {
        NewtonFailure::NotConverged { .. } => "Newton did not converge",
        NewtonFailure::Diverged { .. } => "Newton diverged",
        NewtonFailure::NonFinite(_) => "a non-finite value (NaN or Inf) appeared",
        NewtonFailure::Linear(_) => "the linear system was singular",
    };
    let cell = cell.min(sys.n.saturating_sub(1));
    Error::Numerical(format!(
        "{what}: step failed at t = {:.6e} yr with dt = {:.3e} s (the minimum): {kind}; worst {} residual {:.3e} (scaled; unknown {}) at depth {:.4} m (cell {cell})",
        f.t / SECONDS_PER_YEAR,
        f.dt,
        names[row.min(2)],
        res,
        unknowns[row.min(2)],
        sys.centers[cell],
    ))
}

/// Times the stepper must land on inside (start, end]: schedule breakpoints, changes of
/// boundary-condition kind, snapshots and the end.
pub fn sync_times(model: &Model) -> Vec<f64> {
    let mut ts = forcing_times(model);
    ts.extend(model.output.snapshot_times.iter().cloned());
    ts.push(model.time.end);
    clean_times(model, ts)
}

fn clean_times(model: &Model, mut ts: Vec<f64>) -> Vec<f64> {
    let (a, b) = (model.time.start, model.time.end);
    ts.retain(|t| t.is_finite() && *t > a && *t <= b);
    ts.sort_by(|x, y| x.total_cmp(y));
    ts.dedup_by(|x, y| (*x - *y).abs() <= 1e-9 * y.abs().max(1.0));
    ts
}

/// Times where the forcing jumps or changes slope (schedule breakpoints, changes of
/// boundary-condition kind) inside (start, end]: the multistep history restarts there.
pub fn forcing_times(model: &Model) -> Vec<f64> {
    let mut ts: Vec<f64> = Vec::new();
    let add_schedule = |s: &Schedule, ts: &mut Vec<f64>| ts.extend(s.breakpoints());
    for (start, bc) in &model.surface.periods {
        ts.push(*start);
        match &bc.heat {
            SurfaceHeat::Temperature(s) | SurfaceHeat::Flux(s) => add_schedule(s, &mut ts),
        }
        match &bc.water {
            SurfaceWater::Head(s) => add_schedule(s, &mut ts),
            SurfaceWater::Flux { flux, .. } => add_schedule(flux, &mut ts),
            SurfaceWater::Atmosphere {
                relative_humidity,
                resistance,
            } => {
                add_schedule(relative_humidity, &mut ts);
                if let Some(r) = resistance {
                    add_schedule(r, &mut ts);
                }
            }
            SurfaceWater::NoFlow => {}
        }
    }
    for (start, bc) in &model.bottom.periods {
        ts.push(*start);
        match &bc.heat {
            BottomHeat::Temperature(s) | BottomHeat::GeothermalFlux(s) => add_schedule(s, &mut ts),
        }
        if let BottomWater::WaterTable(s) = &bc.water {
            add_schedule(s, &mut ts);
        }
    }
    clean_times(model, ts)
}

/// Step options from the case.
pub fn step_options(model: &Model) -> StepOptions {
    let t = &model.time;
    StepOptions {
        dt_min: model.time.dt_min,
        dt_max: model.time.dt_max,
        integrator: match t.method {
            crate::model::Method::BackwardEuler => crate::solve::stepper::Integrator::BackwardEuler,
            crate::model::Method::Bdf { max_order } => crate::solve::stepper::Integrator::Bdf {
                max_order,
                rtol: t.rtol,
                atol_t: t.atol_temperature,
                atol_h: t.atol_head,
                atol_rv: t.atol_vapor,
                atol_theta: t.atol_theta,
            },
        },
        newton: crate::solve::newton::NewtonOptions {
            max_iter: model.time.max_newton,
            residual_tol: model.time.newton_tolerance,
            ..Default::default()
        },
        ..Default::default()
    }
}

/// The series record for the current (evaluated) state.
pub fn series_record(sys: &System, st: &Stepper, dt: f64, iters: usize) -> SeriesRecord {
    let (abs, rel) = st.balance(sys);
    let (top, bot) = sys.boundary_fluxes();
    SeriesRecord {
        time_year: st.state.t / SECONDS_PER_YEAR,
        surface_water_flux: top[1],
        bottom_water_flux: bot[1],
        surface_heat_flux: top[0],
        bottom_heat_flux: bot[0],
        water_storage: sys.totals()[1],
        water_balance_error: abs[1],
        energy_balance_error: abs[0],
        water_balance_relative: rel[1],
        energy_balance_relative: rel[0],
        drying_front_depth: drying_front_depth(sys),
        dt,
        newton_iterations: iters as f64,
    }
}

/// How a run starts.
#[derive(Debug, Clone, PartialEq)]
pub enum Start {
    /// From the case's initial state.
    Fresh,
    /// Continue the run that wrote this checkpoint (same case), appending to its results.
    Resume(PathBuf),
    /// A new run (new results file) from this checkpoint's state, with this case's
    /// boundary conditions and end time; the mesh and soils must match.
    Branch(PathBuf),
}

static INTERRUPT: std::sync::OnceLock<std::sync::Arc<std::sync::atomic::AtomicBool>> =
    std::sync::OnceLock::new();

/// Installs SIGINT/SIGTERM handlers that ask the run loop to stop cleanly.
pub fn install_signal_handlers() -> Result<()> {
    let flag =
        INTERRUPT.get_or_init(|| std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false)));
    for sig in [signal_hook::consts::SIGINT, signal_hook::consts::SIGTERM] {
        signal_hook::flag::register(sig, flag.clone())
            .map_err(|e| Error::Internal(format!("cannot install the signal handler: {e}")))?;
    }
    Ok(())
}

fn interrupted() -> bool {
    INTERRUPT
        .get()
        .map(|f| f.load(std::sync::atomic::Ordering::Relaxed))
        .unwrap_or(false)
}

/// Most checkpoint times a run accepts from `[checkpoint] every_year`.
pub const MAX_CHECKPOINT_TIMES: f64 = 1.0e6;

/// Checkpoint times inside (start, end] from the simulated-time interval; an interval
/// that would give more than [`MAX_CHECKPOINT_TIMES`] is refused (it would take the
/// memory of the machine before the first step).
fn checkpoint_times(model: &Model) -> Result<Vec<f64>> {
    let mut out = Vec::new();
    if let Some(every) = model.checkpoint.every {
        let count = (model.time.end - model.time.start) / every;
        if count.is_nan() || count > MAX_CHECKPOINT_TIMES {
            return Err(Error::input(format!(
                "checkpoint.every_year = {:e}: gives {count:.3e} checkpoints over the run ({:e} to {:e} yr); at most {MAX_CHECKPOINT_TIMES:e}: use a longer interval",
                every / SECONDS_PER_YEAR,
                model.time.start / SECONDS_PER_YEAR,
                model.time.end / SECONDS_PER_YEAR
            )));
        }
        if every > 0.0 {
            let mut k = 1.0;
            loop {
                let t = model.time.start + k * every;
                if t >= model.time.end {
                    break;
                }
                out.push(t);
                k += 1.0;
            }
        }
    }
    Ok(out)
}

fn is_member(list: &[f64], t: f64) -> bool {
    list.iter()
        .any(|s| (s - t).abs() <= 1e-9 * t.abs().max(1.0))
}

struct Runner<'a> {
    model: &'a Model,
    sys: System,
    st: Stepper,
    results: ResultsFile,
    profile: Profile,
    since_series: u64,
    folder: PathBuf,
    /// The checkpoint a branched run started from, and its time [yr].
    parent: Option<(String, f64)>,
}

impl Runner<'_> {
    fn checkpoint(&mut self, path: &std::path::Path) -> Result<()> {
        self.results.flush()?;
        let position = crate::checkpoint::LoopPosition {
            since_series: self.since_series,
            series_rows: self.results.records as u64,
            snapshots: self.results.snapshots as u64,
        };
        // The balance at the checkpoint's state (evaluating does not change what the
        // next step computes: every step evaluates its start state afresh).
        self.sys.evaluate(self.st.state.t, &self.st.state.u);
        let (abs, rel) = self.st.balance(&self.sys);
        self.st.sync_state(&self.sys);
        let info = crate::checkpoint::CheckpointInfo {
            balance_abs: Some(abs),
            balance_rel: Some(rel),
            last_series_year: self.results.last_series_year,
            last_snapshot_year: self.results.last_snapshot_year,
            parent: self.parent.clone(),
        };
        crate::checkpoint::write(
            path,
            self.model,
            &self.st.state,
            position,
            &self.results.path,
            &info,
        )
    }

    fn regular_checkpoint(&mut self) -> Result<PathBuf> {
        let path = crate::checkpoint::name_at(&self.folder, self.st.state.t);
        self.checkpoint(&path)?;
        crate::checkpoint::prune(&self.folder, self.model.checkpoint.keep);
        Ok(path)
    }
}

/// Refuses to start a new run in `folder` over an earlier one (its results file, or the
/// checkpoints of one whose results file is gone) unless `overwrite`.
fn check_new_output(
    folder: &std::path::Path,
    results: &std::path::Path,
    overwrite: bool,
) -> Result<()> {
    if overwrite {
        return Ok(());
    }
    if results.exists() {
        return Err(Error::Io(format!(
            "{}: results file exists already; use --overwrite to replace it, or --out to write elsewhere",
            results.display()
        )));
    }
    let cks = crate::checkpoint::list(folder);
    if let Some((_, p)) = cks.last() {
        return Err(Error::Io(format!(
            "{}: the output folder holds {} checkpoints of an earlier run (newest {}) but no results file; use --overwrite to replace them, or --out to write elsewhere",
            folder.display(),
            cks.len(),
            p.display()
        )));
    }
    Ok(())
}

/// Removes the checkpoints (and diagnostic state) of the run a new run replaces: they
/// continue a results file that is being replaced, and being later in time they would
/// outlive the new run's checkpoints when pruning. `keep` (a branch's parent) stays.
fn replace_earlier_run(folder: &std::path::Path, keep: Option<&std::path::Path>) {
    crate::checkpoint::remove_temporaries(folder);
    let removed = crate::checkpoint::remove_all(folder, keep);
    if removed > 0 {
        log::info!(
            "removed {removed} checkpoint files of the earlier run in {}",
            folder.display()
        );
    }
}

/// Runs `model` (from its initial state, or as `opts.start` says) to its end time.
pub fn run(model: &Model, opts: &RunOptions) -> Result<RunSummary> {
    let wall = Instant::now();
    // Refused before any file is touched.
    let ckpt_times = checkpoint_times(model)?;
    let folder = opts
        .out
        .clone()
        .unwrap_or_else(|| model.output.folder.clone());
    std::fs::create_dir_all(&folder)
        .map_err(|e| Error::io(&folder, format!("cannot create the output folder: {e}")))?;
    let _lock = crate::output::FolderLock::acquire(&folder)?;
    let results_path = folder.join("results.h5");
    let mut sys = System::new(model);
    let n = sys.n;
    let mut parent = None;
    let (state, results, since_series) = match &opts.start {
        Start::Fresh => {
            check_new_output(&folder, &results_path, opts.overwrite)?;
            let u0 = initial_unknowns(model, opts.solver)?;
            // Create (and so lock) the new results file first: a run still writing to the
            // folder makes this fail before its checkpoints are touched.
            let results = ResultsFile::create(&results_path, model, opts.overwrite)?;
            replace_earlier_run(&folder, None);
            let state =
                Stepper::initial_state(&mut sys, model.time.start, model.time.dt_initial, u0);
            (state, results, 0u64)
        }
        Start::Resume(path) => {
            let ck = crate::checkpoint::read(path)?;
            if ck.physics_hash != crate::checkpoint::physics_hash(model) {
                return Err(Error::input(format!(
                    "{}: the case differs from the one that wrote this checkpoint (physics hash {} vs {}); to continue with changes, use --start-from to branch",
                    path.display(),
                    ck.physics_hash,
                    crate::checkpoint::physics_hash(model)
                )));
            }
            if ck.state.u.len() != 3 * n {
                return Err(Error::input(format!(
                    "{}: checkpoint holds {} unknowns, the case's mesh needs {}",
                    path.display(),
                    ck.state.u.len(),
                    3 * n
                )));
            }
            if ck.state.t >= model.time.end {
                return Err(Error::input(format!(
                    "{}: the checkpoint is at {:.6e} yr, at or after the case's end {:.6e} yr: nothing to continue",
                    path.display(),
                    ck.state.t / SECONDS_PER_YEAR,
                    model.time.end / SECONDS_PER_YEAR
                )));
            }
            let results = ResultsFile::open_append(
                &results_path,
                &ck.faces,
                ck.position.snapshots as usize,
                ck.position.series_rows as usize,
                ck.info.last_series_year,
                ck.info.last_snapshot_year,
            )?;
            // The results after the checkpoint are gone, so later checkpoints in the
            // folder no longer match them (and would outlive the new ones when pruning).
            crate::checkpoint::remove_temporaries(&folder);
            let removed = crate::checkpoint::remove_after(&folder, ck.state.t, path);
            if removed > 0 {
                log::info!(
                    "removed {removed} checkpoints later than {} (their results rows were dropped)",
                    path.display()
                );
            }
            parent = ck.info.parent.clone();
            (ck.state, results, ck.position.since_series)
        }
        Start::Branch(path) => {
            let ck = crate::checkpoint::read(path)?;
            if ck.faces != model.mesh.faces {
                return Err(Error::input(format!(
                    "{}: mesh differs: the checkpoint has {} cells to {} m, the case {} cells to {} m; a branch needs the same mesh",
                    path.display(),
                    ck.faces.len().saturating_sub(1),
                    ck.faces.last().copied().unwrap_or(0.0),
                    n,
                    model.mesh.depth()
                )));
            }
            if ck.column_hash != crate::checkpoint::column_hash(model) {
                return Err(Error::input(format!(
                    "{}: soils or layers differ from the checkpoint's case; a branch needs the same soils and layers",
                    path.display()
                )));
            }
            if ck.physics_hash != crate::checkpoint::physics_hash(model) {
                log::warn!(
                    "branching from {}: physics, boundary conditions or step control differ from the parent case",
                    path.display()
                );
            }
            if ck.state.t >= model.time.end {
                return Err(Error::input(format!(
                    "{}: the checkpoint is at {:.6e} yr, at or after the case's end {:.6e} yr",
                    path.display(),
                    ck.state.t / SECONDS_PER_YEAR,
                    model.time.end / SECONDS_PER_YEAR
                )));
            }
            check_new_output(&folder, &results_path, opts.overwrite)?;
            let results = ResultsFile::create(&results_path, model, opts.overwrite)?;
            replace_earlier_run(&folder, Some(path));
            parent = Some((path.display().to_string(), ck.state.t / SECONDS_PER_YEAR));
            results.set_attr("parent_checkpoint", &path.display().to_string())?;
            results.set_attr(
                "parent_time_year",
                &format!("{:e}", ck.state.t / SECONDS_PER_YEAR),
            )?;
            results.set_attr("parent_physics_hash", &ck.physics_hash)?;
            let state = Stepper::initial_state(&mut sys, ck.state.t, ck.state.dt, ck.state.u);
            (state, results, 0)
        }
    };
    let fresh_output = !matches!(opts.start, Start::Resume(_));
    let lin = make_solver(opts.solver, n);
    let st = Stepper::new(&mut sys, state, step_options(model), lin);
    let mut r = Runner {
        model,
        sys,
        st,
        results,
        profile: Profile::default(),
        since_series,
        folder: folder.clone(),
        parent,
    };
    if fresh_output {
        r.sys.evaluate_direct(r.st.state.t, &r.st.state.u);
        r.profile.fill(&r.sys);
        let rec = series_record(&r.sys, &r.st, 0.0, 0);
        r.results.push_series(rec);
        r.results
            .write_snapshot(r.st.state.t / SECONDS_PER_YEAR, &r.profile)?;
    }

    let jumps = forcing_times(model);
    let mut syncs = sync_times(model);
    syncs.extend(ckpt_times.iter().cloned());
    syncs.sort_by(|a, b| a.total_cmp(b));
    syncs.dedup_by(|x, y| (*x - *y).abs() <= 1e-9 * y.abs().max(1.0));
    let snaps = &model.output.snapshot_times;
    let bar = progress_bar(opts.progress, model);
    let mut last_wall = Instant::now();
    let t_begin = r.st.state.t;
    syncs.retain(|t| *t > t_begin);
    for &t_sync in &syncs {
        while r.st.state.t < t_sync {
            let info = match r.st.step(&mut r.sys, t_sync) {
                Ok(info) => info,
                Err(f) => {
                    let err = numerical_message(&r.sys, &f, "run");
                    bar.finish_and_clear();
                    let saved = folder.join("failed-state.h5");
                    return match r.checkpoint(&saved) {
                        Ok(()) => Err(Error::Numerical(format!(
                            "{err}; last good state saved in {}",
                            saved.display()
                        ))),
                        Err(e2) => Err(Error::Numerical(format!(
                            "{err}; the last good state could not be saved: {e2}"
                        ))),
                    };
                }
            };
            r.since_series += 1;
            let landed = r.st.state.t == t_sync;
            if landed && is_member(&jumps, t_sync) {
                r.st.restart_history();
            }
            let at_snapshot = landed && is_member(snaps, t_sync);
            if r.since_series >= model.output.series_every as u64
                || at_snapshot
                || r.st.state.t == model.time.end
            {
                let rec = series_record(&r.sys, &r.st, info.dt, info.newton_iterations);
                r.results.push_series(rec);
                r.since_series = 0;
            }
            if at_snapshot {
                // The profiles of the state evaluated directly, not linearised: the same
                // whatever the solver kept (a branch from this state shows the same).
                r.sys.evaluate_direct(r.st.state.t, &r.st.state.u);
                r.profile.fill(&r.sys);
                r.results
                    .write_snapshot(r.st.state.t / SECONDS_PER_YEAR, &r.profile)?;
            }
            update_bar(&bar, model, &r.st, info.dt);
            if landed && is_member(&ckpt_times, t_sync) {
                r.regular_checkpoint()?;
                last_wall = Instant::now();
            } else if let Some(w) = model.checkpoint.wall_every {
                if last_wall.elapsed().as_secs_f64() >= w {
                    r.regular_checkpoint()?;
                    last_wall = Instant::now();
                }
            }
            if interrupted() {
                bar.finish_and_clear();
                let path = r.regular_checkpoint()?;
                return Err(Error::Interrupted(format!(
                    "interrupted at t = {:.6e} yr; checkpoint written to {} (continue with --resume)",
                    r.st.state.t / SECONDS_PER_YEAR,
                    path.display()
                )));
            }
        }
    }
    r.regular_checkpoint()?;
    r.results.flush()?;
    bar.finish_and_clear();
    let (sys, st) = (&mut r.sys, &r.st);
    sys.evaluate(st.state.t, &st.state.u);
    let (balance_abs, balance_rel) = st.balance(sys);
    Ok(RunSummary {
        results: results_path,
        start: model.time.start,
        end: st.state.t,
        wall_seconds: wall.elapsed().as_secs_f64(),
        counters: st.state.counters,
        balance_abs,
        balance_rel,
        surface_flux_mm_yr: mm_per_year(sys.boundary_fluxes().0[1]),
        bottom_flux_mm_yr: mm_per_year(sys.boundary_fluxes().1[1]),
        final_state: st.state.clone(),
        overrides: model.overrides.clone(),
    })
}

fn progress_bar(show: bool, model: &Model) -> indicatif::ProgressBar {
    use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
    let bar = ProgressBar::with_draw_target(Some(1000), ProgressDrawTarget::stderr());
    if !show || !std::io::IsTerminal::is_terminal(&std::io::stderr()) {
        bar.set_draw_target(ProgressDrawTarget::hidden());
    }
    if let Ok(style) = ProgressStyle::with_template("{bar:30} {percent:>3}% {msg}") {
        bar.set_style(style);
    }
    let _ = model;
    bar
}

fn update_bar(bar: &indicatif::ProgressBar, model: &Model, st: &Stepper, dt: f64) {
    if bar.is_hidden() {
        return;
    }
    let span = model.time.end - model.time.start;
    let done = ((st.state.t - model.time.start) / span * 1000.0).clamp(0.0, 1000.0);
    bar.set_position(done as u64);
    bar.set_message(format!(
        "t = {:.4e} yr, dt = {:.3e} yr, steps {}",
        st.state.t / SECONDS_PER_YEAR,
        dt / SECONDS_PER_YEAR,
        st.state.counters.steps
    ));
}
