//! Property test: random mutations of a valid case text (characters deleted, duplicated
//! or replaced; lines deleted, duplicated or swapped; numbers replaced by extreme values,
//! NaN, infinities, negatives; the text cut short) never make `case::parse` panic or
//! hang, errors are one-line input errors, and a case that still parses gives a
//! `deepdry check` summary without panicking.

use proptest::prelude::*;
use std::path::{Path, PathBuf};
use std::sync::mpsc;
use std::time::{Duration, Instant};

/// A valid case using most of the schema: two layers and soils, the three retention laws'
/// keys, schedules of every form (steps, table, CSV table, ramp, sinusoid, sum), surface
/// periods, a steady start, outputs and checkpoints.
const BASE: &str = r#"title = "mutation base"
[column]
depth_m = 40.0
[mesh]
cells = 150
growth = 1.1
surface_cell_m = 0.05
bottom_cell_m = 0.2
interface_cell_m = 0.1
[soils.sand]
van_genuchten = { theta_r = 0.05, theta_s = 0.38, alpha_per_m = 7.5, n = 2.2, l = 0.5 }
dry_end = "fayer-simmons"
oven_dry_head_m = -1.0e5
saturated_conductivity_m_per_s = 1.0e-5
campbell = { a = 1.46, b = 1.652, c = 9.222, d = 0.274, e = 4.0 }
solid_heat_capacity_J_per_m3_K = 1.2e6
enhancement = { cass_clay_fraction = 0.1 }
[soils.clay]
brooks_corey = { theta_r = 0.1, theta_s = 0.45, air_entry_m = 0.5, lambda = 0.3 }
saturated_conductivity_cm_per_day = 5.0
johansen = { dry_W_per_m_K = 0.25, saturated_W_per_m_K = 1.6, texture = "fine" }
particle_density_kg_per_m3 = 2650.0
solid_specific_heat_J_per_kg_K = 800.0
enhancement = 3.0
[[layers]]
name = "top"
soil = "sand"
top_m = 0.0
bottom_m = 15.0
[[layers]]
soil = "clay"
top_m = 15.0
bottom_m = 40.0
[physics]
vapor = "equilibrium"
diffusivity = "massman-1998"
air_pressure_Pa = 90000.0
thermal_liquid_gain = 7.0
viscosity_correction = true
reference_temperature_C = 20.0
face_averaging = "geometric"
[[surface]]
temperature_C = { table_csv = "surface-temperature.csv" }
head_m = { steps = [[-100.0, -10.0], [-50.0, -5.0]] }
[[surface]]
from_year = 0.0
temperature_C = { sum = [18.0, { amplitude = 2.0, period_year = 41000.0, phase_year = 0.0 }] }
relative_humidity = { table = [[0.0, 0.5], [500.0, 0.3], [2000.0, 0.2]] }
resistance_s_per_m = { from_year = 0.0, to_year = 100.0, start = 100.0, end = 200.0 }
[bottom]
head_m = 0.0
geothermal_flux_W_per_m2 = 0.065
[initial]
state = "steady"
surface_temperature_C = 17.0
gradient_K_per_m = 0.03
surface = { head_m = -10.0, temperature_C = 15.0 }
[time]
start_year = -200.0
end_year = 3000.0
max_step_year = 10.0
initial_step_year = 1.0e-6
min_step_year = 1.0e-9
method = "bdf"
max_order = 3
rtol = 1.0e-4
atol_temperature_K = 1.0e-3
atol_head_m = 1.0e-3
atol_vapor_kg_per_m3 = 1.0e-8
atol_liquid_content = 1.0e-5
max_newton_iterations = 20
[output]
folder = "out/mutation"
times_year = [0.0, 100.0]
every_year = 500.0
log_from_year = 1.0
log_per_decade = 5
log_origin_year = 0.0
series_every = 2
[checkpoint]
every_year = 250.0
every_minutes = 30.0
keep = 4
"#;

