//! Valid case files parse to the expected model values, in SI units.

use deepdry::model::*;
use deepdry::props::conductivity::FaceAveraging;
use deepdry::props::constants::SECONDS_PER_YEAR as YR;
use deepdry::props::retention::{DryEnd, RetentionLaw};
use deepdry::props::thermal::ThermalConductivity;
use deepdry::props::vapor::Enhancement;
use deepdry::schedule::Schedule;
use std::path::Path;

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * b.abs().max(1e-300)
}

const BASE: &str = r#"
title = "base"
[column]
depth_m = 30.0
[mesh]
cells = 60
[soils.sand]
van_genuchten = { theta_r = 0.05, theta_s = 0.4, alpha_per_m = 5.0, n = 2.0 }
saturated_conductivity_m_per_s = 1.0e-5
thermal_conductivity_W_per_m_K = 1.5
solid_heat_capacity_J_per_m3_K = 1.2e6
[[layers]]
soil = "sand"
top_m = 0.0
bottom_m = 30.0
[surface]
temperature_C = 18.0
relative_humidity = 0.2
[bottom]
head_m = 0.0
temperature_C = 20.0
[time]
end_year = 100.0
"#;

/// The base case with some lines replaced (each `from` must occur).
fn case(subs: &[(&str, &str)]) -> Model {
    let mut text = BASE.to_string();
    for (from, to) in subs {
        assert!(text.contains(from), "{from}");
        text = text.replacen(from, to, 1);
    }
    deepdry::case::parse(&text, "test.toml", &root().join("tests/case_data"))
        .unwrap_or_else(|e| panic!("{e}\n{text}"))
}

#[test]
fn benchmark_case_encodes_the_specification() {
    let m = deepdry::case::load(&root().join("cases/benchmark-300m.toml")).unwrap();
    // Mesh: 600 cells, 0.01 m at the surface, 0.05 m at the bottom, growth 1.05.
    let w = &m.mesh.widths;
    assert_eq!(m.mesh.n_cells(), 600);
    assert!(close(w[0], 0.01, 1e-12), "{}", w[0]);
    assert!(close(w[599], 0.05, 1e-9), "{}", w[599]);
    for k in 0..10 {
        assert!(close(w[k + 1] / w[k], 1.05, 1e-9));
        assert!(close(w[598 - k] / w[599 - k], 1.05, 1e-9));
    }
    assert!(close(w.iter().sum::<f64>(), 300.0, 1e-12));
    assert_eq!(m.mesh.faces[0], 0.0);
    assert_eq!(m.mesh.depth(), 300.0);
    // Uniform in between: the largest cells are all the same size.
    let (_, largest) = m.mesh.width_range();
    let uniform = w.iter().filter(|&&x| close(x, largest, 1e-9)).count();
    assert!(uniform > 400, "{uniform} uniform cells");

    // Soil.
    assert_eq!(m.soils.len(), 1);
    let s = &m.soils[0];
    assert_eq!(
        s.retention.law,
        RetentionLaw::VanGenuchten {
            theta_r: 0.065,
            theta_s: 0.41,
            alpha: 7.5,
            n: 1.89,
            l: 0.5,
            air_entry: 0.0,
        }
    );
    assert_eq!(s.retention.dry_end, None);
    assert_eq!(s.saturated_conductivity, 1.23e-5);
    assert_eq!(
        s.thermal,
        ThermalConductivity::Campbell {
            a: 1.460,
            b: 1.652,
            c: 9.222,
            d: 0.274,
            e: 4.0
        }
    );
    assert!(close(s.solid_heat_capacity, (1.0 - 0.41) * 2.0e6, 1e-12));
    assert_eq!(s.enhancement, Enhancement::None);
    assert_eq!(m.cell_soil, vec![0; 600]);
    assert_eq!(m.layers.len(), 1);
    assert_eq!((m.layers[0].top, m.layers[0].bottom), (0.0, 300.0));

    // Physics.
    let p = &m.physics;
    assert_eq!(p.vapor_mode, VaporMode::Equilibrium);
    assert_eq!(p.diffusivity.d0, 2.12e-5);
    assert_eq!(p.diffusivity.t0, 273.15);
    assert_eq!(p.diffusivity.exponent, 1.88);
    assert_eq!(p.diffusivity.p0, 101_325.0);
    assert_eq!(p.air_pressure, 101_325.0);
    assert!(!p.viscosity_correction);
    assert_eq!(p.thermal_liquid_gain, None);
    assert_eq!(p.face_conductivity, FaceAveraging::Arithmetic);

    // Boundaries: 18 °C, RH 0.2 fixed; head 0, 25 °C.
    assert_eq!(m.surface.periods.len(), 1);
    let sbc = m.surface.at(0.0);
    match &sbc.heat {
        SurfaceHeat::Temperature(Schedule::Constant(t)) => assert!(close(*t, 291.15, 1e-12)),
        other => panic!("{other:?}"),
    }
    match &sbc.water {
        SurfaceWater::Atmosphere {
            relative_humidity: Schedule::Constant(rh),
            resistance: None,
        } => assert_eq!(*rh, 0.2),
        other => panic!("{other:?}"),
    }
    let bbc = m.bottom.at(0.0);
    assert!(matches!(
        bbc.water,
        BottomWater::WaterTable(Schedule::Constant(h)) if h == 0.0
    ));
    match &bbc.heat {
        BottomHeat::Temperature(Schedule::Constant(t)) => assert!(close(*t, 298.15, 1e-12)),
        other => panic!("{other:?}"),
    }

    // Initial: hydrostatic, linear 18 → 25 °C.
    match m.initial {
        InitialState::Hydrostatic {
            surface_temperature,
            gradient,
        } => {
            assert!(close(surface_temperature, 291.15, 1e-12));
            assert!(close(gradient, 7.0 / 300.0, 1e-9));
        }
        ref other => panic!("{other:?}"),
    }

    // Time: 0 to 1 Myr; output log-spaced, 5 per decade from year 1, end included.
    assert_eq!(m.time.start, 0.0);
    assert_eq!(m.time.end, 1.0e6 * YR);
    // Default integrator: error-controlled variable-order BDF up to order 5.
    assert_eq!(m.time.method, Method::Bdf { max_order: 5 });
    let snaps = &m.output.snapshot_times;
    assert_eq!(snaps.len(), 31);
    assert!(close(snaps[0], YR, 1e-12));
    assert!(close(snaps[5], 10.0 * YR, 1e-12));
    assert!(close(snaps[1], 10f64.powf(0.2) * YR, 1e-12));
    assert_eq!(*snaps.last().unwrap(), m.time.end);
    assert!(snaps.windows(2).all(|w| w[1] > w[0]));
    assert_eq!(
        m.output.folder,
        root().join("cases").join("out").join("benchmark-300m")
    );
    assert!(m.case_text.contains("Benchmark: 300 m"));
}

