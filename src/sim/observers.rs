//! The observers of a simulation: the results file, the checkpoints, the progress bar and
//! an in-memory recorder. (The stop on SIGINT/SIGTERM is in [`crate::run`].)

use super::simulation::{CheckpointData, Ending, Observer, Request, Simulation};
use crate::checkpoint::{CheckpointInfo, LoopPosition};
use crate::error::Result;
use crate::output::diagnostics::{Profile, SeriesRecord};
use crate::output::results::ResultsFile;
use crate::props::constants::SECONDS_PER_YEAR;
use crate::solve::stepper::StepInfo;
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Writes the results file: series rows are queued and written with the next snapshot,
/// checkpoint or the end; every snapshot flushes the file to disk. Before each write it
/// checks that the file at `path` is still the one it opened (same device and inode): a
/// results file deleted or replaced during the run ends it with an I/O error (exit 4)
/// instead of writing into a file nobody can see.
pub struct ResultsWriter {
    pub file: ResultsFile,
    pub path: PathBuf,
    /// (device, inode) of the results file when the run opened it.
    pub identity: Option<(u64, u64)>,
}

/// (device, inode) of the file at `path`, if there is one.
pub fn file_identity(path: &Path) -> Option<(u64, u64)> {
    use std::os::unix::fs::MetadataExt;
    std::fs::metadata(path).ok().map(|m| (m.dev(), m.ino()))
}

impl ResultsWriter {
    /// A writer of `file`, opened at `path`.
    pub fn new(file: ResultsFile, path: &Path) -> ResultsWriter {
        ResultsWriter {
            file,
            identity: file_identity(path),
            path: path.to_path_buf(),
        }
    }

    fn still_there(&self, sim: &Simulation) -> Result<()> {
        self.still_there_at(sim.model().time.year(sim.state().t))
    }
}

impl ResultsWriter {
    /// At the end of a run: closes the results file and reads it back
    /// ([`ResultsFile::close_and_verify`]); a file damaged during the run (by another
    /// program writing into it) ends the run with an I/O error (exit 4) naming the file.
    pub fn close_and_verify(self, end_year: f64) -> Result<()> {
        self.still_there_at(end_year)?;
        let path = self.path.clone();
        self.file.close_and_verify().map_err(|what| {
            let folder = path.parent().unwrap_or(Path::new("."));
            crate::error::Error::Io(format!(
                "{}: the results file was damaged during the run (read back at year {end_year:.6e}: {what}), as if another program wrote into it; the checkpoints in {} are intact: {}",
                path.display(),
                folder.display(),
                crate::output::results::CONTINUE_ADVICE
            ))
        })
    }

    fn still_there_at(&self, year: f64) -> Result<()> {
        let now = file_identity(&self.path);
        if self.identity.is_some() && now == self.identity {
            return Ok(());
        }
        let what = if now.is_none() {
            "deleted"
        } else {
            "replaced by another file"
        };
        let folder = self.path.parent().unwrap_or(Path::new("."));
        Err(crate::error::Error::Io(format!(
            "{}: the results file was {what} during the run (at year {year:.6e}); the rows written since the last checkpoint are lost; the checkpoints in {} are intact: restore the results file and --resume, or run again with --overwrite",
            self.path.display(),
            folder.display()
        )))
    }
}

impl Observer for ResultsWriter {
    fn series(&mut self, sim: &Simulation, record: &SeriesRecord) -> Result<()> {
        let layers = crate::output::diagnostics::layer_water_storage(
            sim.system(),
            &self.file.cell_layer,
            self.file.layers,
        );
        self.file
            .push_series_layers(*record, &layers, &sim.extra_series())
    }
    fn snapshot(&mut self, sim: &Simulation, time_year: f64, profile: &Profile) -> Result<()> {
        self.still_there(sim)?;
        if self.file.snapshots_from_system() {
            self.file.write_snapshot_of(time_year, sim.system())
        } else {
            self.file.write_snapshot(time_year, profile)
        }
    }
    /// Its rows are computed from the system one at a time, but for the solutes'.
    fn needs_profile(&self) -> bool {
        !self.file.snapshots_from_system()
    }
    /// The rows a checkpoint counts must be on disk before it is written.
    fn checkpoint(&mut self, sim: &Simulation, _data: &CheckpointData) -> Result<()> {
        self.still_there(sim)?;
        self.file.flush()
    }
    fn finished(&mut self, sim: &Simulation, _ending: Ending) -> Result<()> {
        self.still_there(sim)?;
        self.file.flush()
    }
    fn failed(&mut self, _sim: &Simulation, _data: &CheckpointData) -> Result<Option<String>> {
        self.file.flush().map(|()| None)
    }
}

/// Writes checkpoints into the output folder: `checkpoint-<year>yr.h5` at each checkpoint
/// (keeping the newest `keep`), one more when the wall-clock interval has passed, and
/// `failed-state.h5` with the last good state when a step fails.
pub struct Checkpointer {
    folder: PathBuf,
    results: PathBuf,
    keep: usize,
    wall_every: Option<f64>,
    last_wall: Instant,
    /// The checkpoint a branched run started from, and its time [yr].
    parent: Option<(String, f64)>,
    last: Option<PathBuf>,
}

impl Checkpointer {
    /// Checkpoints of the run writing `results` into `folder`, as the case's
    /// `[checkpoint]` asks.
    pub fn new(
        folder: &Path,
        results: &Path,
        checkpoint: &crate::model::CheckpointControl,
        parent: Option<(String, f64)>,
    ) -> Checkpointer {
        Checkpointer {
            folder: folder.to_path_buf(),
            results: results.to_path_buf(),
            keep: checkpoint.keep,
            wall_every: checkpoint.wall_every,
            last_wall: Instant::now(),
            parent,
            last: None,
        }
    }