/// Values that replace a number of the base text.
const EXTREMES: &[&str] = &[
    "0",
    "-0.0",
    "-1",
    "1",
    "nan",
    "-nan",
    "inf",
    "-inf",
    "+inf",
    "1e308",
    "-1e308",
    "1.7976931348623157e308",
    "1e-308",
    "5e-324",
    "-5e-324",
    "9223372036854775807",
    "-9223372036854775808",
    "18446744073709551616",
    "1e400",
    "0.9999999999999999",
    "1.0000000000000002",
    "1000000",
    "1000001",
    "1e6",
    "1e15",
    "-1e15",
    "3.",
    ".5",
    "1__0",
    "0x10",
    "1e",
    "\"12\"",
    "true",
    "[]",
    "{}",
    "1979-05-27",
];

/// Characters that are inserted or replace others.
const CHARS: &[char] = &[
    '"', '\'', '[', ']', '{', '}', '=', ',', '.', '-', '+', '#', '\n', '\t', ' ', 'e', 'E', '0',
    '1', '9', 'a', 'z', '_', '\\', 'é', '\u{0}', '\u{7f}', '∞',
];

#[derive(Debug, Clone)]
enum Mutation {
    DeleteChar(usize),
    DuplicateChar(usize),
    ReplaceChar(usize, char),
    InsertChar(usize, char),
    DeleteLine(usize),
    DuplicateLine(usize),
    SwapLines(usize, usize),
    Number(usize, &'static str),
    NegateNumber(usize),
    Truncate(usize),
}

fn mutation() -> impl Strategy<Value = Mutation> {
    let pos = any::<usize>();
    let ch = proptest::sample::select(CHARS);
    prop_oneof![
        1 => pos.prop_map(Mutation::DeleteChar),
        1 => pos.prop_map(Mutation::DuplicateChar),
        1 => (pos, ch.clone()).prop_map(|(p, c)| Mutation::ReplaceChar(p, c)),
        1 => (pos, ch).prop_map(|(p, c)| Mutation::InsertChar(p, c)),
        1 => pos.prop_map(Mutation::DeleteLine),
        1 => pos.prop_map(Mutation::DuplicateLine),
        1 => (pos, pos).prop_map(|(a, b)| Mutation::SwapLines(a, b)),
        // Numbers are the commonest target: three weights of six.
        3 => (pos, proptest::sample::select(EXTREMES)).prop_map(|(p, v)| Mutation::Number(p, v)),
        1 => pos.prop_map(Mutation::NegateNumber),
        1 => pos.prop_map(Mutation::Truncate),
    ]
}

/// Byte ranges of the numbers in `text` (a digit run with an optional sign, point and
/// exponent), in order.
fn numbers(text: &str) -> Vec<(usize, usize)> {
    let b = text.as_bytes();
    let mut out = Vec::new();
    let mut i = 0;
    while i < b.len() {
        let starts = b[i].is_ascii_digit()
            && (i == 0 || !(b[i - 1].is_ascii_alphanumeric() || b[i - 1] == b'_'));
        if starts {
            let mut s = i;
            if s > 0 && (b[s - 1] == b'-' || b[s - 1] == b'+') {
                s -= 1;
            }
            let mut e = i;
            while e < b.len()
                && (b[e].is_ascii_digit()
                    || b[e] == b'.'
                    || b[e] == b'e'
                    || b[e] == b'E'
                    || ((b[e] == b'-' || b[e] == b'+') && (b[e - 1] == b'e' || b[e - 1] == b'E')))
            {
                e += 1;
            }
            out.push((s, e));
            i = e;
        } else {
            i += 1;
        }
    }
    out
}

/// The char boundary at or before byte `p % (len + 1)`.
fn boundary(text: &str, p: usize) -> usize {
    let mut p = p % (text.len() + 1);
    while !text.is_char_boundary(p) {
        p -= 1;
    }
    p
}

fn apply(text: &mut String, m: &Mutation) {
    let lines = |t: &str| -> Vec<String> { t.split('\n').map(str::to_string).collect() };
    match m {
        Mutation::DeleteChar(p) | Mutation::DuplicateChar(p) | Mutation::ReplaceChar(p, _) => {
            if text.is_empty() {
                return;
            }
            let at = boundary(text, *p % text.len());
            let Some(c) = text[at..].chars().next() else {
                return;
            };
            let end = at + c.len_utf8();
            match m {
                Mutation::DeleteChar(_) => text.replace_range(at..end, ""),
                Mutation::DuplicateChar(_) => text.insert(at, c),
                Mutation::ReplaceChar(_, r) => text.replace_range(at..end, &r.to_string()),
                _ => unreachable!(),
            }
        }
        Mutation::InsertChar(p, c) => {
            let at = boundary(text, *p);
            text.insert(at, *c);
        }
        Mutation::DeleteLine(k) | Mutation::DuplicateLine(k) => {
            let mut ls = lines(text);
            let k = k % ls.len();
            if matches!(m, Mutation::DeleteLine(_)) {
                ls.remove(k);
            } else {
                let l = ls[k].clone();
                ls.insert(k, l);
            }
            *text = ls.join("\n");
        }
        Mutation::SwapLines(a, b) => {
            let mut ls = lines(text);
            let n = ls.len();
            ls.swap(a % n, b % n);
            *text = ls.join("\n");
        }
        Mutation::Number(k, v) => {
            let nums = numbers(text);
            if let Some(&(s, e)) = nums.get(k % nums.len().max(1)) {
                text.replace_range(s..e, v);
            }
        }
        Mutation::NegateNumber(k) => {
            let nums = numbers(text);
            if let Some(&(s, e)) = nums.get(k % nums.len().max(1)) {
                let n = text[s..e].to_string();
                let neg = match n.strip_prefix('-') {
                    Some(rest) => rest.to_string(),
                    None => format!("-{}", n.trim_start_matches('+')),
                };
                text.replace_range(s..e, &neg);
            }
        }
        Mutation::Truncate(p) => {
            let at = boundary(text, *p);
            text.truncate(at);
        }
    }
}

fn case_data() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/case_data")
}

