//! The observer contract of `sim::Simulation`, on the small test column in memory:
//! observers are told every event in order (start output, started, each accepted step,
//! series records, snapshots at the output times, checkpoints at the checkpoint times and
//! the end, finished), the output position a checkpoint sees counts what was given, and
//! a stop request stops after that step without changing what follows.

mod support;

use deepdry::error::Result;
use deepdry::model::Model;
use deepdry::output::diagnostics::{Profile, SeriesRecord};
use deepdry::sim::{
    initial::initial_unknowns, Advance, Begin, CheckpointData, Ending, Observer, OutputPosition,
    Recorder, Request, Simulation, SyncPlan,
};
use deepdry::solve::linear::SolverKind;
use deepdry::solve::stepper::StepInfo;
use std::path::Path;
use support::Small;

const YEAR: f64 = deepdry::props::constants::SECONDS_PER_YEAR;

#[derive(Debug, Clone, PartialEq)]
enum Event {
    Started,
    Step,
    Series(f64),
    Snapshot(f64),
    /// Time [yr] and the series rows and snapshots counted at the checkpoint.
    Checkpoint(f64, u64, u64),
    Finished(Ending),
}

/// Logs every event; asks to stop after the accepted step number `stop_at`.
#[derive(Default)]
struct Log {
    events: Vec<Event>,
    steps: u64,
    stop_at: Option<u64>,
}

impl Observer for Log {
    fn started(&mut self, _sim: &Simulation) -> Result<()> {
        self.events.push(Event::Started);
        Ok(())
    }
    fn step_accepted(&mut self, _sim: &Simulation, _step: &StepInfo) -> Result<Request> {
        self.events.push(Event::Step);
        self.steps += 1;
        Ok(if Some(self.steps) == self.stop_at {
            Request::Stop
        } else {
            Request::Continue
        })
    }
    fn series(&mut self, _sim: &Simulation, record: &SeriesRecord) -> Result<()> {
        self.events.push(Event::Series(record.time_year));
        Ok(())
    }
    fn snapshot(&mut self, _sim: &Simulation, time_year: f64, _profile: &Profile) -> Result<()> {
        self.events.push(Event::Snapshot(time_year));
        Ok(())
    }
    fn checkpoint(&mut self, sim: &Simulation, _data: &CheckpointData) -> Result<()> {
        let out = sim.output();
        self.events.push(Event::Checkpoint(
            sim.state().t / YEAR,
            out.series_rows,
            out.snapshots,
        ));
        Ok(())
    }
    fn finished(&mut self, _sim: &Simulation, ending: Ending) -> Result<()> {
        self.events.push(Event::Finished(ending));
        Ok(())
    }
}

fn small_model() -> Model {
    let text = Small {
        end_year: 6.0,
        ..Small::default()
    }
    .text();
    deepdry::case::parse(&text, "small.toml", Path::new(".")).unwrap()
}

fn new_simulation(model: &Model) -> Simulation<'_> {
    let begin = Begin::Unknowns {
        t: model.time.start,
        dt: model.time.dt_initial,
        u: initial_unknowns(model, SolverKind::BlockThomas).unwrap(),
    };
    let plan = SyncPlan::new(model).unwrap();
    Simulation::new(
        model,
        plan,
        begin,
        OutputPosition::default(),
        SolverKind::BlockThomas,
        None,
    )
    .unwrap()
}

