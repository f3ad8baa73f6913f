//! Checkpoints, resume and branching, proven on the binary:
//! - a resumed run is bitwise identical to an uninterrupted one (every dataset of the
//!   results file and of the final checkpoint), for backward Euler and for BDF;
//! - SIGTERM stops with exit code 5 and a checkpoint that resumes exactly;
//! - SIGKILL at pseudo-random moments (many during checkpoint writes) never leaves an
//!   unreadable newest checkpoint, and resuming from it reaches the same final state;
//! - branching starts from the checkpoint's state and records its parent; mismatched
//!   meshes and soils are refused;
//! - truncated, empty, foreign and version-mismatched checkpoints give one-line errors;
//! - an existing results file is refused unless `--overwrite`.

mod support;

use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};
use support::*;

/// Final checkpoint of a finished run in `dir`.
fn final_checkpoint(dir: &Path, end_year: f64) -> PathBuf {
    checkpoint_at(dir, end_year)
}

/// Runs A to the end; runs B to the end, then resumes B from checkpoints in its middle
/// (each resume drops B's later rows first and writes them again) and compares B with A
/// bitwise after each.
fn restart_identity(method: &'static str, extra_time: &str, name: &str) {
    let dir = Scratch::new(name);
    let small = Small {
        method,
        extra_time: extra_time.into(),
        // A breakpoint at year 6: the BDF history restarts there, and must also restart
        // there in a resumed run.
        humidity: "{ steps = [[0.0, 0.25], [6.0, 0.15]] }".into(),
        ..Small::default()
    };
    let case = dir.write("case.toml", &small.text());
    let (a, b) = (dir.join("a"), dir.join("b"));
    run_ok(&case, &a, &[]);
    run_ok(&case, &b, &[]);
    let ra = a.join("results.h5");
    let rb = b.join("results.h5");
    let (nsets, _) = assert_same_datasets(&ra, &rb);
    assert!(nsets >= 25, "{nsets} datasets");
    let rows = datasets(&ra).unwrap()["series/time"].len();
    assert!(
        rows > 50,
        "only {rows} series rows: the run is too short to test"
    );
    for t in [5.0, 2.0, 9.0, 6.0] {
        let ck = checkpoint_at(&b, t);
        if method == "bdf" && t != 6.0 {
            let h = &datasets(&ck).unwrap()["history_unknowns"];
            assert!(
                h.len() >= 2 * 3 * small.cells,
                "BDF checkpoint at {t} yr holds {} history values: the test needs a multistep history",
                h.len()
            );
        }
        run_ok(&case, &b, &["--resume", arg(&ck)]);
        assert_same_datasets(&ra, &rb);
        assert_same_datasets(
            &final_checkpoint(&a, small.end_year),
            &final_checkpoint(&b, small.end_year),
        );
    }
    // A checkpoint without the storages of its points and the states of the system's kept
    // evaluations (as written before they were kept) still resumes: the storages are
    // re-evaluated from the unknowns, which may differ from the kept ones in the last
    // bits, and the first step evaluates every cell afresh, so the run ends within
    // round-off of the reference rather than bitwise on it.
    let c = dir.join("c");
    std::fs::create_dir_all(&c).unwrap();
    for e in std::fs::read_dir(&b).unwrap().flatten() {
        std::fs::copy(e.path(), c.join(e.file_name())).unwrap();
    }
    let ck = checkpoint_at(&c, 5.0);
    {
        let _g = h5_guard();
        let f = hdf5::File::open_rw(&ck).unwrap();
        f.unlink("storage").unwrap();
        f.unlink("linearization_cells").unwrap();
        f.unlink("linearization_faces").unwrap();
        if method == "bdf" {
            f.unlink("history_storage").unwrap();
        }
        // Sealed again, as a file written without them would be.
        let sum = deepdry::checkpoint::content_checksum(&f).unwrap();
        f.delete_attr("checksum").unwrap();
        let v: hdf5::types::VarLenUnicode = sum.parse().unwrap();
        f.new_attr::<hdf5::types::VarLenUnicode>()
            .shape(())
            .create("checksum")
            .unwrap()
            .write_scalar(&v)
            .unwrap();
    }
    run_ok(&case, &c, &["--resume", arg(&ck)]);
    let end = |d: &Path| {
        deepdry::checkpoint::read(&final_checkpoint(d, small.end_year))
            .unwrap()
            .state
            .u
    };
    let (ua, uc) = (end(&a), end(&c));
    assert_eq!(ua.len(), uc.len());
    for (k, (x, y)) in ua.iter().zip(uc.iter()).enumerate() {
        assert!(
            (x - y).abs() <= 1e-9 * x.abs().max(1e-6),
            "unknown {k}: {x:e} after a resume without storages vs {y:e}"
        );
    }
}

