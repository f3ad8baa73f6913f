//! Robustness of the binary: a forced numerical failure (exit 3, one line, the last good
//! state saved), I/O faults (an output folder that cannot be created, a read-only folder,
//! a full disk), and extreme but valid input (1 and 100 000 cells, 1 m and 1000 m
//! columns, heads from 0 to oven-dry, temperatures from 0.5 to 80 °C).

mod support;

use std::path::{Path, PathBuf};
use std::process::Command;
use support::*;

const YEAR: f64 = deepdry::props::constants::SECONDS_PER_YEAR;

/// The small column with its surface held at a head that jumps from −1e4 m to −0.01 m at
/// year 2 (a wetting front into dry soil), at most 3 Newton iterations and a minimum step of
/// 0.01 yr: the jump cannot be followed and the step landing on year 2 fails at the
/// minimum Δt.
fn failing_case(max_newton: usize) -> String {
    Small {
        end_year: 4.0,
        snapshot_every: 1.0,
        checkpoint_every: 1.0,
        extra_time: format!(
            "max_newton_iterations = {max_newton}\nmin_step_year = 0.01\ninitial_step_year = 0.01\nmax_step_year = 0.1\n"
        ),
        ..Small::default()
    }
    .text()
    .replace(
        "relative_humidity = 0.25",
        "head_m = { steps = [[0.0, -1.0e4], [2.0, -0.01]] }",
    )
}

