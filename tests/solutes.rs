//! Solutes on the binary and in memory:
//! - a resumed run with solutes is bitwise identical to an uninterrupted one (results file
//!   and final checkpoint), with BDF and a solubility limit; a branch carries the
//!   checkpoint's solute masses;
//! - the solute balance closes to round-off (≤ 1e-12 relative) from the cumulative series,
//!   whatever the order of the steps;
//! - evaporation from a column closed at the bottom leaves the solute behind: the total is
//!   constant while the water leaves, and the near-surface concentration rises (exact
//!   statement of the model: vapour carries no solute);
//! - bad `[[solutes]]` tables are refused in one line naming the key.

mod support;

use deepdry::solve::linear::SolverKind;
use support::*;

/// A [[solutes]] table with a deposition, a solubility limit and dispersion.
const CHLORIDE: &str = r#"
[[solutes]]
name = "chloride"
free_diffusivity_m2_per_s = 2.03e-9
dispersivity_m = 0.05
deposition_g_per_m2_per_year = { steps = [[0.0, 0.1], [6.0, 0.3]] }
initial_concentration_g_per_m3 = 20.0
solubility_g_per_m3 = 3000.0
recharge_depth_m = 8.0
"#;

fn small_with(solutes: &str, method: &'static str) -> String {
    let small = Small {
        method,
        humidity: "{ steps = [[0.0, 0.25], [6.0, 0.15]] }".into(),
        ..Small::default()
    };
    format!("{}{solutes}", small.text())
}

#[test]
fn resume_with_solutes_is_bitwise() {
    let dir = Scratch::new("solute-resume");
    let case = dir.write("case.toml", &small_with(CHLORIDE, "bdf"));
    let (a, b) = (dir.join("a"), dir.join("b"));
    run_ok(&case, &a, &[]);
    run_ok(&case, &b, &[]);
    let ra = a.join("results.h5");
    let rb = b.join("results.h5");
    assert_same_datasets(&ra, &rb);
    let sets = datasets(&ra).unwrap();
    for name in [
        "profiles/concentration_chloride",
        "profiles/flux_chloride",
        "profiles/accumulation_age_chloride",
        "profiles/precipitate_chloride",
        "series/storage_chloride",
        "series/balance_error_chloride",
    ] {
        assert!(sets.contains_key(name), "no {name}");
    }
    // The solubility limit is reached near the surface (the test needs precipitate).
    let precip = sets["profiles/precipitate_chloride"].floats();
    assert!(
        precip.iter().cloned().fold(0.0, f64::max) > 0.0,
        "no precipitate: the case does not reach the solubility limit"
    );
    for t in [5.0, 2.0, 9.0, 6.0] {
        let ck = checkpoint_at(&b, t);
        run_ok(&case, &b, &["--resume", arg(&ck)]);
        assert_same_datasets(&ra, &rb);
        assert_same_datasets(&checkpoint_at(&a, 10.0), &checkpoint_at(&b, 10.0));
    }
}

#[test]
fn a_flipped_bit_in_the_solute_state_is_refused() {
    let dir = Scratch::new("solute-flip");
    let case = dir.write("case.toml", &small_with(CHLORIDE, "bdf"));
    let a = dir.join("a");
    run_ok(&case, &a, &[]);
    let ck = checkpoint_at(&a, 5.0);
    {
        let _g = h5_guard();
        let f = hdf5::File::open_rw(&ck).unwrap();
        let ds = f.dataset("solute_mass").unwrap();
        let mut v = ds.read_2d::<f64>().unwrap();
        let x = v[[0, 3]];
        v[[0, 3]] = f64::from_bits(x.to_bits() ^ 1);
        ds.write(&v).unwrap();
    }
    let o = run_deepdry(&case, &a, &["--resume", arg(&ck)]);
    assert_one_line_error(&o, 2, &["damaged checkpoint", "checksum"]);
}

#[test]
fn a_branch_carries_the_solute_masses() {
    let dir = Scratch::new("solute-branch");
    let case = dir.write("case.toml", &small_with(CHLORIDE, "bdf"));
    let a = dir.join("a");
    run_ok(&case, &a, &[]);
    let ck = checkpoint_at(&a, 5.0);
    let b = dir.join("b");
    run_ok(&case, &b, &["--start-from", arg(&ck)]);
    let parent = datasets(&a.join("results.h5")).unwrap();
    let child = datasets(&b.join("results.h5")).unwrap();
    // The branch starts from the parent's state at year 5: its first stored solute total
    // is the parent's at year 5, bit for bit.
    let storage_child = child["series/storage_chloride"].floats()[0];
    let times = parent["series/time"].floats();
    let k = times
        .iter()
        .position(|&t| (t - 5.0).abs() < 1e-9)
        .expect("a parent series row at year 5");
    let storage_parent = parent["series/storage_chloride"].floats()[k];
    assert_eq!(
        storage_child.to_bits(),
        storage_parent.to_bits(),
        "branch starts with {storage_child} g/m2, the parent had {storage_parent} at year 5"
    );
    // Its cumulative flows start from zero.
    assert_eq!(child["series/surface_cumulative_chloride"].floats()[0], 0.0);
}

