//! Properties of liquid water and water vapour (SI; temperature in kelvin).
//! STUB: signatures fixed; implementations to be written.

/// Saturation vapour pressure psat(T) [Pa] and dpsat/dT [Pa K⁻¹].
pub fn saturation_pressure(t: f64) -> (f64, f64) {
    let _ = t;
    todo!()
}

/// Saturated vapour density rvs(T) = psat Mw/(R T) [kg m⁻³] with d/dT and d²/dT².
pub fn saturated_vapor_density(t: f64) -> (f64, f64, f64) {
    let _ = t;
    todo!()
}

/// Latent heat of vaporisation used by the energy balance, L(T) = L0 + (cv − cw)(T − T0) [J kg⁻¹].
pub fn latent_heat(t: f64) -> f64 {
    let _ = t;
    todo!()
}

/// Liquid density at 0.1 MPa [kg m⁻³] and dρ/dT.
pub fn liquid_density(t: f64) -> (f64, f64) {
    let _ = t;
    todo!()
}

/// Dynamic viscosity of liquid water at 0.1 MPa [Pa s] and dμ/dT.
pub fn viscosity(t: f64) -> (f64, f64) {
    let _ = t;
    todo!()
}

/// Surface tension of water against air [N m⁻¹] and dσ/dT.
pub fn surface_tension(t: f64) -> (f64, f64) {
    let _ = t;
    todo!()
}

/// Kelvin equation: equilibrium relative humidity hr = exp(g Mw h/(R T)) [-],
/// with dhr/dh [m⁻¹] and dhr/dT [K⁻¹].
pub fn relative_humidity(h: f64, t: f64) -> (f64, f64, f64) {
    let _ = (h, t);
    todo!()
}

/// Inverse Kelvin equation: the head [m] in equilibrium with relative humidity `hr` at `t`.
pub fn head_from_relative_humidity(hr: f64, t: f64) -> f64 {
    let _ = (hr, t);
    todo!()
}
