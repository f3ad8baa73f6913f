//! `[time] memory = "lean"` keeps no evaluations with derivatives: it solves the same
//! equations, with every evaluation direct instead of linearised near a kept one, so at
//! the same BDF orders it gives the results of the default mode to Newton's tolerance,
//! and by default it integrates with orders up to 2.

mod support;

use deepdry::model::Method;
use deepdry::output::diagnostics::Profile;
use deepdry::solve::linear::SolverKind;
use std::path::Path;
use support::Small;

fn model(extra_time: &str) -> deepdry::model::Model {
    let text = Small {
        cells: 60,
        depth: 20.0,
        end_year: 6.0,
        method: "bdf",
        extra_time: extra_time.into(),
        ..Small::default()
    }
    .text();
    deepdry::case::parse(&text, "small.toml", Path::new(".")).unwrap()
}

/// Largest difference of the cell profiles (temperature, head, liquid content, vapour
/// density) relative to each profile's largest magnitude.
fn profile_difference(a: &Profile, b: &Profile) -> f64 {
    let pairs = [
        (&a.temperature_c, &b.temperature_c),
        (&a.head, &b.head),
        (&a.liquid_content, &b.liquid_content),
        (&a.vapor_density, &b.vapor_density),
    ];
    let mut worst = 0.0f64;
    for (x, y) in pairs {
        assert_eq!(x.len(), y.len());
        let size = x.iter().fold(0.0f64, |s, v| s.max(v.abs()));
        for (p, q) in x.iter().zip(y) {
            worst = worst.max((p - q).abs() / size);
        }
    }
    worst
}

#[test]
fn lean_memory_gives_the_default_modes_results_to_newtons_tolerance() {
    // `Small` with BDF gives max_order = 3 explicitly: both runs use orders 1–3.
    let fast = model("");
    let lean = model("memory = \"lean\"\n");
    assert!(!fast.time.lean_memory && lean.time.lean_memory);
    let (ra, fa) = deepdry::sim::run_in_memory(&fast, SolverKind::BlockThomas).unwrap();
    let (rb, fb) = deepdry::sim::run_in_memory(&lean, SolverKind::BlockThomas).unwrap();
    assert!(ra.snapshots.len() >= 3, "{} snapshots", ra.snapshots.len());
    assert_eq!(ra.snapshots.len(), rb.snapshots.len());
    let mut worst = 0.0f64;
    for (a, b) in ra.snapshots.iter().zip(&rb.snapshots) {
        assert_eq!(a.time_year, b.time_year);
        worst = worst.max(profile_difference(&a.profile, &b.profile));
    }
    // Linearised evaluations differ from direct ones by ~1e-12 of their terms (see
    // `System::evaluate`); Newton stops within 1e-9 of them (measured here: 2.8e-14,
    // the same 81 steps and 253 Newton iterations). A step sequence that changed at an
    // accept/reject decision would move the profiles by up to the local error (rtol
    // 1e-3) instead.
    assert!(worst <= 1e-9, "profiles differ by {worst:e}");
    let (sa, sb) = (fa.counters.steps as f64, fb.counters.steps as f64);
    assert!(
        (sa - sb).abs() <= 0.05 * sa,
        "steps {sa} (default) vs {sb} (lean)"
    );
    // Both close their balances.
    for f in [&fa, &fb] {
        assert!(
            f.balance_rel[1] <= 1e-6,
            "water balance {:e}",
            f.balance_rel[1]
        );
    }
}

#[test]
fn lean_memory_integrates_with_orders_up_to_two_unless_told() {
    let text = |time: &str| {
        format!(
            "[column]\ndepth_m = 10.0\n[mesh]\ncells = 10\n[soils.s]\nvan_genuchten = {{ theta_r = 0.065, theta_s = 0.41, alpha_per_m = 7.5, n = 1.89 }}\nsaturated_conductivity_m_per_s = 1.23e-5\ncampbell = {{ a = 1.46, b = 1.652, c = 9.222, d = 0.274 }}\nsolid_heat_capacity_J_per_m3_K = 1.18e6\n[[layers]]\nsoil = \"s\"\ntop_m = 0.0\nbottom_m = 10.0\n[surface]\ntemperature_C = 20.0\nrelative_humidity = 0.3\n[bottom]\nhead_m = 0.0\ntemperature_C = 21.0\n[time]\nend_year = 1.0\n{time}\n"
        )
    };
    let order = |time: &str| {
        let m = deepdry::case::parse(&text(time), "c.toml", Path::new(".")).unwrap();
        match m.time.method {
            Method::Bdf { max_order } => (max_order, m.time.lean_memory),
            Method::BackwardEuler => panic!("BDF expected"),
        }
    };
    assert_eq!(order(""), (5, false));
    assert_eq!(order("memory = \"fast\""), (5, false));
    assert_eq!(order("memory = \"lean\""), (2, true));
    assert_eq!(order("memory = \"lean\"\nmax_order = 4"), (4, true));
    // A value outside the choices is refused, naming the key and the choices.
    let err = deepdry::case::parse(&text("memory = \"small\""), "c.toml", Path::new("."))
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("memory") && err.contains("\"fast\"") && err.contains("\"lean\""),
        "{err}"
    );
}
