//! `deepdry bench`: the performance benchmark. Measures, on this machine and in this run,
//! the reference 1-Myr case, a scaling series over the cell count, the cost of one
//! residual + Jacobian assembly, and the bare factorise-and-solve of a same-size
//! block-tridiagonal system with each linear solver (the floor an iteration can approach).

use crate::batch::run_into;
use crate::case::Override;
use crate::error::{Error, Result};
use crate::physics::System;
use crate::run::initial_unknowns;
use crate::solve::blocktri::BlockTri;
use crate::solve::linear::{make_solver, SolverKind};
use std::fmt::Write;
use std::path::Path;
use std::time::Instant;

/// Peak resident memory of this process [MiB] (Linux `VmHWM`), if available.
pub fn peak_memory_mib() -> Option<f64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = s.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kb: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb / 1024.0)
}

/// Mean wall time [s] of `f` over enough repetitions to last ~0.2 s (at least 3).
fn time_it(mut f: impl FnMut()) -> f64 {
    f();
    let start = Instant::now();
    let mut reps = 0u32;
    while reps < 3 || start.elapsed().as_secs_f64() < 0.2 {
        f();
        reps += 1;
    }
    start.elapsed().as_secs_f64() / reps as f64
}

struct Row {
    label: String,
    cells: usize,
    /// Wall time of the run [s]: the shortest and the median of the repetitions.
    wall: f64,
    wall_median: f64,
    steps: u64,
    newton: u64,
    jacobians: u64,
    assembly: f64,
    residual: f64,
    thomas: f64,
    sparse: f64,
}

/// The case text, where it is and the overrides to apply to it.
struct Workload<'a> {
    text: &'a str,
    origin: &'a str,
    base: &'a Path,
    overrides: Vec<Override>,
}

/// Runs the workload `repeat` times (at least once) into `out`; the last run's model and
/// summary with the shortest and the median wall time [s].
fn run_repeated(
    w: &Workload,
    out: &Path,
    repeat: usize,
) -> Result<(crate::model::Model, crate::run::RunSummary, f64, f64)> {
    let mut walls = Vec::with_capacity(repeat.max(1));
    let mut last = None;
    for _ in 0..repeat.max(1) {
        let (model, summary) = run_into(w.text, w.origin, w.base, &w.overrides, out)?;
        walls.push(summary.wall_seconds);
        last = Some((model, summary));
    }
    walls.sort_by(f64::total_cmp);
    let (model, summary) = last.ok_or_else(|| Error::Internal("no benchmark run".into()))?;
    Ok((model, summary, walls[0], walls[walls.len() / 2]))
}

fn measure(label: &str, w: &Workload, out: &Path, repeat: usize) -> Result<Row> {
    let (model, summary, wall, wall_median) = run_repeated(w, out, repeat)?;
    // Component costs at the initial state.
    let mut sys = System::new(&model);
    let n = sys.n;
    let u = initial_unknowns(&model, SolverKind::BlockThomas)?;
    let hist = vec![0.0; 3 * n];
    let mut res = vec![0.0; 3 * n];
    let mut jac = BlockTri::new(n);
    let c = 1.0 / (86400.0 * 365.25);
    // Evaluated afresh each time (not from the evaluations the system keeps).
    let assembly = time_it(|| {
        sys.forget_linearization();
        let _ = sys.assemble(model.time.start, &u, c, &hist, &mut res, Some(&mut jac));
    });
    let residual = time_it(|| {
        sys.forget_linearization();
        let _ = sys.assemble(model.time.start, &u, c, &hist, &mut res, None);
    });
    let _ = sys.assemble(model.time.start, &u, c, &hist, &mut res, Some(&mut jac));
    // Make the system well scaled like Newton does (rows by their magnitudes).
    let mut scale = vec![0.0; 3 * n];
    sys.residual_scale_into(c, &hist, &mut scale);
    let row: Vec<f64> = scale.iter().map(|s| 1.0 / s).collect();
    let col: Vec<f64> = (0..3 * n)
        .map(|k| match k % 3 {
            0 => 1.0,
            1 => 1.0 + u[k].abs(),
            _ => 1e-3 + u[k].abs(),
        })
        .collect();
    jac.scale(&row, &col);
    let solve_time = |kind: SolverKind| -> Result<f64> {
        let mut lin = make_solver(kind, n);
        let mut x = res.clone();
        lin.factor(&jac)
            .map_err(|e| Error::Numerical(format!("benchmark matrix: {e:?}")))?;
        Ok(time_it(|| {
            x.copy_from_slice(&res);
            let _ = lin.factor(&jac);
            let _ = lin.solve(&mut x);
        }))
    };
    let thomas = solve_time(SolverKind::BlockThomas)?;
    let sparse = solve_time(SolverKind::SparseLu)?;
    Ok(Row {
        label: label.to_string(),
        cells: n,
        wall,
        wall_median,
        steps: summary.counters.steps,
        newton: summary.counters.newton_iterations,
        jacobians: summary.counters.jacobians,
        assembly,
        residual,
        thomas,
        sparse,
    })
}

