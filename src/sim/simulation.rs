//! A simulation: the model's System and Stepper, advanced from sync time to sync time, and
//! the observers it tells what happened (started, step accepted, series record, snapshot,
//! checkpoint, finished, failed). The simulation itself writes no file and knows no
//! terminal or signal: the results file, the checkpoints, the progress bar, an in-memory
//! recorder and a stop on signals are observers (see [`super::observers`]).
//!
//! What it advances is serialisable: the stepper's [`StepState`] and the [`OutputPosition`]
//! (a checkpoint holds both). Every simulation of a model performs the same operations
//! whatever observes it, so a run writing files and one recording in memory give the
//! same numbers bitwise.

use super::implicit_jump::implicit_jump;
use crate::error::{Error, Result};
use crate::model::Model;
use crate::output::diagnostics::{drying_front_depth, Profile, SeriesRecord};
use crate::physics::{column_balance, ColumnStepper as Stepper, System};
use crate::props::constants::SECONDS_PER_YEAR;
use crate::solute::{SoluteColumn, SoluteState};
use crate::solve::envelope::{self, EnvelopeOptions, EnvelopeState};
use crate::solve::linear::{make_solver, SolverKind};
use crate::solve::newton::NewtonFailure;
use crate::solve::stepper::{Counters, StepFailure, StepInfo, StepOptions, StepState};

use super::times::{is_member, SyncPlan};

/// Largest change of any cell's osmotic head [m] accepted between two coupling
/// iterations of a step: 1 mm of head changes the Kelvin relative humidity by 7e-9
/// relative (g Mw/(R T) ≈ 7.3e-5 m⁻¹ at 20 °C), below the flow's own tolerances.
pub const OSMOTIC_TOLERANCE_M: f64 = 1.0e-3;
/// Most coupling iterations per step (see [`Simulation::coupled_step`]).
pub const OSMOTIC_ITERATIONS: usize = 4;

/// The vegetation series (name, units, long name), in the order of
/// [`Simulation::extra_series`].
pub const VEGETATION_SERIES: [(&str, &str, &str); 4] = [
    (
        "root_water_uptake",
        "kg m-2 s-1",
        "root water uptake of the column (actual transpiration)",
    ),
    (
        "root_water_uptake_cumulative",
        "kg m-2",
        "root water uptake since the start, integrated with the stepper's weights",
    ),
    (
        "potential_transpiration",
        "kg m-2 s-1",
        "potential transpiration of the plants in force",
    ),
    (
        "potential_transpiration_cumulative",
        "kg m-2",
        "potential transpiration since the case's start time (exact integral of the schedule over the periods with plants)",
    ),
];

/// The surface store's series (name, units, long name), in the order of
/// [`Simulation::extra_series`] (after the vegetation's).
pub const SURFACE_STORE_SERIES: [(&str, &str, &str); 4] = [
    (
        "ponding_depth",
        "m",
        "depth of the water ponded on the surface",
    ),
    (
        "runoff",
        "kg m-2 s-1",
        "runoff from the surface store (water above the largest ponding depth)",
    ),
    (
        "runoff_cumulative",
        "kg m-2",
        "runoff since the start, integrated with the stepper's weights (closes the water balance with the surface and bottom cumulative series and the storage)",
    ),
    (
        "pond_water_storage",
        "kg m-2",
        "water held in the pond (part of water_storage)",
    ),
];

/// The cycle-skipping series (name, units, long name), in the order of
/// [`Simulation::extra_series`] (after the surface store's).
pub const CYCLE_SKIPPING_SERIES: [(&str, &str, &str); 4] = [
    (
        "skipped_periods",
        "1",
        "forcing periods skipped by the jump that ends at this record (0: the record is of an integrated step; > 0: the state is extrapolated along the drift of the last integrated period, not simulated)",
    ),
    (
        "skipped_periods_cumulative",
        "1",
        "forcing periods skipped by jumps since the start",
    ),
    (
        "jump_water_balance_error_cumulative",
        "kg m-2",
        "water balance error of the jumps since the start (storage change of the extrapolated states minus the extrapolated net inflow); not part of water_balance_error",
    ),
    (
        "jump_energy_balance_error_cumulative",
        "J m-2",
        "energy balance error of the jumps since the start; not part of energy_balance_error",
    ),
];

/// The envelope settings of a model's cycle skipping (None: off).
pub fn envelope_options(model: &Model) -> Option<EnvelopeOptions> {
    model.time.cycle_skipping.map(|c| EnvelopeOptions {
        period: c.period,
        exact_periods: c.exact_periods,
        max_jump: c.max_jump_periods,
        tolerance: c.tolerance,
        dt_after_jump: model.time.dt_initial,
        implicit: c.implicit,
    })
}

