//! `--set KEY=VALUE` overrides (`deepdry check|run`, `deepdry::case::Override`): they
//! change the model as the same edit of the file would, pass the same checks, give one
//! clear line naming the override when wrong, and are recorded with the run.

use deepdry::case::{self, Override};
use deepdry::error::Error;
use deepdry::model::Model;
use deepdry::props::retention::RetentionLaw;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn benchmark() -> PathBuf {
    root().join("cases/benchmark-300m.toml")
}

fn sets(list: &[&str]) -> Vec<Override> {
    list.iter().map(|s| Override::parse(s).unwrap()).collect()
}

fn load(list: &[&str]) -> deepdry::error::Result<Model> {
    case::load_with_overrides(&benchmark(), &sets(list))
}

fn input_error(list: &[&str]) -> String {
    match load(list) {
        Err(Error::Input(m)) => m,
        Err(e) => panic!("{list:?}: not an input error: {e:?}"),
        Ok(_) => panic!("{list:?}: accepted"),
    }
}

fn vg_n(m: &Model) -> f64 {
    match m.soils[0].retention.law {
        RetentionLaw::VanGenuchten { n, .. } => n,
        _ => panic!("the benchmark soil is van Genuchten"),
    }
}

fn deepdry(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_deepdry"))
        .args(args)
        .current_dir(root())
        .stdin(std::process::Stdio::null())
        .output()
        .unwrap()
}

/// Exit code 2 and exactly `deepdry: error: <expected>` on stderr, nothing on stdout.
fn assert_error_line(o: &Output, expected: &str) {
    let e = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{e}");
    assert!(
        o.stdout.is_empty(),
        "printed: {}",
        String::from_utf8_lossy(&o.stdout)
    );
    assert_eq!(e.trim_end(), format!("deepdry: error: {expected}"));
}

#[test]
fn a_valid_override_changes_the_model_as_the_same_edit_of_the_file() {
    let plain = load(&[]).unwrap();
    assert_eq!(vg_n(&plain), 1.89);
    let m = load(&["soils.sandy_loam.van_genuchten.n=1.7", "time.end_year=2e4"]).unwrap();
    assert_eq!(vg_n(&m), 1.7);
    assert_eq!(
        m.time.end,
        2e4 * deepdry::props::constants::SECONDS_PER_YEAR
    );
    assert_eq!(
        m.overrides,
        vec!["soils.sandy_loam.van_genuchten.n=1.7", "time.end_year=2e4"]
    );
    // The same change written into the file gives the same model.
    let text = std::fs::read_to_string(benchmark()).unwrap();
    let edited = text
        .replace("n = 1.89 }", "n = 1.7 }")
        .replace("end_year = 1.0e6", "end_year = 2e4");
    assert_ne!(edited, text);
    let e = case::parse(&edited, "edited", &root().join("cases")).unwrap();
    assert_eq!(format!("{:?}", e.soils), format!("{:?}", m.soils));
    assert_eq!(format!("{:?}", e.time), format!("{:?}", m.time));
    assert_eq!(
        format!("{:?}", e.output.snapshot_times),
        format!("{:?}", m.output.snapshot_times)
    );
    assert_eq!(
        deepdry::checkpoint::physics_hash(&e),
        deepdry::checkpoint::physics_hash(&m)
    );
    // A later override of the same key wins.
    let m = load(&["time.end_year=2e4", "time.end_year=3e4"]).unwrap();
    assert_eq!(
        m.time.end,
        3e4 * deepdry::props::constants::SECONDS_PER_YEAR
    );
}