/// The solute balance from the cumulative series: at the end ≤ 1e-12 relative to the
/// larger of the storage change and the throughput, and at every record within the
/// round-off of the stored mass (1e-12 of max(storage, throughput): the first records'
/// changes are 1e-7 g/m² against several g/m² stored, so their own relative errors are
/// round-off divided by a tiny change). The stepper's formula integrates the boundary
/// flows exactly as the storages, so nothing but round-off is left.
#[test]
fn solute_balance_closes_to_round_off() {
    for method in ["bdf", "backward-euler"] {
        let text = small_with(CHLORIDE, method);
        let model =
            deepdry::case::parse_with_overrides(&text, "case.toml", std::path::Path::new("."), &[])
                .unwrap();
        let (rec, _) = deepdry::sim::run_in_memory(&model, SolverKind::BlockThomas).unwrap();
        let last = rec.extra_series.last().unwrap();
        assert!(
            last[4] <= 1e-12,
            "{method}: relative solute balance {:e}",
            last[4]
        );
        for v in &rec.extra_series {
            let bound = 1e-12 * v[0].abs().max(v[1].abs() + v[2].abs());
            assert!(
                v[3].abs() <= bound,
                "{method}: balance error {:e} > {bound:e}",
                v[3]
            );
        }
        // Storage change equals surface inflow minus bottom outflow.
        let first = &rec.extra_series[0];
        let change = last[0] - first[0];
        let net = last[1] - last[2];
        assert!(
            (change - net).abs() <= 1e-12 * change.abs().max(last[1]),
            "{method}: change {change} net inflow {net}"
        );
        // The surface inflow is the deposition integrated over the run: 0.1 g/m²/yr for
        // 6 years then 0.3 for 4 (exact: the formula integrates piecewise-constant input
        // landing on its jumps; within the BDF local error otherwise).
        assert!(
            (last[1] - 1.8).abs() <= 1e-9,
            "{method}: deposited {} g/m2, expected 1.8",
            last[1]
        );
    }
}

/// A column closed at the bottom and open to dry air above: water leaves as vapour, the
/// solute stays. Total solute constant (≤ 1e-12 relative), and the top cell's
/// concentration rises above the initial one.
#[test]
fn evaporation_leaves_the_solute_behind() {
    let small = Small::default();
    // Hydrostatic over a water table at the start, closed from 0.001 years on.
    let text = small.text().replace(
        "[bottom]\nhead_m = 0.0\ntemperature_C = 23.0",
        "[[bottom]]\nhead_m = 0.0\ntemperature_C = 23.0\n[[bottom]]\nfrom_year = 0.001\nno_flow = true\ntemperature_C = 23.0",
    ) + r#"
[[solutes]]
name = "tracer"
free_diffusivity_m2_per_s = 1.0e-9
inflow_concentration_g_per_m3 = 0.0
initial_concentration_g_per_m3 = 100.0
"#;
    let model =
        deepdry::case::parse_with_overrides(&text, "case.toml", std::path::Path::new("."), &[])
            .unwrap();
    let (rec, finish) = deepdry::sim::run_in_memory(&model, SolverKind::BlockThomas).unwrap();
    // Water left the column (the surface flux is upward).
    let w0 = rec.series[0].water_storage;
    let w1 = rec.series.last().unwrap().water_storage;
    assert!(w1 < w0 - 1.0, "water storage {w0} -> {w1} kg/m2: no drying");
    assert!(finish.surface_water_flux < 0.0);
    // Until the bottom closes, groundwater moving up brings solute in (at the bottom
    // cell's concentration); from then on the total must not change.
    let k = rec
        .series
        .iter()
        .position(|r| r.time_year >= 0.001)
        .unwrap();
    let s0 = rec.extra_series[k][0];
    let s1 = rec.extra_series.last().unwrap()[0];
    assert!(
        (s1 - s0).abs() <= 1e-12 * s0,
        "solute total {s0} -> {s1} g/m2"
    );
    // And what came in before is what the bottom boundary counted.
    let v = &rec.extra_series[k];
    assert!((v[0] - rec.extra_series[0][0] + v[2]).abs() <= 1e-12 * v[0]);
    let first = &rec.snapshots[0].profile.solutes[0].concentration;
    let last = &rec.snapshots.last().unwrap().profile.solutes[0].concentration;
    assert!((first[0] - 100.0).abs() < 1e-9, "{}", first[0]);
    assert!(last[0] > 150.0, "top concentration {} g/m3", last[0]);
}