#[test]
fn resume_is_bitwise_identical_backward_euler() {
    restart_identity("backward-euler", "", "identity-be");
}

#[test]
fn resume_is_bitwise_identical_bdf() {
    restart_identity("bdf", "", "identity-bdf");
}

/// `memory = "lean"`: no kept evaluations to checkpoint (their datasets are empty), and
/// a resume is bitwise the same as well.
#[test]
fn resume_is_bitwise_identical_lean_memory() {
    restart_identity("bdf", "memory = \"lean\"", "identity-lean");
}

/// A run of about a second with 50 checkpoints (most of the wall time goes into
/// checkpoint writes, each with two fsyncs).
fn long_case() -> Small {
    Small {
        cells: 40,
        end_year: 200.0,
        snapshot_every: 5.0,
        checkpoint_every: 4.0,
        keep: 4,
        ..Small::default()
    }
}

#[test]
fn sigterm_stops_with_code_5_and_a_checkpoint_that_resumes_exactly() {
    let dir = Scratch::new("sigterm");
    let small = long_case();
    let case = dir.write("case.toml", &small.text());
    let reference = dir.join("reference");
    run_ok(&case, &reference, &[]);
    let out = dir.join("run");
    let mut child = spawn_run(&case, &out, &[]);
    // Wait for the checkpoint at year 20, then ask the run to stop.
    let t0 = Instant::now();
    while checkpoints(&out).last().map(|c| c.0).unwrap_or(0.0) < 20.0 {
        assert!(child.try_wait().unwrap().is_none(), "finished too early");
        assert!(t0.elapsed() < Duration::from_secs(60), "no checkpoint");
        std::thread::sleep(Duration::from_millis(2));
    }
    signal(&child, "-TERM");
    let o = child.wait_with_output().unwrap();
    let line = assert_one_line_error(
        &o,
        5,
        &["interrupted at t = ", "checkpoint written to ", "--resume"],
    );
    // "interrupted at t = 2.100000e1 yr; checkpoint written to PATH (continue with --resume)"
    let t_msg: f64 = line
        .split("t = ")
        .nth(1)
        .unwrap()
        .split(" yr")
        .next()
        .unwrap()
        .parse()
        .unwrap();
    let path = PathBuf::from(
        line.split("checkpoint written to ")
            .nth(1)
            .unwrap()
            .split(" (continue")
            .next()
            .unwrap(),
    );
    assert!(t_msg >= 20.0 && t_msg < small.end_year, "{line}");
    let ck = read_checkpoint(&path).unwrap();
    let t_ck = ck.state.t / deepdry::props::constants::SECONDS_PER_YEAR;
    assert!((t_ck - t_msg).abs() <= 1e-6 * t_msg, "{t_ck} vs {t_msg}");
    assert_eq!(newest_checkpoint(&out).unwrap(), path);
    run_ok(&case, &out, &["--resume", arg(&path)]);
    assert_same_datasets(&reference.join("results.h5"), &out.join("results.h5"));
    assert_same_datasets(
        &final_checkpoint(&reference, small.end_year),
        &final_checkpoint(&out, small.end_year),
    );
    eprintln!("SIGTERM at year {t_msg}: resumed run identical to the uninterrupted one");
}

