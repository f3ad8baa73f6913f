//! Diagnostics computed from the evaluated system: profiles, face fluxes, the drying
//! front, balance errors.

use crate::physics::System;
use crate::props::constants::{CELSIUS_ZERO, WATER_DENSITY};

/// Liquid content above the driest value in the column that marks the drying front
/// [m³ m⁻³] (see [`drying_front_of`]).
pub const DRYING_FRONT_THRESHOLD: f64 = 0.01;

/// Cell and face profiles at one time (reused buffers).
#[derive(Debug, Clone, Default)]
pub struct Profile {
    pub temperature_c: Vec<f64>,
    pub head: Vec<f64>,
    pub liquid_content: Vec<f64>,
    pub vapor_density: Vec<f64>,
    pub relative_humidity: Vec<f64>,
    /// Face water fluxes [kg m⁻² s⁻¹] and heat flux [W m⁻²], positive downward.
    pub liquid_iso: Vec<f64>,
    pub liquid_th: Vec<f64>,
    pub vapor_iso: Vec<f64>,
    pub vapor_th: Vec<f64>,
    pub heat: Vec<f64>,
    /// The solutes' profiles, in the case's order (filled by the simulation).
    pub solutes: Vec<crate::solute::SoluteProfile>,
    /// Root water uptake [kg m⁻³ s⁻¹] per cell (empty without vegetation).
    pub root_water_uptake: Vec<f64>,
}

impl Profile {
    /// The cell profiles in the order of [`crate::output::results::PROFILE_CELL`].
    pub fn cells(&self) -> [&[f64]; 5] {
        [
            &self.temperature_c,
            &self.head,
            &self.liquid_content,
            &self.vapor_density,
            &self.relative_humidity,
        ]
    }

    /// The face profiles in the order of [`crate::output::results::PROFILE_FACE`].
    pub fn faces(&self) -> [&[f64]; 5] {
        [
            &self.liquid_iso,
            &self.liquid_th,
            &self.vapor_iso,
            &self.vapor_th,
            &self.heat,
        ]
    }

    /// Fills from the last evaluation of `sys`.
    pub fn fill(&mut self, sys: &System) {
        let cells = [
            &mut self.temperature_c,
            &mut self.head,
            &mut self.liquid_content,
            &mut self.vapor_density,
            &mut self.relative_humidity,
        ];
        for (k, v) in cells.into_iter().enumerate() {
            cell_profile(sys, k, v);
        }
        root_uptake_profile(sys, &mut self.root_water_uptake);
        let faces = [
            &mut self.liquid_iso,
            &mut self.liquid_th,
            &mut self.vapor_iso,
            &mut self.vapor_th,
            &mut self.heat,
        ];
        for (k, v) in faces.into_iter().enumerate() {
            face_profile(sys, k, v);
        }
    }
}

/// Cell profile `k` of the last evaluation of `sys` into `out` (resized to the cells), in
/// the order of [`crate::output::results::PROFILE_CELL`]: temperature [°C], head [m],
/// liquid content [m³ m⁻³], vapour density [kg m⁻³], relative humidity [-].
pub fn cell_profile(sys: &System, k: usize, out: &mut Vec<f64>) {
    out.clear();
    out.extend(sys.cells.iter().map(|c| match k {
        0 => c.t.v - CELSIUS_ZERO,
        1 => c.h.v,
        2 => c.theta.v,
        3 => c.rv.v,
        // rv / rvs(T), rvs as the cells' evaluation computes it (bitwise).
        _ => c.rv.v / crate::props::water::saturated_vapor_density_d1(c.t.v).0,
    }));
}

/// Face profile `k` of the last evaluation of `sys` into `out` (resized to the faces),
/// positive downward: liquid water flux, isothermal and thermal [kg m⁻² s⁻¹], vapour
/// flux, isothermal and thermal [kg m⁻² s⁻¹], heat flux [W m⁻²].
pub fn face_profile(sys: &System, k: usize, out: &mut Vec<f64>) {
    out.clear();
    out.extend(sys.faces.iter().map(|f| match k {
        0 => WATER_DENSITY * f.liquid_iso.v,
        1 => WATER_DENSITY * f.liquid_th.v,
        2 => f.vapor_iso.v,
        3 => f.vapor_th.v,
        _ => f.energy().v,
    }));
}

/// Root water uptake per cell [kg m⁻³ s⁻¹] of the last assembly of `sys` into `out`
/// (empty without vegetation).
pub fn root_uptake_profile(sys: &System, out: &mut Vec<f64>) {
    out.clear();
    if sys.has_vegetation {
        out.extend(sys.uptake.iter().zip(&sys.widths).map(|(u, w)| u / w));
    }
}

/// Drying-front depth [m] (see [`drying_front_of`]) from the last evaluation.
pub fn drying_front_depth(sys: &System) -> f64 {
    let th: Vec<f64> = sys.cells.iter().map(|c| c.theta.v).collect();
    drying_front_of(&th, &sys.centers)
}

