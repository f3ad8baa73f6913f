//! The ponding surface store (`pond = true`): a run's series add up (conservation, common
//! practice), a pond left from a flood stays in the balance across a change of surface
//! period, resume continues it bitwise, the figure is drawn, and bad keys are refused in
//! one line.

mod support;

use support::*;

/// A 3 m sandy loam column (Carsel & Parrish 1988, from memory, with the Vogel et al.
/// 2001 air entry) under one 2-day flood of 2 m/day with a 0.1 m ponding limit.
fn case(extra_surface: &str, end_year: f64) -> String {
    format!(
        r#"title = "ponding test"
[column]
depth_m = 3.0
[mesh]
cells = 59
growth = 1.05
surface_cell_m = 0.01
bottom_cell_m = 0.1
[soils.sandy_loam]
van_genuchten = {{ theta_r = 0.065, theta_s = 0.41, alpha_per_m = 7.5, n = 1.89, air_entry_m = 0.02 }}
saturated_conductivity_m_per_s = 1.23e-5
campbell = {{ a = 1.46, b = 1.652, c = 9.222, d = 0.274 }}
solid_heat_capacity_J_per_m3_K = 1.18e6
[[layers]]
soil = "sandy_loam"
top_m = 0.0
bottom_m = 3.0
[[surface]]
temperature_C = 22.0
pond = true
flux_mm_per_year = {{ steps = [[0.0, 0.0], [0.0027379, 730000.0], [0.0082136, 0.0]] }}
max_ponding_depth_m = 0.1
{extra_surface}
[bottom]
head_m = 0.0
temperature_C = 22.0
[time]
end_year = {end_year}
[output]
every_year = 0.001
[checkpoint]
every_year = 0.004
"#
    )
}

