//! Properties of liquid water and water vapour (SI; temperature in kelvin).
//!
//! | law | source | valid range (evaluated range) |
//! |---|---|---|
//! | saturation pressure | IAPWS-IF97 (rev. 2007), region 4, Eq. 30 | 273.15–647.096 K (clamped to 223.15–647.096 K) |
//! | saturated vapour density | ideal gas, psat Mw/(R T) | as psat |
//! | latent heat | model form L0 + (cv − cw)(T − T0) | within 0.3 % of IAPWS-95 for 0–50 °C |
//! | liquid density at 0.1 MPa | IAPWS SR6-08(2011), Eq. 2 | 253.15–383.15 K (clamped there) |
//! | viscosity at 0.1 MPa | IAPWS R12-08 (2008), Eqs. 10–12, μ2 = 1 | as the density (clamped 253.15–383.15 K) |
//! | surface tension | IAPWS R1-76(2014) | 273.16–647.096 K, extrapolates to 248.15 K (clamped 248.15 K–Tc; 0 above Tc) |
//! | Kelvin relative humidity | hr = exp(g Mw h/(R T)) | all h (hr = 1 for h ≥ 0), T > 0 |
//!
//! Outside its evaluated range a law is held at the value of the nearest end (its derivative
//! is then 0), so that a stiff Newton iterate never produces NaN. Every function is
//! allocation-free.

use super::constants::{
    GAS_CONSTANT, GRAVITY, LATENT_HEAT_T0, MOLAR_MASS_WATER, T_REF, VAPOR_HEAT_CAPACITY,
    WATER_HEAT_CAPACITY,
};
use super::jet::Jet;

/// Critical temperature of water [K] (IAPWS-95, IF97).
pub const CRITICAL_TEMPERATURE: f64 = 647.096;
/// Lower end of the validity of the IF97 saturation-pressure equation [K].
pub const SATURATION_T_MIN: f64 = 273.15;
/// Lower end of the range over which the saturation-pressure equation is evaluated
/// (extrapolation over supercooled liquid) [K].
pub const SATURATION_T_EVAL_MIN: f64 = 223.15;
/// Validity range of the liquid-water laws at 0.1 MPa (density, viscosity) [K]
/// (IAPWS SR6-08(2011)).
pub const LIQUID_T_MIN: f64 = 253.15;
/// See [`LIQUID_T_MIN`].
pub const LIQUID_T_MAX: f64 = 383.15;
/// Lowest temperature of the surface-tension extrapolation recommended by IAPWS R1-76(2014) [K].
pub const SURFACE_TENSION_T_MIN: f64 = 248.15;

/// IAPWS-IF97 Table 34: coefficients n1..n10 of the saturation-pressure equation.
const N4: [f64; 10] = [
    0.116_705_214_527_67e4,
    -0.724_213_167_032_06e6,
    -0.170_738_469_400_92e2,
    0.120_208_247_024_70e5,
    -0.323_255_503_223_33e7,
    0.149_151_086_135_30e2,
    -0.482_326_573_615_91e4,
    0.405_113_405_420_57e6,
    -0.238_555_575_678_49,
    0.650_175_348_447_98e3,
];

/// A jet in T, or a constant when T lies outside [lo, hi] (the law is then held at the
/// value of the nearest end, derivatives 0).
fn clamped_var<const S: bool>(t: f64, lo: f64, hi: f64) -> Jet<S> {
    if t.is_finite() && !(lo..=hi).contains(&t) {
        Jet::cst(t.clamp(lo, hi))
    } else {
        Jet::var(t)
    }
}

/// IF97 Eq. 30 on a jet in T: psat [Pa].
fn psat_of<const S: bool>(tj: Jet<S>) -> Jet<S> {
    let n = &N4;
    // ϑ = T/T* + n9/(T/T* − n10), T* = 1 K
    let th = tj + n[8] / (tj - n[9]);
    let a = th * th + th * n[0] + n[1];
    let b = th * th * n[2] + th * n[3] + n[4];
    let c = th * th * n[5] + th * n[6] + n[7];
    let beta = c * 2.0 / (-b + (b * b - a * c * 4.0).sqrt());
    beta.powi(4) * 1e6 // p* = 1 MPa
}

fn psat_jet(t: f64) -> Jet {
    psat_of(clamped_var(t, SATURATION_T_EVAL_MIN, CRITICAL_TEMPERATURE))
}

