//! Root water uptake:
//! - the water-stress reduction has the four-head shape of Feddes et al. (1978): 0 wetter
//!   than h1, linear to 1 at h2, 1 down to h3, linear to 0 at h4, 0 drier;
//! - the root fractions integrate the stated distributions exactly (uniform, linear, the
//!   asymptotic form Y = 1 − β^d of Jackson et al. 1996 with d in cm);
//! - unstressed plants take up exactly the potential transpiration (rate at every record,
//!   and the cumulative totals);
//! - in a steady state under a fixed root distribution, the water flux through every
//!   face is the infiltration minus the uptake above it (exact: mass conservation);
//! - the water balance with uptake closes to ≤ 1e-10 relative; roots exclude chloride
//!   (root_uptake_fraction = 0): the solute stays, its balance closes to round-off.

mod support;

use deepdry::case::vegetation::root_fractions;
use deepdry::model::RootShape;
use deepdry::solve::linear::SolverKind;
use support::*;

const YEAR: f64 = 365.25 * 86400.0;

fn model_of(text: &str) -> deepdry::model::Model {
    deepdry::case::parse_with_overrides(text, "case.toml", std::path::Path::new("."), &[]).unwrap()
}

#[test]
fn stress_reduction_has_the_four_head_shape() {
    let v = deepdry::model::Vegetation {
        transpiration: deepdry::schedule::Schedule::Constant(1e-9),
        root_fraction: vec![1.0],
        roots: RootShape::Uniform { depth: 1.0 },
        stress_heads: [-0.1, -0.3, -10.0, -110.0],
    };
    // (head, expected α) from the definition (Feddes et al. 1978).
    for (h, a) in [
        (0.5, 0.0),
        (-0.05, 0.0),
        (-0.1, 0.0),
        (-0.2, 0.5),
        (-0.3, 1.0),
        (-5.0, 1.0),
        (-10.0, 1.0),
        (-60.0, 0.5),
        (-110.0, 0.0),
        (-500.0, 0.0),
    ] {
        let (alpha, _) = v.stress(h);
        assert!((alpha - a).abs() < 1e-12, "α({h}) = {alpha}, expected {a}");
    }
    // Slopes on the two ramps.
    assert!((v.stress(-0.2).1 - (-5.0)).abs() < 1e-9);
    assert!((v.stress(-60.0).1 - 0.01).abs() < 1e-12);
}

#[test]
fn root_fractions_integrate_the_distributions() {
    let faces: Vec<f64> = (0..=40).map(|k| 0.1 * k as f64).collect();
    // Uniform to 2 m: 0.05 per 0.1 m cell above 2 m, none below.
    let f = root_fractions(&RootShape::Uniform { depth: 2.0 }, &faces);
    assert!(f[..20].iter().all(|x| (x - 0.05).abs() < 1e-12));
    assert!(f[20..].iter().all(|&x| x == 0.0));
    // Linear to 2 m: density 2(1 − z/D)/D, cumulative 2x − x² (x = z/D), derived.
    let f = root_fractions(&RootShape::Linear { depth: 2.0 }, &faces);
    let above_half_metre: f64 = f[..5].iter().sum();
    assert!((above_half_metre - (2.0 * 0.25 - 0.0625)).abs() < 1e-12);
    // Jackson et al. (1996): fraction above d cm is 1 − β^d; cut at 4 m and renormalised.
    let beta: f64 = 0.97;
    let f = root_fractions(&RootShape::Asymptotic { beta, depth: 4.0 }, &faces);
    let above_30cm: f64 = f[..3].iter().sum();
    let expected = (1.0 - beta.powf(30.0)) / (1.0 - beta.powf(400.0));
    assert!(
        (above_30cm - expected).abs() < 1e-12,
        "{above_30cm} vs {expected}"
    );
    for shape in [
        RootShape::Uniform { depth: 1.05 },
        RootShape::Table {
            depth: vec![0.0, 1.0, 3.0],
            density: vec![2.0, 1.0, 0.0],
        },
    ] {
        let total: f64 = root_fractions(&shape, &faces).iter().sum();
        assert!((total - 1.0).abs() < 1e-12, "{shape:?}: {total}");
    }
}

