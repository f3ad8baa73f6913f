//! The verification cases, one file each. Each case file lives in
//! `validation/<name>/case.toml` (with a README stating what it checks, the PDE, the
//! conditions, the source and the tolerance) and is embedded ([`Files`]). A case function
//! loads it ([`load`], [`load_variant`]: a scratch folder with its CSV tables, the case
//! parsed with the overrides of its fast variant or of a refinement level), runs it
//! through the ordinary run path (`run::run`, or `run::initial_unknowns` /
//! `run::steady_state` for steady problems), compares with its reference and returns
//! the checks and figures.

use super::reference as r;
use super::srivastava_yeh as sy;
use super::{Case, CaseResult, Check, Figure, Series, Variant};
use crate::case::Override;
use crate::error::{Error, Result};
use crate::model::{InitialState, Model, ProfileMoisture};
use crate::physics::System;
use crate::props::constants::{CELSIUS_ZERO, SECONDS_PER_YEAR, WATER_DENSITY};
use crate::props::water::{relative_humidity, saturated_vapor_density};
use crate::run::{self, RunOptions, RunSummary};
use crate::solve::linear::SolverKind;
use std::path::PathBuf;
use std::sync::atomic::{AtomicUsize, Ordering};

macro_rules! case {
    ($name:literal, $title:literal, $f:expr) => {
        Case {
            name: $name,
            title: $title,
            readme: include_str!(concat!("../../../validation/", $name, "/README.md")),
            run: $f,
        }
    };
}

/// The embedded files of a validation case: `validation/<name>/case.toml` and the CSV
/// tables it reads (written next to it in the scratch folder).
macro_rules! files {
    ($name:literal $(, $csv:literal)*) => {
        Files {
            name: $name,
            case: include_str!(concat!("../../../validation/", $name, "/case.toml")),
            csv: &[$(($csv, include_str!(concat!("../../../validation/", $name, "/", $csv)))),*],
        }
    };
}

mod balance_closure;
mod closed_column_loop;
mod cycle_skipping;
mod drying_front;
mod fick_vapour_diffusion;
mod gardner_evaporation;
mod green_ampt;
mod kinetic_to_equilibrium;
mod linearised_infiltration;
mod mesh_order;
mod moving_water_table;
mod periodic_state;
mod periodic_surface;
mod ponded_darcy_column;
mod ponding_cycle;
mod root_uptake;
mod solute_advection_dispersion;
mod solute_balance_closure;
mod solute_closed_drying;
mod solute_diffusion_step;
mod srivastava_yeh_infiltration;
mod steady_chloride;
mod surface_step;
mod time_order;
mod two_layer_geotherm;
mod water_properties;

use balance_closure::balance_closure;
use closed_column_loop::closed_column_loop;
use cycle_skipping::cycle_skipping;
use drying_front::drying_front;
use fick_vapour_diffusion::fick_vapour_diffusion;
use gardner_evaporation::gardner_evaporation;
use green_ampt::green_ampt;
use kinetic_to_equilibrium::kinetic_to_equilibrium;
use linearised_infiltration::linearised_infiltration;
use mesh_order::mesh_order;
use moving_water_table::moving_water_table;
use periodic_state::periodic_state;
use periodic_surface::periodic_surface;
use ponded_darcy_column::ponded_darcy_column;
use ponding_cycle::ponding_cycle;
use root_uptake::root_uptake;
use solute_advection_dispersion::solute_advection_dispersion;
use solute_balance_closure::solute_balance_closure;
use solute_closed_drying::solute_closed_drying;
use solute_diffusion_step::solute_diffusion_step;
use srivastava_yeh_infiltration::srivastava_yeh_infiltration;
use steady_chloride::steady_chloride;
use surface_step::surface_step;
use time_order::time_order;
use two_layer_geotherm::two_layer_geotherm;
use water_properties::water_properties;