/// Saturation vapour pressure psat(T) [Pa] and dpsat/dT [Pa K⁻¹].
///
/// IAPWS-IF97 (Revised Release 2007) region 4, saturation-pressure equation (Eq. 30,
/// Table 34). Valid 273.15 K ≤ T ≤ 647.096 K; below 273.15 K the same equation is
/// extrapolated over supercooled liquid down to 223.15 K; outside 223.15–647.096 K the value
/// is held at the nearest end and the derivative is 0.
pub fn saturation_pressure(t: f64) -> (f64, f64) {
    let p = psat_jet(t);
    (p.v, p.d)
}

/// psat(T) [Pa] with dpsat/dT [Pa K⁻¹] and d²psat/dT² [Pa K⁻²] (same law and range as
/// [`saturation_pressure`]).
pub fn saturation_pressure_d2(t: f64) -> (f64, f64, f64) {
    let p = psat_jet(t);
    (p.v, p.d, p.dd)
}

/// Saturated vapour density rvs(T) = psat Mw/(R T) [kg m⁻³] with d/dT and d²/dT².
///
/// Water vapour as an ideal gas at its saturation pressure, the usual form in soil physics.
/// It is below the IAPWS-95 saturated-vapour density by about 0.1 % at 10 °C, 0.5 % at
/// 60 °C and 1.2 % at 90 °C (vapour non-ideality; see tests/props_water.rs). The derivatives
/// are exact derivatives of this expression (psat from [`saturation_pressure`], same range).
pub fn saturated_vapor_density(t: f64) -> (f64, f64, f64) {
    let r = saturated_vapor_density_jet::<true>(t);
    (r.v, r.d, r.dd)
}

/// The value and first derivative of [`saturated_vapor_density`], bitwise the same,
/// without the cost of the second derivative.
pub fn saturated_vapor_density_d1(t: f64) -> (f64, f64) {
    let r = saturated_vapor_density_jet::<false>(t);
    (r.v, r.d)
}

fn saturated_vapor_density_jet<const S: bool>(t: f64) -> Jet<S> {
    let tj = clamped_var::<S>(t, SATURATION_T_EVAL_MIN, CRITICAL_TEMPERATURE);
    psat_of(tj) * (MOLAR_MASS_WATER / GAS_CONSTANT) / tj
}

/// dL/dT of the model latent heat, cv − cw [J kg⁻¹ K⁻¹].
pub const LATENT_HEAT_SLOPE: f64 = VAPOR_HEAT_CAPACITY - WATER_HEAT_CAPACITY;

/// Latent heat of vaporisation used by the energy balance, L(T) = L0 + (cv − cw)(T − T0) [J kg⁻¹].
///
/// This is the form implied by the enthalpy reference of the energy balance (design note §2),
/// with L0, cv, cw from [`super::constants`]. It is within 0.3 % of the IAPWS-95 values from
/// 0 to 50 °C (tested), 0.6 % at 100 °C; use it as a model law, not as a steam table.
/// Its derivative is the constant [`LATENT_HEAT_SLOPE`].
pub fn latent_heat(t: f64) -> f64 {
    LATENT_HEAT_T0 + LATENT_HEAT_SLOPE * (t - T_REF)
}

/// [`latent_heat`] with its derivative dL/dT [J kg⁻¹ K⁻¹].
pub fn latent_heat_with_derivative(t: f64) -> (f64, f64) {
    (latent_heat(t), LATENT_HEAT_SLOPE)
}

/// IAPWS SR6-08(2011) Eq. 2: specific volume at p0 = 0.1 MPa, v0 = (R Tr/p0)·[a5 + Σ ai αⁿⁱ + Σ bi βᵐⁱ],
/// α = Tr/(Ta − T), β = Tr/(T − Tb). Returns the density ρ = 1/v0 on a jet.
fn density_jet(tj: Jet) -> Jet {
    // Table 2 of the release (the volume part).
    const R: f64 = 461.518_05; // J kg⁻¹ K⁻¹
    const TR: f64 = 10.0;
    const TA: f64 = 593.0;
    const TB: f64 = 232.0;
    const P0: f64 = 1.0e5;
    const A5: f64 = 1.937_631_57e-2;
    const A: [(f64, i32); 5] = [
        (6.744_584_46e3, 4),
        (-2.225_216_04e5, 5),
        (1.002_312_47e8, 7),
        (-1.635_521_18e9, 8),
        (8.322_996_58e9, 9),
    ];
    const B: [(f64, i32); 6] = [
        (5.785_452_92e-3, 1),
        (-1.531_956_65e-2, 2),
        (3.113_378_59e-2, 3),
        (-4.235_462_41e-2, 4),
        (3.387_135_07e-2, 5),
        (-1.199_467_61e-2, 6),
    ];
    let alpha = TR / (TA - tj);
    let beta = TR / (tj - TB);
    let mut s = Jet::cst(A5);
    for (a, n) in A {
        s = s + alpha.powi(n) * a;
    }
    for (b, m) in B {
        s = s + beta.powi(m) * b;
    }
    let v = s * (R * TR / P0);
    1.0 / v
}