#[test]
fn sigkill_at_random_moments_then_resume_reaches_the_same_state() {
    let dir = Scratch::new("sigkill");
    let small = long_case();
    let case = dir.write("case.toml", &small.text());
    let reference = dir.join("reference");
    let t0 = Instant::now();
    run_ok(&case, &reference, &[]);
    let wall = t0.elapsed().as_secs_f64();
    let ref_results = reference.join("results.h5");
    let ref_final = final_checkpoint(&reference, small.end_year);
    let mut rng = (0x9e37_79b9_7f4a_7c15u64, 0usize);
    let mut next = || {
        let x = &mut rng.0;
        *x ^= *x << 13;
        *x ^= *x >> 7;
        *x ^= *x << 17;
        rng.1 += 1;
        (*x >> 11) as f64 / (1u64 << 53) as f64
    };
    let kills = 8;
    let (mut during_write, mut damaged, mut no_checkpoint) = (0, 0, 0);
    let mut report = Vec::new();
    for k in 0..kills {
        let out = dir.join(&format!("kill-{k}"));
        let mut child = spawn_run(&case, &out, &[]);
        // Wait for the first checkpoint half of the time, so that kills late in the run
        // are not all lost to start-up.
        let delay = (0.05 + 0.85 * next()) * wall;
        std::thread::sleep(Duration::from_secs_f64(delay));
        child.kill().unwrap();
        let status = child.wait().unwrap();
        let tmp_left = std::fs::read_dir(&out)
            .map(|rd| {
                rd.flatten()
                    .filter(|e| e.file_name().to_string_lossy().ends_with(".h5.tmp"))
                    .count()
            })
            .unwrap_or(0);
        if tmp_left > 0 {
            during_write += 1;
        }
        if status.success() {
            report.push(format!("{delay:.3} s: finished before the kill"));
            continue;
        }
        let Some(newest) = newest_checkpoint(&out) else {
            no_checkpoint += 1;
            report.push(format!("{delay:.3} s: killed before the first checkpoint"));
            continue;
        };
        // The newest checkpoint is complete: it reads, and inspect describes it.
        let ck = read_checkpoint(&newest)
            .unwrap_or_else(|e| panic!("kill {k} at {delay:.3} s: newest checkpoint: {e}"));
        if (ck.year() - small.end_year).abs() <= 1e-9 * small.end_year {
            // Killed after the final checkpoint, while closing: nothing to resume (and
            // resume says so); the final state is the reference's.
            let o = run_deepdry(&case, &out, &["--resume", arg(&newest)]);
            assert_one_line_error(&o, 2, &["nothing to continue"]);
            assert_same_datasets(&ref_final, &newest);
            report.push(format!("{delay:.3} s: killed after the final checkpoint"));
            continue;
        }
        let o = deepdry(&["inspect", arg(&newest)]);
        assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
        // The results file: every dataset readable, at least the checkpoint's rows.
        let results = out.join("results.h5");
        let readable = match datasets(&results) {
            Ok(d) => {
                assert!(d["series/time"].len() as u64 >= ck.position.series_rows);
                assert!(d["profiles/time"].len() as u64 >= ck.position.snapshots);
                true
            }
            Err(_) => false,
        };
        let o = run_deepdry(&case, &out, &["--resume", arg(&newest)]);
        if readable {
            assert_eq!(o.status.code(), Some(0), "kill {k}: {}", stderr(&o));
            assert_same_datasets(&ref_results, &results);
            assert_same_datasets(&ref_final, &final_checkpoint(&out, small.end_year));
        } else {
            // A results file damaged by the kill: resume refuses with one line that says
            // what to do, and leaves the checkpoint as it was.
            damaged += 1;
            assert_one_line_error(&o, 4, &["results.h5", "--overwrite"]);
            read_checkpoint(&newest).unwrap();
        }
        report.push(format!(
            "{delay:.3} s: newest checkpoint at {:.0} yr{}{}",
            ck.state.t / deepdry::props::constants::SECONDS_PER_YEAR,
            if tmp_left > 0 {
                ", killed during a checkpoint write"
            } else {
                ""
            },
            if readable {
                ", resumed: identical"
            } else {
                ", results damaged: refused"
            }
        ));
    }
    eprintln!(
        "{kills} kills in a {wall:.2} s run: {during_write} during checkpoint writes, {damaged} damaged results files, {no_checkpoint} before the first checkpoint\n  {}",
        report.join("\n  ")
    );
    assert!(
        no_checkpoint + damaged < kills,
        "no kill left a resumable run"
    );
}