/// Every case, in report order.
pub fn all() -> Vec<Case> {
    vec![
        case!(
            "two-layer-geotherm",
            "steady geotherm through two layers: piecewise-linear T, continuous heat flux",
            two_layer_geotherm
        ),
        case!(
            "surface-step",
            "surface temperature step on a linear geotherm: erfc solution",
            surface_step
        ),
        case!(
            "periodic-surface",
            "periodic surface temperature: amplitude e^(-z/d), phase lag z/d",
            periodic_surface
        ),
        case!(
            "cycle-skipping",
            "cycle skipping: a decaying temperature excess under a yearly surface wave, most years jumped",
            cycle_skipping
        ),
        case!(
            "periodic-state",
            "periodic steady state of a yearly surface wave, found before the run: the start state",
            periodic_state
        ),
        case!(
            "gardner-evaporation",
            "steady evaporation from a water table, exponential K (Gardner 1958)",
            gardner_evaporation
        ),
        case!(
            "srivastava-yeh-infiltration",
            "transient infiltration toward a water table (Srivastava & Yeh 1991)",
            srivastava_yeh_infiltration
        ),
        case!(
            "linearised-infiltration",
            "infiltration from a saturated surface, exponential soil: linear in K (Philip 1969; Warrick 1975)",
            linearised_infiltration
        ),
        case!(
            "ponded-darcy-column",
            "a column filled by ponding to its saturated steady state: Darcy flux Ks (Δh/L + 1)",
            ponded_darcy_column
        ),
        case!(
            "green-ampt",
            "ponded infiltration into a dry column: late-time consistency with Green & Ampt (1911)",
            green_ampt
        ),
        case!(
            "fick-vapour-diffusion",
            "isothermal vapour diffusion through a dry layer (Fick)",
            fick_vapour_diffusion
        ),
        case!(
            "drying-front",
            "drying front driven by vapour diffusion grows as sqrt(t)",
            drying_front
        ),
        case!(
            "closed-column-loop",
            "closed column under a geothermal gradient: liquid flux = -vapour flux",
            closed_column_loop
        ),
        case!(
            "kinetic-to-equilibrium",
            "kinetic phase change converges to equilibrium as b grows",
            kinetic_to_equilibrium
        ),
        case!(
            "water-properties",
            "water properties against IAPWS releases and steam tables; Kelvin relation",
            water_properties
        ),
        case!(
            "mesh-order",
            "observed order of accuracy in space (mesh refinement): 2",
            mesh_order
        ),
        case!(
            "time-order",
            "observed order in time: 1 for backward Euler, 2 for BDF2",
            time_order
        ),
        case!(
            "balance-closure",
            "water and energy balance closure over a 100 kyr climate-shift run",
            balance_closure
        ),
        case!(
            "steady-chloride",
            "steady chloride under steady recharge: c = Fd/q, recharge estimate = q",
            steady_chloride
        ),
        case!(
            "solute-advection-dispersion",
            "advection-dispersion from a flux inlet (Ogata-Banks problem): profile, order 1 in dz",
            solute_advection_dispersion
        ),
        case!(
            "solute-diffusion-step",
            "solute diffusion from a fixed bottom concentration: erfc, order 2 in space",
            solute_diffusion_step
        ),
        case!(
            "solute-closed-drying",
            "closed column drying: total solute constant while the water leaves",
            solute_closed_drying
        ),
        case!(
            "solute-balance-closure",
            "solute balance closure: stepped deposition, solubility limit, BDF steps",
            solute_balance_closure
        ),
        case!(
            "root-uptake",
            "root water uptake: steady flux = infiltration minus uptake above, unstressed uptake = potential, Feddes shape",
            root_uptake
        ),
        case!(
            "moving-water-table",
            "water table falling and rising 25 m through 0.5 m cells: smooth bottom flux with cell-averaged retention",
            moving_water_table
        ),
        case!(
            "ponding-cycle",
            "two floods over a ponding surface: pond, runoff and drainage; balance, applied water, runoff bound",
            ponding_cycle
        ),
    ]
}

// ---------------------------------------------------------------------------------------
// The common prologue: the case's files, a scratch folder, the case with its overrides.

/// A validation case's embedded files (see the `files!` macro).
#[derive(Debug, Clone, Copy)]
struct Files {
    name: &'static str,
    case: &'static str,
    /// (file name, text) of the CSV tables the case reads.
    csv: &'static [(&'static str, &'static str)],
}

/// Overrides from (KEY, TOML value) pairs.
fn sets(list: &[(&str, &str)]) -> Result<Vec<Override>> {
    list.iter().map(|(k, v)| Override::set(k, v)).collect()
}

