//! Water and vapour properties against published values.
//!
//! The reference tables and their bounds live in `deepdry::verify::water_tables` (one
//! implementation shared with `deepdry verify`); each source and bound is stated there.
//! The measured maximum error is printed (run with `--nocapture`).

use deepdry::props::water::{
    head_from_relative_humidity, latent_heat, liquid_density, relative_humidity,
    saturated_vapor_density, saturation_pressure, surface_tension, viscosity,
};
use deepdry::verify::{water_tables as wt, Check};

fn assert_check(c: Check) {
    eprintln!(
        "{} vs {}: max error {:.3e} (bound {:.1e})",
        c.quantity, c.source, c.error, c.tolerance
    );
    assert!(
        c.passed(),
        "{} vs {}: error {:.3e} above {:.1e}",
        c.quantity,
        c.source,
        c.error,
        c.tolerance
    );
}

/// IAPWS-IF97 (2007) Table 35, saturation pressure (Eq. 30); 1e-8 relative.
#[test]
fn saturation_pressure_matches_if97_table_35() {
    assert_check(wt::psat_if97());
}

/// Perry's Handbook Table 2-135 and IAPWS-95 Table 8 saturation pressures; 0.05 %.
#[test]
fn saturation_pressure_matches_iapws95_steam_tables() {
    assert_check(wt::psat_steam_tables());
}

/// IAPWS R1-76(2014) Table 1, surface tension; 0.005 mN/m.
#[test]
fn surface_tension_matches_iapws_2014_table_1() {
    assert_check(wt::surface_tension_iapws());
    // Above the critical point the law gives 0.
    assert_eq!(surface_tension(700.0), (0.0, 0.0));
}

/// IAPWS R12-08 Table 4, viscosity μ(T, ρ); 1e-6 µPa s.
#[test]
fn viscosity_matches_iapws_2008_table_4() {
    assert_check(wt::viscosity_iapws_2008());
}

/// IAPWS SR6-08(2011) Table 8: density 1e-6 kg m⁻³; viscosity 0.1 % relative.
#[test]
fn liquid_density_and_viscosity_match_sr6_08_table_8() {
    assert_check(wt::density_sr6_08());
    assert_check(wt::viscosity_sr6_08());
}

/// Latent heat model form against IAPWS-95-based tables, 0–50 °C; 0.3 %.
#[test]
fn latent_heat_model_form_within_0p3_percent_to_50c() {
    assert_check(wt::latent_heat_tables());
}

/// Saturated vapour density (ideal gas) against steam-table 1/vg; 1.5 %.
#[test]
fn saturated_vapor_density_close_to_steam_table() {
    for (tc, vg) in wt::VAPOR_VOLUME_TABLE {
        let (r, _, _) = saturated_vapor_density(tc + 273.15);
        eprintln!("  {tc} °C: rvs ideal/table − 1 = {:+.2e}", r * vg - 1.0);
    }
    assert_check(wt::vapor_density_tables());
}

/// Kelvin equation at three potentials (hand values) and its inverse; 1e-7 relative.
#[test]
fn kelvin_relation_at_three_potentials() {
    assert_check(wt::kelvin());
    // Saturated and out-of-range inputs.
    assert_eq!(relative_humidity(0.0, 293.15), (1.0, 0.0, 0.0));
    assert_eq!(relative_humidity(5.0, 293.15), (1.0, 0.0, 0.0));
    assert_eq!(head_from_relative_humidity(1.2, 293.15), 0.0);
    let h0 = head_from_relative_humidity(0.0, 293.15);
    assert!(h0.is_finite() && h0 < -1e6);
    let (hr, d1, d2) = relative_humidity(-1e9, 293.15);
    assert!(hr == 0.0 && d1.is_finite() && d2.is_finite());
}

/// Out-of-range temperatures never give NaN or infinity (the laws are held at their ends).
#[test]
fn water_laws_finite_outside_their_range() {
    for t in [1.0, 100.0, 200.0, 250.0, 400.0, 700.0, 2000.0] {
        let (p, dp) = saturation_pressure(t);
        let (r, dr, ddr) = saturated_vapor_density(t);
        let (rho, drho) = liquid_density(t);
        let (mu, dmu) = viscosity(t);
        let (s, ds) = surface_tension(t);
        let l = latent_heat(t);
        for v in [p, dp, r, dr, ddr, rho, drho, mu, dmu, s, ds, l] {
            assert!(v.is_finite(), "T = {t}: non-finite value");
        }
        assert!(p > 0.0 && rho > 900.0 && mu > 0.0 && s >= 0.0);
    }
}