#[test]
fn example_cases_load() {
    for name in ["quickstart", "benchmark-300m", "climate-shift"] {
        let path = root().join("cases").join(format!("{name}.toml"));
        let m = deepdry::case::load(&path).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert!(!deepdry::case::summary(&m).is_empty());
    }
}

#[test]
fn quickstart_is_small() {
    let m = deepdry::case::load(&root().join("cases/quickstart.toml")).unwrap();
    assert_eq!(m.mesh.depth(), 20.0);
    assert_eq!(m.time.end, 1000.0 * YR);
    assert!(matches!(
        m.soils[0].retention.dry_end,
        Some(DryEnd::FayerSimmons { oven_dry_head }) if oven_dry_head == -1.0e5
    ));
}

#[test]
fn unit_conversions() {
    // mm/yr → m/s, years → s, °C → K, cm/day → m/s.
    let m = case(&[
        (
            "relative_humidity = 0.2",
            "flux_mm_per_year = { steps = [[0.0, 10.0], [50.0, 2.0]] }\nponding_head_m = 0.1",
        ),
        (
            "saturated_conductivity_m_per_s = 1.0e-5",
            "saturated_conductivity_cm_per_day = 86.4",
        ),
        ("temperature_C = 20.0", "temperature_C = 25.5"),
        ("end_year = 100.0", "start_year = -10.0\nend_year = 100.0"),
    ]);
    match &m.surface.at(0.0).water {
        SurfaceWater::Flux { flux, ponding_head } => {
            assert_eq!(*ponding_head, 0.1);
            let Schedule::Steps { times, values } = flux else {
                panic!("{flux:?}")
            };
            assert_eq!(times, &vec![0.0, 50.0 * YR]);
            assert!(close(values[0], 10.0e-3 / YR, 1e-12));
            assert!(close(values[1], 2.0e-3 / YR, 1e-12));
            // 10 mm/yr = 3.1688e-10 m/s.
            assert!(close(flux.value(1.0), 3.168_808_781e-10, 1e-9));
        }
        other => panic!("{other:?}"),
    }
    assert!(close(m.soils[0].saturated_conductivity, 1.0e-5, 1e-12));
    match &m.bottom.at(0.0).heat {
        BottomHeat::Temperature(s) => assert!(close(s.value(0.0), 298.65, 1e-12)),
        other => panic!("{other:?}"),
    }
    assert_eq!(m.time.start, -10.0 * YR);
    assert_eq!(YR, 365.25 * 86_400.0);
    // Defaults (BDF): max step the whole span end − start, first step 1e-6 yr, smallest
    // 1e-9 yr.
    assert!(close(m.time.dt_max, 110.0 * YR, 1e-12));
    assert!(close(m.time.dt_initial, 1e-6 * YR, 1e-12));
    assert!(close(m.time.dt_min, 1e-9 * YR, 1e-12));
    // Default output: only the end time, in out/<stem> next to the case.
    assert_eq!(m.output.snapshot_times, vec![100.0 * YR]);
    assert_eq!(
        m.output.folder,
        root().join("tests/case_data").join("out").join("test")
    );
    // Defaults of physics and soil.
    assert!(m.physics.viscosity_correction);
    assert!(close(m.physics.reference_temperature, 293.15, 1e-12));
    assert_eq!(m.checkpoint.keep, 3);
    assert_eq!(m.checkpoint.every, None);
}