#[test]
fn observers_are_told_every_event_in_order() {
    let model = small_model();
    let mut sim = new_simulation(&model);
    let mut log = Log::default();
    let mut obs: [&mut dyn Observer; 1] = [&mut log];
    sim.start(&mut obs, true).unwrap();
    assert_eq!(sim.run_to_end(&mut obs).unwrap(), Advance::Reached);
    let finish = sim.finish(&mut obs).unwrap();
    let ev = &log.events;
    // The start state's record and snapshot come first, then `started`; `finished` last.
    assert_eq!(
        ev[..3],
        [Event::Series(0.0), Event::Snapshot(0.0), Event::Started]
    );
    assert_eq!(ev.last(), Some(&Event::Finished(Ending::End)));
    let count = |f: &dyn Fn(&Event) -> bool| ev.iter().filter(|e| f(e)).count();
    assert_eq!(
        count(&|e| *e == Event::Step) as u64,
        finish.counters.steps,
        "one event per accepted step"
    );
    assert!(
        finish.counters.steps > 20,
        "{} steps",
        finish.counters.steps
    );
    // Snapshots at the start and at each output time.
    let snaps: Vec<f64> = ev
        .iter()
        .filter_map(|e| match e {
            Event::Snapshot(t) => Some(*t),
            _ => None,
        })
        .collect();
    let mut want = vec![0.0];
    want.extend(model.output.snapshot_times.iter().map(|t| t / YEAR));
    assert_eq!(snaps.len(), want.len());
    for (a, b) in snaps.iter().zip(&want) {
        assert!((a - b).abs() <= 1e-12 * b.max(1.0), "{snaps:?} vs {want:?}");
    }
    // Checkpoints at each checkpoint time (every year) and once more at the end; each
    // counts the records and snapshots given before it.
    let mut series = 0u64;
    let mut snapshots = 0u64;
    let mut checkpoint_years = Vec::new();
    for e in ev {
        match e {
            Event::Series(_) => series += 1,
            Event::Snapshot(_) => snapshots += 1,
            Event::Checkpoint(t, rows, snaps) => {
                assert_eq!((*rows, *snaps), (series, snapshots), "at {t} yr");
                checkpoint_years.push(*t);
            }
            _ => {}
        }
    }
    let mut want: Vec<f64> = sim.plan().checkpoints.iter().map(|t| t / YEAR).collect();
    want.push(model.time.end / YEAR);
    assert_eq!(checkpoint_years.len(), want.len(), "{checkpoint_years:?}");
    for (a, b) in checkpoint_years.iter().zip(&want) {
        assert!((a - b).abs() <= 1e-12 * b.max(1.0), "{checkpoint_years:?}");
    }
    // The last series record is at the end time.
    let last = ev.iter().rev().find_map(|e| match e {
        Event::Series(t) => Some(*t),
        _ => None,
    });
    assert_eq!(last, Some(model.time.end / YEAR));
}

#[test]
fn a_stop_request_stops_after_that_step_and_the_rest_is_unchanged() {
    let model = small_model();
    // Uninterrupted.
    let mut whole = Recorder::default();
    let mut sim = new_simulation(&model);
    sim.start(&mut [&mut whole], true).unwrap();
    sim.run_to_end(&mut [&mut whole]).unwrap();
    let end_whole = sim.finish(&mut [&mut whole]).unwrap();
    // Stopped after step 17, checkpointed there (as a run stopped by a signal is), then
    // continued to the end.
    let mut parts = Recorder::default();
    let mut log = Log {
        stop_at: Some(17),
        ..Log::default()
    };
    let mut sim = new_simulation(&model);
    sim.start(&mut [&mut parts, &mut log], true).unwrap();
    let how = sim.run_to_end(&mut [&mut parts, &mut log]).unwrap();
    assert_eq!(how, Advance::Stopped);
    assert_eq!(sim.state().counters.steps, 17);
    assert!(sim.state().t < model.time.end);
    sim.checkpoint(&mut [&mut parts, &mut log]).unwrap();
    assert_eq!(
        sim.run_to_end(&mut [&mut parts, &mut log]).unwrap(),
        Advance::Reached
    );
    let end_parts = sim.finish(&mut [&mut parts, &mut log]).unwrap();
    assert_eq!(end_parts.counters, end_whole.counters);
    assert_eq!(parts.series.len(), whole.series.len());
    for (a, b) in parts.series.iter().zip(&whole.series) {
        let (va, vb) = (a.values(), b.values());
        assert_eq!(a.time_year.to_bits(), b.time_year.to_bits());
        for k in 0..va.len() {
            assert_eq!(
                va[k].to_bits(),
                vb[k].to_bits(),
                "field {k} at {} yr",
                a.time_year
            );
        }
    }
    assert_eq!(parts.snapshots.len(), whole.snapshots.len());
    for (a, b) in parts.snapshots.iter().zip(&whole.snapshots) {
        assert_eq!(a.time_year.to_bits(), b.time_year.to_bits());
        for (x, y) in a.profile.head.iter().zip(&b.profile.head) {
            assert_eq!(x.to_bits(), y.to_bits(), "head at {} yr", a.time_year);
        }
    }
}
