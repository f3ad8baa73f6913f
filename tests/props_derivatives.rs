//! Derivative conformance: every analytic derivative returned by a property law is compared
//! with a central difference of the law's own value, over the law's whole range.
//!
//! Step: relative, δ = 1e-5·|x| (1e-6·|h| for heads). Tolerance:
//! |analytic − FD| ≤ 1e-5·max(|analytic|, |FD|) + floor, where the floor is the round-off
//! bound of the difference quotient, 1e3·ε·max|f(x ± δ)|/(2δ) (it only matters where the
//! derivative is tiny compared with the value). Points within a few steps of a law's known
//! corners are skipped (listed per test). The worst relative error |analytic − FD|/|analytic|
//! of each law is printed, over the points where the difference quotient is not limited by
//! round-off.

use deepdry::props::conductivity::viscosity_factor;
use deepdry::props::retention::{DryEnd, Retention, RetentionLaw};
use deepdry::props::thermal::ThermalConductivity;
use deepdry::props::vapor::{tortuosity, Diffusivity, Enhancement};
use deepdry::props::water::{
    latent_heat, latent_heat_with_derivative, liquid_density, relative_humidity,
    saturated_vapor_density, saturation_pressure, saturation_pressure_d2, surface_tension,
    viscosity,
};

const TOL: f64 = 1e-5;

/// A law with one input returning (value, derivative).
type Law<'a> = dyn Fn(f64) -> (f64, f64) + 'a;

/// Checks d/dx f at x with step `step`; returns the relative error |analytic − FD|/scale at
/// points where the difference quotient is not round-off limited (floor < 0.5·TOL·scale),
/// else 0. Panics with `name` on failure.
fn check(name: &str, f: &Law<'_>, x: f64, step: f64) -> f64 {
    let (_, d) = f(x);
    let (fp, _) = f(x + step);
    let (fm, _) = f(x - step);
    let fd = (fp - fm) / (2.0 * step);
    assert!(d.is_finite(), "{name}: non-finite derivative at {x}");
    let scale = d.abs().max(fd.abs());
    let floor = 1e3 * f64::EPSILON * fp.abs().max(fm.abs()) / (2.0 * step);
    let err = (d - fd).abs();
    assert!(
        err <= TOL * scale + floor,
        "{name}: at x = {x:e}: analytic {d:e}, central difference {fd:e}"
    );
    if scale > 0.0 && floor < 0.5 * TOL * scale {
        err / scale
    } else {
        0.0
    }
}

fn log_heads(from: f64, to: f64, per_decade: usize) -> Vec<f64> {
    // from, to > 0 magnitudes; returns negative heads.
    let decades = to.log10() - from.log10();
    let n = (decades * per_decade as f64).ceil() as usize;
    (0..=n)
        .map(|i| -(10f64.powf(from.log10() + decades * i as f64 / n as f64)))
        .collect()
}

fn temperatures() -> Vec<f64> {
    // 0.5 to 99 °C in 0.5 K steps, in kelvin.
    (1..=198).map(|i| 273.15 + 0.5 * i as f64).collect()
}

fn rel_step(x: f64) -> f64 {
    1e-5 * x.abs().max(1e-300)
}

