//! Property tables for users (`deepdry table water`, `deepdry table soil`), as CSV text.

use std::fmt::Write as _;

use crate::error::{Error, Result};
use crate::model::Model;
use crate::props::constants::CELSIUS_ZERO;
use crate::props::retention::OVEN_DRY_HEAD;
use crate::props::vapor::Diffusivity;
use crate::props::water;

/// Lowest temperature of the water table [°C]: the saturation-pressure equation
/// (IAPWS-IF97 region 4) is valid from 273.15 K.
pub const WATER_TABLE_MIN_C: f64 = 0.0;
/// Highest temperature of the water table [°C]: the liquid density and viscosity at 0.1 MPa
/// (IAPWS SR6-08) are valid up to 383.15 K.
pub const WATER_TABLE_MAX_C: f64 = 110.0;
/// Largest number of rows `water_csv` produces.
pub const MAX_ROWS: usize = 100_001;
/// Total gas pressure at which the water table gives the vapour diffusivity [Pa].
pub const TABLE_AIR_PRESSURE: f64 = 101_325.0;

/// Header of [`water_csv`].
pub const WATER_HEADER: &str = "temperature_C,saturation_pressure_Pa,saturated_vapor_density_kg_m3,latent_heat_J_kg,liquid_density_kg_m3,viscosity_Pa_s,surface_tension_N_m,vapor_diffusivity_m2_s";
/// Header of [`soil_csv`].
pub const SOIL_HEADER: &str = "head_m,liquid_content,relative_conductivity,conductivity_m_s,relative_humidity_20C,thermal_conductivity_W_m_K";

/// Rounds a grid temperature so that 0.1-type steps print as 0.1, not 0.30000000000000004.
fn tidy(x: f64) -> f64 {
    let r = (x * 1e9).round() / 1e9;
    if r == 0.0 {
        0.0
    } else {
        r
    }
}

/// CSV `temperature_C,saturation_pressure_Pa,saturated_vapor_density_kg_m3,latent_heat_J_kg,liquid_density_kg_m3,viscosity_Pa_s,surface_tension_N_m,vapor_diffusivity_m2_s`.
///
/// Rows from `from_c` to `to_c` (inclusive when the range is a whole number of steps) every
/// `step_c` °C. Allowed: 0 ≤ from ≤ to ≤ 110 °C, step > 0, at most [`MAX_ROWS`] rows;
/// anything else is an [`Error::Input`] naming the option (`--from`, `--to`, `--step`).
/// The diffusivity is the default form ([`Diffusivity::default`]) at 101 325 Pa.
pub fn water_csv(from_c: f64, to_c: f64, step_c: f64) -> Result<String> {
    let range = format!("{WATER_TABLE_MIN_C}–{WATER_TABLE_MAX_C} °C");
    for (name, v) in [("--from", from_c), ("--to", to_c), ("--step", step_c)] {
        if !v.is_finite() {
            return Err(Error::input(format!(
                "{name}: {v}: must be a finite number"
            )));
        }
    }
    if step_c <= 0.0 {
        return Err(Error::input(format!(
            "--step: {step_c}: must be greater than 0 °C"
        )));
    }
    for (name, v) in [("--from", from_c), ("--to", to_c)] {
        if !(WATER_TABLE_MIN_C..=WATER_TABLE_MAX_C).contains(&v) {
            return Err(Error::input(format!(
                "{name}: {v}: must be within {range}, where all the water-property laws are valid"
            )));
        }
    }
    if from_c > to_c {
        return Err(Error::input(format!(
            "--from: {from_c}: must not exceed --to ({to_c})"
        )));
    }
    let intervals = ((to_c - from_c) / step_c * (1.0 + 1e-12)).floor();
    if intervals + 1.0 > MAX_ROWS as f64 {
        return Err(Error::input(format!(
            "--step: {step_c}: gives {} rows from {from_c} to {to_c} °C; at most {MAX_ROWS} are allowed",
            intervals + 1.0
        )));
    }
    let n = intervals as usize;
    let diffusivity = Diffusivity::default();
    let mut out = String::with_capacity((n + 2) * 128);
    out.push_str(WATER_HEADER);
    out.push('\n');
    for i in 0..=n {
        let tc = tidy((from_c + i as f64 * step_c).min(to_c));
        let t = tc + CELSIUS_ZERO;
        let (p, _) = water::saturation_pressure(t);
        let (rvs, _, _) = water::saturated_vapor_density(t);
        let l = water::latent_heat(t);
        let (rho, _) = water::liquid_density(t);
        let (mu, _) = water::viscosity(t);
        let (sigma, _) = water::surface_tension(t);
        let (d, _) = diffusivity.value(t, TABLE_AIR_PRESSURE);
        // Writing to a String cannot fail.
        let _ = writeln!(
            out,
            "{tc},{p:.7e},{rvs:.7e},{l:.7e},{rho:.7e},{mu:.7e},{sigma:.7e},{d:.7e}"
        );
    }
    Ok(out)
}

/// Heads of the soil table: −0.01 m to `end` (< −0.01 m), log-spaced, ~10 per decade, both
/// ends included.
pub fn soil_table_heads(end: f64) -> impl Iterator<Item = f64> {
    let end = if end < -0.01 { end } else { OVEN_DRY_HEAD };
    log_heads(-0.01, end, 10)
}