/// A scratch folder holding the case's CSV tables, and the case (origin
/// `validation/<name>/case.toml`) parsed with `overrides`.
fn load(files: &Files, overrides: &[Override]) -> Result<(Model, Scratch)> {
    let scratch = Scratch::new(files.name)?;
    for (name, text) in files.csv {
        scratch.file(name, text)?;
    }
    let origin = format!("validation/{}/case.toml", files.name);
    let model = crate::case::parse_with_overrides(files.case, &origin, &scratch.dir, overrides)?;
    Ok((model, scratch))
}

/// [`load`] as the file is for the full variant, with the overrides `fast` for the fast one.
fn load_variant(files: &Files, v: Variant, fast: &[(&str, &str)]) -> Result<(Model, Scratch)> {
    match v {
        Variant::Full => load(files, &[]),
        Variant::Fast => load(files, &sets(fast)?),
    }
}

static SCRATCH: AtomicUsize = AtomicUsize::new(0);

/// A scratch folder for one run (results, checkpoints, the case's CSV files); removed
/// when dropped.
struct Scratch {
    dir: PathBuf,
    /// Keep the folder (a failed run's diagnostic state is in it).
    keep: std::cell::Cell<bool>,
}

impl Scratch {
    fn new(name: &str) -> Result<Scratch> {
        let k = SCRATCH.fetch_add(1, Ordering::Relaxed);
        let dir =
            std::env::temp_dir().join(format!("deepdry-verify-{}-{name}-{k}", std::process::id()));
        std::fs::create_dir_all(&dir)
            .map_err(|e| Error::io(&dir, format!("cannot create a scratch folder: {e}")))?;
        Ok(Scratch {
            dir,
            keep: std::cell::Cell::new(false),
        })
    }
    fn file(&self, name: &str, text: &str) -> Result<()> {
        let p = self.dir.join(name);
        std::fs::write(&p, text).map_err(|e| Error::io(&p, e))
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        if self.keep.get() {
            return;
        }
        let _ = std::fs::remove_dir_all(&self.dir);
    }
}

/// What a run wrote: snapshots and the series, read back from `results.h5`.
#[derive(Debug, Clone, Default)]
struct Results {
    /// Snapshot times [yr].
    times: Vec<f64>,
    depth: Vec<f64>,
    face_depth: Vec<f64>,
    /// [snapshot][cell]
    temperature_c: Vec<Vec<f64>>,
    head: Vec<Vec<f64>>,
    theta: Vec<Vec<f64>>,
    series_time: Vec<f64>,
    series_bottom_flux: Vec<f64>,
    series_storage: Vec<f64>,
    series_front: Vec<f64>,
    series_water_rel: Vec<f64>,
    series_energy_rel: Vec<f64>,
    series_water_err: Vec<f64>,
    series_energy_err: Vec<f64>,
}

/// A results file opened for reading its datasets (errors name the file).
struct H5Reader<'a> {
    path: &'a std::path::Path,
    file: hdf5::File,
}

impl<'a> H5Reader<'a> {
    fn open(path: &'a std::path::Path) -> Result<Self> {
        let file = hdf5::File::open(path).map_err(|err| Error::io(path, err))?;
        Ok(H5Reader { path, file })
    }
    /// A 1-D dataset.
    fn d1(&self, name: &str) -> Result<Vec<f64>> {
        let e = |err: hdf5::Error| Error::io(self.path, err);
        Ok(self
            .file
            .dataset(name)
            .map_err(e)?
            .read_1d::<f64>()
            .map_err(e)?
            .to_vec())
    }
    /// A 2-D dataset, row by row.
    fn d2(&self, name: &str) -> Result<Vec<Vec<f64>>> {
        let e = |err: hdf5::Error| Error::io(self.path, err);
        let a = self
            .file
            .dataset(name)
            .map_err(e)?
            .read_2d::<f64>()
            .map_err(e)?;
        Ok(a.outer_iter().map(|row| row.to_vec()).collect())
    }
    fn has(&self, name: &str) -> bool {
        self.file.link_exists(name)
    }
}

