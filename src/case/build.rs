//! Reads every section of a case file, checks it, and assembles the [`Model`] in SI units.
//! The keys, units, defaults and ranges are documented in `docs/case-file.md`; keep the two
//! in step.

use super::csvfile::{self, Header};
use super::schedules::{
    self, fmt_g, GEOTHERMAL_FLUX, HEAD, HEAT_FLUX, RELATIVE_HUMIDITY, RESISTANCE, TEMPERATURE,
    T_MAX_C, T_MIN_C, T_NOTE, WATER_FLUX,
};
use super::tree::{suggest, Kind, Node, Source, Span, Table, Value};
use crate::error::Error;
use crate::mesh::{Grading, Mesh, Resolution};
use crate::model::*;
use crate::props::conductivity::FaceAveraging;
use crate::props::constants::{CELSIUS_ZERO, SECONDS_PER_YEAR};
use crate::props::retention::{DryEnd, Retention, RetentionLaw, OVEN_DRY_HEAD};
use crate::props::thermal::ThermalConductivity;
use crate::props::vapor::{Diffusivity, Enhancement};
use std::path::Path;

type R<T> = Result<T, Error>;

const ROOT_KEYS: &[&str] = &[
    "title",
    "column",
    "mesh",
    "soils",
    "layers",
    "physics",
    "surface",
    "bottom",
    "initial",
    "time",
    "output",
    "checkpoint",
    "solutes",
    "vegetation",
];

/// Default binary diffusivity of vapour in air: 2.12e-5 (T/273.15 K)^1.88 m² s⁻¹ at
/// 101325 Pa (the form of the 300 m benchmark).
pub const DEFAULT_DIFFUSIVITY: Diffusivity = Diffusivity {
    d0: 2.12e-5,
    t0: CELSIUS_ZERO,
    p0: 101_325.0,
    exponent: 1.88,
};

/// Named published forms of the diffusivity, D = d0 (T/t0)^exponent (p0/p).
/// Coefficients as recalled from the sources (from memory; check the primary text before
/// relying on the last digit).
fn named_diffusivity(name: &str) -> Diffusivity {
    match name {
        // Massman (1998), Atmos. Environ. 32(6): 0.2178 cm² s⁻¹ at 273.15 K and
        // 101.325 kPa, temperature exponent 1.81.
        "massman-1998" => Diffusivity {
            d0: 2.178e-5,
            t0: CELSIUS_ZERO,
            p0: 101_325.0,
            exponent: 1.81,
        },
        // Marrero & Mason (1972), J. Phys. Chem. Ref. Data 1: D = 1.87e-10 T^2.072 / p[atm]
        // m² s⁻¹ (280–450 K), written here relative to 273.15 K.
        _ => Diffusivity {
            d0: 1.87e-10 * CELSIUS_ZERO.powf(2.072),
            t0: CELSIUS_ZERO,
            p0: 101_325.0,
            exponent: 2.072,
        },
    }
}

/// Output folder default: `out/<case file stem>` next to the case file.
pub fn default_output_folder(origin: &str, base_dir: &Path) -> std::path::PathBuf {
    let stem = Path::new(origin)
        .file_stem()
        .and_then(|s| s.to_str())
        .filter(|s| !s.is_empty())
        .unwrap_or("case");
    base_dir.join("out").join(stem)
}

/// A number satisfying `ok`, else an error saying `allowed`.
pub(super) fn num(v: &Value, ok: impl Fn(f64) -> bool, allowed: &str) -> R<f64> {
    let x = v.f64()?;
    if ok(x) {
        Ok(x)
    } else {
        Err(v.err(allowed))
    }
}

fn positive(v: &Value) -> R<f64> {
    num(v, |x| x > 0.0, "must be > 0")
}

pub(super) fn opt_num(
    t: &Table,
    key: &str,
    ok: impl Fn(f64) -> bool,
    allowed: &str,
) -> R<Option<f64>> {
    t.get(key).map(|v| num(&v, ok, allowed)).transpose()
}

fn req_num(t: &Table, key: &str, what: &str, ok: impl Fn(f64) -> bool, allowed: &str) -> R<f64> {
    num(&t.req(key, what)?, ok, allowed)
}

/// A temperature in °C within the program's range, returned in kelvin.
fn temperature(v: &Value) -> R<f64> {
    let c = num(
        v,
        |c| (T_MIN_C..=T_MAX_C).contains(&c),
        &format!("must be in [{T_MIN_C}, {T_MAX_C}] °C{T_NOTE}"),
    )?;
    Ok(c + CELSIUS_ZERO)
}

static EMPTY_TABLE: Node = Node {
    kind: Kind::Table(Vec::new()),
    span: Span::None,
};

/// An optional section: absent reads as an empty table (all defaults).
fn optional_section<'a>(root: &Table<'a>, key: &str, allowed: &[&str]) -> R<Table<'a>> {
    match root.get(key) {
        Some(v) => v.table(allowed),
        None => Value {
            src: root.src,
            node: &EMPTY_TABLE,
            path: key.to_string(),
        }
        .table(allowed),
    }
}

fn section<'a>(root: &Table<'a>, key: &str, allowed: &[&str], what: &str) -> R<Table<'a>> {
    match root.get(key) {
        Some(v) => v.table(allowed),
        None => Err(Error::input(format!(
            "{}: missing section [{key}] ({what})",
            root.src.origin
        ))),
    }
}

/// Assembles the model from parsed case text.
pub fn build(src: &Source) -> R<Model> {
    let root_node = src.parse()?;
    let root = Value::root(src, &root_node).table(ROOT_KEYS)?;
    let title = match root.get("title") {
        Some(v) => v.str()?.to_string(),
        None => Path::new(src.origin)
            .file_stem()
            .and_then(|s| s.to_str())
            .unwrap_or("untitled")
            .to_string(),
    };
    let time = read_time(&root)?;
    // Schedule times are read as seconds since the time origin.
    let _epoch = schedules::EpochGuard::set(time.epoch_year);
    let depth = read_column(&root)?;
    let soils = read_soils(&root)?;
    let layers = read_layers(&root, &soils, depth)?;
    let mesh = read_mesh(&root, depth, &layers)?;
    let cell_soil = mesh
        .centers
        .iter()
        .map(|&z| {
            layers
                .iter()
                .find(|l| z < l.bottom)
                .or(layers.last())
                .map_or(0, |l| l.soil)
        })
        .collect();
    let mut physics = read_physics(&root)?;
    physics.cell_average_retention = match root.get("mesh") {
        Some(m) => match m.table(MESH_KEYS)?.get("cell_average_retention") {
            Some(v) => v.bool()?,
            None => false,
        },
        None => false,
    };
    let surface = read_periods(&root, "surface", &time, SURFACE_KEYS, read_surface)?;
    let bottom = read_periods(&root, "bottom", &time, BOTTOM_KEYS, read_bottom)?;
    let initial = read_initial(&root, &time, depth, &surface, &bottom, &soils, &layers)?;
    let output = read_output(&root, &time)?;
    let checkpoint = read_checkpoint(&root)?;
    below_boiling(&root, &physics, &surface, &bottom)?;
    let solutes = super::solutes::read_solutes(&root, depth)?;
    let vegetation = super::vegetation::read_vegetation(&root, &time, &mesh)?;
    let mut time = time;
    let newton_given = match root.get("time") {
        Some(t) => t.table(TIME_KEYS)?.get("max_newton_iterations").is_some(),
        None => false,
    };
    let ponding = surface
        .periods
        .iter()
        .any(|p| matches!(p.1.water, SurfaceWater::Pond { .. }));
    if ponding {
        pond_periods_open_through_a_resistance(&root, &surface)?;
    }
    let mut soils = soils;
    if ponding {
        // A pond that empties over a saturated column, and perched water that drains,
        // need storage in the saturated zone to be solved reliably: a ponding case gives
        // every soil without its own `specific_storage_per_m` the default below.
        let table = root.get("soils").map(|v| v.named_table()).transpose()?;
        for soil in soils.iter_mut() {
            let given = match &table {
                Some(t) => t
                    .get(&soil.name)
                    .map(|v| v.table(SOIL_KEYS))
                    .transpose()?
                    .is_some_and(|s| s.get("specific_storage_per_m").is_some()),
                None => false,
            };
            if !given {
                soil.specific_storage = PONDING_SPECIFIC_STORAGE;
            }
        }
    }
    if !newton_given && ponding {
        // Where a pond empties over a saturated column the top cells desaturate one
        // after another within a step, an iteration each (see `apply_update` in
        // `physics::rules`): a ponding case gets a larger default limit.
        time.max_newton = PONDING_MAX_NEWTON;
    }
    let model = Model {
        title,
        case_text: src.text.to_string(),
        overrides: src.overrides.iter().map(|o| o.to_string()).collect(),
        mesh,
        soils,
        layers,
        cell_soil,
        physics,
        surface,
        bottom,
        initial,
        time,
        output,
        checkpoint,
        solutes,
        vegetation,
    };
    if let Some(t) = root.get("time") {
        super::cycles::check(&t.table(TIME_KEYS)?, &model)?;
    }
    Ok(model)
}