/// Carsel & Parrish (1988) loam (θr 0.078, θs 0.43, α 3.6 m⁻¹, n 1.56; from memory),
/// a clay (θr 0.068, θs 0.38, α 0.8 m⁻¹, n 1.09) and a sand (0.045, 0.43, 14.5, 2.68).
fn laws() -> Vec<(&'static str, RetentionLaw)> {
    vec![
        (
            "vG loam",
            RetentionLaw::VanGenuchten {
                theta_r: 0.078,
                theta_s: 0.43,
                alpha: 3.6,
                n: 1.56,
                l: 0.5,
                air_entry: 0.0,
            },
        ),
        (
            "vG clay",
            RetentionLaw::VanGenuchten {
                theta_r: 0.068,
                theta_s: 0.38,
                alpha: 0.8,
                n: 1.09,
                l: 0.5,
                air_entry: 0.0,
            },
        ),
        (
            // The air-entry modification of Vogel et al. (2001) with |hs| = 0.02 m.
            "vG loam, air entry",
            RetentionLaw::VanGenuchten {
                theta_r: 0.078,
                theta_s: 0.43,
                alpha: 3.6,
                n: 1.56,
                l: 0.5,
                air_entry: 0.02,
            },
        ),
        (
            "vG sand",
            RetentionLaw::VanGenuchten {
                theta_r: 0.045,
                theta_s: 0.43,
                alpha: 14.5,
                n: 2.68,
                l: 0.5,
                air_entry: 0.0,
            },
        ),
        (
            "BC",
            RetentionLaw::BrooksCorey {
                theta_r: 0.05,
                theta_s: 0.40,
                air_entry: 0.3,
                lambda: 0.6,
                l: 1.0,
            },
        ),
        (
            "exponential",
            RetentionLaw::Exponential {
                theta_r: 0.02,
                theta_s: 0.35,
                alpha: 0.5,
            },
        ),
    ]
}

/// dθ/dh and dKr/dh for every retention law, heads −1e-3 to −1e5 m (20 per decade), with
/// and without the Fayer–Simmons extension (oven-dry head −1e5 m, and a second one at
/// −1e4 m continued to −1e7 m). Skipped: Brooks–Corey within 3 steps of its air-entry
/// corner; points within 3 steps of the oven-dry head (kink of the extension).
#[test]
fn retention_derivatives_match_central_differences() {
    for (name, law) in laws() {
        for dry in [None, Some(-1.0e5), Some(-1.0e4)] {
            let ret = Retention {
                law: law.clone(),
                dry_end: dry.map(|h| DryEnd::FayerSimmons { oven_dry_head: h }),
            };
            let to = if dry == Some(-1.0e4) { 1.0e7 } else { 1.0e5 };
            let (mut e_theta, mut e_kr): (f64, f64) = (0.0, 0.0);
            for h in log_heads(1e-3, to, 20) {
                // 1e-6 relative: exp(αh) with α|h| up to ~700 needs (αδ)²/6 ≪ TOL.
                let step = 0.1 * rel_step(h);
                if let RetentionLaw::BrooksCorey { air_entry, .. } = law {
                    if (h.abs() - air_entry).abs() < 3.0 * step {
                        continue;
                    }
                }
                if let Some(hod) = dry {
                    if (h - hod).abs() < 3.0 * step {
                        continue;
                    }
                }
                let tag = format!("{name} dry={dry:?} θ");
                e_theta = e_theta.max(check(&tag, &|x| ret.theta(x), h, step));
                let tag = format!("{name} dry={dry:?} Kr");
                e_kr = e_kr.max(check(&tag, &|x| ret.relative_conductivity(x), h, step));
            }
            eprintln!(
                "{name:12} dry end {dry:?}: dθ/dh max rel err {e_theta:.1e}, dKr/dh {e_kr:.1e}"
            );
        }
    }
}

/// Values and derivatives stay finite, Kr ≥ 0 and θ within [0, θs] for |h| up to 1e7 m and
/// beyond; Kr is non-increasing with |h|; saturated for h ≥ 0.
#[test]
fn retention_robust_to_extreme_heads() {
    for (name, law) in laws() {
        for dry in [None, Some(-1.0e5)] {
            let ret = Retention {
                law: law.clone(),
                dry_end: dry.map(|h| DryEnd::FayerSimmons { oven_dry_head: h }),
            };
            let mut last_kr = 1.0;
            for h in log_heads(1e-300, 1e300, 2) {
                let (th, dth) = ret.theta(h);
                let (kr, dkr) = ret.relative_conductivity(h);
                assert!(th.is_finite() && dth.is_finite(), "{name}: θ at {h}");
                assert!(kr.is_finite() && dkr.is_finite(), "{name}: Kr at {h}");
                assert!(
                    (0.0..=1.0).contains(&kr) && dkr >= 0.0,
                    "{name}: Kr {kr} at {h}"
                );
                assert!(
                    th >= 0.0 && th <= ret.theta_s() + 1e-15,
                    "{name}: θ {th} at {h}"
                );
                assert!(kr <= last_kr * (1.0 + 1e-12), "{name}: Kr increases at {h}");
                last_kr = kr;
            }
            assert_eq!(ret.theta(0.0), (ret.theta_s(), 0.0));
            assert_eq!(ret.theta(3.0), (ret.theta_s(), 0.0));
            assert_eq!(ret.relative_conductivity(0.0), (1.0, 0.0));
            assert_eq!(ret.relative_conductivity(2.0), (1.0, 0.0));
        }
    }
}

