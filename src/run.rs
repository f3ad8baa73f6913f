//! `deepdry run`: one simulation of a case into an output folder. The start mode (new,
//! resumed, branched), the folder lock and the results file are set up here; the time
//! loop is a [`Simulation`] with the results file, the checkpoints, the progress bar and a
//! stop on SIGINT/SIGTERM as its observers.

use crate::checkpoint::{self, Checkpoint};
use crate::error::{Error, Result};
use crate::model::Model;
use crate::output::results::ResultsFile;
use crate::output::FolderLock;
use crate::props::constants::SECONDS_PER_YEAR;
use crate::sim::{
    Advance, Begin, Checkpointer, Observer, OutputPosition, Progress, Request, ResultsWriter,
    Simulation, SyncPlan,
};
use crate::solve::linear::SolverKind;
use crate::solve::stepper::{Counters, StepInfo, StepState};
use std::path::{Path, PathBuf};
use std::time::Instant;

pub use crate::sim::initial::{
    equilibrate_vapor, freeze_bottom, freeze_surface, hydrostatic, initial_unknowns, steady_state,
};
pub use crate::sim::simulation::{numerical_message, series_record, step_options};
pub use crate::sim::times::{forcing_times, sync_times, MAX_CHECKPOINT_TIMES};

/// What cycle skipping did in a run.
#[derive(Debug, Clone, PartialEq)]
pub struct SkippingSummary {
    pub jumps: u64,
    pub skipped: u64,
    /// Periods of the run (a fraction where it does not end on a boundary).
    pub periods: f64,
    /// The jumps' cumulative balance errors [water kg m⁻², energy J m⁻²].
    pub mismatch: [f64; 2],
    /// Trial periods of the implicit jumps and their time steps (0 for explicit jumps).
    pub trial_periods: u64,
    pub trial_steps: u64,
}

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
    /// The years this run started (the case's start, the checkpoint's time of a resume
    /// or a branch) and ended.
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
    /// Per solute: its name and its final series values (as
    /// [`crate::solute::SoluteColumn::series_values`]).
    pub solutes: Vec<(String, Vec<f64>)>,
    /// Cycle skipping (None: off).
    pub cycle_skipping: Option<SkippingSummary>,
    /// How the periodic initial state was found (`[initial] state = "periodic"`, a
    /// fresh start; None otherwise).
    pub spin_up: Option<crate::sim::initial::PeriodicReport>,
}

/// The summary lines of the solutes: totals, balance, bulge and recharge estimate.
pub fn solute_lines(solutes: &[(String, Vec<f64>)]) -> String {
    use crate::output::human;
    let mut out = String::new();
    for (name, v) in solutes {
        if v.len() < crate::solute::SERIES_PER_SOLUTE {
            continue;
        }
        out.push_str(&format!(
            "{name}: stored {} g m-2, in at the surface {} g m-2, out at the bottom {} g m-2; balance error {} g m-2 (relative {}); peak {} g m-3 at {} m",
            human(v[0], 4),
            human(v[1], 4),
            human(v[2], 4),
            human(v[3], 3),
            human(v[4], 3),
            human(v[6], 4),
            human(v[5], 4),
        ));
        if v[7].is_finite() {
            out.push_str(&format!(
                "; chloride mass-balance recharge estimate {} mm/yr",
                human(v[7], 3)
            ));
        }
        out.push('\n');
    }
    out
}

/// A count of periods: whole numbers without decimals, others with six digits.
fn whole_or(x: f64) -> String {
    if (x - x.round()).abs() <= 1e-9 * x.abs().max(1.0) {
        format!("{}", x.round())
    } else {
        crate::output::human(x, 6)
    }
}

