//! Command-line interface: argument types (clap) and dispatch to the library.

use crate::error::{Error, Result};
use clap::{Parser, Subcommand};
use std::path::PathBuf;

#[derive(Debug, Parser)]
#[command(
    name = "deepdry",
    version,
    about = "Coupled heat, liquid water and water vapour in deep unsaturated soil"
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Parse and validate a case file, then print a summary.
    Check {
        /// The case file (TOML).
        case: PathBuf,
        /// Change a key of the case, e.g. `--set time.end_year=2e4` (repeatable; KEY as in
        /// the file, [k] for the k-th element of an array from 1; VALUE in TOML syntax).
        #[arg(long = "set", value_name = "KEY=VALUE")]
        set: Vec<String>,
    },
    /// Run a case: write the results file and print a summary.
    Run {
        /// The case file (TOML).
        case: PathBuf,
        /// Change a key of the case, e.g. `--set time.end_year=2e4` (repeatable; KEY as in
        /// the file, [k] for the k-th element of an array from 1; VALUE in TOML syntax).
        #[arg(long = "set", value_name = "KEY=VALUE")]
        set: Vec<String>,
        /// Output folder (default: the case's `output.folder`).
        #[arg(long)]
        out: Option<PathBuf>,
        /// Replace an existing results file (and the checkpoints of the run that wrote it).
        #[arg(long)]
        overwrite: bool,
        /// No progress bar.
        #[arg(long)]
        quiet: bool,
        /// Linear solver: block-tridiagonal (fast, default) or sparse-lu (general).
        #[arg(long, default_value = "block-tridiagonal", value_parser = ["block-tridiagonal", "sparse-lu"])]
        solver: String,
        /// Continue the run that wrote this checkpoint (same case), appending to its results.
        #[arg(long, conflicts_with = "start_from")]
        resume: Option<PathBuf>,
        /// Start a new run (new results file) from this checkpoint's state (branching).
        #[arg(long)]
        start_from: Option<PathBuf>,
        /// Continue the finished run in the output folder from its final checkpoint to
        /// this later year, appending to its results file (the case's end year is
        /// replaced by YEAR for this run; the case must be unchanged otherwise).
        #[arg(
            long,
            value_name = "YEAR",
            allow_negative_numbers = true,
            conflicts_with_all = ["resume", "start_from", "overwrite"]
        )]
        extend_to: Option<f64>,
    },
    /// Measure performance: the reference case and a scaling series over the cell count.
    Bench {
        /// The reference case.
        #[arg(long, default_value = "cases/benchmark-300m.toml")]
        case: PathBuf,
        /// Cell counts of the scaling series, comma-separated.
        #[arg(long, value_delimiter = ',', default_value = "300,1000,3000,10000")]
        cells: Vec<usize>,
        /// Simulated span of the scaling runs [yr].
        #[arg(long, default_value_t = 1000.0)]
        span_years: f64,
        /// Also compare the reference case with tight-tolerance runs on the same mesh and
        /// on a mesh refined twice (surface flux, water lost, profiles at 1 to 1e6 yr).
        #[arg(long)]
        accuracy: bool,
        /// Runs of every workload; the table gives the shortest and the median wall time.
        #[arg(long, default_value_t = 5, value_parser = clap::value_parser!(u16).range(1..=100))]
        repeat: u16,
    },
    /// Summarise a results or checkpoint file.
    Inspect {
        /// A deepdry results or checkpoint file (HDF5).
        file: PathBuf,
    },
    /// Compare a results file with measured profiles: statistics per quantity, the
    /// matched observations (CSV) and a figure per quantity.
    Compare {
        /// A deepdry results file (HDF5).
        results: PathBuf,
        /// Observations: CSV with `time_year,depth_m,quantity,value,sigma`.
        observations: PathBuf,
        /// Output folder (default: the results file's folder).
        #[arg(long)]
        out: Option<PathBuf>,
    },
    /// Fit parameters of a case to an observation file (weighted least squares,
    /// Levenberg–Marquardt): estimates, standard errors, correlations, the fitted case.
    Fit {
        /// The fit file (TOML: case, observations, [[parameters]] with key, initial, min,
        /// max, log).
        fit: PathBuf,
        /// Output folder (default: `fit` beside the fit file).
        #[arg(long)]
        out: Option<PathBuf>,
        /// Model runs at once (default: the machine's cores).
        #[arg(long, value_parser = clap::value_parser!(u16).range(1..=1024))]
        jobs: Option<u16>,
        /// Continue an interrupted fit from its last accepted iteration
        /// (`fit-progress.json` in the output folder).
        #[arg(long)]
        restart: bool,
    },
    /// Draw profiles and time series of a results file as SVG and PNG.
    Plot {
        /// The results file (HDF5) written by `deepdry run`.
        results: PathBuf,
        /// Output folder (default: the results file's folder).
        #[arg(long)]
        out: Option<PathBuf>,
        /// Snapshot times to draw [yr], comma-separated; the nearest snapshots are used
        /// (default: up to 6 spread in log time).
        #[arg(long, value_delimiter = ',', num_args = 1.., allow_negative_numbers = true)]
        times: Option<Vec<f64>>,
        /// Logarithmic time axis for the time series (automatic beyond 3 decades), in
        /// years after the time origin (the ponding figure keeps a linear axis: floods are
        /// events in linear time).
        #[arg(long)]
        log_time: bool,
        /// The year a log time axis counts from (default: the case's
        /// output.log_origin_year, else the run's start year); records at or before it
        /// are left out of a log axis, with a note.
        #[arg(long, allow_negative_numbers = true, value_name = "YEAR")]
        time_origin: Option<f64>,
        /// For the results of a branch (`--start-from`): draw the series of the parent
        /// run up to the branch year in front of the branch's (the parent's results file
        /// is found through the branch's parent checkpoint); profiles stay the branch's.
        #[arg(long)]
        with_parent: bool,
    },
    /// Write a results file as CSV files (series, profiles in long form, mesh) and a
    /// README.txt describing their columns; units are in the column names.
    Export {
        /// The results file (HDF5) written by `deepdry run`.
        results: PathBuf,
        /// Output folder (default: `csv` beside the results file).
        #[arg(long)]
        out: Option<PathBuf>,
    },
    /// Run the verification cases (analytic and published references) and print the table.
    Verify {
        /// Run only this case (a folder name under validation/).
        #[arg(long)]
        only: Option<String>,
        /// Write DIR/verification.md with an SVG figure per case.
        #[arg(long, value_name = "DIR")]
        report: Option<PathBuf>,
    },
    /// Print property tables as CSV.
    Table {
        #[command(subcommand)]
        what: TableCommand,
    },
    /// Ensembles: run a plan's members (on threads, or as one shard of a job array),
    /// merge them, say what is done.
    Ensemble {
        #[command(subcommand)]
        what: EnsembleCommand,
    },
}