fn read_results(path: &std::path::Path) -> Result<Results> {
    let r = H5Reader::open(path)?;
    let d1 = |n: &str| r.d1(n);
    let d2 = |n: &str| r.d2(n);
    Ok(Results {
        times: d1("profiles/time")?,
        depth: d1("mesh/depth")?,
        face_depth: d1("mesh/face_depth")?,
        temperature_c: d2("profiles/temperature")?,
        head: d2("profiles/head")?,
        theta: d2("profiles/liquid_content")?,
        series_time: d1("series/time")?,
        series_bottom_flux: d1("series/bottom_water_flux")?,
        series_storage: d1("series/water_storage")?,
        series_front: d1("series/drying_front_depth")?,
        series_water_rel: d1("series/water_balance_relative_error")?,
        series_energy_rel: d1("series/energy_balance_relative_error")?,
        series_water_err: d1("series/water_balance_error")?,
        series_energy_err: d1("series/energy_balance_error")?,
    })
}

/// One solute's datasets in a results file (`/profiles/<kind>_<name>`,
/// `/series/<kind>_<name>`; the names are fixed by issue 18 and `src/output/results.rs`).
#[derive(Debug, Clone, Default)]
struct SoluteResults {
    /// [snapshot][cell] concentration in the liquid [g m⁻³].
    concentration: Vec<Vec<f64>>,
    /// [snapshot][cell] precipitate [g m⁻³ of bulk] (empty without a solubility limit).
    precipitate: Vec<Vec<f64>>,
    /// Series [g m⁻²]: stored, cumulative surface inflow, cumulative bottom outflow,
    /// balance error; relative balance error [-]; recharge estimate [mm yr⁻¹].
    storage: Vec<f64>,
    surface_cumulative: Vec<f64>,
    bottom_cumulative: Vec<f64>,
    balance_error: Vec<f64>,
    balance_relative_error: Vec<f64>,
    recharge_estimate: Vec<f64>,
    /// Series: the step that ended at each record [s].
    dt: Vec<f64>,
}

fn read_solute_results(path: &std::path::Path, name: &str) -> Result<SoluteResults> {
    let r = H5Reader::open(path)?;
    let d1 = |n: &str| r.d1(n);
    let d2 = |n: &str| r.d2(n);
    let precipitate = format!("profiles/precipitate_{name}");
    Ok(SoluteResults {
        concentration: d2(&format!("profiles/concentration_{name}"))?,
        precipitate: if r.has(&precipitate) {
            d2(&precipitate)?
        } else {
            Vec::new()
        },
        storage: d1(&format!("series/storage_{name}"))?,
        surface_cumulative: d1(&format!("series/surface_cumulative_{name}"))?,
        bottom_cumulative: d1(&format!("series/bottom_cumulative_{name}"))?,
        balance_error: d1(&format!("series/balance_error_{name}"))?,
        balance_relative_error: d1(&format!("series/balance_relative_error_{name}"))?,
        recharge_estimate: d1(&format!("series/recharge_estimate_{name}"))?,
        dt: d1("series/dt")?,
    })
}

/// The model's only solute (the solute cases carry one).
fn only_solute(model: &Model) -> Result<&crate::model::Solute> {
    match model.solutes.as_slice() {
        [s] => Ok(s),
        _ => Err(Error::Internal(
            "a solute verification case carries exactly one solute".to_string(),
        )),
    }
}

/// The surface temperature at the start [K] (the solute cases are isothermal at it).
fn start_surface_temperature(model: &Model) -> Result<f64> {
    let t0 = model.time.start;
    match &model.surface.at(t0).heat {
        crate::model::SurfaceHeat::Temperature(s) => Ok(s.value(t0)),
        _ => Err(Error::Internal(
            "the case needs a surface temperature".to_string(),
        )),
    }
}

/// Cell widths from the face depths [m].
fn widths_of(face_depth: &[f64]) -> Vec<f64> {
    face_depth.windows(2).map(|w| w[1] - w[0]).collect()
}

/// Text of a list of numbers in `e` notation.
fn fmt_list(v: &[f64]) -> String {
    v.iter()
        .map(|x| format!("{x:.3e}"))
        .collect::<Vec<_>>()
        .join(", ")
}