impl RunSummary {
    /// The one-screen summary printed at the end of `deepdry run`.
    pub fn text(&self) -> String {
        use crate::output::{human, years};
        let c = &self.counters;
        format!(
            "run finished: {} yr to {} yr in {:.2} s wall time\n\
             steps {} (rejected {}), Newton iterations {}, Jacobian evaluations {}, factorisations {}\n\
             water balance error {} kg m-2 (relative {}); energy balance error {} J m-2 (relative {})\n\
             water flux at the surface {} mm/yr, at the bottom {} mm/yr (positive downward)\n\
             {}{}{}results: {}\n{}",
            years(self.start),
            years(self.end),
            self.wall_seconds,
            c.steps,
            c.rejected,
            c.newton_iterations,
            c.jacobians,
            c.factorizations,
            human(self.balance_abs[1], 4),
            human(self.balance_rel[1], 3),
            human(self.balance_abs[0], 4),
            human(self.balance_rel[0], 3),
            human(self.surface_flux_mm_yr, 4),
            human(self.bottom_flux_mm_yr, 4),
            solute_lines(&self.solutes),
            match &self.spin_up {
                Some(r) => format!("{}\n", r.describe()),
                None => String::new(),
            },
            match &self.cycle_skipping {
                Some(c) => format!(
                    "cycle skipping: {} of {} periods skipped in {} jumps ({} integrated{}); balance error of the jumps {} kg m-2 (water), {} J m-2 (energy), not included above\n",
                    c.skipped,
                    whole_or(c.periods),
                    c.jumps,
                    whole_or(c.periods - c.skipped as f64),
                    if c.trial_periods > 0 {
                        format!(
                            ", and {} trial periods of the implicit jumps in {} steps",
                            c.trial_periods, c.trial_steps
                        )
                    } else {
                        String::new()
                    },
                    human(c.mismatch[0], 3),
                    human(c.mismatch[1], 3)
                ),
                None => String::new(),
            },
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
    /// Continue a finished run from this checkpoint (its newest) past the end it had, to
    /// the model's end, appending to its results. The model is the case with a later end
    /// year, whose physics hash differs from the checkpoint's only through the snapshot at
    /// the end: [`extend`] checks the case against the checkpoint before it starts one.
    Extend(PathBuf),
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
    // A file-size limit (`ulimit -f`) would kill the run with SIGXFSZ and no message; with
    // the signal caught, the write fails (EFBIG) and is reported as an I/O error (exit 4).
    signal_hook::flag::register(
        signal_hook::consts::SIGXFSZ,
        std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false)),
    )
    .map_err(|e| Error::Internal(format!("cannot install the signal handler: {e}")))?;
    Ok(())
}

fn interrupted() -> bool {
    INTERRUPT
        .get()
        .map(|f| f.load(std::sync::atomic::Ordering::Relaxed))
        .unwrap_or(false)
}

/// Asks the simulation to stop after the step during which a signal arrived.
struct StopOnSignal;

impl Observer for StopOnSignal {
    /// Reads no snapshot.
    fn needs_profile(&self) -> bool {
        false
    }
    fn step_accepted(&mut self, _sim: &Simulation, _step: &StepInfo) -> Result<Request> {
        Ok(if interrupted() {
            Request::Stop
        } else {
            Request::Continue
        })
    }
}