#[test]
fn a_flood_ponds_runs_off_and_the_series_add_up() {
    let dir = Scratch::new("ponding");
    // The second period (dry air, no ponding) starts while the pond still stands
    // (the flood ends at day 3.0, the pond empties about 0.8 day later).
    let text = case(
        "[[surface]]\nfrom_year = 0.0083\ntemperature_C = 22.0\nrelative_humidity = 0.3\nresistance_s_per_m = 100.0\n",
        0.03,
    );
    let path = dir.write("case.toml", &text);
    let out = dir.join("out");
    run_ok(&path, &out, &[]);
    let d = datasets(&out.join("results.h5")).unwrap();
    let pond = d["series/ponding_depth"].floats();
    let stored = d["series/pond_water_storage"].floats();
    let runoff = d["series/runoff_cumulative"].floats();
    let top = d["series/surface_water_cumulative"].floats();
    let bottom = d["series/bottom_water_cumulative"].floats();
    let storage = d["series/water_storage"].floats();
    let t = d["series/time"].floats();
    let last = t.len() - 1;
    // The pond reached its limit (it floods at about twice Ks) and ran off.
    let peak = pond.iter().cloned().fold(0.0, f64::max);
    assert!((0.1..0.101).contains(&peak), "peak pond {peak}");
    assert!(runoff[last] > 100.0, "runoff {}", runoff[last]);
    // Pond storage is ρw P.
    for (p, s) in pond.iter().zip(&stored) {
        assert!((s - 1000.0 * p).abs() <= 1e-9 * s.abs().max(1e-9));
    }
    // The pond stood when the period changed, then drained: empty at the end.
    let k = t.iter().position(|&x| x >= 0.0083).unwrap();
    assert!(pond[k] > 0.0, "no pond at the change of period");
    assert_eq!(pond[last], 0.0);
    // Storage change = surface inflow − bottom outflow − runoff (conservation), to the
    // run's balance (Newton tolerance 1e-9: about 1e-9 of the water moved).
    let change = storage[last] - storage[0];
    let err = (change - (top[last] - bottom[last] - runoff[last])).abs() / top[last];
    assert!(err < 1e-8, "balance {err:.2e}");
    // The applied water at the change of period (no vapour exchange before it): 2 days
    // of 2 m/day, exactly (forcing at the left limit of the jumps).
    let applied = 730.0 * (0.0082136 - 0.0027379) * 1000.0;
    assert!(
        (t[k] - 0.0083).abs() < 1e-12,
        "record at the change: {}",
        t[k]
    );
    assert!(
        (top[k] - applied).abs() <= 1e-9 * applied,
        "{} vs {applied}",
        top[k]
    );
    // Afterwards the surface only loses vapour to the dry air.
    assert!(top[last] < top[k]);
    // The figure of the surface store: a panel each for pond and runoff, on a linear time
    // axis even where the other series take a log axis.
    let o = deepdry(&["plot", arg(&out.join("results.h5")), "--log-time"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let svg = std::fs::read_to_string(out.join("series-ponding.svg")).unwrap();
    for text in [
        "water standing on the surface",
        "cumulative runoff [m of water]",
        "time [yr]",
    ] {
        assert!(svg.contains(text), "{text}");
    }
    assert!(!svg.contains("log scale"));
    let other = std::fs::read_to_string(out.join("series-water-fluxes.svg")).unwrap();
    assert!(other.contains("log scale"));
}

#[test]
fn a_ponded_run_resumes_bitwise() {
    let dir = Scratch::new("ponding-resume");
    let path = dir.write("case.toml", &case("", 0.012));
    let full = dir.join("full");
    run_ok(&path, &full, &[]);
    let part = dir.join("part");
    run_ok(&path, &part, &[]);
    // Resume from the checkpoint inside the flood (year 0.004: the pond stands).
    let ck = checkpoint_at(&part, 0.004);
    let c = read_checkpoint(&ck).unwrap();
    assert_eq!(c.state.runoff.len(), 2);
    assert!(c.state.runoff[1] > 0.0, "runoff at the checkpoint");
    let o = deepdry(&[
        "run",
        arg(&path),
        "--out",
        arg(&part),
        "--resume",
        arg(&ck),
        "--quiet",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let a = datasets(&full.join("results.h5")).unwrap();
    let b = datasets(&part.join("results.h5")).unwrap();
    for name in [
        "series/ponding_depth",
        "series/runoff_cumulative",
        "series/water_storage",
    ] {
        assert_eq!(a[name].floats(), b[name].floats(), "{name}");
    }
}

#[test]
fn bad_ponding_keys_are_refused_in_one_line() {
    let dir = Scratch::new("ponding-bad");
    let base = case("", 0.01);
    for (from, to, fragments) in [
        (
            "[0.0027379, 730000.0]",
            "[0.0027379, -5.0]",
            vec!["flux_mm_per_year", "≥ 0"],
        ),
        (
            "max_ponding_depth_m = 0.1",
            "max_ponding_depth_m = -1.0",
            vec!["max_ponding_depth_m", "[0, 100] m"],
        ),
        (
            "pond = true",
            "pond = true\nhead_m = 0.0",
            vec!["head_m", "without `pond = true`"],
        ),
        (
            "pond = true",
            "pond = false\nrelative_humidity = 0.3",
            vec!["max_ponding_depth_m", "pond = true"],
        ),
        (
            "max_ponding_depth_m = 0.1",
            "max_ponding_depth_m = 0.1\nrelative_humidity = 0.3",
            vec!["resistance_s_per_m", "evaporates"],
        ),
        (
            "[bottom]",
            "[[surface]]\nfrom_year = 0.005\ntemperature_C = 22.0\nrelative_humidity = 0.3\n[bottom]",
            vec!["surface", "resistance_s_per_m", "ponding"],
        ),
    ] {
        let text = base.replace(from, to);
        assert_ne!(text, base, "{from}");
        let path = dir.write("bad.toml", &text);
        let o = deepdry(&["check", arg(&path)]);
        assert_one_line_error(&o, 2, &fragments);
    }
}

/// Standing water open to the air evaporates through the boundary-layer resistance alone:
/// E = (ρv0 − RH·ρvs(Ts))/ra (the bulk transfer law of evaporation from a wet surface,
/// common practice). A saturated 1 m column whose water table holds a 5 cm pond, at
/// 300 K throughout, under air of relative humidity 0.3 through ra = 1e4 s/m (so that
/// the latent heat cools the pond by ~0.01 K only). Reference: ρvs = ps/(Rv T) with
/// ps(300 K) = 3.53658941e-3 MPa (IAPWS-IF97, Table 35, a verification value of the
/// saturation-pressure equation; from memory) and Rv = 461.51805 J kg⁻¹ K⁻¹ (IAPWS-95's
/// specific gas constant; from memory);
/// E = 0.7 ρvs / ra = 1.788e-6 kg m⁻² s⁻¹ (0.155 mm/day).
#[test]
fn a_standing_pond_evaporates_through_the_air_resistance() {
    let dir = Scratch::new("ponding-evaporation");
    let text = r#"title = "pond evaporation"
[column]
depth_m = 1.0
[mesh]
cells = 28
growth = 1.1
surface_cell_m = 0.01
bottom_cell_m = 0.05
[soils.sandy_loam]
van_genuchten = { theta_r = 0.065, theta_s = 0.41, alpha_per_m = 7.5, n = 1.89, air_entry_m = 0.02 }
saturated_conductivity_m_per_s = 1.23e-5
campbell = { a = 1.46, b = 1.652, c = 9.222, d = 0.274 }
solid_heat_capacity_J_per_m3_K = 1.18e6
[[layers]]
soil = "sandy_loam"
top_m = 0.0
bottom_m = 1.0
[surface]
temperature_C = 26.85
pond = true
flux_mm_per_year = 0.0
relative_humidity = 0.3
resistance_s_per_m = 1.0e4
[bottom]
head_m = 1.05
temperature_C = 26.85
[time]
end_year = 0.03
[output]
every_year = 0.005
"#;
    let path = dir.write("case.toml", text);
    let out = dir.join("out");
    run_ok(&path, &out, &[]);
    let d = datasets(&out.join("results.h5")).unwrap();
    let t = d["series/time"].floats();
    let top = d["series/surface_water_cumulative"].floats();
    let pond = d["series/ponding_depth"].floats();
    let last = t.len() - 1;
    // The pond stands throughout (the water table holds it).
    assert!(
        pond.iter().all(|&p| (0.045..0.055).contains(&p)),
        "{pond:?}"
    );
    // The rate over the second half of the run [kg m⁻² s⁻¹] (surface inflow is positive
    // downward: evaporation makes it fall).
    let k = t.iter().position(|&x| x >= 0.015).unwrap();
    let year = 365.25 * 86400.0;
    let rate = -(top[last] - top[k]) / ((t[last] - t[k]) * year);
    let rho_vs = 3.536_589_41e3 / (461.518_05 * 300.0);
    let expected = 0.7 * rho_vs / 1.0e4;
    eprintln!("evaporation {rate:.6e} vs {expected:.6e} kg m-2 s-1");
    assert!(
        (rate - expected).abs() <= 3e-3 * expected,
        "evaporation {rate:.5e} vs {expected:.5e} kg m-2 s-1"
    );
}