#[test]
fn bad_solute_tables_are_refused_in_one_line() {
    let dir = Scratch::new("solute-bad");
    let base = Small::default().text();
    let cases: &[(&str, &[&str])] = &[
        (
            "[[solutes]]\nname = \"Cl-\"\nfree_diffusivity_m2_per_s = 2e-9\ndeposition_g_per_m2_per_year = 0.1\n",
            &["solutes[1].name", "lower-case"],
        ),
        (
            "[[solutes]]\nname = \"cl\"\ndeposition_g_per_m2_per_year = 0.1\n",
            &["free_diffusivity_m2_per_s", "missing"],
        ),
        (
            "[[solutes]]\nname = \"cl\"\nfree_diffusivity_m2_per_s = 2e-9\ndeposition_g_per_m2_per_year = 0.1\ninflow_concentration_g_per_m3 = 3.0\n",
            &["inflow_concentration_g_per_m3", "conflicts"],
        ),
        (
            "[[solutes]]\nname = \"cl\"\nfree_diffusivity_m2_per_s = 2e-9\ndeposition_g_per_m2_per_year = -0.1\n",
            &["deposition_g_per_m2_per_year", "[0, 1e6]"],
        ),
        (
            "[[solutes]]\nname = \"cl\"\nfree_diffusivity_m2_per_s = 2e-9\ndeposition_g_per_m2_per_year = 0.1\n[[solutes]]\nname = \"cl\"\nfree_diffusivity_m2_per_s = 2e-9\ndeposition_g_per_m2_per_year = 0.1\n",
            &["named twice"],
        ),
        (
            "[[solutes]]\nname = \"cl\"\nfree_diffusivity_m2_per_s = 2e-9\ndeposition_g_per_m2_per_year = 0.1\nsolubility = 5\n",
            &["unknown key `solubility`", "solubility_g_per_m3"],
        ),
        (
            "[[solutes]]\nname = \"cl\"\nfree_diffusivity_m2_per_s = 2e-9\ndeposition_g_per_m2_per_year = 0.1\nrecharge_depth_m = 50\n",
            &["recharge_depth_m", "inside the column"],
        ),
        (
            "[[solutes]]\nname = \"cl\"\nfree_diffusivity_m2_per_s = 2e-9\ndeposition_g_per_m2_per_year = 0.1\ninitial_csv = \"missing.csv\"\n",
            &["initial_csv", "missing.csv"],
        ),
    ];
    for (i, (table, fragments)) in cases.iter().enumerate() {
        let case = dir.write(&format!("bad{i}.toml"), &format!("{base}{table}"));
        let o = deepdry(&["check", arg(&case)]);
        assert_one_line_error(&o, 2, fragments);
    }
    // The steady initial profile needs a way out: refused over a closed bottom with
    // evaporation (a run error, exit 2, before any step).
    let closed = base.replace(
        "[bottom]\nhead_m = 0.0\ntemperature_C = 23.0",
        "[[bottom]]\nhead_m = 0.0\ntemperature_C = 23.0\n[[bottom]]\nfrom_year = 0.001\nno_flow = true\ntemperature_C = 23.0",
    );
    let case = dir.write(
        "steady.toml",
        &format!("{closed}[[solutes]]\nname = \"cl\"\nfree_diffusivity_m2_per_s = 2e-9\ndeposition_g_per_m2_per_year = 0.1\ninitial_steady = true\n"),
    );
    let o = run_deepdry(&case, &dir.join("out"), &[]);
    assert_one_line_error(&o, 2, &["initial_steady", "no steady profile"]);
}

