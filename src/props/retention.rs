//! Retention laws θ(h) and their matching relative conductivity Kr(h) (Mualem 1976).
//!
//! Heads h in metres, negative when unsaturated. For h ≥ 0 every law is saturated:
//! θ = θs, Kr = 1, both derivatives 0.
//!
//! Numerics: the laws are evaluated through ln Se and ln Kr, so that heads down to −10⁷ m
//! (and beyond) give finite values and derivatives: Kr may be 10⁻⁴⁰ or smaller (it
//! underflows gracefully to 0, never to NaN), dKr/dh and dθ/dh stay finite. No allocation.
//!
//! Valid parameter ranges (checked by the case loader, not here): 0 ≤ θr < θs ≤ 1,
//! α > 0, n > 1 (van Genuchten), air-entry head > 0 and λ > 0 (Brooks–Corey),
//! oven-dry head < −0.01 m (Fayer–Simmons).

/// Oven-dry head used when no dry-end extension is set (tables, plots) [m]
/// (≈ 10⁷ cm of suction, common practice).
pub const OVEN_DRY_HEAD: f64 = -1.0e5;

/// Number of panels of the 8-point rule in [`Retention::cell_average_theta`].
const AVERAGE_PANELS: usize = 3;

/// Offset σ0 [m] of the logarithmic variable of [`Retention::cell_average_theta`].
const AVERAGE_OFFSET: f64 = 1.0e-3;

/// Gauss–Legendre rule with 8 points on [−1, 1]: the positive nodes and their weights
/// (each node ±x; Abramowitz & Stegun 1964, Table 25.4, from memory; the test
/// `gauss_legendre_8_is_exact_to_degree_15` checks them against exact integrals).
#[allow(clippy::excessive_precision)]
pub const GAUSS_LEGENDRE_8: [(f64, f64); 4] = [
    (0.183_434_642_495_649_8, 0.362_683_783_378_362_0),
    (0.525_532_409_916_329_0, 0.313_706_645_877_887_3),
    (0.796_666_477_413_626_7, 0.222_381_034_453_374_5),
    (0.960_289_856_497_536_3, 0.101_228_536_290_376_3),
];

/// The base retention law. Heads in metres (negative when unsaturated).
#[derive(Debug, Clone, PartialEq)]
pub enum RetentionLaw {
    /// van Genuchten (1980) with m = 1 − 1/n; Mualem (1976) conductivity with pore
    /// connectivity `l` (0.5 in the original).
    ///
    /// Se = [1 + (α|h|)ⁿ]^(−m), θ = θr + (θs − θr) Se,
    /// Kr = Se^l [1 − (1 − Se^(1/m))^m]² (van Genuchten 1980, Eq. 8 with Mualem's l).
    /// `alpha` in m⁻¹.
    VanGenuchten {
        theta_r: f64,
        theta_s: f64,
        alpha: f64,
        n: f64,
        l: f64,
        /// Air-entry head magnitude |hs| [m] of the modification of Vogel et al. (2001)
        /// (0: off). The curve is saturated for |h| ≤ |hs| and scaled so that it reaches
        /// θs there: Se* = Se(h)/Se(hs), Kr = Se*^l [(1 − w^m)/(1 − w_s^m)]² (w = 1 −
        /// Se^(1/m) of the unscaled curve; form as recalled from Vogel et al. 2001, from
        /// memory). With n < 2 the plain Mualem Kr has an unbounded slope at saturation;
        /// the modification makes it finite (d ln Kr/dh ≈ n/|hs| there).
        air_entry: f64,
    },
    /// Brooks & Corey (1964): Se = (h/hb)^(−λ) below the air-entry head; Mualem conductivity.
    /// `air_entry` is the magnitude |hb| [m].
    ///
    /// Se = 1 for |h| ≤ |hb|; Mualem's integral gives Kr = Se^(l + 2 + 2/λ).
    /// θ and Kr have a kink at h = −|hb| (inherent to the law).
    BrooksCorey {
        theta_r: f64,
        theta_s: f64,
        air_entry: f64,
        lambda: f64,
        l: f64,
    },
    /// Exponential (Gardner 1958 type): θ = θr + (θs − θr) e^(αh), Kr = e^(αh) for h < 0.
    /// `alpha` in m⁻¹.
    Exponential {
        theta_r: f64,
        theta_s: f64,
        alpha: f64,
    },
}

