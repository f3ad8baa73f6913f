//! Water and vapour properties against published tables: one implementation shared by
//! `tests/props_water.rs` and the `water-properties` verification case. Each table names
//! its source beside the numbers; each check returns the largest error and its bound.

use super::Check;
use crate::props::water::{
    head_from_relative_humidity, latent_heat, liquid_density, relative_humidity,
    saturated_vapor_density, saturation_pressure, surface_tension, viscosity, viscosity_at_density,
};

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

/// IAPWS-IF97 (Revised Release 2007), Table 35: verification values of the
/// saturation-pressure equation (Eq. 30): T [K], psat [MPa].
pub const IF97_TABLE_35: [(f64, f64); 3] = [
    (300.0, 0.353_658_941e-2),
    (500.0, 0.263_889_776e1),
    (600.0, 0.123_443_146e2),
];

/// Perry's Chemical Engineers' Handbook, 9th ed., Table 2-135 "Thermodynamic Properties of
/// Water" (IAPWS-95 based), saturated pressure column [MPa] as printed (6 decimals), plus
/// the IAPWS-95 (Revised Release 2009/2018) Table 8 saturation check value at 275 K.
pub const STEAM_TABLE_PSAT: [(f64, f64); 9] = [
    (300.0, 0.003_537),
    (310.0, 0.006_231),
    (320.0, 0.010_546),
    (330.0, 0.017_213),
    (340.0, 0.027_188),
    (350.0, 0.041_682),
    (360.0, 0.062_194),
    (370.0, 0.090_535),
    (275.0, 0.000_698_451_167), // IAPWS-95 release, Table 8
];

/// IAPWS R1-76(2014), Revised Release on Surface Tension of Ordinary Water Substance,
/// Table 1 (selected values): T [K], σ [mN/m] (2 decimals).
pub const SURFACE_TENSION_TABLE_1: [(f64, f64); 20] = [
    (273.16, 75.65),
    (283.15, 74.22),
    (293.15, 72.74),
    (303.15, 71.19),
    (313.15, 69.60),
    (323.15, 67.94),
    (333.15, 66.24),
    (343.15, 64.48),
    (353.15, 62.67),
    (363.15, 60.82),
    (373.15, 58.91),
    (393.15, 54.97),
    (413.15, 50.86),
    (433.15, 46.59),
    (453.15, 42.19),
    (473.15, 37.67),
    (523.15, 26.04),
    (573.15, 14.36),
    (623.15, 3.67),
    (643.15, 0.39),
];

/// IAPWS R12-08, Release on the IAPWS Formulation 2008 for the Viscosity of Ordinary Water
/// Substance, Table 4 (sample points for program verification, μ2 = 1):
/// T [K], ρ [kg m⁻³], μ [µPa s] (6 decimals).
pub const VISCOSITY_TABLE_4: [(f64, f64, f64); 11] = [
    (298.15, 998.0, 889.735_100),
    (298.15, 1200.0, 1_437.649_467),
    (373.15, 1000.0, 307.883_622),
    (433.15, 1.0, 14.538_324),
    (433.15, 1000.0, 217.685_358),
    (873.15, 1.0, 32.619_287),
    (873.15, 100.0, 35.802_262),
    (873.15, 600.0, 77.430_195),
    (1173.15, 1.0, 44.217_245),
    (1173.15, 100.0, 47.640_433),
    (1173.15, 400.0, 64.154_608),
];

/// IAPWS SR6-08(2011), Revised Supplementary Release on Properties of Liquid Water at
/// 0.1 MPa, Table 8 (check values): T [K], ρ [kg m⁻³] (6 decimals), μ [µPa s] from the
/// release's own correlation (its Eq. 7).
pub const SR6_08_TABLE_8: [(f64, f64, f64); 3] = [
    (260.0, 997.068_360, 3_058.360_75),
    (298.15, 997.047_013, 889.996_774),
    (375.0, 957.009_710, 276.207_245),
];