/// What parsing one text gave: an error message, or the summary of the parsed case.
enum Outcome {
    Parsed(String),
    Input(String),
    Other(String),
}

/// Parses (and summarises) `text` on a worker thread; `Err` when it panics or takes
/// longer than `limit`.
fn parse_bounded(text: String, limit: Duration) -> Result<Outcome, String> {
    let (tx, rx) = mpsc::channel();
    std::thread::spawn(move || {
        let r = std::panic::catch_unwind(|| {
            match deepdry::case::parse(&text, "mutant.toml", &case_data()) {
                Ok(model) => Outcome::Parsed(deepdry::case::summary(&model)),
                Err(deepdry::error::Error::Input(m)) => Outcome::Input(m),
                Err(e) => Outcome::Other(e.to_string()),
            }
        });
        let _ = tx.send(r);
    });
    match rx.recv_timeout(limit) {
        Ok(Ok(o)) => Ok(o),
        Ok(Err(p)) => Err(format!(
            "panicked: {}",
            p.downcast_ref::<String>()
                .cloned()
                .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
                .unwrap_or_default()
        )),
        Err(_) => Err(format!("took longer than {limit:?}")),
    }
}

/// `mesh.growth` in (1, 1 + 1e-6) once made mesh generation loop without end (the
/// graded-cell count ln(w/s)/ln(g) is about 1e15 for g = 1 + 2e-16); such growths are now
/// refused with a one-line error, quickly.
#[test]
fn growth_just_above_one_is_refused_quickly() {
    let text = BASE.replace("growth = 1.1", "growth = 1.0000000000000002");
    match parse_bounded(text, Duration::from_secs(10)) {
        Ok(Outcome::Input(m)) => assert!(m.contains("mesh.growth"), "{m}"),
        Ok(Outcome::Parsed(_)) | Ok(Outcome::Other(_)) => panic!("not refused as an input error"),
        Err(e) => panic!("{e}"),
    }
}

