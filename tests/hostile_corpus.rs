//! The hostile corpus: well over 100 small mutations of a valid case (bad values for
//! every kind of key, overflowing and unresolvable times, files that are not regular or
//! too large, broken CSV tables, physically impossible states), each with the exit code
//! it must give and the words its one-line message must contain (the key and what is
//! allowed). A case that should fail never exits 0, and no case panics.
//!
//! The cases are generated from a table: value mutations of keys of the small test
//! column (`support::Small`), plus cases written out one by one below.

mod support;

use std::path::Path;
use support::*;

/// One hostile case.
struct Hostile {
    name: String,
    /// The case text.
    text: String,
    /// Extra files to write next to the case: (name, bytes).
    files: Vec<(String, Vec<u8>)>,
    /// `check` (reading and validating only) or `run`.
    run: bool,
    code: i32,
    words: Vec<String>,
}

fn base() -> String {
    Small {
        cells: 8,
        end_year: 2.0,
        snapshot_every: 0.5,
        checkpoint_every: 1.0,
        ..Small::default()
    }
    .text()
}

/// `text` with the first `from` replaced by `to` (panics when `from` is absent, so a
/// mutation that no longer applies is noticed).
fn mutate(text: &str, from: &str, to: &str) -> String {
    assert!(
        text.contains(from),
        "mutation target `{from}` not in the case"
    );
    text.replacen(from, to, 1)
}

fn case(name: &str, text: String, code: i32, words: &[&str]) -> Hostile {
    Hostile {
        name: name.to_string(),
        text,
        files: Vec::new(),
        run: false,
        code,
        words: words.iter().map(|w| w.to_string()).collect(),
    }
}