#[test]
fn branches_start_from_the_same_state_and_record_their_parent() {
    let dir = Scratch::new("branch");
    let parent = Small::default();
    let case = dir.write("parent.toml", &parent.text());
    let pdir = dir.join("parent");
    run_ok(&case, &pdir, &[]);
    let ck = checkpoint_at(&pdir, 4.0);
    // Two climates after year 4 (both 0.25 at year 4, as in the parent).
    let mk = |name: &str, rh_end: f64| {
        let b = Small {
            humidity: format!("{{ table = [[4.0, 0.25], [10.0, {rh_end}]] }}"),
            ..Small::default()
        };
        dir.write(name, &b.text())
    };
    let (c1, c2) = (mk("dry.toml", 0.05), mk("wet.toml", 0.9));
    let (b1, b2) = (dir.join("dry"), dir.join("wet"));
    run_ok(&c1, &b1, &["--start-from", arg(&ck)]);
    run_ok(&c2, &b2, &["--start-from", arg(&ck)]);
    let d1 = datasets(&b1.join("results.h5")).unwrap();
    let d2 = datasets(&b2.join("results.h5")).unwrap();
    let dp = datasets(&pdir.join("results.h5")).unwrap();
    let ncell = parent.cells;
    let row = |d: &std::collections::BTreeMap<String, Data>, name: &str, k: usize| {
        let v = d[&format!("profiles/{name}")].floats();
        let w = v.len() / d["profiles/time"].len();
        v[k * w..(k + 1) * w]
            .iter()
            .map(|x| x.to_bits())
            .collect::<Vec<_>>()
    };
    // First snapshot at year 4 in both branches; the parent has one at year 4 too (index 2).
    assert_eq!(d1["profiles/time"].floats()[0], 4.0);
    assert_eq!(dp["profiles/time"].floats()[2], 4.0);
    let names = [
        "temperature",
        "head",
        "liquid_content",
        "vapor_density",
        "relative_humidity",
        "liquid_flux_isothermal",
        "liquid_flux_thermal",
        "vapor_flux_isothermal",
        "vapor_flux_thermal",
        "heat_flux",
    ];
    for name in names {
        assert_eq!(
            row(&d1, name, 0),
            row(&d2, name, 0),
            "{name} at the branch point"
        );
        assert_eq!(
            row(&d1, name, 0),
            row(&dp, name, 2),
            "{name}: branch vs parent"
        );
    }
    let last = d1["profiles/time"].len() - 1;
    assert_eq!(d1["profiles/time"].floats()[last], 10.0);
    let (h1, h2) = (row(&d1, "head", last), row(&d2, "head", last));
    assert_eq!(h1.len(), ncell);
    assert_ne!(h1, h2, "the two climates gave the same heads at year 10");
    // The surface cell is drier under the drier air.
    assert!(f64::from_bits(h1[0]) < f64::from_bits(h2[0]));
    // Parent recorded in the branch's results file, and shown by inspect.
    let r1 = b1.join("results.h5");
    assert_eq!(root_attr(&r1, "parent_checkpoint").unwrap(), arg(&ck));
    // The parent's time is a number (issue 16: it was the string "4e0").
    let pt = root_attr_f64(&r1, "parent_time_year").expect("a number attribute");
    assert!((pt - 4.0).abs() < 1e-12, "{pt}");
    assert_eq!(root_attr(&r1, "parent_time_year"), None);
    let o = deepdry(&["inspect", arg(&r1)]);
    assert_eq!(o.status.code(), Some(0));
    assert!(
        stdout(&o).contains(&format!("branch of: {} at 4 yr", arg(&ck))),
        "{}",
        stdout(&o)
    );
    // inspect still reads the string of files written before (a copy with the old form).
    let old = dir.join("old-branch.h5");
    std::fs::copy(&r1, &old).unwrap();
    {
        let _g = h5_guard();
        let f = hdf5::File::open_rw(&old).unwrap();
        f.delete_attr("parent_time_year").unwrap();
        deepdry::output::h5util::attr_str(&f, "parent_time_year", "4e0").unwrap();
    }
    let o = deepdry(&["inspect", arg(&old)]);
    assert!(stdout(&o).contains(" at 4 yr (hash "), "{}", stdout(&o));
    // A different mesh and a different soil are refused, and nothing is written.
    let other_mesh = dir.write(
        "mesh.toml",
        &Small {
            cells: 20,
            ..Small::default()
        }
        .text(),
    );
    let o = deepdry(&[
        "run",
        arg(&other_mesh),
        "--out",
        arg(&dir.join("m")),
        "--start-from",
        arg(&ck),
    ]);
    assert_one_line_error(&o, 2, &["mesh differs", "30 cells", "20 cells"]);
    assert!(!dir.join("m/results.h5").exists());
    let other_soil = dir.write(
        "soil.toml",
        &Small::default().text().replace("1.23e-5", "2.0e-5"),
    );
    let o = deepdry(&[
        "run",
        arg(&other_soil),
        "--out",
        arg(&dir.join("s")),
        "--start-from",
        arg(&ck),
    ]);
    assert_one_line_error(&o, 2, &["soils or layers differ"]);
    assert!(!dir.join("s/results.h5").exists());
    // Resuming with a changed case is refused too (branching is the way to change it).
    let o = deepdry(&["run", arg(&c1), "--out", arg(&pdir), "--resume", arg(&ck)]);
    assert_one_line_error(&o, 2, &["the case differs", "--start-from"]);
}