fn liquid_t(t: f64) -> Jet {
    clamped_var(t, LIQUID_T_MIN, LIQUID_T_MAX)
}

/// Liquid density at 0.1 MPa [kg m⁻³] and dρ/dT.
///
/// IAPWS Revised Supplementary Release on Properties of Liquid Water at 0.1 MPa,
/// SR6-08(2011), Eq. 2. Valid 253.15–383.15 K (including metastable liquid); held at the end
/// values outside.
pub fn liquid_density(t: f64) -> (f64, f64) {
    let r = density_jet(liquid_t(t));
    (r.v, r.d)
}

/// IAPWS 2008 viscosity (R12-08, Eqs. 10–12) with μ2 = 1, on jets in T.
fn viscosity_jet(tj: Jet, rho: Jet) -> Jet {
    // Table 1
    const H0: [f64; 4] = [1.677_52, 2.204_62, 0.636_656_4, -0.241_605];
    // Table 2: H[i][j], i = 0..5 (temperature), j = 0..6 (density).
    const H: [[f64; 7]; 6] = [
        [
            5.200_94e-1,
            2.225_31e-1,
            -2.813_78e-1,
            1.619_13e-1,
            -3.253_72e-2,
            0.0,
            0.0,
        ],
        [
            8.508_95e-2,
            9.991_15e-1,
            -9.068_51e-1,
            2.573_99e-1,
            0.0,
            0.0,
            0.0,
        ],
        [-1.083_74, 1.887_97, -7.724_79e-1, 0.0, 0.0, 0.0, 0.0],
        [
            -2.895_55e-1,
            1.266_13,
            -4.898_37e-1,
            0.0,
            6.984_52e-2,
            0.0,
            -4.356_73e-3,
        ],
        [0.0, 0.0, -2.570_40e-1, 0.0, 0.0, 8.721_02e-3, 0.0],
        [0.0, 1.205_73e-1, 0.0, 0.0, 0.0, 0.0, -5.932_64e-4],
    ];
    const RHO_STAR: f64 = 322.0;
    let tb = tj / CRITICAL_TEMPERATURE;
    let rb = rho / RHO_STAR;
    // μ0 = 100 √T̄ / Σ Hi / T̄^i
    let inv_t = 1.0 / tb;
    let mut den = Jet::cst(H0[0]);
    let mut ti = Jet::cst(1.0);
    for h in &H0[1..] {
        ti = ti * inv_t;
        den = den + ti * *h;
    }
    let mu0 = tb.sqrt() * 100.0 / den;
    // μ1 = exp(ρ̄ Σi (1/T̄ − 1)^i Σj Hij (ρ̄ − 1)^j)
    let x = inv_t - 1.0;
    let y = rb - 1.0;
    let mut sum = Jet::cst(0.0);
    let mut xi = Jet::cst(1.0);
    for row in &H {
        // Horner in (ρ̄ − 1)
        let mut inner = Jet::cst(0.0);
        for h in row.iter().rev() {
            inner = inner * y + *h;
        }
        sum = sum + xi * inner;
        xi = xi * x;
    }
    let mu1 = (rb * sum).exp();
    mu0 * mu1 * 1e-6 // μ* = 1 µPa s
}

/// Viscosity of water from the IAPWS 2008 formulation (Release R12-08, Eqs. 10–12, with the
/// critical enhancement μ2 = 1 as the release recommends outside the critical region) at
/// temperature `t` [K] and density `rho` [kg m⁻³]: μ [Pa s] and ∂μ/∂T at constant ρ.
///
/// Valid over the stable fluid region, 273.15–1173.15 K (release §2.2); no clamping here.
pub fn viscosity_at_density(t: f64, rho: f64) -> (f64, f64) {
    let m = viscosity_jet(Jet::var(t), Jet::cst(rho));
    (m.v, m.d)
}

