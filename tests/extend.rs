//! `deepdry run CASE --extend-to YEAR` continues a finished run from its final checkpoint
//! into the same results file:
//! - a run to year 10 extended to 15, then to 20, has the same results file (bitwise,
//!   every dataset) and final checkpoint as single runs to 15 and to 20, for backward
//!   Euler and BDF. Bitwise is possible because year 10 (and 15) is on the snapshot and
//!   checkpoint grids of the longer runs too: they land on it, write a series row, a
//!   snapshot and a checkpoint there, as the shorter run does at its end, and a
//!   checkpoint resumes bitwise;
//!   The extension keeps the case's step limits (whose defaults follow the span), so
//!   the case gives its largest step explicitly for the single runs to match;
//! - a year not after the run's end, a folder without a checkpoint, a run that did not
//!   finish and a changed case are refused in one line, leaving the results file as it
//!   was; a checkpoint of the extension resumed with `--resume` names `--extend-to`.

mod support;

use std::path::Path;
use support::*;

fn case_of(method: &'static str) -> Small {
    Small {
        method,
        end_year: 10.0,
        snapshot_every: 5.0,
        checkpoint_every: 5.0,
        // The default largest step follows the span (1/100 of it for backward Euler): an
        // extension keeps the case's, so the single runs compared with it are given it.
        extra_time: "max_step_year = 0.1\n".into(),
        ..Small::default()
    }
}

fn extension_equals_a_single_run(method: &'static str, name: &str) {
    let dir = Scratch::new(name);
    let small = case_of(method);
    let case = dir.write("case.toml", &small.text());
    let (ext, full15, full20) = (dir.join("ext"), dir.join("full15"), dir.join("full20"));
    run_ok(&case, &ext, &[]);
    run_ok(&case, &full15, &["--set", "time.end_year=15.0"]);
    run_ok(&case, &full20, &["--set", "time.end_year=20.0"]);
    let rows10 = datasets(&ext.join("results.h5")).unwrap()["series/time"].len();

    let o = run_ok(&case, &ext, &["--extend-to", "15"]);
    let text = stdout(&o);
    assert!(text.contains("run finished: 10 yr to 15 yr"), "{text}");
    let (nsets, _) = assert_same_datasets(&full15.join("results.h5"), &ext.join("results.h5"));
    assert!(nsets >= 25, "{nsets} datasets");
    let rows15 = datasets(&ext.join("results.h5")).unwrap()["series/time"].len();
    assert!(
        rows15 > rows10 + 10,
        "{rows10} rows to year 10, {rows15} to 15: the extension added too few to test"
    );
    assert_same_datasets(&checkpoint_at(&full15, 15.0), &checkpoint_at(&ext, 15.0));
    assert_eq!(
        root_attr_f64(&ext.join("results.h5"), "extended_to_year"),
        Some(15.0)
    );

    // Once more: the checkpoint at 15 records the end its run had, so the case (ending at
    // 10) is checked against it with that end.
    run_ok(&case, &ext, &["--extend-to", "20"]);
    assert_same_datasets(&full20.join("results.h5"), &ext.join("results.h5"));
    assert_same_datasets(&checkpoint_at(&full20, 20.0), &checkpoint_at(&ext, 20.0));
    let o = deepdry(&["inspect", arg(&ext.join("results.h5"))]);
    assert!(
        stdout(&o).contains("extended past the case's end to year 20"),
        "{}",
        stdout(&o)
    );
}

#[test]
fn an_extended_run_is_bitwise_a_single_run_backward_euler() {
    extension_equals_a_single_run("backward-euler", "extend-be");
}

#[test]
fn an_extended_run_is_bitwise_a_single_run_bdf() {
    extension_equals_a_single_run("bdf", "extend-bdf");
}

fn bytes(p: &Path) -> Vec<u8> {
    std::fs::read(p).unwrap()
}