/// Refuses to start a new run in `folder` over an earlier one (its results file, or the
/// checkpoints of one whose results file is gone) unless `overwrite`.
fn check_new_output(folder: &Path, results: &Path, overwrite: bool) -> Result<()> {
    if overwrite {
        return Ok(());
    }
    if results.exists() {
        return Err(Error::Io(format!(
            "{}: results file exists already; use --overwrite to replace it, or --out to write elsewhere",
            results.display()
        )));
    }
    let cks = checkpoint::list(folder);
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
fn replace_earlier_run(folder: &Path, keep: Option<&Path>) {
    checkpoint::remove_temporaries(folder);
    let removed = checkpoint::remove_all(folder, keep);
    if removed > 0 {
        log::info!(
            "removed {removed} checkpoint files of the earlier run in {}",
            folder.display()
        );
    }
}

/// Where a run starts: the simulation's beginning, its results file and output position,
/// and the checkpoint a branch descends from.
struct Prepared {
    begin: Begin,
    results: ResultsFile,
    output: OutputPosition,
    parent: Option<(String, f64)>,
    /// A new results file starts with a series record and a snapshot of the start state.
    initial_output: bool,
    /// The solute state to continue (resume) or to start from (branch).
    solutes: Option<crate::solute::SoluteState>,
    /// Where cycle skipping stood (resume; None: start afresh).
    envelope: Option<crate::solve::envelope::EnvelopeState>,
    /// How the periodic initial state was found (None: not one).
    spin_up: Option<crate::sim::initial::PeriodicReport>,
}

/// How the periodic initial state was found, as attributes of the results file's root
/// (units in the names; the summary line as text).
fn write_spin_up(results: &ResultsFile, r: &crate::sim::initial::PeriodicReport) -> Result<()> {
    let yr = SECONDS_PER_YEAR;
    results.set_attr("periodic_state", &r.describe())?;
    for (name, value) in [
        ("periodic_state_periods", r.periods as f64),
        ("periodic_state_steps", r.steps as f64),
        ("periodic_state_water_kg_per_m2", r.water),
        (
            "periodic_state_mean_surface_water_flux_mm_per_yr",
            r.surface_water / r.period * yr,
        ),
        (
            "periodic_state_mean_bottom_water_flux_mm_per_yr",
            r.bottom_water / r.period * yr,
        ),
        (
            "periodic_state_mean_surface_heat_flux_W_per_m2",
            r.surface_energy / r.period,
        ),
        (
            "periodic_state_mean_bottom_heat_flux_W_per_m2",
            r.bottom_energy / r.period,
        ),
        ("mean_steady_state_water_kg_per_m2", r.steady_water),
        (
            "mean_steady_state_surface_water_flux_mm_per_yr",
            r.steady_surface_water * yr,
        ),
        (
            "mean_steady_state_bottom_water_flux_mm_per_yr",
            r.steady_bottom_water * yr,
        ),
    ] {
        results.set_attr_f64(name, value)?;
    }
    Ok(())
}

/// A new run from the case's initial state.
fn start_fresh(
    model: &Model,
    opts: &RunOptions,
    folder: &Path,
    results: &Path,
) -> Result<Prepared> {
    check_new_output(folder, results, opts.overwrite)?;
    let (u, spin_up) = crate::sim::initial::initial_unknowns_reported(model, opts.solver)?;
    // Create (and so lock) the new results file first: a run still writing to the
    // folder makes this fail before its checkpoints are touched.
    let results = ResultsFile::create(results, model, opts.overwrite)?;
    if let Some(r) = &spin_up {
        write_spin_up(&results, r)?;
    }
    replace_earlier_run(folder, None);
    Ok(Prepared {
        begin: Begin::Unknowns {
            t: model.time.start,
            dt: model.time.dt_initial,
            u,
        },
        results,
        output: OutputPosition::default(),
        parent: None,
        initial_output: true,
        solutes: None,
        envelope: None,
        spin_up,
    })
}

/// The run that wrote the checkpoint at `path`, continued (same case), appending to its
/// results file after the rows the checkpoint counts.
fn start_resume(
    model: &Model,
    path: &Path,
    folder: &Path,
    results: &Path,
    check_hash: bool,
) -> Result<Prepared> {
    let ck = checkpoint::read(path)?;
    let case_end = model.time.year(model.time.end);
    if check_hash && ck.physics_hash != checkpoint::physics_hash(model) {
        if let Some(y) = ck.info.run_end_year.filter(|y| *y != case_end) {
            return Err(Error::input(format!(
                "{}: written by this run extended to year {} (the case ends at year {}); continue it with --extend-to {}",
                path.display(),
                crate::output::years(y),
                crate::output::years(case_end),
                y
            )));
        }
        return Err(Error::input(format!(
            "{}: the case differs from the one that wrote this checkpoint (physics hash {} vs {}); to continue with changes, use --start-from to branch",
            path.display(),
            ck.physics_hash,
            checkpoint::physics_hash(model)
        )));
    }
    let n = model.mesh.n_cells();
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
            "{}: the checkpoint is at {:.6e} yr, at or after the case's end {:.6e} yr: nothing to continue (to run on past the end, use --extend-to YEAR)",
            path.display(),
            ck.year(),
            model.time.year(model.time.end)
        )));
    }
    let results = ResultsFile::open_append(
        results,
        &ck.faces,
        &model.solutes,
        crate::output::results::Extras::of(model),
        ck.position.snapshots as usize,
        ck.position.series_rows as usize,
        ck.info.last_series_year,
        ck.info.last_snapshot_year,
    )?;
    // The results after the checkpoint are gone, so later checkpoints in the folder no
    // longer match them (and would outlive the new ones when pruning).
    checkpoint::remove_temporaries(folder);
    let removed = checkpoint::remove_after(folder, ck.year(), path);
    if removed > 0 {
        log::info!(
            "removed {removed} checkpoints later than {} (their results rows were dropped)",
            path.display()
        );
    }
    let output = OutputPosition {
        since_series: ck.position.since_series,
        series_rows: results.records as u64,
        snapshots: results.snapshots as u64,
        last_series_year: results.last_series_year,
        last_snapshot_year: results.last_snapshot_year,
    };
    Ok(Prepared {
        begin: Begin::State(Box::new(ck.state)),
        results,
        output,
        parent: ck.info.parent,
        initial_output: false,
        solutes: ck.solutes,
        envelope: ck.envelope,
        spin_up: None,
    })
}