#[test]
fn the_base_case_is_valid() {
    match parse_bounded(BASE.to_string(), Duration::from_secs(10)).unwrap() {
        Outcome::Parsed(s) => assert!(s.contains("mutation base"), "{s}"),
        Outcome::Input(m) | Outcome::Other(m) => panic!("{m}"),
    }
    assert!(numbers(BASE).len() > 80, "{}", numbers(BASE).len());
}

#[test]
fn mutated_cases_never_panic_or_hang() {
    use proptest::test_runner::{Config, TestCaseError, TestRunner};
    use std::sync::atomic::{AtomicUsize, Ordering::Relaxed};
    let (parsed, refused) = (AtomicUsize::new(0), AtomicUsize::new(0));
    // What the refusals were about: the key path (or TOML syntax) after the location.
    let topics = std::sync::Mutex::new(std::collections::BTreeSet::new());
    // A fixed seed in CI; DEEPDRY_MUTATIONS=N runs N cases from a random seed instead
    // (for a longer search by hand).
    let (cases, random) = match std::env::var("DEEPDRY_MUTATIONS") {
        Ok(n) => (
            n.parse().expect("DEEPDRY_MUTATIONS: a number of cases"),
            true,
        ),
        Err(_) => (3000u32, false),
    };
    let config = Config {
        cases,
        max_shrink_iters: 2000,
        failure_persistence: None,
        ..Config::default()
    };
    let mut runner = if random {
        TestRunner::new(config)
    } else {
        TestRunner::new_with_rng(
            config,
            proptest::test_runner::TestRng::deterministic_rng(
                proptest::test_runner::RngAlgorithm::ChaCha,
            ),
        )
    };
    let strategy = proptest::collection::vec(mutation(), 1..5);
    let result = runner.run(&strategy, |ms| {
        let mut text = BASE.to_string();
        for m in &ms {
            apply(&mut text, m);
        }
        // Generous: a parse takes well under a millisecond; a loaded machine is slower.
        let limit = Duration::from_secs(10);
        let t0 = Instant::now();
        let outcome = parse_bounded(text.clone(), limit)
            .map_err(|e| TestCaseError::fail(format!("{e}\n--- case ---\n{text}")))?;
        match outcome {
            Outcome::Parsed(summary) => {
                prop_assert!(!summary.is_empty());
                parsed.fetch_add(1, Relaxed);
            }
            Outcome::Input(msg) => {
                prop_assert!(!msg.contains('\n'), "not one line: {msg}");
                prop_assert!(
                    msg.starts_with("mutant.toml") || msg.contains(".csv"),
                    "{msg}"
                );
                refused.fetch_add(1, Relaxed);
                let rest = msg.splitn(4, ':').nth(3).unwrap_or(&msg).trim().to_string();
                let topic = rest.split([' ', ':', '=']).next().unwrap_or("").to_string();
                topics.lock().unwrap().insert(topic);
            }
            // A CSV schedule is read from disk: an I/O error naming it is allowed.
            Outcome::Other(msg) => prop_assert!(
                msg.contains(".csv"),
                "not an input error: {msg}\n--- case ---\n{text}"
            ),
        }
        prop_assert!(t0.elapsed() < limit);
        Ok(())
    });
    if let Err(e) = result {
        panic!("{e}");
    }
    let (p, r) = (parsed.load(Relaxed), refused.load(Relaxed));
    let topics = topics.into_inner().unwrap();
    eprintln!(
        "{cases} mutants: {p} parsed, {r} refused with one-line input errors about {} different keys",
        topics.len()
    );
    // Both outcomes occur and the refusals are spread over the schema, so the mutations
    // reach past the TOML parser into the validation.
    if !random {
        assert!(p >= 50 && r >= 1000, "{p} parsed, {r} refused");
        assert!(topics.len() >= 40, "refusals about only {topics:?}");
    }
}
