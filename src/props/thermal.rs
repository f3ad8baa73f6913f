//! Thermal conductivity laws λ(θl). STUB: types fixed; implementations to be written.

#[derive(Debug, Clone, PartialEq)]
pub enum ThermalConductivity {
    /// λ constant [W m⁻¹ K⁻¹].
    Constant { value: f64 },
    /// Campbell (1985): λ = A + Bθ − (A − D) exp(−(Cθ)^E) [W m⁻¹ K⁻¹].
    Campbell {
        a: f64,
        b: f64,
        c: f64,
        d: f64,
        e: f64,
    },
    /// Johansen (1975): λ = λdry + (λsat − λdry) Ke(Sr), Ke for coarse or fine soil.
    Johansen {
        dry: f64,
        saturated: f64,
        fine: bool,
    },
}

impl ThermalConductivity {
    /// λ(θ) [W m⁻¹ K⁻¹] and dλ/dθ, with `porosity` φ for laws written in saturation.
    pub fn value(&self, theta: f64, porosity: f64) -> (f64, f64) {
        let _ = (theta, porosity);
        todo!()
    }
}
