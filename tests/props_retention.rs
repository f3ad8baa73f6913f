//! Retention and relative-conductivity laws at stated heads, against values computed by
//! hand from each law's closed form (the closed form is the source; it is written beside
//! each case). Required agreement: 1e-9 relative (the hand values carry 11 digits).

use deepdry::props::retention::{DryEnd, Retention, RetentionLaw, OVEN_DRY_HEAD};

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

/// Carsel & Parrish (1988), Table of mean van Genuchten parameters, textural class loam:
/// θr = 0.078, θs = 0.43, α = 0.036 cm⁻¹ = 3.6 m⁻¹, n = 1.56 (values from memory), with
/// Mualem's l = 0.5.
fn loam() -> RetentionLaw {
    RetentionLaw::VanGenuchten {
        theta_r: 0.078,
        theta_s: 0.43,
        alpha: 3.6,
        n: 1.56,
        l: 0.5,
        air_entry: 0.0,
    }
}

/// Closed form (van Genuchten 1980; Mualem 1976): m = 1 − 1/n = 0.358974359,
/// x = α|h|, Se = (1 + xⁿ)^(−m), θ = θr + (θs − θr) Se, Kr = √Se [1 − (1 − Se^(1/m))^m]².
/// Worked at h = −1 m: x = 3.6, xⁿ = e^(1.56·ln 3.6) = 7.37615, Se = 8.37615^(−0.358974)
/// = 0.466283, θ = 0.078 + 0.352·0.466283 = 0.242132; Se^(1/m) = 1/8.37615 = 0.119386,
/// (1 − 0.119386)^m = 0.955387, Kr = √0.466283 · (1 − 0.955387)² = 1.35908e-3.
/// The other heads the same way, evaluated in 40-digit arithmetic (Python mpmath) because
/// 1 − (1 − Se^(1/m))^m cancels badly in double precision at large |h|.
#[test]
fn van_genuchten_mualem_loam_at_stated_heads() {
    let ret = Retention {
        law: loam(),
        dry_end: None,
    };
    let cases = [
        // h [m], θ, Kr
        (-0.1, 4.073_889_379_1e-1, 2.154_412_354_3e-1),
        (-1.0, 2.421_317_847_2e-1, 1.359_075_334_3e-3),
        (-10.0, 1.252_533_086_2e-1, 6.549_493_928_8e-7),
        (-100.0, 9.103_158_469_2e-2, 2.621_981_631_4e-10),
        (-1.0e4, 7.898_858_325_7e-2, 4.156_217_843_79e-17),
    ];
    for (h, theta, kr) in cases {
        let (t, _) = ret.theta(h);
        let (k, _) = ret.relative_conductivity(h);
        assert!(rel(t, theta) < 1e-9, "θ({h}) = {t} vs {theta}");
        assert!(rel(k, kr) < 1e-9, "Kr({h}) = {k} vs {kr}");
        // The inverse returns the head.
        let back = ret.head_from_theta(t).expect("inside the range");
        assert!(rel(back, h) < 1e-8, "head_from_theta: {back} vs {h}");
    }
    assert_eq!(ret.head_from_theta(0.43), Some(0.0));
    assert_eq!(ret.head_from_theta(0.44), None);
    assert_eq!(ret.head_from_theta(0.078), None);
    assert_eq!(ret.head_from_theta(-0.1), None);
}

/// Exponential law, θ = θr + (θs − θr) e^(αh), Kr = e^(αh), with θr = 0.02, θs = 0.35,
/// α = 0.5 m⁻¹: at h = −5 m, e^(−2.5) = 0.082084999, θ = 0.02 + 0.33·0.082085 = 0.047088.
#[test]
fn exponential_law_at_stated_heads() {
    let ret = Retention {
        law: RetentionLaw::Exponential {
            theta_r: 0.02,
            theta_s: 0.35,
            alpha: 0.5,
        },
        dry_end: None,
    };
    let cases = [
        (-0.5, 2.770_042_584_1e-1, 7.788_007_830_7e-1),
        (-5.0, 4.708_804_954_6e-2, 8.208_499_862_4e-2),
        (-50.0, 2.000_000_000_5e-2, 1.388_794_386_5e-11),
    ];
    for (h, theta, kr) in cases {
        let (t, dt) = ret.theta(h);
        let (k, dk) = ret.relative_conductivity(h);
        assert!(rel(t, theta) < 1e-9, "θ({h}) = {t} vs {theta}");
        assert!(rel(k, kr) < 1e-9, "Kr({h}) = {k} vs {kr}");
        // dθ/dh = α (θs − θr) e^(αh), dKr/dh = α Kr
        assert!(rel(dt, 0.5 * 0.33 * kr) < 1e-9);
        assert!(rel(dk, 0.5 * kr) < 1e-9);
    }
    let back = ret.head_from_theta(4.708_804_954_6e-2).unwrap();
    assert!(rel(back, -5.0) < 1e-9, "{back}");
}