/// Water laws, 0.5–99 °C: dpsat/dT, d²psat/dT², drvs/dT, d²rvs/dT², dL/dT, dρ/dT, dμ/dT,
/// dσ/dT, and the viscosity factor's derivative.
#[test]
fn water_derivatives_match_central_differences() {
    let mut worst = [0.0_f64; 9];
    for t in temperatures() {
        let s = rel_step(t);
        worst[0] = worst[0].max(check("psat", &saturation_pressure, t, s));
        worst[1] = worst[1].max(check(
            "d2psat",
            &|x| {
                let (_, d, dd) = saturation_pressure_d2(x);
                (d, dd)
            },
            t,
            s,
        ));
        worst[2] = worst[2].max(check(
            "rvs",
            &|x| {
                let (r, d, _) = saturated_vapor_density(x);
                (r, d)
            },
            t,
            s,
        ));
        worst[3] = worst[3].max(check(
            "d2rvs",
            &|x| {
                let (_, d, dd) = saturated_vapor_density(x);
                (d, dd)
            },
            t,
            s,
        ));
        worst[4] = worst[4].max(check("latent heat", &latent_heat_with_derivative, t, s));
        worst[5] = worst[5].max(check("density", &liquid_density, t, s));
        worst[6] = worst[6].max(check("viscosity", &viscosity, t, s));
        worst[7] = worst[7].max(check("surface tension", &surface_tension, t, s));
        worst[8] = worst[8].max(check(
            "viscosity factor",
            &|x| viscosity_factor(x, 293.15),
            t,
            s,
        ));
        // The derivative-free latent_heat agrees with the pair.
        assert_eq!(latent_heat(t), latent_heat_with_derivative(t).0);
    }
    let names = [
        "dpsat/dT",
        "d2psat/dT2",
        "drvs/dT",
        "d2rvs/dT2",
        "dL/dT",
        "drho/dT",
        "dmu/dT",
        "dsigma/dT",
        "d(mu_ref/mu)/dT",
    ];
    for (n, w) in names.iter().zip(worst) {
        eprintln!("{n:16} max rel err {w:.1e}");
    }
}

/// Kelvin equation: dhr/dh on heads −1e-3 to −1e5 m at 5, 20 and 60 °C; dhr/dT at those
/// heads over 0.5–99 °C.
#[test]
fn kelvin_derivatives_match_central_differences() {
    let (mut eh, mut et): (f64, f64) = (0.0, 0.0);
    for h in log_heads(1e-3, 1e5, 10) {
        for t in [278.15, 293.15, 333.15] {
            eh = eh.max(check(
                "dhr/dh",
                &|x| {
                    let (r, d, _) = relative_humidity(x, t);
                    (r, d)
                },
                h,
                rel_step(h),
            ));
        }
        for t in temperatures().into_iter().step_by(7) {
            et = et.max(check(
                "dhr/dT",
                &|x| {
                    let (r, _, d) = relative_humidity(h, x);
                    (r, d)
                },
                t,
                rel_step(t),
            ));
        }
    }
    eprintln!("dhr/dh max rel err {eh:.1e}, dhr/dT {et:.1e}");
}