#[test]
fn a_bad_value_gives_the_files_check_naming_the_override() {
    assert_eq!(
        input_error(&["soils.sandy_loam.van_genuchten.n=0.9"]),
        "--set soils.sandy_loam.van_genuchten.n=0.9: must be > 1 and at most 20 (soils: about 1.05 to 10)"
    );
    // Wrong type, an unknown choice: the messages of the file's checks.
    assert_eq!(
        input_error(&["mesh.cells=\"many\""]),
        "--set mesh.cells=\"many\": expected a whole number, found a string"
    );
    let e = input_error(&["physics.vapor=\"kinetik\""]);
    assert!(
        e.starts_with(
            "--set physics.vapor=\"kinetik\": unknown choice (did you mean \"kinetic\"?)"
        ),
        "{e}"
    );
    // Inside a table given as the value: the path within it and the value written.
    let e = input_error(&[
        "soils.sandy_loam.van_genuchten={ theta_r = 0.065, theta_s = 0.41, alpha_per_m = -7.5, n = 1.89 }",
    ]);
    assert!(
        e.ends_with(
            ": soils.sandy_loam.van_genuchten.alpha_per_m = -7.5: must be > 0 and at most 1000 1/m (soils: about 0.1 to 30)"
        ),
        "{e}"
    );
    assert!(
        e.starts_with("--set soils.sandy_loam.van_genuchten={"),
        "{e}"
    );
    // An unquoted string is not TOML: the message shows how to quote it.
    let e = Override::parse("physics.vapor=kinetic")
        .unwrap_err()
        .to_string();
    assert!(e.contains("--set 'physics.vapor=\"kinetic\"'"), "{e}");
}

#[test]
fn binary_check_exits_2_with_the_override_in_one_line() {
    let case = benchmark();
    let case = case.to_str().unwrap();
    let o = deepdry(&[
        "check",
        case,
        "--set",
        "soils.sandy_loam.van_genuchten.n=0.9",
    ]);
    assert_error_line(
        &o,
        "--set soils.sandy_loam.van_genuchten.n=0.9: must be > 1 and at most 20 (soils: about 1.05 to 10)",
    );
    let o = deepdry(&["check", case, "--set", "time.end_yaer=2e4"]);
    assert_error_line(
        &o,
        "--set time.end_yaer=2e4: unknown key `end_yaer`; did you mean `end_year`?",
    );
    let o = deepdry(&["check", case, "--set", "time.end_year"]);
    assert_error_line(
        &o,
        "--set time.end_year: expected KEY=VALUE, e.g. time.end_year=2e4",
    );
    // A good override: the summary shows it and the changed value.
    let o = deepdry(&["check", case, "--set", "time.end_year=2e4"]);
    let out = String::from_utf8_lossy(&o.stdout);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert!(out.contains("Overrides: time.end_year=2e4"), "{out}");
    assert!(out.contains("20000"), "{out}");
}

#[test]
fn unknown_keys_get_did_you_mean_at_every_level() {
    assert_eq!(
        input_error(&["soils.sandy_loam.van_genuchten.nn=1.7"]),
        "--set soils.sandy_loam.van_genuchten.nn=1.7: unknown key `nn`; did you mean `n`?"
    );
    assert_eq!(
        input_error(&["physiks.vapor=\"kinetic\""]),
        "--set physiks.vapor=\"kinetic\": physiks: no such key in the case; did you mean `physics`?"
    );
    // A soil name (chosen by the user) close to one defined: a likely typo.
    assert_eq!(
        input_error(&["soils.sandy_lom.van_genuchten.n=1.7"]),
        "--set soils.sandy_lom.van_genuchten.n=1.7: soils.sandy_lom: no such key in the case; did you mean `sandy_loam`?"
    );
    // A new key of a section that the file leaves out: the section's own key check.
    assert_eq!(
        input_error(&["checkpoint.every_yaer=5.0"]),
        "--set checkpoint.every_yaer=5.0: unknown key `every_yaer`; did you mean `every_year`?"
    );
    assert_eq!(
        input_error(&["time.end_year.x=1"]),
        "--set time.end_year.x=1: time.end_year is a number, not a table"
    );
}