/// A 5 m column over a water table wetted from above, plants with roots to 1.5 m and
/// stress heads so wide that no root cell is stressed.
fn wet_case(extra: &str) -> String {
    format!(
        r#"
[column]
depth_m = 5.0
[mesh]
cells = 50
[soils.sl]
van_genuchten = {{ theta_r = 0.065, theta_s = 0.41, alpha_per_m = 7.5, n = 1.89 }}
saturated_conductivity_m_per_s = 1.23e-5
thermal_conductivity_W_per_m_K = 1.5
solid_heat_capacity_J_per_m3_K = 1.18e6
[[layers]]
soil = "sl"
top_m = 0.0
bottom_m = 5.0
[physics]
vapor = "equilibrium"
[surface]
temperature_C = 20.0
flux_mm_per_year = 300.0
[bottom]
head_m = 0.0
temperature_C = 20.0
[initial]
state = "steady"
[vegetation]
transpiration_mm_per_year = 200.0
root_depth_m = 1.5
root_distribution = "linear"
stress_heads_m = [-0.001, -0.002, -1000.0, -5000.0]
[time]
end_year = 20.0
[output]
times_year = [1.0, 5.0, 20.0]
{extra}"#
    )
}

#[test]
fn unstressed_uptake_equals_the_potential_and_balances_close() {
    let model = model_of(&wet_case(
        r#"
[[solutes]]
name = "chloride"
free_diffusivity_m2_per_s = 2.03e-9
deposition_g_per_m2_per_year = 0.1
initial_concentration_g_per_m3 = 5.0
"#,
    ));
    let (rec, finish) = deepdry::sim::run_in_memory(&model, SolverKind::BlockThomas).unwrap();
    // Extra series: 9 of the solute, then uptake, its cumulative, potential, cumulative.
    let per = deepdry::solute::SERIES_PER_SOLUTE;
    let potential = 1000.0 * 0.2 / YEAR;
    for (r, v) in rec.series.iter().zip(&rec.extra_series) {
        let (uptake, potential_rate) = (v[per], v[per + 2]);
        assert_eq!(potential_rate, potential, "at {}", r.time_year);
        assert!(
            (uptake - potential).abs() <= 1e-15 * potential,
            "uptake {uptake:e} vs potential {potential:e} at {} yr",
            r.time_year
        );
    }
    let last = rec.extra_series.last().unwrap();
    let (cum, cum_potential) = (last[per + 1], last[per + 3]);
    assert!(
        (cum - cum_potential).abs() <= 1e-12 * cum_potential,
        "cumulative uptake {cum} vs potential {cum_potential} kg/m2"
    );
    assert!(
        (cum_potential - 200.0 * 20.0).abs() < 1e-9,
        "{cum_potential}"
    );
    // Water balance with the sink.
    assert!(
        finish.balance_rel[1] <= 1e-10,
        "water {:e}",
        finish.balance_rel[1]
    );
    // Storage change = surface in − bottom out − uptake, from the cumulative series.
    let (a, b) = (&rec.series[0], rec.series.last().unwrap());
    let change = b.water_storage - a.water_storage;
    let net = b.surface_water_cumulative - b.bottom_water_cumulative - cum;
    assert!(
        (change - net - b.water_balance_error).abs() <= 1e-9 * cum,
        "change {change} net {net} error {}",
        b.water_balance_error
    );
    // Chloride is excluded by the roots: nothing taken up, balance at round-off.
    assert_eq!(last[8], 0.0);
    assert!(last[4] <= 1e-12, "solute balance {:e}", last[4]);
}