/// Potential transpiration since the case's start time up to `t` [kg m⁻²]: the exact
/// integral of the schedule over the periods with plants.
pub fn potential_transpiration_cumulative(model: &Model, t: f64) -> f64 {
    let periods = &model.vegetation.periods;
    let mut total = 0.0;
    for (k, (start, veg)) in periods.iter().enumerate() {
        let Some(v) = veg else { continue };
        let a = start.max(model.time.start);
        let b = periods.get(k + 1).map_or(t, |p| p.0.min(t));
        total += v.transpiration.integral(a, b);
    }
    crate::props::constants::WATER_DENSITY * total
}

/// One accepted flow step, then the solutes over it with the step's formula.
fn flow_then_solutes(
    st: &mut Stepper,
    sys: &mut System,
    column: &mut SoluteColumn,
    t_sync: f64,
) -> std::result::Result<StepInfo, StepError> {
    let info = st.step(sys, t_sync).map_err(StepError::Flow)?;
    column
        .advance(sys, &st.state, &info)
        .map_err(StepError::Other)?;
    Ok(info)
}

/// Why a step could not be taken.
enum StepError {
    /// The flow step failed at the minimum Δt (the observers are told).
    Flow(StepFailure),
    /// Another error (a solute solve).
    Other(Error),
}

/// A one-line message for a step that failed at the minimum Δt.
pub fn numerical_message(sys: &System, f: &StepFailure, what: &str, epoch_year: f64) -> Error {
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
        "{what}: step failed at t = {:.6e} yr with dt = {:.3e} s (the minimum): {kind}; worst {} residual {:.3e} (scaled; unknown {}) at depth {:.4} m (cell {cell}){}",
        epoch_year + f.t / SECONDS_PER_YEAR,
        f.dt,
        names[row.min(2)],
        res,
        unknowns[row.min(2)],
        sys.centers[cell],
        saturation_hint(sys),
    ))
}

/// A hint for failures where soil reaches saturation: a van Genuchten soil with n < 2 and
/// no air entry has a Mualem conductivity whose slope grows without bound as h → 0, which
/// Newton cannot follow; the air-entry modification of Vogel et al. (2001) makes it finite.
fn saturation_hint(sys: &System) -> String {
    use crate::props::retention::RetentionLaw;
    let near_saturation = sys.cells.iter().any(|c| c.h.v > -0.05);
    if !near_saturation {
        return String::new();
    }
    sys.soils
        .iter()
        .find_map(|s| match s.retention.law {
            RetentionLaw::VanGenuchten { n, air_entry, .. } if n < 2.0 && air_entry == 0.0 => {
                Some(format!(
                    "; the soil reaches saturation and soil `{}` (van Genuchten n = {n} < 2) has no air entry: its conductivity's slope is unbounded at saturation; add air_entry_m = 0.02 to its van_genuchten table (Vogel et al. 2001; docs/case-file.md)",
                    crate::case::summary::printable(&s.name)
                ))
            }
            _ => None,
        })
        .unwrap_or_default()
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
            },
        },
        newton: crate::solve::newton::NewtonOptions {
            max_iter: model.time.max_newton,
            residual_tol: model.time.newton_tolerance,
            cumulative_balance_tol: Some(model.time.balance_tolerance),
            ..Default::default()
        },
        ..Default::default()
    }
}

/// The series record for the current (evaluated) state.
pub fn series_record(sys: &System, st: &Stepper, dt: f64, iters: usize) -> SeriesRecord {
    let (abs, rel) = column_balance(sys, st);
    let (top, bot) = sys.boundary_fluxes();
    // Conserved quantities in the stepper's order [energy, water]; the bottom's outflow is
    // the top's inflow minus the net inflow minus what the sinks (roots) took.
    let (w_top, w_net, w_sink) = (&st.state.top_inflow, &st.state.inflow, &st.state.sink);
    let w_runoff = &st.state.runoff;
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
        surface_water_cumulative: w_top[1],
        bottom_water_cumulative: w_top[1] - w_net[1] - w_sink[1] - w_runoff[1],
        surface_energy_cumulative: w_top[0],
        bottom_energy_cumulative: w_top[0] - w_net[0] - w_sink[0] - w_runoff[0],
    }
}

/// Where the outputs of a simulation stand: what a checkpoint records besides the stepper
/// state, and what a resumed run continues from.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct OutputPosition {
    /// Accepted steps since the last series record.
    pub since_series: u64,
    /// Series records and snapshots given to the observers so far (in a resumed run,
    /// counting those of the run it continues).
    pub series_rows: u64,
    pub snapshots: u64,
    /// Time [yr] of the last series record and of the last snapshot.
    pub last_series_year: Option<f64>,
    pub last_snapshot_year: Option<f64>,
}