/// Writes an HDF5 file that deepdry did not write: a dataset and an attribute.
fn foreign_h5(path: &Path) {
    let _g = h5_guard();
    let f = hdf5::File::create(path).unwrap();
    f.new_dataset_builder()
        .with_data(&ndarray::arr1(&[1.0f64, 2.0, 3.0]))
        .create("unknowns")
        .unwrap();
    f.new_attr::<f64>()
        .shape(())
        .create("time_year")
        .unwrap()
        .write_scalar(&1.0)
        .unwrap();
}

/// Rewrites the root string attribute `name` of an HDF5 file.
fn set_attr(path: &Path, name: &str, value: &str) {
    let _g = h5_guard();
    let f = hdf5::File::open_rw(path).unwrap();
    f.delete_attr(name).unwrap();
    let v: hdf5::types::VarLenUnicode = value.parse().unwrap();
    f.new_attr::<hdf5::types::VarLenUnicode>()
        .shape(())
        .create(name)
        .unwrap()
        .write_scalar(&v)
        .unwrap();
}

#[test]
fn bad_checkpoints_give_one_line_errors_for_resume_start_from_and_inspect() {
    let dir = Scratch::new("badck");
    let small = Small::default();
    let case = dir.write("case.toml", &small.text());
    let out = dir.join("out");
    run_ok(&case, &out, &[]);
    let good = checkpoint_at(&out, 5.0);
    let bytes = std::fs::read(&good).unwrap();
    let truncated = dir.write("truncated.h5", "");
    std::fs::write(&truncated, &bytes[..bytes.len() / 2]).unwrap();
    let head_only = dir.join("head-only.h5");
    std::fs::write(&head_only, &bytes[..600.min(bytes.len())]).unwrap();
    let empty = dir.write("empty.h5", "");
    let text = dir.write("text.h5", "this is not HDF5\n");
    let foreign = dir.join("foreign.h5");
    foreign_h5(&foreign);
    let version = dir.join("version.h5");
    std::fs::copy(&good, &version).unwrap();
    set_attr(&version, "format", "99");
    {
        // A file of another format has no checksum of this format's kind.
        let _g = h5_guard();
        let f = hdf5::File::open_rw(&version).unwrap();
        f.delete_attr("checksum").unwrap();
    }
    let damaged = dir.join("damaged.h5");
    std::fs::copy(&good, &damaged).unwrap();
    {
        let _g = h5_guard();
        let f = hdf5::File::open_rw(&damaged).unwrap();
        f.unlink("unknowns").unwrap();
    }
    let missing = dir.join("no-such-checkpoint.h5");
    let results = out.join("results.h5");
    let cases: Vec<(&Path, Vec<&str>)> = vec![
        (&truncated, vec!["truncated.h5", "not a readable HDF5 file"]),
        (&head_only, vec!["head-only.h5", "not a readable HDF5 file"]),
        (&empty, vec!["empty.h5", "the file is empty"]),
        (&text, vec!["text.h5", "not a readable HDF5 file"]),
        (&foreign, vec!["foreign.h5", "not written by deepdry"]),
        (
            &version,
            vec!["version.h5", "checkpoint format 99", "reads format 3"],
        ),
        (
            &damaged,
            vec!["damaged.h5", "damaged checkpoint", "checksum"],
        ),
        (&missing, vec!["no-such-checkpoint.h5", "no such file"]),
        (&results, vec!["results.h5", "not a checkpoint"]),
    ];
    for (path, fragments) in &cases {
        for flag in ["--resume", "--start-from"] {
            let o = run_deepdry(&case, &dir.join("resume-out"), &[flag, arg(path)]);
            assert_one_line_error(&o, 2, fragments);
        }
        let o = deepdry(&["inspect", arg(path)]);
        if *path == results.as_path() {
            assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
        } else {
            assert_one_line_error(&o, 2, &fragments[..1]);
        }
    }
    // The original checkpoint is untouched and still resumes.
    assert_eq!(std::fs::read(&good).unwrap(), bytes);
    run_ok(&case, &out, &["--resume", arg(&good)]);
}