/// Extension of the retention curve to oven dryness.
#[derive(Debug, Clone, PartialEq)]
pub enum DryEnd {
    /// Fayer & Simmons (1995): θr is replaced by an adsorbed-water term that vanishes at
    /// the oven-dry head `oven_dry_head` [m, negative].
    ///
    /// θ(h) = χ(h) θr + [θs − χ(h) θr] Se(h), with Se(h) the base law's effective saturation
    /// and θr the base law's residual content (now read as the adsorption parameter θa).
    ///
    /// **Units of the log term.** The published form writes χ = 1 − ln ψ / ln ψm with the
    /// suctions ψ, ψm in **cm** (form as recalled from Fayer & Simmons 1995, from memory), so
    /// that χ = 1 at ψ = 1 cm. The ratio of logarithms depends on the unit, so we keep the
    /// centimetre convention exactly:
    /// χ(h) = 1 − ln(100·|h|) / ln(100·|h_od|),  h and h_od in metres.
    /// χ falls from 1 at |h| = 0.01 m to 0 at the oven-dry head; for |h| < 0.01 m it exceeds 1
    /// (the form is smooth there and θ stays ≤ θs because 1 − Se → 0); it is capped at θs/θr
    /// so that θ ≤ θs for any head. Beyond the oven-dry head χ = 0 and θ = θs·Se(h), so
    /// θ(h_od) = θs·Se(h_od), practically 0 (≈ 3·10⁻⁴ for a loam with h_od = −10⁵ m); the slope
    /// of θ has a small kink at h_od.
    ///
    /// **Conductivity.** Fayer & Simmons give no closed-form Kr for the extended curve. Here
    /// the adsorbed film χθr(1 − Se) is taken as immobile: Kr(h) is the base law's Mualem
    /// Kr(Se(h)), unchanged by the extension (our choice, documented; film flow is not
    /// modelled).
    FayerSimmons { oven_dry_head: f64 },
}

#[derive(Debug, Clone, PartialEq)]
pub struct Retention {
    pub law: RetentionLaw,
    pub dry_end: Option<DryEnd>,
}

/// The softplus pair (ln(1 + eᵗ), ln(1 + e⁻ᵗ)) without overflow, with the logistic pair
/// (1/(1 + e⁻ᵗ), 1/(1 + eᵗ)), from one exponential and one logarithm.
fn softplus_pair(t: f64) -> (f64, f64, f64, f64) {
    if t > 0.0 {
        let e = (-t).exp();
        let a = e.ln_1p();
        (t + a, a, 1.0 / (1.0 + e), e / (1.0 + e))
    } else {
        let e = t.exp();
        let b = e.ln_1p();
        (b, -t + b, e / (1.0 + e), 1.0 / (1.0 + e))
    }
}

/// Base-law quantities at a head h < 0.
#[derive(Debug, Clone, Copy)]
struct Base {
    /// ln Se and d ln Se/dh [m⁻¹].
    ln_se: f64,
    dln_se: f64,
    /// Se and Kr themselves (computed without going through their logarithms where
    /// the law allows), and d ln Kr/dh [m⁻¹].
    se: f64,
    kr: f64,
    dln_kr: f64,
}

