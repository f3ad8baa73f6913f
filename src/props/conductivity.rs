//! Hydraulic conductivity at faces and its temperature dependence.

/// How the conductivity at a face between two cells is formed from the cell values.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FaceAveraging {
    /// (K1 + K2)/2 weighted by distance.
    Arithmetic,
    /// √(K1 K2).
    Geometric,
    /// Distance-weighted harmonic mean (series conductance).
    Harmonic,
    /// The value of the cell the liquid flows from.
    Upstream,
}

/// Viscosity correction of the hydraulic conductivity, K(h, T) = Kr Ks μ(t_ref)/μ(t):
/// returns the factor μ(t_ref)/μ(t) [-] and its derivative with respect to `t` [K⁻¹].
///
/// μ is the viscosity of liquid water at 0.1 MPa ([`crate::props::water::viscosity`],
/// IAPWS 2008 at the SR6-08 density; valid 253.15–383.15 K, held at the end values
/// outside, where the derivative is 0). Temperatures in kelvin.
pub fn viscosity_factor(t: f64, t_ref: f64) -> (f64, f64) {
    let (mu_ref, _) = crate::props::water::viscosity(t_ref);
    let (mu, dmu) = crate::props::water::viscosity(t);
    let f = mu_ref / mu;
    (f, -f * dmu / mu)
}