/// `compare` reads solute concentrations (`concentration_<name>` observations): an
/// observation equal to the model's value at a cell centre has zero residual, one
/// 20 g/m³ above it a residual of 20, so the bias (model − observed, averaged) is exactly
/// −10; an unknown solute is refused naming the run's.
#[test]
fn compare_reads_solute_concentrations() {
    let dir = Scratch::new("solute-compare");
    let case = dir.write("case.toml", &small_with(CHLORIDE, "bdf"));
    let a = dir.join("a");
    run_ok(&case, &a, &[]);
    let results = a.join("results.h5");
    let sets = datasets(&results).unwrap();
    let depth = sets["profiles/depth"].floats();
    let times = sets["profiles/time"].floats();
    let conc = sets["profiles/concentration_chloride"].floats();
    let n = depth.len();
    let k = times.len() - 1;
    let (z, c) = (depth[5], conc[k * n + 5]);
    let obs = dir.write(
        "obs.csv",
        &format!(
            "time_year,depth_m,quantity,value,sigma\n{t},{z},concentration_chloride,{c},1.0\n{t},{z},concentration_chloride,{},1.0\n",
            c + 20.0,
            t = times[k]
        ),
    );
    let out = dir.join("cmp");
    let o = deepdry(&["compare", arg(&results), arg(&obs), "--out", arg(&out)]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let summary = std::fs::read_to_string(out.join("compare-summary.csv")).unwrap();
    let row = summary
        .lines()
        .find(|l| l.starts_with("concentration_chloride,"))
        .unwrap_or_else(|| panic!("no chloride row: {summary}"));
    let cols: Vec<&str> = row.split(',').collect();
    assert_eq!(cols[2], "2", "{row}");
    let bias: f64 = cols[3].parse().unwrap();
    assert!((bias + 10.0).abs() < 1e-9, "{row}");
    let bad = dir.write(
        "bad.csv",
        &format!(
            "time_year,depth_m,quantity,value,sigma\n{},{z},concentration_nitrate,1,1\n",
            times[k]
        ),
    );
    let o = deepdry(&["compare", arg(&results), arg(&bad), "--out", arg(&out)]);
    assert_one_line_error(&o, 2, &["concentration_nitrate", "its solutes: chloride"]);
}

/// The osmotic effect: the relative humidity of the pore air is the Kelvin value of the
/// matric head times exp(−Mw i (c/M)/ρw) (van 't Hoff's π = i (c/M) R T as a head
/// −π/(ρw g) added to h in the Kelvin equation: derived, exact in the model up to the
/// coupling tolerance of 1 mm of head, 7e-9 relative); with it the salty column loses
/// less water than without; and a resumed osmotic run is bitwise the uninterrupted one.
#[test]
fn osmotic_potential_lowers_the_humidity_and_the_loss() {
    let salty = r#"
[[solutes]]
name = "chloride"
free_diffusivity_m2_per_s = 2.03e-9
deposition_g_per_m2_per_year = 0.5
initial_concentration_g_per_m3 = 30000.0
bottom_concentration_g_per_m3 = 30000.0
solubility_g_per_m3 = 2.16e5
osmotic_ions = 2
molar_mass_g_per_mol = 35.45
"#;
    let small = Small {
        end_year: 4.0,
        checkpoint_every: 1.0,
        snapshot_every: 1.0,
        ..Small::default()
    };
    let text = format!("{}{salty}", small.text());
    let parse = |t: &str| {
        deepdry::case::parse_with_overrides(t, "case.toml", std::path::Path::new("."), &[]).unwrap()
    };
    let (on, fin_on) = deepdry::sim::run_in_memory(&parse(&text), SolverKind::BlockThomas).unwrap();
    let off_text = text.replace("osmotic_ions = 2", "osmotic_ions = 0");
    let (_, fin_off) =
        deepdry::sim::run_in_memory(&parse(&off_text), SolverKind::BlockThomas).unwrap();
    // Less evaporation with the osmotic effect (fluxes are negative: upward).
    assert!(
        fin_on.surface_water_flux > fin_off.surface_water_flux,
        "surface flux with {:e}, without {:e}",
        fin_on.surface_water_flux,
        fin_off.surface_water_flux
    );
    // The humidity of every cell at every snapshot.
    let (g, mw, r) = (9.80665, 0.018_015_268, 8.314_462_618);
    let mut worst: f64 = 0.0;
    for s in &on.snapshots {
        let p = &s.profile;
        let c = &p.solutes[0].concentration;
        for (i, &ci) in c.iter().enumerate() {
            let t = p.temperature_c[i] + 273.15;
            let kelvin = (g * mw * p.head[i].min(0.0) / (r * t)).exp();
            let expected = kelvin * (-mw * 2.0 * ci / 35.45 / 1000.0).exp();
            worst = worst.max((p.relative_humidity[i] / expected - 1.0).abs());
        }
    }
    assert!(worst < 1e-7, "relative humidity off by {worst:e}");
    // Bitwise resume.
    let dir = Scratch::new("solute-osmotic");
    let case = dir.write("case.toml", &text);
    let (a, b) = (dir.join("a"), dir.join("b"));
    run_ok(&case, &a, &[]);
    run_ok(&case, &b, &[]);
    run_ok(&case, &b, &["--resume", arg(&checkpoint_at(&b, 2.0))]);
    assert_same_datasets(&a.join("results.h5"), &b.join("results.h5"));
}