    /// The newest checkpoint written.
    pub fn last(&self) -> Option<&Path> {
        self.last.as_deref()
    }

    fn write(&self, path: &Path, sim: &Simulation, data: &CheckpointData) -> Result<()> {
        let out = sim.output();
        let position = LoopPosition {
            since_series: out.since_series,
            series_rows: out.series_rows,
            snapshots: out.snapshots,
        };
        let info = CheckpointInfo {
            balance_abs: Some(data.balance_abs),
            balance_rel: Some(data.balance_rel),
            last_series_year: out.last_series_year,
            last_snapshot_year: out.last_snapshot_year,
            parent: self.parent.clone(),
            run_end_year: None,
        };
        crate::checkpoint::write(
            path,
            sim.model(),
            sim.state(),
            sim.kept_states(),
            position,
            &self.results,
            &info,
            sim.solutes().map(|c| &c.state),
            sim.envelope_state(),
        )
    }
}

impl Observer for Checkpointer {
    /// Reads no snapshot.
    fn needs_profile(&self) -> bool {
        false
    }
    fn started(&mut self, _sim: &Simulation) -> Result<()> {
        self.last_wall = Instant::now();
        Ok(())
    }
    fn step_accepted(&mut self, _sim: &Simulation, _step: &StepInfo) -> Result<Request> {
        Ok(match self.wall_every {
            Some(w) if self.last_wall.elapsed().as_secs_f64() >= w => Request::Checkpoint,
            _ => Request::Continue,
        })
    }
    fn checkpoint(&mut self, sim: &Simulation, data: &CheckpointData) -> Result<()> {
        let model = sim.model();
        let path = crate::checkpoint::name_at(
            &self.folder,
            model.time.year(sim.state().t),
            crate::checkpoint::name_digits(model),
        );
        self.write(&path, sim, data)?;
        crate::checkpoint::prune(&self.folder, self.keep);
        self.last = Some(path);
        self.last_wall = Instant::now();
        Ok(())
    }
    fn failed(&mut self, sim: &Simulation, data: &CheckpointData) -> Result<Option<String>> {
        let path = self.folder.join("failed-state.h5");
        self.write(&path, sim, data)?;
        Ok(Some(format!("last good state saved in {}", path.display())))
    }
}

/// The progress bar on standard error (drawn only on a terminal, and when `show`).
pub struct Progress {
    show: bool,
    bar: Option<indicatif::ProgressBar>,
}

impl Progress {
    pub fn new(show: bool) -> Progress {
        Progress { show, bar: None }
    }
    fn clear(&mut self) {
        if let Some(bar) = self.bar.take() {
            bar.finish_and_clear();
        }
    }
}

impl Observer for Progress {
    /// Reads no snapshot.
    fn needs_profile(&self) -> bool {
        false
    }
    fn started(&mut self, _sim: &Simulation) -> Result<()> {
        use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
        let bar = ProgressBar::with_draw_target(Some(1000), ProgressDrawTarget::stderr());
        if !self.show || !std::io::IsTerminal::is_terminal(&std::io::stderr()) {
            bar.set_draw_target(ProgressDrawTarget::hidden());
        }
        if let Ok(style) = ProgressStyle::with_template("{bar:30} {percent:>3}% {msg}") {
            bar.set_style(style);
        }
        self.bar = Some(bar);
        Ok(())
    }
    fn step_accepted(&mut self, sim: &Simulation, step: &StepInfo) -> Result<Request> {
        let Some(bar) = self.bar.as_ref().filter(|b| !b.is_hidden()) else {
            return Ok(Request::Continue);
        };
        let (time, state) = (&sim.model().time, sim.state());
        let span = time.end - time.start;
        let done = ((state.t - time.start) / span * 1000.0).clamp(0.0, 1000.0);
        bar.set_position(done as u64);
        bar.set_message(format!(
            "t = {:.4e} yr, dt = {:.3e} yr, steps {}",
            time.year(state.t),
            step.dt / SECONDS_PER_YEAR,
            state.counters.steps
        ));
        Ok(Request::Continue)
    }
    fn finished(&mut self, _sim: &Simulation, _ending: Ending) -> Result<()> {
        self.clear();
        Ok(())
    }
    fn failed(&mut self, _sim: &Simulation, _data: &CheckpointData) -> Result<Option<String>> {
        self.clear();
        Ok(None)
    }
}

/// One snapshot kept in memory.
#[derive(Debug, Clone)]
pub struct Snapshot {
    pub time_year: f64,
    pub profile: Profile,
}

/// Keeps the series records and the snapshots in memory: what an ensemble member or a
/// fit evaluation reads, with no file written.
#[derive(Debug, Clone, Default)]
pub struct Recorder {
    pub series: Vec<SeriesRecord>,
    pub snapshots: Vec<Snapshot>,
    /// Per series record, the series values beyond the record: the solutes' (see
    /// [`crate::solute::SERIES_FIELDS`]), then the vegetation's (see
    /// [`crate::sim::simulation::VEGETATION_SERIES`]); empty without either.
    pub extra_series: Vec<Vec<f64>>,
}

impl Observer for Recorder {
    fn series(&mut self, sim: &Simulation, record: &SeriesRecord) -> Result<()> {
        self.series.push(*record);
        self.extra_series.push(sim.extra_series());
        Ok(())
    }
    fn snapshot(&mut self, _sim: &Simulation, time_year: f64, profile: &Profile) -> Result<()> {
        self.snapshots.push(Snapshot {
            time_year,
            profile: profile.clone(),
        });
        Ok(())
    }
}
