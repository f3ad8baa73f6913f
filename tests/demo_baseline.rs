//! Every demo case in `cases/` gives bitwise the same results as a baseline: a folder
//! holding, per case, the output folder of an earlier build (`BASELINE/NAME/results.h5`
//! and its checkpoints), made with
//! `deepdry run cases/NAME.toml --out BASELINE/NAME --quiet`.
//!
//! Ignored by default (it needs the baseline and takes a few seconds); run it around a
//! change that must not alter results:
//! `DEEPDRY_BASELINE=/path/to/baseline cargo test --release --test demo_baseline -- --ignored`

mod support;

use std::path::{Path, PathBuf};
use support::*;

fn demo_cases() -> Vec<PathBuf> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases");
    let mut cases: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "toml"))
        .collect();
    cases.sort();
    cases
}

#[test]
#[ignore = "needs DEEPDRY_BASELINE: output folders of the demo cases from an earlier build"]
fn demo_cases_give_the_baseline_results_bitwise() {
    let baseline = PathBuf::from(
        std::env::var("DEEPDRY_BASELINE")
            .expect("set DEEPDRY_BASELINE to the folder of the baseline output folders"),
    );
    let dir = Scratch::new("demo-baseline");
    let cases = demo_cases();
    assert!(cases.len() >= 7, "{} demo cases", cases.len());
    for case in &cases {
        let name = case.file_stem().unwrap().to_str().unwrap();
        let out = dir.join(name);
        run_ok(case, &out, &[]);
        let old = baseline.join(name);
        // Datasets added since the baseline are listed; every one it has must be equal.
        let (sets, values, added) =
            assert_baseline_datasets(&old.join("results.h5"), &out.join("results.h5"));
        let (ck_old, ck_new) = (newest_checkpoint(&old), newest_checkpoint(&out));
        let ck_old = ck_old.unwrap_or_else(|| panic!("{name}: no checkpoint in the baseline"));
        let ck_new = ck_new.unwrap_or_else(|| panic!("{name}: no checkpoint written"));
        assert_eq!(
            ck_old.file_name(),
            ck_new.file_name(),
            "{name}: final checkpoint"
        );
        let (ck_sets, ck_values, ck_added) = assert_baseline_datasets(&ck_old, &ck_new);
        eprintln!(
            "{name}: results {sets} datasets, {values} values; final checkpoint {ck_sets} datasets, {ck_values} values: bitwise identical; added since: {added:?}, checkpoint {ck_added:?}"
        );
    }
}
