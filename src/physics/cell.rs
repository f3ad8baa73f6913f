//! Per-cell material state: every property the residual needs, as `Dual<3>` values with
//! derivatives with respect to the cell's own (T, h, rv).

use super::dual::D3;
use crate::model::{Physics, Soil};
use crate::props::constants::{
    GAS_CONSTANT, GRAVITY, LATENT_HEAT_T0, MOLAR_MASS_WATER, T_REF, VAPOR_HEAT_CAPACITY,
    WATER_DENSITY, WATER_HEAT_CAPACITY,
};
use crate::props::{conductivity, vapor, water};

/// Properties of one cell (or of a boundary "ghost" point), all per unit bulk volume.
#[derive(Debug, Clone, Copy)]
pub struct CellProps {
    pub t: D3,
    pub h: D3,
    pub rv: D3,
    /// Liquid content θl [m³ m⁻³] and air-filled porosity θa.
    pub theta: D3,
    pub theta_a: D3,
    /// Kelvin relative humidity hr(h, T) [-].
    pub hr: D3,
    /// Saturated vapour density and its temperature derivative [kg m⁻³], [kg m⁻³ K⁻¹].
    pub rvs: D3,
    pub drvs: D3,
    /// Equilibrium vapour density hr·rvs [kg m⁻³].
    pub rveq: D3,
    /// Hydraulic conductivity K(h, T) [m s⁻¹].
    pub k: D3,
    /// Thermal liquid coefficient G·h·(dσ/dT)/σ [m K⁻¹] (0 when disabled).
    pub kt: D3,
    /// Effective vapour diffusivity Dv = τ θa Da [m² s⁻¹].
    pub dv: D3,
    /// Enhancement factor η [-].
    pub eta: D3,
    /// Thermal conductivity λ [W m⁻¹ K⁻¹].
    pub lambda: D3,
    /// Storages per bulk volume: energy e [J m⁻³], total water [kg m⁻³], vapour [kg m⁻³].
    pub energy: D3,
    pub water: D3,
    pub vapor: D3,
}

/// Surface tension log-slope s = (dσ/dT)/σ [K⁻¹] with ds/dT, from the IAPWS (2014)
/// correlation σ = B τ^μ (1 + b τ), τ = 1 − T/Tc.
fn surface_tension_log_slope(t: D3) -> D3 {
    const TC: f64 = 647.096;
    const MU: f64 = 1.256;
    const B_SMALL: f64 = -0.625;
    let tau = 1.0 - t / TC;
    // d ln σ/dT = −(1/Tc) [μ/τ + b/(1 + bτ)]
    let term = MU / tau + B_SMALL / (tau * B_SMALL + 1.0);
    term * (-1.0 / TC)
}

/// Specific enthalpy of vapour relative to liquid water at T0: L0 + cv (T − T0) [J kg⁻¹].
#[inline]
pub fn vapor_enthalpy<const N: usize>(t: super::dual::Dual<N>) -> super::dual::Dual<N> {
    (t - T_REF) * VAPOR_HEAT_CAPACITY + LATENT_HEAT_T0
}

/// Equilibrium relative humidity and vapour density at (T, h) as duals.
pub fn equilibrium_vapor(t: D3, h: D3) -> (D3, D3, D3, D3) {
    let (hr, dhr_dh, dhr_dt) = water::relative_humidity(h.v, t.v);
    let mut hr_d = [0.0; 3];
    for (k, x) in hr_d.iter_mut().enumerate() {
        *x = dhr_dh * h.d[k] + dhr_dt * t.d[k];
    }
    let hr = D3 { v: hr, d: hr_d };
    let (s0, s1, s2) = water::saturated_vapor_density(t.v);
    let rvs = t.chain(s0, s1);
    let drvs = t.chain(s1, s2);
    (hr, rvs, drvs, hr * rvs)
}

/// Head in equilibrium with relative humidity `rh` at temperature `t` (inverse Kelvin):
/// h = R T ln(rh)/(g Mw) [m].
pub fn head_from_rh(rh: f64, t: D3) -> D3 {
    t * (GAS_CONSTANT * rh.ln() / (GRAVITY * MOLAR_MASS_WATER))
}

/// Evaluates every property of a cell of `soil` at state (t, h, rv).
pub fn cell_props(soil: &Soil, physics: &Physics, t: D3, h: D3, rv: D3) -> CellProps {
    let phi = soil.retention.theta_s();
    let (th, dth) = soil.retention.theta(h.v);
    let theta = h.chain(th, dth);
    let theta_a = (-theta + phi).max(D3::cst(0.0));
    let (hr, rvs, drvs, rveq) = equilibrium_vapor(t, h);

    let (kr, dkr) = soil.retention.relative_conductivity(h.v);
    let mut k = h.chain(kr, dkr) * soil.saturated_conductivity;
    if physics.viscosity_correction {
        let (f, df) = conductivity::viscosity_factor(t.v, physics.reference_temperature);
        k = k * t.chain(f, df);
    }
    let kt = match physics.thermal_liquid_gain {
        Some(g) => h * surface_tension_log_slope(t) * g,
        None => D3::cst(0.0),
    };

    let (da, dda) = physics.diffusivity.value(t.v, physics.air_pressure);
    let (tau, dtau) = vapor::tortuosity(theta_a.v, phi);
    let dv = theta_a.chain(tau, dtau) * theta_a * t.chain(da, dda);

    let (eta, deta) = soil.enhancement.value(theta.v, phi);
    let eta = theta.chain(eta, deta);
    let (lam, dlam) = soil.thermal.value(theta.v, phi);
    let lambda = theta.chain(lam, dlam);

    let dt0 = t - T_REF;
    let vapor_store = theta_a * rv;
    let energy = dt0 * soil.solid_heat_capacity
        + theta * dt0 * (WATER_DENSITY * WATER_HEAT_CAPACITY)
        + vapor_store * vapor_enthalpy(t);
    let water = theta * WATER_DENSITY + vapor_store;
    CellProps {
        t,
        h,
        rv,
        theta,
        theta_a,
        hr,
        rvs,
        drvs,
        rveq,
        k,
        kt,
        dv,
        eta,
        lambda,
        energy,
        water,
        vapor: vapor_store,
    }
}
