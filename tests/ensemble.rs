//! Ensembles: the merged file is identical whatever the workers or shards; a killed or
//! partial ensemble resumes where it stopped; a failing member is recorded, not fatal;
//! Latin-hypercube samples use every stratum once (McKay, Beckman & Conover 1979).

mod support;

use deepdry::ensemble::{self, plan, Member};
use std::path::Path;
use support::{arg, assert_one_line_error, deepdry, Scratch};

fn case_text() -> String {
    let p = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases/quickstart.toml");
    std::fs::read_to_string(p)
        .unwrap()
        .replace("end_year = 1000.0", "end_year = 20.0")
        .replace(
            "times_year = [1.0, 10.0, 100.0]",
            "times_year = [1.0, 10.0]",
        )
}

const PLAN: &str = r#"[ensemble]
case = "case.toml"
members = 6
seed = 7
sampling = "latin-hypercube"
series = ["surface_water_flux", "drying_front_depth"]
times_year = [1.0, 5.0, 20.0]
profiles = ["liquid_content"]
profile_times_year = [10.0, 20.0]

[[ensemble.parameters]]
key = "soils.sandy_loam.van_genuchten.n"
distribution = "uniform"
min = 1.6
max = 2.2

[[ensemble.parameters]]
key = "surface.relative_humidity"
distribution = "truncated-normal"
mean = 0.25
sd = 0.05
min = 0.1
max = 0.4
"#;

/// Every dataset of an ensemble file, as (name, values).
fn datasets(path: &Path) -> Vec<(String, Vec<f64>)> {
    let _g = support::h5_guard();
    let f = hdf5::File::open(path).unwrap();
    let mut out = Vec::new();
    for name in [
        "time",
        "parameters",
        "series/surface_water_flux",
        "series/drying_front_depth",
        "quantiles/surface_water_flux",
        "quantiles/drying_front_depth",
        "profiles/liquid_content",
    ] {
        let v: Vec<f64> = f.dataset(name).unwrap().read_raw().unwrap();
        out.push((name.to_string(), v));
    }
    let s: Vec<i32> = f.dataset("status").unwrap().read_raw().unwrap();
    out.push(("status".into(), s.iter().map(|x| *x as f64).collect()));
    out
}

fn bits(d: &[(String, Vec<f64>)]) -> Vec<(String, Vec<u64>)> {
    d.iter()
        .map(|(n, v)| (n.clone(), v.iter().map(|x| x.to_bits()).collect()))
        .collect()
}