/// Latent heat h'' − h' [kJ/kg] against temperature [°C]: (a) IAPWS-95 release, Table 8,
/// 275 K: 2504.28995 − 7.75972202 kJ/kg; (b) saturated-water temperature table (hfg
/// column, 1 decimal), Ohio University thermodynamics property tables, "Saturation
/// Properties for Steam – Temperature Table (0.01 °C – 150 °C)", whose values agree with the
/// NIST (IAPWS-95) tabulation (from memory).
pub const LATENT_HEAT_TABLE: [(f64, f64); 12] = [
    (0.01, 2500.9),
    (5.0, 2489.1),
    (10.0, 2477.2),
    (15.0, 2465.3),
    (20.0, 2453.5),
    (25.0, 2441.7),
    (30.0, 2429.8),
    (35.0, 2417.9),
    (40.0, 2406.0),
    (45.0, 2394.0),
    (50.0, 2382.0),
    (275.0 - 273.15, 2_504.289_95 - 7.759_722_02),
];

/// Specific volume of saturated vapour vg [m³/kg] (5 significant digits) against
/// temperature [°C], from the same Ohio University steam table.
pub const VAPOR_VOLUME_TABLE: [(f64, f64); 10] = [
    (0.01, 205.99),
    (10.0, 106.30),
    (20.0, 57.757),
    (30.0, 32.878),
    (40.0, 19.515),
    (50.0, 12.027),
    (60.0, 7.6672),
    (70.0, 5.0395),
    (80.0, 3.4052),
    (90.0, 2.3591),
];

/// Kelvin equation hr = exp(g Mw h/(R T)) with g = 9.80665, Mw = 0.018015268,
/// R = 8.314462618 (g Mw/R = 0.0212484482 K/m), computed by hand to 8 digits:
/// h [m], T [K], hr.
pub const KELVIN_VALUES: [(f64, f64, f64); 3] = [
    (-1.0e4, 293.15, 0.484_405_97),
    (-1.0e3, 293.15, 0.930_081_38),
    (-1.0e5, 303.15, 9.035_137_3e-4),
];

/// Saturation pressure against IF97 Table 35; bound 1e-8 relative (the release's
/// verification values carry 9 digits).
pub fn psat_if97() -> Check {
    let e = IF97_TABLE_35
        .iter()
        .map(|&(t, p)| rel(saturation_pressure(t).0, p * 1e6))
        .fold(0.0, f64::max);
    Check::new(
        "saturation pressure, relative",
        "IAPWS-IF97 (2007) Table 35",
        e,
        1e-8,
    )
}

/// Saturation pressure against IAPWS-95 steam tables; bound 5e-4 relative (IF97 region 4
/// reproduces IAPWS-95 far better; the bound covers the table's rounding, at most
/// 1.4e-4 at 300 K).
pub fn psat_steam_tables() -> Check {
    let e = STEAM_TABLE_PSAT
        .iter()
        .map(|&(t, p)| rel(saturation_pressure(t).0, p * 1e6))
        .fold(0.0, f64::max);
    Check::new(
        "saturation pressure, relative",
        "Perry's Handbook 9th ed. Table 2-135; IAPWS-95 Table 8",
        e,
        5e-4,
    )
}

/// Surface tension against IAPWS R1-76(2014) Table 1; bound half a unit of the last
/// printed digit (0.005 mN/m) plus 1e-9 for floating point.
pub fn surface_tension_iapws() -> Check {
    let e = SURFACE_TENSION_TABLE_1
        .iter()
        .map(|&(t, s)| (surface_tension(t).0 * 1e3 - s).abs())
        .fold(0.0, f64::max);
    Check::new(
        "surface tension [mN/m]",
        "IAPWS R1-76(2014) Table 1",
        e,
        0.005 + 1e-9,
    )
}

