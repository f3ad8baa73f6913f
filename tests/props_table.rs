//! `deepdry table water` / `deepdry table soil` output: headers, row counts, values and the
//! one-line error messages for bad options.

use deepdry::error::Error;
use deepdry::mesh::Mesh;
use deepdry::model::{
    BottomBc, BottomHeat, BottomWater, CheckpointControl, InitialState, Layer, Method, Model,
    OutputControl, Periods, Physics, Soil, SurfaceBc, SurfaceHeat, SurfaceWater, TimeControl,
    VaporMode,
};
use deepdry::props::conductivity::FaceAveraging;
use deepdry::props::retention::{DryEnd, Retention, RetentionLaw};
use deepdry::props::table::{
    soil_csv, soil_csv_with, water_csv, SoilTableOptions, SOIL_HEADER, WATER_HEADER,
};
use deepdry::props::thermal::ThermalConductivity;
use deepdry::props::vapor::{Diffusivity, Enhancement};
use deepdry::props::water;
use deepdry::schedule::Schedule;

#[test]
fn water_csv_header_and_rows() {
    let csv = water_csv(0.0, 100.0, 5.0).unwrap();
    let lines: Vec<&str> = csv.lines().collect();
    assert_eq!(
        lines[0],
        "temperature_C,saturation_pressure_Pa,saturated_vapor_density_kg_m3,latent_heat_J_kg,liquid_density_kg_m3,viscosity_Pa_s,surface_tension_N_m,vapor_diffusivity_m2_s"
    );
    assert_eq!(lines[0], WATER_HEADER);
    assert_eq!(lines.len(), 1 + 21, "0, 5, ..., 100 °C");
    assert!(lines[1].starts_with("0,"));
    assert!(lines[21].starts_with("100,"));
    // The 20 °C row carries the library's values.
    let row: Vec<f64> = lines[5].split(',').map(|s| s.parse().unwrap()).collect();
    assert_eq!(row.len(), 8);
    assert_eq!(row[0], 20.0);
    let t = 293.15;
    let expect = [
        water::saturation_pressure(t).0,
        water::saturated_vapor_density(t).0,
        water::latent_heat(t),
        water::liquid_density(t).0,
        water::viscosity(t).0,
        water::surface_tension(t).0,
        Diffusivity::default().value(t, 101_325.0).0,
    ];
    for (got, want) in row[1..].iter().zip(expect) {
        assert!(((got - want) / want).abs() < 1e-7, "{got} vs {want}");
    }
    // Fractional steps print cleanly and a single temperature gives one row.
    let csv = water_csv(10.0, 10.3, 0.1).unwrap();
    let temps: Vec<&str> = csv
        .lines()
        .skip(1)
        .map(|l| l.split(',').next().unwrap())
        .collect();
    assert_eq!(temps, ["10", "10.1", "10.2", "10.3"]);
    assert_eq!(water_csv(25.0, 25.0, 1.0).unwrap().lines().count(), 2);
}

fn input_message(r: deepdry::error::Result<String>) -> String {
    match r {
        Err(Error::Input(m)) => m,
        other => panic!("expected an input error, got {other:?}"),
    }
}

#[test]
fn water_csv_rejects_bad_ranges_with_one_line_messages() {
    let cases = [
        (water_csv(0.0, 100.0, 0.0), "--step", "0"),
        (water_csv(0.0, 100.0, -5.0), "--step", "-5"),
        (water_csv(60.0, 40.0, 5.0), "--from", "60"),
        (water_csv(-10.0, 40.0, 5.0), "--from", "-10"),
        (water_csv(0.0, 150.0, 5.0), "--to", "150"),
        (water_csv(f64::NAN, 40.0, 5.0), "--from", "NaN"),
        (water_csv(0.0, 100.0, 1e-9), "--step", "0.000000001"),
    ];
    for (r, option, value) in cases {
        let m = input_message(r);
        assert!(!m.contains('\n'), "one line: {m}");
        assert!(
            m.starts_with(&format!("{option}: {value}:")),
            "names option and value: {m}"
        );
    }
    let m = input_message(water_csv(-10.0, 40.0, 5.0));
    assert!(m.contains("0–110 °C"), "says what is allowed: {m}");
    let m = input_message(water_csv(0.0, 100.0, 0.0));
    assert!(m.contains("greater than 0"), "{m}");
    let m = input_message(water_csv(60.0, 40.0, 5.0));
    assert!(m.contains("--to (40)"), "{m}");
}