/// The plain van Genuchten–Mualem parts at h < 0: (ln Se, d ln Se/dh, 1 − w^m,
/// d ln(1 − w^m)/dh) with w = 1 − Se^(1/m), m = 1 − 1/n.
#[inline]
fn vg_parts(alpha: f64, n: f64, h: f64) -> (f64, f64, f64, f64) {
    let m = 1.0 - 1.0 / n;
    let lx = (-alpha * h).ln(); // ln x, x = α|h|
    let t = n * lx; // ln xⁿ
                    // ln(1 + xⁿ), ln(1 + x⁻ⁿ), w = xⁿ/(1 + xⁿ) and 1 − w.
    let (sp, sp_neg, w, one_m_w) = softplus_pair(t);
    let ln_se = -m * sp;
    // d ln Se/dh = α m n w/x = m n w/|h|  (α/x = 1/|h|)
    let dln_se = m * n * w / (-h);
    // Mualem: 1 − Se^(1/m) = w, Kr = Se^l (1 − w^m)².
    let (one_m_wm, dterm) = if t > 30.0 {
        // w^m = exp(−m ln(1 + x⁻ⁿ)) ⇒ 1 − w^m = m x⁻ⁿ (1 + O(x⁻ⁿ)).
        // d/dh ln(1 − w^m) → α n / x = n/|h| (relative error O(x⁻ⁿ) < 1e-13).
        (m * (-t).exp(), n / (-h))
    } else {
        let a = -m * sp_neg; // ln w^m
                             // w^m and 1 − w^m, accurate near w^m → 1 and w^m → 0.
        let (wm, one_m_wm) = if a > -std::f64::consts::LN_2 {
            let one_m_wm = -a.exp_m1();
            (1.0 - one_m_wm, one_m_wm)
        } else {
            let wm = a.exp();
            (wm, 1.0 - wm)
        };
        // d/dh ln(1 − w^m) = α m n w^m (1 − w) / (x (1 − w^m))
        //                  = m n w^m (1 − w) / (|h| (1 − w^m))
        (one_m_wm, m * n * wm * one_m_w / (-h * one_m_wm))
    };
    (ln_se, dln_se, one_m_wm, dterm)
}

impl RetentionLaw {
    /// One line naming the law and its parameters with units (for `deepdry check`),
    /// numbers formatted by `g`.
    pub fn describe(&self, g: impl Fn(f64) -> String) -> String {
        match *self {
            RetentionLaw::VanGenuchten {
                theta_r,
                theta_s,
                alpha,
                n,
                l,
                air_entry,
            } => format!(
                "van Genuchten–Mualem θr {}, θs {}, α {} 1/m, n {}, l {}{}",
                g(theta_r),
                g(theta_s),
                g(alpha),
                g(n),
                g(l),
                if air_entry > 0.0 {
                    format!(", air entry −{} m (Vogel et al. 2001)", g(air_entry))
                } else {
                    String::new()
                }
            ),
            RetentionLaw::BrooksCorey {
                theta_r,
                theta_s,
                air_entry,
                lambda,
                l,
            } => format!(
                "Brooks–Corey–Mualem θr {}, θs {}, |hb| {} m, pore-size index λ {}, l {}",
                g(theta_r),
                g(theta_s),
                g(air_entry),
                g(lambda),
                g(l)
            ),
            RetentionLaw::Exponential {
                theta_r,
                theta_s,
                alpha,
            } => format!(
                "exponential θr {}, θs {}, α {} 1/m",
                g(theta_r),
                g(theta_s),
                g(alpha)
            ),
        }
    }

    /// Residual liquid content θr [m³ m⁻³].
    pub fn theta_r(&self) -> f64 {
        match *self {
            RetentionLaw::VanGenuchten { theta_r, .. }
            | RetentionLaw::BrooksCorey { theta_r, .. }
            | RetentionLaw::Exponential { theta_r, .. } => theta_r,
        }
    }
    /// The highest head at which the soil is not saturated [m]: −|air-entry head| of
    /// van Genuchten with the Vogel et al. (2001) modification and of Brooks–Corey, 0
    /// otherwise. Above it θ = θs and dθ/dh = 0.
    pub fn saturation_head(&self) -> f64 {
        match *self {
            RetentionLaw::VanGenuchten { air_entry, .. }
            | RetentionLaw::BrooksCorey { air_entry, .. } => -air_entry,
            RetentionLaw::Exponential { .. } => 0.0,
        }
    }
    /// Saturated liquid content θs [m³ m⁻³].
    pub fn theta_s(&self) -> f64 {
        match *self {
            RetentionLaw::VanGenuchten { theta_s, .. }
            | RetentionLaw::BrooksCorey { theta_s, .. }
            | RetentionLaw::Exponential { theta_s, .. } => theta_s,
        }
    }