/// A new run (new results file) from the state of the checkpoint at `path`, with this
/// case's boundary conditions and end time; the mesh and soils must match.
fn start_branch(
    model: &Model,
    opts: &RunOptions,
    path: &Path,
    folder: &Path,
    results: &Path,
) -> Result<Prepared> {
    let ck = checkpoint::read(path)?;
    check_branch(model, path, &ck)?;
    check_new_output(folder, results, opts.overwrite)?;
    let results = ResultsFile::create(results, model, opts.overwrite)?;
    replace_earlier_run(folder, Some(path));
    let parent_year = ck.year();
    results.set_attr("parent_checkpoint", &path.display().to_string())?;
    results.set_attr_f64("parent_time_year", parent_year)?;
    results.set_attr("parent_physics_hash", &ck.physics_hash)?;
    Ok(Prepared {
        begin: Begin::Unknowns {
            t: branch_time(model, &ck),
            dt: ck.state.dt,
            u: ck.state.u,
        },
        results,
        output: OutputPosition::default(),
        parent: Some((path.display().to_string(), parent_year)),
        initial_output: true,
        // The branch carries on the checkpoint's solutes when the case has the same ones;
        // otherwise the case's initial solute profiles apply.
        solutes: ck
            .solutes
            .filter(|s| s.names.iter().eq(model.solutes.iter().map(|m| &m.name))),
        envelope: None,
        spin_up: None,
    })
}

/// Refuses a branch from `ck` (at `path`) onto another mesh, other soils or layers, or
/// past the case's end; warns when the physics differ.
fn check_branch(model: &Model, path: &Path, ck: &Checkpoint) -> Result<()> {
    if ck.faces != model.mesh.faces {
        return Err(Error::input(format!(
            "{}: mesh differs: the checkpoint has {} cells to {} m, the case {} cells to {} m; a branch needs the same mesh",
            path.display(),
            ck.faces.len().saturating_sub(1),
            ck.faces.last().copied().unwrap_or(0.0),
            model.mesh.n_cells(),
            model.mesh.depth()
        )));
    }
    if ck.column_hash != checkpoint::column_hash(model) {
        return Err(Error::input(format!(
            "{}: soils or layers differ from the checkpoint's case; a branch needs the same soils and layers",
            path.display()
        )));
    }
    if ck.physics_hash != checkpoint::physics_hash(model) {
        log::warn!(
            "branching from {}: physics, boundary conditions or step control differ from the parent case",
            path.display()
        );
    }
    let t = branch_time(model, ck);
    if t.is_nan() || t >= model.time.end {
        return Err(Error::input(format!(
            "{}: the checkpoint is at year {}, outside the case's run (year {} up to {}); a branch starts at the checkpoint's time",
            path.display(),
            ck.year(),
            model.time.epoch_year,
            model.time.year(model.time.end)
        )));
    }
    Ok(())
}

/// The checkpoint's time in the case's time frame (seconds since the case's start year).
fn branch_time(model: &Model, ck: &Checkpoint) -> f64 {
    ck.state.t + (ck.epoch_year - model.time.epoch_year) * SECONDS_PER_YEAR
}

/// A run fails (exit code 3) when its cumulative relative balance error at the end exceeds
/// this, for water or energy, and its absolute error exceeds [`BALANCE_FLOOR`] of the
/// column's initial content; the demo and validation cases end below 1.9e-7 relative
/// (see docs/limits.md).
pub const BALANCE_LIMIT: f64 = 1.0e-5;