fn corpus() -> Vec<Hostile> {
    let b = base();
    let mut out = Vec::new();
    // Value mutations: (the key's text in the case, the key as messages name it, bad values).
    let nonfinite = ["nan", "inf", "-inf", "1e305", "-1e305"];
    let keys: Vec<(&str, &str, Vec<&str>)> = vec![
        (
            "depth_m = 10",
            "column.depth_m",
            vec!["0.0", "-1.0", "1e-9", "\"deep\""],
        ),
        (
            "cells = 8",
            "mesh.cells",
            vec!["0", "-5", "1.5", "\"many\""],
        ),
        ("alpha_per_m = 7.5", "alpha_per_m", vec!["0.0", "-1.0"]),
        ("n = 1.89", "n", vec!["1.0", "0.5", "-2.0"]),
        ("theta_s = 0.41", "theta_s", vec!["0.0", "1.5", "0.01"]),
        (
            "saturated_conductivity_m_per_s = 1.23e-5",
            "saturated_conductivity_m_per_s",
            vec!["0.0", "-1e-5", "10.0"],
        ),
        (
            "solid_heat_capacity_J_per_m3_K = 1.18e6",
            "solid_heat_capacity_J_per_m3_K",
            vec!["0.0", "-1.0"],
        ),
        ("period_year = 3.0", "period_year", vec!["0.0", "-3.0"]),
        (
            "relative_humidity = 0.25",
            "relative_humidity",
            vec!["1.5", "-0.1"],
        ),
        (
            "temperature_C = 23.0",
            "temperature_C",
            vec!["-300.0", "95.0e3"],
        ),
        (
            "end_year = 2",
            "time.end_year",
            vec!["0.0", "-1.0", "\"later\""],
        ),
        ("every_year = 0.5", "every_year", vec!["0.0", "-1.0"]),
        (
            "keep = 50",
            "checkpoint.keep",
            vec!["0", "-1", "9223372036854775807"],
        ),
    ];
    for (from, key, bad) in &keys {
        let prefix = from.split(" = ").next().unwrap();
        let mut values: Vec<&str> = bad.clone();
        match prefix {
            "cells" | "keep" => {}
            // An output interval longer than any run is valid (the end is still written).
            "every_year" => values.extend(&nonfinite[..3]),
            _ => values.extend(nonfinite),
        }
        for v in values {
            out.push(case(
                &format!("{key}={v}"),
                mutate(&b, from, &format!("{prefix} = {v}")),
                2,
                &[key],
            ));
        }
    }
    // Times the time keeping cannot represent or resolve.
    let time = |extra: &str| mutate(&b, "[time]\n", &format!("[time]\n{extra}\n"));
    out.push(case(
        "end_year overflows",
        mutate(&b, "end_year = 2", "end_year = 1.0e305"),
        2,
        &["time.end_year", "1e12"],
    ));
    out.push(case(
        "start_year overflows",
        time("start_year = -1.0e305"),
        2,
        &["time.start_year", "1e12"],
    ));
    out.push(case(
        "start_year nan",
        time("start_year = nan"),
        2,
        &["time.start_year", "finite"],
    ));
    out.push(case(
        "unresolvable min step at 4.5e9",
        mutate(
            &mutate(&b, "end_year = 2", "end_year = 4500000002.0"),
            "[time]\n",
            "[time]\nstart_year = 4.5e9\nmin_step_year = 1e-30\n",
        ),
        2,
        &["time.min_step_year", "resolves"],
    ));
    out.push(case(
        "unresolvable first step over a long run",
        mutate(
            &mutate(&b, "end_year = 2", "end_year = 1.0e11"),
            "[time]\n",
            "[time]\ninitial_step_year = 1e-9\n",
        ),
        2,
        &["time.initial_step_year", "resolves"],
    ));
    out.push(case(
        "schedule time overflows",
        mutate(
            &b,
            "relative_humidity = 0.25",
            "relative_humidity = { table = [[0.0, 0.25], [1e306, 0.3]] }",
        ),
        2,
        &["relative_humidity", "1e12"],
    ));
    // Refused by `run` before any file is touched (the interval is checked with the run's
    // sync times).
    let mut tiny = case(
        "checkpoint interval too small",
        mutate(
            &b,
            "[checkpoint]\nevery_year = 1",
            "[checkpoint]\nevery_year = 1e-300",
        ),
        2,
        &["checkpoint.every_year", "at most"],
    );
    tiny.run = true;
    out.push(tiny);
    // Physically impossible or meaningless.
    out.push(case(
        "boiling at low air pressure",
        mutate(
            &mutate(&b, "temperature_C = 23.0", "temperature_C = 95.0"),
            "[time]\n",
            "[physics]\nair_pressure_Pa = 1.0e4\n[time]\n",
        ),
        2,
        &["bottom.temperature_C", "boiling", "air_pressure_Pa"],
    ));
    out.push(case(
        "thermal conductivity 1e-300",
        mutate(
            &b,
            "campbell = { a = 1.46, b = 1.652, c = 9.222, d = 0.274 }",
            "thermal_conductivity_W_per_m_K = 1e-300",
        ),
        2,
        &["thermal_conductivity_W_per_m_K", "0.01"],
    ));
    out.push(case(
        "oven-dry head almost zero",
        mutate(
            &b,
            "dry_end = \"fayer-simmons\"",
            "dry_end = \"fayer-simmons\"\noven_dry_head_m = -0.001",
        ),
        2,
        &["oven_dry_head_m", "-100"],
    ));
    out.push(case(
        "column of 1e-9 m",
        mutate(
            &mutate(&b, "depth_m = 10", "depth_m = 1e-9"),
            "bottom_m = 10",
            "bottom_m = 1e-9",
        ),
        2,
        &["column.depth_m", "0.01"],
    ));
    // Files: CSV tables, the case file itself.
    let csv_case = |file: &str| {
        mutate(
            &b,
            "relative_humidity = 0.25",
            &format!("relative_humidity = {{ table_csv = \"{file}\" }}"),
        )
    };
    let csv_files: Vec<(&str, &[u8], &[&str])> = vec![
        (
            "row of commas",
            b"time_year,relative_humidity\n0.0,0.25\n,\n1.0,0.3\n",
            &["rh.csv:3", "empty cells"],
        ),
        (
            "NUL in a cell",
            b"time_year,relative_humidity\n0.0,0.3\0\n",
            &["rh.csv:2", "relative_humidity", "\\u{0}"],
        ),
        (
            "ESC in a cell",
            b"time_year,relative_humidity\n0.0,\x1b[31m0.3\n",
            &["rh.csv:2", "\\u{1b}"],
        ),
        ("empty", b"", &["rh.csv", "empty file"]),
        (
            "header only",
            b"time_year,relative_humidity\n",
            &["rh.csv", "no data rows"],
        ),
        (
            "wrong header",
            b"year,rh\n0.0,0.25\n",
            &["rh.csv", "header"],
        ),
        (
            "times not increasing",
            b"time_year,relative_humidity\n1.0,0.25\n0.5,0.3\n",
            &["rh.csv", "time_year"],
        ),
        (
            "time overflows",
            b"time_year,relative_humidity\n0.0,0.25\n1e306,0.3\n",
            &["rh.csv", "time_year", "1e12"],
        ),
        (
            "value out of range",
            b"time_year,relative_humidity\n0.0,1.25\n",
            &["rh.csv", "relative_humidity"],
        ),
        (
            "too many columns",
            b"time_year,relative_humidity\n0.0,0.25,7\n",
            &["rh.csv:2", "columns"],
        ),
        (
            "not UTF-8",
            b"time_year,relative_humidity\n0.0,\xff\xfe\n",
            &["rh.csv", "UTF-8"],
        ),
    ];
    for (name, bytes, words) in csv_files {
        let mut h = case(&format!("csv: {name}"), csv_case("rh.csv"), 2, words);
        h.files.push(("rh.csv".into(), bytes.to_vec()));
        out.push(h);
    }
    let mut big = case(
        "csv: larger than the cap",
        csv_case("rh.csv"),
        2,
        &["rh.csv", "67108864"],
    );
    let mut bytes = b"time_year,relative_humidity\n".to_vec();
    bytes.resize(65 << 20, b'#');
    big.files.push(("rh.csv".into(), bytes));
    out.push(big);
    out.push(case(
        "csv: /dev/zero",
        csv_case("/dev/zero"),
        2,
        &["/dev/zero", "not a regular file"],
    ));
    out.push(case("csv: a folder", csv_case("/tmp"), 2, &["/tmp"]));
    out.push(case(
        "csv: missing",
        csv_case("no-such.csv"),
        2,
        &["no-such.csv"],
    ));
    // Runs that must end in an honest exit: large epochs run to the end.
    let mut far = case(
        "one year from 1e10",
        mutate(
            &mutate(&b, "end_year = 2", "end_year = 10000000001.0"),
            "[time]\n",
            "[time]\nstart_year = 1.0e10\n",
        ),
        0,
        &["run finished", "to 1.0000000001e10 yr"],
    );
    far.run = true;
    out.push(far);
    // Extreme but in-range van Genuchten α and n (issue 16): the first wetting of a
    // 30-cell column (surface head stepping to −0.01 m at year 1) ended in a Newton
    // failure (exit 3) with α = 1e-5 1/m and n = 1.05, and without a dry end with α =
    // 1e-6 and n = 1.05 (measured before this check). Such a curve does not drain before
    // the oven-dry head and is refused when read, naming the key and the smallest α.
    let wetting = mutate(
        &mutate(
            &mutate(&b, "cells = 8", "cells = 30"),
            "end_year = 2",
            "end_year = 3",
        ),
        "relative_humidity = 0.25",
        "head_m = { steps = [[0.0, -10.0], [1.0, -0.01]] }",
    );
    for (name, text, words) in [
        (
            "alpha 1e-5, n 1.05, run",
            mutate(
                &mutate(&wetting, "alpha_per_m = 7.5", "alpha_per_m = 1e-5"),
                "n = 1.89",
                "n = 1.05",
            ),
            vec![
                "alpha_per_m = 1e-5",
                "at least 0.0001 1/m",
                "oven-dry head of -100000 m",
            ],
        ),
        (
            "alpha 1e-6, n 1.05, without a dry end, run",
            mutate(
                &mutate(
                    &mutate(&wetting, "alpha_per_m = 7.5", "alpha_per_m = 1e-6"),
                    "n = 1.89",
                    "n = 1.05",
                ),
                "dry_end = \"fayer-simmons\"\n",
                "",
            ),
            vec!["alpha_per_m = 1e-6", "at least 0.0001 1/m"],
        ),
        (
            "alpha 0.005 with an oven-dry head of -1000 m, run",
            mutate(
                &mutate(&wetting, "alpha_per_m = 7.5", "alpha_per_m = 0.005"),
                "dry_end = \"fayer-simmons\"\n",
                "dry_end = \"fayer-simmons\"\noven_dry_head_m = -1000.0\n",
            ),
            vec!["alpha_per_m = 0.005", "at least 0.01 1/m", "-1000 m"],
        ),
    ] {
        let mut h = case(name, text, 2, &words);
        h.run = true;
        out.push(h);
    }
    // The smallest α allowed runs that wetting (α = 1e-4 1/m, n = 1.05).
    let mut ok = case(
        "alpha 1e-4, n 1.05, run",
        mutate(
            &mutate(&wetting, "alpha_per_m = 7.5", "alpha_per_m = 1e-4"),
            "n = 1.89",
            "n = 1.05",
        ),
        0,
        &["run finished"],
    );
    ok.run = true;
    out.push(ok);
    out
}