impl Row {
    /// The run's wall time per Newton iteration (everything included: assembly, property
    /// evaluation, the linear solve, the stepper, the output) over one bare
    /// block-tridiagonal factorise + solve of the same size: how far an iteration is from
    /// the floor set by the linear algebra.
    fn per_iteration_ratio(&self) -> f64 {
        self.wall / self.newton.max(1) as f64 / self.thomas
    }
}

/// The arrays a run of the reference case (with `overrides`, described by `label`) holds
/// at its end (the multistep history full), in bytes per cell (see [`crate::memory`]).
fn memory_per_cell(
    text: &str,
    origin: &str,
    base: &Path,
    overrides: &[Override],
    label: &str,
) -> Result<String> {
    use crate::sim::{Begin, OutputPosition, Simulation, SyncPlan};
    let model = crate::case::parse_with_overrides(text, origin, base, overrides)?;
    let u = initial_unknowns(&model, SolverKind::BlockThomas)?;
    let begin = Begin::Unknowns {
        t: model.time.start,
        dt: model.time.dt_initial,
        u,
    };
    let mut sim = Simulation::new(
        &model,
        SyncPlan::new(&model)?,
        begin,
        OutputPosition::default(),
        SolverKind::BlockThomas,
        None,
    )?;
    sim.start(&mut [], true)?;
    sim.run_to_end(&mut [])?;
    let cells = sim.system().n;
    Ok(format!(
        "memory per cell of the reference run's arrays{label} (at its end; {} history points):\n{}",
        sim.state().history.len(),
        crate::memory::table(&sim.arrays(), cells)
    ))
}

/// The overrides of a scaling run: `cells` uniform cells (the other mesh keys removed)
/// over `span_years`.
fn scaling_overrides(cells: usize, span_years: f64) -> Result<Vec<Override>> {
    Ok(vec![
        Override::set("mesh.cells", &cells.to_string())?,
        Override::set("mesh.growth", "1.0")?,
        Override::remove("mesh.max_cell_m")?,
        Override::remove("mesh.surface_cell_m")?,
        Override::remove("mesh.bottom_cell_m")?,
        Override::remove("mesh.interface_cell_m")?,
        Override::set("time.end_year", &format!("{span_years:e}"))?,
    ])
}

/// Runs the benchmark on `case` (the reference case) and a scaling series over `cells`
/// for `span_years` on uniform meshes (overrides set `mesh.cells`, `mesh.growth` = 1 and
/// `time.end_year`, and remove the other mesh keys); returns the report table.
/// With `accuracy`, the reference case's results are also compared with tight-tolerance
/// runs ([`crate::accuracy`]) and the comparison appended.
/// Every run is repeated `repeat` times; the table gives the shortest wall time (the
/// least disturbed by other work on the machine) and the median.
pub fn bench(
    case: &Path,
    cells: &[usize],
    span_years: f64,
    accuracy: bool,
    repeat: usize,
) -> Result<String> {
    let text = std::fs::read_to_string(case).map_err(|e| {
        // The default reference case is a path in the source folder.
        let hint = if case.is_relative() && !case.exists() {
            format!(
                "; a relative path is read from the current folder ({}): run from the deepdry source folder, or give --case PATH/TO/benchmark-300m.toml",
                std::env::current_dir()
                    .map(|d| d.display().to_string())
                    .unwrap_or_else(|_| "?".into())
            )
        } else {
            String::new()
        };
        Error::input(format!(
            "{}: cannot read the case file: {e}{hint}",
            case.display()
        ))
    })?;
    let base = case.parent().unwrap_or(Path::new("."));
    let origin = case.display().to_string();
    let tmp = std::env::temp_dir().join(format!("deepdry-bench-{}", std::process::id()));
    std::fs::create_dir_all(&tmp).map_err(|e| Error::io(&tmp, e))?;
    let report = bench_in(
        &text, &origin, base, &tmp, cells, span_years, accuracy, repeat,
    );
    let _ = std::fs::remove_dir_all(&tmp);
    report
}

