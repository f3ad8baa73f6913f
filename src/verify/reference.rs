//! Reference solutions (closed forms) used by the verification cases. Each function names
//! its published source beside it. Where a formula was recalled rather than read in the
//! printed source it says "from memory"; the derivations are repeated in the cases'
//! README files so that they can be checked without the source at hand.

use crate::props::constants::{SECONDS_PER_YEAR, WATER_DENSITY};
use std::f64::consts::PI;

/// Complementary error function, to ~1e-14 relative.
///
/// Series erf(x) = 2/√π Σ (−1)ⁿ x^(2n+1)/(n!(2n+1)) for |x| < 1.5 (Abramowitz & Stegun 1964,
/// Eq. 7.1.5), continued fraction erfc(x) = e^(−x²)/√π · 1/(x + 1/2/(x + 1/(x + 3/2/(x + …))))
/// for x ≥ 1.5 (Abramowitz & Stegun 1964, Eq. 7.1.14); equation numbers from memory. Both
/// agree with an independent erfc to 5e-16 relative at 1.5, 2, 2.5 and 3 (200 levels).
pub fn erfc(x: f64) -> f64 {
    if x < 0.0 {
        return 2.0 - erfc(-x);
    }
    if x < 1.5 {
        // Terms grow to ~e^(x²) before they fall: at x = 1.5 the loss is one digit.
        let x2 = x * x;
        let mut term = x;
        let mut sum = x;
        let mut n = 0.0;
        loop {
            n += 1.0;
            term *= -x2 / n;
            let add = term / (2.0 * n + 1.0);
            sum += add;
            if add.abs() <= 1e-17 * sum.abs() || n > 300.0 {
                break;
            }
        }
        1.0 - 2.0 / PI.sqrt() * sum
    } else {
        // Continued fraction K = x + (1/2)/(x + 1/(x + (3/2)/(x + 2/(x + …)))), evaluated
        // from the tail (200 levels: converged to round-off for x ≥ 1.5).
        let mut f = x;
        for k in (1..=200).rev() {
            f = x + (k as f64 / 2.0) / f;
        }
        (-x * x).exp() / (PI.sqrt() * f)
    }
}

/// Temperature after a step ΔT of the surface temperature at t = 0 on an initially linear
/// geotherm T0 + G z, half-space of diffusivity κ:
/// `T = T0 + G z + ΔT erfc(z / (2 √(κ t)))` (Carslaw & Jaeger 1959, §2.4, the constant
/// surface temperature solution, superposed on the steady linear profile; from memory).
pub fn surface_step(t0: f64, gradient: f64, dtemp: f64, kappa: f64, z: f64, t: f64) -> f64 {
    t0 + gradient * z + dtemp * erfc(z / (2.0 * (kappa * t).sqrt()))
}

/// Damping depth d = √(2κ/ω) of a periodic surface temperature of angular frequency ω
/// (Carslaw & Jaeger 1959, §2.6; from memory).
pub fn damping_depth(kappa: f64, omega: f64) -> f64 {
    (2.0 * kappa / omega).sqrt()
}

/// Steady-periodic temperature under a surface temperature Tm + A sin(ω t) on a linear
/// geotherm: `T = Tm + G z + A e^(−z/d) sin(ω t − z/d)` (Carslaw & Jaeger 1959, §2.6;
/// from memory).
pub fn periodic(tm: f64, gradient: f64, amp: f64, kappa: f64, omega: f64, z: f64, t: f64) -> f64 {
    let d = damping_depth(kappa, omega);
    tm + gradient * z + amp * (-z / d).exp() * (omega * t - z / d).sin()
}

/// Backward-Euler prediction of the amplitude ratio and phase lag of the periodic
/// solution at depth z with steps Δt (no spatial error): the semi-discrete problem
/// replaces iω by s = (1 − e^(−iωΔt))/Δt, so T̂ ∝ e^(−z √(s/κ)). Returns
/// (amplitude ratio, phase lag [rad]). Derived here (common practice: the modified
/// equation of the time integrator).
pub fn periodic_backward_euler(kappa: f64, omega: f64, dt: f64, z: f64) -> (f64, f64) {
    // s = (1 − cos ωΔt + i sin ωΔt)/Δt
    let sr = (1.0 - (omega * dt).cos()) / dt;
    let si = (omega * dt).sin() / dt;
    // √(s/κ) by the principal square root of a complex number.
    let (ar, ai) = (sr / kappa, si / kappa);
    let m = (ar * ar + ai * ai).sqrt();
    let kr = ((m + ar) / 2.0).sqrt();
    let ki = ((m - ar) / 2.0).sqrt();
    ((-kr * z).exp(), ki * z)
}