/// Brooks & Corey (1964) with Mualem: Se = (|h|/hb)^(−λ) for |h| > hb, Kr = Se^(l + 2 + 2/λ);
/// θr = 0.05, θs = 0.40, hb = 0.3 m, λ = 0.6, l = 1: at h = −3 m, Se = 10^(−0.6) = 0.251189,
/// θ = 0.05 + 0.35·0.251189 = 0.137916, Kr = 10^(−0.6·(3 + 3.3333)) = 10^(−3.8) = 1.584893e-4.
#[test]
fn brooks_corey_at_stated_heads() {
    let ret = Retention {
        law: RetentionLaw::BrooksCorey {
            theta_r: 0.05,
            theta_s: 0.40,
            air_entry: 0.3,
            lambda: 0.6,
            l: 1.0,
        },
        dry_end: None,
    };
    let cases = [
        (-0.2, 0.40, 1.0),
        (-3.0, 1.379_160_251_0e-1, 1.584_893_192_5e-4),
        (-300.0, 5.554_712_617_4e-2, 3.981_071_705_5e-12),
    ];
    for (h, theta, kr) in cases {
        let (t, _) = ret.theta(h);
        let (k, _) = ret.relative_conductivity(h);
        assert!(rel(t, theta) < 1e-9, "θ({h}) = {t} vs {theta}");
        assert!(rel(k, kr) < 1e-9, "Kr({h}) = {k} vs {kr}");
    }
    let back = ret.head_from_theta(1.379_160_251_0e-1).unwrap();
    assert!(rel(back, -3.0) < 1e-9, "{back}");
}

/// Fayer & Simmons (1995) extension of the loam, oven-dry head −1e5 m:
/// χ = 1 − ln(100|h|)/ln(100·1e5) = 1 − ln(100|h|)/ln(1e7), θ = χθr + (θs − χθr) Se.
/// At h = −100 m: χ = 1 − 4/7 = 0.428571, Se = 0.0370215 (as above),
/// θ = 0.428571·0.078 + (0.43 − 0.033429)·0.0370215 = 0.0481103. At and beyond −1e5 m, χ = 0 and θ = θs Se.
/// Kr is the base law's (documented choice).
#[test]
fn fayer_simmons_extension_at_stated_heads() {
    let base = Retention {
        law: loam(),
        dry_end: None,
    };
    let ret = Retention {
        law: loam(),
        dry_end: Some(DryEnd::FayerSimmons {
            oven_dry_head: OVEN_DRY_HEAD,
        }),
    };
    let cases = [
        (-1.0, 2.302_375_308_3e-1),
        (-100.0, 4.811_025_937_7e-2),
        (-1.0e4, 1.231_920_702_5e-2),
        (-1.0e5, 3.326_128_739_6e-4),
        (-1.0e6, 9.160_919_252_6e-5),
    ];
    for (h, theta) in cases {
        let (t, _) = ret.theta(h);
        assert!(rel(t, theta) < 1e-9, "θ({h}) = {t} vs {theta}");
        assert_eq!(ret.relative_conductivity(h), base.relative_conductivity(h));
        let back = ret.head_from_theta(t).expect("inside the range");
        assert!(rel(back, h) < 1e-9, "head_from_theta: {back} vs {h}");
    }
    // Below θr the extended curve is still invertible; θ ≤ 0 is not.
    assert!(ret.head_from_theta(0.05).is_some());
    assert_eq!(ret.head_from_theta(0.0), None);
    assert_eq!(ret.oven_dry_head(), -1.0e5);
    assert_eq!(base.oven_dry_head(), OVEN_DRY_HEAD);
    // Near saturation the extension stays below θs and joins the saturated value.
    for h in [-1e-3, -1e-6, -1e-12, -1e-100] {
        let (t, _) = ret.theta(h);
        assert!(t <= 0.43 && t > 0.42, "θ({h}) = {t}");
    }
}