/// Errors smaller than this fraction of the column's initial content are solver
/// tolerance, whatever their relative size to a flow that is almost zero (a closed
/// column: relative 1.0 from 1.2e-9 of the content). The demo cases end below 3.2e-9.
pub const BALANCE_FLOOR: f64 = 1.0e-8;

/// Refuses a finished run whose balance does not close: the results and the final
/// checkpoint are kept, but the run is not reported as a success.
fn check_final_balance(
    model: &Model,
    state: &StepState,
    abs: &[f64; 2],
    rel: &[f64; 2],
    checkpoint: Option<&Path>,
) -> Result<()> {
    for (k, name, unit) in [(1, "water", "kg m-2"), (0, "energy", "J m-2")] {
        let total = state.initial_totals.get(k).copied().unwrap_or(0.0).abs();
        let bad = !rel[k].is_finite()
            || !abs[k].is_finite()
            || (rel[k] > BALANCE_LIMIT && abs[k].abs() > BALANCE_FLOOR * total);
        if bad {
            return Err(Error::Numerical(format!(
                "balance check failed at year {:.6e}: the cumulative relative {name} balance error {:.3e} ({:.3e} {unit}) exceeds {BALANCE_LIMIT:e} (docs/limits.md); the case's parameters or step control give results that do not conserve {name}: check them (or tighten time.rtol); results and the final checkpoint{} are kept",
                model.time.year(state.t),
                rel[k],
                abs[k],
                checkpoint
                    .map(|p| format!(" {}", p.display()))
                    .unwrap_or_default()
            )));
        }
    }
    Ok(())
}

/// The final check of [`check_final_balance`] for every solute: relative error above
/// [`BALANCE_LIMIT`] with an absolute error above [`BALANCE_FLOOR`] of the stored mass.
fn check_solute_balance(
    model: &Model,
    t: f64,
    column: &crate::solute::SoluteColumn,
    checkpoint: Option<&Path>,
) -> Result<()> {
    let v = column.series_values();
    let per = crate::solute::SERIES_PER_SOLUTE;
    for (k, name) in column.state.names.iter().enumerate() {
        let (storage, abs, rel) = (v[k * per], v[k * per + 3], v[k * per + 4]);
        let bad = !abs.is_finite()
            || !rel.is_finite()
            || (rel > BALANCE_LIMIT && abs.abs() > BALANCE_FLOOR * storage.abs());
        if bad {
            return Err(Error::Numerical(format!(
                "balance check failed at year {:.6e}: the cumulative relative balance error of solute `{name}` {rel:.3e} ({abs:.3e} g m-2) exceeds {BALANCE_LIMIT:e} (docs/limits.md); results and the final checkpoint{} are kept",
                model.time.year(t),
                checkpoint
                    .map(|p| format!(" {}", p.display()))
                    .unwrap_or_default()
            )));
        }
    }
    Ok(())
}