#[test]
fn temperature_sum_adds_the_kelvin_offset_once() {
    let m = case(&[(
        "temperature_C = 18.0\n",
        "temperature_C = { sum = [15.0, { mean = 1.0, amplitude = 2.0, period_year = 1.0 }, { from_year = 0.0, to_year = 10.0, start = 0.0, end = 3.0 }] }\n",
    )]);
    let SurfaceHeat::Temperature(s) = &m.surface.at(0.0).heat else {
        panic!()
    };
    // At t = 0: 15 + 1 + 0 °C = 16 °C = 289.15 K.
    assert!(close(s.value(0.0), 289.15, 1e-12), "{}", s.value(0.0));
    // A quarter period later the sinusoid is at its peak (+2), the ramp at 0.075.
    let t = 0.25 * YR;
    assert!(close(s.value(t), 273.15 + 15.0 + 1.0 + 2.0 + 0.075, 1e-12));
    // The ramp is a two-point table; its knots are breakpoints.
    assert_eq!(s.breakpoints(), vec![0.0, 10.0 * YR]);
}

#[test]
fn schedule_from_csv() {
    let m = case(&[(
        "temperature_C = 18.0\n",
        "temperature_C = { table_csv = \"surface-temperature.csv\" }\n",
    )]);
    let SurfaceHeat::Temperature(s) = &m.surface.at(0.0).heat else {
        panic!()
    };
    assert_eq!(
        *s,
        Schedule::Table {
            times: vec![0.0, 100.0 * YR, 1000.0 * YR],
            values: vec![288.15, 289.65, 291.15]
        }
    );
    assert!(close(s.value(550.0 * YR), 273.15 + 17.25, 1e-12));
}

#[test]
fn periods_change_kind() {
    let m = case(&[(
        "[surface]\ntemperature_C = 18.0\nrelative_humidity = 0.2\n",
        "[[surface]]\ntemperature_C = 15.0\nhead_m = -10.0\n\n[[surface]]\nfrom_year = 20.0\ntemperature_C = 18.0\nrelative_humidity = 0.2\nresistance_s_per_m = 100.0\n",
    )]);
    let p = &m.surface.periods;
    assert_eq!(p.len(), 2);
    assert_eq!(p[0].0, f64::NEG_INFINITY);
    assert_eq!(p[1].0, 20.0 * YR);
    assert!(
        matches!(m.surface.at(0.0).water, SurfaceWater::Head(Schedule::Constant(h)) if h == -10.0)
    );
    assert!(matches!(
        m.surface.at(30.0 * YR).water,
        SurfaceWater::Atmosphere { resistance: Some(Schedule::Constant(r)), .. } if r == 100.0
    ));
    assert_eq!(
        m.surface.switch_times().collect::<Vec<_>>(),
        vec![20.0 * YR]
    );
}

