//! `deepdry plot BRANCH/results.h5 --with-parent` draws the parent run's series up to the
//! branch year in front of the branch's: the parent's results file is found through the
//! branch's `parent_checkpoint` (that checkpoint's `results_file_absolute`), or beside it
//! when the checkpoint is gone; a results file that is not a branch, and a parent that
//! cannot be found, are refused in one line.
//!
//! Kept in its own test binary: child processes inherit the HDF5 descriptors that other
//! test threads hold open.

mod support;

use deepdry::plot::data;
use support::*;

#[test]
fn a_branch_is_drawn_after_its_parent_and_a_lost_parent_is_refused() {
    let dir = Scratch::new("plot-parent");
    let parent = Small::default();
    let case = dir.write("parent.toml", &parent.text());
    let pdir = dir.join("parent");
    run_ok(&case, &pdir, &[]);
    let ck = checkpoint_at(&pdir, 4.0);
    let branch = Small {
        humidity: "{ table = [[4.0, 0.25], [10.0, 0.05]] }".into(),
        ..Small::default()
    };
    let bcase = dir.write("branch.toml", &branch.text());
    let bdir = dir.join("branch");
    run_ok(&bcase, &bdir, &["--start-from", arg(&ck)]);
    let bres = bdir.join("results.h5");
    let pres = pdir.join("results.h5");

    // The parent is found, and the joined series are the parent's before year 4, then
    // the branch's (from its first record, at year 4).
    let (found, year) = data::parent_of(&bres).unwrap();
    assert_eq!(found.canonicalize().unwrap(), pres.canonicalize().unwrap());
    assert_eq!(year, 4.0);
    let (p, b) = (data::read(&pres).unwrap(), data::read(&bres).unwrap());
    let mut joined = b.clone();
    data::join_parent(&mut joined, &p, year).unwrap();
    let n = p.series.time.iter().filter(|t| **t < 4.0).count();
    assert!(n > 10, "{n} parent records before year 4");
    assert_eq!(joined.series.time.len(), n + b.series.time.len());
    assert_eq!(joined.series.time[..n], p.series.time[..n]);
    assert_eq!(joined.series.time[n..], b.series.time[..]);
    assert_eq!(b.series.time[0], 4.0);
    assert_eq!(
        joined.series.surface_water_flux[..n],
        p.series.surface_water_flux[..n]
    );
    assert_eq!(joined.series.water_storage[n..], b.series.water_storage[..]);
    assert!(joined.series.time.windows(2).all(|w| w[0] < w[1]));
    // Profiles stay the branch's.
    assert_eq!(joined.profiles.time, b.profiles.time);

    // From the command line: the figures say so, and a note names the parent.
    let pics = dir.join("pics");
    let o = deepdry(&["plot", arg(&bres), "--with-parent", "--out", arg(&pics)]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("series joined with the parent run's")
            && stderr(&o).contains("up to year 4"),
        "{}",
        stderr(&o)
    );
    let svg = std::fs::read_to_string(pics.join("series-water-storage.svg")).unwrap();
    assert!(svg.contains("the parent run"), "subtitle lacks the parent");
    assert!(
        svg.contains("t = 0 to 10 yr"),
        "the series do not start at the parent's start"
    );
    // Without the option, the branch alone (from year 4).
    let alone = dir.join("alone");
    let o = deepdry(&["plot", arg(&bres), "--out", arg(&alone)]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let svg = std::fs::read_to_string(alone.join("series-water-storage.svg")).unwrap();
    assert!(svg.contains("t = 4 to 10 yr") && !svg.contains("the parent run"));

    // A branch run from the scratch folder with relative paths, plotted from elsewhere:
    // the parent checkpoint is found against an ancestor of the branch folder.
    let o = std::process::Command::new(bin())
        .current_dir(&dir.path)
        .args([
            "run",
            "branch.toml",
            "--start-from",
            "parent/checkpoint-04yr.h5",
            "--out",
            "runs/branch2",
            "--quiet",
        ])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let b2 = dir.join("runs").join("branch2").join("results.h5");
    assert_eq!(
        root_attr(&b2, "parent_checkpoint").as_deref(),
        Some("parent/checkpoint-04yr.h5")
    );
    let o = std::process::Command::new(bin())
        .current_dir("/")
        .args([
            "plot",
            arg(&b2),
            "--with-parent",
            "--out",
            arg(&dir.join("pics2")),
        ])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(stderr(&o).contains("up to year 4"), "{}", stderr(&o));

    // The parent checkpoint pruned: its folder's results.h5 is used.
    std::fs::remove_file(&ck).unwrap();
    let (found, _) = data::parent_of(&bres).unwrap();
    assert_eq!(found.file_name().unwrap(), "results.h5");
    assert_eq!(found.canonicalize().unwrap(), pres.canonicalize().unwrap());

    // The parent's folder moved away: one line naming what was tried.
    std::fs::rename(&pdir, dir.join("moved")).unwrap();
    let o = deepdry(&["plot", arg(&bres), "--with-parent", "--out", arg(&pics)]);
    assert_one_line_error(
        &o,
        2,
        &[
            "results.h5: the parent's results file was not found",
            "parent checkpoint",
            "checkpoint-04yr.h5",
            "tried",
        ],
    );
    // Not a branch.
    let o = deepdry(&[
        "plot",
        arg(&dir.join("moved").join("results.h5")),
        "--with-parent",
        "--out",
        arg(&pics),
    ]);
    assert_one_line_error(&o, 2, &["not the results of a branch", "parent_checkpoint"]);
}

#[test]
fn a_series_only_one_run_has_is_a_gap_over_the_other_and_another_mesh_is_refused() {
    let series = |time: Vec<f64>| {
        let n = time.len();
        data::Series {
            surface_water_flux: vec![1.0; n],
            bottom_water_flux: vec![2.0; n],
            water_storage: vec![3.0; n],
            water_balance_relative_error: vec![0.0; n],
            energy_balance_relative_error: vec![0.0; n],
            drying_front_depth: vec![f64::NAN; n],
            time,
            ..Default::default()
        }
    };
    let mesh = vec![0.0, 1.0, 2.0];
    // The parent without plants, the branch with them (planted at the branch year 2).
    let parent = data::Results {
        face_depth: mesh.clone(),
        series: series(vec![0.0, 1.0, 2.0]),
        ..Default::default()
    };
    let mut branch = data::Results {
        face_depth: mesh.clone(),
        series: data::Series {
            root_water_uptake: vec![5.0, 6.0],
            potential_transpiration: vec![7.0, 8.0],
            ..series(vec![2.0, 3.0])
        },
        ..Default::default()
    };
    data::join_parent(&mut branch, &parent, 2.0).unwrap();
    let s = &branch.series;
    assert_eq!(s.time, vec![0.0, 1.0, 2.0, 3.0]);
    assert_eq!(s.water_storage.len(), 4);
    let u = &s.root_water_uptake;
    assert_eq!(u.len(), 4);
    assert!(u[0].is_nan() && u[1].is_nan());
    assert_eq!(u[2..], [5.0, 6.0]);
    assert_eq!(s.potential_transpiration[2..], [7.0, 8.0]);
    // Neither run has them: still none.
    assert!(s.root_water_uptake_cumulative.is_empty());

    let other = data::Results {
        face_depth: vec![0.0, 1.0, 3.0],
        series: series(vec![0.0, 1.0]),
        ..Default::default()
    };
    let mut b = data::Results {
        face_depth: mesh,
        series: series(vec![2.0]),
        ..Default::default()
    };
    match data::join_parent(&mut b, &other, 2.0) {
        Err(deepdry::error::Error::Input(m)) => {
            assert!(m.contains("mesh differs") && !m.contains('\n'), "{m}")
        }
        other => panic!("{other:?}"),
    }
}