#[test]
fn inspect_describes_results_and_checkpoints() {
    let dir = Scratch::new("inspect");
    let small = Small::default();
    let case = dir.write("case.toml", &small.text());
    let out = dir.join("out");
    run_ok(&case, &out, &[]);
    let o = deepdry(&["inspect", arg(&out.join("results.h5"))]);
    assert_eq!(o.status.code(), Some(0));
    let text = stdout(&o);
    let rows = datasets(&out.join("results.h5")).unwrap()["series/time"].len();
    for want in [
        "kind: results".to_string(),
        "case title: small test column".into(),
        format!("software version: {}", env!("CARGO_PKG_VERSION")),
        "cells: 30".into(),
        format!("times covered: 0 to 10 yr ({rows} series rows)"),
        "snapshots: 6".into(),
        "last relative balance errors: water ".into(),
    ] {
        assert!(text.contains(&want), "lacks `{want}`:\n{text}");
    }
    let o = deepdry(&["inspect", arg(&checkpoint_at(&out, 5.0))]);
    assert_eq!(o.status.code(), Some(0));
    let text = stdout(&o);
    for want in [
        "kind: checkpoint",
        "case title: small test column",
        "software version: ",
        "checkpoint format: 3",
        "time: 5 yr, next step ",
        "cells: 30",
        "snapshots",
        "last relative balance errors: water ",
    ] {
        assert!(text.contains(want), "lacks `{want}`:\n{text}");
    }
}