/// How a simulation begins.
#[derive(Debug, Clone)]
pub enum Begin {
    /// From unknowns `u` at time `t` with a first step `dt` (a new run, or a branch).
    Unknowns { t: f64, dt: f64, u: Vec<f64> },
    /// From a stepper state (a resumed run).
    State(Box<StepState>),
}

/// What an observer asks for after an accepted step.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Request {
    Continue,
    /// A checkpoint now (e.g. a wall-clock interval has passed).
    Checkpoint,
    /// Stop after this step (e.g. a signal): the advance returns [`Advance::Stopped`].
    Stop,
}

/// How an advance ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Advance {
    /// The target time (or the end) was reached.
    Reached,
    /// An observer asked to stop; the state is that of the last accepted step.
    Stopped,
}

/// How a simulation ended, for [`Observer::finished`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Ending {
    /// At the end time.
    End,
    /// Stopped early on request (after a checkpoint of the state reached).
    Stopped,
}

/// The balance at the state being checkpointed, evaluated there.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CheckpointData {
    /// Balance errors [energy J m⁻², water kg m⁻²] and the same relative.
    pub balance_abs: [f64; 2],
    pub balance_rel: [f64; 2],
}

/// The figures of a finished simulation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Finish {
    pub balance_abs: [f64; 2],
    pub balance_rel: [f64; 2],
    /// Water fluxes at the surface and the bottom [kg m⁻² s⁻¹], positive downward.
    pub surface_water_flux: f64,
    pub bottom_water_flux: f64,
    pub counters: Counters,
}

/// Something that follows a simulation. Every method has a default that does nothing;
/// an error returned stops the simulation with that error (except in [`Observer::failed`]).
/// Observers are called in the order given, so one that must act before another (the
/// results file is flushed before the checkpoint that counts its rows) comes first.
pub trait Observer {
    /// The simulation starts (after the initial series record and snapshot, if any).
    fn started(&mut self, _sim: &Simulation) -> Result<()> {
        Ok(())
    }
    /// A step was accepted (and its series record and snapshot, if any, given).
    fn step_accepted(&mut self, _sim: &Simulation, _step: &StepInfo) -> Result<Request> {
        Ok(Request::Continue)
    }
    /// A series record of the current state.
    fn series(&mut self, _sim: &Simulation, _record: &SeriesRecord) -> Result<()> {
        Ok(())
    }
    /// A snapshot time was reached: the profiles of the state, evaluated directly (the
    /// system holds that evaluation). `profile` is filled only when some observer
    /// [`Observer::needs_profile`] (else empty).
    fn snapshot(&mut self, _sim: &Simulation, _time_year: f64, _profile: &Profile) -> Result<()> {
        Ok(())
    }
    /// Whether [`Observer::snapshot`] reads its `profile` (true), or takes what it needs
    /// from the simulation's system (false): where no observer reads it, the profiles
    /// are not gathered (80 B per cell at each snapshot).
    fn needs_profile(&self) -> bool {
        true
    }
    /// A checkpoint time was reached (or one was asked for): the state, its output
    /// position and `data` are what a checkpoint records.
    fn checkpoint(&mut self, _sim: &Simulation, _data: &CheckpointData) -> Result<()> {
        Ok(())
    }
    /// The simulation ended.
    fn finished(&mut self, _sim: &Simulation, _ending: Ending) -> Result<()> {
        Ok(())
    }
    /// A step failed at the minimum Δt; the simulation's state is the last good one. A
    /// note returned is appended to the error message; an error returned is reported as
    /// "the last good state could not be saved" and the later observers are not called.
    fn failed(&mut self, _sim: &Simulation, _data: &CheckpointData) -> Result<Option<String>> {
        Ok(None)
    }
}

/// The model's System and Stepper, the sync plan and the output position.
pub struct Simulation<'m> {
    model: &'m Model,
    sys: System,
    st: Stepper,
    plan: SyncPlan,
    output: OutputPosition,
    /// Reused buffers for the snapshots.
    profile: Profile,
    /// The solutes carried along with each step (None when the case has none).
    solutes: Option<SoluteColumn>,
    /// Cycle skipping: its settings and where it stands (None: off).
    envelope: Option<(EnvelopeOptions, EnvelopeState)>,
    /// Periods skipped by the jump that ends at the current state (0: the state was
    /// reached by a step); for the series record of a jump.
    just_skipped: u64,
    /// The linear solver's kind (for the trial periods of implicit jumps).
    solver: SolverKind,
}

