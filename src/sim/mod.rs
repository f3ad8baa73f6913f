//! Simulations of a model: [`Simulation`] advances the state from sync time to sync time
//! and tells its [`Observer`]s what happened; the results file, the checkpoints, the
//! progress bar and an in-memory [`Recorder`] are observers. `deepdry run` composes them
//! in [`crate::run`]; [`run_in_memory`] is a simulation with a recorder and no files.
//!
//! - [`implicit_jump`] cycle skipping's implicit jump (BDF2 on the envelope)
//! - [`initial`]     initial states (hydrostatic, profile, steady state)
//! - [`period`]      one period of a periodic forcing and its mean linearisation
//! - [`times`]       sync times: forcing breakpoints, snapshots, checkpoints, the end
//! - [`simulation`]  the simulation, its observer trait and events
//! - [`observers`]   results writer, checkpointer, progress bar, recorder

pub mod implicit_jump;
pub mod initial;
pub mod observers;
pub mod period;
pub mod simulation;
pub mod times;

pub use observers::{Checkpointer, Progress, Recorder, ResultsWriter, Snapshot};
pub use simulation::{
    Advance, Begin, CheckpointData, Ending, Finish, Observer, OutputPosition, Request, Simulation,
};
pub use times::SyncPlan;

use crate::error::Result;
use crate::model::Model;
use crate::solve::linear::SolverKind;

/// Runs `model` from its initial state to its end time in memory: no file, no progress
/// bar, no signal handling. Returns the series records and snapshots a results file of
/// `deepdry run` would hold (bitwise the same), and the final figures.
pub fn run_in_memory(model: &Model, solver: SolverKind) -> Result<(Recorder, Finish)> {
    let plan = SyncPlan::new(model)?;
    let u = initial::initial_unknowns(model, solver)?;
    let begin = Begin::Unknowns {
        t: model.time.start,
        dt: model.time.dt_initial,
        u,
    };
    let mut sim = Simulation::new(model, plan, begin, OutputPosition::default(), solver, None)?;
    let mut recorder = Recorder::default();
    let mut obs: [&mut dyn Observer; 1] = [&mut recorder];
    sim.start(&mut obs, true)?;
    sim.run_to_end(&mut obs)?;
    let finish = sim.finish(&mut obs)?;
    Ok((recorder, finish))
}