#[test]
fn an_existing_results_file_is_refused_unless_overwrite() {
    let dir = Scratch::new("overwrite");
    let small = Small::default();
    let case = dir.write("case.toml", &small.text());
    let out = dir.join("out");
    run_ok(&case, &out, &[]);
    let before = std::fs::read(out.join("results.h5")).unwrap();
    let cks = checkpoints(&out);
    let o = run_deepdry(&case, &out, &[]);
    assert_one_line_error(&o, 4, &["results.h5", "exists already", "--overwrite"]);
    assert_eq!(std::fs::read(out.join("results.h5")).unwrap(), before);
    assert_eq!(checkpoints(&out), cks);
    // The same for a branch into a folder that holds a run.
    let o = run_deepdry(
        &case,
        &out,
        &["--start-from", arg(&checkpoint_at(&out, 5.0))],
    );
    assert_one_line_error(&o, 4, &["exists already", "--overwrite"]);
    assert_eq!(std::fs::read(out.join("results.h5")).unwrap(), before);
    // With --overwrite: a shorter run replaces the results and the old run's checkpoints,
    // and its own final checkpoint is kept.
    let short = Small {
        end_year: 4.0,
        ..Small::default()
    };
    let case2 = dir.write("short.toml", &short.text());
    run_ok(&case2, &out, &["--overwrite"]);
    let left: Vec<f64> = checkpoints(&out).iter().map(|c| c.0).collect();
    assert_eq!(left, vec![1.0, 2.0, 3.0, 4.0], "checkpoints left: {left:?}");
    let ck = read_checkpoint(&checkpoint_at(&out, 4.0)).unwrap();
    assert!(ck.case_text.contains("end_year = 4"));
}

#[test]
fn a_resumed_run_killed_early_resumes_from_its_own_newest_checkpoint() {
    // Resuming from year 20 drops the results after year 20, so the later checkpoints of
    // the first run no longer match the results file. A resumed run killed soon after must
    // leave its own checkpoints as the newest (before the fix, pruning kept the first
    // run's last checkpoints and deleted each new one at once).
    let dir = Scratch::new("later");
    let all = Small {
        keep: 1000,
        ..long_case()
    };
    let case_all = dir.write("all.toml", &all.text());
    let out = dir.join("out");
    run_ok(&case_all, &out, &[]);
    let ck20 = dir.join("ck20.h5");
    std::fs::copy(checkpoint_at(&out, 20.0), &ck20).unwrap();
    let reference = dir.join("reference.h5");
    std::fs::copy(out.join("results.h5"), &reference).unwrap();
    let final_ref = dir.join("final.h5");
    std::fs::copy(checkpoint_at(&out, all.end_year), &final_ref).unwrap();
    // The same case with keep = 4 (keep is not part of the physics).
    let case = dir.write("keep4.toml", &long_case().text());
    // Killed as soon as it has written a checkpoint of its own (the first after year
    // 20, about 5 of its 180 years in): a delay in wall time could outlast the whole run
    // when the first run was slowed by the tests running beside it.
    let spawned = std::time::SystemTime::now();
    let mut child = spawn_run(&case, &out, &["--resume", arg(&ck20)]);
    let give_up = Instant::now() + Duration::from_secs(120);
    while Instant::now() < give_up {
        let own = checkpoints(&out).iter().any(|(_, p)| {
            std::fs::metadata(p)
                .and_then(|m| m.modified())
                .is_ok_and(|m| m >= spawned)
        });
        if own {
            break;
        }
        std::thread::sleep(Duration::from_millis(2));
    }
    child.kill().unwrap();
    assert!(!child.wait().unwrap().success(), "finished before the kill");
    let newest = newest_checkpoint(&out).unwrap();
    let t_newest = checkpoints(&out).last().unwrap().0;
    assert!(
        t_newest < all.end_year,
        "newest checkpoint at {t_newest} yr is the first run's"
    );
    run_ok(&case, &out, &["--resume", arg(&newest)]);
    assert_same_datasets(&reference, &out.join("results.h5"));
    assert_same_datasets(&final_ref, &checkpoint_at(&out, all.end_year));
    // A results file without its checkpoint's rows is refused with a clear line.
    let other = dir.join("other");
    let short = Small {
        end_year: 2.0,
        ..Small::default()
    };
    run_ok(&dir.write("short.toml", &short.text()), &other, &[]);
    let o = run_deepdry(&case, &other, &["--resume", arg(&ck20)]);
    assert_one_line_error(&o, 2, &["results.h5", "does not belong to this checkpoint"]);
}

