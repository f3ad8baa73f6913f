//! Perched water on a clay lens (issue 17): a 15 m column of sandy loam (or of gravelly
//! sand) with a 1 m clay lens at 4–5 m, 0.1 m cells, over a water table; a steady surface
//! inflow for 30 years, then none. The runs must reach the end with the water balance
//! within 1e-8 (relative); where the inflow exceeds what the lens can carry, saturation
//! must form on the lens, spread upward while the inflow lasts and drain after it stops.
//!
//! The clay is the issue's (Ks 5.56e-9 m/s = 175 mm/yr, van Genuchten n = 1.09; θr, θs, α
//! of the Carsel & Parrish 1988 clay, from memory) with the air-entry modification
//! (`air_entry_m = 0.02`, Vogel et al. 2001, from memory): without it the run fails as the
//! lens saturates (pinned below). Since 100 mm/yr is less than the lens's Ks, a lens at
//! unit gradient carries it without saturating (measured: the lens top settles at
//! h ≈ −0.07 m); perching needs an inflow above Ks (Darcy, common practice), so the
//! perched-water run takes 300 mm/yr (1.7 Ks of the clay).

use deepdry::sim::observers::Recorder;
use deepdry::sim::simulation::Finish;
use deepdry::solve::linear::SolverKind;

/// Carsel & Parrish (1988) sandy loam, as in the project's other cases (with the air
/// entry: n = 1.89 < 2 too).
const SANDY_LOAM: &str = "van_genuchten = { theta_r = 0.065, theta_s = 0.41, alpha_per_m = 7.5, n = 1.89, air_entry_m = 0.02 }
saturated_conductivity_m_per_s = 1.23e-5";

/// The project's gravelly sand (`cases/climate-shift.toml`, Brooks–Corey), 300 cm/day.
const GRAVEL: &str =
    "brooks_corey = { theta_r = 0.02, theta_s = 0.35, air_entry_m = 0.1, lambda = 1.2 }
saturated_conductivity_m_per_s = 3.4722e-5";

/// Lens top and bottom [m], the year the inflow stops, the end [yr].
const LENS: (f64, f64) = (4.0, 5.0);
const STOP_YEAR: f64 = 30.0;
const END_YEAR: f64 = 200.0;

fn case(host: &str, clay_air_entry: f64, inflow_mm_yr: f64, newton_tolerance: f64) -> String {
    format!(
        r#"
[column]
depth_m = 15.0
[mesh]
cells = 150
[soils.host]
{host}
thermal_conductivity_W_per_m_K = 1.5
solid_heat_capacity_J_per_m3_K = 1.18e6
[soils.clay]
van_genuchten = {{ theta_r = 0.068, theta_s = 0.38, alpha_per_m = 0.8, n = 1.09, air_entry_m = {clay_air_entry} }}
saturated_conductivity_m_per_s = 5.56e-9
thermal_conductivity_W_per_m_K = 1.2
solid_heat_capacity_J_per_m3_K = 1.2e6
[[layers]]
soil = "host"
name = "upper"
top_m = 0.0
bottom_m = {top}
[[layers]]
soil = "clay"
top_m = {top}
bottom_m = {bottom}
[[layers]]
soil = "host"
name = "lower"
top_m = {bottom}
bottom_m = 15.0
[physics]
viscosity_correction = false
[surface]
temperature_C = 20.0
flux_mm_per_year = {{ steps = [[0.0, {inflow_mm_yr}], [{STOP_YEAR}, 0.0]] }}
[bottom]
head_m = 0.0
temperature_C = 20.0
[initial]
state = "steady"
surface = {{ flux_mm_per_year = 1.0, temperature_C = 20.0 }}
[time]
end_year = {END_YEAR}
newton_tolerance = {newton_tolerance:e}
[output]
times_year = [0.5, 1.0, 1.5, 2.0, 2.5, 3.0, 3.5, 4.0, 5.0, 6.0, 8.0, 10.0, 20.0, 30.0, 30.5, 31.0, 32.0, 35.0, 40.0, 60.0, 100.0, 200.0]
"#,
        top = LENS.0,
        bottom = LENS.1
    )
}

fn run(text: &str) -> deepdry::error::Result<(Recorder, Finish, Vec<f64>, Vec<f64>)> {
    let model =
        deepdry::case::parse_with_overrides(text, "case.toml", std::path::Path::new("."), &[])
            .expect("valid case");
    let (c, w) = (model.mesh.centers.clone(), model.mesh.widths.clone());
    deepdry::sim::run_in_memory(&model, SolverKind::BlockThomas).map(|(r, f)| (r, f, c, w))
}

/// Thickness [m] of the saturated zone (h ≥ 0) resting on the lens: the contiguous cells
/// with h ≥ 0 counted upward from the one just above the lens top.
fn perched_thickness(head: &[f64], centers: &[f64], widths: &[f64]) -> f64 {
    let above = centers
        .iter()
        .rposition(|z| *z < LENS.0)
        .expect("cells above the lens");
    let mut t = 0.0;
    for k in (0..=above).rev() {
        if head[k] < 0.0 {
            break;
        }
        t += widths[k];
    }
    t
}