#[test]
fn bad_extensions_are_refused_in_one_line_and_change_nothing() {
    let dir = Scratch::new("extend-bad");
    let small = case_of("backward-euler");
    let case = dir.write("case.toml", &small.text());
    let out = dir.join("out");

    // No run yet.
    let o = run_deepdry(&case, &out, &["--extend-to", "15"]);
    assert_one_line_error(
        &o,
        2,
        &["no checkpoint in the output folder", "run the case first"],
    );

    run_ok(&case, &out, &[]);
    let results = out.join("results.h5");
    let before = bytes(&results);

    for year in ["10", "9.5", "-3"] {
        let o = run_deepdry(&case, &out, &["--extend-to", year]);
        assert_one_line_error(
            &o,
            2,
            &[
                &format!("--extend-to {}", year.parse::<f64>().unwrap()),
                "not after the run's end (year 10",
                "checkpoint-10yr.h5",
            ],
        );
    }
    let o = run_deepdry(&case, &out, &["--extend-to", "15", "--overwrite"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));

    // A changed case (wetter air).
    let changed = Small {
        humidity: "0.3".into(),
        ..small.clone()
    };
    let changed = dir.write("changed.toml", &changed.text());
    let o = run_deepdry(&changed, &out, &["--extend-to", "15"]);
    assert_one_line_error(
        &o,
        2,
        &[
            "checkpoint-10yr.h5",
            "the case differs",
            "physics hash",
            "--start-from",
        ],
    );
    // An override that changes the physics is a changed case too.
    let o = run_deepdry(
        &case,
        &out,
        &["--extend-to", "15", "--set", "mesh.cells=31"],
    );
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert_eq!(
        bytes(&results),
        before,
        "a refused extension changed the results"
    );

    // A run that did not finish (its final checkpoint is gone): resume it instead.
    let partial = dir.join("partial");
    std::fs::create_dir_all(&partial).unwrap();
    std::fs::copy(&results, partial.join("results.h5")).unwrap();
    std::fs::copy(checkpoint_at(&out, 5.0), partial.join("checkpoint-05yr.h5")).unwrap();
    let o = run_deepdry(&case, &partial, &["--extend-to", "15"]);
    assert_one_line_error(
        &o,
        2,
        &[
            "checkpoint-05yr.h5: the newest checkpoint is at year 5, before the end of the run that wrote it (year 10)",
            "the run did not finish",
            "--resume",
        ],
    );

    // An extension interrupted at year 12 (simulated: its checkpoint at 12.5 kept, the
    // final one removed) is continued by --extend-to, not by --resume of the case.
    let with_ck = Small {
        checkpoint_every: 2.5,
        ..small.clone()
    };
    let case2 = dir.write("case2.toml", &with_ck.text());
    let out2 = dir.join("out2");
    run_ok(&case2, &out2, &[]);
    run_ok(&case2, &out2, &["--extend-to", "15"]);
    std::fs::remove_file(checkpoint_at(&out2, 15.0)).unwrap();
    let ck = checkpoint_at(&out2, 12.5);
    let o = run_deepdry(&case2, &out2, &["--resume", arg(&ck)]);
    assert_one_line_error(
        &o,
        2,
        &["written by this run extended to year 15", "--extend-to 15"],
    );
    run_ok(&case2, &out2, &["--extend-to", "15"]);
    let full = dir.join("full");
    // The case file edited to end at 15 instead: the run to 10 is still found finished
    // (its checkpoints record their end) and extends as the unedited case would.
    let edited = Small {
        end_year: 15.0,
        ..with_ck.clone()
    };
    let edited = dir.write("edited.toml", &edited.text());
    let out3 = dir.join("out3");
    run_ok(&case2, &out3, &[]);
    run_ok(&edited, &out3, &["--extend-to", "15"]);
    assert_same_datasets(&out2.join("results.h5"), &out3.join("results.h5"));
    run_ok(&case2, &full, &["--set", "time.end_year=15.0"]);
    assert_same_datasets(&full.join("results.h5"), &out2.join("results.h5"));
}