/// Steady upward flow from a water table at depth L (h = 0) to a surface held at head h0
/// in a soil with K = Ks e^(αh) (Gardner 1958, Soil Sci. 85:228, exponential conductivity
/// case; the derivation is repeated in `validation/gardner-evaporation/README.md`).
/// Returns the evaporation rate E [m s⁻¹] (upward, positive):
/// `E = Ks (e^(−αL) − e^(α h0)) / (1 − e^(−αL))`.
pub fn gardner_rate(ks: f64, alpha: f64, depth: f64, h0: f64) -> f64 {
    let a = (-alpha * depth).exp();
    ks * (a - (alpha * h0).exp()) / (1.0 - a)
}

/// The limiting rate for a dry surface (h0 → −∞): `E = Ks / (e^(αL) − 1)` (Gardner 1958).
pub fn gardner_limit(ks: f64, alpha: f64, depth: f64) -> f64 {
    ks / ((alpha * depth).exp() - 1.0)
}

/// Head at depth z (positive downward) of the steady profile with evaporation rate E:
/// `K(h(z)) = (Ks + E) e^(−α(L − z)) − E`, i.e. `h = ln(K/Ks)/α` (Gardner 1958).
pub fn gardner_head(ks: f64, alpha: f64, depth: f64, e: f64, z: f64) -> f64 {
    let k = (ks + e) * (-alpha * (depth - z)).exp() - e;
    (k / ks).ln() / alpha
}

/// Millington & Quirk (1961) tortuosity τ = θa^(7/3)/φ² (as in the design note, §3).
pub fn millington_quirk(theta_a: f64, porosity: f64) -> f64 {
    theta_a.powf(7.0 / 3.0) / (porosity * porosity)
}

/// Binary diffusivity of vapour in air D = d0 (T/t0)^n (p0/p) [m² s⁻¹] in the power-law
/// form of the case file (`docs/case-file.md`, `[physics] diffusivity`).
pub fn binary_diffusivity(d0: f64, t0: f64, exponent: f64, p0: f64, t: f64, p: f64) -> f64 {
    d0 * (t / t0).powf(exponent) * (p0 / p)
}

/// Steady isothermal vapour flux through a layer of thickness L with a constant effective
/// diffusivity Dv between vapour densities rv_top and rv_bottom (Fick 1855, first law):
/// jv = −Dv (rv_bottom − rv_top)/L, positive downward [kg m⁻² s⁻¹].
pub fn fick_flux(dv: f64, rv_top: f64, rv_bottom: f64, thickness: f64) -> f64 {
    -dv * (rv_bottom - rv_top) / thickness
}

/// Pseudo-steady drying front: water leaves a wet zone (liquid content above the dry
/// value by Δθ) only as vapour diffusing through the dry zone above it, with a linear
/// vapour-density profile (no vapour storage): ρw Δθ dδ/dt = Dv Δrv/δ, so
/// `δ = √(2 Dv Δrv t /(ρw Δθ))` (the quasi-steady limit of the Stefan-type problem,
/// e.g. Carslaw & Jaeger 1959 §11.2 for the analogous melting problem; common practice in
/// soil physics for evaporation from a receding front).
pub fn drying_front_depth(dv: f64, drv: f64, dtheta: f64, t: f64) -> f64 {
    (2.0 * dv * drv * t / (WATER_DENSITY * dtheta)).sqrt()
}

/// Similarity coefficient β of the exact (Neumann-type) solution of the same problem with
/// vapour storage in the dry zone: δ = 2β √(Dv t/θa), with β e^(β²) erf β = St/√π and the
/// Stefan number St = θa Δrv/(ρw Δθ) (Carslaw & Jaeger 1959, §11.2, from memory). Used only
/// to bound the error of the pseudo-steady form: β²/(St/2) − 1 ≈ −St/3.
pub fn drying_front_similarity(stefan: f64) -> f64 {
    // Newton on f(β) = β e^(β²) erf β − St/√π from the small-St guess √(St/2).
    let mut b = (stefan / 2.0).sqrt();
    for _ in 0..50 {
        let erf = 1.0 - erfc(b);
        let f = b * (b * b).exp() * erf - stefan / PI.sqrt();
        let df = (b * b).exp() * (erf * (1.0 + 2.0 * b * b)) + b * 2.0 / PI.sqrt();
        let step = f / df;
        b -= step;
        if step.abs() < 1e-15 * b {
            break;
        }
    }
    b
}

