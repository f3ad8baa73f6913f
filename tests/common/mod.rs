//! Shared helpers for the integration tests: a model built in code (no case file).
#![allow(dead_code)]

use deepdry::mesh::Mesh;
use deepdry::model::*;
use deepdry::props::conductivity::FaceAveraging;
use deepdry::props::retention::{Retention, RetentionLaw};
use deepdry::props::thermal::ThermalConductivity;
use deepdry::props::vapor::{Diffusivity, Enhancement};
use deepdry::schedule::Schedule;

pub const YEAR: f64 = 365.25 * 86400.0;

/// Sandy loam, van Genuchten–Mualem parameters of Carsel & Parrish (1988).
pub fn sandy_loam() -> Soil {
    Soil {
        name: "sandy loam".into(),
        retention: Retention {
            law: RetentionLaw::VanGenuchten {
                theta_r: 0.065,
                theta_s: 0.41,
                alpha: 7.5,
                n: 1.89,
                l: 0.5,
                air_entry: 0.0,
            },
            dry_end: None,
        },
        saturated_conductivity: 1.23e-5,
        thermal: ThermalConductivity::Campbell {
            a: 1.460,
            b: 1.652,
            c: 9.222,
            d: 0.274,
            e: 4.0,
        },
        solid_heat_capacity: (1.0 - 0.41) * 2.0e6,
        enhancement: Enhancement::None,
        specific_storage: 0.0,
    }
}

pub fn uniform_mesh(depth: f64, n: usize) -> Mesh {
    Mesh::from_faces((0..=n).map(|i| depth * i as f64 / n as f64).collect())
}

pub fn physics() -> Physics {
    Physics {
        vapor_mode: VaporMode::Equilibrium,
        diffusivity: Diffusivity {
            d0: 2.12e-5,
            t0: 273.15,
            p0: 101_325.0,
            exponent: 1.88,
        },
        air_pressure: 101_325.0,
        thermal_liquid_gain: None,
        viscosity_correction: false,
        reference_temperature: 293.15,
        face_conductivity: FaceAveraging::Arithmetic,
        cell_average_retention: false,
    }
}

/// A one-soil column with the given boundary conditions, hydrostatic initial state and a
/// linear temperature profile between `t_top` and `t_bottom` [K].
pub fn column(
    mesh: Mesh,
    soil: Soil,
    surface: SurfaceBc,
    bottom: BottomBc,
    t_top: f64,
    t_bottom: f64,
    end: f64,
) -> Model {
    let n = mesh.n_cells();
    let depth = mesh.depth();
    Model {
        solutes: Vec::new(),
        vegetation: deepdry::model::Periods::single(None),
        title: "test column".into(),
        case_text: String::new(),
        overrides: Vec::new(),
        layers: vec![Layer {
            name: "all".into(),
            soil: 0,
            top: 0.0,
            bottom: depth,
        }],
        soils: vec![soil],
        cell_soil: vec![0; n],
        mesh,
        physics: physics(),
        surface: Periods::single(surface),
        bottom: Periods::single(bottom),
        initial: InitialState::Hydrostatic {
            surface_temperature: t_top,
            gradient: (t_bottom - t_top) / depth,
        },
        time: TimeControl {
            epoch_year: 0.0,
            start: 0.0,
            end,
            dt_initial: 60.0,
            dt_min: 1e-6,
            dt_max: 1e13,
            method: Method::BackwardEuler,
            rtol: 1e-4,
            atol_temperature: 1e-3,
            atol_head: 1e-3,
            atol_vapor: 1e-8,
            atol_theta: 1e-5,
            max_newton: 15,
            newton_tolerance: deepdry::solve::newton::DEFAULT_RESIDUAL_TOL,
            balance_tolerance: deepdry::case::build::DEFAULT_BALANCE_TOLERANCE,
            cycle_skipping: None,
            lean_memory: false,
        },
        output: OutputControl {
            folder: std::env::temp_dir(),
            snapshot_times: vec![end],
            series_every: 1,
        },
        checkpoint: CheckpointControl {
            every: None,
            wall_every: None,
            keep: 1,
        },
    }
}

pub fn dry_surface(t: f64, rh: f64) -> SurfaceBc {
    SurfaceBc {
        heat: SurfaceHeat::Temperature(Schedule::Constant(t)),
        water: SurfaceWater::Atmosphere {
            relative_humidity: Schedule::Constant(rh),
            resistance: None,
        },
    }
}

pub fn water_table(t: f64) -> BottomBc {
    BottomBc {
        heat: BottomHeat::Temperature(Schedule::Constant(t)),
        water: BottomWater::WaterTable(Schedule::Constant(0.0)),
    }
}

/// Deterministic pseudo-random numbers in [0, 1) (xorshift64*).
pub struct Rng(pub u64);
impl Rng {
    pub fn next(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        let v = self.0.wrapping_mul(0x2545_F491_4F6C_DD1D);
        (v >> 11) as f64 / (1u64 << 53) as f64
    }
}