/// Drying-front depth [m] of a column with liquid content `theta` [m³ m⁻³] at cell
/// centres `centers` [m] (surface first), or NaN when the column has no dry zone on top.
///
/// With θmin the smallest content and k the shallowest cell whose content exceeds
/// θmin + [`DRYING_FRONT_THRESHOLD`], the front is the depth where the content crosses
/// that level between cells k − 1 and k (linear between cell centres) — provided the
/// driest cell lies above cell k, i.e. the column is driest in a zone on top of the
/// front. There is no front (NaN) when no cell exceeds the level (a uniformly wet or
/// uniformly dry column), or when the driest cell is at or below cell k (a column that
/// is wetter at the top, or whose driest cell is deeper, e.g. a coarser layer under a
/// wet finer one before any drying).
pub fn drying_front_of(theta: &[f64], centers: &[f64]) -> f64 {
    let mut imin = None;
    for (i, &v) in theta.iter().enumerate() {
        if v.is_finite() && imin.is_none_or(|j: usize| v < theta[j]) {
            imin = Some(i);
        }
    }
    let Some(imin) = imin else {
        return f64::NAN;
    };
    let level = theta[imin] + DRYING_FRONT_THRESHOLD;
    let Some(k) = theta.iter().position(|&v| v > level) else {
        return f64::NAN;
    };
    if imin >= k || k >= centers.len() {
        return f64::NAN;
    }
    let (z0, z1) = (centers[k - 1], centers[k]);
    let f = (level - theta[k - 1]) / (theta[k] - theta[k - 1]);
    z0 + f * (z1 - z0)
}

/// Water stored in each layer [kg m⁻²] (liquid and vapour, Σ width × content over the
/// layer's cells) from the last evaluation; `cell_layer` gives each cell's layer.
pub fn layer_water_storage(sys: &System, cell_layer: &[usize], layers: usize) -> Vec<f64> {
    let mut out = vec![0.0; layers];
    for (i, c) in sys.cells.iter().enumerate() {
        if let Some(w) = cell_layer.get(i).and_then(|&l| out.get_mut(l)) {
            *w += sys.widths[i] * c.water.v;
        }
    }
    out
}

/// One row of the time series.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct SeriesRecord {
    /// Time [year].
    pub time_year: f64,
    /// Net water flux at the surface and the bottom, positive downward [kg m⁻² s⁻¹].
    pub surface_water_flux: f64,
    pub bottom_water_flux: f64,
    /// Heat flux at the surface and the bottom, positive downward [W m⁻²].
    pub surface_heat_flux: f64,
    pub bottom_heat_flux: f64,
    /// Water stored in the column [kg m⁻²].
    pub water_storage: f64,
    /// Cumulative balance errors: storage change − net inflow [kg m⁻²], [J m⁻²].
    pub water_balance_error: f64,
    pub energy_balance_error: f64,
    /// Relative balance errors [-].
    pub water_balance_relative: f64,
    pub energy_balance_relative: f64,
    pub drying_front_depth: f64,
    /// Step just taken [s] and its Newton iterations.
    pub dt: f64,
    pub newton_iterations: f64,
    /// Cumulative water [kg m⁻²] and energy [J m⁻²] through the surface and the bottom
    /// since the start, positive downward, integrated with the stepper's weights: the
    /// storage change minus (surface − bottom) is the balance error.
    pub surface_water_cumulative: f64,
    pub bottom_water_cumulative: f64,
    pub surface_energy_cumulative: f64,
    pub bottom_energy_cumulative: f64,
}

impl SeriesRecord {
    /// Dataset names, units and long names, in the order of [`SeriesRecord::values`].
    pub const FIELDS: [(&'static str, &'static str, &'static str); 16] = [
        (
            "surface_water_flux",
            "kg m-2 s-1",
            "net water flux at the land surface, positive downward",
        ),
        (
            "bottom_water_flux",
            "kg m-2 s-1",
            "net water flux at the bottom boundary, positive downward",
        ),
        (
            "surface_heat_flux",
            "W m-2",
            "energy flux at the land surface, positive downward",
        ),
        (
            "bottom_heat_flux",
            "W m-2",
            "energy flux at the bottom boundary, positive downward",
        ),
        (
            "water_storage",
            "kg m-2",
            "water (liquid and vapour) stored in the column",
        ),
        (
            "water_balance_error",
            "kg m-2",
            "cumulative storage change minus net inflow of water",
        ),
        (
            "energy_balance_error",
            "J m-2",
            "cumulative storage change minus net inflow of energy",
        ),
        (
            "water_balance_relative_error",
            "1",
            "water balance error relative to max(|storage change|, boundary throughput)",
        ),
        (
            "energy_balance_relative_error",
            "1",
            "energy balance error relative to max(|storage change|, boundary throughput)",
        ),
        (
            "drying_front_depth",
            "m",
            "shallowest depth where liquid content exceeds the column minimum by 0.01, \
             with the driest cell above it; NaN when there is no such dry zone on top",
        ),
        ("dt", "s", "time step just taken"),
        (
            "newton_iterations",
            "1",
            "Newton iterations of the step just taken",
        ),
        (
            "surface_water_cumulative",
            "kg m-2",
            "water that entered through the land surface since the start, positive downward",
        ),
        (
            "bottom_water_cumulative",
            "kg m-2",
            "water that left through the bottom boundary since the start, positive downward",
        ),
        (
            "surface_energy_cumulative",
            "J m-2",
            "energy that entered through the land surface since the start, positive downward",
        ),
        (
            "bottom_energy_cumulative",
            "J m-2",
            "energy that left through the bottom boundary since the start, positive downward",
        ),
    ];

    pub fn values(&self) -> [f64; 16] {
        [
            self.surface_water_flux,
            self.bottom_water_flux,
            self.surface_heat_flux,
            self.bottom_heat_flux,
            self.water_storage,
            self.water_balance_error,
            self.energy_balance_error,
            self.water_balance_relative,
            self.energy_balance_relative,
            self.drying_front_depth,
            self.dt,
            self.newton_iterations,
            self.surface_water_cumulative,
            self.bottom_water_cumulative,
            self.surface_energy_cumulative,
            self.bottom_energy_cumulative,
        ]
    }
}