/// Refuses boundary temperatures at or above the boiling point at the air pressure: the
/// model holds for liquid water and vapour below boiling.
fn below_boiling(
    root: &Table,
    physics: &Physics,
    surface: &Periods<SurfaceBc>,
    bottom: &Periods<BottomBc>,
) -> R<()> {
    let p = physics.air_pressure;
    let boils = |t: f64| crate::props::water::saturation_pressure(t).0 >= p;
    // The boiling point at p, by bisection on the saturation pressure (0..374 °C).
    let boiling = || {
        let (mut lo, mut hi) = (CELSIUS_ZERO, CELSIUS_ZERO + 373.0);
        for _ in 0..60 {
            let mid = 0.5 * (lo + hi);
            if boils(mid) {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        lo
    };
    let mut hottest: Vec<(&str, f64)> = Vec::new();
    for (_, bc) in &surface.periods {
        if let SurfaceHeat::Temperature(s) = &bc.heat {
            hottest.push(("surface.temperature_C", s.bounds().1));
        }
    }
    for (_, bc) in &bottom.periods {
        if let BottomHeat::Temperature(s) = &bc.heat {
            hottest.push(("bottom.temperature_C", s.bounds().1));
        }
    }
    for (key, t) in hottest {
        if boils(t) {
            let section = key.split('.').next().unwrap_or(key);
            return Err(root.req(section, "")?.err(format!(
                "{key} reaches {} °C, at or above the boiling point {:.1} °C at physics.air_pressure_Pa = {}; the model holds below boiling: lower the temperature or raise the air pressure",
                fmt_g(t - CELSIUS_ZERO),
                boiling() - CELSIUS_ZERO,
                fmt_g(p)
            )));
        }
    }
    Ok(())
}

// ---------------------------------------------------------------- column and mesh

/// Largest retention α: 1000 1/m (an air-entry head of 1 mm); beyond it the retention
/// curve is a step the Newton iteration cannot follow.
pub const MAX_ALPHA_PER_M: f64 = 1000.0;
/// Largest van Genuchten n: 20 (soils lie between about 1.05 and 10).
pub const MAX_VG_N: f64 = 20.0;
/// A van Genuchten curve must drain before oven dryness: α times the magnitude of the
/// soil's oven-dry head must be at least this (1/α, the head scale of drainage, at most a
/// tenth of it; α ≥ 1e-4 1/m with the default −1e5 m). Below it the liquid content hardly
/// changes up to oven dryness while the conductivity falls by decades (n near 1), and
/// the first wetting of such a column failed in Newton (α = 1e-6 to 3e-5 1/m with n =
/// 1.01 to 1.2 at −1e5 m; all of α ≥ 1e-4 ran).
pub const MIN_VG_ALPHA_TIMES_OVEN_DRY: f64 = 10.0;

/// Shallowest column a case may give: 1 cm (a column of 1e-9 m ran with a water balance
/// that did not close by half of its throughput).
pub const MIN_DEPTH_M: f64 = 0.01;

fn read_column(root: &Table) -> R<f64> {
    let t = section(root, "column", &["depth_m"], "the soil column: depth_m")?;
    req_num(
        &t,
        "depth_m",
        "depth of the bottom boundary below the surface [m]",
        |d| (MIN_DEPTH_M..=1.0e4).contains(&d),
        "must be 0.01 to 10000 m (depth of the bottom boundary, positive downward)",
    )
}

const MESH_KEYS: &[&str] = &[
    "cells",
    "max_cell_m",
    "growth",
    "surface_cell_m",
    "bottom_cell_m",
    "interface_cell_m",
    "cell_average_retention",
];

fn read_mesh(root: &Table, depth: f64, layers: &[Layer]) -> R<Mesh> {
    let t = section(root, "mesh", MESH_KEYS, "the grid: cells or max_cell_m")?;
    let (key, v) = t.one_of(&["cells", "max_cell_m"], "mesh resolution")?;
    let resolution = if key == "cells" {
        Resolution::Cells(v.usize_in(1, 10_000_000, "")?)
    } else {
        Resolution::MaxCell(num(
            &v,
            |h| h > 0.0 && h <= depth,
            "must be > 0 and at most the column depth",
        )?)
    };
    let growth = opt_num(
        &t,
        "growth",
        |g| g == 1.0 || (1.0 + 1e-6..=2.0).contains(&g),
        "must be 1 (uniform cells) or in [1.000001, 2] (ratio of neighbouring cell sizes)",
    )?
    .unwrap_or(1.0);
    let size = |key: &str| {
        opt_num(
            &t,
            key,
            |s| s > 0.0 && s < depth,
            "must be > 0 and less than the column depth",
        )
    };
    let grading = Grading {
        growth,
        surface_cell: size("surface_cell_m")?,
        bottom_cell: size("bottom_cell_m")?,
        interface_cell: size("interface_cell_m")?,
    };
    if growth == 1.0 {
        for key in ["surface_cell_m", "bottom_cell_m", "interface_cell_m"] {
            t.only_with(key, "growth > 1 (with growth = 1 all cells are uniform)")?;
        }
    }
    let mut boundaries = vec![0.0];
    boundaries.extend(layers.iter().map(|l| l.bottom));
    let max_cell = match &resolution {
        Resolution::MaxCell(h) => Some(*h),
        _ => None,
    };
    Mesh::graded(&boundaries, &grading, resolution).map_err(|e| match (e, max_cell) {
        (crate::mesh::MeshError::AboveLimit { cells }, Some(h)) => t.err(format!(
            "max_cell_m = {}: gives {cells} cells, more than the limit of {}; use max_cell_m ≥ {} m",
            fmt_g(h),
            crate::mesh::MAX_CELLS,
            fmt_g(depth / crate::mesh::MAX_CELLS as f64)
        )),
        (e, _) => t.err(e),
    })
}

// ---------------------------------------------------------------- soils

const SOIL_KEYS: &[&str] = &[
    "van_genuchten",
    "brooks_corey",
    "exponential",
    "dry_end",
    "oven_dry_head_m",
    "saturated_conductivity_m_per_s",
    "saturated_conductivity_cm_per_day",
    "thermal_conductivity_W_per_m_K",
    "campbell",
    "johansen",
    "solid_heat_capacity_J_per_m3_K",
    "particle_density_kg_per_m3",
    "solid_specific_heat_J_per_kg_K",
    "enhancement",
    "specific_storage_per_m",
];

fn read_soils(root: &Table) -> R<Vec<Soil>> {
    let soils_v = root.get("soils").ok_or_else(|| {
        Error::input(format!(
            "{}: missing section [soils] (named soils, e.g. [soils.sand])",
            root.src.origin
        ))
    })?;
    let table = soils_v.named_table()?;
    let names: Vec<&str> = table.keys().collect();
    if names.is_empty() {
        return Err(table.err("no soils defined; add one, e.g. [soils.sand]"));
    }
    names
        .iter()
        .map(|name| read_soil(name, &table.req(name, "")?))
        .collect()
}

fn theta_pair(t: &Table) -> R<(f64, f64)> {
    let theta_s = req_num(
        t,
        "theta_s",
        "saturated liquid content θs (the porosity)",
        |x| x > 0.0 && x <= 1.0,
        "must be in (0, 1] (θs is the porosity)",
    )?;
    let v = t.req("theta_r", "residual liquid content θr")?;
    let theta_r = num(
        &v,
        |x| (0.0..theta_s).contains(&x),
        &format!("must be ≥ 0 and less than theta_s = {}", fmt_g(theta_s)),
    )?;
    Ok((theta_r, theta_s))
}

fn pore_connectivity(t: &Table, lower: f64) -> R<f64> {
    opt_num(
        t,
        "l",
        |l| l > lower,
        &format!(
            "must be > {} so that the relative conductivity vanishes when dry",
            fmt_g(lower)
        ),
    )
    .map(|l| l.unwrap_or(0.5))
}

fn read_retention(t: &Table) -> R<RetentionLaw> {
    let (key, v) = t.one_of(
        &["van_genuchten", "brooks_corey", "exponential"],
        "retention law",
    )?;
    Ok(match key {
        "van_genuchten" => {
            let vg = v.table(&["theta_r", "theta_s", "alpha_per_m", "n", "l", "air_entry_m"])?;
            let (theta_r, theta_s) = theta_pair(&vg)?;
            let alpha = req_num(
                &vg,
                "alpha_per_m",
                "α [1/m]",
                |a| a > 0.0 && a <= MAX_ALPHA_PER_M,
                "must be > 0 and at most 1000 1/m (soils: about 0.1 to 30)",
            )?;
            let n = req_num(
                &vg,
                "n",
                "shape parameter n",
                |n| n > 1.0 && n <= MAX_VG_N,
                "must be > 1 and at most 20 (soils: about 1.05 to 10)",
            )?;
            // Kr ~ Se^(l + 2/m) when dry, m = 1 − 1/n.
            let l = pore_connectivity(&vg, -2.0 * n / (n - 1.0))?;
            let air_entry = opt_num(
                &vg,
                "air_entry_m",
                |a| (0.0..=1.0).contains(&a),
                "must be in [0, 1] m (the magnitude of the air-entry head of Vogel et al. 2001, e.g. 0.02; 0: the plain curve)",
            )?
            .unwrap_or(0.0);
            RetentionLaw::VanGenuchten {
                theta_r,
                theta_s,
                alpha,
                n,
                l,
                air_entry,
            }
        }
        "brooks_corey" => {
            let bc = v.table(&["theta_r", "theta_s", "air_entry_m", "lambda", "l"])?;
            let (theta_r, theta_s) = theta_pair(&bc)?;
            let air_entry = req_num(
                &bc,
                "air_entry_m",
                "magnitude of the air-entry head |hb| [m]",
                |a| a > 0.0,
                "must be > 0 (the magnitude |hb| of the air-entry head)",
            )?;
            let lambda = req_num(
                &bc,
                "lambda",
                "pore-size index λ",
                |x| x > 0.0,
                "must be > 0",
            )?;
            // Kr = Se^(l + 2 + 2/λ).
            let l = pore_connectivity(&bc, -2.0 - 2.0 / lambda)?;
            RetentionLaw::BrooksCorey {
                theta_r,
                theta_s,
                air_entry,
                lambda,
                l,
            }
        }
        _ => {
            let ex = v.table(&["theta_r", "theta_s", "alpha_per_m"])?;
            let (theta_r, theta_s) = theta_pair(&ex)?;
            let alpha = req_num(
                &ex,
                "alpha_per_m",
                "α [1/m]",
                |a| a > 0.0 && a <= MAX_ALPHA_PER_M,
                "must be > 0 and at most 1000 1/m",
            )?;
            RetentionLaw::Exponential {
                theta_r,
                theta_s,
                alpha,
            }
        }
    })
}

fn read_soil(name: &str, v: &Value) -> R<Soil> {
    let t = v.table(SOIL_KEYS)?;
    let law = read_retention(&t)?;
    let phi = law.theta_s();
    let dry_end = match t.get("dry_end") {
        Some(d) => {
            d.choice(&["fayer-simmons"])?;
            let oven_dry_head = opt_num(
                &t,
                "oven_dry_head_m",
                |h| (-1.0e7..=-100.0).contains(&h),
                "must be -1e7 to -100 m (the head at oven dryness, typically -1e5)",
            )?
            .unwrap_or(-1.0e5);
            Some(DryEnd::FayerSimmons { oven_dry_head })
        }
        None => {
            t.only_with("oven_dry_head_m", "dry_end = \"fayer-simmons\"")?;
            None
        }
    };
    if let RetentionLaw::VanGenuchten { alpha, .. } = &law {
        let alpha = *alpha;
        let oven_dry = match &dry_end {
            Some(DryEnd::FayerSimmons { oven_dry_head }) => *oven_dry_head,
            None => OVEN_DRY_HEAD,
        };
        let min = MIN_VG_ALPHA_TIMES_OVEN_DRY / oven_dry.abs();
        if alpha < min {
            let at = t
                .get("van_genuchten")
                .and_then(|vg| {
                    vg.table(&["theta_r", "theta_s", "alpha_per_m", "n", "l"])
                        .ok()
                })
                .and_then(|vg| vg.get("alpha_per_m"));
            let msg = format!(
                "must be at least {} 1/m for this soil: with a smaller α the curve does not drain before its oven-dry head of {} m (1/α must be at most a tenth of it)",
                fmt_g(min),
                fmt_g(oven_dry)
            );
            return Err(match at {
                Some(a) => a.err(msg),
                None => v.err(format!("alpha_per_m {msg}")),
            });
        }
    }

    let (key, kv) = t.one_of(
        &[
            "saturated_conductivity_m_per_s",
            "saturated_conductivity_cm_per_day",
        ],
        "saturated conductivity",
    )?;
    let ks = positive(&kv)?
        * if key.ends_with("cm_per_day") {
            0.01 / 86_400.0
        } else {
            1.0
        };
    if ks > 1.0 {
        return Err(kv.err("is above 1 m/s; check the unit in the key name"));
    }

    let (key, tv) = t.one_of(
        &["thermal_conductivity_W_per_m_K", "campbell", "johansen"],
        "thermal conductivity law",
    )?;
    let thermal = match key {
        "campbell" => {
            let c = tv.table(&["a", "b", "c", "d", "e"])?;
            let coef = |k: &str, what: &str| req_num(&c, k, what, |x| x > 0.0, "must be > 0");
            ThermalConductivity::Campbell {
                a: coef("a", "A [W/(m K)]")?,
                b: req_num(&c, "b", "B [W/(m K)]", |x| x >= 0.0, "must be ≥ 0")?,
                c: coef("c", "C [-]")?,
                d: coef("d", "D [W/(m K)]")?,
                e: opt_num(&c, "e", |x| x > 0.0, "must be > 0")?.unwrap_or(4.0),
            }
        }
        "johansen" => {
            let j = tv.table(&["dry_W_per_m_K", "saturated_W_per_m_K", "texture"])?;
            let dry = req_num(
                &j,
                "dry_W_per_m_K",
                "λ of the dry soil",
                |x| x > 0.0,
                "must be > 0",
            )?;
            let saturated = req_num(
                &j,
                "saturated_W_per_m_K",
                "λ of the saturated soil",
                |x| x > dry,
                &format!("must be greater than dry_W_per_m_K = {}", fmt_g(dry)),
            )?;
            let texture = j
                .req(
                    "texture",
                    "\"coarse\" or \"fine\" (the Kersten number form)",
                )?
                .choice(&["coarse", "fine"])?;
            ThermalConductivity::Johansen {
                dry,
                saturated,
                fine: texture == "fine",
            }
        }
        _ => ThermalConductivity::Constant {
            value: num(
                &tv,
                |x| (0.01..=100.0).contains(&x),
                "must be in [0.01, 100] W/(m K) (still air conducts 0.025)",
            )?,
        },
    };

    let (key, cv) = t.one_of(
        &[
            "solid_heat_capacity_J_per_m3_K",
            "particle_density_kg_per_m3",
        ],
        "solid heat capacity (or particle density with specific heat)",
    )?;
    let solid_heat_capacity = if key == "solid_heat_capacity_J_per_m3_K" {
        t.only_with(
            "solid_specific_heat_J_per_kg_K",
            "particle_density_kg_per_m3 (instead of solid_heat_capacity_J_per_m3_K)",
        )?;
        num(
            &cv,
            |x| (1.0e4..=1.0e7).contains(&x),
            "must be in [1e4, 1e7] J/(m³ K): (1 − porosity) × particle density × specific heat, per bulk volume",
        )?
    } else {
        let rho = num(
            &cv,
            |x| (1000.0..=6000.0).contains(&x),
            "must be in [1000, 6000] kg/m³",
        )?;
        let c = req_num(
            &t,
            "solid_specific_heat_J_per_kg_K",
            "specific heat of the solid grains, needed with particle_density_kg_per_m3",
            |x| (100.0..=5000.0).contains(&x),
            "must be in [100, 5000] J/(kg K)",
        )?;
        (1.0 - phi) * rho * c
    };

    let enhancement = match t.get("enhancement") {
        None => Enhancement::None,
        Some(e) if e.is_number() => {
            let x = num(
                &e,
                |x| (1.0..=20.0).contains(&x),
                "must be in [1, 20] (1 = no enhancement)",
            )?;
            if x == 1.0 {
                Enhancement::None
            } else {
                Enhancement::Constant(x)
            }
        }
        Some(e) if e.is_table() => {
            let c = e.table(&["cass_clay_fraction"])?;
            Enhancement::Cass {
                clay_fraction: req_num(
                    &c,
                    "cass_clay_fraction",
                    "clay mass fraction for the Cass et al. (1984) form",
                    |x| x > 0.0 && x <= 1.0,
                    "must be in (0, 1] (a fraction, not per cent)",
                )?,
            }
        }
        Some(e) => {
            e.choice(&["none"])?;
            Enhancement::None
        }
    };

    let specific_storage = opt_num(
        &t,
        "specific_storage_per_m",
        |s| (0.0..=1.0e-2).contains(&s),
        "must be in [0, 0.01] 1/m (sediments: about 1e-6 to 1e-3 1/m)",
    )?
    .unwrap_or(0.0);
    Ok(Soil {
        name: name.to_string(),
        retention: Retention { law, dry_end },
        saturated_conductivity: ks,
        thermal,
        solid_heat_capacity,
        enhancement,
        specific_storage,
    })
}

// ---------------------------------------------------------------- layers

fn read_layers(root: &Table, soils: &[Soil], depth: f64) -> R<Vec<Layer>> {
    let v = root.get("layers").ok_or_else(|| {
        Error::input(format!(
            "{}: missing [[layers]] (each with soil, top_m and bottom_m)",
            root.src.origin
        ))
    })?;
    if v.is_table() {
        return Err(v.err_at("write each layer as a [[layers]] table (an array of tables)"));
    }
    let items = v.array()?;
    if items.is_empty() {
        return Err(v.err("needs at least one layer"));
    }
    let soil_names: Vec<&str> = soils.iter().map(|s| s.name.as_str()).collect();
    let tol = 1e-9 * depth;
    let mut layers: Vec<Layer> = Vec::new();
    for (i, item) in items.iter().enumerate() {
        let t = item.table(&["name", "soil", "top_m", "bottom_m"])?;
        let sv = t.req("soil", "the name of a soil from [soils]")?;
        let soil_name = sv.str()?;
        let soil = soil_names
            .iter()
            .position(|n| *n == soil_name)
            .ok_or_else(|| {
                let hint = suggest(soil_name, &soil_names)
                    .map(|s| format!(" (did you mean \"{s}\"?)"))
                    .unwrap_or_default();
                sv.err(format!(
                    "no soil of that name{hint}; soils defined: {}",
                    soil_names.join(", ")
                ))
            })?;
        let name = match t.get("name") {
            Some(n) => n.str()?.to_string(),
            None => soil_name.to_string(),
        };
        if let Some(j) = layers.iter().position(|l| l.name == name) {
            return Err(t.err(format!(
                "layer name `{name}` is already used by layers[{}]; give each layer its own name",
                j + 1
            )));
        }
        let non_negative = "must be ≥ 0 (depths are positive downward from the surface)";
        let top_v = t.req("top_m", "depth of the layer top [m]")?;
        let mut top = num(&top_v, |z| z >= 0.0, non_negative)?;
        let bottom_v = t.req("bottom_m", "depth of the layer bottom [m]")?;
        let mut bottom = num(&bottom_v, |z| z >= 0.0, non_negative)?;
        if bottom <= top {
            return Err(bottom_v.err(format!("must be greater than top_m = {}", fmt_g(top))));
        }
        match layers.last() {
            None if top > tol => {
                return Err(top_v.err("the first layer must start at the surface (0 m)"))
            }
            None => top = 0.0,
            Some(prev) if (top - prev.bottom).abs() > tol => {
                let how = if top > prev.bottom {
                    "leaves a gap after"
                } else {
                    "overlaps"
                };
                return Err(top_v.err(format!(
                    "{how} layers[{i}] (bottom_m = {}); layers must be contiguous",
                    fmt_g(prev.bottom)
                )));
            }
            Some(prev) => top = prev.bottom,
        }
        if bottom > depth + tol {
            return Err(bottom_v.err(format!(
                "is below the bottom of the column (column.depth_m = {})",
                fmt_g(depth)
            )));
        }
        if (bottom - depth).abs() <= tol {
            bottom = depth;
        }
        let last = i + 1 == items.len();
        if last && bottom < depth {
            return Err(bottom_v.err(format!(
                "the last layer must end at the bottom of the column (column.depth_m = {})",
                fmt_g(depth)
            )));
        }
        if !last && bottom == depth {
            return Err(items[i + 1].err_at(format!(
                "starts at the bottom of the column (column.depth_m = {}); remove it or deepen the column",
                fmt_g(depth)
            )));
        }
        layers.push(Layer {
            name,
            soil,
            top,
            bottom,
        });
    }
    Ok(layers)
}

// ---------------------------------------------------------------- physics

const PHYSICS_KEYS: &[&str] = &[
    "vapor",
    "kinetic_rate_per_s",
    "diffusivity",
    "air_pressure_Pa",
    "thermal_liquid_gain",
    "viscosity_correction",
    "reference_temperature_C",
    "face_averaging",
];

fn read_physics(root: &Table) -> R<Physics> {
    let t = optional_section(root, "physics", PHYSICS_KEYS)?;
    let mode = match t.get("vapor") {
        Some(v) => v.choice(&["equilibrium", "kinetic"])?,
        None => "equilibrium",
    };
    let vapor_mode = if mode == "kinetic" {
        VaporMode::Kinetic {
            rate: req_num(
                &t,
                "kinetic_rate_per_s",
                "phase-change rate coefficient b [1/s], needed with vapor = \"kinetic\"",
                |b| b > 0.0,
                "must be > 0",
            )?,
        }
    } else {
        t.only_with("kinetic_rate_per_s", "vapor = \"kinetic\"")?;
        VaporMode::Equilibrium
    };
    let diffusivity = match t.get("diffusivity") {
        None => DEFAULT_DIFFUSIVITY,
        Some(v) if v.is_table() => {
            let d = v.table(&["d0_m2_per_s", "t0_C", "p0_Pa", "exponent"])?;
            let def = DEFAULT_DIFFUSIVITY;
            Diffusivity {
                d0: opt_num(
                    &d,
                    "d0_m2_per_s",
                    |x| x > 0.0 && x < 1e-3,
                    "must be in (0, 1e-3) m²/s",
                )?
                .unwrap_or(def.d0),
                t0: match d.get("t0_C") {
                    Some(t0) => {
                        num(&t0, |c| c > -CELSIUS_ZERO, "must be above absolute zero")?
                            + CELSIUS_ZERO
                    }
                    None => def.t0,
                },
                p0: opt_num(&d, "p0_Pa", |p| p > 0.0, "must be > 0")?.unwrap_or(def.p0),
                exponent: opt_num(
                    &d,
                    "exponent",
                    |e| (0.0..=3.0).contains(&e),
                    "must be in [0, 3]",
                )?
                .unwrap_or(def.exponent),
            }
        }
        Some(v) => named_diffusivity(v.choice(&["massman-1998", "marrero-mason-1972"])?),
    };
    let air_pressure = opt_num(
        &t,
        "air_pressure_Pa",
        |p| (1.0e4..=1.0e6).contains(&p),
        "must be in [1e4, 1e6] Pa (in pascal, not kPa)",
    )?
    .unwrap_or(101_325.0);
    let thermal_liquid_gain = opt_num(
        &t,
        "thermal_liquid_gain",
        |g| g > 0.0 && g <= 100.0,
        "must be in (0, 100] (omit the key to switch the thermal liquid flux off)",
    )?;
    let viscosity_correction = t.bool_or("viscosity_correction", true)?;
    let reference_temperature = match t.get("reference_temperature_C") {
        Some(v) => temperature(&v)?,
        None => 20.0 + CELSIUS_ZERO,
    };
    if !viscosity_correction {
        t.only_with("reference_temperature_C", "viscosity_correction = true")?;
    }
    let face_conductivity = match t.get("face_averaging") {
        None => FaceAveraging::Arithmetic,
        Some(v) => match v.choice(&["arithmetic", "geometric", "harmonic", "upstream"])? {
            "geometric" => FaceAveraging::Geometric,
            "harmonic" => FaceAveraging::Harmonic,
            "upstream" => FaceAveraging::Upstream,
            _ => FaceAveraging::Arithmetic,
        },
    };
    Ok(Physics {
        cell_average_retention: false,
        vapor_mode,
        diffusivity,
        air_pressure,
        thermal_liquid_gain,
        viscosity_correction,
        reference_temperature,
        face_conductivity,
    })
}

// ---------------------------------------------------------------- boundaries

const SURFACE_KEYS: &[&str] = &[
    "from_year",
    "temperature_C",
    "heat_flux_W_per_m2",
    "head_m",
    "flux_mm_per_year",
    "ponding_head_m",
    "pond",
    "max_ponding_depth_m",
    "relative_humidity",
    "resistance_s_per_m",
    "no_flow",
];

const BOTTOM_KEYS: &[&str] = &[
    "from_year",
    "temperature_C",
    "geothermal_flux_W_per_m2",
    "head_m",
    "free_drainage",
    "no_flow",
];

/// `flag = true` (false is not a condition).
fn flag(v: &Value) -> R<()> {
    if v.bool()? {
        Ok(())
    } else {
        Err(v.err("write the key only to choose this condition (= true)"))
    }
}

/// A surface that stores ponded water (`pond = true`): `flux_mm_per_year` of water
/// applied (≥ 0), an optional `max_ponding_depth_m` above which it runs off, and an
/// optional `relative_humidity` (with `resistance_s_per_m`) for vapour exchange.
fn read_pond(t: &Table) -> R<SurfaceWater> {
    for k in ["head_m", "no_flow", "ponding_head_m"] {
        t.only_with(k, "a surface without `pond = true`")?;
    }
    let v = t.req("flux_mm_per_year", "water applied to a ponding surface")?;
    let inflow = schedules::read(&v, "flux_mm_per_year", &WATER_FLUX)?;
    if inflow.bounds().0 < 0.0 {
        return Err(v.err(format!(
            "{} mm/yr: the water applied to a ponding surface must be ≥ 0 (it leaves by \
             infiltration, runoff or, with `relative_humidity`, evaporation)",
            inflow.bounds().0 / WATER_FLUX.scale
        )));
    }
    let max_depth = opt_num(
        t,
        "max_ponding_depth_m",
        |h| (0.0..=100.0).contains(&h),
        "must be in [0, 100] m",
    )?;
    if t.get("relative_humidity").is_none() {
        t.only_with("resistance_s_per_m", "relative_humidity (open to the air)")?;
    }
    let air = t
        .get("relative_humidity")
        .map(|v| -> R<_> {
            let rh = schedules::read(&v, "relative_humidity", &RELATIVE_HUMIDITY)?;
            // Standing water evaporates at (ρv,sat − ρv,air)/ra: without a resistance
            // the rate has no bound.
            let r = t.req(
                "resistance_s_per_m",
                "a ponding surface open to the air (standing water evaporates through the \
                 air's boundary layer: give its resistance with `relative_humidity`)",
            )?;
            Ok((rh, schedules::read(&r, "resistance_s_per_m", &RESISTANCE)?))
        })
        .transpose()?;
    Ok(SurfaceWater::Pond {
        inflow,
        max_depth,
        air,
    })
}

fn read_surface(t: &Table) -> R<SurfaceBc> {
    let (key, v) = t.one_of(
        &["temperature_C", "heat_flux_W_per_m2"],
        "surface heat condition",
    )?;
    let heat = if key == "temperature_C" {
        SurfaceHeat::Temperature(schedules::read(&v, key, &TEMPERATURE)?)
    } else {
        SurfaceHeat::Flux(schedules::read(&v, key, &HEAT_FLUX)?)
    };
    let pond = match t.get("pond") {
        Some(v) => v.bool()?,
        None => false,
    };
    if pond {
        return Ok(SurfaceBc {
            heat,
            water: read_pond(t)?,
        });
    }
    t.only_with("max_ponding_depth_m", "`pond = true`")?;
    let (key, v) = t.one_of(
        &["head_m", "flux_mm_per_year", "relative_humidity", "no_flow"],
        "surface moisture condition",
    )?;
    if key != "flux_mm_per_year" {
        t.only_with("ponding_head_m", "flux_mm_per_year")?;
    }
    if key != "relative_humidity" {
        t.only_with("resistance_s_per_m", "relative_humidity (open to the air)")?;
    }
    let water = match key {
        "head_m" => SurfaceWater::Head(schedules::read(&v, key, &HEAD)?),
        "flux_mm_per_year" => SurfaceWater::Flux {
            flux: schedules::read(&v, key, &WATER_FLUX)?,
            ponding_head: opt_num(
                t,
                "ponding_head_m",
                |h| (0.0..=100.0).contains(&h),
                "must be in [0, 100] m",
            )?
            .unwrap_or(0.0),
        },
        "relative_humidity" => SurfaceWater::Atmosphere {
            relative_humidity: schedules::read(&v, key, &RELATIVE_HUMIDITY)?,
            resistance: t
                .get("resistance_s_per_m")
                .map(|r| schedules::read(&r, "resistance_s_per_m", &RESISTANCE))
                .transpose()?,
        },
        _ => {
            flag(&v)?;
            SurfaceWater::NoFlow
        }
    };
    Ok(SurfaceBc { heat, water })
}

fn read_bottom(t: &Table) -> R<BottomBc> {
    let (key, v) = t.one_of(
        &["temperature_C", "geothermal_flux_W_per_m2"],
        "bottom heat condition",
    )?;
    let heat = if key == "temperature_C" {
        BottomHeat::Temperature(schedules::read(&v, key, &TEMPERATURE)?)
    } else {
        BottomHeat::GeothermalFlux(schedules::read(&v, key, &GEOTHERMAL_FLUX)?)
    };
    let (key, v) = t.one_of(
        &["head_m", "free_drainage", "no_flow"],
        "bottom moisture condition",
    )?;
    let water = match key {
        "head_m" => BottomWater::WaterTable(schedules::read(&v, key, &HEAD)?),
        "free_drainage" => {
            flag(&v)?;
            BottomWater::FreeDrainage
        }
        _ => {
            flag(&v)?;
            BottomWater::NoFlow
        }
    };
    Ok(BottomBc { heat, water })
}

/// A boundary given as one table (one period) or as an array of tables, each from its
/// `from_year` on.
/// In a case with a ponding surface, a pond may stand in any later period, and standing
/// water evaporates through the air's boundary layer alone: every period open to the air
/// must give that resistance.
fn pond_periods_open_through_a_resistance(root: &Table, surface: &Periods<SurfaceBc>) -> R<()> {
    let Some(v) = root.get("surface") else {
        return Ok(());
    };
    let items = if v.is_table() {
        vec![v.clone()]
    } else {
        v.array()?
    };
    for (item, period) in items.iter().zip(&surface.periods) {
        if let SurfaceWater::Atmosphere {
            resistance: None, ..
        } = period.1.water
        {
            return Err(item.table(SURFACE_KEYS)?.err(
                "relative_humidity without resistance_s_per_m in a case with a ponding \
                 surface: a pond standing from an earlier period evaporates through the air's \
                 boundary layer, so give its resistance (s/m) in every period open to the air",
            ));
        }
    }
    Ok(())
}

pub(super) fn read_periods<T>(
    root: &Table,
    key: &str,
    time: &TimeControl,
    allowed: &[&str],
    read_one: impl Fn(&Table) -> R<T>,
) -> R<Periods<T>> {
    let v = root.get(key).ok_or_else(|| {
        Error::input(format!(
            "{}: missing section [{key}] (the {key} boundary conditions)",
            root.src.origin
        ))
    })?;
    let items = if v.is_table() {
        vec![v.clone()]
    } else {
        let items = v.array().map_err(|_| {
            v.err("expected a table [..] or an array of tables [[..]], one per period")
        })?;
        if items.is_empty() {
            return Err(v.err("needs at least one period"));
        }
        items
    };
    let (start, end) = (time.year(time.start), time.year(time.end));
    let mut periods = Vec::new();
    let mut prev_from = f64::NEG_INFINITY;
    for (i, item) in items.iter().enumerate() {
        let t = item.table(allowed)?;
        let from = t.get("from_year");
        let from_s = match (i, from) {
            (0, None) => f64::NEG_INFINITY,
            (0, Some(f)) => {
                num(
                    &f,
                    |y| y <= start,
                    &format!(
                        "the first period must apply from the start of the run (time.start_year = {}); omit from_year or make it ≤ {}",
                        fmt_g(start),
                        fmt_g(start)
                    ),
                )?;
                f64::NEG_INFINITY
            }
            (_, None) => {
                return Err(t.err("missing key from_year (when this period starts, in years)"))
            }
            (_, Some(f)) => {
                let y = num(
                    &f,
                    |y| y > start && y < end,
                    &format!(
                        "must be inside the run ({} < from_year < {} years)",
                        fmt_g(start),
                        fmt_g(end)
                    ),
                )?;
                if y <= prev_from {
                    return Err(f.err(format!(
                        "must be after the previous period's from_year ({}); periods are in time order",
                        fmt_g(prev_from)
                    )));
                }
                prev_from = y;
                time.seconds(y)
            }
        };
        periods.push((from_s, read_one(&t)?));
    }
    Ok(Periods { periods })
}

// ---------------------------------------------------------------- initial state

const INITIAL_KEYS: &[&str] = &[
    "state",
    "surface_temperature_C",
    "gradient_K_per_m",
    "surface",
    "bottom",
    "csv",
    "period_year",
    "periodic_tolerance",
    "max_periods",
];

/// Default relative tolerance of the periodic steady state's last correction.
pub const DEFAULT_PERIODIC_TOLERANCE: f64 = 1.0e-3;
/// Default most periods integrated for the periodic steady state.
pub const DEFAULT_MAX_PERIODS: usize = 200;

#[allow(clippy::too_many_arguments)]
fn read_initial(
    root: &Table,
    time: &TimeControl,
    depth: f64,
    surface: &Periods<SurfaceBc>,
    bottom: &Periods<BottomBc>,
    soils: &[Soil],
    layers: &[Layer],
) -> R<InitialState> {
    let t = optional_section(root, "initial", INITIAL_KEYS)?;
    let state = match t.get("state") {
        Some(v) => v.choice(&["hydrostatic", "steady", "periodic", "profile"])?,
        None => "hydrostatic",
    };
    let spun_up = state == "steady" || state == "periodic";
    if !spun_up {
        t.only_with("surface", "state = \"steady\" or \"periodic\"")?;
        t.only_with("bottom", "state = \"steady\" or \"periodic\"")?;
    }
    let spin_up = if state == "periodic" {
        Some(read_periodic(&t)?)
    } else {
        for key in ["period_year", "periodic_tolerance", "max_periods"] {
            t.only_with(key, "state = \"periodic\"")?;
        }
        None
    };
    if state == "profile" {
        for key in ["surface_temperature_C", "gradient_K_per_m"] {
            t.only_with(key, "state = \"hydrostatic\", \"steady\" or \"periodic\"")?;
        }
        let file = t.req("csv", "the profile table, a CSV file")?;
        return read_profile(&file, depth, soils, layers);
    }
    t.only_with("csv", "state = \"profile\"")?;

    let (surf, bot) = if spun_up {
        let s = match t.get("surface") {
            Some(v) => read_surface(&v.table(&SURFACE_KEYS[1..])?)?,
            None => surface.at(time.start).clone(),
        };
        let b = match t.get("bottom") {
            Some(v) => read_bottom(&v.table(&BOTTOM_KEYS[1..])?)?,
            None => bottom.at(time.start).clone(),
        };
        (s, b)
    } else {
        (
            surface.at(time.start).clone(),
            bottom.at(time.start).clone(),
        )
    };

    if state == "hydrostatic" && !matches!(bot.water, BottomWater::WaterTable(_)) {
        return Err(t.err(
            "state = \"hydrostatic\" needs a water table at the bottom at the start of the run \
             (bottom.head_m); use state = \"profile\" otherwise",
        ));
    }
    let surface_temperature = match t.get("surface_temperature_C") {
        Some(v) => temperature(&v)?,
        None => match &surf.heat {
            SurfaceHeat::Temperature(s) => s.value(time.start),
            SurfaceHeat::Flux(_) => {
                return Err(t.err(
                    "missing key surface_temperature_C: the surface heat condition is a flux, \
                     so the initial surface temperature must be given",
                ))
            }
        },
    };
    let gradient =
        match t.get("gradient_K_per_m") {
            Some(v) => num(&v, |g| g.abs() <= 1.0, "must be in [-1, 1] K/m")?,
            None => match &bot.heat {
                BottomHeat::Temperature(s) => (s.value(time.start) - surface_temperature) / depth,
                BottomHeat::GeothermalFlux(_) => return Err(t.err(
                    "missing key gradient_K_per_m: the bottom heat condition is a flux, so the \
                     initial temperature gradient must be given (flux / thermal conductivity)",
                )),
            },
        };
    let bottom_c = surface_temperature + gradient * depth - CELSIUS_ZERO;
    if !(T_MIN_C..=T_MAX_C).contains(&bottom_c) {
        return Err(t.err(format!(
            "the initial temperature reaches {} °C at the bottom; it must stay in [{T_MIN_C}, {T_MAX_C}] °C{T_NOTE}",
            fmt_g(bottom_c)
        )));
    }
    if spin_up.is_some()
        && matches!(surf.water, SurfaceWater::NoFlow)
        && matches!(bot.water, BottomWater::NoFlow)
    {
        return Err(t.err(
            "state = \"periodic\": the column is closed to water at both ends, so its periodic state is not unique (it keeps whatever water it starts with); open one end (e.g. bottom.head_m) or use state = \"hydrostatic\" or \"profile\"",
        ));
    }
    if let Some(spin_up) = &spin_up {
        // Tables and steps repeat their first period; a sinusoid must repeat whole.
        for (what, sched) in surf.schedules().chain(bot.schedules()) {
            if let Some(why) = super::cycles::sine_not_dividing(sched, spin_up.period) {
                let pv = t.req("period_year", "the forcing period [years]")?;
                return Err(pv.err(format!(
                    "the spin-up's forcing must repeat with this period, but {what} has {why} (allowed: constants, sinusoids whose periods divide it, and tables or steps, whose first period is repeated)"
                )));
            }
        }
    }
    Ok(if let Some(spin_up) = spin_up {
        InitialState::Periodic {
            surface: surf,
            bottom: bot,
            surface_temperature,
            gradient,
            spin_up,
        }
    } else if state == "steady" {
        InitialState::Steady {
            surface: surf,
            bottom: bot,
            surface_temperature,
            gradient,
        }
    } else {
        InitialState::Hydrostatic {
            surface_temperature,
            gradient,
        }
    })
}

/// The keys of `state = "periodic"`: the period, the tolerance, the most periods.
fn read_periodic(t: &Table) -> R<PeriodicSpinUp> {
    let pv = t.req(
        "period_year",
        "the forcing period [years] (state = \"periodic\")",
    )?;
    let period = num(
        &pv,
        |p| p > 0.0 && p.is_finite(),
        "must be a positive number of years (the forcing's period)",
    )?;
    let tolerance = opt_num(
        t,
        "periodic_tolerance",
        |x| (1e-8..=1.0).contains(&x),
        "must be 1e-8 to 1 (relative)",
    )?
    .unwrap_or(DEFAULT_PERIODIC_TOLERANCE);
    let max_periods = match t.get("max_periods") {
        Some(v) => v.usize_in(2, 100_000, "periods integrated at most")?,
        None => DEFAULT_MAX_PERIODS,
    };
    Ok(PeriodicSpinUp {
        period: period * SECONDS_PER_YEAR,
        tolerance,
        max_periods,
    })
}

fn read_profile(file: &Value, depth: f64, soils: &[Soil], layers: &[Layer]) -> R<InitialState> {
    let header = Header::OneOf {
        required: &["depth_m", "temperature_C"],
        alternatives: &["head_m", "liquid_content"],
    };
    let (cols, names) = csvfile::read(file, header, "initial profile")?;
    cols.depth_profile(depth)?;
    let mut temperature = Vec::with_capacity(cols.lines.len());
    for (row, &c) in cols.columns[1].iter().enumerate() {
        if !(T_MIN_C..=T_MAX_C).contains(&c) {
            return Err(cols.err(
                row,
                format!("temperature_C = {c}: must be in [{T_MIN_C}, {T_MAX_C}] °C{T_NOTE}"),
            ));
        }
        temperature.push(c + CELSIUS_ZERO);
    }
    let values = cols.columns[2].clone();
    let moisture = if names[2] == "head_m" {
        for (row, &h) in values.iter().enumerate() {
            if !(HEAD.lo..=HEAD.hi).contains(&h) {
                return Err(cols.err(row, format!("head_m = {h}: must be in [-1e6, 1000] m")));
            }
        }
        ProfileMoisture::Head(values)
    } else {
        for (row, (&z, &theta)) in cols.columns[0].iter().zip(&values).enumerate() {
            let layer = layers
                .iter()
                .find(|l| z < l.bottom)
                .or(layers.last())
                .ok_or_else(|| cols.err(row, "no layer"))?;
            let soil = &soils[layer.soil];
            let (lo, hi) = (
                if soil.retention.dry_end.is_some() {
                    0.0
                } else {
                    soil.retention.law.theta_r()
                },
                soil.retention.law.theta_s(),
            );
            if !(theta > lo && theta <= hi) {
                return Err(cols.err(
                    row,
                    format!(
                        "liquid_content = {theta}: must be in ({}, {}] for soil `{}` of layer `{}`",
                        fmt_g(lo),
                        fmt_g(hi),
                        soil.name,
                        layer.name
                    ),
                ));
            }
        }
        ProfileMoisture::LiquidContent(values)
    };
    Ok(InitialState::Profile {
        depth: cols.columns[0].clone(),
        temperature,
        moisture,
    })
}

// ---------------------------------------------------------------- time, output, checkpoints

const TIME_KEYS: &[&str] = &[
    "start_year",
    "end_year",
    "initial_step_year",
    "min_step_year",
    "max_step_year",
    "method",
    "max_order",
    "rtol",
    "atol_temperature_K",
    "atol_head_m",
    "atol_vapor_kg_per_m3",
    "atol_liquid_content",
    "max_newton_iterations",
    "newton_tolerance",
    "balance_tolerance",
    "cycle_skipping",
    "memory",
];

/// Default of `[time] balance_tolerance`: the cumulative balance error of a run relative
/// to its throughput. At 2e-5 it binds on none of the demo cases (the largest of theirs
/// is ~1e-5, in the first steps of `glacial-to-arid`, where little has crossed the
/// boundaries yet), so their results are bitwise those of before; at 1e-5 and 1e-6 it
/// moved that case's bottom flux by up to 1.6e-4 of its value where it is ~8e-10
/// kg m⁻² s⁻¹ (profiles by 1e-8), at 1e-8 the benchmark took 21 % more Newton
/// iterations.
pub const DEFAULT_BALANCE_TOLERANCE: f64 = 2e-5;

/// Largest |year| a case may give (start, end): 1e12 years, about 70 times the age of the
/// universe; beyond it the seconds of a span lose the resolution of whole years.
pub const MAX_ABS_YEAR: f64 = 1.0e12;

/// Steps must be at least this many units in the last place of the run's largest time
/// (from the time origin), so that every step moves the time by its own size to 1/8.
pub const TIME_RESOLUTION_ULPS: f64 = 4.0;

/// Default specific storage of the soils of a case with a ponding surface [1/m] (0
/// otherwise; sediments about 1e-6 to 1e-3 1/m, common practice).
pub const PONDING_SPECIFIC_STORAGE: f64 = 1.0e-4;

/// Default Newton iteration limit of a case with a ponding surface (15 otherwise).
pub const PONDING_MAX_NEWTON: usize = 60;

fn read_time(root: &Table) -> R<TimeControl> {
    let t = section(root, "time", TIME_KEYS, "the time span: end_year")?;
    let in_range = |y: f64| y.is_finite() && y.abs() <= MAX_ABS_YEAR;
    let range_msg = format!(
        "must be a finite year within ±{} (the time keeping's range)",
        fmt_g(MAX_ABS_YEAR)
    );
    let start = match t.get("start_year") {
        Some(v) => num(&v, in_range, &range_msg)?,
        None => 0.0,
    };
    let end_v = t.req("end_year", "when the run ends [years]")?;
    num(&end_v, in_range, &range_msg)?;
    let end = num(
        &end_v,
        |e| e > start,
        &format!("must be after start_year ({})", fmt_g(start)),
    )?;
    let span = end - start;
    // The smallest step the time keeping resolves in this run: a few units in the last
    // place of its largest time, counted from the time origin.
    let origin = crate::model::time_origin_year(start);
    let resolution =
        TIME_RESOLUTION_ULPS * f64::EPSILON * (start - origin).abs().max((end - origin).abs());
    let method = match t.get("method") {
        Some(v) => v.choice(&["backward-euler", "bdf"])?,
        None => "bdf",
    };
    // "lean": no kept evaluations with derivatives, and BDF up to order 2 unless
    // max_order says otherwise (see DEVELOPERS.md, "Memory per cell").
    let lean_memory = match t.get("memory") {
        Some(v) => v.choice(&["fast", "lean"])? == "lean",
        None => false,
    };
    let method = if method == "bdf" {
        let max_order = match t.get("max_order") {
            Some(v) => {
                let k = v.usize()?;
                if !(1..=5).contains(&k) {
                    return Err(v.err("must be 1 to 5"));
                }
                k
            }
            None if lean_memory => 2,
            None => 5,
        };
        Method::Bdf { max_order }
    } else {
        t.only_with("max_order", "method = \"bdf\"")?;
        Method::BackwardEuler
    };
    let step = |key: &str| {
        opt_num(
            &t,
            key,
            |x| x > 0.0 && x >= resolution,
            &format!(
                "must be > 0 and at least {} yr, the smallest step the time keeping resolves in a run from year {} to {}",
                fmt_g(resolution),
                fmt_g(start),
                fmt_g(end)
            ),
        )
    };
    // Error control sets BDF's steps, up to the whole span (near a steady state the step
    // grows to the end); backward Euler's heuristics are capped at 1/100 of the span.
    let default_max = match method {
        Method::Bdf { .. } => span,
        Method::BackwardEuler => span / 100.0,
    };
    let dt_max = step("max_step_year")?.unwrap_or(default_max);
    let dt_initial = step("initial_step_year")?.unwrap_or(1.0e-6_f64.max(resolution).min(dt_max));
    let dt_min = step("min_step_year")?.unwrap_or(1.0e-9_f64.max(resolution).min(dt_initial));
    if dt_initial > dt_max {
        let key = if t.has("initial_step_year") {
            "initial_step_year"
        } else {
            "max_step_year"
        };
        return Err(t.req(key, "")?.err(format!(
            "needs min_step_year ≤ initial_step_year ≤ max_step_year (here {} > {})",
            fmt_g(dt_initial),
            fmt_g(dt_max)
        )));
    }
    if dt_min > dt_initial {
        let key = if t.has("min_step_year") {
            "min_step_year"
        } else {
            "initial_step_year"
        };
        return Err(t.req(key, "")?.err(format!(
            "needs min_step_year ≤ initial_step_year ≤ max_step_year (here {} > {})",
            fmt_g(dt_min),
            fmt_g(dt_initial)
        )));
    }
    let tol = |key: &str, default: f64| -> R<f64> {
        Ok(opt_num(&t, key, |x| x > 0.0, "must be > 0")?.unwrap_or(default))
    };
    let rtol = opt_num(&t, "rtol", |x| x > 0.0 && x < 1.0, "must be in (0, 1)")?.unwrap_or(1.0e-3);
    let max_newton = match t.get("max_newton_iterations") {
        Some(v) => {
            let k = v.usize()?;
            if !(1..=1000).contains(&k) {
                return Err(v.err("must be 1 to 1000"));
            }
            k
        }
        None => 15,
    };
    let newton_tolerance = opt_num(
        &t,
        "newton_tolerance",
        |x| (1e-14..=1e-4).contains(&x),
        "must be 1e-14 to 1e-4",
    )?
    .unwrap_or(crate::solve::newton::DEFAULT_RESIDUAL_TOL);
    let balance_tolerance = opt_num(
        &t,
        "balance_tolerance",
        |x| (1e-14..=1e-2).contains(&x),
        "must be 1e-14 to 1e-2",
    )?
    .unwrap_or(DEFAULT_BALANCE_TOLERANCE);
    let cycle_skipping = super::cycles::read(&t, start, end)?;
    let origin = crate::model::time_origin_year(start);
    Ok(TimeControl {
        epoch_year: origin,
        start: (start - origin) * SECONDS_PER_YEAR,
        end: (end - origin) * SECONDS_PER_YEAR,
        dt_initial: dt_initial * SECONDS_PER_YEAR,
        dt_min: dt_min * SECONDS_PER_YEAR,
        dt_max: dt_max * SECONDS_PER_YEAR,
        method,
        rtol,
        atol_temperature: tol("atol_temperature_K", 1.0e-3)?,
        atol_head: tol("atol_head_m", 1.0e-3)?,
        atol_vapor: tol("atol_vapor_kg_per_m3", 1.0e-8)?,
        atol_theta: tol("atol_liquid_content", 1.0e-5)?,
        max_newton,
        newton_tolerance,
        balance_tolerance,
        cycle_skipping,
        lean_memory,
    })
}

const OUTPUT_KEYS: &[&str] = &[
    "folder",
    "times_year",
    "every_year",
    "log_from_year",
    "log_per_decade",
    "log_origin_year",
    "series_every",
];

/// Most snapshot times a run may ask for.
pub const MAX_SNAPSHOTS: usize = 100_000;

fn read_output(root: &Table, time: &TimeControl) -> R<OutputControl> {
    let src = root.src;
    let t = optional_section(root, "output", OUTPUT_KEYS)?;
    let folder = match t.get("folder") {
        Some(v) => {
            let f = v.str()?;
            if f.trim().is_empty() {
                return Err(v.err("must not be empty"));
            }
            src.base_dir.join(f)
        }
        None => default_output_folder(src.origin, src.base_dir),
    };
    // Snapshot times are kept as years since the time origin (`rel`), computed from
    // integers where they are spaced, so they are exact to the run's own resolution at
    // any epoch.
    let (rel0, rel_end) = (time.start / SECONDS_PER_YEAR, time.end / SECONDS_PER_YEAR);
    let origin = time.epoch_year;
    let (start, end) = (origin + rel0, origin + rel_end);
    let span = end - start;
    let too_many = |v: &Value| {
        v.err(format!(
            "gives more than {MAX_SNAPSHOTS} snapshot times; use a coarser spacing"
        ))
    };
    let mut rel: Vec<f64> = Vec::new();
    if let Some(v) = t.get("times_year") {
        for item in v.array()? {
            let y = num(
                &item,
                |y| y >= start && y <= end,
                &format!(
                    "is outside the run (time.start_year = {} to time.end_year = {})",
                    fmt_g(start),
                    fmt_g(end)
                ),
            )?;
            rel.push(y - origin);
        }
    }
    if let Some(v) = t.get("every_year") {
        let every = positive(&v)?;
        if span / every > MAX_SNAPSHOTS as f64 {
            return Err(too_many(&v));
        }
        let mut k = 1.0;
        while rel0 + k * every < rel_end {
            rel.push(rel0 + k * every);
            k += 1.0;
        }
    }
    match (t.get("log_from_year"), t.get("log_per_decade")) {
        (None, None) => t.only_with("log_origin_year", "log_from_year and log_per_decade")?,
        (Some(first_v), Some(per_v)) => {
            let origin = match t.get("log_origin_year") {
                Some(v) => num(
                    &v,
                    |y| y >= start && y < end,
                    &format!(
                        "must be inside the run ({} ≤ log_origin_year < {} years)",
                        fmt_g(start),
                        fmt_g(end)
                    ),
                )?,
                None => start,
            };
            let first = num(
                &first_v,
                |y| y > 0.0 && origin + y < end,
                &format!(
                    "must be > 0 and less than {} yr (it counts from log_origin_year = {})",
                    fmt_g(end - origin),
                    fmt_g(origin)
                ),
            )?;
            let per = per_v.usize()?;
            if !(1..=100).contains(&per) {
                return Err(per_v.err("must be 1 to 100"));
            }
            let decades = ((end - origin) / first).log10();
            if decades * per as f64 > MAX_SNAPSHOTS as f64 {
                return Err(too_many(&per_v));
            }
            let mut j = 0usize;
            loop {
                let factor =
                    10f64.powi((j / per) as i32) * 10f64.powf((j % per) as f64 / per as f64);
                let y = (origin - time.epoch_year) + first * factor;
                if y >= rel_end {
                    break;
                }
                rel.push(y);
                j += 1;
            }
        }
        (Some(_), None) => t
            .req("log_per_decade", "snapshots per decade, with log_from_year")
            .map(|_| ())?,
        (None, Some(_)) => t
            .req(
                "log_from_year",
                "first log-spaced snapshot, in years after the start, with log_per_decade",
            )
            .map(|_| ())?,
    }
    rel.push(rel_end);
    rel.sort_by(f64::total_cmp);
    let tol = 1e-9 * span;
    let mut snapshot_times: Vec<f64> = Vec::with_capacity(rel.len());
    for y in rel {
        if snapshot_times.last().is_some_and(|&p| y - p <= tol) {
            continue;
        }
        snapshot_times.push(y);
    }
    if let Some(last) = snapshot_times.last_mut() {
        // The end time exactly (a near-duplicate listed time is merged into it).
        *last = rel_end;
    }
    if snapshot_times.len() > MAX_SNAPSHOTS {
        return Err(t.err(format!(
            "{} snapshot times; at most {MAX_SNAPSHOTS}",
            snapshot_times.len()
        )));
    }
    let series_every = match t.get("series_every") {
        Some(v) => v.usize_in(1, 1_000_000_000, "1 = every step")?,
        None => 1,
    };
    Ok(OutputControl {
        folder,
        snapshot_times: snapshot_times
            .iter()
            .map(|y| y * SECONDS_PER_YEAR)
            .collect(),
        series_every,
    })
}

fn read_checkpoint(root: &Table) -> R<CheckpointControl> {
    let t = optional_section(root, "checkpoint", &["every_year", "every_minutes", "keep"])?;
    let keep = match t.get("keep") {
        Some(v) => v.usize_in(1, 1_000_000, "how many of the newest checkpoints are kept")?,
        None => 3,
    };
    Ok(CheckpointControl {
        every: opt_num(&t, "every_year", |x| x > 0.0, "must be > 0")?.map(|y| y * SECONDS_PER_YEAR),
        wall_every: opt_num(&t, "every_minutes", |x| x > 0.0, "must be > 0")?.map(|m| m * 60.0),
        keep,
    })
}