/// Heads from `start` to `end` (both < 0, `end` < `start`), log-spaced in suction with
/// about `per_decade` per decade, both ends included.
fn log_heads(start: f64, end: f64, per_decade: usize) -> impl Iterator<Item = f64> {
    let decades = (end / start).log10();
    let n = ((per_decade as f64 * decades).ceil() as usize).max(1);
    (0..=n).map(move |i| {
        if i == n {
            end
        } else {
            start * 10f64.powf(decades * i as f64 / n as f64)
        }
    })
}

/// Options of `deepdry table soil`.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct SoilTableOptions {
    /// Temperature of the table [°C]: the relative humidity is the Kelvin value at it and,
    /// when the case corrects the conductivity for viscosity, the conductivity is at it.
    /// `None`: relative humidity at 20 °C, conductivity Ks·Kr (at the reference temperature).
    pub temperature_c: Option<f64>,
    /// First head [m] (< 0; default −0.01 m).
    pub from_head: Option<f64>,
    /// Last head [m] (below `from_head`, not below the soil's oven-dry head; default the
    /// oven-dry head).
    pub to_head: Option<f64>,
    /// Rows per decade of suction (1 to 1000; default 10).
    pub per_decade: Option<usize>,
}

/// CSV `head_m,liquid_content,relative_conductivity,conductivity_m_s,relative_humidity_20C,thermal_conductivity_W_m_K`
/// for the layer named `layer`.
///
/// Heads from −0.01 m to oven dryness (the soil's dry-end head when its retention has one,
/// else −10⁵ m), log-spaced with about 10 points per decade. The conductivity is Ks·Kr at
/// the reference temperature; the relative humidity is the Kelvin value at 20 °C; the
/// thermal conductivity is λ(θ) with porosity θs. An unknown layer name is an
/// [`Error::Input`] that lists the layer names.
pub fn soil_csv(model: &Model, layer: &str) -> Result<String> {
    soil_csv_with(model, layer, &SoilTableOptions::default())
}

/// [`soil_csv`] with a temperature and a head range ([`SoilTableOptions`]). The relative
/// humidity column is `relative_humidity_<T>C` for the table temperature T. Options out
/// of range are an [`Error::Input`] naming the option and the allowed range.
pub fn soil_csv_with(model: &Model, layer: &str, opts: &SoilTableOptions) -> Result<String> {
    let Some(found) = model.layers.iter().find(|l| l.name == layer) else {
        let names: Vec<&str> = model.layers.iter().map(|l| l.name.as_str()).collect();
        let known = if names.is_empty() {
            "the case defines no layers".to_string()
        } else {
            format!("the layers are: {}", names.join(", "))
        };
        return Err(Error::input(format!(
            "--layer: {layer}: no such layer; {known}"
        )));
    };
    let soil = model.soils.get(found.soil).ok_or_else(|| {
        Error::Internal(format!(
            "layer {layer} refers to soil index {} of {}",
            found.soil,
            model.soils.len()
        ))
    })?;
    let ret = &soil.retention;
    let porosity = ret.theta_s();
    let dry = ret.oven_dry_head();
    let fmt = crate::case::schedules::fmt_g;
    let tc = opts.temperature_c.unwrap_or(20.0);
    if !(WATER_TABLE_MIN_C..=WATER_TABLE_MAX_C).contains(&tc) {
        return Err(Error::input(format!(
            "--temperature: {tc}: must be within {WATER_TABLE_MIN_C}–{WATER_TABLE_MAX_C} °C, where the water-property laws are valid"
        )));
    }
    let from = opts.from_head.unwrap_or(-0.01);
    if !(from < 0.0 && from > dry) {
        return Err(Error::input(format!(
            "--from-head: {from}: must be a head in m below 0 and above the oven-dry head of layer {layer}'s soil ({} m)",
            fmt(dry)
        )));
    }
    let to = opts.to_head.unwrap_or(dry);
    if !(to < from && to >= dry) {
        return Err(Error::input(format!(
            "--to-head: {to}: must be a head in m below --from-head ({}) and not below the oven-dry head of layer {layer}'s soil ({} m)",
            fmt(from),
            fmt(dry)
        )));
    }
    let per = opts.per_decade.unwrap_or(10);
    if !(1..=1000).contains(&per) {
        return Err(Error::input(format!(
            "--per-decade: {per}: must be 1 to 1000"
        )));
    }
    let t = tc + CELSIUS_ZERO;
    let viscosity = match opts.temperature_c {
        Some(_) if model.physics.viscosity_correction => {
            crate::props::conductivity::viscosity_factor(t, model.physics.reference_temperature).0
        }
        _ => 1.0,
    };
    let mut out = String::with_capacity(80 * 128);
    if opts.temperature_c.is_some() {
        out.push_str(
            &SOIL_HEADER.replace("relative_humidity_20C", &format!("relative_humidity_{tc}C")),
        );
    } else {
        out.push_str(SOIL_HEADER);
    }
    out.push('\n');
    for h in log_heads(from, to, per) {
        let (theta, _) = ret.theta(h);
        let (kr, _) = ret.relative_conductivity(h);
        let k = soil.saturated_conductivity * kr * viscosity;
        let (hr, _, _) = water::relative_humidity(h, t);
        let (lam, _) = soil.thermal.value(theta, porosity);
        let _ = writeln!(
            out,
            "{h:.6e},{theta:.7e},{kr:.7e},{k:.7e},{hr:.7e},{lam:.7e}"
        );
    }
    Ok(out)
}