#[test]
fn steady_initial_state_with_spin_up_climate() {
    let m = case(&[(
        "[time]",
        "[initial]\nstate = \"steady\"\nsurface = { temperature_C = 15.0, head_m = -10.0 }\n\n[time]",
    )]);
    match &m.initial {
        InitialState::Steady {
            surface,
            bottom,
            surface_temperature,
            gradient,
        } => {
            assert!(
                matches!(surface.water, SurfaceWater::Head(Schedule::Constant(h)) if h == -10.0)
            );
            // The bottom defaults to the run's bottom condition at the start.
            assert!(matches!(bottom.water, BottomWater::WaterTable(_)));
            assert!(close(*surface_temperature, 288.15, 1e-12));
            assert!(close(*gradient, 5.0 / 30.0, 1e-9));
        }
        other => panic!("{other:?}"),
    }
}

#[test]
fn profile_initial_state() {
    let m = case(&[(
        "[time]",
        "[initial]\nstate = \"profile\"\ncsv = \"profile-head.csv\"\n\n[time]",
    )]);
    match &m.initial {
        InitialState::Profile {
            depth,
            temperature,
            moisture: ProfileMoisture::Head(h),
        } => {
            assert_eq!(depth, &vec![0.0, 15.0, 30.0]);
            assert!(close(temperature[1], 292.15, 1e-12));
            assert_eq!(h, &vec![-50.0, -15.0, 0.0]);
        }
        other => panic!("{other:?}"),
    }
    let m = case(&[(
        "[time]",
        "[initial]\nstate = \"profile\"\ncsv = \"profile-theta.csv\"\n\n[time]",
    )]);
    assert!(matches!(
        m.initial,
        InitialState::Profile {
            moisture: ProfileMoisture::LiquidContent(_),
            ..
        }
    ));
}

#[test]
fn physics_checkpoint_output_and_time_options_are_read_into_the_model() {
    let m = case(&[
        (
            "[time]",
            "[physics]\nvapor = \"kinetic\"\nkinetic_rate_per_s = 0.5\ndiffusivity = \"massman-1998\"\nthermal_liquid_gain = 7.0\nreference_temperature_C = 25.0\nface_averaging = \"upstream\"\n\n[checkpoint]\nevery_year = 10.0\nevery_minutes = 30.0\nkeep = 5\n\n[output]\nfolder = \"results/run1\"\ntimes_year = [5.0, 50.0]\nevery_year = 25.0\nseries_every = 10\n\n[time]",
        ),
        (
            "end_year = 100.0",
            "end_year = 100.0\nmethod = \"bdf\"\nmax_order = 3\nrtol = 1e-5\nmax_newton_iterations = 8\nnewton_tolerance = 1e-10",
        ),
        ("thermal_conductivity_W_per_m_K = 1.5", "johansen = { dry_W_per_m_K = 0.3, saturated_W_per_m_K = 2.0, texture = \"fine\" }"),
        ("solid_heat_capacity_J_per_m3_K = 1.2e6", "particle_density_kg_per_m3 = 2650.0\nsolid_specific_heat_J_per_kg_K = 800.0\nenhancement = { cass_clay_fraction = 0.1 }\ndry_end = \"fayer-simmons\"\noven_dry_head_m = -5.0e4"),
        ("temperature_C = 20.0", "geothermal_flux_W_per_m2 = 0.065"),
        ("[time]", "[initial]\ngradient_K_per_m = 0.03\n\n[time]"),
    ]);
    assert_eq!(m.physics.vapor_mode, VaporMode::Kinetic { rate: 0.5 });
    assert_eq!(m.physics.diffusivity.exponent, 1.81);
    assert_eq!(m.physics.thermal_liquid_gain, Some(7.0));
    assert!(close(m.physics.reference_temperature, 298.15, 1e-12));
    assert_eq!(m.physics.face_conductivity, FaceAveraging::Upstream);
    assert_eq!(m.checkpoint.every, Some(10.0 * YR));
    assert_eq!(m.checkpoint.wall_every, Some(1800.0));
    assert_eq!(m.checkpoint.keep, 5);
    assert_eq!(m.output.folder, root().join("tests/case_data/results/run1"));
    let years: Vec<f64> = m.output.snapshot_times.iter().map(|t| t / YR).collect();
    assert_eq!(years.len(), 5);
    for (a, b) in years.iter().zip([5.0, 25.0, 50.0, 75.0, 100.0]) {
        assert!(close(*a, b, 1e-12), "{years:?}");
    }
    assert_eq!(m.output.series_every, 10);
    assert_eq!(m.time.method, Method::Bdf { max_order: 3 });
    assert_eq!(m.time.rtol, 1e-5);
    assert_eq!(m.time.max_newton, 8);
    assert_eq!(m.time.newton_tolerance, 1e-10);
    let s = &m.soils[0];
    assert_eq!(
        s.thermal,
        ThermalConductivity::Johansen {
            dry: 0.3,
            saturated: 2.0,
            fine: true
        }
    );
    assert!(close(s.solid_heat_capacity, 0.6 * 2650.0 * 800.0, 1e-12));
    assert_eq!(s.enhancement, Enhancement::Cass { clay_fraction: 0.1 });
    assert_eq!(
        s.retention.dry_end,
        Some(DryEnd::FayerSimmons {
            oven_dry_head: -5.0e4
        })
    );
    assert!(matches!(
        m.bottom.at(0.0).heat,
        BottomHeat::GeothermalFlux(Schedule::Constant(q)) if q == 0.065
    ));
    match m.initial {
        InitialState::Hydrostatic {
            surface_temperature,
            gradient,
        } => {
            assert!(close(surface_temperature, 291.15, 1e-12));
            assert_eq!(gradient, 0.03);
        }
        ref other => panic!("{other:?}"),
    }
}

