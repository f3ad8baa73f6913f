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

/// Viscosity correction factor μ(t_ref)/μ(t) [-] and its derivative in t [K⁻¹].
/// STUB: to be written with the IAPWS viscosity.
pub fn viscosity_factor(t: f64, t_ref: f64) -> (f64, f64) {
    let _ = (t, t_ref);
    todo!()
}