/// Thermal conductivity (Campbell, Johansen coarse and fine), Cass enhancement and
/// Millington–Quirk tortuosity on θ from 0 to θs (φ = 0.4) in 400 steps; at θ = 0 a
/// one-sided difference. Skipped for Johansen: points within 3 steps of the blend joints
/// (z = ±δ, C¹ only) and of Sr = 1.
#[test]
fn soil_heat_and_vapour_derivatives_match_central_differences() {
    let phi = 0.4;
    let campbell = ThermalConductivity::campbell_1985(1.4, 0.1);
    let coarse = ThermalConductivity::Johansen {
        dry: 0.25,
        saturated: 2.2,
        fine: false,
    };
    let fine = ThermalConductivity::Johansen {
        dry: 0.25,
        saturated: 1.6,
        fine: true,
    };
    let cass = Enhancement::Cass { clay_fraction: 0.1 };
    let constant = ThermalConductivity::Constant { value: 1.3 };
    let mut worst = [0.0_f64; 5];
    for i in 1..400 {
        let th = phi * f64::from(i) / 400.0;
        let s = 1e-5 * th;
        worst[0] = worst[0].max(check("Campbell", &|x| campbell.value(x, phi), th, s));
        for (k, (law, a)) in [(&coarse, 0.7), (&fine, 1.0)].into_iter().enumerate() {
            let z = a * (th / phi).log10() + 1.0;
            let dz = a / (th / phi * std::f64::consts::LN_10) * s / phi;
            let near = |c: f64| (z - c).abs() < 3.0 * dz;
            if near(0.05) || near(-0.05) || (th - phi).abs() < 3.0 * s {
                continue;
            }
            worst[1 + k] = worst[1 + k].max(check("Johansen", &|x| law.value(x, phi), th, s));
        }
        worst[3] = worst[3].max(check("Cass", &|x| cass.value(x, phi), th, s));
        worst[4] = worst[4].max(check("tortuosity", &|x| tortuosity(x, phi), th, s));
        assert_eq!(constant.value(th, phi), (1.3, 0.0));
    }
    // θ = 0: one-sided difference, and finiteness.
    let h = 1e-7;
    let at_zero: [(&str, Box<Law<'_>>); 4] = [
        ("Campbell", Box::new(|x| campbell.value(x, phi))),
        ("Cass", Box::new(|x| cass.value(x, phi))),
        ("tortuosity", Box::new(|x| tortuosity(x, phi))),
        ("Johansen", Box::new(|x| coarse.value(x, phi))),
    ];
    for (name, f) in &at_zero {
        let (v0, d0) = f(0.0);
        let (v1, _) = f(h);
        let fd = (v1 - v0) / h;
        assert!(d0.is_finite() && v0.is_finite(), "{name} at θ = 0");
        assert!(
            (d0 - fd).abs() <= 1e-4 * d0.abs().max(fd.abs()) + 1e-6,
            "{name}: {d0} vs {fd} at θ = 0"
        );
    }
    let names = [
        "Campbell",
        "Johansen coarse",
        "Johansen fine",
        "Cass eta",
        "MQ tortuosity",
    ];
    for (n, w) in names.iter().zip(worst) {
        eprintln!("{n:16} max rel err {w:.1e}");
    }
}

/// dD/dT of every diffusivity form, 0.5–99 °C, at 101 325 Pa and 60 kPa.
#[test]
fn diffusivity_derivative_matches_central_difference() {
    let mut worst: f64 = 0.0;
    for d in [
        Diffusivity::monteith_unsworth_2013(),
        Diffusivity::kimball_1976(),
        Diffusivity::massman_1998(),
        Diffusivity::benchmark_1_88(),
    ] {
        for p in [101_325.0, 60_000.0] {
            for t in temperatures() {
                worst = worst.max(check("dD/dT", &|x| d.value(x, p), t, rel_step(t)));
            }
        }
    }
    eprintln!("dD/dT max rel err {worst:.1e}");
}