    /// ln Se, ln Kr and their h-derivatives for h < 0.
    #[inline]
    fn base(&self, h: f64) -> Base {
        match *self {
            RetentionLaw::VanGenuchten {
                alpha,
                n,
                l,
                air_entry,
                ..
            } => {
                if air_entry > 0.0 && -h <= air_entry {
                    return Base {
                        ln_se: 0.0,
                        dln_se: 0.0,
                        se: 1.0,
                        kr: 1.0,
                        dln_kr: 0.0,
                    };
                }
                let (mut ln_se, dln_se, mut one_m_wm, dterm) = vg_parts(alpha, n, h);
                if air_entry > 0.0 {
                    // Scaled to reach saturation at hs (Vogel et al. 2001).
                    let (ln_se_s, _, one_m_wm_s, _) = vg_parts(alpha, n, -air_entry);
                    ln_se -= ln_se_s;
                    one_m_wm /= one_m_wm_s;
                }
                let se = ln_se.exp();
                // Se^l: the square root for Mualem's l = 1/2 (common practice).
                let se_l = if l == 0.5 {
                    se.sqrt()
                } else {
                    (l * ln_se).exp()
                };
                Base {
                    ln_se,
                    dln_se,
                    se,
                    kr: se_l * one_m_wm * one_m_wm,
                    dln_kr: l * dln_se + 2.0 * dterm,
                }
            }
            RetentionLaw::BrooksCorey {
                air_entry,
                lambda,
                l,
                ..
            } => {
                if -h <= air_entry {
                    Base {
                        ln_se: 0.0,
                        dln_se: 0.0,
                        se: 1.0,
                        kr: 1.0,
                        dln_kr: 0.0,
                    }
                } else {
                    let ln_se = -lambda * (-h / air_entry).ln();
                    let dln_se = -lambda / h;
                    let p = l + 2.0 + 2.0 / lambda;
                    Base {
                        ln_se,
                        dln_se,
                        se: ln_se.exp(),
                        kr: (p * ln_se).exp(),
                        dln_kr: p * dln_se,
                    }
                }
            }
            RetentionLaw::Exponential { alpha, .. } => {
                let e = (alpha * h).exp();
                Base {
                    ln_se: alpha * h,
                    dln_se: alpha,
                    se: e,
                    kr: e,
                    dln_kr: alpha,
                }
            }
        }
    }

    /// Closed-form inverse of the base law: head at effective saturation 0 < Se < 1.
    fn head_from_se(&self, se: f64) -> f64 {
        match *self {
            RetentionLaw::VanGenuchten {
                alpha,
                n,
                air_entry,
                ..
            } => {
                let m = 1.0 - 1.0 / n;
                // The unscaled Se (Se* Se(hs) with an air entry).
                let ln_se = if air_entry > 0.0 {
                    se.ln() + vg_parts(alpha, n, -air_entry).0
                } else {
                    se.ln()
                };
                // (α|h|)ⁿ = Se^(−1/m) − 1
                let xn = (-ln_se / m).exp_m1();
                -xn.powf(1.0 / n) / alpha
            }
            RetentionLaw::BrooksCorey {
                air_entry, lambda, ..
            } => -air_entry * se.powf(-1.0 / lambda),
            RetentionLaw::Exponential { alpha, .. } => se.ln() / alpha,
        }
    }
}

impl DryEnd {
    fn oven_dry_head(&self) -> f64 {
        match *self {
            DryEnd::FayerSimmons { oven_dry_head } => oven_dry_head,
        }
    }
}

impl Retention {
    /// The highest head at which the soil is not saturated [m] (see
    /// [`RetentionLaw::saturation_head`]).
    pub fn saturation_head(&self) -> f64 {
        self.law.saturation_head()
    }

    /// Saturated liquid content θs = porosity used by the balance laws [m³ m⁻³].
    pub fn theta_s(&self) -> f64 {
        self.law.theta_s()
    }

    /// Residual content θr of the base law (the adsorption parameter θa when the
    /// Fayer–Simmons extension is set) [m³ m⁻³].
    pub fn theta_r(&self) -> f64 {
        self.law.theta_r()
    }

    /// The head at which the curve is taken as oven dry [m]: the dry-end head when an
    /// extension is set, otherwise [`OVEN_DRY_HEAD`].
    pub fn oven_dry_head(&self) -> f64 {
        self.dry_end
            .as_ref()
            .map_or(OVEN_DRY_HEAD, DryEnd::oven_dry_head)
    }

    /// Effective saturation of the base law Se(h) [-] and dSe/dh [m⁻¹] (1 and 0 for h ≥ 0).
    pub fn effective_saturation(&self, h: f64) -> (f64, f64) {
        if h >= 0.0 || h.is_nan() {
            return (1.0, 0.0);
        }
        let b = self.law.base(h);
        (b.se, b.se * b.dln_se)
    }