/// Runs `model` (from its initial state, or as `opts.start` says) to its end time.
pub fn run(model: &Model, opts: &RunOptions) -> Result<RunSummary> {
    let wall = Instant::now();
    if let (Start::Resume(path) | Start::Extend(path), true) = (&opts.start, opts.overwrite) {
        return Err(Error::input(format!(
            "{} {} continues the existing results file, --overwrite would discard it: give one of them (--start-from to branch into a new results file)",
            if matches!(opts.start, Start::Resume(_)) {
                "--resume"
            } else {
                "--extend-to from"
            },
            path.display()
        )));
    }
    // Refused before any file is touched.
    let plan = SyncPlan::new(model)?;
    for note in model.notes() {
        log::warn!("{note}");
    }
    let folder = opts
        .out
        .clone()
        .unwrap_or_else(|| model.output.folder.clone());
    std::fs::create_dir_all(&folder)
        .map_err(|e| Error::io(&folder, format!("cannot create the output folder: {e}")))?;
    let _lock = FolderLock::acquire(&folder)?;
    let results_path = folder.join("results.h5");
    let start = match &opts.start {
        Start::Fresh => start_fresh(model, opts, &folder, &results_path)?,
        Start::Resume(path) => start_resume(model, path, &folder, &results_path, true)?,
        Start::Branch(path) => start_branch(model, opts, path, &folder, &results_path)?,
        Start::Extend(path) => {
            let prepared = start_resume(model, path, &folder, &results_path, false)?;
            prepared
                .results
                .set_attr_f64("extended_to_year", model.time.year(model.time.end))?;
            prepared
        }
    };
    let begin_t = match &start.begin {
        Begin::Unknowns { t, .. } => *t,
        Begin::State(s) => s.t,
    };
    let mut sim = Simulation::new(
        model,
        plan,
        start.begin,
        start.output,
        opts.solver,
        start.solutes,
    )?;
    let spin_up = start.spin_up;
    if let Some(envelope) = start.envelope {
        sim.set_envelope_state(envelope);
    }
    // In this order: the bar is cleared before anything is reported, and the results
    // file is flushed before a checkpoint counts its rows.
    let mut progress = Progress::new(opts.progress);
    let mut results = ResultsWriter::new(start.results, &results_path);
    let mut checkpoints =
        Checkpointer::new(&folder, &results_path, &model.checkpoint, start.parent);
    let mut obs: [&mut dyn Observer; 4] = [
        &mut progress,
        &mut results,
        &mut checkpoints,
        &mut StopOnSignal,
    ];
    let advanced = sim
        .start(&mut obs, start.initial_output)
        .and_then(|()| sim.run_to_end(&mut obs));
    let advanced = match advanced {
        // An I/O error before any checkpoint: say that there is nothing to resume from.
        Err(Error::Io(m)) if !checkpoint::list(&folder).is_empty() => Err(Error::Io(m)),
        Err(Error::Io(m)) => Err(Error::Io(format!(
            "{m}; no checkpoint was written yet, so there is nothing to resume from: free space or fix the folder and run again"
        ))),
        other => other,
    };
    if advanced? == Advance::Stopped {
        sim.stop(&mut obs)?;
        return Err(Error::Interrupted(format!(
            "interrupted at t = {:.6e} yr; checkpoint written to {} (continue with --resume)",
            model.time.year(sim.state().t),
            checkpoints.last().unwrap_or(&folder).display()
        )));
    }
    let end = sim.finish(&mut obs)?;
    // The file as a reader finds it: a foreign writer may have damaged it during the run.
    results.close_and_verify(model.time.year(sim.state().t))?;
    check_final_balance(
        model,
        sim.state(),
        &end.balance_abs,
        &end.balance_rel,
        checkpoints.last(),
    )?;
    if let Some(column) = sim.solutes() {
        check_solute_balance(model, sim.state().t, column, checkpoints.last())?;
    }
    let solutes = sim
        .solutes()
        .map(|c| {
            let v = c.series_values();
            c.state
                .names
                .iter()
                .enumerate()
                .map(|(k, n)| {
                    let per = crate::solute::SERIES_PER_SOLUTE;
                    (n.clone(), v[k * per..(k + 1) * per].to_vec())
                })
                .collect()
        })
        .unwrap_or_default();
    let end_year = model.time.year(sim.state().t);
    let cycle_skipping = match (sim.envelope_state(), model.time.cycle_skipping) {
        (Some(env), Some(c)) => Some(SkippingSummary {
            jumps: env.jumps,
            skipped: env.skipped,
            periods: (sim.state().t - model.time.start) / c.period,
            mismatch: [
                env.mismatch.get(1).copied().unwrap_or(f64::NAN),
                env.mismatch.first().copied().unwrap_or(f64::NAN),
            ],
            trial_periods: env.trial_periods,
            trial_steps: env.trial_steps,
        }),
        _ => None,
    };
    Ok(RunSummary {
        results: results_path,
        start: model.time.year(begin_t),
        end: end_year,
        wall_seconds: wall.elapsed().as_secs_f64(),
        counters: end.counters,
        balance_abs: end.balance_abs,
        balance_rel: end.balance_rel,
        surface_flux_mm_yr: mm_per_year(end.surface_water_flux),
        bottom_flux_mm_yr: mm_per_year(end.bottom_water_flux),
        // Moved out of the simulation, not copied (a copy would add the unknowns, the
        // storages and the multistep history, ~430 B per cell, to the run's peak).
        final_state: sim.into_state(),
        overrides: model.overrides.clone(),
        solutes,
        cycle_skipping,
        spin_up,
    })
}