/// Scaled complementary error function erfcx(x) = e^(x²) erfc(x) for x ≥ 0, to ~1e-14
/// relative, without overflow for large x (the continued fraction of [`erfc`] without its
/// factor e^(−x²)).
pub fn erfcx(x: f64) -> f64 {
    if x < 1.5 {
        (x * x).exp() * erfc(x)
    } else {
        let mut f = x;
        for k in (1..=200).rev() {
            f = x + (k as f64 / 2.0) / f;
        }
        1.0 / (PI.sqrt() * f)
    }
}

/// `e^(a) erfc(b)` for b ≥ 0 as `e^(a − b²) erfcx(b)`: finite where e^a alone overflows.
fn exp_erfc(a: f64, b: f64) -> f64 {
    (a - b * b).exp() * erfcx(b)
}

/// Free-water diffusivity of a solute at temperature `t` [K] from its value `d0_25` at
/// 25 °C by the Stokes–Einstein scaling D ∝ T/μ(T) (common practice), with the IAPWS 2008
/// viscosity of water.
pub fn free_diffusivity_at(d0_25: f64, t: f64) -> f64 {
    const T25: f64 = 298.15;
    let mu = |t: f64| crate::props::water::viscosity(t).0;
    d0_25 * (t / T25) * mu(T25) / mu(t)
}

/// Molecular diffusion coefficient of a solute in the liquid of a soil with liquid content
/// θ and porosity φ: `Dm = D0 θ^(7/3)/φ²` (Millington & Quirk 1961, the liquid-phase form
/// of the design note's §1). The flux is −θ Dm ∂c/∂z, so in the θ-weighted balance with
/// uniform θ the diffusion coefficient of c is Dm itself.
pub fn liquid_diffusion_coefficient(d0: f64, theta: f64, porosity: f64) -> f64 {
    d0 * theta.powf(7.0 / 3.0) / (porosity * porosity)
}

/// Relative concentration c/c0 of the advection–dispersion equation ∂c/∂t = D ∂²c/∂x² −
/// v ∂c/∂x on x > 0, c(x, 0) = 0, with a **flux (third-type) inlet** v c − D ∂c/∂x = v c0
/// at x = 0 and c bounded as x → ∞ (Lindstrom et al. 1967; van Genuchten & Alves 1982,
/// USDA Tech. Bull. 1661, the third-type solution for a semi-infinite column; formula from
/// memory, verified in the unit tests below by its residuals in the PDE, the inlet
/// condition and the initial condition, which fix the bounded solution uniquely):
///
/// `c/c0 = ½ erfc(u₋) + √(v²t/(πD)) e^(−u₋²) − ½ (1 + v x/D + v²t/D) e^(vx/D) erfc(u₊)`,
/// `u± = (x ± v t)/(2√(D t))`.
pub fn flux_inlet_concentration(x: f64, t: f64, v: f64, d: f64) -> f64 {
    let s = 2.0 * (d * t).sqrt();
    let um = (x - v * t) / s;
    let up = (x + v * t) / s;
    0.5 * erfc(um) + (v * v * t / (PI * d)).sqrt() * (-um * um).exp()
        - 0.5 * (1.0 + v * x / d + v * v * t / d) * exp_erfc(v * x / d, up)
}

/// Relative concentration c/c0 of the same problem with a **fixed concentration
/// (first-type) inlet** c(0, t) = c0 (Ogata & Banks 1961, USGS Prof. Paper 411-A; formula
/// from memory, verified in the unit tests like the flux-inlet form):
/// `c/c0 = ½ [erfc(u₋) + e^(vx/D) erfc(u₊)]`.
pub fn ogata_banks(x: f64, t: f64, v: f64, d: f64) -> f64 {
    let s = 2.0 * (d * t).sqrt();
    let um = (x - v * t) / s;
    let up = (x + v * t) / s;
    0.5 * (erfc(um) + exp_erfc(v * x / d, up))
}