/// Viscosity against IAPWS R12-08 Table 4; bound 1e-6 µPa s (the printed resolution).
pub fn viscosity_iapws_2008() -> Check {
    let e = VISCOSITY_TABLE_4
        .iter()
        .map(|&(t, rho, mu)| (viscosity_at_density(t, rho).0 * 1e6 - mu).abs())
        .fold(0.0, f64::max);
    Check::new("viscosity μ(T, ρ) [µPa s]", "IAPWS R12-08 Table 4", e, 1e-6)
}

/// Liquid density at 0.1 MPa against SR6-08 Table 8; bound 1e-6 kg m⁻³ (printed resolution).
pub fn density_sr6_08() -> Check {
    let e = SR6_08_TABLE_8
        .iter()
        .map(|&(t, rho, _)| (liquid_density(t).0 - rho).abs())
        .fold(0.0, f64::max);
    Check::new(
        "liquid density at 0.1 MPa [kg m-3]",
        "IAPWS SR6-08(2011) Table 8",
        e,
        1e-6,
    )
}

/// Viscosity at 0.1 MPa (IAPWS 2008 at the SR6-08 density) against SR6-08's own
/// correlation (Table 8); bound 1e-3 relative (the 2008 formulation's stated uncertainty
/// for liquid water at 0.1 MPa is about 1 %).
pub fn viscosity_sr6_08() -> Check {
    let e = SR6_08_TABLE_8
        .iter()
        .map(|&(t, _, mu)| rel(viscosity(t).0 * 1e6, mu))
        .fold(0.0, f64::max);
    Check::new(
        "viscosity at 0.1 MPa, relative",
        "IAPWS SR6-08(2011) Table 8",
        e,
        1e-3,
    )
}

/// The model form L0 + (cv − cw)(T − T0) against IAPWS-95-based values, 0–50 °C; bound
/// 3e-3 relative (the linear form ignores the curvature of L(T) and the temperature
/// dependence of cp of both phases).
pub fn latent_heat_tables() -> Check {
    let e = LATENT_HEAT_TABLE
        .iter()
        .map(|&(tc, l)| rel(latent_heat(tc + 273.15), l * 1e3))
        .fold(0.0, f64::max);
    Check::new(
        "latent heat 0-50 °C, relative",
        "IAPWS-95 Table 8; steam table (Ohio Univ.)",
        e,
        3e-3,
    )
}

/// Saturated vapour density (ideal gas at psat) against 1/vg of the steam table; bound
/// 1.5e-2 relative (the ideal-gas law neglects the second virial coefficient: about 0.1 %
/// at 10 °C, 1.2 % at 90 °C).
pub fn vapor_density_tables() -> Check {
    let e = VAPOR_VOLUME_TABLE
        .iter()
        .map(|&(tc, vg)| rel(saturated_vapor_density(tc + 273.15).0, 1.0 / vg))
        .fold(0.0, f64::max);
    Check::new(
        "saturated vapour density, relative",
        "steam table vg (Ohio Univ.), 0-90 °C",
        e,
        1.5e-2,
    )
}

/// Kelvin relation at three potentials, and its inverse; bound 1e-7 relative (the hand
/// values carry 8 digits).
pub fn kelvin() -> Check {
    let mut e: f64 = 0.0;
    for (h, t, hr_ref) in KELVIN_VALUES {
        let (hr, _, _) = relative_humidity(h, t);
        e = e.max(rel(hr, hr_ref));
        e = e.max(rel(head_from_relative_humidity(hr, t), h));
    }
    Check::new(
        "Kelvin hr(h, T) and inverse, relative",
        "Kelvin equation, hand values (Thomson 1871)",
        e,
        1e-7,
    )
}

/// Every property check.
pub fn all() -> Vec<Check> {
    vec![
        psat_if97(),
        psat_steam_tables(),
        surface_tension_iapws(),
        viscosity_iapws_2008(),
        density_sr6_08(),
        viscosity_sr6_08(),
        latent_heat_tables(),
        vapor_density_tables(),
        kelvin(),
    ]
}
