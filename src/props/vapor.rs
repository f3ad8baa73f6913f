//! Vapour transport properties. STUB: types fixed; implementations to be written.

/// Binary diffusivity of water vapour in air, D = d0 (T/t0)^exponent (p0/p) [m² s⁻¹].
#[derive(Debug, Clone, PartialEq)]
pub struct Diffusivity {
    pub d0: f64,
    pub t0: f64,
    pub p0: f64,
    pub exponent: f64,
}

impl Diffusivity {
    /// D(T, p) [m² s⁻¹] and dD/dT.
    pub fn value(&self, t: f64, p: f64) -> (f64, f64) {
        let _ = (t, p);
        todo!()
    }
}

/// Millington & Quirk (1961) tortuosity τ = θa^(7/3)/φ² and dτ/dθa.
pub fn tortuosity(theta_a: f64, porosity: f64) -> (f64, f64) {
    let _ = (theta_a, porosity);
    todo!()
}

/// Enhancement factor η on the thermal vapour flux.
#[derive(Debug, Clone, PartialEq)]
pub enum Enhancement {
    /// η = 1 (no enhancement).
    None,
    /// A fixed η ≥ 1.
    Constant(f64),
    /// Cass et al. (1984) form: η = 9.5 + 3 θ/φ − 8.5 exp(−[(1 + 2.6/√fc) θ/φ]⁴), clay fraction fc.
    Cass { clay_fraction: f64 },
}

impl Enhancement {
    /// η(θ) [-] and dη/dθ.
    pub fn value(&self, theta: f64, porosity: f64) -> (f64, f64) {
        let _ = (theta, porosity);
        todo!()
    }
}