#[derive(Debug, Subcommand)]
pub enum EnsembleCommand {
    /// Run the members of a plan not yet written (resumable).
    Run {
        /// The plan file (TOML with an [ensemble] section).
        plan: PathBuf,
        /// Output folder (default: `ensemble` beside the plan file).
        #[arg(long)]
        out: Option<PathBuf>,
        /// Worker threads, one member each (default: the machine's cores).
        #[arg(long, value_parser = clap::value_parser!(u16).range(1..=1024))]
        jobs: Option<u16>,
        /// Only the members i with i mod N = K (a job-array task: K/N, K from 0).
        #[arg(long, value_name = "K/N")]
        shard: Option<String>,
        /// No progress bar.
        #[arg(long)]
        quiet: bool,
    },
    /// Merge the members of an ensemble folder into ensemble.h5.
    Collect {
        /// The ensemble folder.
        dir: PathBuf,
    },
    /// Say which members are done, failed and missing.
    Status {
        /// The ensemble folder.
        dir: PathBuf,
    },
    /// Fan charts of the kept series and parameter–outcome scatter plots (SVG and PNG).
    Plot {
        /// The ensemble folder.
        dir: PathBuf,
        /// Output folder (default: the ensemble folder).
        #[arg(long)]
        out: Option<PathBuf>,
    },
}

#[derive(Debug, Subcommand)]
pub enum TableCommand {
    /// Water and vapour properties against temperature.
    Water {
        /// First temperature [°C].
        #[arg(long, default_value_t = 0.0)]
        from: f64,
        /// Last temperature [°C].
        #[arg(long, default_value_t = 100.0)]
        to: f64,
        /// Temperature step [°C].
        #[arg(long, default_value_t = 5.0)]
        step: f64,
    },
    /// Soil properties of one layer against head, from −0.01 m to oven dryness.
    Soil {
        /// The case file (TOML).
        case: PathBuf,
        /// Layer name.
        #[arg(long)]
        layer: String,
        /// Temperature [°C] of the relative humidity (and of the conductivity when the
        /// case corrects it for viscosity); default: humidity at 20 °C, conductivity Ks·Kr.
        #[arg(long, allow_negative_numbers = true)]
        temperature: Option<f64>,
        /// First head [m], below 0 (default −0.01).
        #[arg(long, allow_negative_numbers = true)]
        from_head: Option<f64>,
        /// Last head [m], below --from-head (default: the soil's oven-dry head).
        #[arg(long, allow_negative_numbers = true)]
        to_head: Option<f64>,
        /// Rows per decade of suction (default 10).
        #[arg(long)]
        per_decade: Option<usize>,
    },
}