#[test]
fn a_key_absent_from_the_file_is_added() {
    let plain = load(&[]).unwrap();
    // An absent section, and an absent optional key of a present one.
    assert_eq!(plain.checkpoint.keep, 3);
    assert_eq!(plain.output.series_every, 1);
    let m = load(&["checkpoint.keep=5", "output.series_every=4"]).unwrap();
    assert_eq!(m.checkpoint.keep, 5);
    assert_eq!(m.output.series_every, 4);
    // A key that needs another one: vapor = "kinetic" and its rate, both by override.
    let e = input_error(&["physics.vapor=\"kinetic\""]);
    assert!(e.contains("physics.kinetic_rate_per_s: missing key"), "{e}");
    let m = load(&[
        "physics.vapor=\"kinetic\"",
        "physics.kinetic_rate_per_s=1e-3",
    ])
    .unwrap();
    assert!(matches!(
        m.physics.vapor_mode,
        deepdry::model::VaporMode::Kinetic { rate } if rate == 1e-3
    ));
    // Removing keys (library only): the uniform mesh of `cells` alone.
    let m = case::load_with_overrides(
        &benchmark(),
        &[
            Override::set("mesh.growth", "1.0").unwrap(),
            Override::remove("mesh.surface_cell_m").unwrap(),
            Override::remove("mesh.bottom_cell_m").unwrap(),
            Override::remove("mesh.interface_cell_m").unwrap(),
        ],
    )
    .unwrap();
    let (lo, hi) = m.mesh.width_range();
    assert!(
        (lo - 0.5).abs() < 1e-12 && (hi - 0.5).abs() < 1e-12,
        "{lo} {hi}"
    );
    assert_eq!(
        m.overrides,
        vec![
            "mesh.growth=1.0",
            "mesh.surface_cell_m (removed)",
            "mesh.bottom_cell_m (removed)",
            "mesh.interface_cell_m (removed)"
        ]
    );
}

#[test]
fn array_elements_are_addressed_by_position_from_one() {
    let m = load(&["layers[1].name=\"top\"", "output.times_year=[1.0, 10.0]"]).unwrap();
    assert_eq!(m.layers[0].name, "top");
    let m2 = load(&["output.times_year=[1.0, 7.0]", "output.times_year[2]=10.0"]).unwrap();
    assert_eq!(m.output.snapshot_times, m2.output.snapshot_times);
    assert_eq!(
        input_error(&["layers[2].soil=\"sandy_loam\""]),
        "--set layers[2].soil=\"sandy_loam\": layers has 1 element; [k] counts from 1"
    );
    assert_eq!(
        input_error(&["layers.1.soil=\"sandy_loam\""]),
        "--set layers.1.soil=\"sandy_loam\": layers is an array; address one of its elements as layers[k] (k counted from 1)"
    );
    assert_eq!(
        input_error(&["layers[1].soil=\"sandy_lom\""]),
        "--set layers[1].soil=\"sandy_lom\": no soil of that name (did you mean \"sandy_loam\"?); soils defined: sandy_loam"
    );
    // An element of an array the file does not have: the whole array is set instead.
    assert_eq!(
        input_error(&["output.times_year[2]=10.0"]),
        "--set output.times_year[2]=10.0: output.times_year is not in the case; set the whole array, e.g. --set 'output.times_year=[…]'"
    );
    let e = Override::parse("layers[0].soil=\"x\"")
        .unwrap_err()
        .to_string();
    assert!(e.contains("[k] with k = 1, 2"), "{e}");
}

