//! Physical constants used throughout (SI).

/// Standard acceleration of gravity [m s⁻²] (CGPM 1901, exact).
pub const GRAVITY: f64 = 9.80665;
/// Molar mass of water [kg mol⁻¹] (IAPWS-95).
pub const MOLAR_MASS_WATER: f64 = 0.018_015_268;
/// Molar gas constant [J mol⁻¹ K⁻¹] (CODATA 2018, exact).
pub const GAS_CONSTANT: f64 = 8.314_462_618;
/// Kelvin offset: 0 °C [K].
pub const CELSIUS_ZERO: f64 = 273.15;
/// Reference temperature of the enthalpy form, T0 [K].
pub const T_REF: f64 = 273.15;
/// Reference density of liquid water used in the balance laws [kg m⁻³] (common practice).
pub const WATER_DENSITY: f64 = 1000.0;
/// Specific heat of liquid water [J kg⁻¹ K⁻¹] (IAPWS-95 at 20 °C, 0.1 MPa: 4.18 kJ kg⁻¹ K⁻¹, from memory).
pub const WATER_HEAT_CAPACITY: f64 = 4182.0;
/// Specific heat of water vapour at constant pressure [J kg⁻¹ K⁻¹] (ideal gas near 20 °C, from memory).
pub const VAPOR_HEAT_CAPACITY: f64 = 1870.0;
/// Latent heat of vaporisation at T0 = 273.15 K [J kg⁻¹] (IAPWS-95 steam tables: 2500.9 kJ kg⁻¹ at 0.01 °C).
pub const LATENT_HEAT_T0: f64 = 2.5009e6;
/// Seconds in a Julian year (365.25 days; common practice in the earth sciences).
pub const SECONDS_PER_YEAR: f64 = 365.25 * 86_400.0;