/// The same error with its message on one line (a message that quotes a library's text
/// may carry line breaks; the binary promises one line on stderr).
pub fn one_line(e: Error) -> Error {
    let fix = |s: String| {
        if s.contains(['\n', '\r']) {
            s.split(['\n', '\r'])
                .map(str::trim)
                .filter(|p| !p.is_empty())
                .collect::<Vec<_>>()
                .join(" ")
        } else {
            s
        }
    };
    match e {
        Error::Input(s) => Error::Input(fix(s)),
        Error::Io(s) => Error::Io(fix(s)),
        Error::Numerical(s) => Error::Numerical(fix(s)),
        Error::Interrupted(s) => Error::Interrupted(fix(s)),
        // A verification report may be a table: left as it is.
        Error::VerifyFailed(s) => Error::VerifyFailed(s),
        Error::Internal(s) => Error::Internal(fix(s)),
    }
}

/// The `--set` arguments as overrides.
fn overrides(set: &[String]) -> Result<Vec<crate::case::Override>> {
    set.iter()
        .map(|s| crate::case::Override::parse(s))
        .collect()
}

/// Runs one command.
pub fn dispatch(cli: Cli) -> Result<()> {
    // HDF5's own error stack printing would bury our one-line messages.
    hdf5::silence_errors(true);
    run_command(cli).map_err(one_line)
}

fn run_command(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Check { case, set } => {
            let model = crate::case::load_with_overrides(&case, &overrides(&set)?)?;
            print!("{}", crate::case::summary(&model));
            Ok(())
        }
        Command::Run {
            case,
            set,
            out,
            overwrite,
            quiet,
            solver,
            resume,
            start_from,
            extend_to,
        } => {
            let overrides = overrides(&set)?;
            if let Some(year) = extend_to {
                crate::run::install_signal_handlers()?;
                let opts = crate::run::RunOptions {
                    out,
                    overwrite: false,
                    progress: !quiet,
                    solver: if solver == "sparse-lu" {
                        crate::solve::linear::SolverKind::SparseLu
                    } else {
                        crate::solve::linear::SolverKind::BlockThomas
                    },
                    start: crate::run::Start::Fresh,
                };
                let summary = crate::run::extend(&case, &overrides, year, &opts)?;
                print!("{}", summary.text());
                return Ok(());
            }
            let model = crate::case::load_with_overrides(&case, &overrides)?;
            crate::run::install_signal_handlers()?;
            let start = match (resume, start_from) {
                (Some(p), _) => crate::run::Start::Resume(p),
                (None, Some(p)) => crate::run::Start::Branch(p),
                (None, None) => crate::run::Start::Fresh,
            };
            let opts = crate::run::RunOptions {
                out,
                overwrite,
                progress: !quiet,
                solver: if solver == "sparse-lu" {
                    crate::solve::linear::SolverKind::SparseLu
                } else {
                    crate::solve::linear::SolverKind::BlockThomas
                },
                start,
            };
            let summary = crate::run::run(&model, &opts)?;
            print!("{}", summary.text());
            Ok(())
        }
        Command::Bench {
            case,
            cells,
            span_years,
            accuracy,
            repeat,
        } => {
            print!(
                "{}",
                crate::bench::bench(&case, &cells, span_years, accuracy, repeat as usize)?
            );
            Ok(())
        }
        Command::Inspect { file } => {
            print!("{}", crate::inspect::summary(&file)?);
            Ok(())
        }
        Command::Plot {
            results,
            out,
            times,
            log_time,
            time_origin,
            with_parent,
        } => {
            let opts = crate::plot::PlotOptions {
                out,
                times,
                log_time,
                time_origin,
                with_parent,
            };
            let plotted = crate::plot::plot_results_with_notes(&results, &opts)?;
            for p in plotted.files {
                println!("{}", p.display());
            }
            for n in plotted.notes {
                eprintln!("deepdry: note: {n}");
            }
            Ok(())
        }
        Command::Compare {
            results,
            observations,
            out,
        } => {
            let out = out.unwrap_or_else(|| {
                results
                    .parent()
                    .map(|p| p.to_path_buf())
                    .unwrap_or_else(|| PathBuf::from("."))
            });
            let o = crate::fit::compare::compare(&results, &observations, &out)?;
            print!("{}", crate::fit::compare::table(&o.stats));
            for p in &o.files {
                println!("{}", p.display());
            }
            Ok(())
        }
        Command::Fit {
            fit,
            out,
            jobs,
            restart,
        } => {
            let file = crate::fit::fitting::read_fit_file(&fit)?;
            let out = out.unwrap_or_else(|| {
                fit.parent()
                    .map(|p| p.join("fit"))
                    .unwrap_or_else(|| PathBuf::from("fit"))
            });
            let workers = jobs
                .map(usize::from)
                .unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get()));
            let r = crate::fit::fitting::fit_with(
                &file,
                &crate::fit::fitting::FitOptions {
                    workers,
                    out: Some(out.clone()),
                    restart,
                    progress: true,
                },
            )?;
            println!(
                "fit: {} iterations, {} model runs, objective {:.6e} (reduced chi-square {:.4}), stopped: {}",
                r.result.iterations, r.runs, r.result.objective, r.result.reduced_chi_square, r.result.stop
            );
            for (k, p) in file.parameters.iter().enumerate() {
                println!(
                    "  {} = {:.6e} ± {:.3e}",
                    p.key, r.result.estimate[k], r.result.standard_error[k]
                );
            }
            for w in &r.warnings {
                println!("warning: {w}");
            }
            for p in crate::fit::fitting::write_outputs(&r, &out)? {
                println!("{}", p.display());
            }
            match crate::fit::fitting::compare_at_optimum(&r, &out) {
                Ok(o) => {
                    print!("{}", crate::fit::compare::table(&o.stats));
                    for p in &o.files {
                        println!("{}", p.display());
                    }
                }
                Err(e) => println!("warning: no comparison at the optimum: {e}"),
            }
            println!("Model estimates from a fit, not a substitute for site investigation.");
            Ok(())
        }
        Command::Ensemble { what } => ensemble_command(what),
        Command::Export { results, out } => {
            let x = crate::export::export(&results, out.as_deref())?;
            println!(
                "exported {} series rows, {} snapshots of {} cells:",
                x.series_rows, x.snapshots, x.cells
            );
            for p in &x.files {
                println!("{}", p.display());
            }
            Ok(())
        }
        Command::Verify { only, report } => crate::verify::command(only, report),
        Command::Table { what } => match what {
            TableCommand::Water { from, to, step } => {
                print!("{}", crate::props::table::water_csv(from, to, step)?);
                Ok(())
            }
            TableCommand::Soil {
                case,
                layer,
                temperature,
                from_head,
                to_head,
                per_decade,
            } => {
                let model = crate::case::load(&case)?;
                let opts = crate::props::table::SoilTableOptions {
                    temperature_c: temperature,
                    from_head,
                    to_head,
                    per_decade,
                };
                print!(
                    "{}",
                    crate::props::table::soil_csv_with(&model, &layer, &opts)?
                );
                Ok(())
            }
        },
    }
}