fn soil(name: &str, dry_end: Option<DryEnd>) -> Soil {
    Soil {
        name: name.to_string(),
        retention: Retention {
            law: RetentionLaw::VanGenuchten {
                theta_r: 0.078,
                theta_s: 0.43,
                alpha: 3.6,
                n: 1.56,
                l: 0.5,
                air_entry: 0.0,
            },
            dry_end,
        },
        saturated_conductivity: 2.889e-6,
        thermal: ThermalConductivity::campbell_1985(1.5, 0.1),
        solid_heat_capacity: 2.0e6,
        enhancement: Enhancement::Cass { clay_fraction: 0.1 },
        specific_storage: 0.0,
    }
}

fn model() -> Model {
    let mesh = Mesh::from_faces(vec![0.0, 1.0, 2.0]);
    let layer = |name: &str, soil, top, bottom| Layer {
        name: name.to_string(),
        soil,
        top,
        bottom,
    };
    Model {
        solutes: Vec::new(),
        vegetation: deepdry::model::Periods::single(None),
        title: "table test".into(),
        case_text: String::new(),
        overrides: Vec::new(),
        mesh,
        soils: vec![
            soil("loam", None),
            soil(
                "dry loam",
                Some(DryEnd::FayerSimmons {
                    oven_dry_head: -1.0e4,
                }),
            ),
        ],
        layers: vec![layer("top", 0, 0.0, 1.0), layer("deep", 1, 1.0, 2.0)],
        cell_soil: vec![0, 1],
        physics: Physics {
            vapor_mode: VaporMode::Equilibrium,
            diffusivity: Diffusivity::default(),
            air_pressure: 101_325.0,
            thermal_liquid_gain: None,
            viscosity_correction: true,
            reference_temperature: 293.15,
            face_conductivity: FaceAveraging::Arithmetic,
            cell_average_retention: false,
        },
        surface: Periods::single(SurfaceBc {
            heat: SurfaceHeat::Temperature(Schedule::Constant(293.15)),
            water: SurfaceWater::NoFlow,
        }),
        bottom: Periods::single(BottomBc {
            heat: BottomHeat::Temperature(Schedule::Constant(293.15)),
            water: BottomWater::NoFlow,
        }),
        initial: InitialState::Hydrostatic {
            surface_temperature: 293.15,
            gradient: 0.0,
        },
        time: TimeControl {
            epoch_year: 0.0,
            start: 0.0,
            end: 1.0,
            dt_initial: 1.0,
            dt_min: 1.0,
            dt_max: 1.0,
            method: Method::BackwardEuler,
            rtol: 1e-6,
            atol_temperature: 1e-6,
            atol_head: 1e-6,
            atol_vapor: 1e-9,
            atol_theta: 1e-5,
            max_newton: 10,
            newton_tolerance: deepdry::solve::newton::DEFAULT_RESIDUAL_TOL,
            balance_tolerance: deepdry::case::build::DEFAULT_BALANCE_TOLERANCE,
            cycle_skipping: None,
            lean_memory: false,
        },
        output: OutputControl {
            folder: std::path::PathBuf::from("."),
            snapshot_times: vec![1.0],
            series_every: 1,
        },
        checkpoint: CheckpointControl {
            every: None,
            wall_every: None,
            keep: 1,
        },
    }
}

/// −0.01 m to −1e5 m is 7 decades: 70 intervals, 71 rows; with a Fayer–Simmons oven-dry
/// head of −1e4 m, 6 decades, 61 rows. Values are the library's at each head.
#[test]
fn soil_csv_rows_and_values() {
    let m = model();
    let csv = soil_csv(&m, "top").unwrap();
    let lines: Vec<&str> = csv.lines().collect();
    assert_eq!(lines[0], SOIL_HEADER);
    assert_eq!(
        lines[0],
        "head_m,liquid_content,relative_conductivity,conductivity_m_s,relative_humidity_20C,thermal_conductivity_W_m_K"
    );
    assert_eq!(lines.len(), 1 + 71);
    let first: Vec<f64> = lines[1].split(',').map(|s| s.parse().unwrap()).collect();
    let last: Vec<f64> = lines[71].split(',').map(|s| s.parse().unwrap()).collect();
    assert_eq!(first[0], -0.01);
    assert_eq!(last[0], -1.0e5);
    let s = &m.soils[0];
    for row in [&first, &last] {
        let h = row[0];
        let (theta, _) = s.retention.theta(h);
        let (kr, _) = s.retention.relative_conductivity(h);
        let (hr, _, _) = water::relative_humidity(h, 293.15);
        let (lam, _) = s.thermal.value(theta, 0.43);
        let want = [theta, kr, kr * s.saturated_conductivity, hr, lam];
        for (got, want) in row[1..].iter().zip(want) {
            assert!(((got - want) / want).abs() < 1e-7, "{got} vs {want}");
        }
    }
    // Heads decrease monotonically, ~10 per decade.
    let heads: Vec<f64> = lines[1..]
        .iter()
        .map(|l| l.split(',').next().unwrap().parse().unwrap())
        .collect();
    assert!(heads.windows(2).all(|w| w[1] < w[0]));
    let deep = soil_csv(&m, "deep").unwrap();
    assert_eq!(deep.lines().count(), 1 + 61);
    assert!(deep.lines().last().unwrap().starts_with("-1.000000e4,"));
}