#[test]
fn merged_members_are_identical_with_one_worker_two_workers_and_shards() {
    let dir = Scratch::new("ensemble-same");
    dir.write("case.toml", &case_text());
    let plan_path = dir.write("plan.toml", PLAN);
    let p = plan::read(&plan_path).unwrap();
    let one = dir.join("one");
    let c = ensemble::run(&p, &one, 1, (0, 1), false).unwrap();
    assert_eq!((c.ran, c.failed, c.skipped), (6, 0, 0));
    let (f1, counts) = ensemble::collect(&one).unwrap();
    assert_eq!(counts, [6, 0, 0]);
    let two = dir.join("two");
    ensemble::run(&p, &two, 2, (0, 1), false).unwrap();
    let (f2, _) = ensemble::collect(&two).unwrap();
    // Two shards, as two tasks of a job array would run them (through the binary).
    let sh = dir.join("shards");
    for k in ["0/2", "1/2"] {
        let o = deepdry(&[
            "ensemble",
            "run",
            arg(&plan_path),
            "--out",
            arg(&sh),
            "--shard",
            k,
            "--jobs",
            "1",
            "--quiet",
        ]);
        assert_eq!(
            o.status.code(),
            Some(0),
            "{}",
            String::from_utf8_lossy(&o.stderr)
        );
    }
    let o = deepdry(&["ensemble", "collect", arg(&sh)]);
    assert_eq!(o.status.code(), Some(0));
    let a = bits(&datasets(&f1));
    assert_eq!(a, bits(&datasets(&f2)), "one worker vs two workers");
    assert_eq!(
        a,
        bits(&datasets(&sh.join("ensemble.h5"))),
        "one worker vs two shards"
    );
    // Fan charts and scatter plots of the merged folder.
    let o = deepdry(&[
        "ensemble",
        "plot",
        arg(&one),
        "--out",
        arg(&dir.join("fig")),
    ]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    for f in [
        "ensemble-fan-surface_water_flux.png",
        "ensemble-scatter-drying_front_depth.svg",
    ] {
        assert!(dir.join("fig").join(f).is_file(), "{f}");
    }
    // The kept values are those of the member runs (finite, one row per member).
    let d = datasets(&f1);
    assert_eq!(d[2].1.len(), 6 * 3);
    // Profiles: member × 2 times × 120 cells, liquid contents in (0, θs] (the dry end
    // extends below θr).
    assert_eq!(d[6].1.len(), 6 * 2 * 120);
    assert!(
        d[6].1.iter().all(|v| *v > 0.0 && *v <= 0.41),
        "{:?}",
        &d[6].1[..5]
    );
    assert!(d[2].1.iter().all(|v| v.is_finite()));
}

#[test]
fn a_partial_ensemble_resumes_and_a_failing_member_is_recorded() {
    let dir = Scratch::new("ensemble-resume");
    dir.write("case.toml", &case_text());
    // Member values of n on a grid: 0.9 is refused by the case reader (n > 1).
    let plan_text = r#"[ensemble]
case = "case.toml"
sampling = "grid"
times_year = [1.0, 20.0]

[[ensemble.parameters]]
key = "soils.sandy_loam.van_genuchten.n"
distribution = "values"
values = [1.7, 0.9, 2.0]
"#;
    let plan_path = dir.write("plan.toml", plan_text);
    let p = plan::read(&plan_path).unwrap();
    assert_eq!(p.member_count(), 3);
    let out = dir.join("out");
    // One shard first (members 0 and 2), then everything: only member 1 runs.
    let c = ensemble::run(&p, &out, 2, (0, 2), false).unwrap();
    assert_eq!((c.ran, c.skipped), (2, 0));
    let o = deepdry(&["ensemble", "status", arg(&out)]);
    assert!(String::from_utf8_lossy(&o.stdout).contains("3 members: 2 done, 0 failed, 1 missing"));
    let c = ensemble::run(&p, &out, 2, (0, 1), false).unwrap();
    assert_eq!((c.ran, c.skipped, c.failed), (1, 2, 1));
    let (_, members) = ensemble::status(&out).unwrap();
    match &members[1] {
        Member::Failed { error, parameters } => {
            assert!(error.contains("must be > 1"), "{error}");
            assert_eq!(parameters, &vec![0.9]);
        }
        m => panic!("member 1: {m:?}"),
    }
    let (_, counts) = ensemble::collect(&out).unwrap();
    assert_eq!(counts, [2, 1, 0]);
    // A folder of another plan is refused.
    let other = dir.write("other.toml", &plan_text.replace("2.0]", "2.1]"));
    let o = deepdry(&[
        "ensemble",
        "run",
        arg(&other),
        "--out",
        arg(&out),
        "--quiet",
    ]);
    assert_one_line_error(&o, 2, &["another plan"]);
}

#[test]
fn latin_hypercube_uses_every_stratum_once() {
    let dir = Scratch::new("ensemble-lhs");
    dir.write("case.toml", &case_text());
    let text = PLAN
        .replace("members = 6", "members = 50")
        .replace("min = 1.6\nmax = 2.2", "min = 0.0\nmax = 1.0");
    let p = plan::read(&dir.write("plan.toml", &text)).unwrap();
    let mut strata: Vec<usize> = (0..50).map(|i| (p.member(i)[0] * 50.0) as usize).collect();
    strata.sort();
    assert_eq!(strata, (0..50).collect::<Vec<_>>());
    // The truncated normal stays in its bounds.
    assert!((0..50).all(|i| (0.1..=0.4).contains(&p.member(i)[1])));
    // Member i's values do not depend on anything but (plan, seed, i).
    let again = plan::read(&dir.write("plan2.toml", &text)).unwrap();
    assert_eq!(p.member(17), again.member(17));
}

#[test]
fn bad_plans_and_shards_get_one_line_errors() {
    let dir = Scratch::new("ensemble-bad");
    dir.write("case.toml", &case_text());
    for (text, words) in [
        (
            PLAN.replace("members = 6", "members = 0"),
            vec!["members", "1 … 1 000 000"],
        ),
        (
            PLAN.replace("distribution = \"uniform\"", "distribution = \"beta\""),
            vec!["beta", "uniform"],
        ),
        (PLAN.replace("sd = 0.05", "sd = 0.0"), vec!["sd = 0", "> 0"]),
        (
            PLAN.replace("times_year = [1.0, 5.0, 20.0]", "times_year = [5.0, 1.0]"),
            vec!["increasing"],
        ),
        (
            PLAN.replace("\"drying_front_depth\"]", "\"front\"]"),
            vec!["unknown series"],
        ),
        (
            PLAN.replace("van_genuchten.n\"", "van_genuchten.nn\""),
            vec!["nn", "did you mean"],
        ),
    ] {
        let p = dir.write("plan.toml", &text);
        let o = deepdry(&[
            "ensemble",
            "run",
            arg(&p),
            "--out",
            arg(&dir.join("o")),
            "--quiet",
        ]);
        assert_one_line_error(&o, 2, &words);
    }
    let p = dir.write("plan.toml", PLAN);
    let o = deepdry(&["ensemble", "run", arg(&p), "--shard", "2/2", "--quiet"]);
    assert_one_line_error(&o, 2, &["--shard 2/2", "K/N"]);
}

/// sampling = "table": member i takes row i of the table's named columns.
#[test]
fn a_table_gives_one_member_per_row() {
    let dir = Scratch::new("ensemble-table");
    dir.write("case.toml", &case_text());
    dir.write(
        "members.csv",
        "# three soils\nn,rh\n1.7,0.2\n1.9,0.25\n2.1,0.3\n",
    );
    let text = r#"[ensemble]
case = "case.toml"
sampling = "table"
table = "members.csv"
times_year = [1.0, 20.0]

[[ensemble.parameters]]
key = "soils.sandy_loam.van_genuchten.n"
distribution = "column"
column = "n"

[[ensemble.parameters]]
key = "surface.relative_humidity"
distribution = "column"
column = "rh"
"#;
    let p = plan::read(&dir.write("plan.toml", text)).unwrap();
    assert_eq!(p.member_count(), 3);
    assert_eq!(p.member(0), vec![1.7, 0.2]);
    assert_eq!(p.member(2), vec![2.1, 0.3]);
    let c = ensemble::run(&p, &dir.join("out"), 2, (0, 1), false).unwrap();
    assert_eq!((c.ran, c.failed), (3, 0));
    let bad = dir.write(
        "bad.toml",
        &text.replace("column = \"rh\"", "column = \"humidity\""),
    );
    let o = deepdry(&["ensemble", "run", arg(&bad), "--quiet"]);
    assert_one_line_error(&o, 2, &["no column `humidity`", "n, rh"]);
}

/// Tasks of a job array start at once on an empty folder: each sets it up without
/// tripping over the others (found by the Slurm check: a shared temporary file for the
/// plan's copy made one task fail), and together they write every member.
#[test]
fn shards_started_together_share_the_folder() {
    let dir = Scratch::new("ensemble-together");
    dir.write("case.toml", &case_text());
    let plan_path = dir.write("plan.toml", PLAN);
    let out = dir.join("out");
    for round in 0..6 {
        let _ = std::fs::remove_dir_all(&out);
        let shards: Vec<String> = (0..6).map(|k| format!("{k}/6")).collect();
        let children: Vec<_> = shards
            .iter()
            .map(|k| {
                std::process::Command::new(support::bin())
                    .args(["ensemble", "run", arg(&plan_path), "--out", arg(&out)])
                    .args(["--shard", k.as_str(), "--jobs", "1", "--quiet"])
                    .stdout(std::process::Stdio::null())
                    .stderr(std::process::Stdio::piped())
                    .spawn()
                    .unwrap()
            })
            .collect();
        for c in children {
            let o = c.wait_with_output().unwrap();
            assert!(
                o.status.success(),
                "round {round}: {}",
                String::from_utf8_lossy(&o.stderr)
            );
        }
        let (_, members) = ensemble::status(&out).unwrap();
        assert!(
            members.iter().all(|m| matches!(m, Member::Done { .. })),
            "round {round}"
        );
    }
}