#[test]
fn steady_flux_is_infiltration_minus_uptake_above() {
    let model = model_of(&wet_case(""));
    let (rec, _) = deepdry::sim::run_in_memory(&model, SolverKind::BlockThomas).unwrap();
    // The start is the steady state under these conditions (plants included).
    let p = &rec.snapshots[0].profile;
    let faces = &model.mesh.faces;
    let shape = RootShape::Linear { depth: 1.5 };
    let fractions = root_fractions(&shape, faces);
    let q_in = 1000.0 * 0.3 / YEAR;
    let tp = 1000.0 * 0.2 / YEAR;
    let mut above = 0.0;
    let mut worst: f64 = 0.0;
    for j in 0..faces.len() {
        if j > 0 {
            above += fractions[j - 1];
        }
        let flux = p.liquid_iso[j] + p.liquid_th[j] + p.vapor_iso[j] + p.vapor_th[j];
        let expected = q_in - tp * above;
        worst = worst.max((flux - expected).abs() / q_in);
    }
    // The steady solve stops at 1e-9 relative changes; Newton's tolerance is 1e-9 of
    // each row's terms.
    assert!(worst < 1e-6, "flux off by {worst:e} of the infiltration");
}

#[test]
fn bad_vegetation_tables_are_refused_in_one_line() {
    let dir = Scratch::new("vegetation-bad");
    let base = wet_case("");
    let cases: &[(&str, &str, &[&str])] = &[
        (
            "root_depth_m = 1.5",
            "root_depth_m = 9.0",
            &["root_depth_m", "inside the column"],
        ),
        (
            "stress_heads_m = [-0.001, -0.002, -1000.0, -5000.0]",
            "stress_heads_m = [-0.001, -0.002, -5000.0, -1000.0]",
            &["stress_heads_m", "h1 > h2 > h3 > h4"],
        ),
        (
            "root_distribution = \"linear\"",
            "root_distribution = \"cubic\"",
            &["root_distribution", "uniform"],
        ),
        (
            "transpiration_mm_per_year = 200.0",
            "transpiration_mm_per_year = -5.0",
            &["transpiration_mm_per_year", "[0, 100000]"],
        ),
        (
            "root_distribution = \"linear\"",
            "root_distribution = \"linear\"\nroot_beta = 0.9",
            &["root_beta", "asymptotic"],
        ),
    ];
    for (i, (from, to, fragments)) in cases.iter().enumerate() {
        assert!(base.contains(from), "{from}");
        let case = dir.write(&format!("bad{i}.toml"), &base.replace(from, to));
        let o = deepdry(&["check", arg(&case)]);
        assert_one_line_error(&o, 2, fragments);
    }
}

/// `plot` draws the uptake profiles and actual against potential transpiration; the
/// results file carries the vegetation datasets with units.
#[test]
fn plot_draws_uptake_and_transpiration() {
    let dir = Scratch::new("vegetation-plot");
    let case = dir.write("case.toml", &wet_case(""));
    let out = dir.join("out");
    run_ok(&case, &out, &[]);
    let results = out.join("results.h5");
    let sets = datasets(&results).unwrap();
    for name in [
        "profiles/root_water_uptake",
        "series/root_water_uptake",
        "series/root_water_uptake_cumulative",
        "series/potential_transpiration",
        "series/potential_transpiration_cumulative",
    ] {
        assert!(sets.contains_key(name), "no {name}");
    }
    // The file's uptake profiles (computed from the system row by row as they are
    // written) are bitwise those an in-memory run gathers into its snapshots.
    let model = deepdry::case::load(&case).unwrap();
    let (rec, _) = deepdry::sim::run_in_memory(&model, SolverKind::BlockThomas).unwrap();
    let gathered: Vec<u64> = rec
        .snapshots
        .iter()
        .flat_map(|s| s.profile.root_water_uptake.iter().map(|x| x.to_bits()))
        .collect();
    let stored: Vec<u64> = sets["profiles/root_water_uptake"]
        .floats()
        .iter()
        .map(|x| x.to_bits())
        .collect();
    assert!(
        gathered.iter().any(|&b| f64::from_bits(b) != 0.0),
        "no uptake"
    );
    assert_eq!(stored, gathered, "profiles/root_water_uptake");
    let figs = dir.join("figs");
    let o = deepdry(&["plot", arg(&results), "--out", arg(&figs)]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    for f in [
        "profiles-root-water-uptake.svg",
        "series-transpiration.svg",
        "series-transpiration-cumulative.svg",
    ] {
        let text = std::fs::read_to_string(figs.join(f)).unwrap_or_default();
        assert!(text.contains("<svg"), "{f} missing or empty");
    }
}