impl Results {
    /// Index of the snapshot at `year` (exact output times land exactly).
    fn at(&self, year: f64) -> usize {
        self.times
            .iter()
            .position(|t| (t - year).abs() <= 1e-9 * year.abs().max(1e-12))
            .unwrap_or_else(|| panic!("no snapshot at {year} yr"))
    }
}

/// The series record of an in-memory run at `year` (output times are landed on exactly).
fn record_at(
    rec: &crate::sim::Recorder,
    year: f64,
) -> Result<&crate::output::diagnostics::SeriesRecord> {
    rec.series
        .iter()
        .find(|r| (r.time_year - year).abs() <= 1e-9 * year.abs())
        .ok_or_else(|| Error::Internal(format!("no series record at {year} yr")))
}

/// The snapshot of an in-memory run at `year`.
fn snapshot_at(rec: &crate::sim::Recorder, year: f64) -> Result<&crate::sim::Snapshot> {
    rec.snapshots
        .iter()
        .find(|s| (s.time_year - year).abs() <= 1e-9 * year.abs())
        .ok_or_else(|| Error::Internal(format!("no snapshot at {year} yr")))
}

/// Runs `model` through `run::run` into the scratch folder; returns the summary and the
/// results read back.
fn simulate(model: &Model, scratch: &Scratch) -> Result<(RunSummary, Results)> {
    let opts = RunOptions {
        out: Some(scratch.dir.join("out")),
        overwrite: true,
        progress: false,
        ..Default::default()
    };
    let summary = run::run(model, &opts).inspect_err(|_| scratch.keep.set(true))?;
    let res = read_results(&summary.results)?;
    Ok((summary, res))
}

/// The steady state of the model's initial-state definition, evaluated.
fn steady_system(model: &Model) -> Result<(System, Vec<f64>)> {
    let u = run::initial_unknowns(model, SolverKind::BlockThomas)?;
    let mut sys = System::new(model);
    sys.evaluate(model.time.start, &u);
    Ok((sys, u))
}

fn max_abs(it: impl Iterator<Item = f64>) -> f64 {
    it.fold(0.0, |m, x| {
        if x.is_nan() || m.is_nan() {
            f64::NAN
        } else {
            m.max(x.abs())
        }
    })
}

fn zip_pts(x: &[f64], y: &[f64]) -> Vec<(f64, f64)> {
    x.iter().cloned().zip(y.iter().cloned()).collect()
}

/// Profile points (value, depth).
fn prof(values: &[f64], depth: &[f64]) -> Vec<(f64, f64)> {
    zip_pts(values, depth)
}

fn line_of(f: impl Fn(f64) -> f64, z0: f64, z1: f64, n: usize) -> Vec<(f64, f64)> {
    (0..=n)
        .map(|k| {
            let z = z0 + (z1 - z0) * k as f64 / n as f64;
            (f(z), z)
        })
        .collect()
}

/// α of an exponential (Gardner-type) soil.
fn exponential_alpha(ret: &crate::props::retention::Retention) -> Option<f64> {
    match ret.law {
        crate::props::retention::RetentionLaw::Exponential { alpha, .. } => Some(alpha),
        _ => None,
    }
}

fn kelvin_of(t_c: f64) -> f64 {
    t_c + CELSIUS_ZERO
}

/// Bulk heat capacity of a saturated soil: Cs + ρw cw θs (no air, so no vapour storage).
fn saturated_heat_capacity(model: &Model) -> f64 {
    let s = &model.soils[0];
    s.solid_heat_capacity
        + WATER_DENSITY * crate::props::constants::WATER_HEAT_CAPACITY * s.retention.theta_s()
}

fn constant_lambda(model: &Model) -> f64 {
    model.soils[0].thermal.value(0.0, 0.5).0
}

/// Dv = τ θa Da of a dry cell (θl = θr), from the published forms (independently of the
/// model's property code): Millington & Quirk (1961), and the power law of the case.
fn dry_diffusivity(model: &Model, t: f64) -> f64 {
    let s = &model.soils[0];
    let phi = s.retention.theta_s();
    let theta_a = phi - s.retention.theta_r();
    let d = &model.physics.diffusivity;
    theta_a
        * r::millington_quirk(theta_a, phi)
        * r::binary_diffusivity(d.d0, d.t0, d.exponent, d.p0, t, model.physics.air_pressure)
}