/// Kr stays finite and ≥ 0 far beyond oven dryness: at h = −1e7 m the loam's
/// Kr ≈ Se^0.5 (m x⁻ⁿ)², ln Kr = −0.5·m·n·ln x + 2 ln m − 2n ln x with x = 3.6e7:
/// ln x = 17.3990, ln Kr = −0.5·0.56·17.399 + 2·(−1.02450) − 3.12·17.399 = −61.2062,
/// Kr = 2.6e-27 (an order-of-magnitude check: 1e-28 < Kr < 1e-26).
#[test]
fn kr_finite_at_extreme_heads() {
    let ret = Retention {
        law: loam(),
        dry_end: None,
    };
    let (kr, dkr) = ret.relative_conductivity(-1e7);
    assert!(kr > 1e-28 && kr < 1e-26, "{kr}");
    assert!(dkr.is_finite() && dkr > 0.0);
}

/// The air-entry modification (Vogel et al. 2001, as recalled: Se* = Se(h)/Se(hs) and
/// Kr = Se*^l [(1 − F(Se))/(1 − F(Se(hs)))]², F(Se) = (1 − Se^(1/m))^m): saturated at and
/// above hs, continuous there, the Mualem slope finite at saturation (the plain curve's
/// grows without bound as h → 0 for n < 2), the far-dry end unchanged in shape (Se* is Se
/// scaled by a constant), and the inverse θ → h consistent.
#[test]
fn air_entry_modification_saturates_at_hs_with_a_finite_slope() {
    use deepdry::props::retention::{Retention, RetentionLaw};
    let law = |air_entry: f64| Retention {
        law: RetentionLaw::VanGenuchten {
            theta_r: 0.065,
            theta_s: 0.41,
            alpha: 7.5,
            n: 1.89,
            l: 0.5,
            air_entry,
        },
        dry_end: None,
    };
    let (plain, modified) = (law(0.0), law(0.02));
    // Saturated from hs up.
    for h in [-0.02, -0.01, -1e-6] {
        assert_eq!(modified.theta(h).0, 0.41);
        assert_eq!(modified.relative_conductivity(h), (1.0, 0.0));
    }
    // Continuous at hs from below.
    let below = modified.theta(-0.020_000_001).0;
    assert!((below - 0.41).abs() < 1e-8, "{below}");
    let kr = modified.relative_conductivity(-0.020_000_001).0;
    assert!((kr - 1.0).abs() < 1e-4, "{kr}");
    // Slope of Kr just below saturation: finite with the air entry, unbounded without.
    let slope_mod = modified.relative_conductivity(-0.0201).1;
    assert!(slope_mod.is_finite() && slope_mod < 1e3, "{slope_mod}");
    let slope_plain_near = plain.relative_conductivity(-1e-8).1;
    let slope_plain_far = plain.relative_conductivity(-1e-4).1;
    assert!(
        slope_plain_near > 2.0 * slope_plain_far,
        "plain curve: dKr/dh {slope_plain_near} at -1e-8 m vs {slope_plain_far} at -1e-4 m"
    );
    // Se* = Se / Se(hs): the ratio of effective saturations is the same constant at every
    // head below hs.
    let ratio = |h: f64| modified.effective_saturation(h).0 / plain.effective_saturation(h).0;
    let (r1, r2) = (ratio(-0.5), ratio(-50.0));
    assert!((r1 / r2 - 1.0).abs() < 1e-12, "{r1} vs {r2}");
    assert!(r1 > 1.0);
    // Inverse.
    for h in [-0.05, -1.0, -30.0] {
        let th = modified.theta(h).0;
        let back = modified.head_from_theta(th).unwrap();
        assert!((back / h - 1.0).abs() < 1e-9, "{h} -> {th} -> {back}");
    }
}