fn ensemble_command(what: EnsembleCommand) -> Result<()> {
    use crate::ensemble::{self, Member};
    match what {
        EnsembleCommand::Run {
            plan,
            out,
            jobs,
            shard,
            quiet,
        } => {
            let p = ensemble::plan::read(&plan)?;
            let out = out.unwrap_or_else(|| {
                plan.parent()
                    .map(|d| d.join("ensemble"))
                    .unwrap_or_else(|| PathBuf::from("ensemble"))
            });
            let shard = match shard {
                Some(s) => ensemble::parse_shard(&s)?,
                None => (0, 1),
            };
            let workers = jobs
                .map(usize::from)
                .unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get()));
            let c = ensemble::run(&p, &out, workers, shard, !quiet)?;
            println!(
                "ensemble: {} members run ({} failed), {} already done, shard {}/{} of {} members; {}",
                c.ran,
                c.failed,
                c.skipped,
                shard.0,
                shard.1,
                p.member_count(),
                out.display()
            );
            Ok(())
        }
        EnsembleCommand::Plot { dir, out } => {
            let out = out.unwrap_or_else(|| dir.clone());
            for p in ensemble::figures::plot(&dir, &out)? {
                println!("{}", p.display());
            }
            Ok(())
        }
        EnsembleCommand::Collect { dir } => {
            let (path, [done, failed, missing]) = ensemble::collect(&dir)?;
            println!(
                "{}: {done} done, {failed} failed, {missing} missing",
                path.display()
            );
            Ok(())
        }
        EnsembleCommand::Status { dir } => {
            let (p, members) = ensemble::status(&dir)?;
            let done = members
                .iter()
                .filter(|m| matches!(m, Member::Done { .. }))
                .count();
            let failed: Vec<usize> = members
                .iter()
                .enumerate()
                .filter(|(_, m)| matches!(m, Member::Failed { .. }))
                .map(|(i, _)| i)
                .collect();
            let missing = members.iter().filter(|m| **m == Member::Missing).count();
            println!(
                "{} members: {done} done, {} failed, {missing} missing",
                p.member_count(),
                failed.len()
            );
            for i in failed {
                if let Member::Failed { error, .. } = &members[i] {
                    println!("  member {i} failed: {error}");
                }
            }
            Ok(())
        }
    }
}