#[test]
fn soil_csv_unknown_layer_lists_the_layers() {
    let m = input_message(soil_csv(&model(), "middle"));
    assert!(!m.contains('\n'));
    assert!(m.starts_with("--layer: middle:"), "{m}");
    assert!(m.contains("top, deep"), "{m}");
}

fn rows(csv: &str) -> Vec<Vec<f64>> {
    csv.lines()
        .skip(1)
        .map(|l| l.split(',').map(|v| v.parse().unwrap()).collect())
        .collect()
}

#[test]
fn soil_csv_at_a_temperature_over_a_head_range() {
    let m = model();
    let opts = SoilTableOptions {
        temperature_c: Some(35.0),
        from_head: Some(-1.0),
        to_head: Some(-1000.0),
        per_decade: Some(5),
    };
    let csv = soil_csv_with(&m, "top", &opts).unwrap();
    assert_eq!(
        csv.lines().next().unwrap(),
        "head_m,liquid_content,relative_conductivity,conductivity_m_s,relative_humidity_35C,thermal_conductivity_W_m_K"
    );
    let r = rows(&csv);
    // Three decades at five per decade: 15 intervals, 16 rows, both ends exact.
    assert_eq!(r.len(), 16);
    assert_eq!((r[0][0], r[15][0]), (-1.0, -1000.0));
    // Kelvin equation hr = exp(M g h/(R T)) (common practice), with M = 0.018015 kg/mol,
    // g = 9.80665 m/s², R = 8.314462618 J/(mol K) (CODATA), T = 308.15 K: at h = −1000 m
    // hr = exp(−0.068958) = 0.933366.
    let want = (0.018015 * 9.80665 * -1000.0 / (8.314462618 * 308.15f64)).exp();
    assert!((r[15][4] - want).abs() < 1e-5, "{} vs {want}", r[15][4]);
    // The case corrects K for viscosity (reference 20 °C): K(35 °C)/K(20 °C) =
    // μ(20 °C)/μ(35 °C) = 1001.6/719.5 µPa s (IAPWS 2008 viscosity at 0.1 MPa, from
    // memory) = 1.3921.
    let plain = rows(&soil_csv(&m, "top").unwrap());
    let at_1m = plain.iter().find(|row| row[0] == -1.0).unwrap();
    let ratio = r[0][3] / at_1m[3];
    assert!((ratio - 1001.6 / 719.5).abs() < 3e-3 * ratio, "{ratio}");
    // Same liquid content and thermal conductivity: they do not depend on temperature.
    assert_eq!((r[0][1], r[0][5]), (at_1m[1], at_1m[5]));
}

#[test]
fn soil_csv_options_out_of_range_name_the_option() {
    let m = model();
    let bad = |opts: SoilTableOptions| input_message(soil_csv_with(&m, "deep", &opts));
    let d = SoilTableOptions::default();
    let msg = bad(SoilTableOptions {
        temperature_c: Some(150.0),
        ..d
    });
    assert!(
        msg.contains("--temperature: 150") && msg.contains("0–110 °C"),
        "{msg}"
    );
    let msg = bad(SoilTableOptions {
        from_head: Some(0.5),
        ..d
    });
    assert!(
        msg.contains("--from-head: 0.5") && msg.contains("below 0"),
        "{msg}"
    );
    // Layer "deep" dries out at −1e4 m (its Fayer–Simmons oven-dry head).
    let msg = bad(SoilTableOptions {
        to_head: Some(-1e6),
        ..d
    });
    assert!(
        msg.contains("--to-head") && msg.contains("-10000 m"),
        "{msg}"
    );
    let msg = bad(SoilTableOptions {
        from_head: Some(-10.0),
        to_head: Some(-1.0),
        ..d
    });
    assert!(
        msg.contains("--to-head: -1") && msg.contains("below --from-head"),
        "{msg}"
    );
    let msg = bad(SoilTableOptions {
        per_decade: Some(0),
        ..d
    });
    assert!(
        msg.contains("--per-decade: 0") && msg.contains("1 to 1000"),
        "{msg}"
    );
}