    /// Liquid content θ(h) [m³ m⁻³] and dθ/dh [m⁻¹].
    pub fn theta(&self, h: f64) -> (f64, f64) {
        if h >= 0.0 || h.is_nan() {
            return (self.law.theta_s(), 0.0);
        }
        self.theta_from_base(h, &self.law.base(h))
    }

    /// θ(h) and dθ/dh, and Kr(h) and dKr/dh, from one evaluation of the base law (the
    /// residual needs both at every cell).
    #[inline]
    pub fn theta_and_relative_conductivity(&self, h: f64) -> ((f64, f64), (f64, f64)) {
        if h >= 0.0 || h.is_nan() {
            return ((self.law.theta_s(), 0.0), (1.0, 0.0));
        }
        let b = self.law.base(h);
        let kr = b.kr;
        (self.theta_from_base(h, &b), (kr, kr * b.dln_kr))
    }

    fn theta_from_base(&self, h: f64, b: &Base) -> (f64, f64) {
        let ts = self.law.theta_s();
        let tr = self.law.theta_r();
        let se = b.se;
        let dse = se * b.dln_se;
        match &self.dry_end {
            None => (tr + (ts - tr) * se, (ts - tr) * dse),
            Some(de) => {
                let hod = de.oven_dry_head();
                let one_m_se = -b.ln_se.exp_m1();
                let (chi, dchi) = if h <= hod {
                    (0.0, 0.0)
                } else {
                    let big_l = (-100.0 * hod).ln();
                    let chi = 1.0 - (-100.0 * h).ln() / big_l;
                    let cap = if tr > 0.0 { ts / tr } else { f64::INFINITY };
                    if chi >= cap {
                        (cap, 0.0)
                    } else {
                        (chi, -1.0 / (h * big_l))
                    }
                };
                // θ = θs Se + χ θr (1 − Se)
                let theta = ts * se + chi * tr * one_m_se;
                let dtheta = (ts - chi * tr) * dse + tr * dchi * one_m_se;
                (theta, dtheta)
            }
        }
    }

    /// Relative conductivity Kr(h) [-] and dKr/dh [m⁻¹].
    ///
    /// With the Fayer–Simmons extension Kr is the base law's (see [`DryEnd::FayerSimmons`]).
    pub fn relative_conductivity(&self, h: f64) -> (f64, f64) {
        if h >= 0.0 || h.is_nan() {
            return (1.0, 0.0);
        }
        let b = self.law.base(h);
        (b.kr, b.kr * b.dln_kr)
    }