/// Infiltration from a surface held saturated (h = 0, K = Ks) into a semi-infinite column
/// of an exponential (Gardner) soil, K = Ks e^(αh), θ = θr + (θs − θr) K/Ks, initially at a
/// uniform head (K = Ki). In terms of K Richards' equation is linear (derived in
/// `validation/linearised-infiltration/README.md`):
/// `∂K/∂t = D ∂²K/∂z² − c ∂K/∂z`, `D = Ks/(α (θs − θr))` [m² s⁻¹], `c = Ks/(θs − θr)`
/// [m s⁻¹], so `K = Ki + (Ks − Ki) u` with u the first-type advection–dispersion solution
/// [`ogata_banks`] (the linearised problem of Philip 1969 and Warrick 1975, from memory;
/// the solution is re-derived by Laplace transform in the README).
#[derive(Debug, Clone, Copy)]
pub struct LinearisedInfiltration {
    /// Saturated conductivity Ks [m s⁻¹].
    pub ks: f64,
    /// Exponential coefficient α [m⁻¹].
    pub alpha: f64,
    /// θs − θr [m³ m⁻³].
    pub dtheta: f64,
    /// Initial head hi [m] (< 0).
    pub h_initial: f64,
}

impl LinearisedInfiltration {
    /// Drift c = Ks/(θs − θr) [m s⁻¹].
    pub fn drift(&self) -> f64 {
        self.ks / self.dtheta
    }
    /// Diffusivity D = Ks/(α (θs − θr)) [m² s⁻¹].
    pub fn diffusivity(&self) -> f64 {
        self.ks / (self.alpha * self.dtheta)
    }
    /// Initial conductivity Ki = Ks e^(α hi) [m s⁻¹].
    pub fn k_initial(&self) -> f64 {
        self.ks * (self.alpha * self.h_initial).exp()
    }
    /// u = (K − Ki)/(Ks − Ki) at depth z [m], time t > 0 [s].
    pub fn u(&self, z: f64, t: f64) -> f64 {
        ogata_banks(z, t, self.drift(), self.diffusivity())
    }
    /// Conductivity K [m s⁻¹].
    pub fn conductivity(&self, z: f64, t: f64) -> f64 {
        let ki = self.k_initial();
        ki + (self.ks - ki) * self.u(z, t)
    }
    /// Liquid content above the initial one, θ − θi = (θs − θr)(K − Ki)/Ks [m³ m⁻³].
    pub fn theta_gain(&self, z: f64, t: f64) -> f64 {
        self.dtheta * (self.conductivity(z, t) - self.k_initial()) / self.ks
    }
    /// Head h = ln(K/Ks)/α [m].
    pub fn head(&self, z: f64, t: f64) -> f64 {
        (self.conductivity(z, t) / self.ks).ln() / self.alpha
    }
    /// ∫₀^∞ u dz [m], by composite Simpson quadrature of the exact profile over
    /// [0, ct + 80√(Dt)] (u < 1e-300 beyond; 4000 intervals, the integrand is smooth on the
    /// scale √(Dt)).
    pub fn u_integral(&self, t: f64) -> f64 {
        let (c, d) = (self.drift(), self.diffusivity());
        let top = c * t + 80.0 * (d * t).sqrt();
        let n = 4000;
        let h = top / n as f64;
        let mut s = self.u(0.0, t) + self.u(top, t);
        for k in 1..n {
            let w = if k % 2 == 1 { 4.0 } else { 2.0 };
            s += w * self.u(k as f64 * h, t);
        }
        s * h / 3.0
    }
    /// Cumulative infiltration through the surface [m of water]: the water gained,
    /// (θs − θr)(1 − Ki/Ks) ∫u dz, plus what drained below by gravity at Ki (the initial
    /// state carries the unit-gradient flux Ki everywhere), Ki t.
    pub fn infiltration(&self, t: f64) -> f64 {
        self.dtheta * (1.0 - self.k_initial() / self.ks) * self.u_integral(t) + self.k_initial() * t
    }
    /// Infiltration rate at the surface [m s⁻¹]: q = K − (1/α) ∂K/∂z at z = 0 with
    /// ∂u/∂z(0, t) = −e^(−b²)/√(π D t) + (c/2D) erfc(b), b = c√t/(2√D) (differentiating
    /// [`ogata_banks`]).
    pub fn rate(&self, t: f64) -> f64 {
        let (c, d) = (self.drift(), self.diffusivity());
        let b = c * t.sqrt() / (2.0 * d.sqrt());
        let uz = -(-b * b).exp() / (PI * d * t).sqrt() + c / (2.0 * d) * erfc(b);
        self.ks - (self.ks - self.k_initial()) * uz / self.alpha
    }
}

