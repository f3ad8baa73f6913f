//! The times a simulation lands on: forcing breakpoints, snapshots, checkpoints, the end.

use crate::error::{Error, Result};
use crate::model::Model;
use crate::props::constants::SECONDS_PER_YEAR;
use crate::schedule::Schedule;

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
    schedule_times(model, Schedule::breakpoints)
}

/// Times where the forcing jumps in value (steps of stepped schedules, changes of
/// boundary-condition kind) inside (start, end]: the step restarts small there.
pub fn forcing_jumps(model: &Model) -> Vec<f64> {
    schedule_times(model, Schedule::jumps)
}

/// The start of every period and the times `pick` gives for every schedule of the
/// forcing, inside (start, end].
fn schedule_times(model: &Model, pick: fn(&Schedule) -> Vec<f64>) -> Vec<f64> {
    let mut ts: Vec<f64> = Vec::new();
    let add_schedule = |s: &Schedule, ts: &mut Vec<f64>| ts.extend(pick(s));
    for (start, bc) in &model.surface.periods {
        ts.push(*start);
        for (_, s) in bc.schedules() {
            add_schedule(s, &mut ts);
        }
    }
    for (start, bc) in &model.bottom.periods {
        ts.push(*start);
        for (_, s) in bc.schedules() {
            add_schedule(s, &mut ts);
        }
    }
    for (start, veg) in &model.vegetation.periods {
        ts.push(*start);
        if let Some(v) = veg {
            add_schedule(&v.transpiration, &mut ts);
        }
    }
    for solute in &model.solutes {
        match &solute.surface {
            crate::model::SoluteSurface::Deposition(s) | crate::model::SoluteSurface::Inflow(s) => {
                add_schedule(s, &mut ts)
            }
        }
    }
    clean_times(model, ts)
}

/// Most checkpoint times a run accepts from `[checkpoint] every_year`.
pub const MAX_CHECKPOINT_TIMES: f64 = 1.0e6;

/// Checkpoint times inside (start, end) from the simulated-time interval: the whole
/// multiples of `every_year` on the case's year axis (years 10 000, 20 000, … for a run
/// from year −1 checkpointed every 10 000 years), so that the checkpoint names read as the
/// interval the user asked for. An interval that would give more than
/// [`MAX_CHECKPOINT_TIMES`] is refused (it would take the memory of the machine before the
/// first step).
pub fn checkpoint_times(model: &Model) -> Result<Vec<f64>> {
    let mut out = Vec::new();
    if let Some(every) = model.checkpoint.every {
        let count = (model.time.end - model.time.start) / every;
        if count.is_nan() || count > MAX_CHECKPOINT_TIMES {
            return Err(Error::input(format!(
                "checkpoint.every_year = {:e}: gives {count:.3e} checkpoints over the run ({:e} to {:e} yr); at most {MAX_CHECKPOINT_TIMES:e}: use a longer interval",
                every / SECONDS_PER_YEAR,
                model.time.year(model.time.start),
                model.time.year(model.time.end)
            )));
        }
        if every > 0.0 {
            let time = &model.time;
            let every_year = every / SECONDS_PER_YEAR;
            // Model time counts seconds from `epoch_year`, a whole multiple of 1e5 years:
            // the grid year k·every is (k·every − epoch) years after it, computed from
            // integers so that the times are exact to the run's resolution at any epoch.
            let mut k = (time.year(time.start) / every_year).floor();
            loop {
                let t = (k * every_year - time.epoch_year) * SECONDS_PER_YEAR;
                if t >= time.end - 1e-9 * every {
                    break;
                }
                if t > time.start && (t - time.start).abs() > 1e-9 * every {
                    out.push(t);
                }
                k += 1.0;
            }
        }
    }
    Ok(out)
}

/// Whether `t` is one of `list` (to 1e-9 relative).
pub fn is_member(list: &[f64], t: f64) -> bool {
    list.iter()
        .any(|s| (s - t).abs() <= 1e-9 * t.abs().max(1.0))
}

/// Every time a run lands on, and which of them restart the multistep history (forcing
/// jumps) or take a checkpoint; computed once, before any file is touched.
#[derive(Debug, Clone)]
pub struct SyncPlan {
    /// Sync times inside (start, end], sorted, without near-duplicates.
    pub syncs: Vec<f64>,
    /// Forcing jumps and changes of slope: the history restarts there.
    pub jumps: Vec<f64>,
    /// Forcing jumps in value (a subset of `jumps`): the step also restarts from the
    /// first step size there.
    pub value_jumps: Vec<f64>,
    /// Checkpoint times from `[checkpoint] every_year`.
    pub checkpoints: Vec<f64>,
}

impl SyncPlan {
    /// The plan of `model`; refuses a checkpoint interval that gives more than
    /// [`MAX_CHECKPOINT_TIMES`] checkpoints.
    pub fn new(model: &Model) -> Result<SyncPlan> {
        let checkpoints = checkpoint_times(model)?;
        let jumps = forcing_times(model);
        let value_jumps = forcing_jumps(model);
        let mut syncs = sync_times(model);
        syncs.extend(checkpoints.iter().cloned());
        syncs.sort_by(|a, b| a.total_cmp(b));
        syncs.dedup_by(|x, y| (*x - *y).abs() <= 1e-9 * y.abs().max(1.0));
        Ok(SyncPlan {
            syncs,
            jumps,
            value_jumps,
            checkpoints,
        })
    }
}