#[test]
fn resume_refuses_a_missing_damaged_or_foreign_results_file() {
    let dir = Scratch::new("results-check");
    let small = Small::default();
    let case = dir.write("case.toml", &small.text());
    let out = dir.join("out");
    run_ok(&case, &out, &[]);
    let ck = dir.join("ck5.h5");
    std::fs::copy(checkpoint_at(&out, 5.0), &ck).unwrap();
    let results = out.join("results.h5");
    let good = std::fs::read(&results).unwrap();
    let resume = |folder: &Path| run_deepdry(&case, folder, &["--resume", arg(&ck)]);
    // Missing.
    std::fs::remove_file(&results).unwrap();
    let o = resume(&out);
    assert_one_line_error(
        &o,
        4,
        &["results.h5: no such file", "--overwrite", "--start-from"],
    );
    // Damaged (cut in half, as a kill during a flush may leave it): refused, untouched.
    std::fs::write(&results, &good[..good.len() / 2]).unwrap();
    let o = resume(&out);
    assert_one_line_error(
        &o,
        4,
        &[
            "results.h5: the results file cannot be continued",
            "--overwrite",
        ],
    );
    assert_eq!(std::fs::read(&results).unwrap().len(), good.len() / 2);
    // Another run's results: a different mesh, or the same mesh and other times.
    for (name, other) in [
        (
            "mesh",
            Small {
                cells: 20,
                end_year: 20.0,
                ..Small::default()
            },
        ),
        (
            "times",
            Small {
                humidity: "0.6".into(),
                end_year: 20.0,
                ..Small::default()
            },
        ),
    ] {
        let folder = dir.join(name);
        run_ok(
            &dir.write(&format!("{name}.toml"), &other.text()),
            &folder,
            &[],
        );
        let before = std::fs::read(folder.join("results.h5")).unwrap();
        let o = resume(&folder);
        assert_one_line_error(&o, 2, &["results.h5", "does not belong to this checkpoint"]);
        assert_eq!(std::fs::read(folder.join("results.h5")).unwrap(), before);
    }
    // The right file resumes.
    std::fs::write(&results, &good).unwrap();
    run_ok(&case, &out, &["--resume", arg(&ck)]);
}

#[test]
fn a_second_run_into_a_folder_in_use_is_refused_and_harms_nothing() {
    let dir = Scratch::new("in-use");
    let small = long_case();
    let case = dir.write("case.toml", &small.text());
    let out = dir.join("out");
    let mut child = spawn_run(&case, &out, &[]);
    let t0 = Instant::now();
    while checkpoints(&out).last().map(|c| c.0).unwrap_or(0.0) < 8.0 {
        assert!(child.try_wait().unwrap().is_none(), "finished too early");
        assert!(t0.elapsed() < Duration::from_secs(60), "no checkpoint");
        std::thread::sleep(Duration::from_millis(2));
    }
    // Freeze the run while it holds its files, and try to write into its folder.
    signal(&child, "-STOP");
    let ck = newest_checkpoint(&out).unwrap();
    let size = std::fs::metadata(out.join("results.h5")).unwrap().len();
    let o = run_deepdry(&case, &out, &["--overwrite"]);
    assert_one_line_error(
        &o,
        4,
        &["another deepdry run (process ", "is writing to this folder"],
    );
    let o = run_deepdry(&case, &out, &["--resume", arg(&ck)]);
    assert_one_line_error(&o, 4, &["another deepdry run", "is writing to this folder"]);
    let o = deepdry(&["inspect", arg(&out.join("results.h5"))]);
    assert_one_line_error(&o, 4, &["results.h5: the file is open in another process"]);
    // A checkpoint can be inspected meanwhile.
    let o = deepdry(&["inspect", arg(&ck)]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_eq!(
        std::fs::metadata(out.join("results.h5")).unwrap().len(),
        size
    );
    assert!(ck.exists());
    signal(&child, "-CONT");
    let o = child.wait_with_output().unwrap();
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let d = datasets(&out.join("results.h5")).unwrap();
    assert_eq!(
        d["profiles/time"].floats().last().copied(),
        Some(small.end_year)
    );
    read_checkpoint(&checkpoint_at(&out, small.end_year)).unwrap();
}