/// The override that sets a case's end year to `year`.
fn end_override(year: f64) -> Result<crate::case::Override> {
    crate::case::Override::parse(&format!("time.end_year={year:?}"))
}

/// `deepdry run CASE --extend-to YEAR`: continues the finished run of the case in its
/// output folder from its final checkpoint (the newest in the folder) to `year`,
/// appending to the same results file; the case's end year is replaced by `year` for this
/// run (an override `time.end_year=YEAR`, shown in the summary). Refused in one line when
/// the folder has no checkpoint, when the newest is before the case's end (the run did not
/// finish: resume it), when `year` is not after it, or when the case differs from the one
/// that wrote it (its physics hash, with the end year that run had, recorded in the
/// checkpoint). The step limits stay those of the case (their defaults follow the span).
/// A run to year 10 extended to 15 is bitwise a run to 15 when year 10 is on the output
/// and checkpoint grids of both and the step limits are the same.
pub fn extend(
    case: &Path,
    overrides: &[crate::case::Override],
    year: f64,
    opts: &RunOptions,
) -> Result<RunSummary> {
    let given = crate::case::load_with_overrides(case, overrides)?;
    if !year.is_finite() {
        return Err(Error::input(format!(
            "--extend-to {year}: not a year; give the year to continue the run to"
        )));
    }
    let folder = opts
        .out
        .clone()
        .unwrap_or_else(|| given.output.folder.clone());
    let case_end = given.time.year(given.time.end);
    let Some((_, newest)) = checkpoint::list(&folder).pop() else {
        return Err(Error::input(format!(
            "{}: no checkpoint in the output folder; --extend-to continues a finished run from its final checkpoint: run the case first (or give its folder with --out)",
            folder.display()
        )));
    };
    let ck = checkpoint::read(&newest)?;
    let ck_year = ck.year();
    let tol = 1e-9 * ck_year.abs().max(1.0);
    // The end of the run that wrote the checkpoint (the case's, for checkpoints that do
    // not record it). The run finished when the checkpoint is at that end or at the
    // case's (an extension interrupted after it is continued by extending again).
    let ran_to = ck.info.run_end_year.unwrap_or(case_end);
    if ck_year < ran_to.min(case_end) - tol {
        return Err(Error::input(format!(
            "{}: the newest checkpoint is at year {}, before the end of the run that wrote it (year {}): the run did not finish; continue it with --resume {}",
            newest.display(),
            crate::output::years(ck_year),
            crate::output::years(ran_to),
            newest.display()
        )));
    }
    if year <= ck_year + tol {
        return Err(Error::input(format!(
            "--extend-to {year}: not after the run's end (year {}, final checkpoint {}); give a later year",
            crate::output::years(ck_year),
            newest.display()
        )));
    }
    // The run keeps the step limits of the case it continues: their defaults follow the
    // span (backward Euler's largest step is 1/100 of it), which the new end changes.
    let steps = (given.time.dt_initial, given.time.dt_min, given.time.dt_max);
    let with_end = |y: f64| -> Result<Model> {
        let mut all = overrides.to_vec();
        all.push(end_override(y)?);
        let mut m = crate::case::load_with_overrides(case, &all)?;
        (m.time.dt_initial, m.time.dt_min, m.time.dt_max) = steps;
        Ok(m)
    };
    // The case that wrote the checkpoint: this one, run to the end that run had.
    let wrote = if ran_to == case_end {
        given
    } else {
        with_end(ran_to)?
    };
    let hash = checkpoint::physics_hash(&wrote);
    if ck.physics_hash != hash {
        return Err(Error::input(format!(
            "{}: the case differs from the one that wrote this run's final checkpoint (physics hash {} vs {}); --extend-to continues the same case: to continue with changes, branch with --start-from {} --out ANOTHER_FOLDER",
            newest.display(),
            ck.physics_hash,
            hash,
            newest.display()
        )));
    }
    let model = with_end(year)?;
    let opts = RunOptions {
        start: Start::Extend(newest),
        ..opts.clone()
    };
    run(&model, &opts)
}
