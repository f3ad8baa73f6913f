//! Thermal conductivity laws λ(θl) [W m⁻¹ K⁻¹].
//!
//! Valid input: θ ≥ 0 (negative θ is treated as 0, with derivative 0). All laws are
//! allocation-free and return finite values and derivatives for every finite θ.

#[derive(Debug, Clone, PartialEq)]
pub enum ThermalConductivity {
    /// λ constant [W m⁻¹ K⁻¹].
    Constant { value: f64 },
    /// Campbell (1985): λ = A + Bθ − (A − D) exp(−(Cθ)^E) [W m⁻¹ K⁻¹].
    ///
    /// Requires C > 0 and E ≥ 1 (E = 4 in Campbell's soil form) for a finite slope at
    /// θ = 0. See [`ThermalConductivity::campbell_1985`] for Campbell's coefficients from
    /// bulk density and clay fraction.
    Campbell {
        a: f64,
        b: f64,
        c: f64,
        d: f64,
        e: f64,
    },
    /// Johansen (1975): λ = λdry + (λsat − λdry) Ke(Sr), Ke for coarse or fine soil.
    ///
    /// Sr = θ/φ (clipped to [0, 1]); Kersten number Ke = max(0, a log10 Sr + 1) with a = 0.7
    /// (coarse) or 1 (fine). The clip at Ke = 0 (Sr = 0.037 coarse, 0.1 fine) has a corner;
    /// it is replaced by a C¹ quadratic blend in z = a log10 Sr + 1:
    /// Ke = z for z ≥ δ, (z + δ)²/(4δ) for |z| < δ, 0 for z ≤ −δ, with δ = 0.05
    /// ([`JOHANSEN_BLEND`]). Ke then differs from the clipped law by at most δ/4 = 0.0125 and
    /// only within |z| < δ; dλ/dθ is continuous and finite everywhere (0 near dryness).
    Johansen {
        dry: f64,
        saturated: f64,
        fine: bool,
    },
}

/// Half-width δ of the quadratic blend replacing Johansen's clip at Ke = 0 (in Kersten units).
pub const JOHANSEN_BLEND: f64 = 0.05;

impl ThermalConductivity {
    /// Campbell (1985, "Soil Physics with BASIC", Ch. 4) coefficients for a mineral soil:
    /// A = 0.65 − 0.78 ρb + 0.60 ρb², B = 1.06 ρb, C = 1 + 2.6/√mc, D = 0.03 + 0.1 ρb², E = 4,
    /// with bulk density ρb in Mg m⁻³ and clay mass fraction mc (coefficients from memory;
    /// the clay fraction is floored at 1e-6).
    pub fn campbell_1985(bulk_density_mg_m3: f64, clay_fraction: f64) -> ThermalConductivity {
        let rb = bulk_density_mg_m3;
        ThermalConductivity::Campbell {
            a: 0.65 - 0.78 * rb + 0.60 * rb * rb,
            b: 1.06 * rb,
            c: 1.0 + 2.6 / clay_fraction.max(1e-6).sqrt(),
            d: 0.03 + 0.1 * rb * rb,
            e: 4.0,
        }
    }

    /// λ(θ) [W m⁻¹ K⁻¹] and dλ/dθ, with `porosity` φ for laws written in saturation.
    #[inline]
    pub fn value(&self, theta: f64, porosity: f64) -> (f64, f64) {
        let clipped = theta.is_nan() || theta < 0.0;
        let th = if clipped { 0.0 } else { theta };
        match *self {
            ThermalConductivity::Constant { value } => (value, 0.0),
            ThermalConductivity::Campbell { a, b, c, d, e } => {
                let ct = c * th;
                // The usual E = 4 by multiplication (the general power costs an exp and a log).
                let u = if e == 4.0 {
                    let c2 = ct * ct;
                    c2 * c2
                } else {
                    ct.powf(e)
                };
                let ex = (-u).exp();
                let lam = a + b * th - (a - d) * ex;
                if clipped {
                    return (lam, 0.0);
                }
                // d/dθ (Cθ)^E = E C (Cθ)^(E−1) = E C u/(Cθ)
                let du = if ct > 0.0 {
                    e * c * u / ct
                } else if e == 1.0 {
                    c
                } else {
                    0.0
                };
                (lam, b + (a - d) * du * ex)
            }
            ThermalConductivity::Johansen {
                dry,
                saturated,
                fine,
            } => {
                let (ke, dke_dsr) = kersten(th / porosity, fine);
                let lam = dry + (saturated - dry) * ke;
                if clipped || th >= porosity {
                    return (lam, 0.0);
                }
                (lam, (saturated - dry) * dke_dsr / porosity)
            }
        }
    }
}

/// Kersten number Ke(Sr) with the C¹ blend at its zero, and dKe/dSr.
fn kersten(sr: f64, fine: bool) -> (f64, f64) {
    let a = if fine { 1.0 } else { 0.7 };
    if sr >= 1.0 {
        return (1.0, 0.0);
    }
    if sr.is_nan() || sr <= 0.0 {
        return (0.0, 0.0);
    }
    let z = a * sr.log10() + 1.0;
    let dz = a / (sr * std::f64::consts::LN_10);
    let dl = JOHANSEN_BLEND;
    if z >= dl {
        (z, dz)
    } else if z <= -dl {
        (0.0, 0.0)
    } else {
        ((z + dl) * (z + dl) / (4.0 * dl), (z + dl) / (2.0 * dl) * dz)
    }
}