fn mkfifo(path: &Path) {
    let st = std::process::Command::new("mkfifo")
        .arg(path)
        .status()
        .unwrap();
    assert!(st.success());
}

#[test]
fn every_hostile_case_gives_its_exit_code_and_message() {
    let dir = Scratch::new("hostile");
    let corpus = corpus();
    let mut failures = Vec::new();
    for (k, h) in corpus.iter().enumerate() {
        let sub = dir.join(&format!("c{k}"));
        std::fs::create_dir_all(&sub).unwrap();
        for (name, bytes) in &h.files {
            std::fs::write(sub.join(name), bytes).unwrap();
        }
        let case_path = sub.join("case.toml");
        std::fs::write(&case_path, &h.text).unwrap();
        let o = if h.run {
            run_deepdry(&case_path, &sub.join("out"), &[])
        } else {
            deepdry(&["check", arg(&case_path)])
        };
        let (e, so) = (stderr(&o), stdout(&o));
        let text = if h.code == 0 { &so } else { &e };
        let mut why = Vec::new();
        if o.status.code() != Some(h.code) {
            why.push(format!("exit {:?}, want {}", o.status.code(), h.code));
        }
        if e.contains("panicked") {
            why.push("panicked".into());
        }
        if h.code != 0 && (e.lines().count() != 1 || !e.starts_with("deepdry: error: ")) {
            why.push("not one error line".into());
        }
        for w in &h.words {
            if !text.contains(w.as_str()) {
                why.push(format!("lacks `{w}`"));
            }
        }
        if !why.is_empty() {
            failures.push(format!("{}: {}: {}", h.name, why.join(", "), e.trim_end()));
        }
    }
    // The case file itself: a FIFO, a device, too large.
    let fifo = dir.join("fifo.toml");
    mkfifo(&fifo);
    let big = dir.join("big.toml");
    std::fs::write(&big, vec![b'#'; (1 << 20) + 1]).unwrap();
    let specials: Vec<(&str, Vec<&str>)> = vec![
        (arg(&fifo), vec!["fifo.toml", "not a regular file"]),
        ("/dev/zero", vec!["/dev/zero", "not a regular file"]),
        (arg(&big), vec!["big.toml", "1048576"]),
    ];
    for (path, words) in &specials {
        for cmd in ["check", "run"] {
            let out = dir.join("special-out");
            let o = if cmd == "check" {
                deepdry(&[cmd, path])
            } else {
                deepdry(&[cmd, path, "--out", arg(&out)])
            };
            let e = stderr(&o);
            if o.status.code() != Some(2) || !words.iter().all(|w| e.contains(w)) {
                failures.push(format!("{cmd} {path}: exit {:?}: {e}", o.status.code()));
            }
        }
    }
    let total = corpus.len() + 2 * specials.len();
    eprintln!("{total} hostile cases, {} failed", failures.len());
    assert!(total >= 100, "only {total} cases");
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

/// A run of about 5 s (40 years of 200 cells at steps of at most 0.002 yr). Its surface
/// cycle of 0.5 yr repeats 80 times, below the 100 that `run` notes on stderr (the
/// cumulative exchange's accuracy, `Model::periodic_exchange_note`): these runs must
/// end with their one-line error alone.
fn long_case(dir: &Scratch) -> std::path::PathBuf {
    let text = Small {
        cells: 200,
        end_year: 40.0,
        snapshot_every: 0.05,
        checkpoint_every: 1.0,
        extra_time: "max_step_year = 0.002\n".into(),
        ..Small::default()
    }
    .text()
    .replace("period_year = 3.0", "period_year = 0.5");
    dir.write("long.toml", &text)
}

/// Starts the long run, waits for its first checkpoint, then does `act` to the results
/// file; the run must end with exit 4 and a message containing `words`, and its newest
/// checkpoint must still read.
fn results_file_tampered(name: &str, act: fn(&Path, &Path), words: &[&str]) {
    let dir = Scratch::new(name);
    let case = long_case(&dir);
    let out = dir.join("out");
    let child = spawn_run(&case, &out, &[]);
    let t0 = std::time::Instant::now();
    while newest_checkpoint(&out).is_none() {
        assert!(t0.elapsed().as_secs() < 60, "no checkpoint after 60 s");
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    act(&out.join("results.h5"), dir.path.as_path());
    let o = child.wait_with_output().unwrap();
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(4), "{name}: {e}");
    assert_eq!(e.lines().count(), 1, "{e}");
    for w in words {
        assert!(e.contains(w), "{name}: lacks `{w}`: {e}");
    }
    let newest = newest_checkpoint(&out).unwrap();
    read_checkpoint(&newest).unwrap();
}

#[test]
fn a_results_file_deleted_during_the_run_ends_it_with_exit_4() {
    results_file_tampered(
        "results-deleted",
        |results, _| std::fs::remove_file(results).unwrap(),
        &["results.h5", "deleted during the run", "checkpoints"],
    );
}

#[test]
fn a_results_file_replaced_during_the_run_ends_it_with_exit_4() {
    results_file_tampered(
        "results-replaced",
        |results, dir| {
            let other = dir.join("other.h5");
            std::fs::copy(results, &other).unwrap();
            std::fs::rename(&other, results).unwrap();
        },
        &["results.h5", "replaced", "checkpoints"],
    );
}

/// A foreign writer that overwrites the results file while the run holds it open (here
/// everything after its first 4 KiB, with the run paused by SIGSTOP just after its first
/// checkpoint, so the damage always lands between that checkpoint and the end): the run
/// reads the file back at its end, finds it damaged and ends with exit 4, naming the file
/// and saying that the checkpoints are intact, and they are.
#[test]
fn a_results_file_damaged_by_another_writer_during_the_run_ends_it_with_exit_4() {
    let dir = Scratch::new("results-damaged");
    let text = Small {
        cells: 60,
        end_year: 4.0,
        snapshot_every: 0.05,
        checkpoint_every: 1.0,
        extra_time: "max_step_year = 0.002\n".into(),
        ..Small::default()
    }
    .text()
    .replace("period_year = 3.0", "period_year = 0.1");
    let case = dir.write("case.toml", &text);
    // Undamaged, the same run ends well (and reads its file back).
    run_ok(&case, &dir.join("clean"), &[]);
    let out = dir.join("out");
    let mut child = spawn_run(&case, &out, &[]);
    let t0 = std::time::Instant::now();
    while newest_checkpoint(&out).is_none() {
        assert!(t0.elapsed().as_secs() < 60, "no checkpoint after 60 s");
        std::thread::sleep(std::time::Duration::from_millis(5));
    }
    signal(&child, "-STOP");
    assert!(
        child.try_wait().unwrap().is_none(),
        "the run ended before it could be paused"
    );
    let results = out.join("results.h5");
    let len = std::fs::metadata(&results).unwrap().len();
    assert!(len > 8192, "{len} bytes");
    {
        use std::io::{Seek, SeekFrom, Write};
        let mut f = std::fs::OpenOptions::new()
            .write(true)
            .open(&results)
            .unwrap();
        f.seek(SeekFrom::Start(4096)).unwrap();
        f.write_all(&vec![0x55u8; (len - 4096) as usize]).unwrap();
    }
    signal(&child, "-CONT");
    let o = child.wait_with_output().unwrap();
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(4), "{e}");
    assert_eq!(e.lines().count(), 1, "{e}");
    for w in [
        "results.h5",
        "damaged during the run",
        "checkpoints",
        "intact",
    ] {
        assert!(e.contains(w), "lacks `{w}`: {e}");
    }
    for (_, ck) in checkpoints(&out) {
        read_checkpoint(&ck).unwrap();
    }
}