/// Dynamic viscosity of liquid water at 0.1 MPa [Pa s] and dμ/dT.
///
/// IAPWS 2008 formulation ([`viscosity_at_density`]) evaluated at the 0.1 MPa density of
/// [`liquid_density`]; dμ/dT includes the density's temperature dependence. Valid
/// 253.15–383.15 K (the range of the density law); held at the end values outside.
pub fn viscosity(t: f64) -> (f64, f64) {
    let tj = liquid_t(t);
    let rho = density_jet(tj);
    let m = viscosity_jet(tj, rho);
    (m.v, m.d)
}

/// Surface tension of water against air [N m⁻¹] and dσ/dT.
///
/// IAPWS R1-76(2014): σ = B τ^μ (1 + b τ), τ = 1 − T/Tc, B = 235.8 mN m⁻¹, b = −0.625,
/// μ = 1.256, Tc = 647.096 K. Strictly for water against its own vapour; against air at
/// ordinary pressures the difference is within the release's uncertainty (common practice).
/// Valid 273.16 K–Tc; IAPWS states it extrapolates reasonably down to 248.15 K (−25 °C).
/// Held at its 248.15 K value below; 0 (derivative 0) at and above Tc.
pub fn surface_tension(t: f64) -> (f64, f64) {
    const B: f64 = 235.8e-3;
    const BB: f64 = -0.625;
    const MU: f64 = 1.256;
    if t >= CRITICAL_TEMPERATURE {
        return (0.0, 0.0);
    }
    let clamped = t < SURFACE_TENSION_T_MIN;
    let tt = if clamped { SURFACE_TENSION_T_MIN } else { t };
    let tau = 1.0 - tt / CRITICAL_TEMPERATURE;
    let tm = tau.powf(MU);
    let s = B * tm * (1.0 + BB * tau);
    if clamped {
        return (s, 0.0);
    }
    // dσ/dτ = B [μ τ^(μ−1) (1 + bτ) + b τ^μ];  dτ/dT = −1/Tc
    let dsdtau = B * (MU * tau.powf(MU - 1.0) * (1.0 + BB * tau) + BB * tm);
    (s, -dsdtau / CRITICAL_TEMPERATURE)
}

/// g Mw / R [K m⁻¹]: hr = exp(KELVIN · h / T).
const KELVIN: f64 = GRAVITY * MOLAR_MASS_WATER / GAS_CONSTANT;

/// Kelvin equation: equilibrium relative humidity hr = exp(g Mw h/(R T)) [-],
/// with dhr/dh [m⁻¹] and dhr/dT [K⁻¹].
///
/// For h ≥ 0 (saturated soil) hr = 1 with zero derivatives. For very negative heads hr
/// underflows gracefully to 0 (finite derivatives). Requires T > 0.
#[inline]
pub fn relative_humidity(h: f64, t: f64) -> (f64, f64, f64) {
    if h >= 0.0 {
        return (1.0, 0.0, 0.0);
    }
    let k = KELVIN / t;
    let hr = (k * h).exp();
    (hr, hr * k, -hr * k * h / t)
}

/// Inverse Kelvin equation: the head [m] in equilibrium with relative humidity `hr` at `t`,
/// h = R T ln(hr)/(g Mw).
///
/// `hr` ≥ 1 gives 0 (saturated); `hr` ≤ 0 is taken as the smallest positive double
/// (h ≈ −8.9·10⁶ m at 20 °C), so the result is always finite for finite T > 0.
pub fn head_from_relative_humidity(hr: f64, t: f64) -> f64 {
    if hr >= 1.0 {
        return 0.0;
    }
    let hr = if hr > 0.0 { hr } else { f64::MIN_POSITIVE };
    t * hr.ln() / KELVIN
}

#[cfg(test)]
mod tests {
    /// The first-derivative variant gives bitwise the value and slope of the full one,
    /// inside and outside the evaluated range (the residual-only path relies on it).
    #[test]
    fn first_derivative_variant_matches_bitwise() {
        for k in 0..=2000 {
            let t = 200.0 + 0.25 * f64::from(k);
            let (v, d, _) = super::saturated_vapor_density(t);
            let (v1, d1) = super::saturated_vapor_density_d1(t);
            assert_eq!(
                (v.to_bits(), d.to_bits()),
                (v1.to_bits(), d1.to_bits()),
                "T = {t}"
            );
        }
    }
}