/// Steps, the relative water balance, and per snapshot (year, perched thickness, head in
/// the cell just above the lens).
fn summary(rec: &Recorder, fin: &Finish, centers: &[f64], widths: &[f64]) -> Vec<(f64, f64, f64)> {
    let above = centers.iter().rposition(|z| *z < LENS.0).unwrap();
    let rows: Vec<(f64, f64, f64)> = rec
        .snapshots
        .iter()
        .map(|s| {
            (
                s.time_year,
                perched_thickness(&s.profile.head, centers, widths),
                s.profile.head[above],
            )
        })
        .collect();
    eprintln!(
        "steps {} (rejected {}), water balance {:.2e} relative ({:.2e} kg/m2), energy {:.2e}",
        fin.counters.steps,
        fin.counters.rejected,
        fin.balance_rel[1],
        fin.balance_abs[1],
        fin.balance_rel[0]
    );
    for (t, d, h) in &rows {
        eprintln!("  {t:6.1} yr: perched {d:.2} m, h above the lens {h:+.3} m");
    }
    rows
}

/// Index of the water balance in `Finish::balance_rel` (energy, water, as the rows).
const WATER: usize = 1;

/// A perched saturated zone forms on the lens, thickens while the inflow lasts, and drains
/// after it stops; the water balance closes to 1e-8.
fn forms_spreads_and_drains(text: &str) {
    let (rec, fin, c, w) = run(text).expect("runs to the end");
    let rows = summary(&rec, &fin, &c, &w);
    assert!(
        fin.balance_rel[WATER].abs() <= 1e-8,
        "{:e}",
        fin.balance_rel[WATER]
    );
    let during: Vec<_> = rows.iter().filter(|r| r.0 <= STOP_YEAR).collect();
    // Forms: the cell on the lens is saturated at some time of the inflow.
    let first = during
        .iter()
        .position(|r| r.2 >= 0.0)
        .expect("saturation forms above the lens");
    // Spreads upward: the perched zone grows thicker than when it first appeared, to more
    // than one cell.
    let most = during.iter().fold(0.0f64, |m, r| m.max(r.1));
    assert!(most > during[first].1 && most >= 0.2, "{most} m");
    // Drains: long after the inflow stopped no cell above the lens is saturated, and the
    // head on the lens fell below zero.
    let last = rows.last().unwrap();
    assert!(last.1 == 0.0 && last.2 < 0.0, "{last:?}");
    // Water left the column after the stop (storage at the end below that at the stop).
    let at = |y: f64| {
        rec.series
            .iter()
            .find(|r| (r.time_year - y).abs() < 1e-9)
            .map(|r| r.water_storage)
            .unwrap()
    };
    assert!(at(END_YEAR) < at(STOP_YEAR));
}

/// 300 mm/yr (above the clay's Ks) onto the lens in sandy loam.
#[test]
fn perched_water_forms_spreads_and_drains_on_a_clay_lens_in_sandy_loam() {
    forms_spreads_and_drains(&case(SANDY_LOAM, 0.02, 300.0, 1e-9));
}

/// 300 mm/yr onto the lens in gravel (gravelly sand). Measured with the default Newton
/// tolerance (1e-9): balance 6.0e-9 relative; the same lens under 100 yr of inflow to
/// 300 yr closed to only 2.6e-8 (1e-10 gives 1e-9 here): the margin to 1e-8 is small.
#[test]
fn perched_water_forms_spreads_and_drains_on_a_clay_lens_in_gravel() {
    forms_spreads_and_drains(&case(GRAVEL, 0.02, 300.0, 1e-9));
}

/// The issue's 100 mm/yr onto the lens in sandy loam: below the lens's Ks, so it passes
/// without saturating; the run must reach the end with its balance.
#[test]
fn clay_lens_in_sandy_loam_at_100_mm_per_year_runs_to_the_end() {
    let (rec, fin, c, w) = run(&case(SANDY_LOAM, 0.02, 100.0, 1e-9)).expect("runs to the end");
    let rows = summary(&rec, &fin, &c, &w);
    assert!(
        fin.balance_rel[WATER].abs() <= 1e-8,
        "{:e}",
        fin.balance_rel[WATER]
    );
    assert!(
        rows.iter().any(|r| r.0 > 10.0 && r.2 > -0.2),
        "the lens wets up"
    );
}

/// The issue's other failing case: 100 mm/yr onto the same lens inside gravel (gravelly
/// sand). Runs to the end with its balance (no perching: below the lens's Ks).
#[test]
fn clay_lens_in_gravel_at_100_mm_per_year_runs_to_the_end() {
    let (rec, fin, c, w) = run(&case(GRAVEL, 0.02, 100.0, 1e-9)).expect("runs to the end");
    summary(&rec, &fin, &c, &w);
    assert!(
        fin.balance_rel[WATER].abs() <= 1e-8,
        "{:e}",
        fin.balance_rel[WATER]
    );
}

/// The plain clay curve (no air entry, n = 1.09): Newton fails as the lens saturates
/// (the failure of issue 17; design note saturation-and-roots §2). Pinned, with the
/// message naming the remedy, until the solver handles it.
#[test]
fn clay_lens_without_air_entry_fails_with_the_remedy_named() {
    // A minimum step of 1e-5 yr (5 min) so that the failure comes quickly.
    let text = case(SANDY_LOAM, 0.0, 300.0, 1e-9).replace(
        "[time]\n",
        "[time]\nmin_step_year = 1.0e-5\ninitial_step_year = 1.0e-5\n",
    );
    let Err(err) = run(&text) else {
        panic!("expected the run to fail as the lens saturates");
    };
    let msg = err.to_string();
    assert!(msg.contains("air_entry_m"), "{msg}");
}