impl<'m> Simulation<'m> {
    /// A simulation of `model` from `begin`, with the outputs at `output` (the default for
    /// a new run), solving linear systems with `solver`. The solutes (if any) start from
    /// `solutes` when given (a resumed run continues that state; a branch, `Begin::Unknowns`,
    /// starts from its masses), else from the case's initial solute profiles.
    pub fn new(
        model: &'m Model,
        plan: SyncPlan,
        begin: Begin,
        output: OutputPosition,
        solver: SolverKind,
        solutes: Option<SoluteState>,
    ) -> Result<Simulation<'m>> {
        let mut sys = System::new(model);
        let fresh = matches!(begin, Begin::Unknowns { .. });
        let state = match begin {
            Begin::Unknowns { t, dt, u } => Stepper::initial_state(&mut sys, t, dt, u),
            Begin::State(state) => *state,
        };
        let lin = make_solver(solver, sys.n);
        let st = Stepper::new(&mut sys, state, step_options(model), lin);
        let solutes = if model.solutes.is_empty() {
            None
        } else {
            let mut column = SoluteColumn::new(model);
            // The flow at the start state, evaluated directly (the stepper's next step
            // evaluates it afresh, so this changes nothing it computes).
            let (t, u) = (st.state.t, st.state.u.clone());
            sys.evaluate_direct(t, &u);
            match solutes {
                Some(state) => column.set_state(state, &mut sys, t, &u, fresh)?,
                None if fresh => column.start(&mut sys, t, &u)?,
                None => {
                    return Err(Error::input(
                        "the checkpoint carries no solute state, but the case has [[solutes]]; branch from it with --start-from instead".to_string(),
                    ))
                }
            }
            // The osmotic heads of the start state. (Without an osmotic effect the system
            // is left alone: its kept evaluations are part of the resumed state.)
            if column.osmotic() {
                sys.set_osmotic_heads(&column.state.osmotic_head);
            }
            Some(column)
        };
        let envelope = envelope_options(model).map(|o| {
            let nq = st.state.inflow.len();
            let state = EnvelopeState::new(st.state.t, model.time.start, o.period, nq);
            (o, state)
        });
        Ok(Simulation {
            model,
            sys,
            st,
            plan,
            output,
            profile: Profile::default(),
            solutes,
            envelope,
            just_skipped: 0,
            solver,
        })
    }

    /// Steps to take as given (see [`crate::solve::stepper::Replay`]); None: by the
    /// error test.
    pub fn set_replay(&mut self, replay: Option<crate::solve::stepper::Replay>) {
        self.st.replay = replay;
    }

    /// The replay going on, if any (`broken` when a given step failed).
    pub fn replay(&self) -> Option<&crate::solve::stepper::Replay> {
        self.st.replay.as_ref()
    }

    /// Where cycle skipping stands (None: off).
    pub fn envelope_state(&self) -> Option<&EnvelopeState> {
        self.envelope.as_ref().map(|e| &e.1)
    }

    /// Continues cycle skipping from `state` (a resumed run; ignored when it is off).
    pub fn set_envelope_state(&mut self, state: EnvelopeState) {
        if let Some(e) = self.envelope.as_mut() {
            e.1 = state;
        }
    }

    /// The solute transport (None when the case has no solutes).
    pub fn solutes(&self) -> Option<&SoluteColumn> {
        self.solutes.as_ref()
    }

    /// The series values beyond [`SeriesRecord`]: every solute's
    /// ([`crate::solute::SERIES_FIELDS`]), then the vegetation's
    /// ([`VEGETATION_SERIES`]) when the case has plants, at the current state.
    pub fn extra_series(&self) -> Vec<f64> {
        let mut out = self
            .solutes
            .as_ref()
            .map(|c| c.series_values())
            .unwrap_or_default();
        if self.sys.has_vegetation {
            let t = self.st.state.t;
            let rate = self.sys.plants(t).map_or(0.0, |(_, tp)| tp);
            out.extend_from_slice(&[
                self.sys.uptake_totals[1],
                self.st.state.sink.get(1).copied().unwrap_or(f64::NAN),
                crate::props::constants::WATER_DENSITY * rate,
                potential_transpiration_cumulative(self.model, t),
            ]);
        }
        if self.sys.surface_store {
            let pond = self.sys.pond_depth(self.st.state.u[crate::physics::H]);
            out.extend_from_slice(&[
                pond,
                self.sys.runoff[1],
                self.st.state.runoff.get(1).copied().unwrap_or(f64::NAN),
                crate::props::constants::WATER_DENSITY * pond,
            ]);
        }
        if let Some((_, env)) = &self.envelope {
            let mismatch = |k: usize| env.mismatch.get(k).copied().unwrap_or(f64::NAN);
            out.extend_from_slice(&[
                self.just_skipped as f64,
                env.skipped as f64,
                mismatch(1),
                mismatch(0),
            ]);
        }
        out
    }

    pub fn model(&self) -> &'m Model {
        self.model
    }
    /// The system, as last evaluated.
    /// The heap arrays of the run's per-cell state: the system, the stepper (with Newton
    /// and the linear solver) and the snapshot buffers; the solutes' are not listed (see
    /// [`crate::memory`]).
    pub fn arrays(&self) -> Vec<crate::memory::ArrayCost> {
        use crate::memory::push;
        let mut out = Vec::new();
        self.sys.arrays(&mut out);
        self.st.arrays(&mut out);
        let p = &self.profile;
        for v in [
            &p.temperature_c,
            &p.head,
            &p.liquid_content,
            &p.vapor_density,
            &p.relative_humidity,
            &p.liquid_iso,
            &p.liquid_th,
            &p.vapor_iso,
            &p.vapor_th,
            &p.heat,
            &p.root_water_uptake,
        ] {
            push(&mut out, "snapshot buffers", "profiles", v);
        }
        out
    }

    /// The stepper state, the simulation given up (see [`Simulation::state`]).
    pub fn into_state(self) -> StepState {
        self.st.state
    }

    pub fn system(&self) -> &System {
        &self.sys
    }
    /// The stepper state (time, unknowns, history, counters).
    pub fn state(&self) -> &StepState {
        &self.st.state
    }
    /// The states at which the column's kept evaluations were made (cells, faces), which
    /// a checkpoint saves beside [`Simulation::state`] so that a resume continues bitwise
    /// (borrowed: no copy of 72 B per cell at each checkpoint).
    pub fn kept_states(&self) -> (&[f64], &[f64]) {
        self.sys.linearization_states()
    }
    pub fn output(&self) -> &OutputPosition {
        &self.output
    }
    pub fn plan(&self) -> &SyncPlan {
        &self.plan
    }

    /// Tells the observers the simulation starts; with `initial_output`, first gives them
    /// a series record and a snapshot of the start state (a new results file begins so).
    pub fn start(&mut self, obs: &mut [&mut dyn Observer], initial_output: bool) -> Result<()> {
        if initial_output {
            self.fill_profiles(needs_profile(obs));
            let rec = series_record(&self.sys, &self.st, 0.0, 0);
            self.emit_series(obs, rec)?;
            self.emit_snapshot(obs)?;
        }
        for o in obs.iter_mut() {
            o.started(self)?;
        }
        Ok(())
    }

    /// Advances through every sync time after the current time to the end time, or until
    /// an observer asks to stop.
    pub fn run_to_end(&mut self, obs: &mut [&mut dyn Observer]) -> Result<Advance> {
        if self.envelope.is_some() {
            return self.run_skipping(obs);
        }
        let t_begin = self.st.state.t;
        for k in 0..self.plan.syncs.len() {
            let t_sync = self.plan.syncs[k];
            if t_sync <= t_begin {
                continue;
            }
            if self.advance_to(t_sync, obs)? == Advance::Stopped {
                return Ok(Advance::Stopped);
            }
        }
        Ok(Advance::Reached)
    }

    /// [`Simulation::run_to_end`] with cycle skipping: from period boundary to period
    /// boundary (landing on the plan's sync times on the way), each boundary state kept;
    /// after a block of exact periods a jump along the drift of the last one, as long as
    /// its error estimate allows and never onto or past a sync time (snapshots,
    /// checkpoint times and the end are always simulated). See [`crate::solve::envelope`].
    fn run_skipping(&mut self, obs: &mut [&mut dyn Observer]) -> Result<Advance> {
        let Some((opts, _)) = self.envelope else {
            return Ok(Advance::Reached);
        };
        let (t0, end) = (self.model.time.start, self.model.time.end);
        let p = opts.period;
        // The start of a run on a boundary is the first point of its first block.
        if let Some((_, env)) = self.envelope.as_mut() {
            if env.points.is_empty() && self.st.state.t == envelope::boundary(t0, p, env.period) {
                env.push(&self.st.state);
            }
        }
        loop {
            let t = self.st.state.t;
            if t >= end {
                return Ok(Advance::Reached);
            }
            let period = self.envelope.as_ref().map_or(0, |e| e.1.period);
            let next_boundary = envelope::boundary(t0, p, period + 1);
            let target = next_boundary.min(end);
            // The plan's sync times before the boundary first.
            let mut k = self.plan.syncs.partition_point(|&s| s <= t);
            while k < self.plan.syncs.len() && self.plan.syncs[k] < target {
                if self.advance_to(self.plan.syncs[k], obs)? == Advance::Stopped {
                    return Ok(Advance::Stopped);
                }
                k += 1;
            }
            if self.st.state.t < target && self.advance_to(target, obs)? == Advance::Stopped {
                return Ok(Advance::Stopped);
            }
            if self.st.state.t != next_boundary {
                continue;
            }
            let Some((_, env)) = self.envelope.as_mut() else {
                return Ok(Advance::Reached);
            };
            env.period += 1;
            env.exact += 1;
            env.push(&self.st.state);
            if env.exact < opts.exact_periods || env.points.len() < 3 {
                continue;
            }
            let t = self.st.state.t;
            // Whole periods before the next sync time, landing strictly before it.
            let next_sync = self
                .plan
                .syncs
                .get(self.plan.syncs.partition_point(|&s| s <= t))
                .copied()
                .unwrap_or(end);
            let mut room = ((next_sync - t) / p).floor().max(0.0) as u64;
            while room > 0 && envelope::boundary(t0, p, env.period + room) >= next_sync {
                room -= 1;
            }
            // The implicit jump where it is asked for and not paused after failures;
            // where it is abandoned, the explicit jump of the same block.
            let mut implicit_done = None;
            if opts.implicit && env.implicit_pause > 0 {
                env.implicit_pause -= 1;
            } else if opts.implicit {
                // Landing at least a block before the next sync time: what is output is
                // then E integrated periods past a landing (the error estimate counts
                // on it).
                let asked = envelope::implicit_jump_size(
                    &opts,
                    env,
                    room.saturating_sub(opts.exact_periods),
                );
                let k = env.period;
                let time_of = |m: u64| envelope::boundary(t0, p, k + m);
                if asked > 0 {
                    let found = implicit_jump(
                        self.model,
                        &env.points,
                        env.older_point(),
                        &opts,
                        asked,
                        &time_of,
                        self.solver,
                    );
                    let work = match &found {
                        Ok((_, w)) | Err((_, w)) => *w,
                    };
                    env.trial_periods += work.periods;
                    env.trial_steps += work.steps;
                    match found {
                        Ok((jump, _)) => {
                            let m = jump.periods;
                            let left = envelope::land(
                                &mut self.sys,
                                &mut self.st,
                                env,
                                &opts,
                                m,
                                time_of(m),
                                jump.landing,
                            );
                            env.last_error = jump.error;
                            env.last_implicit = true;
                            env.implicit_failures = 0;
                            implicit_done = Some((m, left, jump.error));
                        }
                        Err((why, _)) => {
                            // Explicit jumps for the next 2^f − 1 blocks after f failures
                            // in a row (at most 63): each failure cost trial periods.
                            env.implicit_failures += 1;
                            env.implicit_pause = (1u64 << env.implicit_failures.min(6)) - 1;
                            log::debug!(
                                "cycle skipping: implicit jump of {asked} periods abandoned at year {:.6}: {why}; explicit jumps for {} blocks",
                                self.model.time.year(t),
                                env.implicit_pause
                            );
                        }
                    }
                }
            }
            let (m, left, err) = match implicit_done {
                Some(done) => done,
                None => {
                    // The error tests read the state's cells: evaluate it directly (the
                    // same whatever the solver kept, so a resumed run decides the same).
                    self.sys.evaluate_direct(t, &self.st.state.u);
                    let Some((_, env)) = self.envelope.as_mut() else {
                        return Ok(Advance::Reached);
                    };
                    let err = envelope::drift_change(&self.sys, &env.points, opts.tolerance);
                    env.last_error = err;
                    let m = envelope::jump_size(err, &opts, env.last_jump, room);
                    if m == 0 {
                        continue;
                    }
                    let t_new = envelope::boundary(t0, p, env.period + m);
                    let left = envelope::jump(&mut self.sys, &mut self.st, env, &opts, m, t_new);
                    env.last_implicit = false;
                    (m, left, err)
                }
            };
            // (The landing put the state at the jump's end.)
            log::debug!(
                "cycle skipping: jumped {m} periods to year {:.6} (error estimate {err:.3e}, storage residual {left:.1e})",
                self.model.time.year(self.st.state.t)
            );
            self.just_skipped = m;
            let rec = series_record(&self.sys, &self.st, m as f64 * p, 0);
            let emitted = self.emit_series(obs, rec);
            self.just_skipped = 0;
            emitted?;
        }
    }

    /// Steps until the time is `t_sync` (landing on it exactly), giving series records,
    /// snapshots and checkpoints on the way as the case asks. `t_sync` should be one of
    /// the plan's sync times: landing elsewhere changes the steps taken after it.
    ///
    /// A step failing at the minimum Δt is an [`Error::Numerical`] that names the worst
    /// residual, after the observers were told ([`Observer::failed`]).
    pub fn advance_to(&mut self, t_sync: f64, obs: &mut [&mut dyn Observer]) -> Result<Advance> {
        let model = self.model;
        while self.st.state.t < t_sync {
            let info = match self.coupled_step(t_sync) {
                Ok(info) => info,
                Err(StepError::Flow(f)) => return Err(self.fail(&f, obs)),
                Err(StepError::Other(e)) => return Err(e),
            };
            self.output.since_series += 1;
            let landed = self.st.state.t == t_sync;
            if landed && is_member(&self.plan.jumps, t_sync) {
                self.st.restart_history();
                // After a jump in value the first step has no error estimate (no
                // history): start it from the first step size, as at the start of a run,
                // so that the response to the jump is resolved (a shift of climate or the
                // start of a flood) and not taken in one unchecked step.
                if is_member(&self.plan.value_jumps, t_sync) {
                    self.st.state.dt = self.st.state.dt.min(model.time.dt_initial);
                }
            }
            let at_snapshot = landed && is_member(&model.output.snapshot_times, t_sync);
            if self.output.since_series >= model.output.series_every as u64
                || at_snapshot
                || self.st.state.t == model.time.end
            {
                let rec = series_record(&self.sys, &self.st, info.dt, info.newton_iterations);
                self.emit_series(obs, rec)?;
            }
            if at_snapshot {
                // The profiles of the state evaluated directly, not linearised: the same
                // whatever the solver kept (a branch from this state shows the same).
                self.fill_profiles(needs_profile(obs));
                self.emit_snapshot(obs)?;
            }
            let mut checkpoint = landed && is_member(&self.plan.checkpoints, t_sync);
            let mut stop = false;
            for o in obs.iter_mut() {
                match o.step_accepted(self, &info)? {
                    Request::Continue => {}
                    Request::Checkpoint => checkpoint = true,
                    Request::Stop => stop = true,
                }
            }
            if checkpoint {
                self.checkpoint(obs)?;
            }
            if stop {
                return Ok(Advance::Stopped);
            }
        }
        Ok(Advance::Reached)
    }

    /// One accepted step of the flow and, when the case has solutes, of the solutes with
    /// the same formula. With an osmotic effect, flow and solutes are coupled both ways
    /// by fixed-point iteration within the step: the flow step is solved with the osmotic
    /// heads of the current guess (held constant over the step), the solutes follow, the
    /// heads are recomputed from the new concentrations and temperatures; when they moved
    /// by more than [`OSMOTIC_TOLERANCE_M`] the step is taken again from the same start
    /// with the new heads; after [`OSMOTIC_ITERATIONS`] such tries, with half the step
    /// (the coupling's contraction factor shrinks with the step). The first guess is the
    /// last step's result, part of the checkpointed state.
    fn coupled_step(&mut self, t_sync: f64) -> std::result::Result<StepInfo, StepError> {
        let Some(column) = self.solutes.as_mut() else {
            return self.st.step(&mut self.sys, t_sync).map_err(StepError::Flow);
        };
        if !column.osmotic() {
            return flow_then_solutes(&mut self.st, &mut self.sys, column, t_sync);
        }
        let mut start_flow = self.st.state.clone();
        let start_solutes = column.state.clone();
        let mut guess = column.state.osmotic_head.clone();
        let mut heads = Vec::new();
        let mut iteration = 0;
        loop {
            iteration += 1;
            self.sys.set_osmotic_heads(&guess);
            let info = flow_then_solutes(&mut self.st, &mut self.sys, column, t_sync)?;
            column.osmotic_heads_into(&self.sys, &mut heads);
            let moved = heads
                .iter()
                .zip(&guess)
                .fold(0.0f64, |a, (x, y)| a.max((x - y).abs()));
            let smallest = info.dt <= self.st.opts.dt_min * (1.0 + 1e-9);
            if moved <= OSMOTIC_TOLERANCE_M || (smallest && iteration >= OSMOTIC_ITERATIONS) {
                if moved > OSMOTIC_TOLERANCE_M {
                    log::warn!(
                        "osmotic coupling: heads still moved {moved:.3e} m after {iteration} iterations at the smallest step, t = {:.6e} yr; step accepted",
                        self.model.time.year(self.st.state.t)
                    );
                }
                column.state.osmotic_head.clone_from(&heads);
                return Ok(info);
            }
            // Again from the start of the step: with the new heads, or, when the
            // iteration does not settle within OSMOTIC_ITERATIONS, with half the step
            // (the coupling weakens with the step) from the start's heads.
            let rejected = self.st.state.counters.rejected;
            self.st.state.clone_from(&start_flow);
            column.state.clone_from(&start_solutes);
            if iteration % OSMOTIC_ITERATIONS == 0 {
                start_flow.dt = (0.5 * info.dt).max(self.st.opts.dt_min);
                start_flow.counters.rejected = rejected + 1;
                self.st.state.clone_from(&start_flow);
                guess.clone_from(&start_solutes.osmotic_head);
            } else {
                std::mem::swap(&mut guess, &mut heads);
            }
        }
    }

    /// Gives the observers a checkpoint of the current state.
    pub fn checkpoint(&mut self, obs: &mut [&mut dyn Observer]) -> Result<()> {
        let data = self.checkpoint_data();
        for o in obs.iter_mut() {
            o.checkpoint(self, &data)?;
        }
        Ok(())
    }

    /// Ends a simulation stopped on request: a checkpoint of the state reached, then
    /// [`Observer::finished`] with [`Ending::Stopped`].
    pub fn stop(&mut self, obs: &mut [&mut dyn Observer]) -> Result<()> {
        self.checkpoint(obs)?;
        for o in obs.iter_mut() {
            o.finished(self, Ending::Stopped)?;
        }
        Ok(())
    }

    /// Ends a simulation at its end time: the final checkpoint, [`Observer::finished`],
    /// and the final balance and boundary fluxes.
    pub fn finish(&mut self, obs: &mut [&mut dyn Observer]) -> Result<Finish> {
        self.checkpoint(obs)?;
        for o in obs.iter_mut() {
            o.finished(self, Ending::End)?;
        }
        self.sys.evaluate(self.st.state.t, &self.st.state.u);
        let (balance_abs, balance_rel) = column_balance(&self.sys, &self.st);
        let (top, bottom) = self.sys.boundary_fluxes();
        Ok(Finish {
            balance_abs,
            balance_rel,
            surface_water_flux: top[1],
            bottom_water_flux: bottom[1],
            counters: self.st.state.counters,
        })
    }

    /// The balance at the current state. Evaluating does not change what the next step
    /// computes: every step evaluates its start state afresh.
    fn checkpoint_data(&mut self) -> CheckpointData {
        self.sys.evaluate(self.st.state.t, &self.st.state.u);
        let (balance_abs, balance_rel) = column_balance(&self.sys, &self.st);
        CheckpointData {
            balance_abs,
            balance_rel,
        }
    }

    /// The error of a failed step, after the observers were told.
    fn fail(&mut self, f: &StepFailure, obs: &mut [&mut dyn Observer]) -> Error {
        let mut message =
            numerical_message(&self.sys, f, "run", self.model.time.epoch_year).to_string();
        let data = self.checkpoint_data();
        for o in obs.iter_mut() {
            match o.failed(self, &data) {
                Ok(None) => {}
                Ok(Some(note)) => {
                    message.push_str("; ");
                    message.push_str(&note);
                }
                Err(e) => {
                    message.push_str(&format!("; the last good state could not be saved: {e}"));
                    break;
                }
            }
        }
        Error::Numerical(message)
    }

    fn emit_series(&mut self, obs: &mut [&mut dyn Observer], mut rec: SeriesRecord) -> Result<()> {
        rec.time_year = self.model.time.year(self.st.state.t);
        self.output.since_series = 0;
        self.output.series_rows += 1;
        self.output.last_series_year = Some(rec.time_year);
        for o in obs.iter_mut() {
            o.series(self, &rec)?;
        }
        Ok(())
    }

    /// The state evaluated directly, not linearised (the same whatever the solver kept: a
    /// branch from this state shows the same), with its root uptake; with `gather`, its
    /// profiles and the solute profiles into `self.profile`.
    fn fill_profiles(&mut self, gather: bool) {
        self.sys.evaluate_direct(self.st.state.t, &self.st.state.u);
        if self.sys.has_vegetation {
            self.sys.compute_uptake(self.st.state.t);
        }
        if gather {
            self.profile.fill(&self.sys);
            self.fill_solute_profiles();
        }
    }

    /// The solute profiles of the state into `self.profile` (the flow evaluated directly
    /// at the state in `self.sys`).
    fn fill_solute_profiles(&mut self) {
        match self.solutes.as_mut() {
            Some(column) => {
                column.profiles(&mut self.sys, &self.st.state.u, &mut self.profile.solutes)
            }
            None => self.profile.solutes.clear(),
        }
    }

    /// Gives the observers the profiles in `self.profile`, at the current time.
    fn emit_snapshot(&mut self, obs: &mut [&mut dyn Observer]) -> Result<()> {
        let time_year = self.model.time.year(self.st.state.t);
        self.output.snapshots += 1;
        self.output.last_snapshot_year = Some(time_year);
        for o in obs.iter_mut() {
            o.snapshot(self, time_year, &self.profile)?;
        }
        // The buffers are not kept between snapshots (10 arrays per cell, 80 B per cell
        // resident for nothing): one allocation per snapshot, none per step.
        self.profile = Profile::default();
        Ok(())
    }
}

/// Whether some observer reads the profiles of a snapshot (see [`Observer::needs_profile`]).
fn needs_profile(obs: &[&mut dyn Observer]) -> bool {
    obs.iter().any(|o| o.needs_profile())
}