/// Messages that used to mislead: each now names the key and the valid range or remedy.
#[test]
fn messages_name_the_key_and_the_range_or_the_remedy() {
    let dir = Scratch::new("messages");
    let b = base();
    let check = |name: &str, text: String| {
        let p = dir.write(&format!("{name}.toml"), &text);
        deepdry(&["check", arg(&p)])
    };
    // keep = i64::MAX: the range, not "≥ 0".
    let o = check(
        "keep",
        mutate(&b, "keep = 50", "keep = 9223372036854775807"),
    );
    assert_one_line_error(&o, 2, &["checkpoint.keep", "from 1 to 1000000"]);
    // cells = -5: the range starts at 1, not 0.
    let o = check("cells", mutate(&b, "cells = 8", "cells = -5"));
    assert_one_line_error(&o, 2, &["mesh.cells", "from 1 to"]);
    // max_cell_m so small that the mesh is above the cell limit: names max_cell_m.
    let o = check("max-cell", mutate(&b, "cells = 8", "max_cell_m = 1e-9"));
    assert_one_line_error(&o, 2, &["max_cell_m = 1e-9", "limit", "use max_cell_m ≥"]);
    // Control characters in the title and a layer's soil name are escaped by check.
    let forged = mutate(
        &b,
        "title = \"small test column\"",
        "title = \"x\\nrun finished: forged\\u001b[2J\"",
    );
    let o = check("forged", forged);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let out = stdout(&o);
    assert!(!out.contains('\u{1b}'), "ESC printed raw: {out:?}");
    assert!(
        !out.lines().any(|l| l.starts_with("run finished")),
        "a forged line: {out}"
    );
    assert!(out.contains("\\u{1b}"), "{out}");
    // --resume with --overwrite is refused: one continues the results, the other discards them.
    let case = dir.write("run.toml", &b);
    let run_out = dir.join("out");
    run_ok(&case, &run_out, &[]);
    let ck = newest_checkpoint(&run_out).unwrap();
    let o = run_deepdry(&case, &run_out, &["--resume", arg(&ck), "--overwrite"]);
    assert_one_line_error(&o, 2, &["--resume", "--overwrite", "one of them"]);
    // A results file passed as a checkpoint: "a deepdry results file", said once.
    let o = run_deepdry(
        &case,
        &dir.join("out2"),
        &["--resume", arg(&run_out.join("results.h5"))],
    );
    let e = assert_one_line_error(&o, 2, &["a deepdry results file, not a checkpoint"]);
    assert!(!e.contains("deepdry deepdry"), "{e}");
}

/// A file-size limit (`ulimit -f`) gives an I/O error and exit 4, not death by SIGXFSZ.
#[test]
fn a_file_size_limit_is_reported_as_an_io_error() {
    let dir = Scratch::new("ulimit");
    let case = long_case(&dir);
    let out = dir.join("out");
    let o = {
        let _g = h5_guard();
        std::process::Command::new("bash")
            .arg("-c")
            .arg(format!(
                "ulimit -f 40; exec {} run {} --out {} --quiet",
                bin(),
                arg(&case),
                arg(&out)
            ))
            .stdin(std::process::Stdio::null())
            .output()
            .unwrap()
    };
    assert_one_line_error(&o, 4, &["File too large", "nothing to resume from"]);
}