/// [`bench`] with its scratch folder `tmp` (removed by the caller).
#[allow(clippy::too_many_arguments)]
fn bench_in(
    text: &str,
    origin: &str,
    base: &Path,
    tmp: &Path,
    cells: &[usize],
    span_years: f64,
    accuracy: bool,
    repeat: usize,
) -> Result<String> {
    // The reference case in a folder of its own: its results stay for the comparison.
    let own = tmp.join("reference");
    let workload = |overrides| Workload {
        text,
        origin,
        base,
        overrides,
    };
    let mut rows = vec![measure("reference case", &workload(vec![]), &own, repeat)?];
    for &n in cells {
        // Uniform cells, so the series differs only in the cell count.
        let w = workload(scaling_overrides(n, span_years)?);
        rows.push(measure(&format!("{span_years} yr span"), &w, tmp, repeat)?);
    }
    let mut out = String::new();
    let _ = writeln!(
        out,
        "deepdry benchmark: {origin} (single thread, release build; wall: shortest and median of {} runs)",
        repeat.max(1)
    );
    let _ = writeln!(
        out,
        "{:<16} {:>7} {:>9} {:>10} {:>7} {:>8} {:>9} {:>12} {:>12} {:>12} {:>12} {:>12} {:>12} {:>9}",
        "workload",
        "cells",
        "wall [s]",
        "median [s]",
        "steps",
        "Newton",
        "Jacobians",
        "ms/step",
        "µs/it/cell",
        "assembly µs",
        "residual µs",
        "thomas µs",
        "sparse-lu µs",
        "it/solve"
    );
    for r in &rows {
        let per_it_cell = r.wall / r.newton.max(1) as f64 / r.cells as f64 * 1e6;
        let _ = writeln!(
            out,
            "{:<16} {:>7} {:>9.3} {:>10.3} {:>7} {:>8} {:>9} {:>12.3} {:>12.3} {:>12.1} {:>12.1} {:>12.1} {:>12.1} {:>9.1}",
            r.label,
            r.cells,
            r.wall,
            r.wall_median,
            r.steps,
            r.newton,
            r.jacobians,
            r.wall / r.steps.max(1) as f64 * 1e3,
            per_it_cell,
            r.assembly * 1e6,
            r.residual * 1e6,
            r.thomas * 1e6,
            r.sparse * 1e6,
            r.per_iteration_ratio()
        );
    }
    let _ = writeln!(
        out,
        "(assembly: one residual + exact Jacobian, evaluated afresh; residual: the residual alone, afresh; thomas / sparse-lu: one bare factorise + solve of the same system; it/solve: the run's cost per Newton iteration, all included, over the bare block-tridiagonal factorise + solve)"
    );
    if let Some(m) = peak_memory_mib() {
        let _ = writeln!(out, "peak memory {m:.1} MiB");
    }
    out.push_str(&memory_per_cell(text, origin, base, &[], "")?);
    // The lean mode's (no kept evaluations; BDF up to order 2): less memory, more time.
    out.push_str(&memory_per_cell(
        text,
        origin,
        base,
        &[Override::set("time.memory", "\"lean\"")?],
        " with [time] memory = \"lean\"",
    )?);
    if accuracy {
        let own_results = crate::plot::data::read(&own.join("results.h5"))?;
        out.push_str(&crate::accuracy::accuracy(
            text,
            origin,
            base,
            (own_results, rows[0].steps, rows[0].wall),
            tmp,
        )?);
    }
    Ok(out)
}
