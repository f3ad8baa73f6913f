//! Vapour transport properties: binary diffusivity of water vapour in air, tortuosity,
//! enhancement factor. Allocation-free; finite for all finite inputs in their ranges.

/// Binary diffusivity of water vapour in air, D = d0 (T/t0)^exponent (p0/p) [m² s⁻¹].
///
/// Valid for T > 0, p > 0 (the published forms are fitted near ambient conditions,
/// roughly 0–60 °C at atmospheric pressure). The published forms differ by up to ~8 %.
///
/// The default ([`Default`], used by `deepdry table water`) is
/// [`Diffusivity::monteith_unsworth_2013`].
#[derive(Debug, Clone, PartialEq)]
pub struct Diffusivity {
    pub d0: f64,
    pub t0: f64,
    pub p0: f64,
    pub exponent: f64,
}

impl Diffusivity {
    /// Monteith & Unsworth (2013), Principles of Environmental Physics, 4th ed., Appendix 3:
    /// d0 = 2.12·10⁻⁵ m² s⁻¹ at t0 = 273.15 K and p0 = 101.325 kPa, exponent 1.75
    /// (as quoted in the documentation of the R package `tealeaves`, function `.get_Dx`).
    /// At 20 °C this gives 2.40·10⁻⁵ m² s⁻¹, 1 % below the CRC Handbook table value
    /// (Marrero & Mason 1972) of 0.242 cm² s⁻¹.
    pub fn monteith_unsworth_2013() -> Diffusivity {
        Diffusivity {
            d0: 2.12e-5,
            t0: 273.15,
            p0: 101_325.0,
            exponent: 1.75,
        }
    }

    /// Kimball et al. (1976): d0 = 2.29·10⁻⁵ m² s⁻¹ at 273.15 K and 101.325 kPa,
    /// exponent 1.75 (coefficients from memory).
    pub fn kimball_1976() -> Diffusivity {
        Diffusivity {
            d0: 2.29e-5,
            t0: 273.15,
            p0: 101_325.0,
            exponent: 1.75,
        }
    }

    /// Massman (1998, Atmos. Environ. 32, 1111): d0 = 2.178·10⁻⁵ m² s⁻¹ at 273.15 K and
    /// 101.325 kPa, exponent 1.81 (coefficients from memory).
    pub fn massman_1998() -> Diffusivity {
        Diffusivity {
            d0: 2.178e-5,
            t0: 273.15,
            p0: 101_325.0,
            exponent: 1.81,
        }
    }

    /// The form of the project's benchmark issue: d0 = 2.12·10⁻⁵ m² s⁻¹, t0 = 273.15 K,
    /// exponent 1.88, p0 = 101 325 Pa (its published origin is not identified here).
    pub fn benchmark_1_88() -> Diffusivity {
        Diffusivity {
            d0: 2.12e-5,
            t0: 273.15,
            p0: 101_325.0,
            exponent: 1.88,
        }
    }

    /// D(T, p) [m² s⁻¹] and dD/dT.
    #[inline]
    pub fn value(&self, t: f64, p: f64) -> (f64, f64) {
        // (T/T0)^e as exp(e ln(T/T0)): two library calls cheaper than one `powf`, and as
        // accurate for T/T0 near 1 (relative error a few ulp).
        let d = self.d0 * (self.exponent * (t / self.t0).ln()).exp() * (self.p0 / p);
        (d, self.exponent * d / t)
    }
}

impl Default for Diffusivity {
    /// [`Diffusivity::monteith_unsworth_2013`].
    fn default() -> Self {
        Diffusivity::monteith_unsworth_2013()
    }
}

/// Millington & Quirk (1961) tortuosity τ = θa^(7/3)/φ² and dτ/dθa.
///
/// θa < 0 is clipped to 0 (τ = 0, derivative 0); at θa = 0 the derivative is 0 (finite).
/// Requires φ > 0.
#[inline]
pub fn tortuosity(theta_a: f64, porosity: f64) -> (f64, f64) {
    if theta_a.is_nan() || theta_a <= 0.0 {
        return (0.0, 0.0);
    }
    let p2 = porosity * porosity;
    let t43 = theta_a * super::cbrt_positive(theta_a); // θa^(4/3)
    (t43 * theta_a / p2, 7.0 / 3.0 * t43 / p2)
}

/// Enhancement factor η on the thermal vapour flux.
#[derive(Debug, Clone, PartialEq)]
pub enum Enhancement {
    /// η = 1 (no enhancement).
    None,
    /// A fixed η ≥ 1.
    Constant(f64),
    /// Cass et al. (1984) form: η = 9.5 + 3 θ/φ − 8.5 exp(−[(1 + 2.6/√fc) θ/φ]⁴), clay fraction fc.
    ///
    /// As given by Campbell (1985) with A = 9.5, B = 3, D = 1, E = 4 (common practice).
    /// θ < 0 is clipped to 0 (η = 1); fc is floored at 1e-6 (fc → 0 makes the rise from 1
    /// to ≈ 9.5 a step at θ = 0).
    Cass { clay_fraction: f64 },
}

impl Enhancement {
    /// η(θ) [-] and dη/dθ.
    #[inline]
    pub fn value(&self, theta: f64, porosity: f64) -> (f64, f64) {
        match *self {
            Enhancement::None => (1.0, 0.0),
            Enhancement::Constant(eta) => (eta, 0.0),
            Enhancement::Cass { clay_fraction } => {
                let clipped = theta.is_nan() || theta < 0.0;
                let s = if clipped { 0.0 } else { theta / porosity };
                let k = 1.0 + 2.6 / clay_fraction.max(1e-6).sqrt();
                let ks = k * s;
                let u = ks.powi(4);
                let ex = (-u).exp();
                let eta = 9.5 + 3.0 * s - 8.5 * ex;
                if clipped {
                    return (eta, 0.0);
                }
                // dη/ds = 3 + 8.5 · 4 k (ks)³ e^(−u)
                let deds = 3.0 + 34.0 * k * ks.powi(3) * ex;
                (eta, deds / porosity)
            }
        }
    }
}