/// Cumulative infiltration I [m] of Green & Ampt (1911) at time t [s]: a sharp wetting
/// front at depth Zf behind which the soil is saturated (K = Ks), the pressure head −ψ at
/// the front and h0 at the surface, so by Darcy q = dI/dt = Ks (ψ + h0 + Zf)/Zf with
/// I = Δθ Zf; integrating from I(0) = 0 gives `Ks t = I − S ln(1 + I/S)`,
/// S = (ψ + h0) Δθ [m] (derived in `validation/green-ampt/README.md`). Solved for I by
/// bisection (the left side minus Ks t grows monotonically in I).
pub fn green_ampt_infiltration(ks: f64, s: f64, t: f64) -> f64 {
    let f = |i: f64| i - s * (i / s).ln_1p() - ks * t;
    let (mut lo, mut hi) = (0.0, ks * t + (2.0 * s * ks * t).sqrt() + s);
    while f(hi) < 0.0 {
        hi *= 2.0;
    }
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if f(mid) < 0.0 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// Relative concentration c/cb of diffusion ∂c/∂t = D ∂²c/∂x² into a layer 0 < x < L,
/// initially free of solute, with c = cb held at x = 0 and no flux at x = L, at distance
/// `x` from the fixed face: the erfc solution of a semi-infinite medium (Crank 1975,
/// *The Mathematics of Diffusion*, §3.3; from memory) with its images in the no-flux face
/// and the fixed face (method of images, derived in
/// `validation/solute-diffusion-step/README.md`):
/// `c/cb = Σ_{n≥0} (−1)ⁿ [erfc((2nL + x)/(2√(Dt))) + erfc((2(n+1)L − x)/(2√(Dt)))]`.
/// The terms fall below 1e-300 once (2nL + x)/(2√(Dt)) > 26, so a few suffice while
/// √(Dt) < L (the use here); the sum is cut at 1000 terms.
pub fn diffusion_from_face(x: f64, t: f64, d: f64, length: f64) -> f64 {
    let s = 2.0 * (d * t).sqrt();
    let mut sum = 0.0;
    let mut sign = 1.0;
    for n in 0..1000 {
        let a = (2.0 * n as f64 * length + x) / s;
        if a > 26.0 {
            break;
        }
        let b = (2.0 * (n as f64 + 1.0) * length - x) / s;
        sum += sign * (erfc(a) + erfc(b));
        sign = -sign;
    }
    sum
}

/// Observed order of convergence from errors on successive refinements by `ratio`.
pub fn observed_orders(errors: &[f64], ratio: f64) -> Vec<f64> {
    errors
        .windows(2)
        .map(|w| (w[0] / w[1]).ln() / ratio.ln())
        .collect()
}

/// Years to seconds.
pub fn years(y: f64) -> f64 {
    y * SECONDS_PER_YEAR
}

#[cfg(test)]
mod tests {
    use super::*;

    /// erfc at tabulated points (Abramowitz & Stegun 1964, Table 7.1, erf to 15 digits;
    /// values from memory): erf(0.5) = 0.520499877813047, erf(1) = 0.842700792949715,
    /// erf(2) = 0.995322265018953; erfc(3) = 2.20904969985854e-5, erfc(5) = 1.53745979442803e-12.
    #[test]
    fn erfc_matches_tabulated_values() {
        let cases = [
            (0.5, 1.0 - 0.520_499_877_813_047),
            (1.0, 1.0 - 0.842_700_792_949_715),
            (2.0, 1.0 - 0.995_322_265_018_953),
            (3.0, 2.209_049_699_858_54e-5),
            (5.0, 1.537_459_794_428_03e-12),
        ];
        for (x, v) in cases {
            let e = ((erfc(x) - v) / v).abs();
            assert!(e < 1e-12, "erfc({x}) = {} vs {v}: rel {e:.2e}", erfc(x));
        }
        // Continuity where the two forms meet.
        let (a, b) = (erfc(1.5 - 1e-12), erfc(1.5));
        assert!(((a - b) / b).abs() < 1e-10);
        assert!((erfc(-1.0) - (2.0 - erfc(1.0))).abs() < 1e-15);
    }

    #[test]
    fn gardner_profile_meets_its_boundary_values() {
        let (ks, a, l, h0) = (1e-6, 1.0, 5.0, -15.0);
        let e = gardner_rate(ks, a, l, h0);
        assert!((gardner_head(ks, a, l, e, l)).abs() < 1e-12);
        assert!((gardner_head(ks, a, l, e, 0.0) - h0).abs() < 1e-6);
        assert!(((e - gardner_limit(ks, a, l)) / e).abs() < 1e-4);
    }

    #[test]
    fn similarity_solution_approaches_pseudo_steady_for_small_stefan_numbers() {
        for st in [1e-6, 1e-4, 1e-2] {
            let b = drying_front_similarity(st);
            let ratio = b * b / (st / 2.0) - 1.0;
            assert!((ratio + st / 3.0).abs() < 0.2 * st, "St {st}: {ratio}");
        }
    }
    /// The flux-inlet and Ogata–Banks solutions solve their problems: the PDE residual by
    /// central differences, the inlet conditions, c → 0 initially and far downstream.
    #[test]
    fn advection_dispersion_solutions_satisfy_their_problems() {
        let (v, d) = (0.4, 0.02);
        for f in [flux_inlet_concentration, ogata_banks] {
            for &(x, t) in &[(0.05, 0.3), (0.2, 0.5), (0.5, 1.0), (1.0, 2.0), (0.1, 0.05)] {
                let (hx, ht) = (1e-4, 1e-5);
                let ct = (f(x, t + ht, v, d) - f(x, t - ht, v, d)) / (2.0 * ht);
                let cx = (f(x + hx, t, v, d) - f(x - hx, t, v, d)) / (2.0 * hx);
                let cxx =
                    (f(x + hx, t, v, d) - 2.0 * f(x, t, v, d) + f(x - hx, t, v, d)) / (hx * hx);
                let res = ct - (d * cxx - v * cx);
                assert!(
                    res.abs() < 1e-5 * (ct.abs() + v * cx.abs() + 1.0),
                    "{x} {t}: {res}"
                );
            }
            // Initially solute-free, and none far downstream.
            assert!(f(0.5, 1e-6, v, d).abs() < 1e-12);
            assert!(f(50.0, 1.0, v, d).abs() < 1e-12);
        }
        // Inlet conditions: first type c = 1; third type v c − D ∂c/∂x = v.
        for t in [0.01, 0.3, 2.0] {
            assert!((ogata_banks(0.0, t, v, d) - 1.0).abs() < 1e-13);
            let h = 1e-6;
            let f = flux_inlet_concentration;
            let cx =
                (-3.0 * f(0.0, t, v, d) + 4.0 * f(h, t, v, d) - f(2.0 * h, t, v, d)) / (2.0 * h);
            let inlet = v * f(0.0, t, v, d) - d * cx;
            assert!((inlet - v).abs() < 1e-6 * v, "t {t}: {inlet}");
        }
        // Large Péclet numbers: finite (no overflow of e^(vx/D)), and the two inlets agree
        // away from the inlet as the dispersion vanishes.
        let (x, t, d) = (0.9, 2.0, 1e-5);
        let (a, b) = (
            flux_inlet_concentration(x, t, v, d),
            ogata_banks(x, t, v, d),
        );
        assert!(
            a.is_finite() && b.is_finite() && (a - b).abs() < 1e-3,
            "{a} {b}"
        );
    }

    #[test]
    fn erfcx_is_continuous_and_scaled() {
        for x in [0.0, 0.5, 1.4, 2.0, 3.0] {
            assert!((erfcx(x) - (x * x).exp() * erfc(x)).abs() < 1e-13 * erfcx(x));
        }
        assert!(((erfcx(1.5 - 1e-12) - erfcx(1.5)) / erfcx(1.5)).abs() < 1e-10);
        // erfcx(x) → 1/(x√π) for large x.
        assert!((erfcx(1e6) * 1e6 * PI.sqrt() - 1.0).abs() < 1e-9);
    }

    /// The linearised infiltration solution: K = Ks at the surface, Ki far below; the
    /// cumulative infiltration's time derivative equals the surface rate (the K-equation
    /// integrated over depth), which checks the quadrature and the rate formula together;
    /// and Richards' equation in h itself, ∂θ/∂t = −∂/∂z[−K(∂h/∂z − 1)], by differences.
    #[test]
    fn linearised_infiltration_satisfies_richards_equation() {
        let p = LinearisedInfiltration {
            ks: 1e-6,
            alpha: 1.0,
            dtheta: 0.34,
            h_initial: -10.0,
        };
        for t in [3.0e4, 1.0e5, 2.5e5] {
            assert!((p.conductivity(0.0, t) - p.ks).abs() < 1e-12 * p.ks);
            assert!((p.conductivity(9.0, t) - p.k_initial()).abs() < 1e-9 * p.ks);
            let ht = 1.0;
            let di = (p.infiltration(t + ht) - p.infiltration(t - ht)) / (2.0 * ht);
            assert!(
                (di - p.rate(t)).abs() < 1e-7 * p.rate(t),
                "t {t}: {di} {}",
                p.rate(t)
            );
            for z in [0.1, 0.5, 1.0, 2.0] {
                let (hz, ht) = (1e-3, 10.0);
                let dth = (p.theta_gain(z, t + ht) - p.theta_gain(z, t - ht)) / (2.0 * ht);
                // Downward Darcy flux at depth zf, by differences of the exact K and h.
                let q = |zf: f64| {
                    let (a, b) = (zf - hz / 2.0, zf + hz / 2.0);
                    let k = 0.5 * (p.conductivity(a, t) + p.conductivity(b, t));
                    -k * ((p.head(b, t) - p.head(a, t)) / hz - 1.0)
                };
                let div = (q(z + hz / 2.0) - q(z - hz / 2.0)) / hz;
                assert!(
                    (dth + div).abs() < 1e-4 * dth.abs().max(1e-12),
                    "z {z} t {t}: {dth} {div}"
                );
            }
        }
    }

    /// Green & Ampt: the root solves its equation; early I ≈ √(2 S Ks t) (the ψ-dominated
    /// limit of dI/dt = Ks S/I), late dI/dt → Ks (derived from the same equation).
    #[test]
    fn green_ampt_limits() {
        let (ks, s) = (1e-5, 0.05);
        for t in [1.0, 1e3, 1e5, 1e7] {
            let i = green_ampt_infiltration(ks, s, t);
            assert!((i - s * (i / s).ln_1p() - ks * t).abs() < 1e-12 * (ks * t).max(i));
        }
        let t = 1e-3;
        let i = green_ampt_infiltration(ks, s, t);
        assert!((i / (2.0 * s * ks * t).sqrt() - 1.0).abs() < 1e-3);
        let rate =
            (green_ampt_infiltration(ks, s, 1e9 + 1e3) - green_ampt_infiltration(ks, s, 1e9)) / 1e3;
        assert!((rate / ks - 1.0).abs() < 1e-3, "{rate}");
    }

    /// The image series: c = cb at the fixed face, no flux at x = L, 0 initially.
    #[test]
    fn diffusion_from_face_meets_its_conditions() {
        let (d, l) = (0.05, 2.0);
        for t in [0.1, 5.0, 50.0] {
            assert!((diffusion_from_face(0.0, t, d, l) - 1.0).abs() < 1e-13);
            let h = 1e-5;
            let g = (diffusion_from_face(l + h, t, d, l) - diffusion_from_face(l - h, t, d, l))
                / (2.0 * h);
            assert!(g.abs() < 1e-8, "t {t}: {g}");
            let (x, ht) = (0.7, 1e-4);
            let ct = (diffusion_from_face(x, t + ht, d, l) - diffusion_from_face(x, t - ht, d, l))
                / (2.0 * ht);
            let hx = 1e-3;
            let cxx = (diffusion_from_face(x + hx, t, d, l)
                - 2.0 * diffusion_from_face(x, t, d, l)
                + diffusion_from_face(x - hx, t, d, l))
                / (hx * hx);
            assert!((ct - d * cxx).abs() < 1e-5, "t {t}: {ct} {cxx}");
        }
        assert!(diffusion_from_face(1.0, 1e-4, d, l).abs() < 1e-15);
    }
}