#[test]
fn a_step_failing_at_the_minimum_dt_exits_3_and_saves_the_last_good_state() {
    let dir = Scratch::new("numerical");
    // Six iterations: enough for the modified Newton iteration (one Jacobian per step,
    // linear contraction) before the jump, too few after it at the minimum step.
    let case = dir.write("case.toml", &failing_case(6));
    let out = dir.join("out");
    let o = run_deepdry(&case, &out, &[]);
    let line = assert_one_line_error(
        &o,
        3,
        &[
            "step failed at t = ",
            "(the minimum)",
            "water balance residual",
            "unknown head",
            "at depth ",
            " m (cell ",
            "last good state saved in ",
            "failed-state.h5",
        ],
    );
    let t_fail: f64 = line
        .split("t = ")
        .nth(1)
        .unwrap()
        .split(" yr")
        .next()
        .unwrap()
        .parse()
        .unwrap();
    // The step that lands on year 2 belongs to the old surface head (the forcing's left
    // limit); the steps after it start again from the first step size (here the minimum)
    // and see the new head: the failing step starts at the jump or soon after it.
    assert!((2.0..2.5).contains(&t_fail), "{line}");
    let residual: f64 = line
        .split("residual ")
        .nth(1)
        .unwrap()
        .split(' ')
        .next()
        .unwrap()
        .parse()
        .unwrap();
    assert!(residual.is_finite() && residual > 0.0, "{line}");
    // The diagnostic state: a checkpoint at the last accepted step, readable by inspect.
    let failed = out.join("failed-state.h5");
    let ck = read_checkpoint(&failed).unwrap();
    assert!(
        ((ck.state.t / YEAR) - t_fail).abs() <= 1e-6 * t_fail,
        "{line}"
    );
    assert!(ck.state.u.iter().all(|x| x.is_finite()));
    let o = deepdry(&["inspect", arg(&failed)]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(stdout(&o).contains("kind: checkpoint"));
    // The results so far are readable, end at the last good state and match the state.
    let d = datasets(&out.join("results.h5")).unwrap();
    let times = d["series/time"].floats();
    assert_eq!(times.len() as u64, ck.position.series_rows);
    assert_eq!(times.last().copied(), Some(ck.state.t / YEAR));
    // A step after year 2 failed: the snapshots up to year 2 exist.
    assert_eq!(d["profiles/time"].floats(), vec![0.0, 1.0, 2.0]);
    // The regular checkpoints before the failure are intact.
    read_checkpoint(&checkpoint_at(&out, 1.0)).unwrap();
    // Branching from the failed state with more Newton iterations and a smaller minimum
    // step gets past the jump.
    let fixed = dir.write(
        "fixed.toml",
        &failing_case(15).replace("min_step_year = 0.01", "min_step_year = 1e-9"),
    );
    run_ok(&fixed, &dir.join("fixed"), &["--start-from", arg(&failed)]);
}

fn assert_checkpoints_read(dir: &Path) -> usize {
    let cks = checkpoints(dir);
    for (_, p) in &cks {
        read_checkpoint(p).unwrap_or_else(|e| panic!("{}: {e}", p.display()));
    }
    cks.len()
}

#[test]
fn an_output_folder_that_cannot_be_created_is_an_io_error() {
    let dir = Scratch::new("no-folder");
    let case = dir.write("case.toml", &Small::default().text());
    let file = dir.write("a-file", "not a folder\n");
    let o = run_deepdry(&case, &file.join("out"), &[]);
    assert_one_line_error(&o, 4, &["a-file/out", "cannot create the output folder"]);
    assert_eq!(std::fs::read_to_string(&file).unwrap(), "not a folder\n");
}

/// A mount made for one test, unmounted when dropped.
struct Mount(PathBuf);

impl Mount {
    /// `mount ARGS… TARGET`; `None` (with the reason printed) when mounting is not possible
    /// here (not root, no mount privilege in a container, …).
    fn new(args: &[&str], target: &Path) -> Option<Mount> {
        let o = Command::new("mount").args(args).arg(target).output();
        match o {
            Ok(o) if o.status.success() => Some(Mount(target.to_path_buf())),
            Ok(o) => {
                eprintln!(
                    "SKIPPED: mount {args:?} {} failed: {}",
                    target.display(),
                    String::from_utf8_lossy(&o.stderr).trim()
                );
                None
            }
            Err(e) => {
                eprintln!("SKIPPED: cannot run mount: {e}");
                None
            }
        }
    }
}

impl Drop for Mount {
    fn drop(&mut self) {
        let _ = Command::new("umount").arg(&self.0).status();
    }
}

#[test]
fn a_read_only_output_folder_is_refused_and_its_checkpoints_stay_intact() {
    let dir = Scratch::new("read-only");
    let small = Small::default();
    let case = dir.write("case.toml", &small.text());
    let out = dir.join("out");
    run_ok(&case, &out, &[]);
    let before: Vec<(PathBuf, Vec<u8>)> = std::fs::read_dir(&out)
        .unwrap()
        .flatten()
        .map(|e| (e.path(), std::fs::read(e.path()).unwrap()))
        .collect();
    // Tests run as root, so file modes do not stop writes: a read-only bind mount does.
    let Some(_ro) = Mount::new(&["--bind", "-o", "ro", arg(&out)], &out) else {
        return;
    };
    if std::fs::write(out.join("probe"), "x").is_ok() {
        eprintln!("SKIPPED: the read-only bind mount is writable here");
        return;
    }
    let ck = checkpoint_at(&out, 5.0);
    for extra in [vec!["--resume", arg(&ck)], vec!["--overwrite"]] {
        let mut args = vec!["run", arg(&case), "--out", arg(&out), "--quiet"];
        args.extend(extra);
        let o = deepdry(&args);
        assert_one_line_error(&o, 4, &["Read-only file system"]);
    }
    let o = run_deepdry(&case, &out.join("sub"), &[]);
    assert_one_line_error(
        &o,
        4,
        &["cannot create the output folder", "Read-only file system"],
    );
    for (p, bytes) in &before {
        assert_eq!(&std::fs::read(p).unwrap(), bytes, "{} changed", p.display());
    }
    assert_eq!(assert_checkpoints_read(&out), small.end_year as usize);
    // inspect needs no write access.
    let o = deepdry(&["inspect", arg(&out.join("results.h5"))]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
}

#[test]
fn a_full_disk_stops_the_run_with_one_line_and_keeps_what_was_written() {
    let dir = Scratch::new("full-disk");
    // Frequent snapshots (the results file grows fast), a checkpoint every 5 years.
    let small = Small {
        end_year: 200.0,
        snapshot_every: 0.5,
        checkpoint_every: 5.0,
        ..Small::default()
    };
    let case = dir.write("case.toml", &small.text());
    let reference = dir.join("reference");
    run_ok(&case, &reference, &[]);
    let disk = dir.join("disk");
    std::fs::create_dir_all(&disk).unwrap();
    let Some(mount) = Mount::new(&["-t", "tmpfs", "-o", "size=256k", "tmpfs"], &disk) else {
        return;
    };
    let out = disk.join("out");
    let o = run_deepdry(&case, &out, &[]);
    let line = assert_one_line_error(&o, 4, &["No space left on device"]);
    eprintln!("full disk: {line}");
    // What was written is readable: the checkpoints and the results file up to its last
    // flush, with at least the rows the newest checkpoint counts on.
    let n = assert_checkpoints_read(&out);
    assert!(n >= 1, "no checkpoint before the disk filled");
    let newest = newest_checkpoint(&out).unwrap();
    let ck = read_checkpoint(&newest).unwrap();
    let d = datasets(&out.join("results.h5")).unwrap();
    assert!(d["series/time"].len() as u64 >= ck.position.series_rows);
    assert!(!std::fs::read_dir(&out)
        .unwrap()
        .flatten()
        .any(|e| e.file_name().to_string_lossy().ends_with(".tmp")));
    // Moved to a disk with room, the run resumes to the same end as the reference.
    let moved = dir.join("moved");
    std::fs::create_dir_all(&moved).unwrap();
    for e in std::fs::read_dir(&out).unwrap().flatten() {
        std::fs::copy(e.path(), moved.join(e.file_name())).unwrap();
    }
    drop(mount);
    let ck_moved = moved.join(newest.file_name().unwrap());
    run_ok(&case, &moved, &["--resume", arg(&ck_moved)]);
    assert_same_datasets(&reference.join("results.h5"), &moved.join("results.h5"));
}

/// A one-soil column for the extreme-input tests.
fn column(depth: f64, cells: usize, top_c: f64, bottom_c: f64, surface_water: &str) -> String {
    format!(
        r#"title = "extreme"
[column]
depth_m = {depth}
[mesh]
cells = {cells}
[soils.sl]
van_genuchten = {{ theta_r = 0.065, theta_s = 0.41, alpha_per_m = 7.5, n = 1.89 }}
dry_end = "fayer-simmons"
saturated_conductivity_m_per_s = 1.23e-5
campbell = {{ a = 1.46, b = 1.652, c = 9.222, d = 0.274 }}
solid_heat_capacity_J_per_m3_K = 1.18e6
[[layers]]
soil = "sl"
top_m = 0.0
bottom_m = {depth}
[surface]
temperature_C = {top_c}
{surface_water}
[bottom]
head_m = 0.0
temperature_C = {bottom_c}
[time]
end_year = 0.1
"#
    )
}

/// Runs a short span; returns the final unknowns from the final checkpoint.
fn short_run(dir: &Scratch, name: &str, text: &str) -> Vec<f64> {
    let case = dir.write(&format!("{name}.toml"), text);
    let out = dir.join(name);
    let o = run_deepdry(&case, &out, &[]);
    assert_eq!(o.status.code(), Some(0), "{name}: {}", stderr(&o));
    let ck = read_checkpoint(&checkpoint_at(&out, 0.1)).unwrap();
    assert!(ck.state.u.iter().all(|x| x.is_finite()), "{name}");
    // Balance: small relative to the flows, or at round-off relative to the storage (in a
    // deep column near equilibrium the flows over 0.1 yr are tiny: the 1000 m column has
    // relative errors of ~1e-6 from absolute ones of 1e-8 kg m-2 in 2e4 kg m-2 stored and
    // 0.24 J m-2 in 4.5e10 J m-2 stored).
    let rel = ck.info.balance_rel.unwrap();
    let abs = ck.info.balance_abs.unwrap();
    for k in 0..2 {
        assert!(
            rel[k] < 1e-6 || abs[k].abs() <= 1e-11 * ck.state.initial_totals[k].abs(),
            "{name}: balance errors {abs:?}, relative {rel:?}, storage {:?}",
            ck.state.initial_totals
        );
    }
    ck.state.u
}

#[test]
fn extreme_valid_input_runs_a_short_span() {
    let dir = Scratch::new("extremes");
    let rh = "relative_humidity = 0.3";
    // One cell.
    let u = short_run(&dir, "one-cell", &column(10.0, 1, 20.0, 21.0, rh));
    assert_eq!(u.len(), 3);
    // A 1 m and a 1000 m column.
    short_run(&dir, "1m", &column(1.0, 20, 20.0, 21.0, rh));
    let u = short_run(&dir, "1000m", &column(1000.0, 60, 20.0, 50.0, rh));
    // Hydrostatic start: the surface cell is near −1000 m.
    assert!(u[1] < -990.0, "{}", u[1]);
    // Temperatures from 0.5 to 80 °C: cold, hot, and both across one column.
    short_run(&dir, "cold", &column(10.0, 30, 0.5, 0.5, rh));
    short_run(&dir, "hot", &column(10.0, 30, 80.0, 80.0, rh));
    short_run(&dir, "cold-over-hot", &column(10.0, 30, 0.5, 80.0, rh));
    short_run(
        &dir,
        "bone-dry-air",
        &column(10.0, 30, 20.0, 21.0, "relative_humidity = 0.001"),
    );
    // Heads: the surface held at oven dryness (−1e5 m) and past it (−1e6 m, the bound).
    short_run(
        &dir,
        "oven-dry",
        &column(10.0, 30, 20.0, 21.0, "head_m = -1.0e5"),
    );
    short_run(
        &dir,
        "past-oven-dry",
        &column(10.0, 30, 20.0, 21.0, "head_m = -1.0e6"),
    );
    short_run(&dir, "wet", &column(10.0, 30, 20.0, 21.0, "head_m = -0.01"));
    // An initial profile from oven-dry at the surface to saturation at the bottom.
    dir.write(
        "profile.csv",
        "depth_m,temperature_C,head_m\n0,20,-100000\n0.5,20,-1000\n2,20,-10\n10,21,0\n",
    );
    let text = column(10.0, 30, 20.0, 21.0, rh).replace(
        "[time]",
        "[initial]\nstate = \"profile\"\ncsv = \"profile.csv\"\n[time]",
    );
    let u = short_run(&dir, "profile", &text);
    assert!(u[1] < -1000.0, "surface head {}", u[1]);
}

#[test]
fn a_saturated_surface_over_a_dry_column() {
    // A surface head of 0 (ponded infiltration) over a dry 10 m sandy loam. With the plain
    // van Genuchten–Mualem curve (n = 1.89 < 2) the conductivity's slope is unbounded at
    // saturation and Newton fails at the minimum step as the wetting front reaches
    // saturated soil: exit 3, one line naming the remedy, last good state saved.
    let dir = Scratch::new("ponded");
    let case = dir.write("case.toml", &column(10.0, 30, 20.0, 21.0, "head_m = 0.0"));
    let out = dir.join("out");
    let o = run_deepdry(&case, &out, &[]);
    assert_one_line_error(
        &o,
        3,
        &[
            "step failed at t = ",
            "failed-state.h5",
            "air_entry_m = 0.02",
        ],
    );
    read_checkpoint(&out.join("failed-state.h5")).unwrap();
    // With the air-entry modification of Vogel et al. (2001) it runs to the end: the
    // column fills to saturation, and the flux through a uniform saturated column with
    // the head 0 at both ends is Darcy's q = Ks (unit gradient; exact), while the
    // balance closes.
    // (K without its viscosity dependence: the wetting front's latent and sensible heat
    // leave temperatures within a few hundredths of a kelvin of uniform at 0.1 yr, which
    // moves K by ~1e-5 through the viscosity.)
    let text = column(10.0, 30, 20.0, 20.0, "head_m = 0.0")
        .replace("n = 1.89 }", "n = 1.89, air_entry_m = 0.02 }")
        + "[physics]\nviscosity_correction = false\n";
    let u = short_run(&dir, "ponded-air-entry", &text);
    assert!(
        u.iter().skip(1).step_by(3).all(|h| *h > -0.02),
        "not saturated"
    );
    let results = dir.join("ponded-air-entry").join("results.h5");
    let sets = datasets(&results).unwrap();
    let q = *sets["series/bottom_water_flux"].floats().last().unwrap();
    let ks = 1.23e-5 * 1000.0;
    assert!(
        (q / ks - 1.0).abs() < 1e-6,
        "saturated flux {q} vs Ks {ks} kg m-2 s-1"
    );
}

#[test]
fn the_cell_count_limits() {
    let dir = Scratch::new("cells");
    // 100 000 cells: parse, mesh, summary, and one step of the solver.
    let text = column(10.0, 100_000, 20.0, 21.0, "relative_humidity = 0.3");
    let case = dir.write("big.toml", &text);
    let o = deepdry(&["check", arg(&case)]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(stdout(&o).contains("100000 cells"), "{}", stdout(&o));
    let model = deepdry::case::load(&case).unwrap();
    assert_eq!(model.mesh.n_cells(), 100_000);
    let mut sys = deepdry::physics::System::new(&model);
    let u0 =
        deepdry::run::initial_unknowns(&model, deepdry::solve::linear::SolverKind::BlockThomas)
            .unwrap();
    let state = deepdry::solve::stepper::Stepper::initial_state(&mut sys, 0.0, 60.0, u0);
    let lin =
        deepdry::solve::linear::make_solver(deepdry::solve::linear::SolverKind::BlockThomas, sys.n);
    let mut st = deepdry::solve::stepper::Stepper::new(
        &mut sys,
        state,
        deepdry::run::step_options(&model),
        lin,
    );
    let info = st.step(&mut sys, 0.1 * YEAR).unwrap();
    assert!(info.dt > 0.0 && st.state.t > 0.0);
    assert!(st.state.u.iter().all(|x| x.is_finite()));
    // The limit is 1 000 000 cells; one more is refused with the limit named.
    let case = dir.write(
        "too-many.toml",
        &column(10.0, 1_000_001, 20.0, 21.0, "no_flow = true"),
    );
    let o = deepdry(&["check", arg(&case)]);
    assert_one_line_error(&o, 2, &["1000001 cells are more than the limit of 1000000"]);
}

#[test]
fn a_checkpoint_interval_too_fine_for_the_run_is_refused_before_anything_is_written() {
    // Before the fix, every_year = 1e-12 over 10 years listed 1e13 checkpoint times and
    // took the machine's memory before the first step.
    let dir = Scratch::new("ck-interval");
    let small = Small {
        checkpoint_every: 1e-12,
        ..Small::default()
    };
    let case = dir.write("case.toml", &small.text());
    let out = dir.join("out");
    let o = run_deepdry(&case, &out, &[]);
    assert_one_line_error(
        &o,
        2,
        &[
            "checkpoint.every_year = 1e-12",
            "1.000e13 checkpoints",
            "at most 1e6",
        ],
    );
    assert!(!out.exists());
}

/// Output into a pipe that closes early (`deepdry table water | head -1`) ends the process
/// by SIGPIPE, quietly, as other command-line tools do — never a panic message.
#[test]
fn a_closed_output_pipe_ends_quietly() {
    use std::io::Read;
    use std::process::{Command, Stdio};
    let mut child = Command::new(support::bin())
        .args(["table", "water", "--step", "0.001"])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut first = [0u8; 64];
    child
        .stdout
        .as_mut()
        .unwrap()
        .read_exact(&mut first)
        .unwrap();
    drop(child.stdout.take());
    let mut err = String::new();
    child
        .stderr
        .as_mut()
        .unwrap()
        .read_to_string(&mut err)
        .unwrap();
    let status = child.wait().unwrap();
    assert!(!err.contains("panicked"), "{err}");
    assert!(!status.success(), "{status:?}");
}