    /// The liquid content averaged over a cell of width `w` [m] whose head `h` [m] at its
    /// centre varies hydrostatically within it (from h − w/2 at its top to h + w/2 at
    /// its bottom), and its derivative with respect to `h` [m⁻¹]:
    ///
    /// θ̄(h) = (1/w) ∫ θ(h') dh' over [h − w/2, h + w/2],   dθ̄/dh = (θ(h + w/2) − θ(h − w/2))/w
    ///
    /// (the second form for the exact integral; here the derivative of the quadrature
    /// below, so that Newton's Jacobian matches the value). A cell that a water table
    /// or a capillary fringe crosses then releases its water in proportion to the part
    /// of the cell the fringe has passed, instead of all at once when its centre does:
    /// the storage of a column of such cells under a moving table is smooth in time.
    ///
    /// The saturated part (heads above the saturation head hs) is exact; the rest is
    /// 3 panels of the 8-point Gauss–Legendre rule in y = ln(hs − h' + σ0), σ0 = 1 mm, which puts the
    /// nodes near the saturation head where the curve turns and is smooth in y for the
    /// laws here. Nodes move continuously with `h`, so θ̄ is a smooth function of the
    /// state and the balance stays exact (the stored water is this function).
    pub fn cell_average_theta(&self, h: f64, w: f64) -> (f64, f64) {
        let hs = self.saturation_head();
        let ts = self.theta_s();
        let lo = h - 0.5 * w;
        let hi = h + 0.5 * w;
        if lo >= hs || h.is_nan() {
            return (ts, 0.0);
        }
        // Saturated part [hs, hi], when the cell reaches above hs.
        let (sat_len, dsat) = if hi > hs { (hi - hs, 1.0) } else { (0.0, 0.0) };
        // Unsaturated part, in σ = hs − h' from σb (at the cell's highest head) to σa.
        let sa = hs - lo;
        let (sb, dsb) = if hi < hs { (hs - hi, -1.0) } else { (0.0, 0.0) };
        let (ca, cb) = (sa + AVERAGE_OFFSET, sb + AVERAGE_OFFSET);
        let yb = cb.ln();
        let dyb = dsb / cb;
        // ya − yb and its derivative without cancellation (a dry cell spans a tiny
        // interval in y): ln(ca/cb) = ln(1 + (sa − sb)/cb); sa − sb is w, or sa when the
        // cell reaches the saturation head.
        let span = if hi < hs { w } else { sa };
        let ylen = (span / cb).ln_1p();
        // d(ya − yb)/dh = dya − dyb = −1/ca − dsb/cb = (−cb − dsb·ca)/(ca·cb); for a cell
        // wholly below hs (dsb = −1) that is (ca − cb)/(ca·cb) = w/(ca·cb).
        let dylen = if hi < hs { w / (ca * cb) } else { -1.0 / ca };
        // AVERAGE_PANELS equal panels in y between yb and ya, each with the 8-point rule.
        let np = AVERAGE_PANELS as f64;
        let (half, dhalf) = (0.5 * ylen / np, 0.5 * dylen / np);
        let mut sum = 0.0;
        let mut dsum = 0.0;
        for p in 0..AVERAGE_PANELS {
            // Panel centre yb + (2p + 1)·half and its derivative.
            let k = (2 * p + 1) as f64;
            let mid = yb + k * half;
            let dmid = dyb + k * dhalf;
            for (x, wk) in GAUSS_LEGENDRE_8 {
                for xk in [-x, x] {
                    let e = (mid + half * xk).exp();
                    let (th, dth) = self.theta(hs - (e - AVERAGE_OFFSET));
                    // g(y) = θ(hs − σ(y)) dσ/dy with σ = e^y − σ0; dh'/dy = −e^y.
                    let g = th * e;
                    let dg = e * th - e * e * dth;
                    sum += wk * g;
                    dsum += wk * dg * (dmid + dhalf * xk);
                }
            }
        }
        let q = half * sum;
        let dq = dhalf * sum + half * dsum;
        ((ts * sat_len + q) / w, (ts * dsat + dq) / w)
    }

    /// Head [m] at which θ(h) = `theta`; `None` when `theta` is outside the curve's range.
    ///
    /// θ = θs gives 0. The range is (θr, θs] for the base laws and (0, θs] with the
    /// Fayer–Simmons extension (solved by bisection in ln|h|, to ~1e-13 relative).
    pub fn head_from_theta(&self, theta: f64) -> Option<f64> {
        let ts = self.law.theta_s();
        if !theta.is_finite() || theta > ts {
            return None;
        }
        if theta == ts {
            return Some(0.0);
        }
        let tr = self.law.theta_r();
        let h = match &self.dry_end {
            None => {
                if theta <= tr {
                    return None;
                }
                self.law.head_from_se((theta - tr) / (ts - tr))
            }
            Some(de) => {
                if theta <= 0.0 {
                    return None;
                }
                let hod = de.oven_dry_head();
                let (theta_od, _) = self.theta(hod);
                if theta <= theta_od {
                    // Beyond the oven-dry head θ = θs Se(h).
                    self.law.head_from_se(theta / ts)
                } else {
                    // θ decreases monotonically with y = ln|h| on (−∞, ln|h_od|].
                    let mut hi = (-hod).ln();
                    let mut lo = hi - 10.0;
                    while self.theta(-lo.exp()).0 <= theta && lo > -700.0 {
                        lo -= 10.0;
                    }
                    for _ in 0..200 {
                        let mid = 0.5 * (lo + hi);
                        if mid <= lo || mid >= hi {
                            break;
                        }
                        if self.theta(-mid.exp()).0 > theta {
                            lo = mid;
                        } else {
                            hi = mid;
                        }
                    }
                    -(0.5 * (lo + hi)).exp()
                }
            }
        };
        if h.is_finite() && h <= 0.0 {
            Some(h)
        } else {
            None
        }
    }
}