#[test]
fn layers_map_to_cells() {
    let m = case(&[
        (
            "[[layers]]\nsoil = \"sand\"\ntop_m = 0.0\nbottom_m = 30.0\n",
            "[[layers]]\nname = \"top\"\nsoil = \"sand\"\ntop_m = 0.0\nbottom_m = 7.5\n[[layers]]\nname = \"deep\"\nsoil = \"clay\"\ntop_m = 7.5\nbottom_m = 30.0\n",
        ),
        (
            "[[layers]]",
            "[soils.clay]\nexponential = { theta_r = 0.1, theta_s = 0.5, alpha_per_m = 0.5 }\nsaturated_conductivity_m_per_s = 1e-8\ncampbell = { a = 0.6, b = 0.8, c = 4.0, d = 0.1 }\nsolid_heat_capacity_J_per_m3_K = 1.1e6\n\n[[layers]]",
        ),
    ]);
    assert_eq!(m.soils[1].name, "clay");
    assert!(m.mesh.faces.contains(&7.5));
    for (z, &s) in m.mesh.centers.iter().zip(&m.cell_soil) {
        assert_eq!(s, usize::from(*z > 7.5));
    }
    assert_eq!(m.layers[1].soil, 1);
}

#[test]
fn summary_shows_user_units_and_breakpoints() {
    let m = case(&[(
        "temperature_C = 18.0\n",
        "temperature_C = { steps = [[0.0, 15.0], [40.0, 18.0]] }\n",
    )]);
    let s = deepdry::case::summary(&m);
    assert!(s.contains("60 cells"), "{s}");
    assert!(s.contains("0 to 30 m"), "{s}");
    assert!(
        s.contains("steps: 15 °C, 18 °C from year 40 [breakpoints at year 40]"),
        "{s}"
    );
    assert!(s.contains("relative humidity 0.2"), "{s}");
    assert!(s.contains("1 snapshot times"), "{s}");
}

#[test]
fn check_prints_the_summary() {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_deepdry"))
        .args(["check", "cases/benchmark-300m.toml"])
        .current_dir(root())
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("300 m deep, 600 cells, smallest 0.01 m"),
        "{text}"
    );
    assert!(text.contains("31 snapshot times"), "{text}");
}

#[test]
fn summary_names_the_pore_size_index_and_the_thermal_conductivity_apart() {
    // climate-shift.toml: a Brooks–Corey soil (λ = 1.2) with a constant thermal
    // conductivity of 1.2 W/(m K): one symbol must not stand for both.
    let m = deepdry::case::load(&root().join("cases/climate-shift.toml")).unwrap();
    let s = deepdry::case::summary(&m);
    assert!(s.contains("pore-size index λ 1.2"), "{s}");
    assert!(s.contains("thermal conductivity 1.2 W/(m K)"), "{s}");
    for line in s.lines() {
        assert!(line.matches('λ').count() <= 1, "{line}");
    }
}