#[test]
fn odd_overrides_give_one_line_errors_and_never_panic() {
    let odd = [
        "",
        "=",
        "=1",
        "a=",
        "[1]=1",
        "a[1=1",
        "a]=1",
        "a.[1]=1",
        "a[]=1",
        "layers[99999999999999999999999].soil=1",
        "layers[1][1]=1",
        "layers[1].soil.x=1",
        "é=1",
        "title=\"a=b\"",
        "title=\"\"\"x\"\"\"",
        "title=1979-05-27",
        "soils.sandy_loam=1",
        "soils={}",
        "layers=[]",
        "layers=[1]",
        "surface=[]",
        "time={}",
        "mesh.cells=-1",
        "mesh.cells=1e300",
        "time.end_year=nan",
        "time.end_year=inf",
        "output.times_year=[1, \"x\"]",
        "output.times_year[9]=1",
        "physics.diffusivity.exponent=1.9",
        "physics.diffusivity=\"massman-1998\"",
        "initial.csv=\"no-such-file.csv\"",
    ];
    let mut accepted = 0;
    for arg in odd {
        let list = match Override::parse(arg) {
            Ok(o) => vec![o],
            Err(Error::Input(m)) => {
                assert!(m.starts_with("--set "), "{arg}: {m}");
                assert!(!m.contains('\n'), "{arg}: {m}");
                continue;
            }
            Err(e) => panic!("{arg}: not an input error: {e:?}"),
        };
        match case::load_with_overrides(&benchmark(), &list) {
            Ok(m) => {
                accepted += 1;
                assert_eq!(m.overrides.len(), 1, "{arg}");
            }
            Err(Error::Input(m)) => assert!(!m.contains('\n'), "{arg}: {m}"),
            Err(e) => panic!("{arg}: not an input error: {e:?}"),
        }
    }
    // The well-formed ones among them: two titles and the two diffusivity forms.
    assert_eq!(accepted, 4);
}

/// A short run of the quickstart case: 10 years, checkpoints at 5 and 10.
fn short_run(out: &Path, extra: &[&str]) -> Output {
    let mut args = vec![
        "run",
        "cases/quickstart.toml",
        "--out",
        out.to_str().unwrap(),
        "--quiet",
        "--set",
        "time.end_year=10.0",
        "--set",
        "output.times_year=[1.0]",
        "--set",
        "output.every_year=5.0",
        "--set",
        "checkpoint.every_year=5.0",
    ];
    args.extend_from_slice(extra);
    deepdry(&args)
}

fn root_attr(path: &Path, name: &str) -> String {
    let f = hdf5::File::open(path).unwrap();
    deepdry::output::h5util::read_attr_str(&f.as_group().unwrap(), name).unwrap()
}

#[test]
fn a_run_records_its_overrides_and_resumes_only_the_same_effective_case() {
    let dir = std::env::temp_dir().join(format!("deepdry-test-{}-overrides", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    let o = short_run(&dir, &[]);
    let stdout = String::from_utf8_lossy(&o.stdout).to_string();
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let expected = "time.end_year=10.0\noutput.times_year=[1.0]\noutput.every_year=5.0\ncheckpoint.every_year=5.0";
    assert_eq!(root_attr(&dir.join("results.h5"), "overrides"), expected);
    assert!(
        stdout.contains(
            "overrides: time.end_year=10.0, output.times_year=[1.0], output.every_year=5.0, checkpoint.every_year=5.0"
        ),
        "{stdout}"
    );
    let at5 = deepdry::checkpoint::list(&dir)
        .into_iter()
        .find(|(t, _)| (t - 5.0).abs() < 1e-9)
        .expect("a checkpoint at 5 yr")
        .1;
    assert_eq!(root_attr(&at5, "overrides"), expected);
    let o = deepdry(&["inspect", dir.join("results.h5").to_str().unwrap()]);
    let shown = String::from_utf8_lossy(&o.stdout);
    assert!(
        shown.contains("overrides: time.end_year=10.0, output.times_year=[1.0]"),
        "{shown}"
    );
    let at5 = at5.to_str().unwrap();
    // Different physics by override: the effective case differs, the resume is refused.
    let o = short_run(
        &dir,
        &[
            "--set",
            "soils.sandy_loam.van_genuchten.n=1.8",
            "--resume",
            at5,
        ],
    );
    let e = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{e}");
    assert!(
        e.contains("the case differs from the one that wrote this checkpoint"),
        "{e}"
    );
    // The same overrides: the run continues.
    let o = short_run(&dir, &["--resume", at5]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let _ = std::fs::remove_dir_all(&dir);
}
